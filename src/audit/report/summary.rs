//! `summary.md`: the verdict a reviewer reads first, then one section per attack with its
//! points, the strongest point that is not caught, and the abort and leak figures.
//!
//! "Not caught" means the protocol aborted in at most half of the trials; "strongest"
//! means the largest information of Eve about a key bit, 1 − H(X|E), among those points.

use super::evidence::{bits, pct};
use crate::audit::rules::KeyRule;
use crate::audit::trial::Verdict;
use crate::audit::{Campaign, PointResult};
use std::fmt::Write;

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
    let flaws = if l.flaws.is_ideal() { String::new() } else { format!(", {}", l.flaws.describe()) };
    format!(
        "{src}, channel loss {:.2} dB, detector efficiency {}, dark counts {} per gate, misalignment {}{flaws}",
        l.channel_loss_db,
        l.detector_efficiency,
        if l.dark_count_probability == 0.0 { "0".to_string() } else { format!("{:e}", l.dark_count_probability) },
        l.misalignment
    )
}

/// A parameter value as a reader writes it: up to 6 significant digits, no float noise.
fn num(x: f64) -> String {
    let s = format!("{:.6}", x);
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e7) {
        format!("{x:e}")
    } else {
        s.to_string()
    }
}

fn test_sample_text(t: &crate::audit::setup::TestSample) -> String {
    match *t {
        crate::audit::setup::TestSample::Fraction(f) => format!("{} % of the sifted Z bits", num(100.0 * f)),
        crate::audit::setup::TestSample::Count(n) => format!("{n} sifted Z bits"),
    }
}

/// Where a point sits on its sweep, for sentences.
fn at(c: &Campaign, r: &PointResult) -> String {
    let attack = r.swept.as_ref().map(|(p, v)| format!("{p} = {}", num(*v)));
    with_setup(c, r, attack.unwrap_or_else(|| "the only point".into()))
}

/// `place` followed by the point's swept setup values, if the campaign sweeps its setup.
fn with_setup(c: &Campaign, r: &PointResult, place: String) -> String {
    let values = &c.setups[r.setup].values;
    if values.is_empty() {
        place
    } else {
        let setup: Vec<String> = values.iter().map(|(k, v)| format!("{} = {}", k.name, num(*v))).collect();
        if r.swept.is_some() {
            format!("{place}, {}", setup.join(", "))
        } else {
            setup.join(", ")
        }
    }
}

/// One sentence on why a leaking point leaks: which assumption of the rule the attack
/// breaks, computed from the exact quantities and the sampled blocks. The CSV's `leak_cause`
/// column and the HTML report carry the same sentence.
pub fn leak_cause(c: &Campaign, r: &PointResult) -> String {
    let s = &r.stats;
    let Some(rule) = r.rule.builtin() else {
        // A rule file or program: its assumptions are the system's own, so the sentence
        // states what it extracted against what the attack leaves.
        return format!(
            "the rule `{}` (a rule file) takes more key than this attack leaves secret in {} of the trials: in those trials \
             ℓ exceeds n·H(X|E) − leak_EC by {} bits on average (H(X|E) = {} bits per key bit); over all trials ℓ = {} bits \
             on average against {} bits left secret. Its formula or program omits or underestimates a term this attack exploits",
            r.rule,
            pct(s.leak_probability),
            bits(s.leak_excess_mean),
            num(r.exact.h_x_given_e),
            bits(s.key_length_mean),
            bits(s.mean_capacity)
        );
    };
    cause_sentence(
        rule,
        &CauseFacts {
            key_fraction_multi: s.key_fraction_multi,
            eve_guess_rate: s.eve_guess_rate,
            mean_excess: s.mean_excess,
            mean_key_bits: s.mean_key_bits,
            key_length_mean: s.key_length_mean,
            mean_capacity: s.mean_capacity,
            mean_e_x: s.mean_e_x,
            leak_probability: s.leak_probability,
            h_x_given_e: r.exact.h_x_given_e,
            accessible_z: r.exact.accessible_z,
            holevo_z: r.exact.holevo_z,
            epsilon_sec: c.setups[r.setup].setup.epsilon_sec,
            epsilon_cor: c.setups[r.setup].setup.epsilon_cor,
        },
    )
}

/// What a cause sentence is computed from: a leaking point's averages over its trials and
/// the attack's exact quantities.
#[derive(Clone, Debug)]
struct CauseFacts {
    key_fraction_multi: f64,
    eve_guess_rate: f64,
    mean_excess: f64,
    mean_key_bits: f64,
    key_length_mean: f64,
    mean_capacity: f64,
    mean_e_x: f64,
    leak_probability: f64,
    h_x_given_e: f64,
    accessible_z: Option<f64>,
    holevo_z: f64,
    epsilon_sec: f64,
    epsilon_cor: f64,
}

/// The cause of a leak under `rule`, one sentence per assumption a rule can get wrong: the
/// single-photon assumption (multi-photon key bits), the missing hash, the missing
/// finite-size terms of the asymptotic rules, the individual-attack assumption; for a
/// proven rule a leak contradicts its proof, and the sentence says so.
fn cause_sentence(rule: KeyRule, f: &CauseFacts) -> String {
    let verification = crate::audit::rules::verification_bits(f.epsilon_cor);
    let pa_cost = crate::audit::rules::pa_cost_bits(crate::audit::rules::EpsilonBudget::split(f.epsilon_sec).pa);
    let multi = f.key_fraction_multi.is_finite() && f.key_fraction_multi > 0.0;
    // The converse's slack: a leak is an excess above 2 log₂ n (see the verdicts).
    let slack = 2.0 * f.mean_key_bits.max(2.0).log2();
    if multi && matches!(rule, KeyRule::NaiveSinglePhoton | KeyRule::Asymptotic | KeyRule::Individual) {
        return format!(
            "the rule `{rule}` counts every detection as a single photon; under this attack {} of the key bits came from \
             multi-photon pulses, and Eve guesses {} of all key bits",
            pct(f.key_fraction_multi),
            pct(f.eve_guess_rate)
        );
    }
    match rule {
        // No attack (H(X|E) = 1, exact after the evaluator's rounding snap) and an excess
        // equal to the hash's length within the converse's slack.
        KeyRule::Asymptotic if (f.mean_excess - verification).abs() <= slack && f.h_x_given_e >= 1.0 => format!(
            "the rule omits the error-verification hash: Eve learns nothing here, and the excess is the {} bits of the hash \
             that the rule does not subtract",
            num(verification)
        ),
        KeyRule::Asymptotic => format!(
            "the rule has no finite-size term: it takes the observed phase error rate ({}) as exact, while the attack leaves \
             H(X|E) = {} bits per key bit, and it subtracts neither a sampling deviation nor the privacy-amplification and \
             verification costs",
            pct(f.mean_e_x),
            num(f.h_x_given_e)
        ),
        KeyRule::Individual => format!(
            "the rule assumes Eve measures each signal on its own (accessible information {} bits per key bit), but this \
             attack keeps her quantum memory until the bases are announced: her Holevo information is {} bits per key bit",
            f.accessible_z.map_or("-".to_string(), num),
            num(f.holevo_z)
        ),
        KeyRule::GllpNoDecoy | KeyRule::DecoyVacuumWeak => format!(
            "the rule `{rule}` is an asymptotic bound applied to a finite block: it takes the block's observed gains and error \
             rates as their expectations and subtracts no sampling deviation and no privacy-amplification cost ({} bits at \
             ε_sec = {:e}); on {} key bits the fluctuation it ignores exceeds its margin, so ℓ = {} bits on average against {} \
             bits the attack leaves secret",
            bits(pa_cost),
            f.epsilon_sec,
            bits(f.mean_key_bits),
            bits(f.key_length_mean),
            bits(f.mean_capacity)
        ),
        KeyRule::FiniteUncertainty
        | KeyRule::GameMinEntropy
        | KeyRule::DecoyFinite
        | KeyRule::NaiveSinglePhoton
        | KeyRule::MismatchAware
        | KeyRule::BlindingAware => format!(
            "no assumption of the rule `{rule}` explains this: it is proven for this setting, with failure probability at most \
             ε_sec = {:e}, yet the key exceeded what the attack leaves secret (ℓ = {} against {} bits) in {} of the trials. \
             Treat it as a defect of the rule's implementation, of the attack model or of this tool, and report it",
            f.epsilon_sec,
            bits(f.key_length_mean),
            bits(f.mean_capacity),
            pct(f.leak_probability)
        ),
    }
}

/// Renders the summary.
pub fn render(c: &Campaign, results: &[PointResult]) -> String {
    let mut s = String::new();
    let leaks: Vec<&PointResult> = results.iter().filter(|r| r.stats.verdict == Verdict::Leak).collect();
    let system_leaks = leaks.iter().filter(|r| r.rule == c.setup.key_rule).count();
    let inconclusive = results.iter().filter(|r| r.stats.verdict == Verdict::Inconclusive).count();
    let setup = &c.setup;
    let six_state = setup.protocol == crate::protocol::Protocol::SixState;
    let _ = writeln!(s, "# Audit summary: {}\n", c.name);
    let _ = writeln!(
        s,
        "System under test `{}`: {} with {} signals per block, P(Z) = {}, test sample {}, abort above QBER {}, \
         error correction f = {}, ε_sec = {:e}, ε_cor = {:e}, the system's key-length rule `{}`{}. {} trials per attack point, seed {}. Link: {}.\n",
        setup.name,
        setup.protocol,
        setup.signals,
        num(setup.basis_z_probability),
        test_sample_text(&setup.test_sample),
        num(setup.abort_qber),
        num(setup.ec_efficiency),
        setup.epsilon_sec,
        setup.epsilon_cor,
        setup.key_rule,
        if c.rules.len() > 1 {
            format!(
                " (comparison rules `{}`)",
                c.rules.iter().filter(|r| **r != setup.key_rule).map(|r| r.name()).collect::<Vec<_>>().join("`, `")
            )
        } else {
            String::new()
        },
        c.trials,
        c.seed,
        link_text(&setup.link)
    );
    if !c.setup_sweeps.is_empty() {
        let sweeps: Vec<String> = c
            .setup_sweeps
            .iter()
            .map(|w| {
                let scale = if w.scale == crate::audit::campaign::Scale::Log { "logarithmic" } else { "linear" };
                format!("`{}` from {} to {} in {} {scale} steps", w.key.name, num(w.from), num(w.to), w.steps)
            })
            .collect();
        let _ = writeln!(
            s,
            "Setup sweeps: {}; every attack point runs at each of the {} swept setups, whose values replace the ones above. \
             The tables below show the mean key length and the leak probability against them.\n",
            sweeps.join("; "),
            c.setups.len()
        );
    }
    if !c.warnings.is_empty() {
        let _ = writeln!(s, "**Warnings, found before the run:**\n");
        for w in &c.warnings {
            let _ = writeln!(s, "- {w}");
        }
        let _ = writeln!(s);
    }
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
    // Rows are (attack point, rule) pairs: with several rules, say so rather than count each
    // point once per rule as if it were an attack point.
    let rows_are = if c.rules.len() > 1 { "(attack point, rule) pairs" } else { "attack points" };
    if leaks.is_empty() && keyless == results.len() {
        let _ = writeln!(
            s,
            "**{}: no key.** No trial at any of the {} {rows_are} gave a key (every one is `no-key` or `aborted`), so nothing \
             leaked, and the system as configured produces nothing to use. Check the block size, the channel loss and the detectors.\n",
            if c.rules.len() > 1 { "Across all rules" } else { "Verdict" },
            results.len()
        );
    } else if leaks.is_empty() {
        let _ = writeln!(
            s,
            "**{}: no leak found.** No trial at any of the {} {rows_are} extracted more key than the attack leaves secret{}.\n",
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
                names.sort_unstable();
                names.dedup();
                names.join("`, `")
            }
        );
    }
    matrix(&mut s, c, results);
    explain_leaks(&mut s, c, results);
    if inconclusive > 0 {
        let _ = writeln!(
            s,
            "{inconclusive} point(s) have inconclusive trials: the key lies between the rigorous achievable bound (AEP) and the attack's \
             capacity. The AEP band is loose at these block sizes; such keys are still covered by the key-length rule's own security \
             proof when that rule is proven for finite blocks (`finite-uncertainty`, `game-min-entropy`, `decoy-finite`, \
             `mismatch-aware`, `blinding-aware`), not when it \
             is an asymptotic formula (`asymptotic`, `individual`, `gllp-no-decoy`, `decoy-vacuum-weak`).\n"
        );
    }
    let _ = writeln!(
        s,
        "Verdicts per trial: `aborted`, `no-key`, `secure` (ℓ ≤ achievable), `inconclusive`, `leak` (ℓ > capacity + 2 log₂ n). \
         In the tables, an abort share is followed by its causes as shares of all trials: the basis whose observed error rate \
         exceeded the threshold (Z test sample, X, Y), `empty` (no key or X bits), `rule` (the rule's own abort condition), \
         `alarm` (a detector monitor).\n"
    );
    let mut groups: Vec<(usize, crate::audit::rules::Rule)> = results.iter().map(|r| (r.entry, r.rule.clone())).collect();
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
        // Every distinct note of the entry's points, in point order (one point's remark,
        // such as an idle attack, need not hold at the others).
        let mut notes: Vec<&str> = Vec::new();
        for r in pts.iter().filter(|r| !r.note.is_empty()) {
            if !notes.contains(&r.note.as_str()) {
                notes.push(&r.note);
            }
        }
        for n in notes {
            let _ = writeln!(s, "Note: {n}.\n");
        }
        let not_caught =
            pts.iter().filter(|r| r.stats.abort_probability <= 0.5).max_by(|a, b| a.exact.holevo_z.total_cmp(&b.exact.holevo_z));
        match not_caught {
            Some(r) => {
                let _ = writeln!(
                    s,
                    "Strongest point not caught: {} (QBER_Z {:.4}, QBER_X {:.4}, Eve's information 1 − H(X|E) = {:.4} bits per key bit); \
                     abort probability {} [{}, {}], leak probability {}, mean key {:.0} bits.\n",
                    with_setup(
                        c,
                        r,
                        r.swept.as_ref().map(|(p, v)| format!("{p} = {}", num(*v))).unwrap_or_else(|| "the only point".into())
                    ),
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
        // Swept setup keys get a column each, after the attack's parameter.
        let setup_header: String = c.setup_sweeps.iter().map(|w| format!(" {} |", w.key.name)).collect();
        let _ = writeln!(
            s,
            "| {pname} |{setup_header} QBER_Z | QBER_X |{} H(X\\|E) bits | abort | leak | mean key bits | verdict |",
            if six_state { " QBER_Y |" } else { "" }
        );
        let _ =
            writeln!(s, "|---|{}---|---|{}---|---|---|---|---|", "---|".repeat(c.setup_sweeps.len()), if six_state { "---|" } else { "" });
        for r in &pts {
            let setup_cells: String = c.setups[r.setup].values.iter().map(|(_, v)| format!(" {} |", num(*v))).collect();
            let _ = writeln!(
                s,
                "| {} |{setup_cells} {:.4} | {:.4} |{} {:.4} | {} | {} | {:.0} | {} |",
                r.swept.as_ref().map(|(_, v)| format!("{v:.4}")).unwrap_or_else(|| r.index.to_string()),
                r.exact.qber_z,
                r.exact.qber_x,
                if six_state { format!(" {:.4} |", r.exact.qber_y) } else { String::new() },
                r.exact.h_x_given_e,
                abort_cell(&r.stats, six_state),
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

/// The abort probability with what caused the aborts, e.g. `97.5 % (X 97.5 %, Z 12.0 %)`:
/// the bases whose observed error rate exceeded the threshold (Z test sample, X, Y), a block
/// without key or X bits (`empty`), the rule's own condition (`rule`), a monitor alarm
/// (`alarm`), each as a share of all trials (one trial can have several).
fn abort_cell(st: &crate::audit::stats::PointStats, six_state: bool) -> String {
    let total = pct(st.abort_probability);
    if st.abort_probability.is_nan() || st.abort_probability <= 0.0 {
        return total;
    }
    let a = &st.abort_reasons;
    let mut causes = vec![("Z", a.qber[0]), ("X", a.qber[1])];
    if six_state {
        causes.push(("Y", a.qber[2]));
    }
    causes.extend([("empty", a.empty), ("rule", a.rule), ("alarm", a.alarm)]);
    let named: Vec<String> = causes.into_iter().filter(|(_, f)| *f > 0.0).map(|(k, f)| format!("{k} {}", pct(f))).collect();
    format!("{total} ({})", named.join(", "))
}

/// The attack × rule matrix: one cell per (attack entry, rule) with the worst point's
/// verdict, the largest leak probability and the largest mean excess.
fn matrix(s: &mut String, c: &Campaign, results: &[PointResult]) {
    let mut entries: Vec<usize> = results.iter().map(|r| r.entry).collect();
    entries.dedup();
    let _ = writeln!(s, "## Verdict by attack and rule\n");
    let header: Vec<String> =
        c.rules.iter().map(|r| if *r == c.setup.key_rule { format!("`{r}` (the system's rule)") } else { format!("`{r}`") }).collect();
    let _ = writeln!(s, "| attack | {} |", header.join(" | "));
    let _ = writeln!(s, "|---|{}", "---|".repeat(c.rules.len()));
    for e in entries {
        let label = &results.iter().find(|r| r.entry == e).map(|r| r.attack.clone()).unwrap_or_default();
        let cells: Vec<String> = c
            .rules
            .iter()
            .map(|rule| {
                let pts: Vec<&PointResult> = results.iter().filter(|r| r.entry == e && r.rule == *rule).collect();
                let verdict = crate::audit::stats::point_verdict(pts.iter().map(|r| r.stats.verdict));
                if verdict == Verdict::Leak {
                    let worst = pts.iter().map(|r| r.stats.leak_excess_max).filter(|x| x.is_finite()).fold(f64::NEG_INFINITY, f64::max);
                    let prob = pts.iter().map(|r| r.stats.leak_probability).fold(0.0, f64::max);
                    format!("**LEAK** (up to {} excess bits; leak probability up to {})", bits(worst), pct(prob))
                } else {
                    verdict.to_string()
                }
            })
            .collect();
        let _ = writeln!(s, "| {label} | {} |", cells.join(" | "));
    }
    let _ = writeln!(s);
}

/// For every leaking (attack, rule) pair: the excess at the first leaking point and at the
/// worst, in bits and as a share of the key, and the cause.
fn explain_leaks(s: &mut String, c: &Campaign, results: &[PointResult]) {
    let mut pairs: Vec<(usize, crate::audit::rules::Rule)> =
        results.iter().filter(|r| r.stats.verdict == Verdict::Leak).map(|r| (r.entry, r.rule.clone())).collect();
    pairs.dedup();
    if pairs.is_empty() {
        return;
    }
    let _ = writeln!(s, "## Leaks explained\n");
    for (e, rule) in pairs {
        let pts: Vec<&PointResult> =
            results.iter().filter(|r| r.entry == e && r.rule == rule && r.stats.verdict == Verdict::Leak).collect();
        let first = pts[0];
        let worst = pts.iter().copied().max_by(|a, b| a.stats.leak_excess_max.total_cmp(&b.stats.leak_excess_max)).unwrap_or(first);
        // Excess over the leaking trials (the mean over all trials can be negative when only
        // a few trials leak). The capacity is negative when Eve knows more than error
        // correction leaves: then the whole key is exposed and the excess exceeds it.
        let share = |r: &PointResult| {
            if r.stats.leak_excess_mean >= r.stats.key_length_mean {
                "all of the mean key".to_string()
            } else if r.stats.key_length_mean > 0.0 {
                format!("{} of the mean key", pct(r.stats.leak_excess_mean / r.stats.key_length_mean))
            } else {
                "-".into()
            }
        };
        let _ = writeln!(
            s,
            "- **{} under `{}`{}**: leaks at {} of its points. First leaking point {}: in {} of the trials the key exceeds what \
             the attack leaves secret, by {} bits on average over those trials ({}), at most {} bits. Worst point {}: {} bits on \
             average, at most {} ({}). Cause: {}.",
            first.attack,
            rule,
            if rule == c.setup.key_rule { " (the system's rule)" } else { "" },
            pts.len(),
            at(c, first),
            pct(first.stats.leak_probability),
            bits(first.stats.leak_excess_mean),
            share(first),
            bits(first.stats.leak_excess_max),
            at(c, worst),
            bits(worst.stats.leak_excess_mean),
            bits(worst.stats.leak_excess_max),
            share(worst),
            leak_cause(c, worst)
        );
    }
    let _ = writeln!(s);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn facts() -> CauseFacts {
        CauseFacts {
            key_fraction_multi: 0.0,
            eve_guess_rate: 0.6,
            mean_excess: 5000.0,
            mean_key_bits: 100_000.0,
            key_length_mean: 40_000.0,
            mean_capacity: 35_000.0,
            mean_e_x: 0.03,
            leak_probability: 0.9,
            h_x_given_e: 0.8,
            accessible_z: Some(0.1),
            holevo_z: 0.2,
            epsilon_sec: 1e-10,
            epsilon_cor: 1e-12,
        }
    }

    #[test]
    fn every_rule_gets_a_cause_naming_what_it_gets_wrong() {
        let f = facts();
        let expect = [
            (KeyRule::Asymptotic, "no finite-size term"),
            (KeyRule::Individual, "measures each signal on its own"),
            (KeyRule::GllpNoDecoy, "asymptotic bound applied to a finite block"),
            (KeyRule::DecoyVacuumWeak, "asymptotic bound applied to a finite block"),
            (KeyRule::FiniteUncertainty, "it is proven for this setting"),
            (KeyRule::GameMinEntropy, "it is proven for this setting"),
            (KeyRule::DecoyFinite, "it is proven for this setting"),
            (KeyRule::NaiveSinglePhoton, "it is proven for this setting"),
            (KeyRule::MismatchAware, "it is proven for this setting"),
            (KeyRule::BlindingAware, "it is proven for this setting"),
        ];
        assert_eq!(expect.len(), KeyRule::ALL.len(), "a rule without its cause sentence");
        for (rule, needle) in expect {
            let text = cause_sentence(rule, &f);
            assert!(text.contains(needle), "{rule}: {text}");
            assert!(!text.contains("NaN"), "{rule}: {text}");
        }
        // The privacy-amplification cost the asymptotic rules omit, computed: 2 log₂(1/ε_sec).
        assert!(cause_sentence(KeyRule::DecoyVacuumWeak, &f).contains("(66 bits at ε_sec = 1e-10)"));
    }

    #[test]
    fn multi_photon_key_bits_are_named_for_every_rule_that_assumes_single_photons() {
        let f = CauseFacts { key_fraction_multi: 0.64, ..facts() };
        for rule in [KeyRule::NaiveSinglePhoton, KeyRule::Asymptotic, KeyRule::Individual] {
            let text = cause_sentence(rule, &f);
            assert!(text.contains("64.0 % of the key bits came from multi-photon pulses"), "{rule}: {text}");
        }
    }

    #[test]
    fn a_leak_without_an_attack_is_the_omitted_hash() {
        let f = CauseFacts { h_x_given_e: 1.0, mean_excess: 41.0, ..facts() };
        let text = cause_sentence(KeyRule::Asymptotic, &f);
        assert!(text.contains("omits the error-verification hash") && text.contains("the 40.863"), "{text}");
    }
}
