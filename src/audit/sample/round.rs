//! Per-round block sampler: one draw per signal from an alias table (Walker 1977, Vose
//! 1991) over the full joint distribution (Alice's basis, Bob's basis, Alice's bit, Bob's
//! outcome, Eve's guess). Optionally reports every round, for round logs of small blocks.
//!
//! A draw uses one 64-bit random number u: the high word of the 128-bit product u·K picks
//! a column uniformly and the low word (the fractional part, uniform on 64 bits) is
//! compared with the column's integer threshold to choose between the column and its
//! alias (Lemire's multiply-shift; thresholds have 2⁻⁶⁴ resolution).

use super::BlockCounts;
use crate::exact::signal::{SignalModel, CELL_CATEGORY};
use rand::{Rng, RngCore};
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

/// One round of a round log.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct RoundRecord {
    /// Round number, from 0.
    pub round: u64,
    /// Alice's basis (z, x, y).
    pub alice_basis: &'static str,
    /// Bob's basis.
    pub bob_basis: &'static str,
    /// Alice's bit.
    pub alice_bit: u8,
    /// Bob's outcome.
    pub bob_bit: u8,
    /// Eve's guess of Alice's bit (Helstrom measurement for Alice's basis).
    pub eve_guess: u8,
    /// `discarded` (bases differ), `test-z` (disclosed Z sample), `key`, or `test-x` /
    /// `test-y` (sifted in the test bases, all disclosed).
    pub role: &'static str,
}

/// An alias table over the joint cells of a [`SignalModel`].
pub struct RoundSampler {
    threshold: Vec<u64>,
    alias: Vec<u32>,
    /// For each column: (alice basis, bob basis, cell).
    meaning: Vec<(u8, u8, u8)>,
    bases: Vec<&'static str>,
    alarm_odds: f64,
}

impl RoundSampler {
    /// Builds the table (Vose's method).
    pub fn new(model: &SignalModel) -> Self {
        let nb = model.bases.len();
        let mut weights = Vec::with_capacity(nb * nb * 8);
        let mut meaning = Vec::with_capacity(nb * nb * 8);
        for a in 0..nb {
            for b in 0..nb {
                for c in 0..8 {
                    weights.push(model.pair_weight(a, b) * model.cells[a][b][c]);
                    meaning.push((a as u8, b as u8, c as u8));
                }
            }
        }
        let k = weights.len();
        let total: f64 = weights.iter().sum();
        let mut scaled: Vec<f64> = weights.iter().map(|w| w * k as f64 / total).collect();
        let mut prob = vec![1.0; k];
        let mut alias: Vec<u32> = (0..k as u32).collect();
        let (mut small, mut large): (Vec<usize>, Vec<usize>) = (0..k).partition(|&i| scaled[i] < 1.0);
        while let (Some(s), Some(&l)) = (small.pop(), large.last()) {
            prob[s] = scaled[s];
            alias[s] = l as u32;
            scaled[l] -= 1.0 - scaled[s];
            if scaled[l] < 1.0 {
                large.pop();
                small.push(l);
            }
        }
        // Leftovers have probability 1 up to rounding.
        let threshold = prob.iter().map(|&p| if p >= 1.0 { u64::MAX } else { (p * 18_446_744_073_709_551_616.0) as u64 }).collect();
        let bases = model.bases.iter().map(|b| b.name()).collect();
        RoundSampler { threshold, alias, meaning, bases, alarm_odds: model.alarm_odds }
    }

    /// Draws a block of `signals` rounds and returns its counts.
    ///
    /// Without `log` (constant memory, the campaign path): every round only increments a
    /// tally of its (column, below-threshold) outcome, so the hot loop has no branch and
    /// stores nothing per round; the tallies are resolved to cells at the end. The test
    /// sample is then a uniformly random subset of m = `test_size(sifted_z)` of the sifted Z
    /// rounds; given the tallies, its category counts are multivariate hypergeometric
    /// ([`multivariate_hypergeometric`]), which is what choosing m of the stored rounds
    /// would give, since the rounds are exchangeable.
    ///
    /// With `log` (small blocks, `qkd-audit rounds`): every round is reported, and the test
    /// sample is the first m sifted Z rounds of the sequence (the same distribution). The
    /// rounds themselves are the same draws in both paths; only the choice of the test
    /// rounds uses the stream differently.
    pub fn sample(
        &self,
        signals: u64,
        test_size: &dyn Fn(u64) -> u64,
        rng: &mut ChaCha8Rng,
        log: Option<&mut dyn FnMut(RoundRecord)>,
    ) -> BlockCounts {
        match log {
            Some(f) => self.sample_logged(signals, test_size, rng, f),
            None => self.sample_tallied(signals, test_size, rng),
        }
    }

    /// The constant-memory path: branch-free tallies, then the test split from them.
    fn sample_tallied(&self, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
        let k = self.threshold.len();
        // Outcome 2·i + 1: column i itself; 2·i: its alias. Four interleaved copies of the
        // tally so that consecutive rounds landing on the same cell do not wait on each
        // other's increment (a store-to-load dependency otherwise bounds the loop).
        let mut tallies = vec![0u64; LANES * 2 * k];
        let mut words = [0u64; WORDS_PER_REFILL];
        let mut left = signals;
        while left > 0 {
            let now = (left as usize).min(WORDS_PER_REFILL);
            fill_words(rng, &mut words[..now]);
            let mut chunks = words[..now].chunks_exact(LANES);
            for chunk in &mut chunks {
                for (lane, &u) in chunk.iter().enumerate() {
                    let wide = u128::from(u) * k as u128;
                    let i = (wide >> 64) as usize;
                    let below = ((wide as u64) < self.threshold[i]) as usize;
                    tallies[lane * 2 * k + 2 * i + below] += 1;
                }
            }
            for &u in chunks.remainder() {
                let wide = u128::from(u) * k as u128;
                let i = (wide >> 64) as usize;
                let below = ((wide as u64) < self.threshold[i]) as usize;
                tallies[2 * i + below] += 1;
            }
            left -= now as u64;
        }
        let mut tally = [[0u64; 4]; 3];
        for i in 0..k {
            let own: u64 = (0..LANES).map(|l| tallies[l * 2 * k + 2 * i + 1]).sum();
            let aliased: u64 = (0..LANES).map(|l| tallies[l * 2 * k + 2 * i]).sum();
            for (column, n) in [(i, own), (self.alias[i] as usize, aliased)] {
                let (a, b, c) = self.meaning[column];
                if a == b {
                    tally[a as usize][CELL_CATEGORY[c as usize] as usize] += n;
                }
            }
        }
        let mut out = BlockCounts { signals, ..BlockCounts::default() };
        for i in 0..3 {
            out.sifted[i] = tally[i].iter().sum();
            out.errors[i] = tally[i][2] + tally[i][3];
        }
        let m = test_size(out.sifted[0]).min(out.sifted[0]);
        let mut test = [0u64; 4];
        multivariate_hypergeometric(&tally[0], m, rng, &mut test);
        out.test_z = m;
        out.test_z_errors = test[2] + test[3];
        for c in 0..4 {
            out.key[c] = tally[0][c] - test[c];
        }
        out.alarm = super::monitor_alarm(self.alarm_odds, signals, rng);
        out
    }

    /// The logged path: every round stored and reported; the first m sifted Z rounds are
    /// the test sample.
    fn sample_logged(
        &self,
        signals: u64,
        test_size: &dyn Fn(u64) -> u64,
        rng: &mut ChaCha8Rng,
        log: &mut dyn FnMut(RoundRecord),
    ) -> BlockCounts {
        let mut out = BlockCounts { signals, ..BlockCounts::default() };
        let mut tally = [[0u64; 4]; 3];
        let mut z_categories: Vec<u8> = Vec::new();
        let mut records: Vec<RoundRecord> = Vec::new();
        let mut words = [0u64; WORDS_PER_REFILL];
        let mut round = 0u64;
        while round < signals {
            let now = ((signals - round) as usize).min(WORDS_PER_REFILL);
            fill_words(rng, &mut words[..now]);
            for &u in &words[..now] {
                let (a, b, c) = self.meaning[self.column(u)];
                if a == b {
                    let cat = CELL_CATEGORY[c as usize];
                    tally[a as usize][cat as usize] += 1;
                    if a == 0 {
                        z_categories.push(cat);
                    }
                }
                let c = c as usize;
                records.push(RoundRecord {
                    round,
                    alice_basis: self.bases[a as usize],
                    bob_basis: self.bases[b as usize],
                    alice_bit: (c / 4) as u8,
                    bob_bit: ((c / 2) % 2) as u8,
                    eve_guess: (c % 2) as u8,
                    role: match (a == b, a) {
                        (false, _) => "discarded",
                        (true, 0) => "key",
                        (true, 1) => "test-x",
                        _ => "test-y",
                    },
                });
                round += 1;
            }
        }
        for i in 0..3 {
            out.sifted[i] = tally[i].iter().sum();
            out.errors[i] = tally[i][2] + tally[i][3];
        }
        let m = (test_size(out.sifted[0]) as usize).min(z_categories.len());
        out.test_z = m as u64;
        out.test_z_errors = z_categories[..m].iter().filter(|&&c| c >= 2).count() as u64;
        out.key = tally[0];
        for &c in &z_categories[..m] {
            out.key[c as usize] -= 1;
        }
        let mut seen = 0usize;
        for mut r in records {
            if r.role == "key" {
                if seen < m {
                    r.role = "test-z";
                }
                seen += 1;
            }
            log(r);
        }
        out.alarm = super::monitor_alarm(self.alarm_odds, signals, rng);
        out
    }

    /// The column a 64-bit word selects (the column itself or its alias).
    #[inline]
    fn column(&self, u: u64) -> usize {
        let wide = u128::from(u) * self.threshold.len() as u128;
        let i = (wide >> 64) as usize;
        if (wide as u64) < self.threshold[i] {
            i
        } else {
            self.alias[i] as usize
        }
    }
}

/// Interleaved tally copies in the hot loop (see [`RoundSampler::sample`]).
const LANES: usize = 4;

/// Random words fetched from the stream at a time: a multiple of ChaCha's 64-byte block
/// and of [`LANES`], small enough to stay in L1 (2 KiB).
const WORDS_PER_REFILL: usize = 256;

/// Fills `words` from the stream: the same words, in the same order, as that many calls of
/// `next_u64` (little-endian bytes of the stream), fetched a block at a time.
fn fill_words(rng: &mut ChaCha8Rng, words: &mut [u64]) {
    let mut bytes = [0u8; WORDS_PER_REFILL * 8];
    let bytes = &mut bytes[..words.len() * 8];
    rng.fill_bytes(bytes);
    for (w, b) in words.iter_mut().zip(bytes.chunks_exact(8)) {
        *w = u64::from_le_bytes(b.try_into().expect("8 bytes"));
    }
}

/// Relative weight below which the hypergeometric walk stops (the mode has weight 1). The
/// pmf is log-concave, so beyond this point the weights keep falling at least
/// geometrically; the mass left out is below 10⁻¹⁸ for any block this sampler draws (at
/// most 10⁴ standard deviations times 10⁻²²), under the 2⁻⁵³ resolution of the uniform
/// that picks the value.
const HYPERGEOMETRIC_TAIL: f64 = 1e-22;

/// One hypergeometric draw: the number of marked items among `draws` taken without
/// replacement from `total` items of which `marked` are marked.
///
/// Exact inversion over the support, with the weights built from the mode by the pmf's
/// ratio recursion p(k+1)/p(k) = (K−k)(n−k) / ((k+1)(N−K−n+k+1)) (common practice;
/// e.g. Kachitvichyanukul and Schmeiser, "Computer generation of hypergeometric random
/// variates", J. Stat. Comput. Simul. 22 (1985) 127–145, for inversion from the mode).
/// Cost proportional to the standard deviation, about √draws, and constant memory.
/// (The `rand_distr` 0.4 sampler is not used: it draws from a wrong distribution for
/// some parameters, e.g. (100, 50, 49) — rust-random/rand issue 1508, fixed only in 0.5.)
pub fn hypergeometric(total: u64, marked: u64, draws: u64, rng: &mut impl Rng) -> u64 {
    assert!(marked <= total && draws <= total, "hypergeometric({total}, {marked}, {draws}) has no support");
    let lo = draws.saturating_sub(total - marked);
    let hi = draws.min(marked);
    if lo == hi {
        return lo;
    }
    let (n, k, d) = (total as f64, marked as f64, draws as f64);
    let up = |j: u64| {
        let j = j as f64;
        (k - j) * (d - j) / ((j + 1.0) * (n - k - d + j + 1.0))
    };
    let mode = ((u128::from(draws) + 1) * (u128::from(marked) + 1) / (u128::from(total) + 2)) as u64;
    let mode = mode.clamp(lo, hi);
    // Pass 1: the total weight and the lowest value worth visiting.
    let mut sum = 1.0;
    let (mut w, mut j) = (1.0, mode);
    while j < hi {
        w *= up(j);
        j += 1;
        sum += w;
        if w < HYPERGEOMETRIC_TAIL {
            break;
        }
    }
    let top = j;
    let (mut w, mut j) = (1.0, mode);
    while j > lo {
        w /= up(j - 1);
        j -= 1;
        sum += w;
        if w < HYPERGEOMETRIC_TAIL {
            break;
        }
    }
    let (bottom, w_bottom) = (j, w);
    // Pass 2: inversion from the bottom.
    let target = rng.gen::<f64>() * sum;
    let (mut acc, mut w, mut j) = (w_bottom, w_bottom, bottom);
    while acc <= target && j < top {
        w *= up(j);
        j += 1;
        acc += w;
    }
    j
}

/// A multivariate hypergeometric draw: `out[c]` items of category c among `draws` taken
/// without replacement from `counts[c]` items per category, by sequential univariate
/// draws (category c against all later categories).
pub fn multivariate_hypergeometric(counts: &[u64], draws: u64, rng: &mut impl Rng, out: &mut [u64]) {
    let mut rest: u64 = counts.iter().sum();
    let mut left = draws;
    for (c, &n) in counts.iter().enumerate() {
        let x = if c + 1 == counts.len() { left } else { hypergeometric(rest, n, left, rng) };
        out[c] = x;
        left -= x;
        rest -= n;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    /// Exact hypergeometric pmf by log-binomials (an independent derivation: direct
    /// counting, C(K,k)·C(N−K,n−k)/C(N,n)).
    fn pmf(total: u64, marked: u64, draws: u64, k: u64) -> f64 {
        fn ln_choose(n: u64, k: u64) -> f64 {
            (1..=k).map(|i| ((n - k + i) as f64 / i as f64).ln()).sum()
        }
        if k > marked || draws - k > total - marked {
            return 0.0;
        }
        (ln_choose(marked, k) + ln_choose(total - marked, draws - k) - ln_choose(total, draws)).exp()
    }

    /// Pearson chi-square of `samples` draws against the exact pmf, cells with expected
    /// count below 5 pooled; returns (statistic, degrees of freedom).
    fn chi_square(total: u64, marked: u64, draws: u64, samples: usize, seed: u64) -> (f64, usize) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut hist = vec![0u64; draws as usize + 1];
        for _ in 0..samples {
            hist[hypergeometric(total, marked, draws, &mut rng) as usize] += 1;
        }
        let (mut stat, mut cells) = (0.0, 0usize);
        let (mut obs_pool, mut exp_pool) = (0.0, 0.0);
        for (k, &o) in hist.iter().enumerate() {
            let e = pmf(total, marked, draws, k as u64) * samples as f64;
            assert!(e > 0.0 || o == 0, "value {k} outside the support drawn");
            obs_pool += o as f64;
            exp_pool += e;
            if exp_pool >= 5.0 {
                stat += (obs_pool - exp_pool).powi(2) / exp_pool;
                cells += 1;
                obs_pool = 0.0;
                exp_pool = 0.0;
            }
        }
        if exp_pool > 0.0 {
            stat += (obs_pool - exp_pool).powi(2) / exp_pool;
            cells += 1;
        }
        (stat, cells - 1)
    }

    #[test]
    fn hypergeometric_matches_the_exact_pmf() {
        // (100, 50, 49) is the case the rand_distr 0.4 sampler gets wrong.
        for (i, &(n, k, d)) in [(100u64, 50u64, 49u64), (20, 3, 10), (1000, 980, 700), (5000, 40, 2500), (60, 60, 7)].iter().enumerate() {
            let (stat, dof) = chi_square(n, k, d, 40_000, i as u64);
            // Fixed seeds; a generous bound: mean dof, sd √(2 dof), allow 6 sd + 10.
            let bound = dof as f64 + 6.0 * (2.0 * dof as f64).sqrt() + 10.0;
            assert!(stat < bound, "({n}, {k}, {d}): chi-square {stat:.1} on {dof} dof");
        }
    }

    #[test]
    fn hypergeometric_test_rejects_a_wrong_distribution() {
        // The chi-square above must be able to fail: draws of (100, 52, 49) against the
        // pmf of (100, 50, 49) exceed the bound.
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let samples = 40_000;
        let mut hist = [0u64; 50];
        for _ in 0..samples {
            hist[hypergeometric(100, 52, 49, &mut rng) as usize] += 1;
        }
        let stat: f64 = (0..50)
            .map(|k| (k, pmf(100, 50, 49, k as u64) * samples as f64))
            .filter(|&(_, e)| e >= 5.0)
            .map(|(k, e)| (hist[k] as f64 - e).powi(2) / e)
            .sum();
        assert!(stat > 200.0, "{stat}");
    }

    #[test]
    fn hypergeometric_moments_at_block_scale() {
        // N = 10⁹-scale tallies: mean nK/N and variance nK(N−K)(N−n)/(N²(N−1)), 2000 draws.
        let (n, k, d) = (2_000_000_000u64, 30_000_000u64, 500_000_000u64);
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let xs: Vec<f64> = (0..2000).map(|_| hypergeometric(n, k, d, &mut rng) as f64).collect();
        let (nf, kf, df) = (n as f64, k as f64, d as f64);
        let mean = df * kf / nf;
        let var = df * kf * (nf - kf) * (nf - df) / (nf * nf * (nf - 1.0));
        let m = xs.iter().sum::<f64>() / xs.len() as f64;
        let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64;
        assert!((m - mean).abs() < 5.0 * (var / 2000.0).sqrt(), "mean {m} vs {mean}");
        // Sample variance of 2000 normal draws: relative sd √(2/1999) ≈ 3.2 %.
        assert!((v / var - 1.0).abs() < 0.2, "variance {v} vs {var}");
    }

    #[test]
    fn multivariate_split_conserves_and_has_exact_means() {
        let counts = [700u64, 40, 200, 60];
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let mut sums = [0f64; 4];
        let mut out = [0u64; 4];
        let reps = 5000;
        for _ in 0..reps {
            multivariate_hypergeometric(&counts, 250, &mut rng, &mut out);
            assert_eq!(out.iter().sum::<u64>(), 250);
            for c in 0..4 {
                assert!(out[c] <= counts[c]);
                sums[c] += out[c] as f64;
            }
        }
        for c in 0..4 {
            let p = counts[c] as f64 / 1000.0;
            let var = 250.0 * p * (1.0 - p) * 750.0 / 999.0;
            let se = (var / reps as f64).sqrt();
            assert!((sums[c] / reps as f64 - 250.0 * p).abs() < 5.0 * se, "category {c}");
        }
    }

    #[test]
    fn tallied_and_logged_paths_draw_the_same_rounds() {
        // The same stream gives the same per-basis tallies with or without the log (only the
        // test split differs), so the fast path tallies exactly what the log lists.
        let attack = crate::attack::Attack::builtin(
            "intercept-resend",
            &[("fraction".to_string(), crate::attack::Value::Num(0.3))].into_iter().collect(),
        )
        .unwrap();
        let model = SignalModel::new(&attack, crate::protocol::Protocol::SixState, &[0.5, 0.3, 0.2]);
        let s = RoundSampler::new(&model);
        let ts = |z: u64| z / 4;
        for signals in [1u64, 3, 255, 256, 1001] {
            let fast = s.sample(signals, &ts, &mut ChaCha8Rng::seed_from_u64(signals), None);
            let mut n = 0u64;
            let logged = s.sample(signals, &ts, &mut ChaCha8Rng::seed_from_u64(signals), Some(&mut |_| n += 1));
            assert_eq!(n, signals);
            assert_eq!((fast.sifted, fast.errors, fast.test_z), (logged.sifted, logged.errors, logged.test_z));
            assert_eq!(fast.key_bits() + fast.test_z, fast.sifted[0]);
            assert_eq!(fast.test_z_errors + fast.key_errors(), fast.errors[0]);
        }
    }
}
