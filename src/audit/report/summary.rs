//! `summary.md`: the verdict a reviewer reads first, then one section per attack with its
//! points, the strongest point that is not caught, and the abort and leak figures.
//!
//! "Not caught" means the protocol aborted in at most half of the trials; "strongest"
//! means the largest information of Eve about a key bit, 1 − H(X|E), among those points.

use crate::audit::trial::Verdict;
use crate::audit::{Campaign, PointResult};
use std::fmt::Write;

fn pct(x: f64) -> String {
    if x.is_nan() {
        "-".into()
    } else {
        format!("{:.1} %", 100.0 * x)
    }
}

fn link_text(l: &crate::protocol::optical::Link) -> String {
    use crate::protocol::optical::Source;
    let src = match &l.source {
        Source::SinglePhoton => "single photons".to_string(),
        Source::WeakCoherent { intensity, decoys, .. } => {
            let d: Vec<String> = decoys.iter().map(|(m, _)| format!("{m}")).collect();
            format!(
                "weak coherent pulses μ = {intensity}{}",
                if d.is_empty() { String::new() } else { format!(", decoys {}", d.join(", ")) }
            )
        }
    };
    format!(
        "{src}, channel loss {:.2} dB, detector efficiency {}, dark counts {:e} per gate, misalignment {}",
        l.channel_loss_db, l.detector_efficiency, l.dark_count_probability, l.misalignment
    )
}

/// Renders the summary.
pub fn render(c: &Campaign, results: &[PointResult]) -> String {
    let mut s = String::new();
    let leaks: Vec<&PointResult> = results.iter().filter(|r| r.stats.verdict == Verdict::Leak).collect();
    let system_leaks = leaks.iter().filter(|r| r.rule == c.setup.key_rule).count();
    let inconclusive = results.iter().filter(|r| r.stats.verdict == Verdict::Inconclusive).count();
    let setup = &c.setup;
    let _ = writeln!(s, "# Audit summary: {}\n", c.name);
    let _ = writeln!(
        s,
        "System under test `{}`: {} with {} signals per block, P(Z) = {}, test sample {:?}, abort above QBER {}, \
         error correction f = {}, ε_sec = {:e}, ε_cor = {:e}, key-length rule(s) `{}`. {} trials per attack point, seed {}. Link: {}.\n",
        setup.name,
        setup.protocol,
        setup.signals,
        setup.basis_z_probability,
        setup.test_sample,
        setup.abort_qber,
        setup.ec_efficiency,
        setup.epsilon_sec,
        setup.epsilon_cor,
        c.rules.iter().map(|r| r.name()).collect::<Vec<_>>().join("`, `"),
        c.trials,
        c.seed,
        link_text(&setup.link)
    );
    if c.rules.len() > 1 {
        let _ = writeln!(
            s,
            "The system's own key-length rule is `{}`; the other rules judge the same blocks for comparison and do not set \
             the exit status (unless `--fail-on-any-rule`).\n",
            c.setup.key_rule
        );
        let _ = writeln!(
            s,
            "**System verdict: {}.**\n",
            if system_leaks == 0 {
                format!("no leak under `{}`", c.setup.key_rule)
            } else {
                format!("LEAK under `{}` at {system_leaks} point(s)", c.setup.key_rule)
            }
        );
    }
    let keyless = results.iter().filter(|r| matches!(r.stats.verdict, Verdict::Aborted | Verdict::NoKey)).count();
    if leaks.is_empty() && keyless == results.len() {
        let _ = writeln!(
            s,
            "**{}: no key.** No trial at any of the {} attack points gave a key (every point is `no-key` or `aborted`), so nothing \
             leaked, and the system as configured produces nothing to use. Check the block size, the channel loss and the detectors.\n",
            if c.rules.len() > 1 { "Across all rules" } else { "Verdict" },
            results.len()
        );
    } else if leaks.is_empty() {
        let _ = writeln!(
            s,
            "**{}: no leak found.** No trial at any of the {} attack points extracted more key than the attack leaves secret{}.\n",
            if c.rules.len() > 1 { "Across all rules" } else { "Verdict" },
            results.len(),
            if keyless > 0 { format!("; {keyless} of them gave no key at all (`no-key` or `aborted`)") } else { String::new() }
        );
    } else {
        let _ = writeln!(
            s,
            "**{}: LEAK.** At {} of {} (attack point, rule) pairs the key-length rule extracted more key than the attack leaves secret \
             (ℓ > n·H(X|E) − leak_EC + 2 log₂ n in at least one trial): these keys are provably not secret against that attack. \
             Leaking rules: `{}`.\n",
            if c.rules.len() > 1 { "Across all rules" } else { "Verdict" },
            leaks.len(),
            results.len(),
            {
                let mut names: Vec<&str> = leaks.iter().map(|r| r.rule.name()).collect();
                names.dedup();
                names.join("`, `")
            }
        );
    }
    if inconclusive > 0 {
        let _ = writeln!(
            s,
            "{inconclusive} point(s) have inconclusive trials: the key lies between the rigorous achievable bound (AEP) and the attack's \
             capacity. The AEP band is loose at these block sizes; such keys are still covered by the key-length rule's own security \
             proof when that rule is a proven one (`finite-uncertainty`, `game-min-entropy`, `gllp-no-decoy`, `decoy-finite`).\n"
        );
    }
    let _ = writeln!(
        s,
        "Verdicts per trial: `aborted`, `no-key`, `secure` (ℓ ≤ achievable), `inconclusive`, `leak` (ℓ > capacity + 2 log₂ n).\n"
    );
    let mut groups: Vec<(usize, crate::audit::rules::KeyRule)> = results.iter().map(|r| (r.entry, r.rule)).collect();
    groups.dedup();
    for (e, rule) in groups {
        let pts: Vec<&PointResult> = results.iter().filter(|r| r.entry == e && r.rule == rule).collect();
        let first = pts[0];
        let label = if c.rules.len() > 1 { format!("{} under `{}`", first.attack, rule) } else { first.attack.clone() };
        let param = first.swept.as_ref().map(|(p, _)| p.clone()).unwrap_or_default();
        let attack_leaks = pts.iter().filter(|r| r.stats.verdict == Verdict::Leak).count();
        let fixed: Vec<(String, crate::attack::Value)> = first.params.iter().filter(|(k, _)| *k != param).cloned().collect();
        if fixed.is_empty() {
            let _ = writeln!(s, "## {label}\n");
        } else {
            let _ = writeln!(s, "## {label} ({})\n", crate::audit::report::params_string(&fixed));
        }
        let verdict = if attack_leaks > 0 {
            format!("LEAK at {attack_leaks} of {} points", pts.len())
        } else if pts.iter().all(|r| r.stats.verdict == Verdict::Aborted) {
            "aborted at every point".to_string()
        } else if pts.iter().all(|r| matches!(r.stats.verdict, Verdict::Aborted | Verdict::NoKey)) {
            "no key at any point (nothing extracted, so nothing leaked)".to_string()
        } else {
            "no leak".to_string()
        };
        let _ = writeln!(s, "Verdict: **{verdict}**.\n");
        if let Some(r) = pts.iter().find(|r| !r.note.is_empty()) {
            let _ = writeln!(s, "Note: {}.\n", r.note);
        }
        let not_caught =
            pts.iter().filter(|r| r.stats.abort_probability <= 0.5).max_by(|a, b| a.exact.holevo_z.total_cmp(&b.exact.holevo_z));
        match not_caught {
            Some(r) => {
                let _ = writeln!(
                    s,
                    "Strongest point not caught: {} (QBER_Z {:.4}, QBER_X {:.4}, Eve's information 1 − H(X|E) = {:.4} bits per key bit); \
                     abort probability {} [{}, {}], leak probability {}, mean key {:.0} bits.\n",
                    r.swept.as_ref().map(|(p, v)| format!("{p} = {v}")).unwrap_or_else(|| "the only point".into()),
                    r.exact.qber_z,
                    r.exact.qber_x,
                    r.exact.holevo_z,
                    pct(r.stats.abort_probability),
                    pct(r.stats.abort_ci.0),
                    pct(r.stats.abort_ci.1),
                    pct(r.stats.leak_probability),
                    r.stats.key_length_mean
                );
            }
            None => {
                let _ = writeln!(s, "Every point is caught: the protocol aborts in more than half of the trials.\n");
            }
        }
        let pname = if param.is_empty() { "point".to_string() } else { param.clone() };
        let _ = writeln!(s, "| {pname} | QBER_Z | QBER_X | H(X\\|E) bits | abort | leak | mean key bits | verdict |");
        let _ = writeln!(s, "|---|---|---|---|---|---|---|---|");
        for r in &pts {
            let _ = writeln!(
                s,
                "| {} | {:.4} | {:.4} | {:.4} | {} | {} | {:.0} | {} |",
                r.swept.as_ref().map(|(_, v)| format!("{v:.4}")).unwrap_or_else(|| r.index.to_string()),
                r.exact.qber_z,
                r.exact.qber_x,
                r.exact.h_x_given_e,
                pct(r.stats.abort_probability),
                pct(r.stats.leak_probability),
                r.stats.key_length_mean,
                r.stats.verdict
            );
        }
        let _ = writeln!(s);
    }
    let _ = writeln!(
        s,
        "Simulation evidence within the modelled attack classes; it does not replace a security certification. \
         Defer to the applicable standards and certification schemes."
    );
    s
}
