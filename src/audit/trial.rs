//! One trial of a campaign: from a sampled block to the configured key length and a
//! verdict against what the attack actually leaves secret.
//!
//! For the n key bits of an i.i.d. attack with per-round conditional entropy H(X|E):
//! - `capacity = n·H(X|E) − leak_EC` (on a weak-coherent link n·H(X|E) is replaced by the
//!   sum over the sampled key bits of their photon-number class's H(X|E)): no privacy
//!   amplification extracts more secret key
//!   against this attack, up to O(log n) terms (the smooth min-entropy of n i.i.d. rounds
//!   lies below n·H(X|E) for small ε; Tomamichel & Hayashi, IEEE TIT 59, 7693, 2013);
//! - `achievable = AEP(n, H(X|E), ε_smooth) − leak_EC − 2 log₂(1/(2ε_PA))`: a rigorous lower
//!   bound (Tomamichel, Colbeck, Renner 2009 with the leftover hash lemma), ε budget as in
//!   [`crate::audit::rules`].
//!
//! Verdicts: `aborted`; `no-key` (the rule gives length 0); `secure` if ℓ ≤ achievable;
//! `leak` if ℓ > capacity + allowance with allowance = 2·log₂ n (the O(log n) slack of the
//! converse): the key is provably not secret against this attack at any small ε;
//! `inconclusive` otherwise (the AEP band is loose, so honest keys from a proven rule often
//! land here; they remain covered by the rule's own security proof).

use crate::audit::rules::{aep_min_entropy, ec_leak_bits, pa_cost_bits, BlockStats, EpsilonBudget, Rule, RuleAnswer, RuleParams};
use crate::audit::sample::BlockCounts;
use serde::{Deserialize, Serialize};

/// A verdict, of one trial or (the worst that matters over its trials, see
/// [`crate::audit::stats::point_verdict`]) of one attack point. One vocabulary for both.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord, Hash)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// The protocol aborted (observed error rate above threshold, or nothing to test); for
    /// a point: every trial aborted.
    Aborted,
    /// The rule gave no key; for a point: no trial gave a key, and not all aborted.
    NoKey,
    /// ℓ ≤ achievable: secret against this attack, rigorously.
    Secure,
    /// Between the rigorous bound and the converse.
    Inconclusive,
    /// ℓ > capacity + allowance: provably not secret against this attack.
    Leak,
}

impl Verdict {
    /// Interface name.
    pub fn name(self) -> &'static str {
        match self {
            Verdict::Aborted => "aborted",
            Verdict::NoKey => "no-key",
            Verdict::Secure => "secure",
            Verdict::Inconclusive => "inconclusive",
            Verdict::Leak => "leak",
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// The outcome of one trial.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TrialOutcome {
    /// What the post-processing saw.
    pub stats: BlockStats,
    /// Observed Y error rate (six-state; NaN otherwise or without Y rounds).
    pub e_y: f64,
    /// Whether the protocol aborted.
    pub aborted: bool,
    /// Extracted key length ℓ (0 when aborted or no key).
    pub length: u64,
    /// Error-correction leak including verification, bits.
    pub leak_ec: f64,
    /// n·H(X|E) − leak_EC.
    pub capacity: f64,
    /// Rigorous achievable length against this attack (−∞ when the AEP bound does not apply).
    pub achievable: f64,
    /// ℓ − capacity.
    pub excess: f64,
    /// Key bits Eve guessed correctly (her Helstrom guess after the basis announcement).
    pub eve_correct_key: u64,
    /// Weak-coherent links: key bits by photon-number class (0, 1, ≥ 2 photons).
    pub key_classes: Option<[u64; 3]>,
    /// Why the block aborted (all false when it did not).
    pub abort_reasons: AbortReasons,
    /// The verdict.
    pub verdict: Verdict,
}

/// What made a block abort; several can hold at once (an error rate above the threshold in
/// two bases).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct AbortReasons {
    /// A monitor alarm (a detector flaw's countermeasure).
    pub alarm: bool,
    /// No key bits or no X bits to estimate the phase error from.
    pub empty: bool,
    /// The rule's own abort condition (a rule file's `abort_if`, a program's `abort`).
    pub rule: bool,
    /// The observed error rate of the Z test sample, X, Y above the abort threshold (when
    /// the setup's threshold decides).
    pub qber: [bool; 3],
}

/// The slack of the converse: 2·log₂ n bits.
pub fn allowance_bits(n: u64) -> f64 {
    2.0 * (n.max(1) as f64).log2()
}

fn rate(errors: u64, total: u64) -> f64 {
    if total == 0 {
        f64::NAN
    } else {
        errors as f64 / total as f64
    }
}

/// What the post-processing sees of a block (and, in `key_errors`, what error correction
/// learns).
pub fn block_stats(counts: &BlockCounts) -> BlockStats {
    let n = counts.key_bits();
    let m = counts.test_z;
    let k = counts.sifted[1];
    BlockStats {
        signals: counts.signals,
        n,
        k,
        m,
        e_z: rate(counts.test_z_errors, m),
        e_x: rate(counts.errors[1], k),
        m_errors: counts.test_z_errors,
        k_errors: counts.errors[1],
        sifted_y: counts.sifted[2],
        y_errors: counts.errors[2],
        e_y: rate(counts.errors[2], counts.sifted[2]),
        key_errors: counts.key_errors(),
        intensities: counts.intensities,
    }
}

/// A block with no key bits or no X bits to estimate the phase error from aborts before
/// any rule is asked.
pub fn is_empty(stats: &BlockStats) -> bool {
    stats.n == 0 || stats.k == 0
}

/// The setup's abort test: an observed error rate (Z sample, X, Y) above `abort_qber`.
pub fn threshold_aborts(stats: &BlockStats, params: &RuleParams) -> bool {
    params.threshold_aborts(stats)
}

/// Post-processes a block with `rule` (a [`crate::audit::rules::KeyRule`] or a [`Rule`]) and judges the key
/// against the attack's `h_x_given_e`. For a built-in rule or a formula; a formula's NaN
/// and a rule program (asked in batches by the engine) are programmer errors here.
#[track_caller]
pub fn judge(counts: &BlockCounts, rule: impl Into<Rule>, params: &RuleParams, h_x_given_e: f64) -> TrialOutcome {
    let stats = block_stats(counts);
    let answer = (!is_empty(&stats)).then(|| {
        let threshold = threshold_aborts(&stats, params);
        match rule.into() {
            // The built-in rules are not asked about blocks the threshold aborts.
            Rule::Builtin(r) => RuleAnswer { abort: None, length: if threshold { 0 } else { r.length(&stats, params).length } },
            other => other.answer(&stats, params, threshold).unwrap_or_else(|e| panic!("{e}")),
        }
    });
    judge_answer(counts, stats, answer, params, h_x_given_e)
}

/// Judges a block given the rule's `answer` (`None` for an empty block, which no rule is
/// asked about): it aborts if empty, or if the rule says so, or, when the rule leaves the
/// decision to the setup, if an observed error rate exceeds the threshold.
pub fn judge_answer(
    counts: &BlockCounts,
    stats: BlockStats,
    answer: Option<RuleAnswer>,
    params: &RuleParams,
    h_x_given_e: f64,
) -> TrialOutcome {
    let n = stats.n;
    let e_y = stats.e_y;
    // A monitor alarm (a detector flaw's countermeasure) aborts the block whatever the rule
    // says.
    let aborted = counts.alarm
        || match answer {
            None => true,
            Some(a) => a.abort.unwrap_or_else(|| threshold_aborts(&stats, params)),
        };
    let abort_reasons = if aborted {
        let exceeds = |e: f64| !e.is_nan() && e > params.abort_qber;
        let threshold_decides = answer.is_some_and(|a| a.abort.is_none());
        AbortReasons {
            alarm: counts.alarm,
            empty: answer.is_none(),
            rule: answer.is_some_and(|a| a.abort == Some(true)),
            qber: if threshold_decides { [exceeds(stats.e_z), exceeds(stats.e_x), exceeds(stats.e_y)] } else { [false; 3] },
        }
    } else {
        AbortReasons::default()
    };
    let leak_ec = ec_leak_bits(&stats, params);
    // Weak-coherent links: Eve's actual knowledge, summed over the photon-number classes of
    // the sampled key bits; otherwise n·H(X|E).
    let capacity = counts.key_entropy_bits.unwrap_or(n as f64 * h_x_given_e) - leak_ec;
    let budget = EpsilonBudget::split(params.epsilon_sec);
    let achievable = aep_min_entropy(n, h_x_given_e, budget.smooth).map_or(f64::NEG_INFINITY, |h| h - leak_ec - pa_cost_bits(budget.pa));
    let length = match answer {
        Some(a) if !aborted => a.length,
        _ => 0,
    };
    let verdict = if aborted {
        Verdict::Aborted
    } else if length == 0 {
        Verdict::NoKey
    } else if (length as f64) <= achievable {
        Verdict::Secure
    } else if length as f64 > capacity + allowance_bits(n) {
        Verdict::Leak
    } else {
        Verdict::Inconclusive
    };
    TrialOutcome {
        stats,
        e_y,
        aborted,
        length,
        leak_ec,
        capacity,
        achievable,
        excess: length as f64 - capacity,
        eve_correct_key: counts.eve_correct_key(),
        key_classes: counts.key_classes,
        abort_reasons,
        verdict,
    }
}
