//! Weak coherent pulses, decoys, link-level attacks, link key-length rules and `keyrate`.

use proptest::prelude::*;
use proptest::test_runner::{Config, FileFailurePersistence, RngAlgorithm, TestRng, TestRunner};
use qkd_audit::attack::pulse::{honest, PulseAttack};
use qkd_audit::audit::rules::KeyRule;
use qkd_audit::audit::sample::pulses::sample;
use qkd_audit::audit::setup::{Setup, TestSample};
use qkd_audit::audit::trial::{judge, Verdict};
use qkd_audit::exact::keyrate::vacuum_weak_bounds;
use qkd_audit::exact::pulses::PulseModel;
use qkd_audit::numeric::rng::trial_rng;
use qkd_audit::protocol::optical::{Link, Photons, Source};
use std::path::Path;
use std::process::Command;

fn runner(cases: u32, seed: u8) -> TestRunner {
    let config = Config { cases, failure_persistence: Some(Box::new(FileFailurePersistence::Off)), ..Config::default() };
    TestRunner::new_with_rng(config, TestRng::from_seed(RngAlgorithm::ChaCha, &[seed; 32]))
}

fn link(loss_db: f64, mu: f64) -> Link {
    Link {
        source: Source::WeakCoherent { intensity: mu, probability: 0.8, decoys: vec![(0.1, 0.1), (0.0, 0.1)] },
        channel_loss_db: loss_db,
        length_km: None,
        attenuation_db_per_km: None,
        detector_efficiency: 0.1,
        dark_count_probability: 1e-6,
        misalignment: 0.015,
        ..Link::default()
    }
}

#[test]
fn decoy_bounds_contain_the_true_single_photon_yield_and_error() {
    // Ma, Qi, Zhao, Lo (2005): Y₁ᴸ ≤ Y₁ and e₁ᵁ ≥ e₁ for an honest link. Gains here are the
    // exact photon-number sums, so the inequalities must hold exactly.
    let strategy = (0.2f64..0.9, 0.01f64..0.15, 1e-4f64..0.5, 0.0f64..1e-4, 0.0f64..0.05);
    runner(500, 21)
        .run(&strategy, |(mu, nu, eta, y0, ed)| {
            prop_assume!(nu < mu / 2.0);
            let l = Link {
                detector_efficiency: 1.0,
                channel_loss_db: -10.0 * eta.log10(),
                dark_count_probability: y0,
                misalignment: ed,
                ..Link::default()
            };
            let s_mu = honest(&l, Photons::Poisson { mean: mu });
            let s_nu = honest(&l, Photons::Poisson { mean: nu });
            let (y1l, e1u) = vacuum_weak_bounds(mu, nu, s_mu.gain, s_nu.gain, s_nu.error_rate(1), y0);
            let y1 = y0 + eta - y0 * eta;
            // In this model a single photon is detected with probability η (error e_d), and
            // failing that a dark count fires with probability Y₀ (error ½).
            let e1 = (ed * eta + 0.5 * y0 * (1.0 - eta)) / y1;
            prop_assert!(y1l <= y1 * (1.0 + 1e-9), "Y1L {y1l} > Y1 {y1}");
            prop_assert!(e1u >= e1 * (1.0 - 1e-9) - 1e-15, "e1U {e1u} < e1 {e1}");
            Ok(())
        })
        .unwrap();
}

fn setup(rule: KeyRule, loss_db: f64, signals: u64) -> Setup {
    Setup {
        signals,
        basis_z_probability: 0.7,
        test_sample: TestSample::Fraction(0.05),
        abort_qber: 0.05,
        key_rule: rule.into(),
        link: link(loss_db, 0.5),
        ..Setup::default()
    }
}

fn verdicts(attack: PulseAttack, setup: &Setup, trials: u64, seed: u64) -> Vec<Verdict> {
    let model = PulseModel::new(&setup.link, Some(&attack), &setup.basis_probabilities());
    let h = model.h_x_given_e();
    let ts = |z: u64| setup.test_sample.size(z);
    (0..trials)
        .map(|t| {
            judge(&sample(&model, setup.signals, &ts, &mut trial_rng(seed, 0, t)), setup.key_rule.clone(), &setup.rule_params(), h).verdict
        })
        .collect()
}

#[test]
fn pns_breaks_the_naive_rule_at_ten_db() {
    let s = setup(KeyRule::NaiveSinglePhoton, 10.0, 10_000_000_000);
    let v = verdicts(PulseAttack::PhotonNumberSplitting { fraction: 1.0 }, &s, 50, 1);
    assert!(v.iter().all(|x| *x == Verdict::Leak), "{v:?}");
}

#[test]
fn pns_never_breaks_gllp_or_the_decoy_rules() {
    // Property over seeds and losses (3..20 dB channel loss, η_Bob = 0.1).
    let strategy = (any::<u64>(), 3.0f64..20.0, 0.0f64..=1.0);
    let mut keyed = [0usize; 3];
    let rules = [KeyRule::GllpNoDecoy, KeyRule::DecoyVacuumWeak, KeyRule::DecoyFinite];
    let counter = std::cell::RefCell::new(&mut keyed);
    runner(60, 5)
        .run(&strategy, |(seed, loss, fraction)| {
            for (i, rule) in rules.iter().enumerate() {
                let s = setup(*rule, loss, 10_000_000_000);
                let v = verdicts(PulseAttack::PhotonNumberSplitting { fraction }, &s, 10, seed);
                prop_assert!(!v.contains(&Verdict::Leak), "{rule} leaked at {loss} dB, fraction {fraction}");
                counter.borrow_mut()[i] += v.iter().filter(|x| matches!(x, Verdict::Secure | Verdict::Inconclusive)).count();
            }
            Ok(())
        })
        .unwrap();
    // Not vacuous: the decoy rules produced keys in many trials.
    assert!(keyed[1] > 50 && keyed[2] > 50, "too few keys: {keyed:?}");
}

#[test]
fn beam_splitting_never_breaks_the_decoy_rules() {
    for rule in [KeyRule::DecoyVacuumWeak, KeyRule::DecoyFinite] {
        for loss in [3.0, 10.0] {
            let v = verdicts(PulseAttack::BeamSplitting { fraction: 1.0 }, &setup(rule, loss, 10_000_000_000), 20, 9);
            assert!(!v.contains(&Verdict::Leak), "{rule} at {loss} dB");
        }
    }
}

#[test]
fn link_sampler_matches_the_exact_gains_and_error_rates() {
    let s = setup(KeyRule::DecoyFinite, 10.0, 100_000_000);
    let model = PulseModel::new(&s.link, Some(&PulseAttack::PhotonNumberSplitting { fraction: 0.5 }), &s.basis_probabilities());
    let ts = |z: u64| z / 20;
    let (mut pulses, mut det, mut xdet, mut xerr) = ([0u64; 3], [0u64; 3], [0u64; 3], [0u64; 3]);
    let (mut key, mut multi, mut entropy) = (0u64, 0u64, 0.0);
    for t in 0..200 {
        let c = sample(&model, s.signals, &ts, &mut trial_rng(4, 0, t));
        let classes = c.key_classes.unwrap();
        assert_eq!(classes.iter().sum::<u64>(), c.key_bits());
        key += c.key_bits();
        multi += classes[2];
        entropy += c.key_entropy_bits.unwrap();
        let l = c.intensities.unwrap();
        for k in 0..3 {
            pulses[k] += l.pulses[k];
            det[k] += l.detections[k];
            xdet[k] += l.x_detections[k];
            xerr[k] += l.x_errors[k];
        }
    }
    for k in 0..3 {
        let g = model.gain(k);
        let se = (g * (1.0 - g) / pulses[k] as f64).sqrt();
        assert!((det[k] as f64 / pulses[k] as f64 - g).abs() < 5.0 * se, "gain {k}");
        let e = model.error_rate(k);
        let se = (e * (1.0 - e) / xdet[k] as f64).sqrt();
        assert!((xerr[k] as f64 / xdet[k] as f64 - e).abs() < 5.0 * se, "error rate {k}");
    }
    // Key bits by photon-number class: the multi-photon share and Eve's uncertainty per key
    // bit match the exact model.
    let dm = &model.models[0];
    let p_multi = dm.class_z[2].iter().sum::<f64>() / dm.class_z.iter().flatten().sum::<f64>();
    let se = (p_multi * (1.0 - p_multi) / key as f64).sqrt();
    assert!((multi as f64 / key as f64 - p_multi).abs() < 5.0 * se, "multi-photon share");
    assert!((entropy / key as f64 - model.h_x_given_e()).abs() < 5.0 * se, "H(X|E) per key bit");
}

fn qkd(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).output().unwrap()
}

#[test]
fn keyrate_command_reports_the_maximum_distances() {
    let dir = tempfile::tempdir().unwrap();
    let out = qkd(&["keyrate", "--optimize-mu", "--steps", "41", "-o", "k.csv", "--svg", "k.svg"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let table = String::from_utf8_lossy(&out.stdout);
    // REFERENCES.md §9 [N]: 142.2 km, 141.0 km, 40.2 km with the default parameter set.
    for (rule, km) in [("decoy-ideal", 142.2), ("decoy-vacuum-weak", 141.0), ("gllp-no-decoy", 40.2)] {
        let line = table.lines().find(|l| l.trim_start().starts_with(rule)).unwrap_or_else(|| panic!("{table}"));
        let value: f64 = line.split_whitespace().nth(1).unwrap().parse().unwrap();
        assert!((value - km).abs() < 0.2, "{rule}: {value}");
    }
    let csv = std::fs::read_to_string(dir.path().join("k.csv")).unwrap();
    assert!(csv.starts_with(
        "distance_km,transmittance,rule,mu_photons_per_pulse,mu_at_search_limit,gain_per_pulse,error_rate,rate_bits_per_pulse"
    ));
    assert!(table.contains("naive-single-photon") && table.contains("raise --mu-max"), "{table}");
    assert_eq!(csv.lines().count(), 1 + 41 * 4);
    assert!(dir.path().join("k.svg").exists());
}

#[test]
fn link_setup_errors_name_the_key() {
    let dir = tempfile::tempdir().unwrap();
    for (text, key) in [
        ("[source]\nkind = \"weak-coherent\"\nintensity = 0.5\ndecoys = [0.6]\ndecoy_probabilities = [0.1]\n", "source.decoys[0]"),
        // The missing partner is reported at the key the user wrote, naming what it needs.
        ("[channel]\nlength_km = 10\n", "key `channel.length_km`: needs attenuation_db_per_km"),
        ("[detector]\nefficiency = 1.5\n", "detector.efficiency"),
        ("key_rule = \"decoy-finite\"\n", "key_rule"),
    ] {
        std::fs::write(dir.path().join("s.toml"), text).unwrap();
        std::fs::write(dir.path().join("c.toml"), "name = \"x\"\nsetup = \"s.toml\"\n[[attacks]]\nbuiltin = \"pauli\"\n").unwrap();
        let out = qkd(&["run", "c.toml"], dir.path());
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("s.toml") && err.contains(key), "{key}: {err}");
    }
}

#[test]
fn decoy_demo_shows_a_safe_rule_and_a_broken_one() {
    let dir = tempfile::tempdir().unwrap();
    // The system's own rule (decoy-finite) does not leak, so the exit status is 0; the
    // comparison rule naive-single-photon does, and the table says so.
    let out = qkd(&["run", "-q"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let csv = std::fs::read_to_string(dir.path().join("results/saltmarsh-quarryhill-decoy/attack_vs_bound.csv")).unwrap();
    let mut rdr = csv::Reader::from_reader(csv.as_bytes());
    let h = rdr.headers().unwrap().clone();
    let (ri, vi) = (h.iter().position(|x| x == "key_rule").unwrap(), h.iter().position(|x| x == "verdict").unwrap());
    let rows: Vec<csv::StringRecord> = rdr.records().map(|r| r.unwrap()).collect();
    assert!(rows.iter().any(|r| &r[ri] == "naive-single-photon" && &r[vi] == "leak"));
    assert!(rows.iter().filter(|r| &r[ri] == "decoy-finite").all(|r| &r[vi] != "leak"));
    let single = qkd(&["run", "-q", "--demo", "single-photon"], dir.path());
    assert_eq!(single.status.code(), Some(0), "{}", String::from_utf8_lossy(&single.stderr));
    // Same seed, same bytes with one worker thread; --fail-on-any-rule lets the comparison
    // rule's leak set the exit status.
    let again = qkd(&["run", "-q", "--threads", "1", "--results-dir", "one", "--fail-on-any-rule"], dir.path());
    assert_eq!(again.status.code(), Some(1));
    let csv1 = std::fs::read_to_string(dir.path().join("one/saltmarsh-quarryhill-decoy/attack_vs_bound.csv")).unwrap();
    assert_eq!(csv, csv1, "decoy demo differs between thread counts");
}

#[test]
fn single_photon_attacks_on_weak_pulses_match_the_gain_and_never_break_decoy_rules() {
    use qkd_audit::attack::{Attack, Value};
    use qkd_audit::exact::eval::{evaluate, EvalOptions};
    use qkd_audit::protocol::Protocol;
    use std::collections::BTreeMap;
    let mut prev_err = 0.0;
    for i in 0..=4 {
        let p = 0.25 * i as f64;
        let mut g = BTreeMap::new();
        g.insert("fraction".to_string(), Value::Num(p));
        let a = Attack::builtin("intercept-resend", &g).unwrap();
        for rule in [KeyRule::DecoyVacuumWeak, KeyRule::DecoyFinite] {
            let s = setup(rule, 10.0, 10_000_000_000);
            let h = evaluate(&a, &EvalOptions::fast(Protocol::Bb84)).unwrap().h_x_given_e;
            let model = PulseModel::qubit(&s.link, &a, Protocol::Bb84, &s.basis_probabilities(), h);
            // Intercept-resend with loss compensation: Bob's signal gain is the honest one.
            let honest_gain = honest(&s.link, Photons::Poisson { mean: 0.5 }).gain;
            assert!((model.gain(0) - honest_gain).abs() < 1e-12 * honest_gain.max(1e-300) + 1e-15, "gain");
            // The gain is reached; only the idle point (fraction 0) is noted, as not the
            // honest link (Eve still forwards whole pulses over a lossless line).
            assert!(!model.note.contains("cannot reach"), "{}", model.note);
            assert_eq!(model.note.contains("not the honest one"), p == 0.0, "{}", model.note);
            let err = model.error_rate_in(0, 0);
            assert!(err >= prev_err - 1e-15, "error rate must grow with the fraction");
            prev_err = err;
            let ts = |z: u64| s.test_sample.size(z);
            for t in 0..10 {
                let c = sample(&model, s.signals, &ts, &mut trial_rng(8, i, t));
                assert_ne!(
                    judge(&c, s.key_rule.clone(), &s.rule_params(), model.h_x_given_e()).verdict,
                    Verdict::Leak,
                    "{rule} leaked at fraction {p}"
                );
            }
        }
    }
}

#[test]
fn finite_decoy_rule_approaches_the_asymptotic_decoy_bound_for_huge_blocks() {
    // With expected counts and a block of 10¹⁶ pulses, the finite-size terms vanish, so the
    // finite rule's key per key bit must come within a few per cent of the asymptotic
    // vacuum + weak rule's (both bound the same single-photon yield and error; Ma et al.
    // 2005 and Lim et al. 2014 use slightly different decoy inequalities).
    use qkd_audit::audit::rules::{BlockStats, IntensityObs};
    let s = Setup { test_sample: TestSample::Fraction(0.0), ..setup(KeyRule::DecoyFinite, 10.0, 10_000_000_000_000_000) };
    let model = PulseModel::new(&s.link, None, &s.basis_probabilities());
    let n_pulses = s.signals as f64;
    let mut obs = IntensityObs { count: 3, ..IntensityObs::default() };
    let (pz, px) = (0.7f64 * 0.7, 0.3f64 * 0.3);
    for (k, (mu, p)) in s.link.source.intensities().into_iter().enumerate() {
        obs.mu[k] = mu;
        obs.probability[k] = p;
        obs.pulses[k] = (n_pulses * p) as u64;
        obs.detections[k] = (n_pulses * p * model.gain(k)) as u64;
        obs.z_detections[k] = (n_pulses * p * model.gain(k) * pz) as u64;
        obs.x_detections[k] = (n_pulses * p * model.gain(k) * px) as u64;
        obs.x_errors[k] = (obs.x_detections[k] as f64 * model.error_rate(k)) as u64;
    }
    let stats = BlockStats {
        n: obs.z_detections[0],
        k: obs.x_detections[0],
        m: 0,
        e_z: f64::NAN,
        e_x: model.error_rate(0),
        intensities: Some(obs),
        ..Default::default()
    };
    let finite = KeyRule::DecoyFinite.length(&stats, &s.rule_params()).raw_bits / stats.n as f64;
    let asymptotic = KeyRule::DecoyVacuumWeak.length(&stats, &s.rule_params()).raw_bits / stats.n as f64;
    assert!(finite > 0.0 && asymptotic > 0.0, "{finite} {asymptotic}");
    assert!(finite <= asymptotic * 1.05 && finite >= asymptotic * 0.9, "finite {finite} vs asymptotic {asymptotic}");
}

fn single_photon_link(loss_db: f64) -> Link {
    Link { source: Source::SinglePhoton, ..link(loss_db, 0.5) }
}

/// A single-photon attack or a link-level attack from two numbers in [0, 1].
fn single_photon_link_model(which: usize, x: f64, setup: &Setup) -> PulseModel {
    use qkd_audit::attack::{Attack, Value};
    use qkd_audit::exact::eval::{evaluate, EvalOptions};
    use qkd_audit::protocol::Protocol;
    use std::collections::BTreeMap;
    let bp = setup.basis_probabilities();
    let qubit = |family: &str, key: &str, v: f64| {
        let mut g = BTreeMap::new();
        g.insert(key.to_string(), Value::Num(v));
        let a = Attack::builtin(family, &g).unwrap();
        let h = evaluate(&a, &EvalOptions::fast(Protocol::Bb84)).unwrap().h_x_given_e;
        PulseModel::qubit(&setup.link, &a, Protocol::Bb84, &bp, h)
    };
    match which {
        0 => qubit("intercept-resend", "fraction", 0.4 * x),
        1 => qubit("cloner", "qber", 0.1 * x),
        2 => qubit("entangling-probe", "qber", 0.1 * x),
        3 => PulseModel::new(&setup.link, Some(&PulseAttack::PhotonNumberSplitting { fraction: x }), &bp),
        _ => PulseModel::new(&setup.link, Some(&PulseAttack::BeamSplitting { fraction: x }), &bp),
    }
}

#[test]
fn proven_rules_never_leak_on_a_lossy_single_photon_link() {
    // A single-photon source over 0–20 dB with imperfect detectors: Eve replaces the line
    // and matches Bob's gain (single-photon attacks), or splits photons off. Every
    // detection is a single photon, so the single-photon rules are proven here (Tomamichel,
    // Lim, Gisin, Renner, Nat. Commun. 3, 634, 2012) and must never leak.
    let strategy = (any::<u64>(), 0.0f64..20.0, 0usize..5, 0.0f64..=1.0);
    let mut keyed = [0usize; 2];
    let counter = std::cell::RefCell::new(&mut keyed);
    runner(50, 21)
        .run(&strategy, |(seed, loss, which, x)| {
            for (i, rule) in [KeyRule::FiniteUncertainty, KeyRule::NaiveSinglePhoton].into_iter().enumerate() {
                let s = Setup { link: single_photon_link(loss), ..setup(rule, loss, 1_000_000_000) };
                let model = single_photon_link_model(which, x, &s);
                let honest_gain = honest(&s.link, Photons::Single).gain;
                prop_assert!((model.gain(0) - honest_gain).abs() <= 1e-12 * honest_gain, "gain not matched");
                prop_assert!(model.note.is_empty(), "{}", model.note);
                let ts = |z: u64| s.test_sample.size(z);
                for t in 0..8 {
                    let c = sample(&model, s.signals, &ts, &mut trial_rng(seed, which as u64, t));
                    let v = judge(&c, s.key_rule.clone(), &s.rule_params(), model.h_x_given_e()).verdict;
                    prop_assert!(v != Verdict::Leak, "{rule} leaked: attack {which}, x = {x}, {loss} dB");
                    counter.borrow_mut()[i] += usize::from(matches!(v, Verdict::Secure | Verdict::Inconclusive));
                }
            }
            Ok(())
        })
        .unwrap();
    assert!(keyed[0] > 80 && keyed[1] > 80, "too few keys: {keyed:?}");
}

#[test]
fn full_intercept_resend_on_a_lossy_single_photon_link_is_caught() {
    let s = Setup { link: single_photon_link(10.0), ..setup(KeyRule::FiniteUncertainty, 10.0, 100_000_000) };
    let model = single_photon_link_model(0, 2.5, &s); // fraction 1
    assert!((model.error_rate_in(0, 1) - 0.25).abs() < 0.02, "{}", model.error_rate_in(0, 1));
    let ts = |z: u64| s.test_sample.size(z);
    for t in 0..10 {
        let c = sample(&model, s.signals, &ts, &mut trial_rng(3, 0, t));
        assert_eq!(judge(&c, s.key_rule.clone(), &s.rule_params(), model.h_x_given_e()).verdict, Verdict::Aborted);
    }
}

#[test]
fn campaigns_run_on_a_lossy_single_photon_link() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("s.toml"),
        "signals = 100000000\nkey_rule = \"finite-uncertainty\"\nabort_qber = 0.06\n\
         [source]\nkind = \"single-photon\"\n[channel]\nloss_db = 8\n\
         [detector]\nefficiency = 0.2\ndark_count_probability = 1e-6\nmisalignment = 0.01\n",
    )
    .unwrap();
    std::fs::write(
        dir.path().join("c.toml"),
        "name = \"sp\"\nsetup = \"s.toml\"\ntrials = 20\nrules = [\"finite-uncertainty\", \"naive-single-photon\"]\n\
         [[attacks]]\nbuiltin = \"intercept-resend\"\n\
         [[attacks]]\nbuiltin = \"photon-number-splitting\"\n",
    )
    .unwrap();
    let out = qkd(&["run", "c.toml", "--quiet", "--results-dir", "out"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = std::fs::read_dir(dir.path().join("out")).unwrap().next().unwrap().unwrap().path();
    let summary = std::fs::read_to_string(folder.join("summary.md")).unwrap();
    assert!(summary.contains("single photons"), "{summary}");
}

#[test]
fn single_photon_link_sampler_matches_the_exact_model() {
    // Beam splitting on a single-photon source at 10 dB with dark counts raised so that
    // Eve's share (her photon, Bob's dark count) is visible: the sampled gain, X error rate
    // and Eve's uncertainty per key bit match the exact model, and every key bit comes from
    // a single-photon pulse.
    let link = Link { dark_count_probability: 1e-3, ..single_photon_link(10.0) };
    let s = Setup { link, ..setup(KeyRule::FiniteUncertainty, 10.0, 10_000_000) };
    let model = PulseModel::new(&s.link, Some(&PulseAttack::BeamSplitting { fraction: 1.0 }), &s.basis_probabilities());
    assert!(model.h_x_given_e() < 1.0 - 1e-3, "Eve should know the dark-count bits");
    let ts = |z: u64| z / 20;
    let (mut pulses, mut det, mut xdet, mut xerr, mut key, mut entropy) = (0u64, 0u64, 0u64, 0u64, 0u64, 0.0);
    for t in 0..100 {
        let c = sample(&model, s.signals, &ts, &mut trial_rng(6, 0, t));
        let classes = c.key_classes.unwrap();
        assert_eq!(classes[1], c.key_bits(), "only single-photon key bits");
        key += c.key_bits();
        entropy += c.key_entropy_bits.unwrap();
        let l = c.intensities.unwrap();
        assert_eq!(l.count, 1);
        assert!(l.mu[0] == 1.0 && l.multi_photon[0] == 0.0);
        pulses += l.pulses[0];
        det += l.detections[0];
        xdet += l.x_detections[0];
        xerr += l.x_errors[0];
    }
    let g = model.gain(0);
    assert!((det as f64 / pulses as f64 - g).abs() < 5.0 * (g * (1.0 - g) / pulses as f64).sqrt(), "gain");
    let e = model.error_rate(0);
    assert!((xerr as f64 / xdet as f64 - e).abs() < 5.0 * (e * (1.0 - e) / xdet as f64).sqrt(), "error rate");
    let known = 1.0 - model.h_x_given_e();
    let se = (known * (1.0 - known) / key as f64).sqrt();
    assert!((entropy / key as f64 - model.h_x_given_e()).abs() < 5.0 * se, "H(X|E) per key bit");
}

/// `keyrate --setup` takes the sifting factor from the setup's basis choice (Σ P(basis)²),
/// unless `--sifting` overrides it.
#[test]
fn keyrate_sifting_follows_the_setup_basis_choice() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("l.toml"),
        "basis_z_probability = 0.9\n[source]\nkind = \"weak-coherent\"\nintensity = 0.5\n[channel]\nlength_km = 10\nattenuation_db_per_km = 0.2\n",
    )
    .unwrap();
    for (extra, q) in [(vec![], "q = 0.82"), (vec!["--sifting", "0.5"], "q = 0.5")] {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_qkd-audit"))
            .current_dir(dir.path())
            .args([&["keyrate", "--setup", "l.toml", "--steps", "3"][..], &extra[..]].concat())
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(0));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(q), "{q}: {err}");
    }
}
