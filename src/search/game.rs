//! The monogamy-of-entanglement guessing game in its own setting (Tomamichel, Fehr,
//! Kaniewski, Wehner, NJP 15, 103002, 2013): Eve prepares any state of Alice's n qubits and
//! two systems B and E (dimensions chosen by the user) for two cooperating parties; Alice
//! measures each qubit in a uniformly random BB84 basis θᵢ, announces θ, and B and E win if
//! both output Alice's whole string x. The optimum is (½ + 1/(2√2))ⁿ.
//!
//! Search: alternating optimisation from seeded random measurements. With B's and E's
//! measurements fixed, the winning probability is ⟨ψ|W|ψ⟩ with the game operator
//! `W = 2⁻ⁿ Σ_θ Σ_x P^θ_x ⊗ B^θ_x ⊗ E^θ_x`, so the best state is W's top eigenvector. With
//! the state and E fixed, B's best measurement for each θ is a minimum-error discrimination
//! of the operators `σ^θ_x = Tr_{AE}[(P^θ_x ⊗ 1 ⊗ E^θ_x)|ψ⟩⟨ψ|]`, solved over rank-one
//! POVMs by [`crate::numeric::optimize::povm_ascent`] (and the same for E). Every step can only
//! raise the winning probability; the search stops when a round gains less than
//! `ROUND_GAIN_TOL` = 1e-13.

use crate::error::{Error, Result};
use crate::numeric::linalg::{c, hermitian_eigen, kron, partial_trace, CMat, CVec};
use crate::numeric::optimize::povm::DIVISOR_FLOOR;
use crate::numeric::optimize::{povm_ascent, AscentOptions};
use crate::protocol::Basis;
use rand::Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;

/// The alternation stops when a round changes the winning probability by less than this.
/// The value is the top eigenvalue of the game operator, a probability of order one that
/// the eigen-solve returns to within some hundreds of ulps (1e-16 each) for the dimensions
/// allowed here (at most 512), so a change below 1e-13 is of the order of that rounding.
const ROUND_GAIN_TOL: f64 = 1e-13;

/// Result of a game hunt.
#[derive(Clone, Debug)]
pub struct GameResult {
    /// Rounds n.
    pub rounds: usize,
    /// Best winning probability found.
    pub value: f64,
    /// The bound (½ + 1/(2√2))ⁿ.
    pub bound: f64,
    /// Alternation rounds used by the best start.
    pub iterations: usize,
    /// The best strategy found: the tripartite state on A (2ⁿ), B and E, in that order.
    pub state: CVec,
    /// B's measurement per basis string θ: `bob[θ][x]` for answer x.
    pub bob: Vec<Vec<CMat>>,
    /// E's measurement per basis string θ: `eve[θ][x]`.
    pub eve: Vec<Vec<CMat>>,
}

/// One party's measurements: `m[θ][x]` is the element for answer x on basis string θ.
type Measurements = Vec<Vec<CMat>>;

/// Alice's projector P^θ_x on n qubits (qubit 0 most significant).
fn alice_projector(n: usize, theta: usize, x: usize) -> CMat {
    let mut p = CMat::identity(1, 1);
    for i in 0..n {
        let basis = if (theta >> (n - 1 - i)) & 1 == 0 { Basis::Z } else { Basis::X };
        let bit = (x >> (n - 1 - i)) & 1;
        let k = basis.ket(bit);
        p = kron(&p, &(&k * k.adjoint()));
    }
    p
}

/// POVM elements of a rank-one decomposition: columns k·d..(k+1)·d belong to outcome k.
fn povm_from_columns(a: &CMat, outcomes: usize) -> Vec<CMat> {
    let per = a.ncols() / outcomes;
    (0..outcomes)
        .map(|x| {
            let cols = a.columns(x * per, per);
            cols * cols.adjoint()
        })
        .collect()
}

/// Rank-one decomposition (columns) of a POVM, `per` columns per outcome.
fn columns_of_povm(povm: &[CMat], d: usize) -> CMat {
    let mut a = CMat::zeros(d, povm.len() * d);
    for (x, m) in povm.iter().enumerate() {
        let (vals, vecs) = hermitian_eigen(m);
        for (j, v) in vals.iter().enumerate() {
            let col = vecs.column(j) * c(v.max(0.0).sqrt(), 0.0);
            a.set_column(x * d + j, &col);
        }
    }
    a
}

/// Best measurement for discriminating the operators `sigma` (maximise Σ Tr[M_x σ_x]),
/// started from `current`.
fn best_measurement(sigma: &[CMat], current: &[CMat], d: usize) -> Vec<CMat> {
    let outcomes = sigma.len();
    let f = |a: &CMat, want: bool| -> (f64, Option<CMat>) {
        let per = a.ncols() / outcomes;
        let mut value = 0.0;
        let mut grad = want.then(|| CMat::zeros(a.nrows(), a.ncols()));
        for k in 0..a.ncols() {
            let col = a.column(k);
            let sv = &sigma[k / per] * col;
            value += col.dotc(&sv).re;
            if let Some(g) = grad.as_mut() {
                g.set_column(k, &(sv * c(2.0, 0.0)));
            }
        }
        (value, grad)
    };
    // Each best response runs tighter than the ascent's defaults (gain 1e-11, gradient
    // 1e-10): the alternation stops on round gains below `ROUND_GAIN_TOL` = 1e-13, so a
    // best response has to resolve gains ten times finer than that, with the gradient test
    // tightened alike. The value is a probability, at most one. Each call starts from the
    // previous round's measurement, and the cap bounds the cost of a round.
    const MAX_ITER: usize = 400;
    const GAIN_TOL: f64 = 1e-14;
    const GRAD_TOL: f64 = 1e-12;
    let opts = AscentOptions { max_iter: MAX_ITER, gain_tol: GAIN_TOL, grad_tol: GRAD_TOL, ..AscentOptions::default() };
    let (_, a, _, _) = povm_ascent(columns_of_povm(current, d), &f, &opts);
    povm_from_columns(&a, outcomes)
}

fn random_povm(outcomes: usize, d: usize, rng: &mut impl Rng) -> Vec<CMat> {
    let a = CMat::from_fn(d, outcomes * d, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
    let g = &a * a.adjoint();
    let t = crate::numeric::linalg::psd_inverse_sqrt(&g, DIVISOR_FLOOR);
    povm_from_columns(&(t * a), outcomes)
}

/// Searches the n-round game with B and E of dimensions `d_b`, `d_e`.
pub fn hunt_game(rounds: usize, d_b: usize, d_e: usize, starts: usize, seed: u64, max_rounds: usize) -> Result<GameResult> {
    if !(1..=3).contains(&rounds) {
        return Err(Error::input_key("--rounds", format!("{rounds} is outside [1, 3]")));
    }
    if !(1..=8).contains(&d_b) || !(1..=8).contains(&d_e) {
        return Err(Error::input_key("--dim-b", "the dimensions of B and E must lie in [1, 8]"));
    }
    if starts == 0 {
        return Err(Error::input_key("--starts", "must be at least 1"));
    }
    let na = 1usize << rounds;
    let thetas = na; // 2ⁿ basis strings
    let outcomes = na; // 2ⁿ answers
    let dims = [na, d_b, d_e];
    let proj: Vec<Vec<CMat>> = (0..thetas).map(|t| (0..outcomes).map(|x| alice_projector(rounds, t, x)).collect()).collect();
    let scale = 1.0 / thetas as f64;
    type Strategy = (f64, usize, CVec, Measurements, Measurements);
    let runs: Vec<Strategy> = (0..starts)
        .into_par_iter()
        .map(|s| {
            let mut rng = crate::numeric::rng::trial_rng(seed, 0, s as u64);
            let mut mb: Vec<Vec<CMat>> = (0..thetas).map(|_| random_povm(outcomes, d_b, &mut rng)).collect();
            let mut me: Vec<Vec<CMat>> = (0..thetas).map(|_| random_povm(outcomes, d_e, &mut rng)).collect();
            let mut value = f64::NEG_INFINITY;
            let mut used = 0;
            let mut best: Option<(CVec, Measurements, Measurements)> = None;
            for round in 0..max_rounds {
                used = round + 1;
                // Best state for the measurements: top eigenvector of W.
                let mut w = CMat::zeros(na * d_b * d_e, na * d_b * d_e);
                for t in 0..thetas {
                    for x in 0..outcomes {
                        w += kron(&kron(&proj[t][x], &mb[t][x]), &me[t][x]) * c(scale, 0.0);
                    }
                }
                let (vals, vecs) = hermitian_eigen(&w);
                let top = vals.len() - 1;
                let new_value = vals[top];
                let psi = vecs.column(top).into_owned();
                let rho = &psi * psi.adjoint();
                if new_value > value {
                    // The state with the measurements it was computed for wins `new_value`.
                    best = Some((psi.clone(), mb.clone(), me.clone()));
                }
                // Best measurements for B, then for E.
                for t in 0..thetas {
                    let sigma: Vec<CMat> = (0..outcomes)
                        .map(|x| {
                            let op = kron(&kron(&proj[t][x], &CMat::identity(d_b, d_b)), &me[t][x]);
                            partial_trace(&(&op * &rho), &dims, &[1])
                        })
                        .collect();
                    mb[t] = best_measurement(&sigma, &mb[t], d_b);
                }
                for t in 0..thetas {
                    let sigma: Vec<CMat> = (0..outcomes)
                        .map(|x| {
                            let op = kron(&kron(&proj[t][x], &mb[t][x]), &CMat::identity(d_e, d_e));
                            partial_trace(&(&op * &rho), &dims, &[2])
                        })
                        .collect();
                    me[t] = best_measurement(&sigma, &me[t], d_e);
                }
                let gained = new_value - value;
                value = value.max(new_value);
                if gained.abs() < ROUND_GAIN_TOL {
                    break;
                }
            }
            let (psi, b, e) = best.expect("at least one alternation round");
            (value, used, psi, b, e)
        })
        .collect();
    let (value, iterations, state, bob, eve) =
        runs.into_iter().reduce(|acc, r| if r.0 > acc.0 { r } else { acc }).expect("at least one start");
    Ok(GameResult { rounds, value, bound: crate::exact::bounds::game_bound().powi(rounds as i32), iterations, state, bob, eve })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_returned_strategy_wins_with_the_reported_value() {
        let r = hunt_game(1, 2, 2, 3, 5, 200).unwrap();
        let rho = &r.state * r.state.adjoint();
        let thetas = r.bob.len();
        let mut won = 0.0;
        for t in 0..thetas {
            for x in 0..r.bob[t].len() {
                let op = kron(&kron(&alice_projector(1, t, x), &r.bob[t][x]), &r.eve[t][x]);
                won += (&op * &rho).trace().re / thetas as f64;
            }
        }
        assert!((won - r.value).abs() < 1e-10, "{won} vs {}", r.value);
        assert!(r.value <= r.bound + 1e-9);
    }

    #[test]
    fn alice_projectors_resolve_the_identity() {
        for n in 1..=2 {
            for t in 0..(1 << n) {
                let mut s = CMat::zeros(1 << n, 1 << n);
                for x in 0..(1 << n) {
                    s += alice_projector(n, t, x);
                }
                assert!(crate::numeric::linalg::max_abs_diff(&s, &CMat::identity(1 << n, 1 << n)) < 1e-12);
            }
        }
    }
}
