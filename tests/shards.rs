//! Shards as separate processes (the built binary), merged, equal the single run byte for
//! byte: `sweep`, `run` and `hunt`, several shard counts including more shards than work
//! units; and `merge` refuses missing, duplicate and mismatched shards with exit status 2.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().expect("binary runs")
}

fn ok(out: &Output) {
    assert!(out.status.success(), "status {:?}\nstderr: {}", out.status, String::from_utf8_lossy(&out.stderr));
}

fn attack_file() -> String {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("attacks/entangling-probe.toml").display().to_string()
}

/// Every file under `dir`, by relative path.
fn files(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(p.strip_prefix(dir).unwrap().to_path_buf(), std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

/// The manifest without the keys that differ between any two runs.
fn stable_manifest(bytes: &[u8]) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_slice(bytes).unwrap();
    for k in ["command_line", "started_unix_s", "elapsed_s", "threads"] {
        v.as_object_mut().unwrap().remove(k).expect("manifest key");
    }
    v
}

fn shard_all(args: &[&str], n: usize, dir: &Path, shard_dir: &str) {
    for k in 1..=n {
        let spec = format!("{k}/{n}");
        let mut a: Vec<&str> = args.to_vec();
        a.extend(["--shard", &spec, "--shard-dir", shard_dir]);
        ok(&qkd(&a, dir));
    }
}

#[test]
fn sweep_shards_merge_to_the_single_run_and_threads_do_not_matter() {
    let tmp = tempfile::tempdir().unwrap();
    let af = attack_file();
    let base = ["sweep", "--attack-file", &af, "--steps", "7"];
    let one = qkd(&[&base[..], &["--threads", "1"]].concat(), tmp.path());
    ok(&one);
    let two = qkd(&[&base[..], &["--threads", "2"]].concat(), tmp.path());
    ok(&two);
    assert_eq!(one.stdout, two.stdout, "1 and 2 threads differ");
    for n in [1usize, 2, 3, 10] {
        let sd = format!("sweep-{n}");
        shard_all(&base, n, tmp.path(), &sd);
        let merged = qkd(&["merge", &sd], tmp.path());
        ok(&merged);
        assert_eq!(merged.stdout, one.stdout, "N = {n}");
    }
}

#[test]
fn run_shards_merge_to_the_single_run_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let base = ["run", "--demo", "single-photon", "-q"];
    ok(&qkd(&[&base[..], &["--results-dir", "full", "--threads", "2"]].concat(), tmp.path()));
    let full = files(&tmp.path().join("full"));
    assert!(full.keys().any(|k| k.ends_with("summary.md")) && full.keys().any(|k| k.extension().is_some_and(|e| e == "svg")));
    // The demo has a few dozen points: 70 shards leave some empty.
    for n in [3usize, 70] {
        let sd = format!("run-{n}");
        shard_all(&base, n, tmp.path(), &sd);
        let out = format!("merged-{n}");
        ok(&qkd(&["merge", &sd, "-o", &out, "-q"], tmp.path()));
        let merged = files(&tmp.path().join(&out));
        assert_eq!(merged.keys().collect::<Vec<_>>(), full.keys().collect::<Vec<_>>(), "N = {n}");
        for (k, v) in &full {
            if k.ends_with("manifest.json") {
                assert_eq!(stable_manifest(v), stable_manifest(&merged[k]), "N = {n}");
            } else if k.ends_with("report.html") {
                // The page's run lines (command line, start, duration, threads) differ
                // between any two runs, as in the manifest; everything else is the same.
                let stable = |b: &[u8]| -> Vec<String> {
                    String::from_utf8_lossy(b).lines().filter(|l| !l.contains("class=\"run")).map(str::to_string).collect()
                };
                assert_eq!(stable(v), stable(&merged[k]), "N = {n}: report.html differs");
            } else {
                assert!(v == &merged[k], "N = {n}: {} differs", k.display());
            }
        }
    }
}

#[test]
fn hunt_shards_merge_to_the_single_run_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let base = ["hunt", "--objective", "holevo", "--q", "0.05,0.1", "--starts", "3", "--eve-dim", "2", "--iters", "20"];
    ok(&qkd(&[&base[..], &["--out-dir", "full"]].concat(), tmp.path()));
    let full = files(&tmp.path().join("full"));
    for n in [2usize, 7] {
        let sd = format!("hunt-{n}");
        shard_all(&base, n, tmp.path(), &sd);
        let out = format!("merged-{n}");
        // `--quiet` is the merge's own: no status line.
        let merged = qkd(&["merge", &sd, "-o", &out, "--quiet"], tmp.path());
        ok(&merged);
        assert!(merged.stderr.is_empty(), "{}", String::from_utf8_lossy(&merged.stderr));
        assert!(files(&tmp.path().join(&out)) == full, "N = {n}");
    }
}

#[test]
fn merge_refuses_missing_duplicate_and_mismatched_shards() {
    let tmp = tempfile::tempdir().unwrap();
    let af = attack_file();
    let base = ["sweep", "--attack-file", &af, "--steps", "5"];
    shard_all(&base, 3, tmp.path(), "a");
    let refused = |args: &[&str], what: &str| {
        let out = qkd(args, tmp.path());
        assert_eq!(out.status.code(), Some(2), "{what}: {}", String::from_utf8_lossy(&out.stderr));
        assert!(!tmp.path().join("m.csv").exists(), "{what}: a partial output was written");
        String::from_utf8_lossy(&out.stderr).to_string()
    };
    let e = refused(&["merge", "a/sweep-shard-1-of-3.toml", "a/sweep-shard-3-of-3.toml", "-o", "m.csv"], "missing");
    assert!(e.contains("missing shard(s) 2/3"), "{e}");
    let e = refused(&["merge", "a", "a/sweep-shard-2-of-3.toml", "-o", "m.csv"], "duplicate");
    assert!(e.contains("given twice"), "{e}");
    // Another seed-like input: a different number of steps.
    ok(&qkd(&["sweep", "--attack-file", &af, "--steps", "6", "--shard", "2/3", "--shard-dir", "b"], tmp.path()));
    let e = refused(
        &["merge", "a/sweep-shard-1-of-3.toml", "b/sweep-shard-2-of-3.toml", "a/sweep-shard-3-of-3.toml", "-o", "m.csv"],
        "arguments",
    );
    assert!(e.contains("arguments"), "{e}");
    // A different input file with the same arguments.
    let copy = tmp.path().join("probe.toml");
    std::fs::copy(&af, &copy).unwrap();
    let cp = copy.display().to_string();
    shard_all(&["sweep", "--attack-file", &cp, "--steps", "5"], 3, tmp.path(), "c");
    std::fs::write(&copy, std::fs::read_to_string(&af).unwrap() + "\n# edited\n").unwrap();
    ok(&qkd(&["sweep", "--attack-file", &cp, "--steps", "5", "--shard", "2/3", "--shard-dir", "d"], tmp.path()));
    let e =
        refused(&["merge", "c/sweep-shard-1-of-3.toml", "d/sweep-shard-2-of-3.toml", "c/sweep-shard-3-of-3.toml", "-o", "m.csv"], "inputs");
    assert!(e.contains("input files"), "{e}");
    // Another tool version.
    let p = tmp.path().join("a/sweep-shard-3-of-3.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, text.replacen(&format!("version = \"{}\"", env!("CARGO_PKG_VERSION")), "version = \"0.0.0-other\"", 1)).unwrap();
    let e = refused(&["merge", "a", "-o", "m.csv"], "version");
    assert!(e.contains("versions"), "{e}");
    // A different shard count.
    ok(&qkd(&["sweep", "--attack-file", &af, "--steps", "5", "--shard", "3/4", "--shard-dir", "e"], tmp.path()));
    let e = refused(&["merge", "a/sweep-shard-1-of-3.toml", "e/sweep-shard-3-of-4.toml", "-o", "m.csv"], "counts");
    assert!(e.contains("shard counts"), "{e}");
    let e = refused(&["merge", "nowhere", "-o", "m.csv"], "no file");
    assert!(e.contains("nowhere"), "{e}");
}

/// A campaign whose abort-threshold search (with the arguments below) bisects, with values
/// that need more than one look (a leak threshold of 10⁻³ needs 4400 trials to show a value
/// safe), looks of several trial chunks (8800 trials) and an inconclusive value.
const TOLERANCE_CAMPAIGN: &str = include_str!("data/abort-threshold.toml");

const TOLERANCE_ARGS: [&str; 16] = [
    "tolerance",
    "c.toml",
    "--key",
    "abort_qber",
    "--from",
    "0.04",
    "--to",
    "0.08",
    "--bisections",
    "5",
    "--trials",
    "1100",
    "--max-trials",
    "8800",
    "--threshold",
    "0.001",
];

/// Runs rounds of `n` shards and merges until the merge writes `out`; gives the merge's
/// output and the number of rounds.
fn tolerance_rounds(dir: &Path, n: usize, shard_dir: &str, out: &str) -> (Output, usize) {
    for round in 1..=40 {
        shard_all(&TOLERANCE_ARGS, n, dir, shard_dir);
        let merged = qkd(&["merge", shard_dir, "-o", out, "--json"], dir);
        assert!(matches!(merged.status.code(), Some(0 | 1)), "round {round}: {}", String::from_utf8_lossy(&merged.stderr));
        if dir.join(out).exists() {
            return (merged, round);
        }
        assert!(merged.stdout.is_empty(), "an unfinished search printed a result");
        let err = String::from_utf8_lossy(&merged.stderr);
        assert!(err.contains("needs next"), "{err}");
    }
    panic!("the search did not finish in 40 rounds");
}

#[test]
fn tolerance_shards_merged_round_by_round_equal_the_single_search() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("c.toml"), TOLERANCE_CAMPAIGN).unwrap();
    let mut single_args = TOLERANCE_ARGS.to_vec();
    single_args.extend(["--evidence", "single.csv", "--quiet", "--json"]);
    let single = qkd(&single_args, tmp.path());
    assert_eq!(single.status.code(), Some(0), "{}", String::from_utf8_lossy(&single.stderr));
    let single_csv = std::fs::read(tmp.path().join("single.csv")).unwrap();
    let json: serde_json::Value = serde_json::from_slice(&single.stdout).unwrap();
    let evaluations = json["evaluations"].as_array().unwrap();
    // The search this test needs: bisections, and values that took more than one look.
    assert!(evaluations.iter().any(|e| e["role"] == "bisection"), "{json}");
    assert!(evaluations.iter().any(|e| e["looks"].as_u64().unwrap() > 1), "{json}");
    assert!(evaluations.iter().any(|e| e["attacks"][0]["trials"].as_u64().unwrap() > 4096), "no look of several chunks: {json}");
    // 1, 3 and 40 shards (40 is more than any round's units: 1 point × 1–3 chunks per look).
    for n in [1, 3, 40] {
        let (sd, out) = (format!("s{n}"), format!("merged-{n}.csv"));
        let (merged, rounds) = tolerance_rounds(tmp.path(), n, &sd, &out);
        assert!(rounds > 2, "N = {n}: {rounds} rounds");
        assert_eq!(merged.status.code(), single.status.code(), "N = {n}");
        assert_eq!(String::from_utf8_lossy(&merged.stdout), String::from_utf8_lossy(&single.stdout), "N = {n}");
        assert_eq!(std::fs::read(tmp.path().join(&out)).unwrap(), single_csv, "N = {n}");
        // The merged partials are gone; the state says the search is finished.
        let left: Vec<_> = files(&tmp.path().join(&sd)).into_keys().collect();
        assert_eq!(left, vec![PathBuf::from("tolerance-state.toml")], "N = {n}");
        let state = std::fs::read_to_string(tmp.path().join(&sd).join("tolerance-state.toml")).unwrap();
        assert!(state.contains("finished = true"), "{state}");
        // A shard after the end has nothing to do and writes nothing.
        let mut again = TOLERANCE_ARGS.to_vec();
        again.extend(["--shard", "1/3", "--shard-dir", &sd]);
        let out = qkd(&again, tmp.path());
        ok(&out);
        assert!(String::from_utf8_lossy(&out.stderr).contains("finished"), "{}", String::from_utf8_lossy(&out.stderr));
        assert_eq!(files(&tmp.path().join(&sd)).len(), 1);
        // The finished search gives its result again, from its state alone.
        let again = qkd(&["merge", &sd, "-o", "again.csv", "--json", "--force"], tmp.path());
        assert_eq!(again.status.code(), single.status.code(), "{}", String::from_utf8_lossy(&again.stderr));
        assert_eq!(again.stdout, single.stdout);
        assert_eq!(std::fs::read(tmp.path().join("again.csv")).unwrap(), single_csv);
    }
}

#[test]
fn tolerance_merges_refuse_stale_foreign_and_incomplete_rounds() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path();
    std::fs::write(dir.join("c.toml"), TOLERANCE_CAMPAIGN).unwrap();
    let refused = |args: &[&str], what: &str| {
        let out = qkd(args, dir);
        assert_eq!(out.status.code(), Some(2), "{what}: {}", String::from_utf8_lossy(&out.stderr));
        assert!(!dir.join("m.csv").exists(), "{what}: a result was written");
        String::from_utf8_lossy(&out.stderr).to_string()
    };
    shard_all(&TOLERANCE_ARGS, 2, dir, "sd");
    let state = dir.join("sd/tolerance-state.toml");
    // A missing shard: refused, and nothing is merged.
    let e = refused(&["merge", "sd/tolerance-shard-1-of-2.toml", "-o", "m.csv"], "missing");
    assert!(e.contains("missing shard(s) 2/2"), "{e}");
    assert!(!state.exists());
    // Keep a copy of round 1, merge it, then offer the copy again: left over.
    std::fs::create_dir(dir.join("old")).unwrap();
    for k in 1..=2 {
        let name = format!("tolerance-shard-{k}-of-2.toml");
        std::fs::copy(dir.join("sd").join(&name), dir.join("old").join(&name)).unwrap();
    }
    ok(&qkd(&["merge", "sd", "-o", "m.csv"], dir));
    assert!(state.exists() && !dir.join("m.csv").exists());
    let before = std::fs::read(&state).unwrap();
    for k in 1..=2 {
        let name = format!("tolerance-shard-{k}-of-2.toml");
        std::fs::copy(dir.join("old").join(&name), dir.join("sd").join(&name)).unwrap();
    }
    let e = refused(&["merge", "sd", "-o", "m.csv"], "stale");
    assert!(e.contains("left over from an earlier round"), "{e}");
    assert_eq!(std::fs::read(&state).unwrap(), before, "a refused merge changed the state");
    // Partials of one search must sit beside its state.
    let e = refused(&["merge", "old/tolerance-shard-1-of-2.toml", "sd/tolerance-shard-2-of-2.toml", "-o", "m.csv"], "folders");
    assert!(e.contains("one --shard-dir"), "{e}");
    // A shard of another search in the same folder: refused before any work.
    let mut other = TOLERANCE_ARGS.to_vec();
    other[9] = "4";
    other.extend(["--shard", "1/2", "--shard-dir", "sd", "--force"]);
    let e = refused(&other, "foreign");
    assert!(e.contains("another search"), "{e}");
    // A rule file is not sharded.
    std::fs::write(dir.join("fu.toml"), "name = \"zero\"\nkey_length = \"0\"\n").unwrap();
    std::fs::write(dir.join("r.toml"), TOLERANCE_CAMPAIGN.replace("key_rule = \"individual\"", "key_rule = \"file:fu.toml\"")).unwrap();
    let mut rule_file = TOLERANCE_ARGS.to_vec();
    rule_file[1] = "r.toml";
    rule_file.extend(["--shard", "1/2", "--shard-dir", "rf"]);
    let e = refused(&rule_file, "rule file");
    assert!(e.contains("--shard") && e.contains("built-in rules only"), "{e}");
}
