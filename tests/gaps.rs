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
