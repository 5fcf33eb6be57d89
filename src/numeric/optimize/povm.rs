//! Riemannian ascents over rank-one POVMs: maximise a smooth real function of the d × K
//! complex matrix `A` whose columns `a_k` are the outcome vectors of the POVM
//! `{|a_k⟩⟨a_k|}`. Completeness `Σ_k |a_k⟩⟨a_k| = 1` is `A A† = 1`, so the search space is
//! the manifold of d × K matrices with orthonormal rows (a complex Stiefel manifold), and
//! the ascents move on it with Riemannian steps (Absil, Mahony, Sepulchre, "Optimization
//! Algorithms on Matrix Manifolds", 2008):
//!
//! - the tangent space at `A` is `{ξ : sym(ξA†) = 0}`, and a Euclidean gradient is carried
//!   onto it by the projection `ξ − sym(ξA†) A`, which also serves as the vector transport
//!   between points;
//! - a step `A + tξ` is brought back onto the manifold by a QR-type retraction (Cholesky
//!   of `A A†`, with the polar form as fallback);
//! - step lengths come from Armijo backtracking;
//! - a run stops when the Riemannian gradient norm falls below `grad_tol`, when `window`
//!   consecutive steps together gain less than `gain_tol`, or after `max_iter` steps
//!   (reported as not converged); see [`AscentOptions`].
//!
//! Two ascents share these pieces: [`povm_ascent`] (Polak–Ribière+ conjugate gradients)
//! and [`povm_lbfgs`] (L-BFGS with memory 10). The caller brings the objective as a
//! closure returning its value and, if asked, its Euclidean gradient `2 ∂f/∂Ā`; what the
//! objective means (information, a winning probability) is the caller's business.

use crate::numeric::linalg::{c, CMat};

/// An objective over the manifold: `f(A, want_grad)` returns the value at `A` and, when
/// `want_grad` is true, the Euclidean gradient `2 ∂f/∂Ā` (a matrix of `A`'s shape).
pub type PovmObjective<'a> = dyn Fn(&CMat, bool) -> (f64, Option<CMat>) + 'a;

/// Stopping rules of [`povm_ascent`] and [`povm_lbfgs`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AscentOptions {
    /// Iteration cap (default 3000); a run that hits it reports `converged = false`.
    pub max_iter: usize,
    /// Stop when the Riemannian gradient norm falls below this (default 1e-10).
    pub grad_tol: f64,
    /// Stop when `window` consecutive steps together gain less than `gain_tol` (default
    /// 1e-11, in the objective's units).
    pub gain_tol: f64,
    /// See `gain_tol` (default 10).
    pub window: usize,
}

impl Default for AscentOptions {
    fn default() -> Self {
        AscentOptions { max_iter: 3000, grad_tol: 1e-10, gain_tol: 1e-11, window: 10 }
    }
}

/// Smallest value treated as non-zero where a quantity is divided by, or raised to the
/// power −½: an eigenvalue of `B B†` in the polar retraction, the curvature `⟨s, y⟩` of an
/// L-BFGS pair, and callers' divisors of the same kind. It sits just above the smallest
/// normal `f64` (about 2.2e-308), so it sets aside only exact zeros and underflow; the
/// quotients it admits stay finite (up to 1e300, or 1e150 for an inverse square root). It
/// is relative to the range of `f64`, not to any scale of the problem.
pub const DIVISOR_FLOOR: f64 = 1e-300;

/// Armijo's sufficient-increase constant: a backtracking step is accepted once it gains at
/// least this fraction of the gain `t·slope` predicted by the directional derivative. Small
/// (the customary 1e-4 of Nocedal & Wright, "Numerical Optimization", 2006, §3.1), so that
/// nearly any step that ascends at all is taken and the step lengths stay long.
const ARMIJO_SUFFICIENT_INCREASE: f64 = 1e-4;

/// Backtracking gives up (the point is taken as stationary) when `t·√slope` falls below
/// this: the length of the move `t·ξ` when the direction ξ is the gradient itself (then
/// slope = ‖ξ‖²), and the same measure of it otherwise. The entries of a matrix with
/// orthonormal rows are at most one in magnitude and the unit roundoff is 1.1e-16, so a
/// move below 1e-17 rounds back to the same matrix and no shorter step can ascend.
const STEP_LENGTH_FLOOR: f64 = 1e-17;

/// Maximises a smooth function `f` of a rank-one POVM `{|a_k><a_k|}`, written as the
/// columns of a d × K matrix `A` with `A A† = 1`, by Riemannian conjugate-gradient ascent
/// (Polak–Ribière+, projection transport, QR-type retraction, Armijo steps; Absil, Mahony,
/// Sepulchre 2008). `f(A, want_grad)` returns the value and, if asked, the Euclidean
/// gradient `2 ∂f/∂Ā`. The start is retracted onto the manifold first. Stops as described
/// in [`AscentOptions`] (gradient norm, windowed gain, iteration cap). Returns (value,
/// A, iterations, converged).
pub fn povm_ascent(start: CMat, f: &PovmObjective<'_>, opts: &AscentOptions) -> (f64, CMat, usize, bool) {
    let mut a = retract(&start);
    let (mut value, eg) = f(&a, true);
    let mut g = tangent(&a, &eg.expect("gradient requested"));
    let mut eta = g.clone();
    let mut step = 1.0;
    let mut window = GainWindow::new(opts);
    for iter in 0..opts.max_iter {
        let g2 = inner(&g, &g);
        if g2.sqrt() < opts.grad_tol {
            return (value, a, iter, true);
        }
        let mut slope = inner(&g, &eta);
        if slope <= 0.0 {
            eta = g.clone();
            slope = g2;
        }
        // Armijo backtracking from a step that grows after successes.
        let Some((cand, cand_value, t)) = armijo(f, &a, value, &eta, slope, step * 2.0) else {
            return (value, a, iter, true);
        };
        step = t;
        let gain = cand_value - value;
        a = cand;
        value = cand_value;
        let (_, eg) = f(&a, true);
        let g_new = tangent(&a, &eg.expect("gradient requested"));
        let g_old = tangent(&a, &g);
        let beta = (inner(&g_new, &(&g_new - &g_old)) / g2).max(0.0);
        eta = &g_new + tangent(&a, &eta) * c(beta, 0.0);
        g = g_new;
        if window.stalled(gain) {
            return (value, a, iter + 1, true);
        }
    }
    (value, a, opts.max_iter, false)
}

/// Riemannian L-BFGS ascent of `f` over the same manifold as [`povm_ascent`] (memory 10,
/// stored pairs carried to the current point by projection onto its tangent space as
/// vector transport, Armijo steps from the unit step; Absil, Mahony, Sepulchre,
/// "Optimization Algorithms on Matrix Manifolds", 2008, ch. 4 and 8). The quasi-Newton
/// curvature finishes where conjugate gradients creep (flat, ill-conditioned maxima, such
/// as outcomes of tiny probability); the accessible-information search uses it for every
/// start. Same stopping rules and return value as [`povm_ascent`].
pub fn povm_lbfgs(start: CMat, f: &PovmObjective<'_>, opts: &AscentOptions) -> (f64, CMat, usize, bool) {
    const MEMORY: usize = 10;
    let mut a = retract(&start);
    let (mut value, eg) = f(&a, true);
    let mut g = tangent(&a, &eg.expect("gradient requested"));
    // Pairs (s, y, 1/⟨s, y⟩) for the minimisation of −f: y = g_old − g_new.
    let mut pairs: std::collections::VecDeque<(CMat, CMat, f64)> = std::collections::VecDeque::new();
    let mut window = GainWindow::new(opts);
    for iter in 0..opts.max_iter {
        if inner(&g, &g).sqrt() < opts.grad_tol {
            return (value, a, iter, true);
        }
        // Two-loop recursion: direction = H·g (ascent for f).
        let mut q = g.clone();
        let mut alphas = Vec::with_capacity(pairs.len());
        for (s_i, y_i, rho_i) in pairs.iter().rev() {
            let alpha = rho_i * inner(s_i, &q);
            q -= y_i * c(alpha, 0.0);
            alphas.push(alpha);
        }
        if let Some((s_n, y_n, _)) = pairs.back() {
            q *= c(inner(s_n, y_n) / inner(y_n, y_n), 0.0);
        }
        for ((s_i, y_i, rho_i), alpha) in pairs.iter().zip(alphas.into_iter().rev()) {
            let beta = rho_i * inner(y_i, &q);
            q += s_i * c(alpha - beta, 0.0);
        }
        let mut dir = tangent(&a, &q);
        let mut slope = inner(&g, &dir);
        if slope.is_nan() || slope <= 0.0 {
            pairs.clear();
            dir = g.clone();
            slope = inner(&g, &g);
        }
        let Some((cand, cand_value, t)) = armijo(f, &a, value, &dir, slope, 1.0) else {
            return (value, a, iter, true);
        };
        let gain = cand_value - value;
        let (_, eg) = f(&cand, true);
        let g_new = tangent(&cand, &eg.expect("gradient requested"));
        // Carry the step, the old gradient and the stored pairs to the new point.
        let s_new = tangent(&cand, &(&dir * c(t, 0.0)));
        let y_new = tangent(&cand, &g) - &g_new;
        for (s_i, y_i, _) in pairs.iter_mut() {
            *s_i = tangent(&cand, s_i);
            *y_i = tangent(&cand, y_i);
        }
        let sy = inner(&s_new, &y_new);
        if sy > DIVISOR_FLOOR {
            pairs.push_back((s_new, y_new, 1.0 / sy));
            if pairs.len() > MEMORY {
                pairs.pop_front();
            }
        }
        a = cand;
        value = cand_value;
        g = g_new;
        if window.stalled(gain) {
            return (value, a, iter + 1, true);
        }
    }
    (value, a, opts.max_iter, false)
}

/// Armijo backtracking along `dir` from step `t0`, halving: the first retracted point that
/// gains at least `ARMIJO_SUFFICIENT_INCREASE·t·slope`, as (point, value, step); `None`
/// when even a step at machine precision ([`STEP_LENGTH_FLOOR`]) does not ascend (the point
/// is stationary).
fn armijo(f: &PovmObjective<'_>, a: &CMat, value: f64, dir: &CMat, slope: f64, t0: f64) -> Option<(CMat, f64, f64)> {
    let mut t = t0;
    loop {
        let cand = retract(&(a + dir * c(t, 0.0)));
        let (v, _) = f(&cand, false);
        if v >= value + ARMIJO_SUFFICIENT_INCREASE * t * slope {
            return Some((cand, v, t));
        }
        t *= 0.5;
        if t * slope.sqrt() < STEP_LENGTH_FLOOR {
            return None;
        }
    }
}

/// The windowed-gain stopping rule of [`AscentOptions`]: stalled once `window`
/// consecutive steps together gain less than `gain_tol`.
struct GainWindow {
    gains: std::collections::VecDeque<f64>,
    total: f64,
    window: usize,
    tol: f64,
}

impl GainWindow {
    fn new(opts: &AscentOptions) -> Self {
        GainWindow { gains: std::collections::VecDeque::new(), total: 0.0, window: opts.window, tol: opts.gain_tol }
    }
    /// Records one step's gain; returns whether the search has stalled.
    fn stalled(&mut self, gain: f64) -> bool {
        self.gains.push_back(gain);
        self.total += gain;
        if self.gains.len() > self.window {
            self.total -= self.gains.pop_front().unwrap_or(0.0);
        }
        self.gains.len() >= self.window && self.total < self.tol
    }
}

/// Real inner product `Re tr(X†Y)`.
fn inner(x: &CMat, y: &CMat) -> f64 {
    x.iter().zip(y.iter()).map(|(p, q)| (p.conj() * q).re).sum()
}

/// Projects `xi` onto the tangent space of `{A : A A† = 1}` at `a`: `ξ − sym(ξA†) A`.
fn tangent(a: &CMat, xi: &CMat) -> CMat {
    let m = xi * a.adjoint();
    let sym = (&m + m.adjoint()) * c(0.5, 0.0);
    xi - sym * a
}

/// Retraction onto `{A : A A† = 1}`: `L⁻¹ B` with `B B† = L L†` (Cholesky; a QR-type
/// retraction), falling back to the polar form `(B B†)^{-1/2} B` if `B B†` is not
/// numerically positive definite.
fn retract(b: &CMat) -> CMat {
    let g = b * b.adjoint();
    if let Some(chol) = g.clone().cholesky() {
        if let Some(x) = chol.l().solve_lower_triangular(b) {
            return x;
        }
    }
    crate::numeric::linalg::psd_inverse_sqrt(&g, DIVISOR_FLOOR) * b
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_distr::StandardNormal;

    /// `Σ_k ⟨a_k|σ_{x(k)}|a_k⟩` with `per` columns per target `σ_x`: the success
    /// probability of telling the `σ_x` apart, with its Euclidean gradient.
    fn discrimination(sigma: &[CMat]) -> impl Fn(&CMat, bool) -> (f64, Option<CMat>) + '_ {
        move |a: &CMat, want: bool| {
            let per = a.ncols() / sigma.len();
            let mut value = 0.0;
            let mut grad = want.then(|| CMat::zeros(a.nrows(), a.ncols()));
            for k in 0..a.ncols() {
                let sv = &sigma[k / per] * a.column(k);
                value += a.column(k).dotc(&sv).re;
                if let Some(g) = grad.as_mut() {
                    g.set_column(k, &(sv * c(2.0, 0.0)));
                }
            }
            (value, grad)
        }
    }

    #[test]
    fn both_ascents_reach_the_optimum_and_stay_complete() {
        // Two orthogonal projectors in C³ (ranks 1 and 2) are told apart with certainty:
        // the maximum of Tr E₀σ₀ + Tr E₁σ₁ over POVMs is Tr σ₀ + Tr σ₁ = 3.
        let p = |diag: [f64; 3]| CMat::from_fn(3, 3, |i, j| c(if i == j { diag[i] } else { 0.0 }, 0.0));
        let sigma = [p([1.0, 0.0, 0.0]), p([0.0, 1.0, 1.0])];
        let f = discrimination(&sigma);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(4);
        let start = CMat::from_fn(3, 6, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)));
        let opts = AscentOptions { gain_tol: 0.0, grad_tol: 1e-12, ..AscentOptions::default() };
        for (name, run) in [("cg", povm_ascent(start.clone(), &f, &opts)), ("lbfgs", povm_lbfgs(start.clone(), &f, &opts))] {
            let (value, a, iterations, converged) = run;
            assert!(converged && iterations < opts.max_iter, "{name}: {iterations} iterations");
            assert!((value - 3.0).abs() < 1e-10, "{name}: {value}");
            assert!((f(&a, false).0 - value).abs() < 1e-15, "{name}: the value is that of the returned point");
            let completeness = &a * a.adjoint();
            assert!(crate::numeric::linalg::max_abs_diff(&completeness, &CMat::identity(3, 3)) < 1e-12, "{name}");
        }
    }

    #[test]
    fn the_iteration_cap_and_the_gain_window_stop_a_run() {
        let sigma = [CMat::identity(2, 2) * c(0.7, 0.0), CMat::identity(2, 2) * c(0.3, 0.0)];
        let f = discrimination(&sigma);
        let start = CMat::from_fn(2, 4, |r, k| c((r + 2 * k) as f64 + 0.5, 0.1 * k as f64));
        // Capped after one step: not converged.
        let capped = AscentOptions { max_iter: 1, grad_tol: 0.0, gain_tol: -1.0, window: 10 };
        let (_, _, iterations, converged) = povm_lbfgs(start.clone(), &f, &capped);
        assert_eq!((iterations, converged), (1, false));
        // A window of one step that must gain more than any step can: stops after one step.
        let impatient = AscentOptions { max_iter: 100, grad_tol: 0.0, gain_tol: 10.0, window: 1 };
        let (_, _, iterations, converged) = povm_ascent(start, &f, &impatient);
        assert_eq!((iterations, converged), (1, true));
    }
}
