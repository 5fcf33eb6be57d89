//! Monte Carlo protocol runs.
//!
//! [`SignalModel`] holds, computed once and exactly per attack point, the joint
//! distribution of one signal: Alice's basis and bit, Bob's basis and outcome, and Eve's
//! guess from her optimal (Helstrom) measurement once Alice's basis is announced. Two
//! samplers draw whole blocks from it and must agree in distribution:
//! [`count`] (multinomial, binomial and hypergeometric draws; cost independent of the block
//! size; the default) and [`round`] (an alias table, one draw per signal; can also write
//! the round log of a small block). Both return [`BlockCounts`].
//!
//! Test sample: a uniformly random subset of the sifted Z rounds of the configured size m is
//! disclosed. Rounds are i.i.d. and hence exchangeable, so the per-round sampler may take
//! the first m sifted Z rounds as that subset, and the count-level sampler may draw the
//! test sample and the key as independent multinomials of sizes m and n_Z − m given n_Z.
//!
//! Every (point, trial) has its own random stream ([`trial_rng`]), so results do not
//! depend on the number of threads.

pub mod count;
pub mod link;
pub mod round;

use crate::attack::Attack;
use crate::linalg::{c, hermitian_eigen, CMat};
use crate::protocol::{Basis, Protocol};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

/// Index of a cell `(x, b, g)`: Alice's bit, Bob's outcome, Eve's guess.
#[inline]
pub fn cell(x: usize, b: usize, g: usize) -> usize {
    x * 4 + b * 2 + g
}

/// The exact distribution of one signal.
#[derive(Clone, Debug, PartialEq)]
pub struct SignalModel {
    /// The bases in use (Z, X, and Y for six-state).
    pub bases: Vec<Basis>,
    /// Probability of each basis for Alice and (independently) Bob.
    pub basis_prob: Vec<f64>,
    /// `cells[a][b_basis][cell(x, b, g)]`: probability of the cell given Alice's basis `a`
    /// and Bob's basis `b_basis`. Each row sums to 1.
    pub cells: Vec<Vec<[f64; 8]>>,
}

impl SignalModel {
    /// Computes the model for `attack` with basis probabilities `basis_prob` (in the order
    /// of `protocol.bases()`).
    pub fn new(attack: &Attack, protocol: Protocol, basis_prob: &[f64]) -> Self {
        let bases = protocol.bases().to_vec();
        assert_eq!(bases.len(), basis_prob.len(), "one probability per basis");
        let d = attack.eve_dim;
        let mut cells = vec![vec![[0.0; 8]; bases.len()]; bases.len()];
        for (ia, &ba) in bases.iter().enumerate() {
            // Eve's Helstrom measurement for Alice's basis: M0 projects onto the positive
            // part of ρ_E(a,0) − ρ_E(a,1).
            let eve: Vec<CMat> = (0..2).map(|x| eve_state(attack, &ba.ket(x))).collect();
            let (vals, vecs) = hermitian_eigen(&(&eve[0] - &eve[1]));
            let mut m0 = CMat::zeros(d, d);
            for (i, v) in vals.iter().enumerate() {
                if *v > 0.0 {
                    let col = vecs.column(i);
                    m0 += col * col.adjoint();
                }
            }
            let m1 = CMat::identity(d, d) - &m0;
            let povm = [m0, m1];
            for (ib, &bb) in bases.iter().enumerate() {
                for x in 0..2 {
                    let psi = ba.ket(x);
                    for k in attack.channel.operators() {
                        let v = k * &psi;
                        for b in 0..2 {
                            let phi = bb.ket(b);
                            // w = (<φ_b| ⊗ 1) v
                            let w = v.rows(0, d) * phi[0].conj() + v.rows(d, d) * phi[1].conj();
                            for (g, m) in povm.iter().enumerate() {
                                let p = w.dotc(&(m * &w)).re;
                                cells[ia][ib][cell(x, b, g)] += 0.5 * p.max(0.0);
                            }
                        }
                    }
                }
                // Rounding only: each row is a probability vector.
                let sum: f64 = cells[ia][ib].iter().sum();
                debug_assert!((sum - 1.0).abs() < 1e-9, "signal distribution sums to {sum}");
                for p in cells[ia][ib].iter_mut() {
                    *p /= sum;
                }
            }
        }
        SignalModel { bases, basis_prob: basis_prob.to_vec(), cells }
    }

    /// Probability that a round is sifted in basis `i` (both chose it).
    pub fn sifted_probability(&self, i: usize) -> f64 {
        self.basis_prob[i] * self.basis_prob[i]
    }

    /// Exact error rate of sifted rounds in basis `i`.
    pub fn qber(&self, i: usize) -> f64 {
        let c = &self.cells[i][i];
        (0..2).flat_map(|x| (0..2).map(move |g| (x, g))).map(|(x, g)| c[cell(x, 1 - x, g)]).sum()
    }

    /// Probabilities of the four categories (see [`category`]) of a sifted round in basis `i`.
    pub fn categories(&self, i: usize) -> [f64; 4] {
        let mut out = [0.0; 4];
        for (c, p) in self.cells[i][i].iter().enumerate() {
            out[CELL_CATEGORY[c] as usize] += p;
        }
        out
    }

    /// Exact probability that Eve's guess equals Alice's bit on sifted rounds in basis `i`.
    pub fn eve_guess_rate(&self, i: usize) -> f64 {
        let c = &self.cells[i][i];
        (0..2).flat_map(|x| (0..2).map(move |b| (x, b))).map(|(x, b)| c[cell(x, b, x)]).sum()
    }
}

fn eve_state(attack: &Attack, psi: &crate::linalg::CVec) -> CMat {
    let d = attack.eve_dim;
    let mut rho = CMat::zeros(d, d);
    for k in attack.channel.operators() {
        let v = k * psi;
        let v0 = v.rows(0, d);
        let v1 = v.rows(d, d);
        rho += v0 * v0.adjoint() + v1 * v1.adjoint();
    }
    rho * c(1.0, 0.0)
}

/// Category of a sifted round: `2·error + eve_correct` (error: Bob's outcome differs
/// from Alice's bit; eve_correct: Eve's guess equals Alice's bit).
#[inline]
pub fn category(x: usize, b: usize, g: usize) -> usize {
    usize::from(b != x) * 2 + usize::from(g == x)
}

/// Category of each cell index (see [`cell`] and [`category`]).
pub const CELL_CATEGORY: [u8; 8] = {
    let mut t = [0u8; 8];
    let mut c = 0;
    while c < 8 {
        let (x, b, g) = (c / 4, (c / 2) % 2, c % 2);
        t[c] = ((b != x) as u8) * 2 + (g == x) as u8;
        c += 1;
    }
    t
};

/// Counts of one simulated block: what the post-processing and the judge need.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct BlockCounts {
    /// Signals sent.
    pub signals: u64,
    /// Sifted rounds per basis (Z, X, Y).
    pub sifted: [u64; 3],
    /// Errors among the sifted rounds of each basis (for Z: test sample and key together).
    pub errors: [u64; 3],
    /// Size of the disclosed Z test sample.
    pub test_z: u64,
    /// Errors in the Z test sample.
    pub test_z_errors: u64,
    /// Key bits (sifted Z not in the test sample) by category `2·error + eve_correct`.
    pub key: [u64; 4],
    /// Per-intensity statistics of a weak-coherent link (None for single photons).
    pub link: Option<crate::rules::IntensityObs>,
    /// Weak-coherent links: key bits by photon-number class of the pulse (0, 1, ≥ 2).
    pub key_classes: Option<[u64; 3]>,
    /// Weak-coherent links: Σ over the sampled key bits of H(X|E) of their class, bits.
    pub key_entropy_bits: Option<f64>,
}

impl BlockCounts {
    /// Number of key bits n.
    pub fn key_bits(&self) -> u64 {
        self.key.iter().sum()
    }
    /// Errors among the key bits.
    pub fn key_errors(&self) -> u64 {
        self.key[2] + self.key[3]
    }
    /// Key bits Eve guessed correctly.
    pub fn eve_correct_key(&self) -> u64 {
        self.key[1] + self.key[3]
    }
}

/// Which block sampler to use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Sampler {
    /// Count-level draws (default; cost independent of the block size).
    #[default]
    Count,
    /// One alias-table draw per signal.
    Round,
}

/// Draws one block of `signals` signals with a test sample of `test_size(sifted_z)` Z bits.
pub fn sample_block(
    sampler: Sampler,
    model: &SignalModel,
    signals: u64,
    test_size: &dyn Fn(u64) -> u64,
    rng: &mut ChaCha8Rng,
) -> BlockCounts {
    match sampler {
        Sampler::Count => count::sample(model, signals, test_size, rng),
        Sampler::Round => round::RoundSampler::new(model).sample(signals, test_size, rng, None),
    }
}

/// The random stream of trial `trial` of point `point` in a campaign seeded `seed`: a
/// ChaCha8 generator keyed by a SplitMix64 mix of (seed, point) on stream `trial`.
pub fn trial_rng(seed: u64, point: u64, trial: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(splitmix(seed ^ splitmix(point.wrapping_add(0x9e37_79b9_7f4a_7c15))));
    rng.set_stream(trial);
    rng
}

fn splitmix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eval::{evaluate, EvalOptions};
    use std::collections::BTreeMap;

    #[test]
    fn model_marginals_match_the_exact_evaluator() {
        for fam in crate::attack::FAMILIES {
            let a = Attack::builtin(fam.name(), &BTreeMap::new()).unwrap();
            let e = evaluate(&a, &EvalOptions::fast(Protocol::SixState)).unwrap();
            let m = SignalModel::new(&a, Protocol::SixState, &[0.5, 0.25, 0.25]);
            assert!((m.qber(0) - e.qber_z).abs() < 1e-12, "{}", fam.name());
            assert!((m.qber(1) - e.qber_x).abs() < 1e-12);
            assert!((m.qber(2) - e.qber_y).abs() < 1e-12);
            assert!((m.eve_guess_rate(0) - e.p_guess_z).abs() < 1e-12);
            assert!((m.eve_guess_rate(1) - e.p_guess_x).abs() < 1e-12);
        }
    }
}
