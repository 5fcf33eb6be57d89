//! Count-level block sampler: the whole block from a handful of multinomial (sequential
//! binomial) and multivariate hypergeometric draws, so its cost does not depend on the
//! number of signals.

use super::{BlockCounts, SignalModel};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Binomial, Distribution, Hypergeometric};

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

/// Multivariate hypergeometric draw: `draws` items without replacement from categories of
/// sizes `counts`, by sequential hypergeometric draws.
pub fn multivariate_hypergeometric(counts: &[u64], draws: u64, rng: &mut impl Rng, out: &mut [u64]) {
    let mut total: u64 = counts.iter().sum();
    let mut left = draws.min(total);
    for (i, &c) in counts.iter().enumerate() {
        out[i] = 0;
        if left == 0 || c == 0 {
            total -= c;
            continue;
        }
        if c == total {
            out[i] = left;
            left = 0;
            continue;
        }
        let x = hypergeometric(total, c, left, rng);
        out[i] = x;
        left -= x;
        total -= c;
    }
}

/// Number of marked items in `draws` items drawn without replacement from `total` items
/// of which `marked` are marked. Uses `rand_distr`'s H2PE/HIN sampler; where that sampler
/// cannot start (its HIN branch underflows for very large populations), an exact
/// sequential draw over the smaller of `marked` and `draws` (each step selects with
/// probability remaining-slots / remaining-items). Beyond 10⁷ steps, which needs a mean
/// below 10 with both `marked` and `draws` above 10⁷ (so a sampling fraction below 10⁻⁶),
/// the binomial(draws, marked/total) law is used; its total-variation distance from the
/// hypergeometric is at most draws/total (Diaconis & Freedman, Ann. Prob. 8, 745, 1980).
pub fn hypergeometric(total: u64, marked: u64, draws: u64, rng: &mut impl Rng) -> u64 {
    if let Ok(h) = Hypergeometric::new(total, marked, draws) {
        return h.sample(rng);
    }
    let steps = marked.min(draws);
    if steps > 10_000_000 {
        return Binomial::new(draws, marked as f64 / total as f64).expect("probability in [0, 1]").sample(rng);
    }
    // Walk over the smaller set: the marked items (are they drawn?) or the draws (are
    // they marked?).
    let (walk, other) = if marked <= draws { (marked, draws) } else { (draws, marked) };
    let mut hits = 0u64;
    for j in 0..walk {
        let p = (other - hits) as f64 / (total - j) as f64;
        if rng.gen::<f64>() < p {
            hits += 1;
        }
    }
    hits
}

/// Draws one block.
pub fn sample(model: &SignalModel, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
    let nb = model.bases.len();
    // Basis pairs: sifted in each basis, or not sifted.
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
    for i in 0..nb {
        out.sifted[i] = pairs[i];
        let mut cells = [0u64; 8];
        multinomial(pairs[i], &model.cells[i][i], rng, &mut cells);
        out.cells[i] = cells;
    }
    let m = test_size(out.sifted[0]);
    let mut test = [0u64; 8];
    multivariate_hypergeometric(&out.cells[0], m, rng, &mut test);
    out.test_z = test;
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

    #[test]
    fn hypergeometric_fallback_has_the_right_mean_for_huge_populations() {
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let (total, marked, draws) = (1_000_000_000_000u64, 5_000u64, 400_000_000u64);
        let trials = 4000;
        let mean: f64 = (0..trials).map(|_| hypergeometric(total, marked, draws, &mut rng) as f64).sum::<f64>() / trials as f64;
        let expect = marked as f64 * draws as f64 / total as f64;
        let sd = (expect * (1.0 - draws as f64 / total as f64)).sqrt() / (trials as f64).sqrt();
        assert!((mean - expect).abs() < 5.0 * sd, "mean {mean}, expected {expect}");
        // Degenerate cases.
        assert_eq!(hypergeometric(10, 10, 4, &mut rng), 4);
        assert_eq!(hypergeometric(10, 0, 4, &mut rng), 0);
    }

    #[test]
    fn hypergeometric_split_conserves() {
        let mut rng = ChaCha8Rng::seed_from_u64(2);
        let counts = [5, 0, 100, 7, 0, 0, 3, 1];
        let mut out = [0u64; 8];
        for draws in [0, 1, 50, 116, 200] {
            multivariate_hypergeometric(&counts, draws, &mut rng, &mut out);
            assert_eq!(out.iter().sum::<u64>(), draws.min(116));
            for i in 0..8 {
                assert!(out[i] <= counts[i]);
            }
        }
    }
}
