//! Rule files and rule programs: the written-out `finite-uncertainty` formula and the
//! example program reproduce the built-in rule over a campaign; a formula without its
//! sampling term is caught leaking at small blocks; every way a program can fail stops the
//! run with exit status 2, naming the command, the trial and the last bytes it wrote.

use qkd_audit::audit::rules::block_vars::VARIABLES;
use qkd_audit::audit::rules::formula::FUNCTIONS;
use qkd_audit::audit::{engine, Campaign, PointResult};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().expect("binary runs")
}

/// The Rust test double, built by `cargo test` as the example `rule_double`.
fn double() -> PathBuf {
    let exe = std::env::current_exe().unwrap();
    let dir = exe.parent().unwrap().parent().unwrap();
    let path = dir.join("examples").join(format!("rule_double{}", std::env::consts::EXE_SUFFIX));
    assert!(path.is_file(), "the test double {} is built by `cargo test`", path.display());
    path
}

/// A small single-photon campaign in `dir` judged under the built-in rule and `rules`.
fn campaign_text(rules: &[String], signals: u64, trials: u64) -> String {
    let rules: Vec<String> = rules.iter().map(|r| format!("\"{r}\"")).collect();
    format!(
        "name = \"rules-test\"\nseed = 11\ntrials = {trials}\nrules = [{}]\n[setup]\nsignals = {signals}\nbasis_z_probability = 0.9\n\
         test_count = 100\nabort_qber = 0.05\nkey_rule = \"finite-uncertainty\"\n[[attacks]]\nbuiltin = \"phase-covariant-cloner\"\n\
         steps = 5\nfrom = 0.03\nto = 0.06\n[[attacks]]\nbuiltin = \"intercept-resend\"\n",
        rules.join(", ")
    )
}

fn file_rule(path: &Path) -> String {
    format!("file:{}", path.display())
}

fn load(dir: &Path, text: &str) -> Campaign {
    let path = dir.join("campaign.toml");
    std::fs::write(&path, text).unwrap();
    Campaign::load_all(&path).unwrap_or_else(|e| panic!("{e:?}"))
}

/// Every row of `rule` as JSON, with the rule's name left out, and the causes of aborts too:
/// a rule file's `abort_if` is the rule's own condition, where a built-in rule leaves the
/// decision to the setup's threshold (the same blocks abort; the summary names them apart).
fn rows(results: &[PointResult], rule: &str) -> Vec<String> {
    results
        .iter()
        .filter(|r| r.rule.name() == rule)
        .map(|r| {
            let mut v = serde_json::to_value(&r.stats).unwrap();
            v.as_object_mut().unwrap().remove("abort_reasons");
            format!("{} {v}", r.index)
        })
        .collect()
}

#[test]
fn the_written_out_formula_and_the_example_program_reproduce_the_built_in_rule_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let formula = repo().join("examples/rule-files/finite-uncertainty.toml");
    let program = repo().join("examples/rule-programs/keylen.toml");
    let double_rule = dir.path().join("double.toml");
    std::fs::write(&double_rule, format!("name = \"double\"\ncommand = [{:?}]\n", double().display().to_string())).unwrap();
    let c = load(dir.path(), &campaign_text(&[file_rule(&formula), file_rule(&program), file_rule(&double_rule)], 100_000, 120));
    assert_eq!(c.rules.len(), 4);
    let results = engine::run(&c, &|| {}).unwrap();
    let built_in = rows(&results, "finite-uncertainty");
    assert_eq!(built_in.len(), 16);
    // Keys were produced and some blocks aborted, so the comparison covers both.
    assert!(results.iter().any(|r| r.stats.key_length_mean > 0.0) && results.iter().any(|r| r.stats.abort_probability > 0.0));
    for rule in ["finite-uncertainty-file", "keylen-py", "double"] {
        assert_eq!(rows(&results, rule), built_in, "{rule}");
    }
}

#[test]
fn a_formula_without_its_sampling_term_leaks_at_small_blocks_only() {
    let dir = tempfile::tempdir().unwrap();
    let leaky = file_rule(&repo().join("examples/rule-files/no-sampling-term.toml"));
    // 10⁵ signals: about 10³ X bits estimate the phase error, and blocks whose rate lies
    // above the threshold pass by chance; the rule then charges only h(abort_qber).
    let small = engine::run(&load(dir.path(), &campaign_text(std::slice::from_ref(&leaky), 100_000, 200)), &|| {}).unwrap();
    let leaks = |rs: &[PointResult], rule: &str| rs.iter().filter(|r| r.rule.name() == rule && r.stats.leak_probability > 0.0).count();
    assert!(leaks(&small, "no-sampling-term") >= 2, "the leaky formula must be caught");
    assert_eq!(leaks(&small, "finite-uncertainty"), 0);
    // 10¹⁰ signals: the estimate is sharp, so the same formula no longer leaks.
    let large = engine::run(&load(dir.path(), &campaign_text(&[leaky], 10_000_000_000, 50)), &|| {}).unwrap();
    assert_eq!(leaks(&large, "no-sampling-term"), 0);
    assert!(large.iter().any(|r| r.rule.name() == "no-sampling-term" && r.stats.key_length_mean > 0.0));
}

#[test]
fn rule_files_are_named_relative_to_the_file_that_names_them() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(dir.path().join("sys/rules")).unwrap();
    std::fs::copy(repo().join("examples/rule-files/finite-uncertainty.toml"), dir.path().join("sys/rules/fu.toml")).unwrap();
    std::fs::write(dir.path().join("sys/setup.toml"), "signals = 100000\nkey_rule = \"file:rules/fu.toml\"\n").unwrap();
    let c = load(dir.path(), "name = \"x\"\ntrials = 5\nsetup = \"sys/setup.toml\"\nrules = [\"file:sys/rules/fu.toml\", \"asymptotic\"]\n[[attacks]]\nbuiltin = \"breidbart\"\n");
    let names: Vec<&str> = c.rules.iter().map(|r| r.name()).collect();
    assert_eq!(names, ["finite-uncertainty-file", "asymptotic"]);
    assert!(c.inputs.iter().any(|(o, _)| o.ends_with("fu.toml")), "the rule file is an input of the manifest");
}

#[test]
fn bad_rule_files_are_reported_with_file_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("bad.toml"),
        "name = \"bad\"\nkey_length = \"n * (1 - h(e_x + delta)) - leak_ec\"\nabort_if = \"sqrtt(e_x) > 1\"\n",
    )
    .unwrap();
    std::fs::write(dir.path().join("dup.toml"), "name = \"asymptotic\"\nkey_length = \"n\"\n").unwrap();
    std::fs::write(
        dir.path().join("c.toml"),
        "name = \"x\"\nrules = [\"file:bad.toml\", \"file:dup.toml\", \"file:missing.toml\"]\n[[attacks]]\nbuiltin = \"breidbart\"\n",
    )
    .unwrap();
    let out = qkd(&["validate", "c.toml"], dir.path());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("bad.toml:2:32") && err.contains("unknown variable `delta`"), "{err}");
    assert!(err.contains("bad.toml:3:13") && err.contains("unknown function `sqrtt`"), "{err}");
    assert!(err.contains("is the name of a built-in rule"), "{err}");
    assert!(err.contains("missing.toml"), "{err}");
}

/// A rule file for the test double in `mode`, failing at trial 3 of every point.
fn run_double(dir: &Path, mode: &str, timeout_s: f64, extra: &[&str]) -> Output {
    let mut command = vec![double().display().to_string(), "--mode".into(), mode.into(), "--at".into(), "3".into()];
    command.extend(extra.iter().map(|s| s.to_string()));
    let command: Vec<String> = command.iter().map(|a| format!("{a:?}")).collect();
    std::fs::write(dir.join("double.toml"), format!("name = \"double\"\ncommand = [{}]\ntimeout_s = {timeout_s}\n", command.join(", ")))
        .unwrap();
    std::fs::write(dir.join("c.toml"), campaign_text(&["file:double.toml".into()], 100_000, 8)).unwrap();
    qkd(&["run", "c.toml", "--results-dir", "out", "--force", "--quiet"], dir)
}

#[test]
fn every_failure_of_a_program_stops_the_run_naming_command_trial_and_output() {
    for (mode, expected, trial) in [
        ("crash", "ended its output before answering", Some("trial 3")),
        ("hang", "did not answer within the batch timeout", Some("trial 3")),
        ("garbage", "not a JSON object", Some("trial 3")),
        ("nan", "NaN", Some("trial 3")),
        ("swap", "answered point 0 trial 1 where point 0 trial 0 was due", Some("trial 0")),
        ("short", "ended its output before answering", Some("trial 7")),
        ("error", "reported an error: cannot size the key", Some("trial 3")),
        ("oversize", "more than the block's n =", Some("trial 3")),
        ("extra", "wrote more answers than blocks", None),
    ] {
        let dir = tempfile::tempdir().unwrap();
        let out = run_double(dir.path(), mode, 1.0, &[]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{mode}: {err}");
        assert!(err.contains("rule_double --mode") && err.contains(expected), "{mode}: {err}");
        if let Some(t) = trial {
            assert!(err.contains(&format!("point 0 {t}")), "{mode}: {err}");
        }
        assert!(err.contains("the last bytes it wrote"), "{mode}: {err}");
        if mode == "crash" {
            assert!(err.contains("crashing as asked"), "the end of stderr is shown: {err}");
        }
        if mode == "garbage" {
            assert!(err.contains("this is not json"), "{err}");
        }
        assert!(!dir.path().join("out/rules-test").exists(), "{mode}: no partial results");
    }
}

/// A program that answers more key bits than the block has, leaving the abort decision to
/// the setup, is refused only for a block that goes on to key: at a point where the setup's
/// threshold aborts every block (intercept-resend on every signal, QBER 25 %) its length is
/// never used, and the run goes on, as for a formula.
#[test]
fn an_oversize_answer_for_a_block_the_setup_aborts_is_not_used() {
    let dir = tempfile::tempdir().unwrap();
    let command = [double().display().to_string(), "--mode".into(), "oversize".into(), "--at".into(), "3".into()];
    let command: Vec<String> = command.iter().map(|a| format!("{a:?}")).collect();
    std::fs::write(dir.path().join("double.toml"), format!("name = \"double\"\ncommand = [{}]\n", command.join(", "))).unwrap();
    let text = campaign_text(&["file:double.toml".into()], 100_000, 8);
    let text = text.replace("builtin = \"intercept-resend\"\n", "builtin = \"intercept-resend\"\nfrom = 1\nto = 1\nsteps = 1\n");
    let only_aborting = text[..text.find("[[attacks]]").unwrap()].to_string() + &text[text.rfind("[[attacks]]").unwrap()..];
    std::fs::write(dir.path().join("c.toml"), &only_aborting).unwrap();
    let out = qkd(&["run", "c.toml", "--results-dir", "out", "--quiet"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let table = std::fs::read_to_string(dir.path().join("out/rules-test/attack_vs_bound.csv")).unwrap();
    assert!(table.lines().skip(1).all(|l| l.contains(",aborted,")), "every block aborts: {table}");
}

#[test]
fn a_program_run_is_logged_recorded_and_independent_of_threads() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_double(dir.path(), "finite-uncertainty", 60.0, &["--stderr"]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("out/rules-test");
    let log = std::fs::read_to_string(folder.join("rule-program-double.log")).unwrap();
    assert!(log.contains("batch of") && log.contains("0 3: n="), "{log}");
    let manifest: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(folder.join("manifest.json")).unwrap()).unwrap();
    let p = &manifest["rule_programs"][0];
    assert_eq!(p["version_output"], "rule_double 1.0");
    let sha = p["files"][0]["sha256"].as_str().unwrap();
    assert_eq!(sha.len(), 64, "{p}");
    let table = |threads: &str| {
        let o = qkd(&["run", "c.toml", "--results-dir", &format!("t{threads}"), "--quiet", "--threads", threads], dir.path());
        assert_eq!(o.status.code(), Some(0));
        std::fs::read(dir.path().join(format!("t{threads}/rules-test/attack_vs_bound.csv"))).unwrap()
    };
    assert_eq!(table("1"), table("2"));
}

#[test]
fn the_readme_documents_every_variable_and_function() {
    let readme = std::fs::read_to_string(repo().join("README.md")).unwrap();
    for v in VARIABLES.iter() {
        assert!(readme.contains(&format!("| `{}` |", v.name)), "README lacks variable `{}`", v.name);
    }
    for f in FUNCTIONS {
        assert!(readme.contains(&format!("`{}(", f.name)), "README lacks function `{}`", f.name);
    }
    let spec = std::fs::read_to_string(repo().join("docs/rule-programs.md")).unwrap();
    assert!(spec.contains("\"version\": 1") && spec.contains("key_bits") && spec.contains("error"));
}

#[test]
fn a_nan_key_length_stops_the_run_naming_rule_and_trial() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("nan.toml"), "name = \"nan-rule\"\nkey_length = \"n / (k - k) * 0\"\n").unwrap();
    std::fs::write(dir.path().join("c.toml"), campaign_text(&["file:nan.toml".into()], 100_000, 4)).unwrap();
    let out = qkd(&["run", "c.toml", "--results-dir", "out", "--quiet"], dir.path());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("nan.toml") && err.contains("key_length is NaN") && err.contains("point 0 trial 0"), "{err}");
    assert!(!dir.path().join("out/rules-test").exists());
}

/// A formula that gives more key than the block has key bits (+∞ from a division by zero,
/// or 1e30) stops the run too: it is never floored to "no key" nor saturated into a length.
#[test]
fn an_infinite_or_impossible_key_length_stops_the_run() {
    for formula in ["1/0", "1e30"] {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("inf.toml"), format!("name = \"inf-rule\"\nkey_length = \"{formula}\"\n")).unwrap();
        std::fs::write(dir.path().join("c.toml"), campaign_text(&["file:inf.toml".into()], 100_000, 4)).unwrap();
        let out = qkd(&["run", "c.toml", "--results-dir", "out", "--quiet"], dir.path());
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{formula}: {err}");
        assert!(err.contains("inf.toml") && err.contains("more than the block's n =") && err.contains("point 0 trial 0"), "{err}");
        assert!(!dir.path().join("out").join("rules-test").exists());
    }
}

#[test]
fn a_rule_may_take_the_abort_decision_from_the_setup() {
    // abort_if = "0" never aborts, a program answering abort = true always does; without
    // either, the setup's threshold decides (the built-in rule aborts some blocks here).
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("never.toml"), "name = \"never-aborts\"\nkey_length = \"0\"\nabort_if = \"0\"\n").unwrap();
    let script = "import sys, json\nfor line in sys.stdin:\n    for b in json.loads(line)['blocks']:\n        print(json.dumps({'point': b['point'], 'trial': b['trial'], 'key_bits': 5, 'abort': True}))\n    sys.stdout.flush()\n";
    std::fs::write(dir.path().join("always.py"), script).unwrap();
    std::fs::write(dir.path().join("always.toml"), "name = \"always-aborts\"\ncommand = [\"python3\", \"always.py\"]\n").unwrap();
    let c = load(dir.path(), &campaign_text(&["file:never.toml".into(), "file:always.toml".into()], 100_000, 20));
    let results = engine::run(&c, &|| {}).unwrap();
    let aborts = |rule: &str| results.iter().filter(|r| r.rule.name() == rule).map(|r| r.stats.abort_probability).collect::<Vec<f64>>();
    assert!(aborts("finite-uncertainty").iter().any(|&p| p > 0.0 && p < 1.0));
    assert!(aborts("never-aborts").iter().all(|&p| p == 0.0));
    assert!(aborts("always-aborts").iter().all(|&p| p == 1.0));
}
