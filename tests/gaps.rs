//! Gaps between commands: options one command has and another lacked (`hunt --quiet`,
//! `sweep --attack`), integer keys written as floats, and the note on a qubit attack's
//! idle point on an optical link.

use std::path::Path;
use std::process::{Command, Output};

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().expect("binary runs")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn hunt_quiet_writes_nothing_to_stderr_but_the_same_results() {
    let dir = tempfile::tempdir().unwrap();
    let args = |out: &'static str| vec!["hunt", "--objective", "guess", "--q", "0.05", "--starts", "2", "--iters", "20", "--out-dir", out];
    let loud = qkd(&args("loud"), dir.path());
    assert_eq!(loud.status.code(), Some(0), "{}", stderr(&loud));
    assert!(stderr(&loud).contains("wrote loud"), "{}", stderr(&loud));
    for flag in ["--quiet", "-q"] {
        let out = format!("quiet{flag}");
        let mut a = args("x");
        *a.last_mut().unwrap() = &out;
        a.push(flag);
        let quiet = qkd(&a, dir.path());
        assert_eq!(quiet.status.code(), Some(0), "{flag}: {}", stderr(&quiet));
        assert_eq!(stderr(&quiet), "", "{flag}");
        assert_eq!(quiet.stdout, loud.stdout, "{flag}: the same table on stdout");
        assert!(dir.path().join(&out).join("hunt.csv").is_file());
    }
}

fn repo() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// `sweep --attack NAME` runs the built-in entry a campaign names with `builtin = NAME`:
/// the same bytes as the entry's file; shards of it merge to the same bytes; an unknown
/// name is refused with the names that work.
#[test]
fn sweep_takes_a_built_in_entry_by_name() {
    let by_file = qkd(&["sweep", "--attack-file", "attacks/universal-cloner.toml", "--steps", "5"], repo());
    assert_eq!(by_file.status.code(), Some(0), "{}", stderr(&by_file));
    let by_name = qkd(&["sweep", "--attack", "universal-cloner", "--steps", "5"], repo());
    assert_eq!(by_name.status.code(), Some(0), "{}", stderr(&by_name));
    assert_eq!(by_name.stdout, by_file.stdout);
    assert_eq!(String::from_utf8_lossy(&by_name.stdout).lines().count(), 6);

    let dir = tempfile::tempdir().unwrap();
    for k in ["1/2", "2/2"] {
        let o = qkd(&["sweep", "--attack", "universal-cloner", "--steps", "5", "--shard", k, "--shard-dir", "s"], dir.path());
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    }
    let merged = qkd(&["merge", "s"], dir.path());
    assert_eq!(merged.status.code(), Some(0), "{}", stderr(&merged));
    assert_eq!(merged.stdout, by_file.stdout);

    for (name, hint) in [("no-such-attack", ""), ("cloner", "it is an attack family")] {
        let o = qkd(&["sweep", "--attack", name], repo());
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains("--attack") && err.contains(&format!("`{name}`")) && err.contains(hint), "{err}");
        for valid in ["intercept-resend", "breidbart", "universal-cloner", "phase-covariant-cloner", "entangling-probe", "pauli"] {
            assert!(err.contains(valid), "{valid}: {err}");
        }
        assert!(!err.contains("photon-number-splitting,"), "only the entries sweep runs are offered: {err}");
    }
    let link = qkd(&["sweep", "--attack", "photon-number-splitting"], repo());
    assert_eq!(link.status.code(), Some(2));
    assert!(
        stderr(&link).contains("builtin:photon-number-splitting") && stderr(&link).contains("use it in a campaign"),
        "{}",
        stderr(&link)
    );
    let neither = qkd(&["sweep"], repo());
    assert_eq!(neither.status.code(), Some(2));
    assert!(stderr(&neither).contains("--attack <NAME>|--attack-file <PATH>"), "{}", stderr(&neither));
}

/// Integer keys of campaign and setup files take a float with an integral value (`1e3`) as
/// that integer, and refuse a fraction (`1.5e0`) with the file, line and key.
#[test]
fn integer_keys_written_as_floats_are_taken_exactly_or_refused_with_file_line_and_key() {
    let dir = tempfile::tempdir().unwrap();
    let campaign = |seed: &str, trials: &str, signals: &str, test_count: &str, steps: &str| {
        format!(
            "name = \"floats\"\nseed = {seed}\ntrials = {trials}\n[setup]\nsignals = {signals}\ntest_count = {test_count}\n\
             [[attacks]]\nbuiltin = \"intercept-resend\"\nsteps = {steps}\n[[setup_sweeps]]\nkey = \"abort_qber\"\nfrom = 0.05\nto = 0.1\nsteps = {steps}\n"
        )
    };
    let run = |name: &str, text: &str| {
        std::fs::write(dir.path().join(name), text).unwrap();
        qkd(&["run", name, "--results-dir", name.trim_end_matches(".toml"), "-q"], dir.path())
    };
    // Written as floats and as integers, the same campaign: the same table, byte for byte.
    let floats = run("f.toml", &campaign("7e0", "2e1", "2e4", "1e2", "2e0"));
    assert_eq!(floats.status.code(), Some(0), "{}", stderr(&floats));
    let ints = run("i.toml", &campaign("7", "20", "20000", "100", "2"));
    assert_eq!(ints.status.code(), Some(0), "{}", stderr(&ints));
    let table = |d: &str| std::fs::read_to_string(dir.path().join(d).join("floats/attack_vs_bound.csv")).unwrap();
    assert_eq!(table("f"), table("i"));
    assert_eq!(table("f").lines().count(), 1 + 2 * 2);
    let manifest = std::fs::read_to_string(dir.path().join("f/floats/manifest.json")).unwrap();
    assert!(manifest.contains("\"seed\": 7,") && manifest.contains("\"trials\": 20,"), "{manifest}");

    // A fraction, or a whole number out of range, at each integer key: file, line, key.
    for (text, line, key, what) in [
        (campaign("7", "1.5e0", "2e4", "100", "2"), 3, "trials", "1.5 is not a whole number"),
        (campaign("0.5", "20", "2e4", "100", "2"), 2, "seed", "0.5 is not a whole number"),
        (campaign("7", "20", "20000.5", "100", "2"), 5, "setup.signals", "20000.5 is not a whole number"),
        (campaign("7", "20", "2e4", "1.255e2", "2"), 6, "setup.test_count", "125.5 is not a whole number"),
        (campaign("7", "20", "2e4", "100", "2.5"), 9, "attacks[0].steps", "2.5 is not a whole number"),
        (campaign("7", "2e6", "2e4", "100", "2"), 3, "trials", "2000000 is outside the allowed range [1, 1000000]"),
        (campaign("7", "20", "1e16", "100", "2"), 5, "setup.signals", "outside the allowed range [100, 1e15]"),
    ] {
        let out = run("bad.toml", &text);
        let err = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{key}: {err}");
        assert!(err.contains(&format!("bad.toml:{line}:")) && err.contains(&format!("key `{key}`")) && err.contains(what), "{key}: {err}");
    }
    // The setup sweep's steps (line 14, after the attack's own steps at line 9).
    let text = campaign("7", "20", "2e4", "100", "2").replace("to = 0.1\nsteps = 2", "to = 0.1\nsteps = 2.5");
    let out = run("bad.toml", &text);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("bad.toml:14:") && stderr(&out).contains("2.5 is not a whole number"), "{}", stderr(&out));

    // A setup file of its own: the same rule.
    std::fs::write(dir.path().join("setup.toml"), "signals = 1e6\ntest_count = 1e3\n").unwrap();
    assert_eq!(qkd(&["validate", "setup.toml"], dir.path()).status.code(), Some(0));
    std::fs::write(dir.path().join("setup.toml"), "signals = 1e6\ntest_count = 1e-3\n").unwrap();
    let out = qkd(&["validate", "setup.toml"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("setup.toml:2:") && stderr(&out).contains("key `test_count`: 0.001 is not a whole number"),
        "{}",
        stderr(&out)
    );
}

/// A qubit attack's idle point (intercept-resend at fraction 0) on a lossy weak-coherent
/// link with decoys is not the honest link; the run's summary and table say so, while the
/// honest link (photon-number splitting at fraction 0) carries no such note.
#[test]
fn an_idle_qubit_attack_on_a_lossy_link_is_noted_in_the_summary() {
    let dir = tempfile::tempdir().unwrap();
    let campaign = "name = \"idle\"\ntrials = 5\n[setup]\nsignals = 1e8\ntest_count = 5000\nabort_qber = 0.06\nkey_rule = \"decoy-finite\"\n\
        [setup.source]\nkind = \"weak-coherent\"\nintensity = 0.5\nprobability = 0.8\ndecoys = [0.1, 0.0]\ndecoy_probabilities = [0.15, 0.05]\n\
        [setup.channel]\nlength_km = 25\nattenuation_db_per_km = 0.2\n[setup.detector]\nefficiency = 0.2\ndark_count_probability = 1e-6\n\
        misalignment = 0.01\n[[attacks]]\nbuiltin = \"intercept-resend\"\nsteps = 2\n[[attacks]]\nbuiltin = \"photon-number-splitting\"\nsteps = 2\n";
    std::fs::write(dir.path().join("c.toml"), campaign).unwrap();
    let out = qkd(&["run", "c.toml", "--results-dir", "r", "-q"], dir.path());
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    let summary = std::fs::read_to_string(dir.path().join("r/idle/summary.md")).unwrap();
    let line = summary.lines().find(|l| l.starts_with("Note: at fraction=0, basis=random")).unwrap_or_else(|| panic!("{summary}"));
    assert!(line.contains("not the honest one") && line.contains("at intensity 0.1 his gain is"), "{line}");
    assert!(line.contains("`photon-number-splitting` at fraction 0"), "{line}");
    let csv = std::fs::read_to_string(dir.path().join("r/idle/attack_vs_bound.csv")).unwrap();
    let noted: Vec<&str> = csv.lines().filter(|l| l.contains("leaves every single photon alone")).collect();
    assert_eq!(noted.len(), 1, "only the idle intercept-resend point: {noted:?}");
    assert!(noted[0].contains(",intercept-resend,") && noted[0].contains(",fraction,0,"), "{}", noted[0]);
}

/// An attack file's integer keys (`[sweep] steps`, a kraus file's `eve_dim`) take a float
/// with a whole value as that integer, as campaigns and setups do, and refuse a fraction with
/// file, line and key.
#[test]
fn attack_files_take_whole_floats_for_their_integer_keys() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let pauli = std::fs::read_to_string(root.join("attacks/pauli.toml")).unwrap();
    assert!(pauli.contains("steps = 21"));
    std::fs::write(dir.path().join("float.toml"), pauli.replace("steps = 21", "steps = 2.1e1")).unwrap();
    std::fs::write(dir.path().join("fraction.toml"), pauli.replace("steps = 21", "steps = 2.5")).unwrap();
    let ok = qkd(&["sweep", "--attack-file", "float.toml", "-o", "a.csv"], dir.path());
    assert_eq!(ok.status.code(), Some(0), "{}", stderr(&ok));
    let reference = qkd(&["sweep", "--attack", "pauli", "-o", "b.csv"], dir.path());
    assert_eq!(reference.status.code(), Some(0), "{}", stderr(&reference));
    assert_eq!(std::fs::read(dir.path().join("a.csv")).unwrap(), std::fs::read(dir.path().join("b.csv")).unwrap());
    let bad = qkd(&["sweep", "--attack-file", "fraction.toml", "-o", "c.csv"], dir.path());
    assert_eq!(bad.status.code(), Some(2));
    assert!(stderr(&bad).contains("fraction.toml:14:") && stderr(&bad).contains("2.5 is not a whole number"), "{}", stderr(&bad));
    let kraus = std::fs::read_to_string(root.join("attacks/custom-example.toml")).unwrap();
    assert!(kraus.contains("eve_dim = 2\n"));
    std::fs::write(dir.path().join("k.toml"), kraus.replace("eve_dim = 2\n", "eve_dim = 2.0\n")).unwrap();
    let (a, b) = (
        qkd(&["eval", "--attack-file", "k.toml", "--json"], dir.path()),
        qkd(&["eval", "--attack-file", &root.join("attacks/custom-example.toml").display().to_string(), "--json"], dir.path()),
    );
    assert_eq!(a.status.code(), Some(0), "{}", stderr(&a));
    assert_eq!(a.stdout, b.stdout);
    std::fs::write(dir.path().join("k.toml"), kraus.replace("eve_dim = 2\n", "eve_dim = 1.5\n")).unwrap();
    let bad = qkd(&["validate", "k.toml"], dir.path());
    assert_eq!(bad.status.code(), Some(2));
    assert!(stderr(&bad).contains("k.toml:") && stderr(&bad).contains("key `eve_dim`: 1.5 is not a whole number"), "{}", stderr(&bad));
}
