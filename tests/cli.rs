//! The binary: exit codes, JSON keys, stdout/stderr split, bad files, refusal to overwrite.

use std::path::Path;
use std::process::{Command, Output};

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().expect("binary runs")
}

fn repo() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

const JSON_KEYS: &[&str] = &[
    "qber_z",
    "qber_x",
    "qber_y",
    "p_guess_z",
    "p_guess_x",
    "p_guess_y",
    "holevo_z",
    "holevo_x",
    "holevo_y",
    "h_x_given_e",
    "accessible_z",
    "accessible_x",
    "i_ab",
    "game_win",
    "bound_rate",
    "attack_rate",
    "individual_rate",
    "margin",
];

#[test]
fn eval_json_has_every_key_and_exits_zero() {
    let out = qkd(&["eval", "--attack", "intercept-resend", "--set", "fraction=0.5", "--json"], repo());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for k in JSON_KEYS {
        assert!(v.get(*k).is_some_and(|x| x.is_number()), "missing numeric key {k}");
    }
    assert!((v["qber_z"].as_f64().unwrap() - 0.125).abs() < 1e-12);
}

#[test]
fn eval_reads_kraus_and_catalogue_files_with_overrides() {
    let out = qkd(&["eval", "--attack-file", "attacks/custom-example.toml", "--json", "--protocol", "six-state"], repo());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["attack"], "partial-swap-probe");
    let out = qkd(&["eval", "--attack-file", "attacks/phase-covariant-cloner.toml", "--set", "qber=0.1", "--json"], repo());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!((v["qber_x"].as_f64().unwrap() - 0.1).abs() < 1e-12);
}

#[test]
fn eval_takes_catalogue_names_as_campaigns_do() {
    // The same name in every command: `eval --attack universal-cloner` is the catalogue
    // entry a campaign names with `builtin = "universal-cloner"`.
    let by_name = qkd(&["eval", "--attack", "universal-cloner", "--set", "qber=0.1", "--json"], repo());
    assert_eq!(by_name.status.code(), Some(0), "{}", String::from_utf8_lossy(&by_name.stderr));
    let by_file = qkd(&["eval", "--attack-file", "attacks/universal-cloner.toml", "--set", "qber=0.1", "--json"], repo());
    let (a, b): (serde_json::Value, serde_json::Value) =
        (serde_json::from_slice(&by_name.stdout).unwrap(), serde_json::from_slice(&by_file.stdout).unwrap());
    assert_eq!(a["attack"], "universal-cloner");
    for k in JSON_KEYS {
        assert_eq!(a[*k], b[*k], "{k}");
    }
    let pulse = qkd(&["eval", "--attack", "photon-number-splitting"], repo());
    assert_eq!(pulse.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&pulse.stderr).contains("key `--attack`"), "{}", String::from_utf8_lossy(&pulse.stderr));
    let unknown = qkd(&["eval", "--attack", "nonesuch"], repo());
    let err = String::from_utf8_lossy(&unknown.stderr);
    assert!(err.contains("breidbart") && err.contains("cloner"), "{err}");
}

#[test]
fn bad_parameter_gives_status_two_and_names_key_and_range() {
    let out = qkd(&["eval", "--attack", "intercept-resend", "--set", "fraction=1.5"], repo());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("fraction") && err.contains("[0, 1]"), "{err}");
    assert!(out.stdout.is_empty());
}

#[test]
fn bad_kraus_file_gives_status_two_naming_file_operator_and_entry() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bad.toml");
    std::fs::write(
        &p,
        "name = \"bad\"\neve_dim = 1\noperators = [\n  [[[1.0, 0.0], [0.0, 0.0]], [[0.0, 0.0], [\"x\", 0.0]]],\n  [[[1.0, 0.0], [0.0, 0.0]]],\n]\n",
    )
    .unwrap();
    let out = qkd(&["validate", p.to_str().unwrap()], dir.path());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("bad.toml"), "{err}");
    assert!(err.contains("operators[0][1][1]"), "entry not named: {err}");
    assert!(err.contains("operators[1]"), "second problem not reported: {err}");
    // Incomplete Kraus set.
    std::fs::write(&p, "name = \"weak\"\neve_dim = 1\noperators = [[[[0.9, 0.0], [0.0, 0.0]], [[0.0, 0.0], [0.9, 0.0]]]]\n").unwrap();
    let out = qkd(&["eval", "--attack-file", p.to_str().unwrap()], dir.path());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("bad.toml") && err.contains("not complete"), "{err}");
}

#[test]
fn validate_accepts_the_shipped_catalogue() {
    let mut args = vec!["validate"];
    let files: Vec<String> = std::fs::read_dir(repo().join("attacks"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .map(|p| p.to_string_lossy().into_owned())
        .collect();
    assert!(files.len() >= 6);
    args.extend(files.iter().map(|s| s.as_str()));
    let out = qkd(&args, repo());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
}

#[test]
fn validate_reads_campaigns_and_setups_too() {
    let out = qkd(&["validate", "campaigns/demo-decoy.toml", "campaigns/demo-single-photon.toml"], repo());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("setup.toml"), "signals = 1000\nabort_qber = 0.9\n").unwrap();
    std::fs::write(dir.path().join("broken.toml"), "signals = 1000\nabort_qber = = 0.9\n").unwrap();
    let out = qkd(&["validate", "setup.toml", "broken.toml"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("setup.toml:2:1: key `abort_qber`"), "{err}");
    assert!(err.contains("broken.toml:2:") && err.contains("not valid TOML"), "{err}");
}

#[test]
fn sweep_writes_csv_and_refuses_to_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let cat = repo().join("attacks/intercept-resend.toml");
    let out_csv = dir.path().join("ir.csv");
    let args = ["sweep", "--attack-file", cat.to_str().unwrap(), "--steps", "5", "-o", out_csv.to_str().unwrap()];
    let out = qkd(&args, dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(&out_csv).unwrap();
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let headers = rdr.headers().unwrap().clone();
    assert_eq!(&headers[3], "param_fraction");
    let qz = headers.iter().position(|h| h == "qber_z").unwrap();
    let rows: Vec<csv::StringRecord> = rdr.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 5);
    for (i, r) in rows.iter().enumerate() {
        let p = i as f64 / 4.0;
        assert!((r[qz].parse::<f64>().unwrap() - p / 4.0).abs() < 1e-10);
    }
    let again = qkd(&args, dir.path());
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    assert_eq!(std::fs::read_to_string(&out_csv).unwrap(), text);
    let mut forced = args.to_vec();
    forced.push("--force");
    assert_eq!(qkd(&forced, dir.path()).status.code(), Some(0));
}

#[test]
fn thresholds_json_is_computed() {
    let out = qkd(&["thresholds", "--json", "--f-ec", "1.22"], repo());
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let bb84 = v.as_array().unwrap().iter().find(|r| r["name"] == "bb84-zero-rate").unwrap();
    // REFERENCES.md §1, f = 1.22: 0.0942351660 [N].
    assert!((bb84["qber"].as_f64().unwrap() - 0.0942351660).abs() < 1e-8);
    let bad = qkd(&["thresholds", "--f-ec", "0.5"], repo());
    assert_eq!(bad.status.code(), Some(2));
}

#[test]
fn help_and_unknown_commands() {
    assert_eq!(qkd(&["--help"], repo()).status.code(), Some(0));
    assert_eq!(qkd(&["eval", "--help"], repo()).status.code(), Some(0));
    assert_eq!(qkd(&["frobnicate"], repo()).status.code(), Some(2));
}

#[test]
fn unbounded_requests_are_refused_before_any_work() {
    // Regressions: a huge --steps panicked (capacity overflow), /dev/urandom was read
    // forever, --threads 10000 and the per-round sampler on 10^15 signals were accepted.
    let out = qkd(&["sweep", "--attack-file", "attacks/pauli.toml", "--steps", "18446744073709551615"], repo());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("[1, 100000]"));
    if Path::new("/dev/urandom").exists() {
        let out = qkd(&["eval", "--attack-file", "/dev/urandom"], repo());
        assert_eq!(out.status.code(), Some(2));
        assert!(String::from_utf8_lossy(&out.stderr).contains("not a regular file"));
    }
    let out = qkd(&["run", "--threads", "10000", "-q"], repo());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--threads"));
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("c.toml"),
        "name = \"r\"\nsampler = \"round\"\n[setup]\nsignals = 1000000000000000\n[[attacks]]\nbuiltin = \"pauli\"\n",
    )
    .unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("CPU seconds") && err.contains("sampler = \"count\""), "{err}");
}

#[test]
fn control_characters_in_user_values_never_reach_the_terminal() {
    let out = qkd(&["eval", "--attack", "intercept-resend", "--set", "basis=\u{1b}[2Jboom"], repo());
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains('\u{1b}') && err.contains("\\u{1b}"), "{err}");
}

/// `run --dry-run` refuses the thread counts the run would refuse.
#[test]
fn dry_run_checks_the_thread_count() {
    for n in ["0", "300"] {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(["run", "--dry-run", "--threads", n]).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{n}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("key `--threads`"), "{n}");
    }
}
