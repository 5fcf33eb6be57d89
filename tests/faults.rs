//! Output faults at the command level: every output problem is found before the campaign is
//! computed, a folder in use is refused at once, leftovers of killed runs are reported and
//! never merged, a forced replacement leaves exactly one folder, and signals clean up.
//!
//! The "before the campaign is computed" tests run a campaign that takes minutes to compute
//! and expect an error within [`PATIENCE`] (the checks take milliseconds); a run that computes
//! first is killed and fails the test.

use std::os::unix::process::{CommandExt, ExitStatusExt};
use std::path::Path;
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

/// A campaign that computes in about a second.
const SMALL: &str = r#"
name = "small"
seed = 7
trials = 50
[setup]
signals = 20000
basis_z_probability = 0.5
test_fraction = 0.05
abort_qber = 0.11
key_rule = "finite-uncertainty"
[[attacks]]
builtin = "phase-covariant-cloner"
steps = 3
to = 0.04
[[attacks]]
builtin = "intercept-resend"
steps = 3
"#;

/// How long a run that must stop before computing may take.
const PATIENCE: Duration = Duration::from_secs(30);

/// The small campaign with 80 points of a million trials: minutes of work.
fn slow() -> String {
    SMALL.replace("trials = 50", "trials = 1000000").replace("steps = 3", "steps = 40")
}

fn qkd(args: &[&str], dir: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_qkd-audit"));
    c.args(args).current_dir(dir).env("RAYON_NUM_THREADS", "2").stdin(Stdio::null()).stdout(Stdio::piped()).stderr(Stdio::piped());
    c
}

/// Runs `c` to the end, or kills it after [`PATIENCE`] and fails.
fn finish_soon(mut c: Command) -> Output {
    let mut child = c.spawn().expect("binary runs");
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > PATIENCE {
            let _ = child.kill();
            let out = child.wait_with_output().unwrap();
            panic!("still running after {PATIENCE:?}: the output problem was not found before computing; stderr: {}", text(&out.stderr));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

fn names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect();
    v.sort();
    v
}

/// A temporary folder holding `c.toml`.
fn with_campaign(campaign: &str) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), campaign).unwrap();
    dir
}

#[test]
fn a_read_only_results_folder_fails_before_the_campaign_runs() {
    use std::os::unix::fs::PermissionsExt;
    let dir = with_campaign(&slow());
    let ro = dir.path().join("ro");
    std::fs::create_dir(&ro).unwrap();
    std::fs::set_permissions(&ro, std::fs::Permissions::from_mode(0o555)).unwrap();
    let mut c = qkd(&["run", "c.toml", "--results-dir", "ro", "-q"], dir.path());
    if rustix::process::geteuid().is_root() {
        // Permissions do not bind root: run the binary as `nobody`, who may read the
        // campaign but not write in `ro` (owned by root).
        std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o755)).unwrap();
        let mut check = qkd(&["--version"], dir.path());
        check.uid(65534).gid(65534);
        if !check.output().is_ok_and(|o| o.status.success()) {
            eprintln!("skipped: cannot run the binary as `nobody` to make the folder read-only for it");
            return;
        }
        c.uid(65534).gid(65534);
    } else if std::fs::write(ro.join("probe"), "").is_ok() {
        eprintln!("skipped: chmod does not stop this user writing");
        return;
    }
    let out = finish_soon(c);
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("ro: cannot write in this folder") && err.contains("make it writable"), "{err}");
    assert!(names(&ro).is_empty(), "{:?}", names(&ro));
}

#[test]
fn a_second_run_into_a_folder_in_use_is_refused_at_once() {
    let dir = with_campaign(&slow());
    let results = dir.path().join("results");
    // This test holds the folder the way a running `qkd-audit run` does.
    let held = qkd_audit::output::prepare_folder(&results.join("small"), false).unwrap();
    let out = finish_soon(qkd(&["run", "c.toml", "-q"], dir.path()));
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("another run is writing this output") && err.contains(".small.lock"), "{err}");
    // Even --force does not take a folder in use.
    let out = finish_soon(qkd(&["run", "c.toml", "-q", "--force"], dir.path()));
    assert_eq!(out.status.code(), Some(2), "{}", text(&out.stderr));
    drop(held);
    assert!(names(&results).is_empty(), "{:?}", names(&results));
    std::fs::write(dir.path().join("c.toml"), SMALL).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert_eq!(names(&results), ["small"]);
}

#[test]
fn hunt_refuses_an_out_dir_in_use_before_searching() {
    let dir = tempfile::tempdir().unwrap();
    let held = qkd_audit::output::prepare_folder(&dir.path().join("h"), false).unwrap();
    let out = finish_soon(qkd(&["hunt", "--objective", "holevo", "--starts", "200", "--iters", "1000", "--out-dir", "h"], dir.path()));
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("another run is writing this output"), "{err}");
    drop(held);
}

#[test]
fn leftovers_of_killed_runs_are_reported_never_merged_and_removed_with_force() {
    let dir = with_campaign(SMALL);
    let results = dir.path().join("results");
    // A run killed while writing left its temporary folder (named as this version names them,
    // and as older versions did).
    for stale in [".small.tmp-4242-AbCdEf", ".small.tmp-4243"] {
        std::fs::create_dir_all(results.join(stale)).unwrap();
        std::fs::write(results.join(stale).join("stale.csv"), "stale").unwrap();
    }
    let out = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    for stale in [".small.tmp-4242-AbCdEf", ".small.tmp-4243"] {
        assert!(err.contains(&format!("{stale}: leftover of an interrupted run; remove it, or pass --force")), "{err}");
    }
    assert!(!results.join("small/stale.csv").exists());
    assert_eq!(names(&results), [".small.tmp-4242-AbCdEf", ".small.tmp-4243", "small"]);
    let out = qkd(&["run", "c.toml", "-q", "--force"], dir.path()).output().unwrap();
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(err.contains(".small.tmp-4242-AbCdEf: removed"), "{err}");
    assert_eq!(names(&results), ["small"]);
}

#[test]
fn forced_replacement_keeps_exactly_one_complete_folder() {
    let dir = with_campaign(SMALL);
    let results = dir.path().join("results");
    let first = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    assert_eq!(first.status.code(), Some(0), "{}", text(&first.stderr));
    let files = names(&results.join("small"));
    let manifest = |p: &Path| std::fs::read_to_string(p.join("small/manifest.json")).unwrap();
    let before = manifest(&results);
    let again = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    assert_eq!(again.status.code(), Some(2));
    assert!(text(&again.stderr).contains("--force"));
    let forced = qkd(&["run", "c.toml", "-q", "--force"], dir.path()).output().unwrap();
    assert_eq!(forced.status.code(), Some(0), "{}", text(&forced.stderr));
    assert_eq!(names(&results), ["small"]);
    assert_eq!(names(&results.join("small")), files);
    // The manifest records the command line: the new folder is the one at the name.
    assert!(!before.contains("--force") && manifest(&results).contains("--force"));
}

#[test]
fn names_too_long_for_temporary_names_still_write_and_longer_ones_fail_early() {
    // 248 bytes: the folder fits the usual 255-byte limit, `.<name>.tmp-<pid>` does not.
    let long = "n".repeat(248);
    let dir = with_campaign(&SMALL.replace("\"small\"", &format!("\"{long}\"")));
    let out = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    let out = qkd(&["run", "c.toml", "-q", "--force"], dir.path()).output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert_eq!(names(&dir.path().join("results")), [long]);
    // Longer than any folder name may be: refused before computing.
    let dir = with_campaign(&slow().replace("\"small\"", &format!("\"{}\"", "n".repeat(256))));
    let out = finish_soon(qkd(&["run", "c.toml", "-q"], dir.path()));
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("the folder name is 256 bytes long") && err.contains("choose a shorter name"), "{err}");
}

/// Starts the slow campaign and waits until its temporary folder exists.
fn start_slow_run(dir: &Path) -> Child {
    let mut child = qkd(&["run", "c.toml", "-q"], dir).spawn().unwrap();
    let results = dir.join("results");
    let start = Instant::now();
    while !(results.exists() && names(&results).iter().any(|n| n.starts_with(".small.tmp-"))) {
        assert!(child.try_wait().unwrap().is_none(), "the run ended early");
        if start.elapsed() > PATIENCE {
            let _ = child.kill();
            let _ = child.wait();
            panic!("no temporary folder after {PATIENCE:?}: it must be made before computing");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child
}

fn signal(child: &Child, sig: rustix::process::Signal) {
    let pid = rustix::process::Pid::from_raw(child.id() as i32).unwrap();
    rustix::process::kill_process(pid, sig).unwrap();
}

#[test]
fn sigterm_and_sigint_remove_the_temporary_folder_and_the_lock() {
    use rustix::process::Signal;
    for sig in [Signal::TERM, Signal::INT] {
        let dir = with_campaign(&slow());
        let child = start_slow_run(dir.path());
        signal(&child, sig);
        let out = child.wait_with_output().unwrap();
        assert_eq!(out.status.signal(), Some(sig.as_raw()), "{:?} {}", out.status, text(&out.stderr));
        assert!(names(&dir.path().join("results")).is_empty(), "{:?}", names(&dir.path().join("results")));
    }
}

#[test]
fn after_sigkill_the_next_run_reports_the_leftover_and_takes_the_lock() {
    let dir = with_campaign(&slow());
    let mut child = start_slow_run(dir.path());
    child.kill().unwrap();
    child.wait().unwrap();
    let results = dir.path().join("results");
    let left: Vec<String> = names(&results).into_iter().filter(|n| n.starts_with(".small.tmp-")).collect();
    assert_eq!(left.len(), 1);
    std::fs::write(dir.path().join("c.toml"), SMALL).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path()).output().unwrap();
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(err.contains(&format!("{}: leftover of an interrupted run", left[0])), "{err}");
    assert_eq!(names(&results), [left[0].clone(), "small".to_string()]);
}

/// Single-file outputs (`sweep`, `keyrate`, `rounds`) are checked and locked before the
/// computation, like folders: a file in use by another run, an existing file without
/// `--force` and an unwritable folder are refused at once, and nothing is left behind.
#[test]
fn single_file_outputs_are_checked_and_locked_before_computing() {
    let dir = tempfile::tempdir().unwrap();
    // A sweep of the cloner entry at the cap of points takes seconds; the checks take
    // milliseconds.
    let sweep = ["sweep", "--attack-file", "attacks/universal-cloner.toml", "--steps", "100000", "--output"];
    std::fs::create_dir(dir.path().join("attacks")).unwrap();
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("attacks/universal-cloner.toml"),
        dir.path().join("attacks/universal-cloner.toml"),
    )
    .unwrap();
    let held = qkd_audit::output::prepare_file(&dir.path().join("s.csv"), false).unwrap();
    let out = finish_soon(qkd(&[&sweep[..], &["s.csv"]].concat(), dir.path()));
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("another run is writing this output") && err.contains(".s.csv.lock"), "{err}");
    drop(held);
    assert_eq!(names(dir.path()), ["attacks"], "the held guard left files behind");

    std::fs::write(dir.path().join("k.csv"), "old").unwrap();
    let out = finish_soon(qkd(&["keyrate", "--steps", "1000000", "--output", "k.csv"], dir.path()));
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("k.csv: already exists"), "{err}");
    assert_eq!(std::fs::read_to_string(dir.path().join("k.csv")).unwrap(), "old");

    let out = finish_soon(qkd(&["keyrate", "--steps", "1000000", "--output", "k.csv/inside.csv"], dir.path()));
    assert_eq!(out.status.code(), Some(2), "{}", text(&out.stderr));
    assert_eq!(names(dir.path()), ["attacks", "k.csv"]);

    // A small one completes, and leaves exactly its file.
    let out = qkd(&["sweep", "--attack-file", "attacks/universal-cloner.toml", "--steps", "5", "--output", "ok.csv"], dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert_eq!(names(dir.path()), ["attacks", "k.csv", "ok.csv"]);
}
