//! Finite-key audit campaigns: samplers, rules against known attacks, verdicts,
//! determinism, and the `run` command.

use qkd_audit::attack::{Attack, Value};
use qkd_audit::audit::rules::KeyRule;
use qkd_audit::audit::sample::{sample_block, BlockCounts, Sampler};
use qkd_audit::audit::setup::{Setup, TestSample};
use qkd_audit::audit::trial::{judge, Verdict};
use qkd_audit::exact::eval::{evaluate, EvalOptions};
use qkd_audit::exact::signal::SignalModel;
use qkd_audit::numeric::linalg::Tolerance;
use qkd_audit::numeric::rng::trial_rng;
use qkd_audit::protocol::Protocol;
use qkd_audit::quantum::channel::KrausChannel;
use rand::{Rng, SeedableRng};
use statrs::distribution::{ChiSquared, ContinuousCDF};
use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

fn attack(family: &str, params: &[(&str, Value)]) -> Attack {
    let given: BTreeMap<String, Value> = params.iter().map(|(k, v)| (k.to_string(), v.clone())).collect();
    Attack::builtin(family, &given).unwrap()
}

fn cloner(d: f64) -> Attack {
    attack("cloner", &[("kind", Value::Text("phase-covariant".into())), ("qber", Value::Num(d))])
}

/// Runs `trials` blocks and returns the verdicts.
fn verdicts(a: &Attack, setup: &Setup, trials: u64, seed: u64) -> Vec<Verdict> {
    let e = evaluate(a, &EvalOptions::fast(setup.protocol)).unwrap();
    let model = SignalModel::new(a, setup.protocol, &setup.basis_probabilities());
    let ts = |z: u64| setup.test_sample.size(z);
    (0..trials)
        .map(|t| {
            let mut rng = trial_rng(seed, 0, t);
            judge(
                &sample_block(Sampler::Count, &model, setup.signals, &ts, &mut rng),
                setup.key_rule.clone(),
                &setup.rule_params(),
                e.h_x_given_e,
            )
            .verdict
        })
        .collect()
}

/// Summary statistics of a block used to compare the samplers.
fn features(c: &BlockCounts) -> [u64; 6] {
    [c.sifted[0], c.key_errors(), c.test_z_errors, c.errors[1], c.eve_correct_key(), c.sifted[2]]
}

/// Two-sample chi-square test of homogeneity on binned values; returns the p-value.
fn homogeneity_p(a: &[u64], b: &[u64]) -> f64 {
    let mut pooled: Vec<u64> = a.iter().chain(b).copied().collect();
    pooled.sort_unstable();
    // Up to 10 bins at pooled deciles (merging equal edges).
    let mut edges: Vec<u64> = (1..10).map(|i| pooled[i * pooled.len() / 10]).collect();
    edges.dedup();
    let bin = |x: u64| edges.iter().filter(|&&e| x >= e).count();
    let nb = edges.len() + 1;
    let (mut ca, mut cb) = (vec![0f64; nb], vec![0f64; nb]);
    for &x in a {
        ca[bin(x)] += 1.0;
    }
    for &x in b {
        cb[bin(x)] += 1.0;
    }
    let (na, nbb) = (a.len() as f64, b.len() as f64);
    let mut chi = 0.0;
    let mut df = 0;
    for i in 0..nb {
        let tot = ca[i] + cb[i];
        if tot == 0.0 {
            continue;
        }
        df += 1;
        let ea = tot * na / (na + nbb);
        let eb = tot * nbb / (na + nbb);
        chi += (ca[i] - ea).powi(2) / ea + (cb[i] - eb).powi(2) / eb;
    }
    if df <= 1 {
        return 1.0;
    }
    1.0 - ChiSquared::new((df - 1) as f64).unwrap().cdf(chi)
}

#[test]
fn count_and_round_samplers_agree_in_distribution() {
    // Chi-square homogeneity test per statistic at a fixed seed; significance 1e-3 per
    // statistic (the test fails if the samplers differ in distribution; with fixed seeds it
    // is deterministic).
    for (a, protocol, probs) in [
        (
            attack("cloner", &[("kind", Value::Text("universal".into())), ("qber", Value::Num(0.1))]),
            Protocol::SixState,
            vec![0.5, 0.25, 0.25],
        ),
        (attack("intercept-resend", &[("fraction", Value::Num(0.4))]), Protocol::Bb84, vec![0.7, 0.3]),
    ] {
        let model = SignalModel::new(&a, protocol, &probs);
        let ts = |z: u64| (z as f64 * 0.2) as u64;
        let draw = |sampler: Sampler, seed: u64| -> Vec<[u64; 6]> {
            (0..3000).map(|t| features(&sample_block(sampler, &model, 2000, &ts, &mut trial_rng(seed, 1, t)))).collect()
        };
        let count = draw(Sampler::Count, 11);
        let round = draw(Sampler::Round, 12);
        for f in 0..6 {
            let xa: Vec<u64> = count.iter().map(|v| v[f]).collect();
            let xb: Vec<u64> = round.iter().map(|v| v[f]).collect();
            let p = homogeneity_p(&xa, &xb);
            assert!(p > 1e-3, "statistic {f} differs between samplers: p = {p}");
        }
    }
}

#[test]
fn sampler_comparison_detects_a_wrong_distribution() {
    // The same test must reject two different attacks, or it could not fail.
    let m1 = SignalModel::new(&cloner(0.05), Protocol::Bb84, &[0.5, 0.5]);
    let m2 = SignalModel::new(&cloner(0.06), Protocol::Bb84, &[0.5, 0.5]);
    let ts = |z: u64| z / 5;
    let xa: Vec<u64> = (0..3000).map(|t| features(&sample_block(Sampler::Count, &m1, 2000, &ts, &mut trial_rng(1, 1, t)))[1]).collect();
    let xb: Vec<u64> = (0..3000).map(|t| features(&sample_block(Sampler::Round, &m2, 2000, &ts, &mut trial_rng(2, 1, t)))[1]).collect();
    assert!(homogeneity_p(&xa, &xb) < 1e-3);
}

#[test]
fn monte_carlo_rates_fall_in_intervals_around_exact_values() {
    for sampler in [Sampler::Count, Sampler::Round] {
        let a = attack("entangling-probe", &[("qber", Value::Num(0.08))]);
        let e = evaluate(&a, &EvalOptions::fast(Protocol::Bb84)).unwrap();
        let model = SignalModel::new(&a, Protocol::Bb84, &[0.5, 0.5]);
        let ts = |z: u64| z / 10;
        let (mut key, mut err, mut eve, mut k, mut xerr) = (0u64, 0u64, 0u64, 0u64, 0u64);
        for t in 0..400 {
            let c = sample_block(sampler, &model, 5000, &ts, &mut trial_rng(5, 0, t));
            key += c.key_bits();
            err += c.key_errors();
            eve += c.eve_correct_key();
            k += c.sifted[1];
            xerr += c.errors[1];
        }
        // 5 standard errors of a binomial proportion.
        let within = |hits: u64, n: u64, p: f64| ((hits as f64 / n as f64) - p).abs() < 5.0 * (p * (1.0 - p) / n as f64).sqrt();
        assert!(within(err, key, e.qber_z), "{sampler:?} QBER_Z");
        assert!(within(xerr, k, e.qber_x), "{sampler:?} QBER_X");
        assert!(within(eve, key, e.p_guess_z), "{sampler:?} Eve's guessing rate");
    }
}

#[test]
fn proven_rules_never_leak_over_random_attacks_block_sizes_and_seeds() {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2026);
    let mut keyed = [0usize; 2];
    for case in 0..120 {
        let a = match case % 4 {
            0 => cloner(rng.gen_range(0.0..0.12)),
            1 => {
                let d_e = rng.gen_range(2..=4);
                let v = KrausChannel::random_interaction(d_e, rng.gen_range(0.0..0.35), &mut rng);
                Attack::from_kraus("interaction", d_e, vec![v], Tolerance::default()).unwrap()
            }
            2 => attack("entangling-probe", &[("qber", Value::Num(rng.gen_range(0.0..0.1)))]),
            _ => attack("intercept-resend", &[("fraction", Value::Num(rng.gen_range(0.0..0.4)))]),
        };
        let signals = 10f64.powf(rng.gen_range(3.0..9.0)).round() as u64;
        for (ri, rule) in [KeyRule::FiniteUncertainty, KeyRule::GameMinEntropy].into_iter().enumerate() {
            let setup = Setup {
                signals,
                basis_z_probability: rng.gen_range(0.5..0.95),
                test_sample: TestSample::Fraction(rng.gen_range(0.0..0.2)),
                abort_qber: rng.gen_range(0.01..0.12),
                key_rule: rule.into(),
                ..Setup::default()
            };
            let v = verdicts(&a, &setup, 20, case);
            assert!(!v.contains(&Verdict::Leak), "{rule} leaked: case {case}, signals {signals}, {:?}", a.label);
            keyed[ri] += v.iter().filter(|x| matches!(x, Verdict::Secure | Verdict::Inconclusive)).count();
        }
    }
    // The property must not hold vacuously: many trials produced keys.
    assert!(keyed[0] > 500 && keyed[1] > 200, "too few trials with a key: {keyed:?}");
}

#[test]
fn asymptotic_rule_leaks_on_small_blocks_under_the_optimal_collective_attack() {
    // Phase-covariant cloner at D = 0.03, 10^4 signals, small test sample: the rule trusts
    // the sampled phase error, and whenever it falls below the true one the key exceeds
    // what the attack leaves secret.
    let setup = Setup {
        signals: 10_000,
        basis_z_probability: 0.5,
        test_sample: TestSample::Fraction(0.05),
        abort_qber: 0.11,
        key_rule: KeyRule::Asymptotic.into(),
        ..Setup::default()
    };
    let v = verdicts(&cloner(0.03), &setup, 400, 3);
    let leaks = v.iter().filter(|x| **x == Verdict::Leak).count();
    assert!(leaks >= 80, "only {leaks} of 400 trials leaked");
}

#[test]
fn individual_rule_leaks_under_the_phase_covariant_cloner_at_five_percent() {
    let setup = Setup { signals: 1_000_000, key_rule: KeyRule::Individual.into(), abort_qber: 0.11, ..Setup::default() };
    let v = verdicts(&cloner(0.05), &setup, 100, 4);
    let leaks = v.iter().filter(|x| **x == Verdict::Leak).count();
    assert!(leaks >= 95, "only {leaks} of 100 trials leaked");
}

#[test]
fn full_intercept_resend_is_caught_and_abort_rises_with_fraction() {
    let setup = Setup { signals: 100_000, abort_qber: 0.05, test_sample: TestSample::Fraction(0.1), ..Setup::default() };
    let v = verdicts(&attack("intercept-resend", &[]), &setup, 200, 6);
    assert!(v.iter().all(|x| *x == Verdict::Aborted));
    let mut prev: Option<(f64, f64)> = None;
    for i in 0..=10 {
        let f = 0.04 * i as f64;
        let v = verdicts(&attack("intercept-resend", &[("fraction", Value::Num(f))]), &setup, 200, 7 + i);
        let aborted = v.iter().filter(|x| **x == Verdict::Aborted).count() as u64;
        let ci = qkd_audit::audit::stats::clopper_pearson(aborted, 200);
        if let Some((lo_prev, _)) = prev {
            assert!(ci.1 >= lo_prev, "abort probability falls at fraction {f}");
        }
        prev = Some(ci);
    }
}

fn qkd(args: &[&str], dir: &Path, threads: &str) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).env("RAYON_NUM_THREADS", threads).output().unwrap()
}

const SMALL_CAMPAIGN: &str = r#"
name = "small"
seed = 7
trials = 50
[setup]
signals = 20000
basis_z_probability = 0.5
test_fraction = 0.05
abort_qber = 0.11
key_rule = "RULE"
[[attacks]]
builtin = "phase-covariant-cloner"
steps = 3
to = 0.04
[[attacks]]
builtin = "intercept-resend"
steps = 3
"#;

#[test]
fn run_is_deterministic_across_threads_and_refuses_to_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), SMALL_CAMPAIGN.replace("RULE", "finite-uncertainty")).unwrap();
    let one = qkd(&["run", "c.toml", "--results-dir", "r1"], dir.path(), "1");
    assert_eq!(one.status.code(), Some(0), "{}", String::from_utf8_lossy(&one.stderr));
    let two = qkd(&["run", "c.toml", "--results-dir", "r2"], dir.path(), "2");
    assert_eq!(two.status.code(), Some(0));
    for f in ["attack_vs_bound.csv", "summary.md", "eve_information.svg", "abort_leak_intercept-resend.svg"] {
        let a = std::fs::read(dir.path().join("r1/small").join(f)).unwrap();
        let b = std::fs::read(dir.path().join("r2/small").join(f)).unwrap();
        assert!(a == b, "{f} differs between 1 and 2 threads");
    }
    let m: serde_json::Value = serde_json::from_slice(&std::fs::read(dir.path().join("r1/small/manifest.json")).unwrap()).unwrap();
    assert_eq!(m["seed"], 7);
    assert_eq!(m["inputs"][0]["sha256"].as_str().unwrap().len(), 64);
    let again = qkd(&["run", "c.toml", "--results-dir", "r1"], dir.path(), "2");
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    let forced = qkd(&["run", "c.toml", "--results-dir", "r1", "--force"], dir.path(), "2");
    assert_eq!(forced.status.code(), Some(0));
    let leftovers: Vec<_> = std::fs::read_dir(dir.path().join("r1")).unwrap().map(|e| e.unwrap().file_name()).collect();
    assert_eq!(leftovers.len(), 1, "temporary folders left behind: {leftovers:?}");
}

#[test]
fn leak_verdict_exits_one_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), SMALL_CAMPAIGN.replace("RULE", "individual")).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stderr));
    let summary = std::fs::read_to_string(dir.path().join("results/small/summary.md")).unwrap();
    assert!(summary.contains("Verdict: LEAK"), "{summary}");
    let csv = std::fs::read_to_string(dir.path().join("results/small/attack_vs_bound.csv")).unwrap();
    assert!(csv.lines().next().unwrap().ends_with(",verdict,note"));
    assert!(csv.contains(",leak,"));
}

#[test]
fn a_rules_list_never_drops_the_systems_own_rule() {
    // Regression: `rules` used to replace the setup's key_rule, so a leaking system rule
    // vanished from the table and the exit status when comparison rules were listed.
    let dir = tempfile::tempdir().unwrap();
    let text = SMALL_CAMPAIGN.replace("RULE", "individual").replace("trials = 50", "trials = 50\nrules = [\"finite-uncertainty\"]");
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stderr));
    let csv = std::fs::read_to_string(dir.path().join("results/small/attack_vs_bound.csv")).unwrap();
    assert!(csv.lines().any(|l| l.contains(",individual,") && l.contains(",leak,")), "{csv}");
    assert!(csv.contains(",finite-uncertainty,"));
}

#[test]
fn a_point_whose_trials_give_no_key_is_no_key_not_secure() {
    // Regression: points with mean key 0 were called `secure`.
    let dir = tempfile::tempdir().unwrap();
    let text = SMALL_CAMPAIGN.replace("RULE", "finite-uncertainty").replace("signals = 20000", "signals = 300");
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let csv = std::fs::read_to_string(dir.path().join("results/small/attack_vs_bound.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (mean, verdict) = (col("key_length_mean_bits"), col("verdict"));
    for line in csv.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells[mean], "0", "{line}");
        assert!(matches!(cells[verdict], "no-key" | "aborted"), "{line}");
    }
    assert!(csv.contains(",no-key,"), "{csv}");
    let summary = std::fs::read_to_string(dir.path().join("results/small/summary.md")).unwrap();
    assert!(!summary.contains("| secure |") && summary.contains("**Verdict: no key.**"), "{summary}");
}

#[test]
fn a_closed_or_full_stdout_keeps_the_status_and_never_panics() {
    // Regression: `run leaky.toml --quiet | true` exited 101 (a panic), losing the finding.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), SMALL_CAMPAIGN.replace("RULE", "individual")).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
        .args(["run", "c.toml", "--quiet", "--results-dir", "closed"])
        .current_dir(dir.path())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stderr));
    if Path::new("/dev/full").exists() {
        let full = std::fs::OpenOptions::new().write(true).open("/dev/full").unwrap();
        let out = Command::new(env!("CARGO_BIN_EXE_qkd-audit")).arg("thresholds").stdout(full).output().unwrap();
        assert_eq!(out.status.code(), Some(2));
        assert!(String::from_utf8_lossy(&out.stderr).contains("cannot write to stdout"), "{}", String::from_utf8_lossy(&out.stderr));
    }
}

/// The cells of the summary's attack × rule matrix for `attack`.
fn matrix_cells(summary: &str, attack: &str) -> Vec<String> {
    let section = summary.split("## Verdict by attack and rule").nth(1).unwrap_or_else(|| panic!("no matrix:\n{summary}"));
    let row = section.lines().find(|l| l.starts_with(&format!("| {attack} |"))).unwrap_or_else(|| panic!("no row {attack}:\n{summary}"));
    row.trim_matches('|').split('|').skip(1).map(|c| c.trim().to_string()).collect()
}

#[test]
fn every_verdict_word_reaches_the_csv_the_summary_matrix_and_the_exit_status() {
    // (rule, signals, attack entry, the point verdict, the matrix cell's first word, exit status)
    let cases = [
        ("individual", 20_000, "builtin = \"phase-covariant-cloner\"\nfrom = 0.04\nto = 0.04\nsteps = 1", "leak", "**LEAK**", 1),
        (
            "finite-uncertainty",
            20_000,
            "builtin = \"phase-covariant-cloner\"\nfrom = 0.02\nto = 0.02\nsteps = 1",
            "inconclusive",
            "inconclusive",
            0,
        ),
        ("finite-uncertainty", 1_000_000, "builtin = \"phase-covariant-cloner\"\nfrom = 0.02\nto = 0.02\nsteps = 1", "secure", "secure", 0),
        ("finite-uncertainty", 300, "builtin = \"phase-covariant-cloner\"\nfrom = 0.02\nto = 0.02\nsteps = 1", "no-key", "no-key", 0),
        ("finite-uncertainty", 20_000, "builtin = \"intercept-resend\"\nfrom = 1\nto = 1\nsteps = 1", "aborted", "aborted", 0),
    ];
    for (rule, signals, entry, verdict, cell, status) in cases {
        let dir = tempfile::tempdir().unwrap();
        let text = format!(
            "name = \"v\"\nseed = 3\ntrials = 40\n[setup]\nsignals = {signals}\ntest_fraction = 0.05\nabort_qber = 0.11\nkey_rule = \"{rule}\"\n[[attacks]]\n{entry}\n"
        );
        std::fs::write(dir.path().join("c.toml"), text).unwrap();
        let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
        assert_eq!(out.status.code(), Some(status), "{verdict}: {}", String::from_utf8_lossy(&out.stderr));
        let csv = std::fs::read_to_string(dir.path().join("results/v/attack_vs_bound.csv")).unwrap();
        let last = csv.lines().nth(1).unwrap();
        assert!(last.ends_with(&format!(",{verdict},")), "{verdict}: {last}");
        let summary = std::fs::read_to_string(dir.path().join("results/v/summary.md")).unwrap();
        let attack = entry.split('"').nth(1).unwrap();
        let cells = matrix_cells(&summary, attack);
        assert!(cells[0].starts_with(cell), "{verdict}: {cells:?}");
        if verdict == "leak" {
            let explained = summary.split("## Leaks explained").nth(1).unwrap_or_else(|| panic!("{summary}"));
            assert!(
                explained.contains("bits on average") && explained.contains("Cause: the rule assumes Eve measures each signal"),
                "{summary}"
            );
        }
    }
}

#[test]
fn settings_to_look_at_twice_are_flagged_before_the_run() {
    let dir = tempfile::tempdir().unwrap();
    let text = "name = \"w\"\ntrials = 5\n[setup]\nsignals = 1000\nbasis_z_probability = 1e-300\nabort_qber = 0.2\n\
                [[attacks]]\nbuiltin = \"intercept-resend\"\nparams = { fraction = \"abc\" }\n";
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0));
    let err = String::from_utf8_lossy(&out.stderr);
    for needle in ["the setup cannot give a key", "zero-rate QBER 0.1100", "params.fraction is ignored"] {
        assert!(err.contains(needle), "{needle}: {err}");
    }
    let summary = std::fs::read_to_string(dir.path().join("results/w/summary.md")).unwrap();
    assert!(summary.contains("the setup cannot give a key") && summary.contains("**Verdict: no key.**"), "{summary}");
}

#[test]
fn a_test_sample_too_small_for_epsilon_is_flagged() {
    // 10⁴ signals, half sifted in Z, 1 % disclosed: about 25 bits, which at ε_sec = 1e-10
    // pin the error rate only within ±0.689 (Hoeffding); 10 % of 10⁶ signals (25 000 bits)
    // pin it within ±0.022, below the threshold 0.11.
    for (signals, fraction, flagged) in [(10_000, 0.01, true), (1_000_000, 0.1, false)] {
        let dir = tempfile::tempdir().unwrap();
        let text = format!(
            "name = \"t\"\ntrials = 2\n[setup]\nsignals = {signals}\ntest_fraction = {fraction}\n[[attacks]]\nbuiltin = \"pauli\"\nsteps = 1\n"
        );
        std::fs::write(dir.path().join("c.toml"), text).unwrap();
        let out = qkd(&["run", "c.toml", "-q", "--dry-run"], dir.path(), "1");
        assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
        let all = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
        assert_eq!(all.contains("the test sample is too small for ε_sec = 1e-10"), flagged, "{all}");
        if flagged {
            assert!(all.contains("about 25 sifted Z bits") && all.contains("±0.689"), "{all}");
        }
    }
}

#[test]
fn two_entries_with_one_label_keep_both_plots() {
    // Regression: the second entry's abort_leak plot overwrote the first's.
    let dir = tempfile::tempdir().unwrap();
    let text = SMALL_CAMPAIGN.replace("RULE", "finite-uncertainty")
        + "[[attacks]]\nbuiltin = \"intercept-resend\"\nsteps = 3\nparams = { basis = \"z\" }\n";
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("results/small");
    assert!(folder.join("abort_leak_intercept-resend.svg").exists());
    assert!(folder.join("abort_leak_intercept-resend_entry2.svg").exists());
}

#[test]
fn a_dry_run_shows_the_plan_and_computes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("c.toml"), SMALL_CAMPAIGN.replace("RULE", "individual")).unwrap();
    let out = qkd(&["run", "c.toml", "--dry-run"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let plan = String::from_utf8_lossy(&out.stdout);
    assert!(plan.contains("6 attack points × 50 trials") && plan.contains("estimate:") && plan.contains("(new)"), "{plan}");
    assert!(!dir.path().join("results").exists(), "a dry run writes nothing");
}

#[test]
fn a_six_state_campaign_reports_and_plots_its_own_protocol() {
    let dir = tempfile::tempdir().unwrap();
    let text = "name = \"six\"\ntrials = 20\n[setup]\nprotocol = \"six-state\"\nsignals = 100000\nabort_qber = 0.12\n\
                [[attacks]]\nbuiltin = \"intercept-resend\"\nparams = { basis = \"random-zxy\" }\n";
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("results/six");
    let svg = std::fs::read_to_string(folder.join("eve_information.svg")).unwrap();
    assert!(svg.contains("six-state bound") && svg.contains("max of Z, X and Y") && !svg.contains("BB84 bound"));
    assert!(std::fs::read_to_string(folder.join("summary.md")).unwrap().contains("QBER_Y"));
    let csv = std::fs::read_to_string(folder.join("attack_vs_bound.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    let col = header.iter().position(|h| *h == "mc_qber_y").unwrap();
    // Fraction 0.5 of full three-basis intercept-resend: QBER_Y = 1/6 (Bruß 1998, halved).
    let row: Vec<&str> = csv.lines().find(|l| l.contains(",fraction,0.5,")).unwrap().split(',').collect();
    let y: f64 = row[col].parse().unwrap();
    assert!((y - 1.0 / 6.0).abs() < 0.02, "{y}");
}

#[test]
fn bad_setup_gives_status_two_with_file_key_and_range() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("setup.toml"), "abort_qber = 0.9\n").unwrap();
    std::fs::write(dir.path().join("c.toml"), "name = \"x\"\nsetup = \"setup.toml\"\n[[attacks]]\nbuiltin = \"pauli\"\n").unwrap();
    let out = qkd(&["run", "c.toml"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("setup.toml") && err.contains("abort_qber") && err.contains("[0, 0.5]"), "{err}");
    assert!(!dir.path().join("results/x").exists(), "partial results left behind");
    std::fs::write(dir.path().join("c.toml"), "name = \"x\"\n[[attacks]]\nbuiltin = \"nonesuch\"\n").unwrap();
    let out = qkd(&["run", "c.toml"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("attacks[0].builtin"));
}

#[test]
fn demo_campaign_runs_from_any_directory() {
    let dir = tempfile::tempdir().unwrap();
    let out = qkd(&["run", "--quiet", "--demo", "single-photon"], dir.path(), "2");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = String::from_utf8_lossy(&out.stdout).trim().to_string();
    for f in ["attack_vs_bound.csv", "summary.md", "eve_information.svg", "manifest.json"] {
        assert!(dir.path().join(&folder).join(f).exists(), "{f}");
    }
}

#[test]
fn the_round_log_refuses_a_setup_whose_link_it_would_ignore() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("s.toml"), "[channel]\nloss_db = 3\n").unwrap();
    let out = qkd(&["rounds", "--attack", "pauli", "--setup", "s.toml", "--signals", "100"], dir.path(), "1");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("s.toml") && err.contains("ideal link"), "{err}");
}

#[test]
fn round_log_lists_every_round() {
    let dir = tempfile::tempdir().unwrap();
    let out = qkd(&["rounds", "--attack", "intercept-resend", "--signals", "500", "-o", "t.csv"], dir.path(), "1");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let text = std::fs::read_to_string(dir.path().join("t.csv")).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next().unwrap(), "round,alice_basis,bob_basis,alice_bit,bob_bit,eve_guess,role");
    assert_eq!(lines.count(), 500);
    assert!(text.contains(",test-z\n") && text.contains(",key\n") && text.contains(",discarded\n"));
}

/// Aborts are explained by what caused them: in a six-state system under intercept-resend
/// over the three bases (QBER 1/3 in each basis, Bruß, PRL 81, 3018, 1998) every basis's
/// observed error rate exceeds the threshold; under a Z-only intercept-resend the Z basis
/// shows no errors, so only X and Y abort (Z stays out of the cause list).
#[test]
fn aborts_name_the_basis_that_caused_them() {
    for (basis, cause) in [("random-zxy", "100.0 % (Z 100.0 %, X 100.0 %, Y 100.0 %)"), ("z", "100.0 % (X 100.0 %, Y 100.0 %)")] {
        let dir = tempfile::tempdir().unwrap();
        let text = format!(
            "name = \"a\"\nseed = 1\ntrials = 20\n[setup]\nprotocol = \"six-state\"\nsignals = 20000\n[[attacks]]\nbuiltin = \"intercept-resend\"\n\
             steps = 1\nfrom = 1\nto = 1\nparams = {{ basis = \"{basis}\" }}\n"
        );
        std::fs::write(dir.path().join("c.toml"), text).unwrap();
        let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
        assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
        let summary = std::fs::read_to_string(dir.path().join("results/a/summary.md")).unwrap();
        assert!(summary.contains(cause), "{basis}: {summary}");
    }
}

/// The summary prints sweep values as the tables do (no 0.19999999999999998 from the grid)
/// and, with several rules, counts (attack point, rule) pairs as such.
#[test]
fn summary_sentences_have_no_float_noise_and_count_rows_by_what_they_are() {
    let dir = tempfile::tempdir().unwrap();
    // Abort above 0.06: intercept-resend on a fraction f gives QBER f/4, so the strongest point
    // not caught is the grid's third value, 0.3·2/3 = 0.19999999999999998 in floating point.
    let text = "name = \"f\"\nseed = 1\ntrials = 20\nrules = [\"asymptotic\"]\n[setup]\nsignals = 100000\nabort_qber = 0.06\n\
                [[attacks]]\nbuiltin = \"intercept-resend\"\nsteps = 4\nto = 0.3\n";
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path(), "2");
    assert!(out.status.code().is_some_and(|c| c <= 1), "{}", String::from_utf8_lossy(&out.stderr));
    let summary = std::fs::read_to_string(dir.path().join("results/f/summary.md")).unwrap();
    assert!(!summary.contains("0.19999999999999998") && summary.contains("fraction = 0.2"), "{summary}");
    assert!(summary.contains("(attack point, rule) pairs"), "{summary}");
}
