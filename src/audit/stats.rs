//! Per-point statistics over trials: Clopper–Pearson intervals, key-length quantiles,
//! verdict fractions. Trials are fed to a [`Tally`] in trial order, so sums do not depend
//! on the number of threads, and per point only the key lengths are kept.

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
pub fn beta_quantile(a: f64, b: f64, p: f64) -> f64 {
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
    /// Mean ℓ − capacity over the leaking trials only (NaN without one): how much a leaking
    /// key exceeds what the attack leaves secret, when it leaks.
    #[serde(default)]
    pub leak_excess_mean: f64,
    /// Largest ℓ − capacity of a leaking trial (NaN without one).
    #[serde(default)]
    pub leak_excess_max: f64,
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
    /// Shares of the trials that aborted for each reason (several reasons can hold in one
    /// trial, so they may add up to more than the abort probability).
    #[serde(default)]
    pub abort_reasons: AbortShares,
    /// The point's verdict ([`point_verdict`]).
    pub verdict: Verdict,
}

/// A running mean over the finite values fed to it, summed in the order fed.
#[derive(Clone, Copy, Debug, Default)]
struct Mean {
    sum: f64,
    count: u64,
}

impl Mean {
    fn add(&mut self, x: f64) {
        if x.is_finite() {
            self.sum += x;
            self.count += 1;
        }
    }
    fn value(&self) -> f64 {
        if self.count == 0 {
            f64::NAN
        } else {
            self.sum / self.count as f64
        }
    }
}

/// Shares of a point's trials that aborted for each reason (see
/// [`crate::audit::trial::AbortReasons`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct AbortShares {
    /// A monitor alarm.
    pub alarm: f64,
    /// No key bits or no X bits.
    pub empty: f64,
    /// The rule's own abort condition.
    pub rule: f64,
    /// The observed error rate of the Z test sample, X and Y above the abort threshold.
    pub qber: [f64; 3],
}

/// The running summary of one point under one rule: trials are fed in trial order (chunk by
/// chunk), and only the key lengths are kept (8 bytes per trial, for the exact quantiles);
/// everything else is a count or a sum, so memory does not grow with the trials otherwise.
/// Sums are taken in trial order, so they do not depend on the number of threads.
#[derive(Clone, Debug, Default)]
pub struct Tally {
    verdicts: [u64; 5],
    lengths: Vec<u64>,
    key_length: Mean,
    excess: Mean,
    leak_excess: Mean,
    leak_excess_max: Option<f64>,
    capacity: Mean,
    achievable: Mean,
    key_bits_mean: Mean,
    e_z: Mean,
    e_x: Mean,
    e_y: Mean,
    key_bits: u64,
    eve: u64,
    class_total: u64,
    class_single: u64,
    class_multi: u64,
    /// Aborts by reason: alarm, empty, rule, QBER_Z, QBER_X, QBER_Y.
    abort_reasons: [u64; 6],
}

fn verdict_index(v: Verdict) -> usize {
    match v {
        Verdict::Aborted => 0,
        Verdict::NoKey => 1,
        Verdict::Secure => 2,
        Verdict::Inconclusive => 3,
        Verdict::Leak => 4,
    }
}

impl Tally {
    /// An empty tally with room for `trials` key lengths.
    pub fn with_capacity(trials: u64) -> Tally {
        Tally { lengths: Vec::with_capacity(trials.min(1 << 24) as usize), ..Tally::default() }
    }

    /// Adds the next trial (in trial order).
    pub fn add(&mut self, o: &TrialOutcome) {
        self.verdicts[verdict_index(o.verdict)] += 1;
        let r = &o.abort_reasons;
        for (count, hit) in self.abort_reasons.iter_mut().zip([r.alarm, r.empty, r.rule, r.qber[0], r.qber[1], r.qber[2]]) {
            *count += u64::from(hit);
        }
        self.lengths.push(o.length);
        self.key_length.add(o.length as f64);
        if o.length > 0 {
            self.excess.add(o.excess);
        }
        if o.verdict == Verdict::Leak {
            self.leak_excess.add(o.excess);
            self.leak_excess_max = Some(self.leak_excess_max.map_or(o.excess, |m| m.max(o.excess)));
        }
        if !o.aborted {
            self.capacity.add(o.capacity);
            self.achievable.add(o.achievable);
        }
        self.key_bits_mean.add(o.stats.n as f64);
        self.e_z.add(o.stats.e_z);
        self.e_x.add(o.stats.e_x);
        self.e_y.add(o.e_y);
        self.key_bits += o.stats.n;
        self.eve += o.eve_correct_key;
        if let Some(k) = o.key_classes {
            self.class_total += k.iter().sum::<u64>();
            self.class_single += k[1];
            self.class_multi += k[2];
        }
    }

    fn count(&self, v: Verdict) -> u64 {
        self.verdicts[verdict_index(v)]
    }

    /// The point's summary.
    pub fn finish(mut self) -> PointStats {
        let t = self.lengths.len() as u64;
        let aborted = self.count(Verdict::Aborted);
        let leaks = self.count(Verdict::Leak);
        let frac = |k: u64| if t == 0 { f64::NAN } else { k as f64 / t as f64 };
        let class = |k: u64| if self.class_total == 0 { f64::NAN } else { k as f64 / self.class_total as f64 };
        self.lengths.sort_unstable();
        PointStats {
            trials: t,
            abort_probability: frac(aborted),
            abort_ci: clopper_pearson(aborted, t),
            leak_probability: frac(leaks),
            leak_ci: clopper_pearson(leaks, t),
            secure_fraction: frac(self.count(Verdict::Secure)),
            inconclusive_fraction: frac(self.count(Verdict::Inconclusive)),
            no_key_fraction: frac(self.count(Verdict::NoKey)),
            key_length_mean: self.key_length.value(),
            key_length_q05: quantile_sorted(&self.lengths, 0.05),
            key_length_q95: quantile_sorted(&self.lengths, 0.95),
            mean_excess: self.excess.value(),
            leak_excess_mean: self.leak_excess.value(),
            leak_excess_max: self.leak_excess_max.unwrap_or(f64::NAN),
            mean_capacity: self.capacity.value(),
            mean_achievable: self.achievable.value(),
            mean_key_bits: self.key_bits_mean.value(),
            mean_e_z: self.e_z.value(),
            mean_e_x: self.e_x.value(),
            mean_e_y: self.e_y.value(),
            eve_guess_rate: if self.key_bits == 0 { f64::NAN } else { self.eve as f64 / self.key_bits as f64 },
            key_fraction_single: class(self.class_single),
            key_fraction_multi: class(self.class_multi),
            abort_reasons: AbortShares {
                alarm: frac(self.abort_reasons[0]),
                empty: frac(self.abort_reasons[1]),
                rule: frac(self.abort_reasons[2]),
                qber: [frac(self.abort_reasons[3]), frac(self.abort_reasons[4]), frac(self.abort_reasons[5])],
            },
            verdict: verdict_of(&self.verdicts),
        }
    }
}

/// The integer evidence of some trials of one point under one rule: the trials, their
/// verdicts and the sum of their key lengths. Counts add exactly, in any order, so the
/// counts of a point's trial chunks computed by separate processes (`tolerance --shard`)
/// add up to the counts of the whole point, bit for bit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counts {
    /// Trials counted.
    pub trials: u64,
    /// Trials by verdict: aborted, no key, secure, inconclusive, leak.
    pub verdicts: [u64; 5],
    /// Sum of the extracted key lengths (aborts count 0), bits; as text in files, since
    /// it can exceed 2⁶⁴ (10⁶ trials of 10¹⁵-bit keys).
    #[serde(with = "u128_text")]
    pub key_length_sum: u128,
}

impl Counts {
    /// Adds one trial.
    pub fn add(&mut self, o: &TrialOutcome) {
        self.trials += 1;
        self.verdicts[verdict_index(o.verdict)] += 1;
        self.key_length_sum += u128::from(o.length);
    }

    /// Adds the counts of other trials of the same point.
    pub fn merge(&mut self, other: &Counts) {
        self.trials += other.trials;
        for (a, b) in self.verdicts.iter_mut().zip(other.verdicts) {
            *a += b;
        }
        self.key_length_sum += other.key_length_sum;
    }

    /// Trials with verdict `v`.
    pub fn count(&self, v: Verdict) -> u64 {
        self.verdicts[verdict_index(v)]
    }

    /// Mean key length over the trials, bits (NaN without trials).
    pub fn key_length_mean(&self) -> f64 {
        if self.trials == 0 {
            f64::NAN
        } else {
            self.key_length_sum as f64 / self.trials as f64
        }
    }

    /// The point's verdict ([`point_verdict`] of the verdicts that occurred).
    pub fn verdict(&self) -> Verdict {
        verdict_of(&self.verdicts)
    }
}

/// The point's verdict from its counts by verdict (in [`verdict_index`] order): which
/// verdicts occurred is all it depends on.
fn verdict_of(counts: &[u64; 5]) -> Verdict {
    let present: Vec<Verdict> = [Verdict::Aborted, Verdict::NoKey, Verdict::Secure, Verdict::Inconclusive, Verdict::Leak]
        .into_iter()
        .filter(|v| counts[verdict_index(*v)] > 0)
        .collect();
    point_verdict(present.iter().copied())
}

/// A `u128` as a decimal string (TOML integers stop at 2⁶³ − 1).
mod u128_text {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(x: &u128, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&x.to_string())
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<u128, D::Error> {
        let text = String::deserialize(d)?;
        text.parse().map_err(|_| serde::de::Error::custom(format!("`{text}` is not a whole number of bits")))
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

/// Summarises trials (in trial order); the same as feeding them to a [`Tally`].
pub fn summarize(trials: &[TrialOutcome]) -> PointStats {
    let mut tally = Tally::with_capacity(trials.len() as u64);
    trials.iter().for_each(|o| tally.add(o));
    tally.finish()
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
