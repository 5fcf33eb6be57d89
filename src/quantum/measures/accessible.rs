//! Accessible information of an ensemble: the largest `I(X:M)` over all POVMs.
//!
//! The maximisation runs in stages, each exact or checked, and the cheapest that applies
//! decides:
//!
//! 1. **Commuting states** are measured in a common eigenbasis, which attains the Holevo
//!    quantity and is therefore optimal (Holevo 1973).
//! 2. **Block reduction.** States that are block diagonal in a common basis are measured
//!    block by block: a POVM can first learn the block (the states do not couple blocks, so
//!    this refinement loses nothing), and then `I(X:M) = I(X:J) + Σⱼ P(j) I(X:M | J = j)`
//!    with the blocks optimised independently. The blocks are the connected components of
//!    the graph whose edges are the states' non-zero entries in the eigenbasis of a generic
//!    positive combination of them (any coordinate subspace of that basis is invariant
//!    under the combination; a component is then invariant under every state). Entries
//!    below `block_tol` relative to the combination's norm count as zero. When that leaves
//!    a block larger than a qubit, the eigenbasis of a generic element of the states'
//!    commutant is tried as well (see [`invariant_blocks`]). Eve's states under the Pauli
//!    cloners and Pauli channels split this way into two-dimensional blocks (error and no
//!    error in the measured basis), and directions outside the states' support become
//!    one-dimensional blocks, so the later stages work on the support only.
//! 3. **Per block:** a one-dimensional block or one holding a single state carries no
//!    further information; commuting block states go to stage 1; a pair of qubit states is
//!    solved by [`qubit_pair`]: the best projective measurement with a
//!    dual upper bound; anything else, or a qubit pair whose bound is not within
//!    `certificate_tol` of the projective value, goes to the multi-start search below.
//!
//! The search: rank-one POVMs with at most `d²` outcomes suffice (Davies, IEEE TIT 24, 596,
//! 1978), and `I(X:M)` is maximised over them by the Riemannian quasi-Newton (L-BFGS)
//! ascent [`povm_lbfgs`] (its module doc describes the manifold and the steps) from
//! several seeded starts. For two states the dual bound [`dual_upper_bound`] steers
//! it: a bound within `certificate_tol` of the best value proves that no start can do
//! better and ends the search; a wider one sends it on (polishing, more random starts).
//!
//! Whatever the route, the value returned is the information of the returned POVM on the
//! original states, so it is always achievable, and [`Accessible::upper_bound`] bounds the
//! maximum from above (the dual bounds are numerical: their one-dimensional maximisations
//! run on grids with refinement).

use super::qubit_pair;
use super::{holevo_quantity, measured_information, mutual_information};
use crate::error::Result;
use crate::numeric::linalg::{c, hermitian_eigen, CMat, CVec, RMat};
use crate::numeric::optimize::povm::DIVISOR_FLOOR;
use crate::numeric::optimize::{povm_lbfgs, AscentOptions};
use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;

/// Settings of [`accessible_information`].
#[derive(Clone, Debug)]
pub struct AccessibleOptions {
    /// Random starting POVMs in addition to the structured ones (default 3).
    pub random_starts: usize,
    /// Seed of the starting POVMs (default 0x5eed): the result is deterministic.
    pub seed: u64,
    /// Stopping rules of each start's ascent (defaults of [`AscentOptions`]: stop when
    /// `window` = 10 consecutive steps together gain less than `gain_tol` = 1e-11 bits, when
    /// the Riemannian gradient norm falls below `grad_tol` = 1e-10, or after `max_iter` =
    /// 3000 steps; hitting the cap is reported in [`Accessible::converged`], not hidden).
    /// `gain_tol` is also the slack within which a value counts as reaching the Holevo
    /// quantity.
    pub ascent: AscentOptions,
    /// Random starts stop when `ascent.window` steps gain less than this (default 1e-9); one
    /// that ends more than this above the best value so far is polished with `gain_tol`.
    pub screen_gain_tol: f64,
    /// Rounds of polishing when the dual bound is not yet within `certificate_tol` after
    /// the planned starts (default 3): each continues the best POVM's ascent without the
    /// windowed-gain stop, up to `ascent.max_iter` steps.
    pub polish_rounds: usize,
    /// Random starts in all, at most, while the dual bound is not within `certificate_tol`
    /// (two states; default 24). Fewer than `random_starts` means no extra starts.
    pub max_random_starts: usize,
    /// Measure commuting states directly in their common eigenbasis (default true); false
    /// runs the iterative search for them too (tests use it).
    pub commuting_shortcut: bool,
    /// Split the states into common invariant blocks and solve qubit pairs with their dual
    /// bound (default true); false sends everything that does not commute to the search.
    pub block_reduction: bool,
    /// Off-diagonal entries below this, relative to the largest eigenvalue of the states'
    /// generic combination, do not couple blocks (default 1e-14: a few hundred times the
    /// rounding of a product of trace-one matrices). A coupling dropped here is lost to the
    /// value and to the dual bound alike, so the tolerance must stay near rounding: at 1e-12,
    /// couplings of that size under an almost idle cloner (QBER 1.5·10⁻¹¹) were dropped and
    /// the X-basis value came out 1.4·10⁻¹¹ bits low with a gap of 0.
    pub block_tol: f64,
    /// A value is accepted as the maximum when a dual bound is within this many bits of it
    /// (default 1e-10): a qubit pair's projective value (otherwise the block goes to the
    /// search as well), or the search's value after its structured starts (otherwise the
    /// random starts run).
    pub certificate_tol: f64,
}

impl Default for AccessibleOptions {
    fn default() -> Self {
        AccessibleOptions {
            random_starts: 3,
            seed: 0x5eed,
            ascent: AscentOptions::default(),
            screen_gain_tol: 1e-9,
            polish_rounds: 3,
            max_random_starts: 24,
            commuting_shortcut: true,
            block_reduction: true,
            block_tol: 1e-14,
            certificate_tol: 1e-10,
        }
    }
}

/// Result of [`accessible_information`].
#[derive(Clone, Debug, PartialEq)]
pub struct Accessible {
    /// The largest mutual information found, in bits.
    pub bits: f64,
    /// The optimal rank-one POVM vectors found (zero vectors are unused outcomes).
    pub povm: Vec<CVec>,
    /// Iterations summed over all starts.
    pub iterations: usize,
    /// Whether the start that gave `bits` met the convergence test (rather than the
    /// iteration cap). Either way `bits` is achieved by the returned POVM, so it is a valid
    /// lower bound on the accessible information.
    pub converged: bool,
    /// An upper bound on the accessible information, in bits: the block-wise sum of exact
    /// values (commuting blocks), qubit-pair dual bounds and, for blocks that needed the
    /// search, the smaller of the Holevo quantity and the dual bound of
    /// [`dual_upper_bound`] (two states). Always set by [`accessible_information`]; the
    /// difference to `bits` says how far from the maximum the value may be.
    pub upper_bound: Option<f64>,
}

/// Accessible information of the ensemble `{pᵢ, ρᵢ}`: the maximum of `I(X:M)` over all
/// POVMs, in bits, by the stages in the module documentation.
pub fn accessible_information(priors: &[f64], states: &[CMat], opts: &AccessibleOptions) -> Result<Accessible> {
    assert_eq!(priors.len(), states.len(), "accessible_information: one prior per state");
    assert!(!states.is_empty(), "accessible_information: empty ensemble");
    if opts.commuting_shortcut {
        if let Some(found) = commuting(priors, states, opts) {
            return Ok(found);
        }
    }
    if opts.block_reduction {
        return by_blocks(priors, states, opts);
    }
    search(priors, states, opts)
}

/// Largest entry of a commutator `ρᵢρⱼ − ρⱼρᵢ` for which two states count as commuting.
/// The states have trace one, so the products' entries are at most one in magnitude, and
/// rounding leaves the commutator of truly commuting states at about d·1e-16 (d rounded
/// terms per entry); 1e-13 admits that noise with room up to dimensions in the hundreds.
/// A false "commuting" costs nothing: the shortcut's answer is kept only if it reaches the
/// Holevo quantity.
const COMMUTATOR_TOL: f64 = 1e-13;

/// Stage 1: a common eigenbasis, accepted when it reaches the Holevo quantity.
fn commuting(priors: &[f64], states: &[CMat], opts: &AccessibleOptions) -> Option<Accessible> {
    let commute = states.iter().all(|a| states.iter().all(|b| crate::numeric::linalg::max_abs_diff(&(a * b), &(b * a)) < COMMUTATOR_TOL));
    if !commute {
        return None;
    }
    // The eigenbasis of a generic combination of commuting states is a common one.
    let povm = eigen_columns(&generic_combination(states));
    let bits = measured_information(priors, states, &povm);
    let chi = holevo_quantity(priors, states);
    (bits >= chi - opts.ascent.gain_tol).then_some(Accessible { bits, povm, iterations: 0, converged: true, upper_bound: Some(chi) })
}

/// `Σᵢ (i + π) ρᵢ`: a positive combination with no accidental symmetry between the states.
fn generic_combination(states: &[CMat]) -> CMat {
    let d = states[0].nrows();
    let mut generic = CMat::zeros(d, d);
    for (i, rho) in states.iter().enumerate() {
        generic += rho * c(i as f64 + std::f64::consts::PI, 0.0);
    }
    generic
}

/// A unitary whose columns, grouped as returned, span subspaces that every state leaves
/// invariant (up to `tol` relative to the states' largest eigenvalue).
///
/// First the eigenbasis of the generic combination (cheap, and enough unless that
/// combination has equal eigenvalues in different blocks). A block larger than a qubit
/// (and at most `COMMUTANT_MAX_DIM` = 16-dimensional) is then split further if it can be: the
/// compressed states' commutant `{X : Xρᵢ = ρᵢX}` is computed as the null space of the
/// commutator map on Hermitian matrices, and a generic Hermitian element of it has the
/// finest invariant subspaces as its eigenspaces, also when blocks repeat (as when Eve
/// holds an ancilla in a fixed mixed state).
pub fn invariant_blocks(states: &[CMat], tol: f64) -> (CMat, Vec<Vec<usize>>) {
    let (vals, mut basis) = hermitian_eigen(&generic_combination(states));
    let scale = vals.iter().fold(0.0_f64, |m, v| m.max(v.abs())).max(f64::MIN_POSITIVE);
    let threshold = tol * scale;
    let mut groups = Vec::new();
    for group in coupled_components(states, &basis, threshold) {
        if group.len() <= 2 || group.len() > COMMUTANT_MAX_DIM {
            groups.push(group);
            continue;
        }
        let v = basis.select_columns(&group);
        let sub: Vec<CMat> = states.iter().map(|rho| v.adjoint() * rho * &v).collect();
        let finer = commutant_element(&sub, threshold).and_then(|x| {
            let (_, w) = hermitian_eigen(&x);
            let parts = coupled_components(&sub, &w, threshold);
            (parts.len() > 1).then_some((w, parts))
        });
        match finer {
            Some((w, parts)) => {
                // Same subspace, new orthonormal columns in the same positions.
                let cols = &v * w;
                for (k, &col) in group.iter().enumerate() {
                    basis.set_column(col, &cols.column(k));
                }
                groups.extend(parts.into_iter().map(|p| p.into_iter().map(|k| group[k]).collect::<Vec<_>>()));
            }
            None => groups.push(group),
        }
    }
    (basis, groups)
}

/// Largest block the commutant step is tried on: its map has `d²` columns.
pub const COMMUTANT_MAX_DIM: usize = 16;

/// Connected components of the graph on the columns of `basis` whose edges are the
/// states' entries above `threshold` in magnitude in that basis, each in increasing order.
fn coupled_components(states: &[CMat], basis: &CMat, threshold: f64) -> Vec<Vec<usize>> {
    let d = basis.ncols();
    let rotated: Vec<CMat> = states.iter().map(|rho| basis.adjoint() * rho * basis).collect();
    let mut root: Vec<usize> = (0..d).collect();
    fn find(root: &mut [usize], mut i: usize) -> usize {
        while root[i] != i {
            root[i] = root[root[i]];
            i = root[i];
        }
        i
    }
    for i in 0..d {
        for j in i + 1..d {
            if rotated.iter().any(|s| s[(i, j)].norm() > threshold) {
                let (a, b) = (find(&mut root, i), find(&mut root, j));
                root[a.max(b)] = a.min(b);
            }
        }
    }
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut group_of = vec![usize::MAX; d];
    for i in 0..d {
        let r = find(&mut root, i);
        if group_of[r] == usize::MAX {
            group_of[r] = groups.len();
            groups.push(Vec::new());
        }
        groups[group_of[r]].push(i);
    }
    groups
}

/// A generic Hermitian element of the states' commutant, or `None` when the commutant
/// holds only multiples of the identity. Null directions are those where the commutator
/// map's singular value is at most `10 · threshold`.
fn commutant_element(states: &[CMat], threshold: f64) -> Option<CMat> {
    let d = states[0].nrows();
    // Real basis of the Hermitian d × d matrices: E_ii, E_ij + E_ji, i(E_ij − E_ji).
    let mut herm: Vec<CMat> = Vec::with_capacity(d * d);
    for i in 0..d {
        for j in i..d {
            let mut m = CMat::zeros(d, d);
            if i == j {
                m[(i, i)] = c(1.0, 0.0);
                herm.push(m);
            } else {
                m[(i, j)] = c(1.0, 0.0);
                m[(j, i)] = c(1.0, 0.0);
                herm.push(m.clone());
                m[(i, j)] = c(0.0, 1.0);
                m[(j, i)] = c(0.0, -1.0);
                herm.push(m);
            }
        }
    }
    let rows = 2 * d * d * states.len();
    let mut map = RMat::zeros(rows, herm.len());
    for (k, h) in herm.iter().enumerate() {
        let mut r = 0;
        for rho in states {
            let comm = h * rho - rho * h;
            for z in comm.iter() {
                map[(r, k)] = z.re;
                map[(r + 1, k)] = z.im;
                r += 2;
            }
        }
    }
    let null = crate::numeric::linalg::real_null_space(&map, 10.0 * threshold);
    if null.len() <= 1 {
        return None;
    }
    // Fixed pseudo-random weights: the result is deterministic.
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5eed);
    let mut x = CMat::zeros(d, d);
    for v in &null {
        let w: f64 = rng.sample(StandardNormal);
        for (j, h) in herm.iter().enumerate() {
            x += h * c(w * v[j], 0.0);
        }
    }
    Some(x)
}

/// Stages 2 and 3: block by block.
fn by_blocks(priors: &[f64], states: &[CMat], opts: &AccessibleOptions) -> Result<Accessible> {
    let (basis, groups) = invariant_blocks(states, opts.block_tol);
    let mut povm: Vec<CVec> = Vec::new();
    let mut iterations = 0;
    let mut converged = true;
    // Joint distribution of the state label and the block, and Σⱼ P(j) · bound_j.
    let mut label_block: Vec<Vec<f64>> = vec![Vec::with_capacity(groups.len()); states.len()];
    let mut bound_within: Option<f64> = Some(0.0);
    for group in &groups {
        let v = basis.select_columns(group);
        let sub: Vec<CMat> = states.iter().map(|rho| v.adjoint() * rho * &v).collect();
        let weights: Vec<f64> = priors.iter().zip(&sub).map(|(p, s)| p * s.trace().re.max(0.0)).collect();
        for (row, w) in label_block.iter_mut().zip(&weights) {
            row.push(*w);
        }
        let mass: f64 = weights.iter().sum();
        let present: Vec<usize> = (0..states.len()).filter(|&i| weights[i] > 0.0).collect();
        if group.len() == 1 || present.len() < 2 {
            // The block label already says all this block can: one outcome per basis vector.
            povm.extend((0..group.len()).map(|k| v.column(k).into_owned()));
            continue;
        }
        let cond_priors: Vec<f64> = present.iter().map(|&i| weights[i] / mass).collect();
        let cond_states: Vec<CMat> = present.iter().map(|&i| &sub[i] * c(1.0 / sub[i].trace().re, 0.0)).collect();
        let block = solve_block(&cond_priors, &cond_states, opts)?;
        iterations += block.iterations;
        converged &= block.converged;
        bound_within = bound_within.zip(block.upper_bound).map(|(s, u)| s + mass * u);
        povm.extend(block.povm.iter().map(|u| &v * u));
    }
    let bits = measured_information(priors, states, &povm);
    let upper_bound = bound_within.map(|s| mutual_information(&label_block) + s);
    Ok(Accessible { bits, povm, iterations, converged, upper_bound })
}

/// One block's ensemble (priors summing to one, states of trace one).
fn solve_block(priors: &[f64], states: &[CMat], opts: &AccessibleOptions) -> Result<Accessible> {
    if let Some(found) = commuting(priors, states, opts) {
        return Ok(found);
    }
    if states.len() == 2 && states[0].nrows() == 2 {
        let pair = qubit_pair::solve([priors[0], priors[1]], [&states[0], &states[1]]);
        let bits = measured_information(priors, states, &pair.povm);
        let found = Accessible { bits, povm: pair.povm.to_vec(), iterations: 0, converged: true, upper_bound: Some(pair.upper) };
        if pair.upper - bits <= opts.certificate_tol {
            return Ok(found);
        }
        // Not shown optimal: keep the better of the two, and the dual bound (valid for any
        // measurement) unless the search reached the Holevo quantity.
        let searched = search(priors, states, opts)?;
        let upper = searched.upper_bound.map_or(pair.upper, |u| u.min(pair.upper));
        let best = if searched.bits > found.bits { searched } else { found };
        return Ok(Accessible { upper_bound: Some(upper), ..best });
    }
    search(priors, states, opts)
}

/// The multi-start search of the module documentation. Starts: the eigenbasis of
/// `p₀ρ₀ − p₁ρ₁` (a refinement of the Helstrom measurement, so the result is never below
/// that measurement's information), the eigenbasis of a generic combination of the
/// states, for two states the eigenbasis of their symmetric logarithmic derivative (see
/// [`symmetric_log_derivative`]), and `random_starts` random `d²`-outcome POVMs. Each start
/// is ascended by [`povm_lbfgs`], with the gradient column `2 Σᵢ pᵢ log₂(P(k|i)/P(k)) ρᵢ a_k` (the same
/// stationarity structure as the iteration of Řeháček, Englert, Kaszlikowski, PRA 71,
/// 054303, 2005). Ascent is monotone and the search stops once the Holevo quantity, which
/// no POVM exceeds, is reached.
///
/// For two states the dual bound steers the effort: the search stops as soon as the bound
/// is within `certificate_tol` of the best value (after the structured starts); if it is
/// not after the `random_starts`, the best POVM is polished (`polish_rounds`) and further
/// random starts run, up to `max_random_starts` in all, until it is.
fn search(priors: &[f64], states: &[CMat], opts: &AccessibleOptions) -> Result<Accessible> {
    assert_eq!(priors.len(), states.len(), "accessible_information: one prior per state");
    assert!(!states.is_empty(), "accessible_information: empty ensemble");
    let d = states[0].nrows();
    let chi = holevo_quantity(priors, states);
    // Start 1: eigenbasis of the Helstrom operator (or of ρ₀ for one state); start 2: the
    // eigenbasis of a generic combination of the states.
    let mut helstrom_op = states[0].clone() * c(priors[0], 0.0);
    if states.len() > 1 {
        helstrom_op -= &states[1] * c(priors[1], 0.0);
    }
    let mut structured = vec![eigen_columns(&helstrom_op), eigen_columns(&generic_combination(states))];
    if states.len() == 2 {
        structured.push(eigen_columns(&symmetric_log_derivative(priors, states)));
    }
    let n_structured = structured.len();
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(opts.seed);
    let mut random_start = || {
        let raw: Vec<CVec> =
            (0..d * d).map(|_| CVec::from_fn(d, |_, _| c(rng.sample(StandardNormal), rng.sample(StandardNormal)))).collect();
        complete_povm(&raw)
    };
    let two_states = states.len() == 2;
    let dual = |povm: &[CVec]| dual_upper_bound([priors[0], priors[1]], [&states[0], &states[1]], povm);
    let mut s = Search { best: None, iterations: 0, bound: None };
    let certified = |s: &Search| s.bound.is_some_and(|u| u - s.value() <= opts.certificate_tol);
    let holevo_reached = |s: &Search| s.value() >= chi - opts.ascent.gain_tol;
    // Structured starts, then the planned random starts.
    for (i, start) in structured.into_iter().map(Some).chain((0..opts.random_starts).map(|_| None)).enumerate() {
        let start = start.unwrap_or_else(&mut random_start);
        let improved = s.run(priors, states, &start, opts, i >= n_structured);
        if holevo_reached(&s) {
            break;
        }
        if two_states && i + 1 >= n_structured && (improved || s.bound.is_none()) {
            s.bound = Some(dual(&s.povm()));
        }
        if certified(&s) {
            break;
        }
    }
    // Not yet shown optimal (two states): polish, then more random starts.
    if two_states && !holevo_reached(&s) && !certified(&s) {
        // Polishing drops the windowed-gain stop and tightens the gradient stop by this
        // factor (1e-10 becomes 1e-14 by default, near the rounding level of a gradient of
        // an information of order one bit), so a polish goes on where the ordinary rule
        // stopped and ends on stationarity to rounding or on the iteration cap.
        const POLISH_GRAD_TOL_FACTOR: f64 = 1e-4;
        let strict = AscentOptions { gain_tol: 0.0, grad_tol: opts.ascent.grad_tol * POLISH_GRAD_TOL_FACTOR, ..opts.ascent };
        let mut extra = opts.max_random_starts.saturating_sub(opts.random_starts);
        loop {
            for _ in 0..opts.polish_rounds {
                if certified(&s) || !s.polish(priors, states, &strict) {
                    break;
                }
                s.bound = Some(dual(&s.povm()));
            }
            if certified(&s) || holevo_reached(&s) || extra == 0 {
                break;
            }
            extra -= 1;
            let start = random_start();
            if s.run(priors, states, &start, opts, true) {
                s.bound = Some(dual(&s.povm()));
            }
        }
    }
    let (bits, povm, converged) = s.best.take().expect("at least one start ran");
    let upper_bound = if bits >= chi - opts.ascent.gain_tol { chi } else { s.bound.map_or(chi, |u| u.min(chi)) };
    Ok(Accessible {
        bits,
        povm,
        iterations: s.iterations,
        converged: converged || bits >= chi - opts.ascent.gain_tol,
        upper_bound: Some(upper_bound),
    })
}

/// The symmetric logarithmic derivative `L` of the pair at its mean: `ρ̄L + Lρ̄ = 2(ρ₀ − ρ₁)`
/// with `ρ̄ = π₀ρ₀ + π₁ρ₁`, solved in ρ̄'s eigenbasis (`L_ij = 2Δ_ij/(λ_i + λ_j)`, zero where
/// `λ_i + λ_j` vanishes). Measuring in its eigenbasis attains the quantum Fisher
/// information (Braunstein, Caves, PRL 72, 3439, 1994), the second-order term of the
/// information when the two states are close; it is the search's start for that regime.
fn symmetric_log_derivative(priors: &[f64], states: &[CMat]) -> CMat {
    let mean = &states[0] * c(priors[0], 0.0) + &states[1] * c(priors[1], 0.0);
    let (vals, basis) = hermitian_eigen(&mean);
    let delta = basis.adjoint() * (&states[0] - &states[1]) * &basis;
    // λ_i + λ_j at or below this fraction of ρ̄'s largest eigenvalue counts as vanishing:
    // eigenvalues come out of the eigen-solve with errors of a few ulps of the largest one
    // (about 1e-16 relative; the cut-off leaves a factor of a hundred for that), and
    // dividing by such noise would blow L up along directions outside ρ̄'s support.
    const SUPPORT_CUTOFF: f64 = 1e-14;
    let top = vals.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let l = CMat::from_fn(vals.len(), vals.len(), |i, j| {
        let s = vals[i] + vals[j];
        if s > SUPPORT_CUTOFF * top {
            delta[(i, j)] * c(2.0 / s, 0.0)
        } else {
            c(0.0, 0.0)
        }
    });
    &basis * l * basis.adjoint()
}

/// The search's state: the best (value, POVM, converged) so far, iterations, dual bound.
struct Search {
    best: Option<(f64, Vec<CVec>, bool)>,
    iterations: usize,
    bound: Option<f64>,
}

impl Search {
    fn value(&self) -> f64 {
        self.best.as_ref().map_or(f64::NEG_INFINITY, |b| b.0)
    }
    fn povm(&self) -> Vec<CVec> {
        self.best.as_ref().map(|b| b.1.clone()).unwrap_or_default()
    }
    /// Polishes the best POVM with [`povm_lbfgs`]; returns whether that gained.
    fn polish(&mut self, priors: &[f64], states: &[CMat], opts: &AscentOptions) -> bool {
        let run = ascend(priors, states, &self.povm(), opts);
        self.iterations += run.iterations;
        let improved = run.value > self.value();
        if improved {
            self.best = Some((run.value, run.povm, run.converged));
        }
        improved
    }

    /// Ascends from `start` and keeps the result if it is better; returns whether it was.
    /// A `screened` start first runs with the looser `screen_gain_tol` and is only finished
    /// with the full rule if it ends above the best value so far.
    fn run(&mut self, priors: &[f64], states: &[CMat], start: &[CVec], opts: &AccessibleOptions, screened: bool) -> bool {
        let run = if screened && self.best.is_some() {
            let loose = AscentOptions { gain_tol: opts.screen_gain_tol.max(opts.ascent.gain_tol), ..opts.ascent };
            let first = ascend(priors, states, start, &loose);
            self.iterations += first.iterations;
            if first.value > self.value() + opts.screen_gain_tol {
                ascend(priors, states, &first.povm, &opts.ascent)
            } else {
                first
            }
        } else {
            ascend(priors, states, start, &opts.ascent)
        };
        self.iterations += run.iterations;
        let improved = run.value > self.value();
        if improved {
            self.best = Some((run.value, run.povm, run.converged));
        }
        improved
    }
}

fn eigen_columns(m: &CMat) -> Vec<CVec> {
    let (_, vecs) = hermitian_eigen(m);
    (0..vecs.ncols()).map(|i| vecs.column(i).into_owned()).collect()
}

/// Rescales vectors `b_k` to a POVM: `a_k = G^{-1/2} b_k`, `G = Σ b_k b_k†`.
fn complete_povm(b: &[CVec]) -> Vec<CVec> {
    let d = b[0].len();
    let mut g = CMat::zeros(d, d);
    for v in b {
        g += v * v.adjoint();
    }
    let t = crate::numeric::linalg::psd_inverse_sqrt(&g, DIVISOR_FLOOR);
    b.iter().map(|v| &t * v).collect()
}

/// Mutual information `I(X:M)` in bits of the POVM whose outcome vectors are the columns
/// of `a` (d × K, `A A† = 1`), and, if asked, its Euclidean gradient
/// `2 ∂I/∂Ā`, column k = `2 Σᵢ pᵢ log₂(P(i,k)/(pᵢP(k))) ρᵢ a_k`.
fn info_and_grad(priors: &[f64], states: &[CMat], a: &CMat, want_grad: bool) -> (f64, Option<CMat>) {
    let k_out = a.ncols();
    let rho_a: Vec<CMat> = states.iter().map(|rho| rho * a).collect();
    let mut joint = vec![vec![0.0; k_out]; states.len()];
    for (i, ra) in rho_a.iter().enumerate() {
        for k in 0..k_out {
            joint[i][k] = priors[i] * a.column(k).dotc(&ra.column(k)).re.max(0.0);
        }
    }
    let pk: Vec<f64> = (0..k_out).map(|k| joint.iter().map(|r| r[k]).sum()).collect();
    let mut value = 0.0;
    let mut grad = want_grad.then(|| CMat::zeros(a.nrows(), k_out));
    for k in 0..k_out {
        if pk[k] <= 0.0 {
            continue;
        }
        for i in 0..states.len() {
            let p = joint[i][k];
            let log_ratio = if p > 0.0 { (p / (priors[i] * pk[k])).log2() } else { -90.0 };
            if p > 0.0 {
                value += p * log_ratio;
            }
            if let Some(g) = grad.as_mut() {
                let mut col = g.column_mut(k);
                col += rho_a[i].column(k) * c(2.0 * priors[i] * log_ratio.max(-90.0), 0.0);
            }
        }
    }
    (value, grad)
}

/// One start's outcome.
struct Ascent {
    value: f64,
    povm: Vec<CVec>,
    iterations: usize,
    converged: bool,
}

/// Ascends from `start` by [`povm_lbfgs`] on `I(X:M)`.
fn ascend(priors: &[f64], states: &[CMat], start: &[CVec], opts: &AscentOptions) -> Ascent {
    let d = start[0].len();
    let a0 = CMat::from_fn(d, start.len(), |r, k| start[k][r]);
    let (value, a, iterations, converged) = povm_lbfgs(a0, &|a, g| info_and_grad(priors, states, a, g), opts);
    Ascent { value, povm: columns(&a), iterations, converged }
}

fn columns(a: &CMat) -> Vec<CVec> {
    (0..a.ncols()).map(|k| a.column(k).into_owned()).collect()
}

/// Upper bound, in bits, on the accessible information of two states `{π₀ρ₀, π₁ρ₁}`, from
/// the dual of the maximisation over POVMs, built at the POVM `povm` (rank-one vectors).
///
/// An outcome with `a = Tr Eρ₀`, `b = Tr Eρ₁` adds `F(a, b) = P·D(q‖π)` to `I(X:M)`
/// (P = π₀a + π₁b, q = π₀a/P its posterior), a convex function, homogeneous of degree one,
/// so `F(a, b) = max_q [α(q)a + β(q)b]` with the gradient `α(q) = π₀ ln(q/π₀)`,
/// `β(q) = π₁ ln((1−q)/π₁)`. Hence for any Hermitian Λ with `Λ ≥ G(q) = α(q)ρ₀ + β(q)ρ₁`
/// for every q, every POVM has `I ≤ Σ Tr EₘΛ = Tr Λ`. The candidate is Holevo's
/// optimality operator `Λ = Σₘ Eₘ G(qₘ)` (Hermitian part), shifted by
/// `c = max_q λ_max(G(q) − Λ)` to make it feasible: bound `Tr Λ + d·c`. The maximum over q
/// is taken on a grid of the log-odds of q in [−40, 40] (241 points) with each local
/// maximum near the top refined by golden-section search, so the bound is a numerical one.
/// Towards q → 0 or 1 the excess decreases to its limit on the kernel of ρ₀ or ρ₁ (adding
/// a large multiple of −ρ lowers every eigenvalue), so the ends of the range lose nothing.
pub fn dual_upper_bound(priors: [f64; 2], states: [&CMat; 2], povm: &[CVec]) -> f64 {
    let d = states[0].nrows();
    let mut lambda = CMat::zeros(d, d);
    for v in povm {
        let (rv0, rv1) = (states[0] * v, states[1] * v);
        let pa = v.dotc(&rv0).re.max(0.0);
        let pb = v.dotc(&rv1).re.max(0.0);
        let p = priors[0] * pa + priors[1] * pb;
        if p <= 0.0 {
            continue;
        }
        // E G(q) = |v⟩⟨v|(αρ₀ + βρ₁); a term whose probability is zero has ρ v = 0.
        let mut g = CMat::zeros(d, d);
        if pa > 0.0 {
            g += states[0] * c(priors[0] * (priors[0] * pa / p / priors[0]).ln(), 0.0);
        }
        if pb > 0.0 {
            g += states[1] * c(priors[1] * (priors[1] * pb / p / priors[1]).ln(), 0.0);
        }
        lambda += v * (v.adjoint() * &g);
    }
    let lambda = (&lambda + lambda.adjoint()) * c(0.5, 0.0);
    dual_value(priors, states, &lambda)
}

/// `(Tr Λ + d·max_q λ_max(G(q) − Λ)) / ln 2`: the bound of [`dual_upper_bound`] for one Λ.
fn dual_value(priors: [f64; 2], states: [&CMat; 2], lambda: &CMat) -> f64 {
    let d = states[0].nrows();
    // (α, β) at log-odds s of q, without cancellation: ln q = −softplus(−s),
    // ln(1 − q) = −softplus(s).
    let softplus = |x: f64| x.max(0.0) + (-x.abs()).exp().ln_1p();
    let coef = |s: f64| (priors[0] * (-softplus(-s) - priors[0].ln()), priors[1] * (-softplus(s) - priors[1].ln()));
    let excess = |s: f64| -> f64 {
        let (alpha, beta) = coef(s);
        let g = states[0] * c(alpha, 0.0) + states[1] * c(beta, 0.0) - lambda;
        crate::numeric::linalg::hermitian_eigenvalues(&g).into_iter().fold(f64::NEG_INFINITY, f64::max)
    };
    let n = 240;
    let (lo, hi) = (-40.0, 40.0);
    let s_at = |k: usize| lo + (hi - lo) * k as f64 / n as f64;
    let vals: Vec<f64> = (0..=n).map(|k| excess(s_at(k))).collect();
    let grid_max = vals.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let mut best = grid_max;
    for k in 1..n {
        // Strict local maxima of the grid that could still be the global maximum.
        let peak = vals[k] >= vals[k - 1] && vals[k] >= vals[k + 1] && (vals[k] > vals[k - 1] || vals[k] > vals[k + 1]);
        if !peak || vals[k].is_nan() || vals[k] <= grid_max - 0.1 {
            continue;
        }
        let (_, v) = crate::numeric::optimize::golden_section_max(excess, s_at(k - 1), s_at(k + 1), 45);
        best = best.max(v);
    }
    (lambda.trace().re + d as f64 * best) / std::f64::consts::LN_2
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::quantum::channel::KrausChannel;
    use crate::quantum::state::DensityMatrix;
    use approx::assert_abs_diff_eq;

    /// `U (w₁A₁ ⊕ w₂A₂ ⊕ w₃A₃) U†` for random density matrices `Aᵢ` of the given sizes.
    fn hidden_blocks(sizes: &[usize], weights: &[f64], u: &CMat, rng: &mut impl Rng) -> CMat {
        let d: usize = sizes.iter().sum();
        let mut m = CMat::zeros(d, d);
        let mut at = 0;
        for (&n, &w) in sizes.iter().zip(weights) {
            let a = if n == 2 && rng.gen_bool(0.3) {
                crate::quantum::state::Ket::haar(2, rng).density().matrix().clone()
            } else {
                DensityMatrix::random_hilbert_schmidt(n, rng).matrix().clone()
            };
            m.view_mut((at, at), (n, n)).copy_from(&(a * c(w, 0.0)));
            at += n;
        }
        u * m * u.adjoint()
    }

    #[test]
    fn blocks_hidden_by_a_random_unitary_are_found() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for _ in 0..20 {
            let u = KrausChannel::random_isometry(5, 5, &mut rng);
            let s0 = hidden_blocks(&[2, 2, 1], &[0.5, 0.3, 0.2], &u, &mut rng);
            let s1 = hidden_blocks(&[2, 2, 1], &[0.2, 0.4, 0.4], &u, &mut rng);
            let (_, groups) = invariant_blocks(&[s0, s1], 1e-12);
            let mut sizes: Vec<usize> = groups.iter().map(Vec::len).collect();
            sizes.sort();
            assert_eq!(sizes, vec![1, 2, 2]);
        }
        // Two copies of one qubit pair (Eve's extra qubit maximally mixed): the generic
        // combination is degenerate across the copies, the commutant splits them.
        for _ in 0..10 {
            let u = KrausChannel::random_isometry(4, 4, &mut rng);
            let a = DensityMatrix::random_hilbert_schmidt(2, &mut rng).matrix().clone();
            let b = DensityMatrix::random_hilbert_schmidt(2, &mut rng).matrix().clone();
            let half = DensityMatrix::maximally_mixed(2).matrix().clone();
            let states =
                [&u * crate::numeric::linalg::kron(&a, &half) * u.adjoint(), &u * crate::numeric::linalg::kron(&b, &half) * u.adjoint()];
            let (_, groups) = invariant_blocks(&states, 1e-12);
            assert_eq!(groups.iter().map(Vec::len).collect::<Vec<_>>(), vec![2, 2]);
            let copies = accessible_information(&[0.4, 0.6], &states, &AccessibleOptions::default()).unwrap();
            let single = qubit_pair::solve([0.4, 0.6], [&a, &b]);
            assert_abs_diff_eq!(copies.bits, single.bits, epsilon = 1e-12);
            assert!(copies.upper_bound.unwrap() - copies.bits < 1e-10);
        }
        // Random states share no invariant subspace.
        let s0 = DensityMatrix::random_hilbert_schmidt(4, &mut rng).matrix().clone();
        let s1 = DensityMatrix::random_hilbert_schmidt(4, &mut rng).matrix().clone();
        assert_eq!(invariant_blocks(&[s0, s1], 1e-12).1.len(), 1);
    }

    #[test]
    fn block_route_agrees_with_the_search_and_certifies_itself() {
        // Random block-diagonal pairs in random bases, with block weights that depend on the
        // state (so the block label itself carries information) and unequal priors.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(8);
        let search_only = AccessibleOptions { block_reduction: false, random_starts: 4, ..AccessibleOptions::default() };
        for i in 0..25 {
            let u = KrausChannel::random_isometry(5, 5, &mut rng);
            let w0 = [0.1 + 0.015 * i as f64, 0.45, 0.45 - 0.015 * i as f64];
            let states = [hidden_blocks(&[2, 2, 1], &w0, &u, &mut rng), hidden_blocks(&[2, 2, 1], &[0.3, 0.3, 0.4], &u, &mut rng)];
            let priors = [0.35, 0.65];
            let fast = accessible_information(&priors, &states, &AccessibleOptions::default()).unwrap();
            let slow = accessible_information(&priors, &states, &search_only).unwrap();
            let upper = fast.upper_bound.expect("every block is a qubit pair or one-dimensional");
            let chi = holevo_quantity(&priors, &states);
            assert!(fast.bits >= slow.bits - 1e-9, "case {i}: blocks {} below search {}", fast.bits, slow.bits);
            assert!(upper >= slow.bits - 1e-10, "case {i}: bound {upper} below an achieved {}", slow.bits);
            assert!(upper - fast.bits <= 1e-9, "case {i}: gap {}", upper - fast.bits);
            assert!(fast.bits <= chi + 1e-12);
            assert!(fast.bits >= crate::quantum::measures::helstrom_information(priors, [&states[0], &states[1]]) - 1e-12);
            // The value is the returned POVM's information on the original states.
            assert_abs_diff_eq!(fast.bits, measured_information(&priors, &states, &fast.povm), epsilon = 1e-15);
            let completeness = fast.povm.iter().fold(CMat::zeros(5, 5), |acc, v| acc + v * v.adjoint());
            assert!(crate::numeric::linalg::max_abs_diff(&completeness, &CMat::identity(5, 5)) < 1e-12);
        }
    }

    #[test]
    fn a_large_register_reduces_to_the_states_support() {
        // A qubit pair isometrically embedded in C²⁴ (Eve's register larger than what she
        // uses): the answer is the qubit pair's, found on the two-dimensional support.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(12);
        let w = KrausChannel::random_isometry(2, 24, &mut rng);
        let a = DensityMatrix::random_hilbert_schmidt(2, &mut rng).matrix().clone();
        let b = DensityMatrix::random_hilbert_schmidt(2, &mut rng).matrix().clone();
        let states = [&w * &a * w.adjoint(), &w * &b * w.adjoint()];
        let big = accessible_information(&[0.5, 0.5], &states, &AccessibleOptions::default()).unwrap();
        let small = qubit_pair::solve([0.5, 0.5], [&a, &b]);
        assert_abs_diff_eq!(big.bits, small.bits, epsilon = 1e-12);
        assert!(big.upper_bound.unwrap() - big.bits < 1e-10);
        assert_eq!(big.povm.len(), 24);
    }

    #[test]
    fn dual_bound_is_valid_at_any_measurement_and_tight_at_the_optimum() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(31);
        let thorough = AccessibleOptions { certificate_tol: -1.0, random_starts: 6, ..AccessibleOptions::default() };
        for d in 2..=5 {
            for _ in 0..4 {
                let a = DensityMatrix::random_hilbert_schmidt(d, &mut rng).matrix().clone();
                let b = DensityMatrix::random_hilbert_schmidt(d, &mut rng).matrix().clone();
                let priors = [0.3, 0.7];
                let best = accessible_information(&priors, &[a.clone(), b.clone()], &thorough).unwrap();
                // Valid: the bound built at a poor measurement (the standard basis) still lies
                // above the best value any search found.
                let standard: Vec<CVec> = (0..d).map(|i| CVec::from_fn(d, |r, _| c(if r == i { 1.0 } else { 0.0 }, 0.0))).collect();
                let loose = dual_upper_bound(priors, [&a, &b], &standard);
                assert!(loose >= best.bits - 1e-12, "d = {d}: bound {loose} below {}", best.bits);
                // Tight: at the optimum it meets the value.
                let tight = dual_upper_bound(priors, [&a, &b], &best.povm);
                assert!(tight >= best.bits - 1e-12 && tight - best.bits < 1e-8, "d = {d}: gap {}", tight - best.bits);
            }
        }
        // Commuting states: the bound at the common eigenbasis is the Holevo quantity.
        let a = CMat::from_diagonal(&CVec::from_vec(vec![c(0.7, 0.0), c(0.3, 0.0)]));
        let b = CMat::from_diagonal(&CVec::from_vec(vec![c(0.2, 0.0), c(0.8, 0.0)]));
        let basis = vec![CVec::from_vec(vec![c(1.0, 0.0), c(0.0, 0.0)]), CVec::from_vec(vec![c(0.0, 0.0), c(1.0, 0.0)])];
        let chi = holevo_quantity(&[0.5, 0.5], &[a.clone(), b.clone()]);
        assert_abs_diff_eq!(dual_upper_bound([0.5, 0.5], [&a, &b], &basis), chi, epsilon = 1e-12);
    }

    #[test]
    fn symmetric_log_derivative_solves_its_equation_and_measures_close_states_well() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        let r0 = DensityMatrix::random_hilbert_schmidt(3, &mut rng).matrix().clone();
        let r1 = DensityMatrix::random_hilbert_schmidt(3, &mut rng).matrix().clone();
        let priors = [0.4, 0.6];
        let l = symmetric_log_derivative(&priors, &[r0.clone(), r1.clone()]);
        let mean = &r0 * c(0.4, 0.0) + &r1 * c(0.6, 0.0);
        let lhs = &mean * &l + &l * &mean;
        assert!(crate::numeric::linalg::max_abs_diff(&lhs, &((&r0 - &r1) * c(2.0, 0.0))) < 1e-12);
        // Two close states: the eigenbasis of L is optimal to second order in their distance
        // (Braunstein, Caves 1994), so it captures almost all of the accessible information.
        let eps = 1e-3;
        let near = &r0 * c(1.0 - eps, 0.0) + &r1 * c(eps, 0.0);
        let pair = [r0.clone(), near];
        let sld = eigen_columns(&symmetric_log_derivative(&[0.5, 0.5], &pair));
        let best = accessible_information(&[0.5, 0.5], &pair, &AccessibleOptions::default()).unwrap();
        let measured = measured_information(&[0.5, 0.5], &pair, &sld);
        assert!(measured > 0.9 * best.bits && measured <= best.bits + 1e-15, "{measured} vs {}", best.bits);
    }

    #[test]
    fn a_single_state_or_identical_states_carry_no_information() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        let s = DensityMatrix::random_hilbert_schmidt(3, &mut rng).matrix().clone();
        let acc = accessible_information(&[0.4, 0.6], &[s.clone(), s.clone()], &AccessibleOptions::default()).unwrap();
        assert_abs_diff_eq!(acc.bits, 0.0, epsilon = 1e-12);
        let acc = accessible_information(&[1.0], &[s], &AccessibleOptions::default()).unwrap();
        assert_abs_diff_eq!(acc.bits, 0.0, epsilon = 1e-12);
    }
}
