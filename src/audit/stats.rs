//! Per-point statistics over trials: Clopper–Pearson intervals, key-length quantiles,
//! verdict fractions. Tallies are reduced in trial order, so sums do not depend on the
//! number of threads.

use super::trial::{TrialOutcome, Verdict};
use serde::{Deserialize, Serialize};
use statrs::distribution::{Beta, ContinuousCDF};

/// Two-sided 95 % Clopper–Pearson interval for `k` successes in `n` trials (Clopper &
/// Pearson, Biometrika 26, 404, 1934), from Beta quantiles.
pub fn clopper_pearson(k: u64, n: u64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let alpha = 0.05;
    let lo = if k == 0 { 0.0 } else { beta_quantile(k as f64, (n - k + 1) as f64, alpha / 2.0) };
    let hi = if k == n { 1.0 } else { beta_quantile((k + 1) as f64, (n - k) as f64, 1.0 - alpha / 2.0) };
    (lo, hi)
}

/// Width at which the Beta quantile's bisection stops: far below the 4 significant digits
/// a confidence bound is read to, and above the spacing of doubles near 1.
const BETA_QUANTILE_TOL: f64 = 1e-13;

/// Quantile of the Beta(a, b) law by bisection on statrs' regularised incomplete beta
/// function to 1e-13 (statrs' own `inverse_cdf` stops near 1e-5).
fn beta_quantile(a: f64, b: f64, p: f64) -> f64 {
    let dist = Beta::new(a, b).expect("positive shape parameters");
    let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
    while hi - lo > BETA_QUANTILE_TOL {
        let mid = 0.5 * (lo + hi);
        if dist.cdf(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Nearest-rank quantile (the smallest value with at least `q` of the sample at or below
/// it) of sorted data.
pub fn quantile_sorted(sorted: &[u64], q: f64) -> u64 {
    if sorted.is_empty() {
        return 0;
    }
    let rank = ((q * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    sorted[rank - 1]
}

/// Monte Carlo summary of one attack point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PointStats {
    /// Number of trials.
    pub trials: u64,
    /// Fraction of trials that aborted, with its 95 % interval.
    pub abort_probability: f64,
    /// Clopper–Pearson 95 % interval of the abort probability.
    pub abort_ci: (f64, f64),
    /// Fraction of trials with a leak verdict.
    pub leak_probability: f64,
    /// Clopper–Pearson 95 % interval of the leak probability.
    pub leak_ci: (f64, f64),
    /// Fractions of trials per verdict: secure, inconclusive, no-key.
    pub secure_fraction: f64,
    /// See `secure_fraction`.
    pub inconclusive_fraction: f64,
    /// See `secure_fraction`.
    pub no_key_fraction: f64,
    /// Mean key length over all trials (aborted trials count as 0), bits.
    pub key_length_mean: f64,
    /// 5 % nearest-rank quantile of the key length, bits.
    pub key_length_q05: u64,
    /// 95 % nearest-rank quantile of the key length, bits.
    pub key_length_q95: u64,
    /// Mean ℓ − capacity over trials that produced a key (NaN when none did), bits.
    pub mean_excess: f64,
    /// Mean capacity over trials that did not abort, bits.
    pub mean_capacity: f64,
    /// Mean rigorous achievable length over trials that did not abort, bits.
    pub mean_achievable: f64,
    /// Mean number of key bits n.
    pub mean_key_bits: f64,
    /// Mean observed error rates (over trials where defined).
    pub mean_e_z: f64,
    /// See `mean_e_z`.
    pub mean_e_x: f64,
    /// See `mean_e_z` (six-state; NaN for BB84).
    pub mean_e_y: f64,
    /// Eve's correct guesses over all key bits of all trials.
    pub eve_guess_rate: f64,
    /// Weak-coherent links: fraction of all key bits from single-photon pulses (NaN
    /// otherwise).
    pub key_fraction_single: f64,
    /// Weak-coherent links: fraction of all key bits from multi-photon pulses.
    pub key_fraction_multi: f64,
    /// The point's verdict ([`point_verdict`]).
    pub verdict: Verdict,
}

fn mean(xs: impl Iterator<Item = f64>) -> f64 {
    let (mut s, mut n) = (0.0, 0usize);
    for x in xs.filter(|x| x.is_finite()) {
        s += x;
        n += 1;
    }
    if n == 0 {
        f64::NAN
    } else {
        s / n as f64
    }
}

/// Share of photon-number class `c` among all key bits (NaN without class counts).
fn class_fraction(trials: &[TrialOutcome], c: usize) -> f64 {
    let mut total = 0u64;
    let mut in_class = 0u64;
    for t in trials {
        if let Some(k) = t.key_classes {
            total += k.iter().sum::<u64>();
            in_class += k[c];
        }
    }
    if total == 0 {
        f64::NAN
    } else {
        in_class as f64 / total as f64
    }
}

/// The verdict of a point from its trials' verdicts: `leak` if any trial leaked, else
/// `inconclusive` if any was, else `aborted` if every trial aborted, else `no-key` if no
/// trial gave a key, else `secure` (some trials gave keys, and every key was secure). A
/// point without trials is `no-key`.
pub fn point_verdict(trials: impl Iterator<Item = Verdict> + Clone) -> Verdict {
    let any = |v: Verdict| trials.clone().any(|t| t == v);
    if any(Verdict::Leak) {
        Verdict::Leak
    } else if any(Verdict::Inconclusive) {
        Verdict::Inconclusive
    } else if any(Verdict::Secure) {
        Verdict::Secure
    } else if trials.clone().next().is_some() && trials.clone().all(|t| t == Verdict::Aborted) {
        Verdict::Aborted
    } else {
        Verdict::NoKey
    }
}

/// Summarises trials (in trial order).
pub fn summarize(trials: &[TrialOutcome]) -> PointStats {
    let t = trials.len() as u64;
    let count = |v: Verdict| trials.iter().filter(|o| o.verdict == v).count() as u64;
    let aborted = count(Verdict::Aborted);
    let leaks = count(Verdict::Leak);
    let frac = |k: u64| if t == 0 { f64::NAN } else { k as f64 / t as f64 };
    let mut lengths: Vec<u64> = trials.iter().map(|o| o.length).collect();
    lengths.sort_unstable();
    let passed = || trials.iter().filter(|o| !o.aborted);
    let key_bits: u64 = trials.iter().map(|o| o.stats.n).sum();
    let eve: u64 = trials.iter().map(|o| o.eve_correct_key).sum();
    let verdict = point_verdict(trials.iter().map(|o| o.verdict));
    PointStats {
        trials: t,
        abort_probability: frac(aborted),
        abort_ci: clopper_pearson(aborted, t),
        leak_probability: frac(leaks),
        leak_ci: clopper_pearson(leaks, t),
        secure_fraction: frac(count(Verdict::Secure)),
        inconclusive_fraction: frac(count(Verdict::Inconclusive)),
        no_key_fraction: frac(count(Verdict::NoKey)),
        key_length_mean: mean(trials.iter().map(|o| o.length as f64)),
        key_length_q05: quantile_sorted(&lengths, 0.05),
        key_length_q95: quantile_sorted(&lengths, 0.95),
        mean_excess: mean(trials.iter().filter(|o| o.length > 0).map(|o| o.excess)),
        mean_capacity: mean(passed().map(|o| o.capacity)),
        mean_achievable: mean(passed().map(|o| o.achievable)),
        mean_key_bits: mean(trials.iter().map(|o| o.stats.n as f64)),
        mean_e_z: mean(trials.iter().map(|o| o.stats.e_z)),
        mean_e_x: mean(trials.iter().map(|o| o.stats.e_x)),
        mean_e_y: mean(trials.iter().map(|o| o.e_y)),
        eve_guess_rate: if key_bits == 0 { f64::NAN } else { eve as f64 / key_bits as f64 },
        key_fraction_single: class_fraction(trials, 1),
        key_fraction_multi: class_fraction(trials, 2),
        verdict,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn clopper_pearson_known_values() {
        // 0 of 10: upper 1 − 0.025^(1/10) = 0.3084971; 10 of 10: lower 0.025^(1/10) = 0.6915029
        // (closed forms of the Beta quantile at the boundary, common practice).
        let (lo, hi) = clopper_pearson(0, 10);
        assert_eq!(lo, 0.0);
        assert_abs_diff_eq!(hi, 1.0 - 0.025f64.powf(0.1), epsilon = 1e-9);
        let (lo, hi) = clopper_pearson(10, 10);
        assert_abs_diff_eq!(lo, 0.025f64.powf(0.1), epsilon = 1e-9);
        assert_eq!(hi, 1.0);
        let (lo, hi) = clopper_pearson(5, 10);
        assert!(lo < 0.5 && hi > 0.5 && (lo + hi - 1.0).abs() < 1e-9);
    }

    #[test]
    fn point_verdicts_follow_the_worst_trial_and_never_call_no_key_secure() {
        use Verdict::*;
        let v = |xs: &[Verdict]| point_verdict(xs.iter().copied());
        assert_eq!(v(&[Secure, Leak, Aborted]), Leak);
        assert_eq!(v(&[Secure, Inconclusive]), Inconclusive);
        assert_eq!(v(&[Aborted, Aborted]), Aborted);
        assert_eq!(v(&[Aborted, NoKey]), NoKey);
        assert_eq!(v(&[NoKey, NoKey]), NoKey);
        assert_eq!(v(&[NoKey, Secure, Aborted]), Secure);
        assert_eq!(v(&[]), NoKey);
    }

    #[test]
    fn nearest_rank_quantiles() {
        let v: Vec<u64> = (1..=100).collect();
        assert_eq!(quantile_sorted(&v, 0.05), 5);
        assert_eq!(quantile_sorted(&v, 0.95), 95);
        assert_eq!(quantile_sorted(&[7], 0.05), 7);
    }
}
