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
        ok(&qkd(&["merge", &sd, "-o", &out], tmp.path()));
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
