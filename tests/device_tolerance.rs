//! Tolerances of the detector flaws: the tolerance search over `detector.mismatch` and
//! `detector.blinding_catch` against thresholds each test computes and against a dense setup
//! sweep of the same key; and the campaign checks of device attacks (a link the device model
//! does not cover is refused before any work; an attack whose flaw is absent is warned about).
//! Settings are small (few trials, few bisections) so that the file runs in seconds.

use qkd_audit::audit::campaign::{link_supports_device_attacks, Campaign, DEMO_CAMPAIGNS};
use qkd_audit::audit::engine::run;
use qkd_audit::audit::rules::{BlockStats, KeyRule};
use qkd_audit::audit::setup::{Setup, SetupKey};
use qkd_audit::audit::tolerance::{search, Criterion, Finding, Report, Side, Spec};
use qkd_audit::audit::trial::allowance_bits;
use qkd_audit::numeric::optimize::bisect;
use qkd_audit::protocol::optical::Source;
use qkd_audit::quantum::measures::binary_entropy;

/// The demo campaign (Ferngate–Millbrook, mismatch 0.25) with fewer trials and only the full
/// time shift and the full faked-state attack, plus `extra` (e.g. a setup sweep).
fn mismatch_campaign(extra: &str) -> Campaign {
    let demo = DEMO_CAMPAIGNS.iter().find(|(n, _)| *n == "detector-mismatch").unwrap().1;
    let text = demo
        .replace("trials = 200", "trials = 40")
        .replace("builtin = \"time-shift\"\n", "builtin = \"time-shift\"\nfrom = 1.0\nsteps = 1\n");
    let text = text.replace("builtin = \"faked-state\"\n", "builtin = \"faked-state\"\nfrom = 1.0\nsteps = 1\n");
    Campaign::parse(&format!("{text}\n{extra}"), "test", None).unwrap()
}

/// The blinding example campaign with Eve blinding a fixed share `fraction` of the periods.
fn blinding_campaign(fraction: f64) -> Campaign {
    let text = include_str!("../campaigns/example-detector-blinding.toml")
        .replace("from = 0.4\nto = 1.0\nsteps = 25", &format!("from = {fraction:?}\nsteps = 1"));
    Campaign::parse(&text, "test", None).unwrap()
}

fn spec(key: &str, from: f64, to: f64, log: bool, rule: KeyRule, bisections: u32) -> Spec {
    Spec {
        key: SetupKey::find(key).unwrap(),
        from,
        to,
        scale: if log { qkd_audit::audit::campaign::Scale::Log } else { qkd_audit::audit::campaign::Scale::Linear },
        rule: rule.into(),
        criterion: Criterion::Leak,
        threshold: 0.05,
        confidence: 0.95,
        trials: 40,
        max_trials: 320,
        bisections,
    }
}

/// The boundary of a search whose low values leak: (last unsafe, first safe).
fn boundary(r: &Report) -> (f64, f64) {
    match &r.finding {
        Finding::Boundary { safe, unsafe_, .. } => {
            assert!(unsafe_ < safe, "leaks must lie below the boundary: {}", r.statement);
            (*unsafe_, *safe)
        }
        other => panic!("expected a boundary, got {other:?}: {}", r.statement),
    }
}

/// Expected key and X-test counts of a block of detected rounds (the device attacks leave the
/// basis pairs' detection symmetric), as in tests/devices.rs.
fn expected_counts(setup: &Setup) -> BlockStats {
    let p = setup.basis_z_probability;
    let sifted_z = setup.signals as f64 * p * p;
    let m = setup.test_sample.size(sifted_z as u64);
    let k = (setup.signals as f64 * (1.0 - p) * (1.0 - p)) as u64;
    BlockStats { n: sifted_z as u64 - m, k, m, e_z: 0.0, e_x: 0.0, intensities: None, ..Default::default() }
}

#[test]
fn mismatch_tolerance_brackets_the_computed_threshold_and_agrees_with_a_dense_sweep() {
    let c = mismatch_campaign("");
    // The threshold of the flaw-blind rule under the full time shift (derived in
    // tests/devices.rs, the_flaw_blind_rule_leaks_under_time_shift_below_a_computed_mismatch…):
    // it leaks when ℓ_FU + hash + 2 log₂ n > n·h(1/(1 + η)). With zero errors the faked states
    // abort at every η above Q_tol/(2 − 3Q_tol) ≈ 0.0102, far below, so the time shift decides.
    let obs = expected_counts(&c.setup);
    let params = c.setup.rule_params();
    let l = KeyRule::FiniteUncertainty.length(&obs, &params).raw_bits;
    let target = (l + (2.0 / params.epsilon_cor).log2() + allowance_bits(obs.n)) / obs.n as f64;
    let eta_star = bisect(|eta| binary_entropy(1.0 / (1.0 + eta)) - target, 1e-6, 1.0, 1e-12).unwrap();
    assert!(eta_star > 0.2 && eta_star < 0.3, "η* = {eta_star}");

    let r = search(&c, &spec("detector.mismatch", 0.1, 0.5, false, KeyRule::FiniteUncertainty, 7), &|_| {}).unwrap();
    let (unsafe_, safe) = boundary(&r);
    // Resolution 0.4/2⁷ ≈ 0.003; the sampled block sizes move the crossing by far less.
    assert!(safe - unsafe_ < 0.004, "{}", r.statement);
    assert!(unsafe_ < eta_star + 0.002 && safe > eta_star - 0.002, "η* = {eta_star}: {}", r.statement);
    assert_eq!(r.configured, Side::Unsafe, "the demo's configured η = 0.25 lies below the threshold");

    // A dense setup sweep of the same key through the campaign's [[setup_sweeps]].
    let swept = mismatch_campaign("[[setup_sweeps]]\nkey = \"detector.mismatch\"\nfrom = 0.1\nto = 0.5\nsteps = 41\n");
    assert_eq!(swept.setups.len(), 41);
    let results = run(&swept, &|| {}).unwrap();
    let mut checked = 0;
    for (i, ps) in swept.setups.iter().enumerate() {
        let eta = ps.setup.link.flaws.mismatch;
        assert_eq!(ps.values, vec![(SetupKey::find("detector.mismatch").unwrap(), eta)]);
        let leak =
            |rule: KeyRule| results.iter().filter(|p| p.setup == i && p.rule == rule).map(|p| p.stats.leak_probability).fold(0.0, f64::max);
        // Away from the searched boundary (by more than the sampling spread), the sweep agrees.
        if eta < unsafe_ - 0.005 {
            assert!(leak(KeyRule::FiniteUncertainty) > 0.5, "η = {eta}: the sweep must leak below {unsafe_}");
            checked += 1;
        } else if eta > safe + 0.005 {
            assert_eq!(leak(KeyRule::FiniteUncertainty), 0.0, "η = {eta}: the sweep must be safe above {safe}");
            checked += 1;
        }
        // The mismatch-aware rule (the demo's comparison rule) never leaks anywhere.
        assert_eq!(leak(KeyRule::MismatchAware), 0.0, "η = {eta}");
    }
    assert!(checked >= 39, "{checked}");
}

#[test]
fn the_mismatch_aware_rule_is_safe_over_the_whole_range() {
    let c = mismatch_campaign("");
    for log in [false, true] {
        let r = search(&c, &spec("detector.mismatch", 0.001, 1.0, log, KeyRule::MismatchAware, 4), &|_| {}).unwrap();
        assert!(matches!(r.finding, Finding::SafeThroughout), "{}", r.statement);
        assert_eq!(r.configured, Side::Safe);
    }
    // Between the ends too (the search classifies only the ends of a safe range): a sweep of
    // 30 values on a log scale, where the rule must keep a key and never leak.
    let mut swept = mismatch_campaign("[[setup_sweeps]]\nkey = \"detector.mismatch\"\nfrom = 0.001\nto = 1\nsteps = 30\nscale = \"log\"\n");
    swept.rules = vec![KeyRule::MismatchAware.into()];
    let results = run(&swept, &|| {}).unwrap();
    assert!(results.iter().all(|p| p.stats.leak_probability == 0.0));
    let keyed = results.iter().filter(|p| p.stats.key_length_mean > 0.0).count();
    assert!(keyed >= 10, "the rule must give keys somewhere, not be safe by giving none: {keyed}");
}

#[test]
fn blinding_tolerance_brackets_the_catch_probability_the_alarm_statistics_give() {
    // Eve blinds a share f = 0.6 of the periods with no monitor worth the name: the controlled
    // share of the clicks s = (f/2)/(f/2 + 1 − f) = 3/7 (derived in exact::device) is far above
    // what finite-uncertainty's slack covers (s* ≈ 0.27 here, tests/devices.rs), so every
    // block that passes the monitor leaks. A block of N detected rounds passes with
    // probability (1 + odds)^−N, odds = f·c/(f(1 − c)/2 + 1 − f) (exact::device), so the leak
    // probability crosses θ at the c that solves N·ln(1 + odds(c)) = ln(1/θ).
    let f = 0.6;
    let c = blinding_campaign(f);
    let n = c.setup.signals as f64;
    let theta: f64 = 0.05;
    let odds = |catch: f64| f * catch / (f * (1.0 - catch) / 2.0 + 1.0 - f);
    let c_theta = bisect(|catch| n * odds(catch).ln_1p() - (1.0 / theta).ln(), 1e-9, 1e-2, 1e-15).unwrap();
    assert!(c_theta > 1e-6 && c_theta < 1e-5, "{c_theta}");
    let r = search(&c, &spec("detector.blinding_catch", 1e-7, 1e-3, true, KeyRule::FiniteUncertainty, 8), &|_| {}).unwrap();
    let (unsafe_, safe) = boundary(&r);
    // Each side is classified at 95 % confidence: the unsafe value's leak probability lies
    // above θ, the safe value's at or below it, so c_θ lies between them (inconclusive values
    // may widen the bracket; it stays within a factor 2 on each side).
    assert!(unsafe_ < c_theta && c_theta <= safe, "c_θ = {c_theta}: {}", r.statement);
    assert!(safe / unsafe_ < 4.0, "{}", r.statement);
    // The blinding-aware rule pays for every period that could pass unnoticed: safe throughout.
    let aware = search(&c, &spec("detector.blinding_catch", 1e-7, 1.0, true, KeyRule::BlindingAware, 4), &|_| {}).unwrap();
    assert!(matches!(aware.finding, Finding::SafeThroughout), "{}", aware.statement);
}

#[test]
fn a_device_attack_on_a_link_the_device_model_does_not_cover_is_refused_at_its_entry() {
    let campaign = |setup: &str, extra: &str| {
        format!(
            "name = \"x\"\n[setup]\n{setup}\n[[attacks]]\nbuiltin = \"intercept-resend\"\n\n[[attacks]]\nbuiltin = \"time-shift\"\n{extra}"
        )
    };
    for (setup, extra, says) in [
        ("[setup.detector]\nmismatch = 0.3\ndark_count_probability = 1e-6", "", "dark_count_probability = 1e-6"),
        ("[setup.detector]\nmismatch = 0.3\nmisalignment = 0.01", "", "misalignment = 0.01"),
        (
            "key_rule = \"decoy-vacuum-weak\"\n[setup.source]\nkind = \"weak-coherent\"\nintensity = 0.5\ndecoys = [0.1, 0.0]\n\
             decoy_probabilities = [0.1, 0.1]\n[setup.detector]\nmismatch = 0.3",
            "",
            "weak-coherent",
        ),
        // A supported base setup, but one swept setup is not.
        (
            "[setup.detector]\nmismatch = 0.3",
            "[[setup_sweeps]]\nkey = \"detector.misalignment\"\nfrom = 0\nto = 0.02\nsteps = 3\n",
            "at detector.misalignment = 0.01",
        ),
    ] {
        let text = campaign(setup, extra);
        let errs = Campaign::parse_all(&text, "test", None).unwrap_err();
        let e = errs.iter().find(|e| e.key() == Some("attacks[1].builtin")).unwrap_or_else(|| panic!("{setup}: {errs:?}"));
        assert!(e.message().contains("single-photon model") && e.message().contains(says), "{e}");
        // Located at the entry's line in the file.
        let located = qkd_audit::input::locate(e.clone(), &text);
        let line = text.lines().position(|l| l == "builtin = \"time-shift\"").unwrap() + 1;
        assert!(located.to_string().starts_with(&format!("line {line}, column 1:")), "{located}");
    }
    // Loss and the common efficiency are covered: the campaign is accepted and runs.
    let ok = campaign("[setup.channel]\nloss_db = 3\n[setup.detector]\nmismatch = 0.3\nefficiency = 0.5", "")
        .replace("name = \"x\"", "name = \"x\"\ntrials = 5");
    let c = Campaign::parse(&ok, "test", None).unwrap();
    run(&c, &|| {}).unwrap();
}

#[test]
fn campaign_validation_and_the_engine_agree_on_which_links_carry_device_attacks() {
    // The engine keeps its own check; a link that validation accepts must run, and one it
    // refuses must fail in the engine too (the two conditions cannot drift apart unnoticed).
    let base = Campaign::parse(
        "name = \"x\"\ntrials = 3\n[setup]\nsignals = 10000\n[setup.detector]\nmismatch = 0.3\n[[attacks]]\nbuiltin = \"faked-state\"\nsteps = 1\n",
        "test",
        None,
    )
    .unwrap();
    let links = {
        let l = base.setup.link.clone();
        let mut out = vec![l.clone()];
        let mut x = l.clone();
        x.channel_loss_db = 10.0;
        x.detector_efficiency = 0.1;
        out.push(x);
        let mut x = l.clone();
        x.dark_count_probability = 1e-7;
        out.push(x);
        let mut x = l.clone();
        x.misalignment = 1e-3;
        out.push(x);
        let mut x = l.clone();
        x.source = Source::WeakCoherent { intensity: 0.5, probability: 1.0, decoys: vec![] };
        out.push(x);
        out
    };
    let mut supported = 0;
    for link in links {
        let mut c = base.clone();
        c.setup.link = link.clone();
        c.setups[0].setup.link = link.clone();
        let ran = run(&c, &|| {});
        assert_eq!(ran.is_ok(), link_supports_device_attacks(&link), "{link:?}: {:?}", ran.err());
        supported += usize::from(ran.is_ok());
    }
    assert_eq!(supported, 2);
}

#[test]
fn a_device_attack_whose_flaw_the_detector_lacks_is_warned_about() {
    let warnings =
        |setup: &str, attacks: &str| Campaign::parse(&format!("name = \"x\"\n[setup]\n{setup}\n{attacks}"), "test", None).unwrap().warnings;
    let all =
        "[[attacks]]\nbuiltin = \"time-shift\"\n[[attacks]]\nbuiltin = \"faked-state\"\n[[attacks]]\nbuiltin = \"detector-blinding\"\n";
    // The ideal detector: every device attack is inert.
    let w = warnings("", all);
    for (label, says) in [("time-shift", "mismatch = 1"), ("faked-state", "mismatch = 1"), ("detector-blinding", "blinding_catch = 1")] {
        assert!(w.iter().any(|x| x.contains(&format!("attack `{label}`")) && x.contains(says) && x.contains("inert")), "{label}: {w:?}");
    }
    // Mismatch only: the blinding attack alone is inert; random swapping is a countermeasure
    // under test, not a missing flaw.
    let w = warnings("[setup.detector]\nmismatch = 0.3\nrandom_swap = true", all);
    assert_eq!(w.iter().filter(|x| x.contains("inert")).count(), 1, "{w:?}");
    assert!(w.iter().any(|x| x.contains("`detector-blinding`")));
    // Both flaws present: nothing to warn about (the shipped demo and example included).
    assert!(!warnings("[setup.detector]\nmismatch = 0.3\nblinding_catch = 0.5", all).iter().any(|x| x.contains("inert")));
    assert!(!Campaign::demo_named("detector-mismatch").unwrap().warnings.iter().any(|x| x.contains("inert")));
    assert!(!blinding_campaign(0.5).warnings.iter().any(|x| x.contains("inert")));
    // A setup sweep that gives the flaw somewhere: no warning; one that never does: a warning.
    let sweep =
        |from: f64, steps: u32| format!("[[setup_sweeps]]\nkey = \"detector.mismatch\"\nfrom = {from:?}\nto = 1.0\nsteps = {steps}\n");
    let one = "[[attacks]]\nbuiltin = \"time-shift\"\n";
    assert!(!warnings("", &format!("{one}{}", sweep(0.2, 5))).iter().any(|x| x.contains("inert")));
    assert!(warnings("", &format!("{one}{}", sweep(1.0, 1))).iter().any(|x| x.contains("inert")));
}
