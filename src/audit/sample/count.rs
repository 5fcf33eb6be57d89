//! Count-level block sampler: the whole block from a handful of binomial and multinomial
//! (sequential binomial) draws, so its cost does not depend on the number of signals.

use super::{BlockCounts, SignalModel};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Binomial, Distribution};

/// Multinomial draw of `n` items over probabilities `p` (summing to 1) by sequential
/// conditional binomials. Zero-probability categories cost nothing.
pub fn multinomial(n: u64, p: &[f64], rng: &mut impl Rng, out: &mut [u64]) {
    let mut left = n;
    let mut mass = 1.0;
    let last = p.iter().rposition(|&q| q > 0.0).unwrap_or(0);
    for (i, &q) in p.iter().enumerate() {
        out[i] = 0;
        if left == 0 || q <= 0.0 {
            continue;
        }
        if i == last {
            out[i] = left;
            left = 0;
            continue;
        }
        let cond = (q / mass).clamp(0.0, 1.0);
        let x = Binomial::new(left, cond).expect("probability in [0, 1]").sample(rng);
        out[i] = x;
        left -= x;
        mass -= q;
    }
}

/// One binomial draw (0 when `n` = 0 or `p` = 0, `n` when `p` = 1).
pub fn binomial(n: u64, p: f64, rng: &mut impl Rng) -> u64 {
    if n == 0 || p <= 0.0 {
        return 0;
    }
    if p >= 1.0 {
        return n;
    }
    Binomial::new(n, p).expect("probability in [0, 1]").sample(rng)
}

/// Draws one block: basis pairs (multinomial), then per sifted basis the errors, and for
/// Z the test sample (binomial errors among m) and the key (multinomial over the four
/// categories among n_Z − m).
pub fn sample(model: &SignalModel, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
    let nb = model.bases.len();
    let mut p = [0.0; 4];
    let mut sifted_total = 0.0;
    for (i, q) in p.iter_mut().enumerate().take(nb) {
        *q = model.sifted_probability(i);
        sifted_total += *q;
    }
    p[nb] = (1.0 - sifted_total).max(0.0);
    let mut pairs = [0u64; 4];
    multinomial(signals, &p[..=nb], rng, &mut pairs[..=nb]);
    let mut out = BlockCounts { signals, ..BlockCounts::default() };
    out.sifted[..nb].copy_from_slice(&pairs[..nb]);
    let m = test_size(out.sifted[0]).min(out.sifted[0]);
    out.test_z = m;
    out.test_z_errors = binomial(m, model.qber(0), rng);
    let mut key = [0u64; 4];
    multinomial(out.sifted[0] - m, &model.categories(0), rng, &mut key);
    out.key = key;
    out.errors[0] = out.test_z_errors + out.key_errors();
    for i in 1..nb {
        out.errors[i] = binomial(out.sifted[i], model.qber(i), rng);
    }
    out.alarm = super::monitor_alarm(model.alarm_odds, signals, rng);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn multinomial_conserves_and_has_right_means() {
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let p = [0.1, 0.0, 0.6, 0.3];
        let mut sum = [0f64; 4];
        let mut out = [0u64; 4];
        for _ in 0..2000 {
            multinomial(1000, &p, &mut rng, &mut out);
            assert_eq!(out.iter().sum::<u64>(), 1000);
            assert_eq!(out[1], 0);
            for i in 0..4 {
                sum[i] += out[i] as f64;
            }
        }
        for i in 0..4 {
            // Mean within 5 standard errors: sd of the mean = √(1000 p(1−p)/2000).
            let se = (1000.0 * p[i] * (1.0 - p[i]) / 2000.0).sqrt().max(1e-9);
            assert!((sum[i] / 2000.0 - 1000.0 * p[i]).abs() < 5.0 * se, "category {i}");
        }
    }
}
