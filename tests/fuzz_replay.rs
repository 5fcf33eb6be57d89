//! The fuzz corpora, replayed on the stable toolchain as ordinary tests, plus a seeded
//! mutation sweep: every input format (campaign, setup, attack file, `--set` values) must
//! reject bad input with an `Error` that says where (a key or a line), and never panic.
//! The coverage-guided fuzzers in `fuzz/` (cargo fuzz, nightly) feed the same entry points;
//! a crash they find becomes a file in `fuzz/corpus/<target>/` and so a test here.

use qkd_audit::attack::file as attack_file;
use qkd_audit::audit::setup::Setup;
use qkd_audit::audit::Campaign;
use qkd_audit::cli::common::parse_sets;
use qkd_audit::Error;
use rand::{Rng, SeedableRng};
use std::path::{Path, PathBuf};

/// One input format: its corpus folder and how it is parsed.
struct Target {
    name: &'static str,
    parse: fn(&str) -> Result<(), Vec<Error>>,
}

fn campaign(text: &str) -> Result<(), Vec<Error>> {
    Campaign::parse_all(text, "fuzz", None).map(|_| ())
}

fn setup(text: &str) -> Result<(), Vec<Error>> {
    Setup::parse_all(&qkd_audit::input::parse_toml(text).map_err(|e| vec![e])?).map(|_| ())
}

fn attack(text: &str) -> Result<(), Vec<Error>> {
    let file = attack_file::parse(text)?;
    file.build(&Default::default()).map(|_| ()).map_err(|e| vec![e])
}

fn sets(text: &str) -> Result<(), Vec<Error>> {
    let given: Vec<String> = text.lines().map(str::to_string).collect();
    let sets = parse_sets(&given).map_err(|e| vec![e])?;
    qkd_audit::attack::Attack::builtin("intercept-resend", &sets).map(|_| ()).map_err(|e| vec![e])
}

const TARGETS: &[Target] = &[
    Target { name: "campaign", parse: campaign },
    Target { name: "setup", parse: setup },
    Target { name: "attack", parse: attack },
    Target { name: "set", parse: sets },
];

fn corpus(target: &str) -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz/corpus").join(target);
    let mut files: Vec<PathBuf> =
        std::fs::read_dir(&dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display())).map(|e| e.unwrap().path()).collect();
    files.sort();
    files
}

/// Parses `text`; a panic, a rejection without any error, or an error that names neither
/// a key nor a line fails.
fn exercise(target: &Target, text: &str, origin: &str) {
    let outcome = std::panic::catch_unwind(|| (target.parse)(text));
    match outcome {
        Err(_) => panic!("{} panicked on {origin}:\n{text}", target.name),
        Ok(Err(errs)) => {
            assert!(!errs.is_empty(), "{}: rejected without an error on {origin}", target.name);
            for e in errs {
                assert!(
                    e.key().is_some() || e.location().is_some(),
                    "{}: an error that names neither a key nor a line on {origin}: {e}\n{text}",
                    target.name
                );
            }
        }
        Ok(Ok(())) => {}
    }
}

/// A seeded mutation of `text`: a byte changed, a span deleted or duplicated, a line
/// dropped, or a number replaced by an extreme one.
fn mutate(text: &str, rng: &mut impl Rng) -> String {
    let mut bytes = text.as_bytes().to_vec();
    if bytes.is_empty() {
        return "=".into();
    }
    let at = rng.gen_range(0..bytes.len());
    match rng.gen_range(0..6) {
        0 => bytes[at] = rng.gen(),
        1 => {
            let end = (at + rng.gen_range(1..40)).min(bytes.len());
            bytes.drain(at..end);
        }
        2 => {
            let end = (at + rng.gen_range(1..40)).min(bytes.len());
            let span: Vec<u8> = bytes[at..end].to_vec();
            bytes.splice(at..at, span);
        }
        3 => {
            let lines: Vec<&str> = text.lines().collect();
            let drop = rng.gen_range(0..lines.len().max(1));
            return lines.iter().enumerate().filter(|(i, _)| *i != drop).map(|(_, l)| *l).collect::<Vec<_>>().join("\n");
        }
        4 => {
            let extreme = ["1e308", "-0", "nan", "inf", "18446744073709551615", "-1", "0", "1e-320", "\"\\u0000\""][rng.gen_range(0..9)];
            let text = String::from_utf8_lossy(&bytes).into_owned();
            if let Some(pos) = text.find(|c: char| c.is_ascii_digit()) {
                let end = text[pos..].find(|c: char| !(c.is_ascii_alphanumeric() || c == '.' || c == '-')).map_or(text.len(), |e| pos + e);
                return format!("{}{extreme}{}", &text[..pos], &text[end..]);
            }
            return text;
        }
        _ => bytes.truncate(at),
    }
    String::from_utf8_lossy(&bytes).into_owned()
}

#[test]
fn every_corpus_file_parses_without_panic() {
    for target in TARGETS {
        let files = corpus(target.name);
        assert!(!files.is_empty(), "empty corpus for {}", target.name);
        for f in files {
            let text = std::fs::read_to_string(&f).unwrap();
            exercise(target, &text, &f.display().to_string());
        }
    }
}

#[test]
fn seeded_mutations_of_the_corpus_never_panic() {
    // 400 mutations (of one to three steps) per corpus file, reproducible by seed.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
    for target in TARGETS {
        for f in corpus(target.name) {
            let text = std::fs::read_to_string(&f).unwrap();
            for i in 0..400 {
                let mut m = mutate(&text, &mut rng);
                for _ in 0..rng.gen_range(0..3) {
                    m = mutate(&m, &mut rng);
                }
                exercise(target, &m, &format!("mutation {i} of {}", f.display()));
            }
        }
    }
}
