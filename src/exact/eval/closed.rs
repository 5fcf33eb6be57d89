//! Closed forms of the evaluator for the built-in families whose Eve states have a known
//! structure: the same quantities as [`super::evaluate`], from a handful of scalars instead
//! of Kraus operators, eigen-solves and the general block decomposition of the accessible
//! information. `qkd-audit sweep` uses them for every point of a built-in single-photon
//! family; the unit tests below hold each against the general evaluator over random
//! parameters.
//!
//! - **Pauli channel with Eve holding a purification** (`pauli`, and `cloner`, whose
//!   isometry is the same up to a unitary on Eve's register: her Bell states instead of
//!   the standard basis). With weights `w = (w_I, w_X, w_Y, w_Z)` and basis θ, let `t` be
//!   the Pauli that leaves θ's states alone and `a, b` the two that flip them. Given
//!   Alice's state `|ψ_x>`, `V|ψ_x> = |ψ_x>|A_x> + |ψ_x^⊥>|B_x>` with
//!   `A_x = √w_I e_I ± √w_t e_t` and `B_x` in the span of `e_a, e_b`, `|A_x|² = w_I + w_t`,
//!   `|<A_0|A_1>| = |w_I − w_t|`, `|<B_0|B_1>| = |w_a − w_b|`. Hence
//!   `qber_θ = w_a + w_b`, `p_guess_θ = ½ + √(w_I w_t) + √(w_a w_b)`,
//!   `holevo_θ = H(w) − h(w_I + w_t)` (Eve's average state is `diag(w)`),
//!   `game_θ = ½(w_I + w_t) + √(w_I w_t)`. Eve's states are block diagonal in
//!   `{e_I, e_t} ⊕ {e_a, e_b}`, each block holding two equiprobable *pure* states of the same
//!   weight in both, so the block label carries no information and, by the block argument of
//!   [`crate::quantum::measures::accessible`] and Levitin's two-pure-state value (Levitin,
//!   in *Quantum Communication, Computing, and Measurement*, Plenum 1995: equiprobable pure
//!   states with `√(1 − s²) = y` give `1 − h((1 − y)/2)`),
//!   `accessible_θ = (w_I + w_t) φ(2√(w_I w_t)/(w_I + w_t)) + (w_a + w_b) φ(2√(w_a w_b)/(w_a + w_b))`
//!   with `φ(y) = 1 − h((1 − y)/2)`, exact, so its upper bound is itself.
//! - **Intercept-resend** (`intercept-resend`, every `basis`): Eve's register records the
//!   pass flag or her basis and outcome, so her states are diagonal,
//!   `e_x = (1 − p, p w_β |<φ_βo|ψ_x>|², …)`; they commute, and the accessible information
//!   is the Holevo quantity, reached by reading the record (Holevo 1973): the classical
//!   mutual information of the two diagonals, `H(½(e_0 + e_1)) − ½(H(e_0) + H(e_1))`, which
//!   is how the Holevo quantity is computed here too (Eve's average state is the same in
//!   every basis, `(1 − p, ½ p w_β, …)`).
//! - **Entangling probe** (`entangling-probe`, d_E = 2): the state `V|ψ>` is a 2 × 2
//!   coefficient matrix in the σ_Y eigenbases of B and E, from which Bob's and Eve's 2 × 2
//!   states follow without Kraus operators. In Z and X, `|<y_0|ψ>| = |<y_1|ψ>|`, so Eve's
//!   two states have Bloch vectors of equal length (`(±sin η · n, cos² η)` for a unit `n`
//!   in the plane ⟂ her σ_Y axis) and their accessible information is `1 − h((1 − sin η)/2)`
//!   by the lemma of [`equal_length_pair_information`] (a dephasing channel applied to two
//!   pure states, and Levitin's value); with `sin η = 2√(D(1−D))` this is, from memory, the
//!   optimal individual information of Fuchs et al. (PRA 56, 1163, 1997), which the lemma
//!   does not rely on. Should the lengths differ, the pair goes to
//!   [`qubit_pair::solve`] (the general route's last stage) and, when they commute or its
//!   dual bound does not certify the value, to the general [`accessible_information`].
//!
//! The kernels work on stack values (2-vectors, 2 × 2 coefficient matrices, Eve's
//! diagonal); only building an intercept-resend form allocates (its measurement kets, once
//! per point), and the general-route fallbacks build matrices.

use super::{accessible_summary, assemble, check_bounds, BasisStats, EvalOptions, Evaluation};
use crate::attack::{cloner, entangling_probe, intercept_resend, pauli, ParamSet};
use crate::error::Result;
use crate::numeric::linalg::{c, CMat, C64};
use crate::protocol::Basis;
use crate::quantum::measures::{accessible_information, measured_information, qubit_pair, shannon_entropy, AccessibleOptions};
use std::f64::consts::LN_2;

/// Most bases Eve measures in (`random-zxy`).
const MAX_BASES: usize = 3;

/// A qubit ket as two amplitudes.
type Ket2 = [C64; 2];

/// A built-in attack in closed form: what [`ClosedForm::evaluate`] needs of it.
#[derive(Clone, Debug, PartialEq)]
pub enum ClosedForm {
    /// A Pauli channel to Bob with Eve holding a purification: the weights (I, X, Y, Z).
    Pauli([f64; 4]),
    /// Eve measures a fraction of the signals and resends what she found.
    MeasureResend {
        /// Probability that Eve measures a signal.
        fraction: f64,
        /// Her bases: probability and the two kets, the first `count` entries used.
        bases: [(f64, [Ket2; 2]); MAX_BASES],
        /// Number of bases.
        count: usize,
    },
    /// The two-dimensional entangling probe: `(cos η, sin η)`.
    Probe(f64, f64),
}

impl ClosedForm {
    /// The closed form of built-in family `family` with resolved parameters `params`, or
    /// `None` for a family without one.
    pub fn of(family: &str, params: &ParamSet) -> Option<ClosedForm> {
        match family {
            "pauli" => Some(ClosedForm::Pauli(pauli::pauli_weights(params))),
            "cloner" => Some(ClosedForm::Pauli(cloner::cloner_weights(params.text("kind") == "universal", params.num("qber")))),
            "intercept-resend" => {
                let found = intercept_resend::measurement_bases(params.text("basis"));
                let mut bases = [(0.0, [[c(0.0, 0.0); 2]; 2]); MAX_BASES];
                for (slot, (w, kets)) in bases.iter_mut().zip(&found) {
                    *slot = (*w, [[kets[0][0], kets[0][1]], [kets[1][0], kets[1][1]]]);
                }
                Some(ClosedForm::MeasureResend { fraction: params.num("fraction"), bases, count: found.len() })
            }
            "entangling-probe" => {
                let (cos_eta, sin_eta) = entangling_probe::probe_angle(params.num("qber"));
                Some(ClosedForm::Probe(cos_eta, sin_eta))
            }
            _ => None,
        }
    }

    /// Dimension of Eve's register.
    pub fn eve_dim(&self) -> usize {
        match self {
            ClosedForm::Pauli(_) => 4,
            ClosedForm::MeasureResend { count, .. } => 1 + 2 * count,
            ClosedForm::Probe(..) => 2,
        }
    }

    /// [`super::evaluate`] of the attack labelled `label`: the same quantities and checks.
    pub fn evaluate(&self, label: &str, opts: &EvalOptions) -> Result<Evaluation> {
        let eval = self.evaluate_unchecked(label, opts)?;
        check_bounds(label, &eval)?;
        Ok(eval)
    }

    /// [`super::evaluate_unchecked`] of the attack labelled `label`.
    pub fn evaluate_unchecked(&self, label: &str, opts: &EvalOptions) -> Result<Evaluation> {
        let [z, x, y] = match self {
            ClosedForm::Pauli(w) => pauli_stats(w),
            ClosedForm::MeasureResend { fraction, bases, count } => measure_resend_stats(*fraction, &bases[..*count]),
            ClosedForm::Probe(cos_eta, sin_eta) => probe_stats(*cos_eta, *sin_eta),
        };
        let holevo = [z.holevo, x.holevo];
        let checked = [z.checked("z")?, x.checked("x")?, y.checked("y")?];
        let accessible = match opts.accessible.as_ref() {
            None => None,
            Some(acc) => Some(self.accessible(acc, holevo)?),
        };
        assemble(label, self.eve_dim(), checked, accessible_summary(accessible), opts)
    }

    /// The Z and X accessible information `(bits, upper bound, converged)`: in closed form,
    /// or, when the options turn the general route's shortcuts off, by that route on
    /// Eve's states. `holevo`: the Z and X Holevo quantities, unsnapped.
    fn accessible(&self, acc: &AccessibleOptions, holevo: [f64; 2]) -> Result<[(f64, Option<f64>, bool); 2]> {
        if !shortcuts_on(acc) {
            let mut out = [(0.0, None, true); 2];
            for (basis, slot) in out.iter_mut().enumerate() {
                let a = accessible_information(&[0.5, 0.5], &self.eve_states(basis), acc)?;
                *slot = (a.bits, a.upper_bound, a.converged);
            }
            return Ok(out);
        }
        match self {
            ClosedForm::Pauli(w) => Ok(pauli_accessible(w)),
            // Reading the record reaches the Holevo quantity (module docs): the value and its
            // bound are the classical I(X : record) = H(record) − H(record | X).
            ClosedForm::MeasureResend { .. } => Ok(holevo.map(|chi| (chi, Some(chi), true))),
            ClosedForm::Probe(cos_eta, sin_eta) => {
                let y = basis_kets()[2];
                let mut out = [(0.0, None, true); 2];
                for (basis, slot) in out.iter_mut().enumerate() {
                    let k = basis_kets()[basis];
                    let r = k.map(|k| bloch(&probe_eve(&probe_coefficients(&y, *cos_eta, *sin_eta, &k))));
                    *slot = match equal_length_pair_information(&r) {
                        Some(bits) => (bits, Some(bits), true),
                        None => qubit_pair_accessible(&self.eve_states(basis), acc)?,
                    };
                }
                Ok(out)
            }
        }
    }

    /// Eve's states given Alice's bits 0 and 1 in basis `basis` (0: Z, 1: X, 2: Y), up to a
    /// unitary on her register (the standard basis of the Pauli isometry; the σ_Y
    /// eigenbasis of the probe).
    pub fn eve_states(&self, basis: usize) -> [CMat; 2] {
        let kets = basis_kets()[basis];
        match self {
            ClosedForm::Pauli(w) => {
                let paulis = crate::attack::paulis();
                kets.map(|k| {
                    // v[(b, j)] = √w_j (σ_j ψ)_b, the amplitude of |b>_B |j>_E in V|ψ>;
                    // ρ_E = Σ_b v[b][·] v[b][·]† = (v† v)ᵀ.
                    let v = CMat::from_fn(2, 4, |b, j| (paulis[j][(b, 0)] * k[0] + paulis[j][(b, 1)] * k[1]) * w[j].sqrt());
                    (v.adjoint() * &v).transpose()
                })
            }
            ClosedForm::MeasureResend { fraction, bases, count } => {
                let r = Record::new(*fraction, &bases[..*count], &kets);
                let d = 1 + 2 * count;
                [0, 1].map(|x| {
                    let e = r.eve(x, 1);
                    CMat::from_fn(d, d, |i, j| c(if i == j { e[i] } else { 0.0 }, 0.0))
                })
            }
            ClosedForm::Probe(cos_eta, sin_eta) => {
                let y = basis_kets()[2];
                kets.map(|k| {
                    let r = probe_eve(&probe_coefficients(&y, *cos_eta, *sin_eta, &k));
                    CMat::from_row_slice(2, 2, &[c(r.0[0], 0.0), r.1, r.1.conj(), c(r.0[1], 0.0)])
                })
            }
        }
    }
}

/// Whether the options leave the numerical route's shortcuts on: the closed forms stand
/// in for them, so options that turn them off get the general route.
fn shortcuts_on(acc: &AccessibleOptions) -> bool {
    acc.commuting_shortcut && acc.block_reduction
}

/// The kets of the bases Z, X, Y, as [`Basis::ket`] gives them (computed once).
fn basis_kets() -> [[Ket2; 2]; 3] {
    static KETS: std::sync::OnceLock<[[Ket2; 2]; 3]> = std::sync::OnceLock::new();
    *KETS.get_or_init(|| {
        [Basis::Z, Basis::X, Basis::Y].map(|b| {
            let (k0, k1) = (b.ket(0), b.ket(1));
            [[k0[0], k0[1]], [k1[0], k1[1]]]
        })
    })
}

/// Shannon entropy, in bits, of a probability vector whose entries sum to one in exact
/// arithmetic (they may not in floating point). The largest entry `p_m` has its logarithm
/// taken as `ln(1 − r)` with `r` the sum of the others when `r < ½`: near one, `p_m` itself
/// has lost the digits of `r` to rounding (an absolute error of 1e-16 in `ln p_m`, a
/// relative one of 1e-16/r in the term), while `r` keeps them. Other terms as
/// [`shannon_entropy`] takes them.
fn unit_sum_entropy(p: &[f64]) -> f64 {
    let Some(m) = (0..p.len()).max_by(|&i, &j| p[i].total_cmp(&p[j])) else { return 0.0 };
    let rest: f64 = p.iter().enumerate().filter(|&(i, _)| i != m).map(|(_, &x)| x).sum();
    let others = shannon_entropy(&p[..m]) + shannon_entropy(&p[m + 1..]);
    let top = if p[m] > 0.0 && rest < 0.5 { -p[m] * (-rest).ln_1p() / LN_2 } else { shannon_entropy(&p[m..=m]) };
    others + top
}

/// `<a|b>`.
fn inner(a: &Ket2, b: &Ket2) -> C64 {
    a[0].conj() * b[0] + a[1].conj() * b[1]
}

/// `φ(y) = 1 − h((1 − y)/2)` in bits for `y ∈ [0, 1]`: the information of a binary symmetric
/// channel of error `(1 − y)/2`, `(y atanh y + ½ ln(1 − y²)) / ln 2`. Below ½ in that form
/// (the two terms cancel only to half, against the whole of the entropy in `1 − h`), from
/// ½ on as `((1 + y) ln(1 + y) + (1 − y) ln(1 − y)) / (2 ln 2)`.
fn symmetric_channel_information(y: f64) -> f64 {
    let y = y.clamp(0.0, 1.0);
    if y < 0.5 {
        (y * y.atanh() + 0.5 * (-y * y).ln_1p()) / LN_2
    } else {
        let low = if y < 1.0 { (1.0 - y) * (-y).ln_1p() } else { 0.0 };
        ((1.0 + y) * y.ln_1p() + low) / (2.0 * LN_2)
    }
}

/// Accessible information, in bits, of one block holding two equiprobable pure states of
/// squared norm `n` each, with `√(n² − |overlap|²) = 2r`: `n φ(2r/n)`.
fn pure_block_information(n: f64, r: f64) -> f64 {
    if n > 0.0 {
        n * symmetric_channel_information(2.0 * r / n)
    } else {
        0.0
    }
}

/// Per basis Z, X, Y: the Pauli that keeps its states (t) and the two that flip them.
const PAULI_AXES: [(usize, usize, usize); 3] = [(3, 1, 2), (1, 3, 2), (2, 1, 3)];

/// The Pauli-channel statistics (module docs).
fn pauli_stats(w: &[f64; 4]) -> [BasisStats; 3] {
    let s_avg = unit_sum_entropy(w);
    PAULI_AXES.map(|(t, a, b)| {
        let (keep, flip) = (w[0] + w[t], w[a] + w[b]);
        let (r_keep, r_flip) = ((w[0] * w[t]).sqrt(), (w[a] * w[b]).sqrt());
        BasisStats {
            qber: 0.5 * flip + 0.5 * flip,
            p_guess: 0.5 + r_keep + r_flip,
            holevo: s_avg - unit_sum_entropy(&[keep, flip]),
            game: 0.5 * keep + r_keep,
            joint_ab: [[0.5 * keep, 0.5 * flip], [0.5 * flip, 0.5 * keep]],
        }
    })
}

/// The Pauli-channel accessible information, Z and X (module docs): exact, so the upper
/// bound is the value.
fn pauli_accessible(w: &[f64; 4]) -> [(f64, Option<f64>, bool); 2] {
    [PAULI_AXES[0], PAULI_AXES[1]].map(|(t, a, b)| {
        let bits = pure_block_information(w[0] + w[t], (w[0] * w[t]).sqrt()) + pure_block_information(w[a] + w[b], (w[a] * w[b]).sqrt());
        (bits, Some(bits), true)
    })
}

/// Entries of Eve's register under intercept-resend: the pass flag and one per basis and
/// outcome.
const RECORD: usize = 1 + 2 * MAX_BASES;

/// Intercept-resend seen from one of Alice's bases: `overlap[x][j] = |<φ_j|k_x>|²` for her
/// kets `k_x` and Eve's measurement kets `φ_j` (`j = 2β + o`), and the weights `p w_β`.
struct Record {
    overlap: [[f64; 2 * MAX_BASES]; 2],
    weight: [f64; 2 * MAX_BASES],
    fraction: f64,
    /// Eve's outcomes in use, `2 · count`.
    outcomes: usize,
}

impl Record {
    fn new(fraction: f64, bases: &[(f64, [Ket2; 2])], k: &[Ket2; 2]) -> Record {
        let mut r = Record { overlap: [[0.0; 2 * MAX_BASES]; 2], weight: [0.0; 2 * MAX_BASES], fraction, outcomes: 2 * bases.len() };
        for (beta, (w, phis)) in bases.iter().enumerate() {
            for (o, phi) in phis.iter().enumerate() {
                r.weight[2 * beta + o] = fraction * w;
                for x in 0..2 {
                    r.overlap[x][2 * beta + o] = inner(phi, &k[x]).norm_sqr();
                }
            }
        }
        r
    }

    /// Eve's register given Alice's bit `x`: `(1 − p, p w_β |<φ_βo|k_x>|², …)` with
    /// `power = 1`; with `power = 2` the overlaps enter squared (her state when Bob finds
    /// `k_x`).
    fn eve(&self, x: usize, power: i32) -> [f64; RECORD] {
        let mut e = [0.0; RECORD];
        e[0] = 1.0 - self.fraction;
        for j in 0..self.outcomes {
            e[1 + j] = self.weight[j] * self.overlap[x][j].powi(power);
        }
        e
    }
}

/// `½(a + b)` entry by entry.
fn midpoint(a: &[f64; RECORD], b: &[f64; RECORD]) -> [f64; RECORD] {
    std::array::from_fn(|i| 0.5 * (a[i] + b[i]))
}

/// The intercept-resend statistics (module docs).
fn measure_resend_stats(fraction: f64, bases: &[(f64, [Ket2; 2])]) -> [BasisStats; 3] {
    let d = 1 + 2 * bases.len();
    let records = basis_kets().map(|k| Record::new(fraction, bases, &k));
    let s_avg = unit_sum_entropy(&midpoint(&records[0].eve(0, 1), &records[0].eve(1, 1))[..d]);
    let distance = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(u, v)| (u - v).abs()).sum::<f64>();
    records.map(|r| {
        let e = [r.eve(0, 1), r.eve(1, 1)];
        let sigma = [r.eve(0, 2), r.eve(1, 2)];
        let mut joint_ab = [[0.0; 2]; 2];
        for (x, row) in joint_ab.iter_mut().enumerate() {
            for (b, cell) in row.iter_mut().enumerate() {
                // ½<k_b|ρ_B|k_b>, ρ_B = (1 − p)|k_x><k_x| + Σ_j p w_β |<φ_j|k_x>|² |φ_j><φ_j|.
                let mut p = if b == x { 1.0 - fraction } else { 0.0 };
                for j in 0..r.outcomes {
                    p += r.weight[j] * r.overlap[x][j] * r.overlap[b][j];
                }
                *cell = 0.5 * p;
            }
        }
        BasisStats {
            qber: joint_ab[0][1] + joint_ab[1][0],
            p_guess: 0.5 + 0.25 * distance(&e[0][..d], &e[1][..d]),
            holevo: s_avg - 0.5 * (unit_sum_entropy(&e[0][..d]) + unit_sum_entropy(&e[1][..d])),
            game: 0.25 * (sigma[0][..d].iter().sum::<f64>() + sigma[1][..d].iter().sum::<f64>() + distance(&sigma[0][..d], &sigma[1][..d])),
            joint_ab,
        }
    })
}

/// Coefficients `m[i][j]` of `|y_i>_B |y_j>_E` in `V|ψ>` for the probe, `y` the σ_Y kets:
/// `V|y0> = |y0>|y0>`, `V|y1> = cos η |y1>|y0> + sin η |y0>|y1>`, `|ψ> = α|y0> + β|y1>`.
fn probe_coefficients(y: &[Ket2; 2], cos_eta: f64, sin_eta: f64, k: &Ket2) -> [[C64; 2]; 2] {
    let (alpha, beta) = (inner(&y[0], k), inner(&y[1], k));
    [[alpha, beta * sin_eta], [beta * cos_eta, c(0.0, 0.0)]]
}

/// Eve's state `Σ_i m[i][·] m[i][·]†` as `([<0|ρ|0>, <1|ρ|1>], <0|ρ|1>)` in her σ_Y eigenbasis.
fn probe_eve(m: &[[C64; 2]; 2]) -> ([f64; 2], C64) {
    let mut r = ([0.0; 2], c(0.0, 0.0));
    for row in m {
        r.0[0] += row[0].norm_sqr();
        r.0[1] += row[1].norm_sqr();
        r.1 += row[0] * row[1].conj();
    }
    r
}

/// Entropy, in bits, of the 2 × 2 state `[[a, z], [z*, d]]` (trace one) with determinant
/// `det`, which the caller computes without cancellation: the larger eigenvalue
/// `½(a + d + √((a − d)² + 4|z|²))` is a sum, and the smaller is `det` over it rather than
/// the difference `½(a + d) − ½√(…)`, which loses the digits of a small eigenvalue.
fn qubit_entropy(a: f64, d: f64, z: C64, det: f64) -> f64 {
    let large = 0.5 * (a + d + ((a - d) * (a - d) + 4.0 * z.norm_sqr()).sqrt());
    let small = if large > 0.0 { det.max(0.0) / large } else { 0.0 };
    unit_sum_entropy(&[small, large])
}

/// The entangling-probe statistics (module docs).
fn probe_stats(cos_eta: f64, sin_eta: f64) -> [BasisStats; 3] {
    let kets = basis_kets();
    let y = kets[2];
    // Eve's unnormalised state when Bob finds |k_b>: <k_b|_B V|ψ>.
    let bob_finds = |m: &[[C64; 2]; 2], kb: &Ket2| -> Ket2 {
        let (u0, u1) = (inner(kb, &y[0]), inner(kb, &y[1]));
        [u0 * m[0][0] + u1 * m[1][0], u0 * m[0][1] + u1 * m[1][1]]
    };
    // Eve's state given Alice's ket is half of a pure state on B ⊗ E with coefficient
    // matrix m, so its determinant is |det m|², free of the cancellation in ad − |z|².
    let entropy_of = |m: &[[C64; 2]; 2]| {
        let r = probe_eve(m);
        qubit_entropy(r.0[0], r.0[1], r.1, (m[0][0] * m[1][1] - m[0][1] * m[1][0]).norm_sqr())
    };
    let z = [
        probe_eve(&probe_coefficients(&y, cos_eta, sin_eta, &kets[0][0])),
        probe_eve(&probe_coefficients(&y, cos_eta, sin_eta, &kets[0][1])),
    ];
    let avg = ([0.5 * (z[0].0[0] + z[1].0[0]), 0.5 * (z[0].0[1] + z[1].0[1])], (z[0].1 + z[1].1) * 0.5);
    // Eve's average state is diagonal in her σ_Y eigenbasis (the phases of |<y_0|ψ>| and
    // |<y_1|ψ>| cancel over Alice's bit), so ad − |z|² does not cancel here.
    let s_avg = qubit_entropy(avg.0[0], avg.0[1], avg.1, avg.0[0] * avg.0[1] - avg.1.norm_sqr());
    kets.map(|k| {
        let m = [probe_coefficients(&y, cos_eta, sin_eta, &k[0]), probe_coefficients(&y, cos_eta, sin_eta, &k[1])];
        let e = [probe_eve(&m[0]), probe_eve(&m[1])];
        let mut joint_ab = [[0.0; 2]; 2];
        for x in 0..2 {
            for b in 0..2 {
                let w = bob_finds(&m[x], &k[b]);
                joint_ab[x][b] = 0.5 * (w[0].norm_sqr() + w[1].norm_sqr());
            }
        }
        // ‖ρ_E(0) − ρ_E(1)‖₁ of a 2 × 2 Hermitian difference: |mean + r| + |mean − r|.
        let (d00, d11, d01) = (e[0].0[0] - e[1].0[0], e[0].0[1] - e[1].0[1], e[0].1 - e[1].1);
        let mean = 0.5 * (d00 + d11);
        let radius = (0.25 * (d00 - d11) * (d00 - d11) + d01.norm_sqr()).sqrt();
        // ‖w₀w₀† − w₁w₁†‖₁ = √((n₀ + n₁)² − 4|<w₀|w₁>|²), Eve's states when Bob is right;
        // by Lagrange's identity n₀n₁ − |<w₀|w₁>|² = |w₀[0]w₁[1] − w₀[1]w₁[0]|², so the
        // radicand is (n₀ − n₁)² + 4|w₀[0]w₁[1] − w₀[1]w₁[0]|², free of cancellation when
        // the two states are nearly parallel (small QBER).
        let (w0, w1) = (bob_finds(&m[0], &k[0]), bob_finds(&m[1], &k[1]));
        let (n0, n1) = (w0[0].norm_sqr() + w0[1].norm_sqr(), w1[0].norm_sqr() + w1[1].norm_sqr());
        let cross = (w0[0] * w1[1] - w0[1] * w1[0]).norm_sqr();
        let game_norm = ((n0 - n1) * (n0 - n1) + 4.0 * cross).sqrt();
        BasisStats {
            qber: joint_ab[0][1] + joint_ab[1][0],
            p_guess: 0.5 + 0.25 * ((mean + radius).abs() + (mean - radius).abs()),
            holevo: s_avg - 0.5 * (entropy_of(&m[0]) + entropy_of(&m[1])),
            game: 0.25 * (n0 + n1 + game_norm),
            joint_ab,
        }
    })
}

/// Bloch vector `(2 Re ρ₀₁, −2 Im ρ₀₁, ρ₀₀ − ρ₁₁)` of a 2 × 2 state given as
/// `([ρ₀₀, ρ₁₁], ρ₀₁)`.
fn bloch(r: &([f64; 2], C64)) -> [f64; 3] {
    [2.0 * r.1.re, -2.0 * r.1.im, r.0[0] - r.0[1]]
}

/// How far apart the squared lengths of two Bloch vectors may be for
/// [`equal_length_pair_information`] to treat them as equal: rounding level (their entries
/// are sums of a few products of numbers at most one).
const EQUAL_LENGTH_TOL: f64 = 1e-14;

/// Accessible information, in bits, of two equiprobable qubit states whose Bloch vectors
/// `r₀, r₁` have equal length: `1 − h((1 − s)/2)` with `s = |r₀ − r₁|/2`, reached by the
/// projective measurement along `r₀ − r₁`. `None` when the lengths differ.
///
/// Proof: write `r_± = a e ± s u` with `u` along `r₀ − r₁` and `e ⟂ u` (equal lengths make
/// the mean `a e` orthogonal to the difference), `a² + s² = |r|² ≤ 1`. The pure states with
/// Bloch vectors `m_± = √(1 − s²) e ± s u` go to `r_±` under the dephasing channel
/// `ρ ↦ ½(1 + μ)ρ + ½(1 − μ)(u·σ)ρ(u·σ)`, `μ = a/√(1 − s²) ∈ [0, 1]`, which keeps the
/// component along `u` and scales the rest by `μ`. A measurement after a channel is a
/// measurement before it, so the accessible information is at most that of the pure pair,
/// whose overlap `|<m₊|m₋>|² = (1 + m₊·m₋)/2 = 1 − s²` gives Levitin's value
/// `1 − h((1 − s)/2)` (two equiprobable pure states). Measuring `u·σ` on `r_±` gives
/// outcome `±` with probabilities `(1 ± s)/2`, a binary symmetric channel of error
/// `(1 − s)/2`, which reaches it. (For `s = 1` the states are the orthogonal pure `±u`.)
fn equal_length_pair_information(r: &[[f64; 3]; 2]) -> Option<f64> {
    let len2 = |v: &[f64; 3]| v[0] * v[0] + v[1] * v[1] + v[2] * v[2];
    if (len2(&r[0]) - len2(&r[1])).abs() > EQUAL_LENGTH_TOL {
        return None;
    }
    let diff = [r[0][0] - r[1][0], r[0][1] - r[1][1], r[0][2] - r[1][2]];
    Some(symmetric_channel_information(0.5 * len2(&diff).sqrt()))
}

/// Largest commutator entry for which the general route measures two states in a common
/// eigenbasis (`COMMUTATOR_TOL` of [`crate::quantum::measures::accessible`]).
const COMMUTATOR_TOL: f64 = 1e-13;

/// Accessible information of two equiprobable qubit states by the general route's last
/// stage, [`qubit_pair::solve`] and its dual bound; the general route itself when the
/// states commute or the bound does not certify the value.
fn qubit_pair_accessible(states: &[CMat; 2], acc: &AccessibleOptions) -> Result<(f64, Option<f64>, bool)> {
    let commutator = &states[0] * &states[1] - &states[1] * &states[0];
    if commutator.iter().any(|z| z.norm() >= COMMUTATOR_TOL) {
        let pair = qubit_pair::solve([0.5, 0.5], [&states[0], &states[1]]);
        let bits = measured_information(&[0.5, 0.5], states, &pair.povm);
        if pair.upper - bits <= acc.certificate_tol {
            return Ok((bits, Some(pair.upper), true));
        }
    }
    let a = accessible_information(&[0.5, 0.5], states, acc)?;
    Ok((a.bits, a.upper_bound, a.converged))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::attack::{resolve, Attack, Value};
    use crate::exact::eval::{evaluate, QUANTITIES};
    use crate::protocol::Protocol;
    use rand::{Rng, SeedableRng};
    use std::collections::BTreeMap;

    /// Agreement required of a closed form with the general evaluator, per quantity
    /// (absolute; every quantity is a probability or at most a few bits).
    const TOL: f64 = 1e-12;

    /// The largest difference between the closed form's and the general evaluator's
    /// quantities (and the naming of the worst), for `family` with `given` parameters.
    fn worst_difference(family: &str, given: &BTreeMap<String, Value>, form: Option<&ClosedForm>, protocol: Protocol) -> (f64, String) {
        let attack = Attack::builtin(family, given).unwrap();
        let opts = EvalOptions::full(protocol);
        let general = evaluate(&attack, &opts).unwrap();
        let params = resolve(crate::attack::family(family).unwrap(), given).unwrap();
        let own = ClosedForm::of(family, &params).unwrap();
        let closed = form.unwrap_or(&own).evaluate(&attack.label, &opts).unwrap();
        assert_eq!(closed.eve_dim, general.eve_dim);
        assert_eq!(closed.protocol, general.protocol);
        assert_eq!(closed.accessible_converged, general.accessible_converged);
        let mut worst = (0.0, String::new());
        for q in QUANTITIES {
            let (a, b) = ((q.value)(&closed), (q.value)(&general));
            assert_eq!(a.is_some(), b.is_some(), "{family} {given:?}: {}", q.key);
            let d = (a.unwrap_or(0.0) - b.unwrap_or(0.0)).abs();
            if d > worst.0 || d.is_nan() {
                worst = (d, format!("{}: closed {a:?}, general {b:?}", q.key));
            }
        }
        for (a, b) in closed.pauli_weights.iter().zip(&general.pauli_weights) {
            if (a - b).abs() > worst.0 {
                worst = ((a - b).abs(), "pauli_weights".into());
            }
        }
        worst
    }

    fn params(pairs: &[(&str, Value)]) -> BTreeMap<String, Value> {
        pairs.iter().map(|(k, v)| (k.to_string(), v.clone())).collect()
    }

    /// Random parameters of every family with a closed form, the range ends among them.
    fn random_cases(rng: &mut impl Rng, n: usize) -> Vec<(&'static str, BTreeMap<String, Value>)> {
        let num = Value::Num;
        let text = |s: &str| Value::Text(s.to_string());
        let mut cases = Vec::new();
        for i in 0..n {
            let edge = |x: f64, lo: f64, hi: f64| match i {
                0 => lo,
                1 => hi,
                _ => x,
            };
            let d = edge(rng.gen_range(0.0..0.5), 0.0, 0.5);
            for kind in ["universal", "phase-covariant"] {
                cases.push(("cloner", params(&[("kind", text(kind)), ("qber", num(d))])));
            }
            cases.push(("entangling-probe", params(&[("qber", num(edge(rng.gen_range(0.0..0.5), 0.0, 0.5)))])));
            for basis in ["z", "x", "random", "random-zxy", "breidbart"] {
                cases.push((
                    "intercept-resend",
                    params(&[("fraction", num(edge(rng.gen_range(0.0..1.0), 0.0, 1.0))), ("basis", text(basis))]),
                ));
            }
            // Pauli weights uniform on the simplex (sorted uniforms), some with zeros.
            let mut u = [rng.gen::<f64>(), rng.gen::<f64>(), rng.gen::<f64>()];
            u.sort_by(f64::total_cmp);
            let mut w = [u[0], u[1] - u[0], u[2] - u[1]];
            if i % 5 == 0 {
                w[i / 5 % 3] = 0.0;
            }
            if i == 1 {
                w = [0.25, 0.25, 0.5];
            }
            cases.push(("pauli", params(&[("px", num(w[0])), ("py", num(w[1])), ("pz", num(w[2]))])));
        }
        cases
    }

    #[test]
    fn closed_forms_agree_with_the_general_evaluator_for_random_parameters() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0xc105ed);
        for (family, given) in random_cases(&mut rng, 60) {
            for protocol in [Protocol::Bb84, Protocol::SixState] {
                let (d, what) = worst_difference(family, &given, None, protocol);
                assert!(d <= TOL, "{family} {given:?} ({protocol}): {what}, difference {d:e}");
            }
        }
    }

    #[test]
    fn tiny_error_rates_keep_their_digits() {
        // Near-parallel states of Eve (QBER 10⁻¹⁶ to 10⁻⁹): quantities built from differences
        // of nearly equal terms must still agree with the general evaluator, and entropies
        // must not see the report's snap of probabilities within 10⁻¹² of 0 (h(10⁻¹²) is
        // 4·10⁻¹¹ bits). Exactly at the snap's edge (QBER 10⁻¹²) the last ulp of either route
        // decides whether the reported QBER shows as 0, a difference of the slack itself, so
        // the values straddle it.
        for q in [1e-16, 1e-14, 1e-13, 0.9e-12, 1.1e-12, 3e-12, 1e-9] {
            for (family, given) in [
                ("entangling-probe", params(&[("qber", Value::Num(q))])),
                ("cloner", params(&[("kind", Value::Text("phase-covariant".into())), ("qber", Value::Num(q))])),
                ("cloner", params(&[("qber", Value::Num(q))])),
            ] {
                for protocol in [Protocol::Bb84, Protocol::SixState] {
                    let (d, what) = worst_difference(family, &given, None, protocol);
                    assert!(d <= TOL, "{family} at QBER {q:e} ({protocol}): {what}, difference {d:e}");
                    // No rounding shows as a negative margin, on either route.
                    let general = evaluate(&Attack::builtin(family, &given).unwrap(), &EvalOptions::full(protocol)).unwrap();
                    assert!(general.margin >= 0.0, "{family} at QBER {q:e} ({protocol}): margin {:e}", general.margin);
                }
            }
        }
    }

    #[test]
    fn a_wrong_closed_form_is_caught() {
        // The comparison above can fail: slightly wrong weights, a wrong fraction or a
        // wrong probe angle each move some quantity by far more than the tolerance.
        let universal = params(&[("kind", Value::Text("universal".into())), ("qber", Value::Num(0.1))]);
        let wrong = ClosedForm::Pauli([0.85 + 1e-9, 0.05 - 1e-9, 0.05, 0.05]);
        assert!(worst_difference("cloner", &universal, Some(&wrong), Protocol::Bb84).0 > TOL);
        // Swapped X and Z weights: the same error rates in Z and X, different Y and Eve.
        let pauli = params(&[("px", Value::Num(0.1)), ("py", Value::Num(0.05)), ("pz", Value::Num(0.2))]);
        let swapped = ClosedForm::Pauli([0.65, 0.2, 0.05, 0.1]);
        assert!(worst_difference("pauli", &pauli, Some(&swapped), Protocol::Bb84).0 > 1e-3);
        let ir = params(&[("fraction", Value::Num(0.4)), ("basis", Value::Text("breidbart".into()))]);
        let p = resolve(crate::attack::family("intercept-resend").unwrap(), &ir).unwrap();
        let Some(ClosedForm::MeasureResend { bases, count, .. }) = ClosedForm::of("intercept-resend", &p) else { panic!() };
        let wrong = ClosedForm::MeasureResend { fraction: 0.4 + 1e-9, bases, count };
        assert!(worst_difference("intercept-resend", &ir, Some(&wrong), Protocol::Bb84).0 > TOL);
        let probe = params(&[("qber", Value::Num(0.1))]);
        let (c0, s0) = entangling_probe::probe_angle(0.1);
        let wrong = ClosedForm::Probe(c0, s0 + 1e-9);
        assert!(worst_difference("entangling-probe", &probe, Some(&wrong), Protocol::Bb84).0 > TOL);
    }

    #[test]
    fn with_the_shortcuts_off_the_general_route_is_taken() {
        // The closed forms stand in for the shortcuts; without them the accessible
        // information comes from the general route on Eve's states, as in the evaluator.
        let opts = EvalOptions {
            protocol: Protocol::Bb84,
            accessible: Some(AccessibleOptions { block_reduction: false, ..AccessibleOptions::default() }),
        };
        for (family, given) in [
            ("cloner", params(&[("qber", Value::Num(0.07))])),
            ("intercept-resend", params(&[("fraction", Value::Num(0.6))])),
            ("entangling-probe", params(&[("qber", Value::Num(0.12))])),
        ] {
            let attack = Attack::builtin(family, &given).unwrap();
            let general = evaluate(&attack, &opts).unwrap();
            let p = resolve(crate::attack::family(family).unwrap(), &given).unwrap();
            let closed = ClosedForm::of(family, &p).unwrap().evaluate(family, &opts).unwrap();
            for (a, b) in [(closed.accessible_z, general.accessible_z), (closed.accessible_x, general.accessible_x)] {
                // The search's own accuracy: its stopping rules work at 1e-9 to 1e-11 bits.
                assert!((a.unwrap() - b.unwrap()).abs() < 1e-8, "{family}: {a:?} vs {b:?}");
            }
        }
    }

    #[test]
    fn equal_length_pairs_have_the_helstrom_information_of_the_lemma() {
        // Random pairs with Bloch vectors of equal length (one a random rotation of the
        // other), against the general route (qubit-pair solver with its dual bound), and
        // pairs of unequal length refused.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x1e33a);
        let density = |r: [f64; 3]| {
            CMat::from_row_slice(
                2,
                2,
                &[c(0.5 * (1.0 + r[2]), 0.0), c(0.5 * r[0], -0.5 * r[1]), c(0.5 * r[0], 0.5 * r[1]), c(0.5 * (1.0 - r[2]), 0.0)],
            )
        };
        let unit = |rng: &mut rand_chacha::ChaCha8Rng| loop {
            let v: [f64; 3] = std::array::from_fn(|_| rng.gen_range(-1.0..1.0));
            let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
            if n > 0.1 && n <= 1.0 {
                break v.map(|x| x / n);
            }
        };
        for i in 0..200 {
            let length = if i % 10 == 0 { 1.0 } else { rng.gen_range(0.05..1.0) };
            let r = [unit(&mut rng).map(|x| x * length), unit(&mut rng).map(|x| x * length)];
            let bits = equal_length_pair_information(&r).expect("equal lengths");
            let general = accessible_information(&[0.5, 0.5], &[density(r[0]), density(r[1])], &AccessibleOptions::default()).unwrap();
            assert!((bits - general.bits).abs() <= TOL, "{r:?}: lemma {bits}, general {}", general.bits);
            assert!(bits <= general.upper_bound.unwrap() + TOL);
            let shorter = [r[0], r[1].map(|x| x * 0.999)];
            assert!(equal_length_pair_information(&shorter).is_none());
        }
        // The probe's states in Z and X are such pairs.
        for d in [0.0, 0.01, 0.1, 0.3, 0.5] {
            let (cos_eta, sin_eta) = entangling_probe::probe_angle(d);
            let y = basis_kets()[2];
            for k in &basis_kets()[..2] {
                let r = k.map(|k| bloch(&probe_eve(&probe_coefficients(&y, cos_eta, sin_eta, &k))));
                let bits = equal_length_pair_information(&r).expect("equal lengths");
                let direct = symmetric_channel_information(sin_eta);
                assert!((bits - direct).abs() < 1e-14, "D = {d}: {bits} vs {direct}");
            }
        }
    }

    #[test]
    fn unit_sum_entropy_is_the_shannon_entropy_and_keeps_the_digits_near_one() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(0x5a7);
        for n in 1..8 {
            for _ in 0..50 {
                let raw: Vec<f64> = (0..n).map(|_| rng.gen::<f64>().powi(3)).collect();
                let total: f64 = raw.iter().sum();
                let p: Vec<f64> = raw.iter().map(|x| x / total).collect();
                assert!((unit_sum_entropy(&p) - shannon_entropy(&p)).abs() < 1e-14, "{p:?}");
            }
        }
        // [1 − ε, ε]: h(ε) = ε log₂(1/ε) + (1 − ε)(ε + ε²/2 + ε³/3 + …)/ln 2; the plain sum
        // takes log₂(1 − ε) from the rounded 1 − ε, an error of order 1e-16/ε relative.
        for eps in [1e-5_f64, 3e-9, 1e-12] {
            let series = eps * -eps.log2() + (1.0 - eps) * (eps + eps * eps / 2.0 + eps.powi(3) / 3.0) / LN_2;
            assert!((unit_sum_entropy(&[1.0 - eps, eps]) / series - 1.0).abs() < 4e-16, "ε = {eps}");
        }
        assert_eq!(unit_sum_entropy(&[1.0, 0.0]), 0.0);
        assert_eq!(unit_sum_entropy(&[]), 0.0);
    }

    #[test]
    fn symmetric_channel_information_is_one_minus_the_entropy_of_its_error() {
        use crate::quantum::measures::binary_entropy;
        for i in 0..=1000 {
            let y = i as f64 / 1000.0;
            let direct = 1.0 - binary_entropy((1.0 - y) / 2.0);
            assert!((symmetric_channel_information(y) - direct).abs() < 1e-15, "y = {y}");
        }
        // Small y: φ(y) = y²/(2 ln 2) + O(y⁴), where 1 − h loses every digit.
        let y: f64 = 1e-6;
        let series = (y * y / 2.0 + y.powi(4) / 12.0) / LN_2;
        assert!((symmetric_channel_information(y) / series - 1.0).abs() < 1e-15);
        assert_eq!(symmetric_channel_information(0.0), 0.0);
        assert_eq!(symmetric_channel_information(1.0), 1.0);
    }
}
