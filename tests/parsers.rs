//! Robustness of every input format: arbitrary text and mutated valid files never panic;
//! they parse or give an error.

use proptest::prelude::*;
use proptest::test_runner::{Config, FileFailurePersistence, RngAlgorithm, TestRng, TestRunner};
use qkd_audit::attack::file::{builtin_catalogue, parse};
use qkd_audit::audit::setup::Setup;
use qkd_audit::audit::{Campaign, DEMO_CAMPAIGNS};
use qkd_audit::exact::eval::{evaluate, EvalOptions};
use qkd_audit::protocol::Protocol;
use std::collections::BTreeMap;

fn runner(cases: u32, seed: u8) -> TestRunner {
    let config = Config { cases, failure_persistence: Some(Box::new(FileFailurePersistence::Off)), ..Config::default() };
    TestRunner::new_with_rng(config, TestRng::from_seed(RngAlgorithm::ChaCha, &[seed; 32]))
}

fn exercise(text: &str) {
    if let Ok(file) = parse(text) {
        let built = if file.is_pulse_attack() {
            file.pulse_attack(&BTreeMap::new()).map(|_| ())
        } else {
            file.attack(&BTreeMap::new()).map(|_| ())
        };
        if built.is_ok() && !file.is_pulse_attack() {
            let a = file.attack(&BTreeMap::new()).unwrap();
            let _ = evaluate(&a, &EvalOptions::fast(Protocol::Bb84));
        }
    }
    if let Ok(t) = text.parse::<toml::Table>() {
        let _ = Setup::from_table(&t);
    }
    let _ = Campaign::parse(text, "fuzz", None);
}

/// Replaces the `index`-th number-like token of `text` with `replacement`.
fn mutate(text: &str, index: usize, replacement: &str) -> String {
    let mut out = String::new();
    let mut count = 0;
    let mut chars = text.char_indices().peekable();
    let bytes = text.as_bytes();
    while let Some((i, ch)) = chars.next() {
        let starts_number = ch.is_ascii_digit() && (i == 0 || !(bytes[i - 1] as char).is_ascii_alphanumeric());
        if starts_number {
            let mut end = i + 1;
            while let Some(&(j, c)) = chars.peek() {
                if c.is_ascii_digit() || c == '.' || c == 'e' || c == '-' {
                    end = j + c.len_utf8();
                    chars.next();
                } else {
                    break;
                }
            }
            if count == index {
                out.push_str(replacement);
            } else {
                out.push_str(&text[i..end]);
            }
            count += 1;
        } else {
            out.push(ch);
        }
    }
    out
}

#[test]
fn arbitrary_text_never_panics() {
    runner(2000, 1)
        .run(&"\\PC{0,300}", |s| {
            exercise(&s);
            Ok(())
        })
        .unwrap();
}

#[test]
fn mutated_valid_files_never_panic() {
    let mut texts: Vec<String> = builtin_catalogue().iter().map(|(_, t)| t.to_string()).collect();
    texts.push(include_str!("../attacks/custom-example.toml").to_string());
    texts.extend(DEMO_CAMPAIGNS.iter().map(|(_, t)| t.to_string()));
    let replacements = prop::sample::select(vec![
        "-1",
        "0",
        "1e308",
        "-1e308",
        "nan",
        "inf",
        "1e-320",
        "0.5",
        "2",
        "100000000000000000000",
        "\"x\"",
        "[]",
        "3.7",
    ]);
    let strategy = (0..texts.len(), 0usize..40, replacements);
    runner(1500, 2)
        .run(&strategy, |(t, index, rep)| {
            exercise(&mutate(&texts[t], index, rep));
            Ok(())
        })
        .unwrap();
}

/// `validate` reports every problem of a setup and of a campaign (and the files it names) in
/// one pass, in reading order, each with file, line, column and key.
#[test]
fn validate_reports_every_problem_in_one_pass() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("setup.toml"),
        "signals = 10\nabort_qber = 0.7\ncolour = \"red\"\n[detector]\nefficiency = 1.5\nmisalignment = \"x\"\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("camp.toml"),
        "name = \"ok\"\ntrials = 0\nsetup = \"setup.toml\"\nrules = [\"nope\"]\n[[attacks]]\nbuiltin = \"no-such\"\n\
         [[attacks]]\nfile = \"missing.toml\"\n",
    )
    .unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
        .current_dir(dir.path())
        .args(["validate", "camp.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    let expected = [
        "camp.toml:2:1: key `trials`",
        "camp.toml:4:1: key `rules[0]`",
        "camp.toml:6:1: key `attacks[0].builtin`",
        "camp.toml:8:1: key `attacks[1].file`: cannot read `missing.toml`",
        "setup.toml:1:1: key `signals`",
        "setup.toml:2:1: key `abort_qber`",
        "setup.toml:3:1: key `colour`",
        "setup.toml:5:1: key `detector.efficiency`",
        "setup.toml:6:1: key `detector.misalignment`: must be a finite number, not \"x\"",
    ];
    let lines: Vec<&str> = err.lines().filter(|l| l.starts_with("error: ") && l.contains(".toml:")).collect();
    assert_eq!(lines.len(), expected.len(), "{err}");
    for (line, want) in lines.iter().zip(expected) {
        assert!(line.contains(want), "expected {want:?} in {line:?}\n{err}");
    }
    assert!(err.contains("9 problem(s)"), "{err}");
}

/// `validate` reads rule files too (a formula or a program), and names the position of an
/// unknown name inside the formula.
#[test]
fn validate_reads_rule_files() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("bad.toml"), "name = \"bad\"\nkey_length = \"n * (1 - hh(e_x))\"\n").unwrap();
    let repo = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let good = repo.join("examples/rule-files/finite-uncertainty.toml");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
        .current_dir(dir.path())
        .args(["validate", good.to_str().unwrap(), "bad.toml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let (stdout, stderr) = (String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert!(stdout.contains("ok ") && stdout.contains("finite-uncertainty.toml"), "{stdout}");
    assert!(stderr.contains("bad.toml:2:24: key `key_length`: unknown function `hh`"), "{stderr}");
}

/// A sweep end out of range is reported at the key the user wrote (`to`), with the value
/// the sweep reaches; a misspelt table is reported at its header.
#[test]
fn sweep_ends_and_table_headers_are_located() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), "name = \"x\"\n[[attacks]]\nbuiltin = \"intercept-resend\"\nsteps = 4\nto = 3\n").unwrap();
    std::fs::write(dir.path().join("s.toml"), "signals = 1000\n[detectors]\nefficiency = 0.2\n").unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
        .current_dir(dir.path())
        .args(["validate", "c.toml", "s.toml"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("c.toml:5:1: key `attacks[0].to`: the sweep reaches fraction = 2"), "{err}");
    assert!(err.contains("s.toml:2:1: key `detectors`: unknown key"), "{err}");
}
