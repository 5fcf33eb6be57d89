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
