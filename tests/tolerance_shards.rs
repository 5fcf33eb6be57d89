//! `tolerance --shard` and its round-by-round `merge` as a user gets them wrong: evidence
//! asked of the shards, the last merge without `-o`, `--quiet` and `--json` at the merge, an
//! input changed between rounds, and counts that do not fit the search.

use std::path::Path;
use std::process::{Command, Output};

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().expect("binary runs")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

/// An invented link with two attack entries (five attack points); the search below takes
/// two rounds (both ends and the configured setup, then one bisection value).
const CAMPAIGN: &str = r#"
name = "heron-quill"
seed = 777
trials = 300
[setup]
signals = 200000
abort_qber = 0.06
key_rule = "individual"
[[attacks]]
builtin = "phase-covariant-cloner"
steps = 3
from = 0.04
to = 0.07
[[attacks]]
builtin = "intercept-resend"
steps = 2
from = 0.1
to = 0.3
"#;

const SEARCH: [&str; 10] = ["tolerance", "c.toml", "--key", "abort_qber", "--from", "0.03", "--to", "0.09", "--bisections", "1"];

fn setup() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::write(tmp.path().join("c.toml"), CAMPAIGN).unwrap();
    tmp
}

/// Runs shards 1..=n of the current round with `extra` arguments; each must succeed.
fn round(dir: &Path, n: usize, sd: &str, extra: &[&str]) {
    for k in 1..=n {
        let spec = format!("{k}/{n}");
        let mut a = SEARCH.to_vec();
        a.extend(extra);
        a.extend(["--shard", &spec, "--shard-dir", sd]);
        let o = qkd(&a, dir);
        assert_eq!(o.status.code(), Some(0), "shard {spec}: {}", stderr(&o));
    }
}

/// `--evidence` given to the shards is dropped without a word (it is a neutral option), so
/// a user who writes the evidence file the way the unsharded search does loses it: the
/// final merge prints the result, nothing is written, and the finished search cannot be
/// merged again. Expected: the shard refuses `--evidence` (pointing to `merge -o`), or the
/// evidence ends up written.
#[test]
fn evidence_given_to_the_shards_is_not_silently_lost() {
    let tmp = setup();
    let dir = tmp.path();
    for _ in 0..5 {
        for spec in ["1/2", "2/2"] {
            let mut a = SEARCH.to_vec();
            a.extend(["--evidence", "ev.csv", "--shard", spec, "--shard-dir", "sd"]);
            let o = qkd(&a, dir);
            if o.status.code() == Some(2) {
                assert!(stderr(&o).contains("--evidence"), "a refusal names the option: {}", stderr(&o));
                return;
            }
            assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        }
        let m = qkd(&["merge", "sd"], dir);
        assert!(matches!(m.status.code(), Some(0 | 1)), "{}", stderr(&m));
        if !m.stdout.is_empty() {
            assert!(
                dir.join("ev.csv").exists(),
                "the search finished, `--evidence ev.csv` was given to every shard, and no evidence was written"
            );
            return;
        }
    }
    panic!("the search did not finish");
}

/// The final merge is the only chance to get the evidence: a user cannot know in advance
/// which round is the last, and after it the state is `finished` and a shard has "nothing
/// to do". The state holds every look's counts, so the result can be given again.
/// Expected: `merge <shard dir> -o FILE` on a finished search writes the evidence and
/// prints the result (or some documented command does).
#[test]
fn a_finished_search_can_give_its_evidence_again() {
    let tmp = setup();
    let dir = tmp.path();
    let mut finished = None;
    for _ in 0..5 {
        round(dir, 2, "sd", &[]);
        let m = qkd(&["merge", "sd"], dir);
        assert!(matches!(m.status.code(), Some(0 | 1)), "{}", stderr(&m));
        if !m.stdout.is_empty() {
            finished = Some(m);
            break;
        }
    }
    let finished = finished.expect("the search finished");
    let again = qkd(&["merge", "sd", "-o", "late.csv"], dir);
    assert_eq!(again.status.code(), finished.status.code(), "{}", stderr(&again));
    assert_eq!(again.stdout, finished.stdout);
    assert!(dir.join("late.csv").exists());
}

/// `merge --quiet` is ignored for a tolerance search: the merge reads `quiet` from the
/// shards' arguments, where `--quiet` is never kept (a neutral option).
#[test]
fn merge_quiet_silences_the_tolerance_merge() {
    let tmp = setup();
    let dir = tmp.path();
    for _ in 0..5 {
        round(dir, 2, "sd", &[]);
        let m = qkd(&["merge", "sd", "-o", "ev.csv", "--quiet"], dir);
        assert!(matches!(m.status.code(), Some(0 | 1)), "{}", stderr(&m));
        if dir.join("ev.csv").exists() {
            assert_eq!(stderr(&m), "", "merge --quiet wrote to stderr");
            return;
        }
    }
    panic!("the search did not finish");
}

/// `--json` changes only how the result is printed, yet it is part of a search's identity:
/// adding it in a later round is refused as "the state of another search ... give each
/// search a --shard-dir of its own", and `merge` has no `--json` of its own. A user who
/// wants JSON at the end must have given it from the first round.
#[test]
fn json_can_be_asked_for_in_a_later_round() {
    let tmp = setup();
    let dir = tmp.path();
    round(dir, 2, "sd", &[]);
    let m = qkd(&["merge", "sd"], dir);
    assert_eq!(m.status.code(), Some(0), "{}", stderr(&m));
    let mut a = SEARCH.to_vec();
    a.extend(["--json", "--shard", "1/2", "--shard-dir", "sd"]);
    let o = qkd(&a, dir);
    assert_eq!(o.status.code(), Some(0), "adding --json in round 2 was refused: {}", stderr(&o));
}

/// When the campaign file changes between the shards and the merge of a round after the
/// first, `merge` refuses, names the file, and says what helps: restoring it (or an empty
/// --shard-dir). Restoring it lets the same round merge.
#[test]
fn the_advice_after_a_changed_input_can_be_followed() {
    let tmp = setup();
    let dir = tmp.path();
    round(dir, 2, "sd", &[]);
    assert_eq!(qkd(&["merge", "sd"], dir).status.code(), Some(0));
    round(dir, 2, "sd", &[]);
    std::fs::write(dir.join("c.toml"), CAMPAIGN.replace("seed = 777", "seed = 778")).unwrap();
    let m = qkd(&["merge", "sd"], dir);
    assert_eq!(m.status.code(), Some(2));
    let advice = stderr(&m);
    assert!(advice.contains("c.toml") && advice.contains("restore"), "{advice}");
    // A shard of the changed search is refused with the same advice.
    let mut a = SEARCH.to_vec();
    a.extend(["--shard", "1/2", "--shard-dir", "sd", "--force"]);
    let o = qkd(&a, dir);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("c.toml") && stderr(&o).contains("restore"), "{}", stderr(&o));
    // Restored, the round merges.
    std::fs::write(dir.join("c.toml"), CAMPAIGN).unwrap();
    let m = qkd(&["merge", "sd"], dir);
    assert!(matches!(m.status.code(), Some(0 | 1)), "{}", stderr(&m));
}

/// `merge` refuses a unit whose counts do not fit the job: here 7 trials (verdicts adding
/// up to 1) where the chunk has 300, under a made-up attack label: exit 2 naming the shard,
/// the state untouched.
#[test]
fn merge_refuses_counts_that_do_not_fit_the_unit() {
    let tmp = setup();
    let dir = tmp.path();
    round(dir, 2, "sd", &[]);
    let p = dir.join("sd/tolerance-shard-1-of-2.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    let bad = text.replacen("trials = 300\nverdicts = [300, 0, 0, 0, 0]", "trials = 7\nverdicts = [1, 0, 0, 0, 0]", 1).replacen(
        "params = \"kind=phase-covariant;qber=0.04\"",
        "params = \"kind=made-up\"",
        1,
    );
    assert_ne!(bad, text, "the partial file's layout changed; update the test");
    std::fs::write(&p, bad).unwrap();
    let m = qkd(&["merge", "sd"], dir);
    assert_eq!(m.status.code(), Some(2), "a unit of 7 trials (1 counted) in a 300-trial chunk was merged: {}", stderr(&m));
    assert!(stderr(&m).contains("shard 1/2") && stderr(&m).contains("7 trials counted"), "{}", stderr(&m));
    assert!(!dir.join("sd/tolerance-state.toml").exists());
}
