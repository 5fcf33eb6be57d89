//! The exact distribution of one signal under a single-photon attack: Alice's basis and
//! bit, Bob's basis and outcome, and Eve's guess from her optimal (Helstrom) measurement once
//! Alice's basis is announced. Computed once per attack point; the samplers of
//! [`crate::audit::sample`] draw whole blocks from it.

use crate::attack::Attack;
use crate::numeric::linalg::{c, hermitian_eigen, CMat};
use crate::protocol::{Basis, Protocol};

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
    /// Device attacks ([`crate::exact::device`]): Bob's click probability per basis pair
    /// `[a][b]`; the model then describes one *detected* round and basis pairs are weighted
    /// by it. `None`: every signal is detected (the single-photon model).
    pub detection: Option<Vec<Vec<f64>>>,
    /// Monitor alarms per detected round (0: none; see [`crate::exact::device`]).
    pub alarm_odds: f64,
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
                // Rounding only: each row is a probability vector of a channel complete
                // within the Kraus tolerance, so its sum is 1 to that tolerance.
                let sum: f64 = cells[ia][ib].iter().sum();
                debug_assert!((sum - 1.0).abs() < crate::numeric::linalg::DEFAULT_TOL, "signal distribution sums to {sum}");
                for p in cells[ia][ib].iter_mut() {
                    *p /= sum;
                }
            }
        }
        SignalModel { bases, basis_prob: basis_prob.to_vec(), cells, detection: None, alarm_odds: 0.0 }
    }

    /// Probability that a round is sifted in basis `i` (both chose it).
    pub fn sifted_probability(&self, i: usize) -> f64 {
        self.pair_weight(i, i)
    }

    /// Probability that a round has Alice's basis `a` and Bob's basis `b`: `p_a p_b`, or,
    /// for a model of detected rounds, `p_a p_b P(click | a, b) / P(click)`.
    pub fn pair_weight(&self, a: usize, b: usize) -> f64 {
        match &self.detection {
            None => self.basis_prob[a] * self.basis_prob[b],
            Some(d) => {
                let n = self.basis_prob.len();
                let total: f64 =
                    (0..n).flat_map(|i| (0..n).map(move |j| (i, j))).map(|(i, j)| self.basis_prob[i] * self.basis_prob[j] * d[i][j]).sum();
                self.basis_prob[a] * self.basis_prob[b] * d[a][b] / total
            }
        }
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

fn eve_state(attack: &Attack, psi: &crate::numeric::linalg::CVec) -> CMat {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::exact::eval::{evaluate, EvalOptions};
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
