//! The exact single-photon evaluator: error rates, Eve's information and the bounds for one
//! attack.
//!
//! For each basis θ ∈ {Z, X, Y} and bit x, Alice's state |ψ_{θ,x}> goes through the attack
//! channel; the evaluator forms Bob's and Eve's conditional states and reports (conventions
//! binding across the project):
//! - `qber_θ = ½ Σ_x <ψ_{θ,1−x}| Tr_E ρ_BE(θ,x) |ψ_{θ,1−x}>`; Eve learns θ after sifting;
//! - `p_guess_θ = ½ + ¼‖ρ_E(θ,0) − ρ_E(θ,1)‖₁`; `holevo_θ` in bits; `h_x_given_e = 1 − holevo_z`;
//! - `accessible_θ`: accessible information of {½ρ_E(θ,0), ½ρ_E(θ,1)} (see
//!   [`crate::quantum::measures::accessible_information`]);
//! - `i_ab`: Shannon mutual information of Alice's and Bob's Z-basis bits;
//! - `game_win`: the tripartite guessing game with honest Bob, averaged over θ ∈ {Z, X}:
//!   `¼(Tr σ₀ + Tr σ₁ + ‖σ₀ − σ₁‖₁)` with `σ_x = <ψ_{θ,x}|_B ρ_BE(θ,x) |ψ_{θ,x}>_B`, the
//!   maximum over Eve's two-outcome POVM of P(Bob right and Eve right);
//! - BB84: `bound_rate = 1 − h(qber_x) − h(qber_z)`, `attack_rate = h_x_given_e − h(qber_z)`,
//!   `individual_rate = 1 − h(qber_z) − accessible_z`, `margin = h_x_given_e − (1 − h(qber_x))`;
//! - six-state: `bound_rate = 1 − H(p)` with the Pauli weights of
//!   [`crate::exact::bounds::six_state_weights`], `margin = h_x_given_e − (1 − H(p) + h(qber_z))`.
//!
//! `margin ≥ −1e-9` (entropic uncertainty relation, Berta et al. 2010) and
//! `game_win ≤ ½ + 1/(2√2)` hold for every physical attack; a violation is returned as an
//! [`ErrorKind::BoundViolation`] error, never hidden.

use crate::attack::Attack;
use crate::error::{Error, ErrorKind, Result};
use crate::exact::bounds::{game_bound, six_state_entropy, six_state_weights};
use crate::numeric::linalg::{c, CMat, CVec, C64};
use crate::protocol::{Basis, Protocol};
mod closed;
pub use closed::ClosedForm;

use crate::quantum::measures::{
    accessible_information, binary_entropy, mutual_information, trace_norm, von_neumann_entropy, AccessibleOptions,
};

/// Slack allowed on the proven inequalities before a violation is reported: 1e-9.
pub const BOUND_SLACK: f64 = 1e-9;

/// Probabilities computed from a channel that is complete within the Kraus tolerance
/// ([`crate::numeric::linalg::Tolerance`], 1e-9 per entry by default) can leave [0, 1] by a
/// few times that. Within this slack they are clamped to [0, 1] before entropies are taken;
/// beyond it the evaluation is an error naming the quantity.
pub const PROBABILITY_SLACK: f64 = 1e-8;

/// Rounding noise: a probability, information, entropy, gap or margin within this of a bound
/// it must respect (0 below; 1 above for probabilities and one-bit quantities) is reported
/// as that bound, so that −6.7e-16 bits prints as 0. Anything further out is reported as
/// computed (and, where a proven inequality is at stake, checked against [`BOUND_SLACK`]).
pub const ROUNDING_SLACK: f64 = 1e-12;

/// Clamps probability `p` (named `name` in the error) to [0, 1] within [`PROBABILITY_SLACK`].
pub fn clamp_probability(name: &str, p: f64) -> Result<f64> {
    if p.is_nan() {
        return Err(Error::new(ErrorKind::NotANumber, format!("{name} is NaN")));
    }
    if !(-PROBABILITY_SLACK..=1.0 + PROBABILITY_SLACK).contains(&p) {
        return Err(Error::new(
            ErrorKind::NotANumber,
            format!(
                "{name} = {p} lies outside [0, 1] by more than the rounding slack {PROBABILITY_SLACK}: the channel is not trace preserving"
            ),
        ));
    }
    Ok(snap(p.clamp(0.0, 1.0), 0.0, 1.0))
}

/// Snaps `x` to `lo` or `hi` when it lies within [`ROUNDING_SLACK`] of either.
pub fn snap(x: f64, lo: f64, hi: f64) -> f64 {
    if (x - lo).abs() <= ROUNDING_SLACK {
        lo
    } else if (x - hi).abs() <= ROUNDING_SLACK {
        hi
    } else {
        x
    }
}

/// The accessible information of Eve's Z and X ensembles (priors, states) when `acc` asks
/// for it: each snapped to [0, 1] within the rounding slack, whether both searches
/// converged, and the larger of the two certified gaps. All `None` without `acc`.
#[allow(clippy::type_complexity)]
pub fn accessible_pair(
    z: (&[f64], &[CMat]),
    x: (&[f64], &[CMat]),
    acc: Option<&AccessibleOptions>,
) -> Result<(Option<f64>, Option<f64>, Option<bool>, Option<f64>)> {
    let Some(acc) = acc else { return Ok((None, None, None, None)) };
    let az = accessible_information(z.0, z.1, acc)?;
    let ax = accessible_information(x.0, x.1, acc)?;
    Ok(accessible_summary(Some([(az.bits, az.upper_bound, az.converged), (ax.bits, ax.upper_bound, ax.converged)])))
}

/// What [`accessible_pair`] reports from the Z and X results `(bits, upper bound,
/// converged)`: the values snapped to [0, 1], whether both converged, and the larger
/// certified gap snapped to [0, ∞). All `None` for `None`.
#[allow(clippy::type_complexity)]
fn accessible_summary(zx: Option<[(f64, Option<f64>, bool); 2]>) -> (Option<f64>, Option<f64>, Option<bool>, Option<f64>) {
    let Some([(bz, uz, cz), (bx, ux, cx)]) = zx else { return (None, None, None, None) };
    let gap = uz.zip(ux).map(|(uz, ux)| snap((uz - bz).max(ux - bx), 0.0, f64::INFINITY));
    (Some(snap(bz, 0.0, 1.0)), Some(snap(bx, 0.0, 1.0)), Some(cz && cx), gap)
}

/// Evaluation settings.
#[derive(Clone, Debug, Default)]
pub struct EvalOptions {
    /// Protocol whose bound the attack is judged against.
    pub protocol: Protocol,
    /// Compute accessible information (microseconds for structured states, milliseconds
    /// for unstructured ones on C⁴); when false, `accessible_*` and
    /// `individual_rate` are `None`.
    pub accessible: Option<AccessibleOptions>,
}

impl EvalOptions {
    /// Settings for `protocol` with accessible information at default settings.
    pub fn full(protocol: Protocol) -> Self {
        EvalOptions { protocol, accessible: Some(AccessibleOptions::default()) }
    }
    /// Settings for `protocol` without accessible information.
    pub fn fast(protocol: Protocol) -> Self {
        EvalOptions { protocol, accessible: None }
    }
}

/// Everything the evaluator reports for one attack. Field names are the JSON keys; the
/// numeric ones are listed, with their CSV columns, in [`QUANTITIES`].
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Evaluation {
    /// QBER in the Z (key) basis.
    pub qber_z: f64,
    /// QBER in the X basis.
    pub qber_x: f64,
    /// QBER in the Y basis.
    pub qber_y: f64,
    /// Eve's Helstrom guessing probability of Alice's bit, Z basis.
    pub p_guess_z: f64,
    /// Same, X basis.
    pub p_guess_x: f64,
    /// Same, Y basis.
    pub p_guess_y: f64,
    /// Holevo quantity of Eve's ensemble, Z basis, bits.
    pub holevo_z: f64,
    /// Same, X basis.
    pub holevo_x: f64,
    /// Same, Y basis.
    pub holevo_y: f64,
    /// H(X|E) of the key bit, `1 − holevo_z`, bits.
    pub h_x_given_e: f64,
    /// Accessible information, Z basis, bits (None when not requested).
    pub accessible_z: Option<f64>,
    /// Accessible information, X basis, bits.
    pub accessible_x: Option<f64>,
    /// Whether the accessible-information searches met their convergence test (extra).
    pub accessible_converged: Option<bool>,
    /// How far `accessible_z` and `accessible_x` may lie below the true maxima: the larger
    /// of the two (upper bound − value; extra, set with accessible information).
    pub accessible_gap: Option<f64>,
    /// Mutual information of Alice's and Bob's Z-basis bits.
    pub i_ab: f64,
    /// Tripartite guessing-game winning probability with honest Bob.
    pub game_win: f64,
    /// The protocol's proven asymptotic rate at these QBERs (per sifted bit).
    pub bound_rate: f64,
    /// Devetak–Winter rate against this attack: `h_x_given_e − h(qber_z)`.
    pub attack_rate: f64,
    /// Csiszár–Körner rate against this attack measured individually.
    pub individual_rate: Option<f64>,
    /// How far Eve's uncertainty exceeds what the bound assumes (≥ 0 for physical attacks).
    pub margin: f64,
    /// H_min(X|E) of one round, `−log₂ p_guess_z` (extra).
    pub h_min_x_given_e: f64,
    /// Six-state Pauli weights (p_I, p_X, p_Y, p_Z) from the three QBERs (extra).
    pub pauli_weights: [f64; 4],
    /// Dimension of Eve's register (extra).
    pub eve_dim: usize,
    /// Protocol judged against (extra).
    pub protocol: Protocol,
}

/// How the human table of `eval` shows a quantity.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shown {
    /// Ten decimals.
    Fixed,
    /// One significant digit in scientific notation (tolerances and gaps).
    Scientific,
    /// CSV and JSON only.
    Hidden,
}

/// One reported quantity of an [`Evaluation`]. [`QUANTITIES`] is the only list of them:
/// the JSON keys of `eval --json`, the quantity columns of the sweep and campaign CSVs and
/// the rows of the human table are all generated from it.
#[derive(Clone, Copy, Debug)]
pub struct Quantity {
    /// JSON key (the [`Evaluation`] field name).
    pub key: &'static str,
    /// CSV column, with its unit in the name (`_bits`) where it has one.
    pub column: &'static str,
    /// What it is, for the human table.
    pub help: &'static str,
    /// How the human table shows it.
    pub shown: Shown,
    /// Its value; `None` when it was not computed (accessible information on request only).
    pub value: fn(&Evaluation) -> Option<f64>,
}

impl Quantity {
    /// The quantity whose CSV column is `column`.
    ///
    /// # Panics
    /// If there is none (a programming error in a column list).
    #[track_caller]
    pub fn by_column(column: &str) -> &'static Quantity {
        QUANTITIES.iter().find(|q| q.column == column).unwrap_or_else(|| panic!("no evaluation quantity has CSV column `{column}`"))
    }
}

macro_rules! quantity {
    ($key:ident, $column:literal, $shown:ident, $help:literal) => {
        Quantity { key: stringify!($key), column: $column, help: $help, shown: Shown::$shown, value: |e| Some(e.$key) }
    };
    ($key:ident?, $column:literal, $shown:ident, $help:literal) => {
        Quantity { key: stringify!($key), column: $column, help: $help, shown: Shown::$shown, value: |e| e.$key }
    };
}

/// Every numeric quantity of an [`Evaluation`], in the order of the sweep CSV.
pub const QUANTITIES: &[Quantity] = &[
    quantity!(qber_z, "qber_z", Fixed, "error rate, Z (key) basis"),
    quantity!(qber_x, "qber_x", Fixed, "error rate, X basis"),
    quantity!(qber_y, "qber_y", Fixed, "error rate, Y basis"),
    quantity!(p_guess_z, "p_guess_z", Fixed, "Eve's Helstrom guessing probability, Z"),
    quantity!(p_guess_x, "p_guess_x", Fixed, "same, X"),
    quantity!(p_guess_y, "p_guess_y", Fixed, "same, Y"),
    quantity!(holevo_z, "holevo_z_bits", Fixed, "Holevo quantity of Eve's states, Z (bits)"),
    quantity!(holevo_x, "holevo_x_bits", Fixed, "same, X (bits)"),
    quantity!(holevo_y, "holevo_y_bits", Fixed, "same, Y (bits)"),
    quantity!(h_x_given_e, "h_x_given_e_bits", Fixed, "H(X|E) of the key bit (bits)"),
    quantity!(accessible_z?, "accessible_z_bits", Fixed, "accessible information, Z (bits)"),
    quantity!(accessible_x?, "accessible_x_bits", Fixed, "accessible information, X (bits)"),
    quantity!(i_ab, "i_ab_bits", Fixed, "I(A:B), Z basis (bits)"),
    quantity!(game_win, "game_win", Fixed, "guessing game with honest Bob (bound 0.8535533906)"),
    quantity!(bound_rate, "bound_rate_bits", Fixed, "proven rate at these QBERs (bits/sifted bit)"),
    quantity!(attack_rate, "attack_rate_bits", Fixed, "Devetak-Winter rate against this attack"),
    quantity!(individual_rate?, "individual_rate_bits", Fixed, "Csiszar-Korner rate, attack measured individually"),
    quantity!(margin, "margin_bits", Fixed, "H(X|E) minus what the bound assumes (>= 0)"),
    quantity!(h_min_x_given_e, "h_min_x_given_e_bits", Hidden, "min-entropy -log2 p_guess_z (bits)"),
    quantity!(accessible_gap?, "accessible_gap_bits", Scientific, "upper bound minus accessible value, worse of Z, X (bits)"),
];

impl Evaluation {
    /// The JSON object of the evaluation: every [`QUANTITIES`] key (null when not computed
    /// or NaN) and the extras `accessible_converged`, `pauli_weights`, `eve_dim`, `protocol`.
    pub fn to_json(&self) -> serde_json::Map<String, serde_json::Value> {
        let mut m = serde_json::Map::new();
        for q in QUANTITIES {
            m.insert(q.key.to_string(), (q.value)(self).map_or(serde_json::Value::Null, serde_json::Value::from));
        }
        m.insert("accessible_converged".into(), self.accessible_converged.map_or(serde_json::Value::Null, serde_json::Value::from));
        m.insert("pauli_weights".into(), self.pauli_weights.iter().map(|&w| serde_json::Value::from(w)).collect());
        m.insert("eve_dim".into(), self.eve_dim.into());
        m.insert("protocol".into(), self.protocol.to_string().into());
        m
    }
}

/// Bob's and Eve's states conditioned on Alice sending one signal.
struct Conditional {
    /// Bob's reduced state: (<0|ρ_B|0>, <1|ρ_B|1>, <0|ρ_B|1>).
    rho_b: ([f64; 2], C64),
    /// Eve's reduced state (d_E × d_E).
    rho_e: CMat,
    /// Eve's unnormalised state given that Bob found Alice's state: `<ψ|_B ρ_BE |ψ>_B`.
    sigma_right: CMat,
    /// Von Neumann entropy of `rho_e`, bits.
    s_e: f64,
}

fn conditional(attack: &Attack, psi: &CVec) -> Conditional {
    let d = attack.eve_dim;
    let zero = c(0.0, 0.0);
    let ops = attack.channel.operators();
    // ρ_E = Σ u u† over the 2K vectors u = (<b|_B ⊗ 1) K|ψ>; when 2K < d_E its non-zero
    // spectrum is that of the smaller Gram matrix <u_i|u_j> (for an isometry: ρ_B's).
    let isometry = ops.len() == 1;
    let small = !isometry && 2 * ops.len() < d;
    let mut parts: Vec<CVec> = Vec::new();
    let (p0, p1) = (psi[0], psi[1]);
    let (q0, q1) = (p0.conj(), p1.conj());
    let mut b = [zero; 3]; // <0|ρ_B|0>, <1|ρ_B|1>, <0|ρ_B|1>
    let mut rho_e = CMat::zeros(d, d);
    let mut sigma_right = CMat::zeros(d, d);
    // Scratch on the stack for eve_dim ≤ 8, on the heap beyond.
    let mut v_buf = [zero; 16];
    let mut w_buf = [zero; 8];
    let (mut v_heap, mut w_heap);
    let (v, w): (&mut [C64], &mut [C64]) = if d <= 8 {
        (&mut v_buf[..2 * d], &mut w_buf[..d])
    } else {
        v_heap = vec![zero; 2 * d];
        w_heap = vec![zero; d];
        (&mut v_heap[..], &mut w_heap[..])
    };
    for k in ops {
        // v = K ψ (K is stored column-major, 2d × 2).
        let ks = k.as_slice();
        for (r, vr) in v.iter_mut().enumerate() {
            *vr = ks[r] * p0 + ks[2 * d + r] * p1;
        }
        let (v0, v1) = v.split_at(d);
        for e in 0..d {
            b[0] += c(v0[e].norm_sqr(), 0.0);
            b[1] += c(v1[e].norm_sqr(), 0.0);
            b[2] += v0[e] * v1[e].conj();
            w[e] = v0[e] * q0 + v1[e] * q1;
        }
        let re = rho_e.as_mut_slice();
        let sg = sigma_right.as_mut_slice();
        for j in 0..d {
            let (c0, c1, cw) = (v0[j].conj(), v1[j].conj(), w[j].conj());
            for i in 0..d {
                re[j * d + i] += v0[i] * c0 + v1[i] * c1;
                sg[j * d + i] += w[i] * cw;
            }
        }
        if small {
            parts.push(CVec::from_column_slice(v0));
            parts.push(CVec::from_column_slice(v1));
        }
    }
    let rho_b = ([b[0].re, b[1].re], b[2]);
    let s_e = if isometry {
        // A pure state on B ⊗ E: Eve's spectrum is Bob's.
        binary_spectrum_entropy(b[0].re, b[1].re, b[2])
    } else if small {
        let gram = CMat::from_fn(parts.len(), parts.len(), |i, j| parts[i].dotc(&parts[j]));
        von_neumann_entropy(&gram)
    } else {
        von_neumann_entropy(&rho_e)
    };
    Conditional { rho_b, rho_e, sigma_right, s_e }
}

/// Entropy in bits of the 2×2 Hermitian matrix [[a, z], [z*, d]].
fn binary_spectrum_entropy(a: f64, d: f64, z: C64) -> f64 {
    let mean = 0.5 * (a + d);
    let r = (0.25 * (a - d) * (a - d) + z.norm_sqr()).sqrt();
    let xlog = |x: f64| if x <= 0.0 { 0.0 } else { -x * x.log2() };
    xlog(mean - r) + xlog(mean + r)
}

/// Per-basis quantities.
#[derive(Clone, Copy, Debug)]
struct BasisStats {
    qber: f64,
    p_guess: f64,
    holevo: f64,
    game: f64,
    joint_ab: [[f64; 2]; 2],
}

/// A basis's statistics checked: `raw` with the probabilities clamped to [0, 1] (within
/// [`PROBABILITY_SLACK`]), which every entropy and information is computed from, and `shown`
/// with them (and the Holevo quantity) also snapped within [`ROUNDING_SLACK`], as reported.
/// Entropies must not see the snap: h(10⁻¹²) ≈ 4·10⁻¹¹ bits is far above the slack.
#[derive(Clone, Copy, Debug)]
struct Checked {
    shown: BasisStats,
    raw: BasisStats,
}

impl BasisStats {
    /// Clamps the probabilities, and snaps them and the Holevo quantity for the report (see
    /// [`Checked`]); `basis` names them in errors.
    fn checked(mut self, basis: &str) -> Result<Checked> {
        self.qber = clamp_named(|| format!("qber_{basis}"), self.qber)?;
        self.p_guess = clamp_named(|| format!("p_guess_{basis}"), self.p_guess)?;
        for row in &mut self.joint_ab {
            for p in row {
                *p = clamp_named(|| format!("P(Alice, Bob) in basis {basis}"), *p)?;
            }
        }
        let raw = self;
        let mut shown = self;
        shown.qber = snap(shown.qber, 0.0, 1.0);
        shown.p_guess = snap(shown.p_guess, 0.0, 1.0);
        shown.joint_ab = shown.joint_ab.map(|row| row.map(|p| snap(p, 0.0, 1.0)));
        shown.holevo = snap(shown.holevo, 0.0, 1.0);
        Ok(Checked { shown, raw })
    }
}

/// [`clamp_probability`] without the snap, for the entropies and informations computed from
/// `p`: clamped to [0, 1] within [`PROBABILITY_SLACK`] (an error naming it, the name made
/// only then, beyond the slack or for NaN).
pub fn clamp_named(name: impl FnOnce() -> String, p: f64) -> Result<f64> {
    if (0.0..=1.0).contains(&p) {
        Ok(p)
    } else {
        clamp_probability(&name(), p).map(|_| p.clamp(0.0, 1.0))
    }
}

/// The basis's statistics and Eve's two conditional states.
fn basis_stats(attack: &Attack, basis: Basis, s_avg: f64) -> (BasisStats, [CMat; 2]) {
    basis_stats_from(basis, [conditional(attack, &basis.ket(0)), conditional(attack, &basis.ket(1))], s_avg)
}

fn basis_stats_from(basis: Basis, cond: [Conditional; 2], s_avg: f64) -> (BasisStats, [CMat; 2]) {
    let kets = [basis.ket(0), basis.ket(1)];
    let mut qber = 0.0;
    let mut joint_ab = [[0.0; 2]; 2];
    for x in 0..2 {
        let ([r00, r11], r01) = cond[x].rho_b;
        for (b, ket) in kets.iter().enumerate() {
            // <k|ρ_B|k> = r00|k0|² + r11|k1|² + 2 Re(conj(k0) r01 k1).
            let (k0, k1) = (ket[0], ket[1]);
            joint_ab[x][b] = 0.5 * (r00 * k0.norm_sqr() + r11 * k1.norm_sqr() + 2.0 * (k0.conj() * r01 * k1).re);
        }
        qber += joint_ab[x][1 - x];
    }
    let diff = &cond[0].rho_e - &cond[1].rho_e;
    let p_guess = 0.5 + 0.25 * trace_norm(&diff);
    let holevo = s_avg - 0.5 * (cond[0].s_e + cond[1].s_e);
    let s0 = &cond[0].sigma_right;
    let s1 = &cond[1].sigma_right;
    let game = 0.25 * (s0.trace().re + s1.trace().re + trace_norm(&(s0 - s1)));
    let [c0, c1] = cond;
    (BasisStats { qber, p_guess, holevo, game, joint_ab }, [c0.rho_e, c1.rho_e])
}

/// Evaluates `attack` exactly. Returns a [`ErrorKind::BoundViolation`] error when a proven
/// inequality fails by more than [`BOUND_SLACK`].
pub fn evaluate(attack: &Attack, opts: &EvalOptions) -> Result<Evaluation> {
    let eval = evaluate_unchecked(attack, opts)?;
    check_bounds(&attack.label, &eval)?;
    Ok(eval)
}

/// Evaluates `attack` without checking the proven inequalities, for searches that must
/// see and report a violation rather than stop at it (attack hunting). Use [`evaluate`]
/// everywhere else.
pub fn evaluate_unchecked(attack: &Attack, opts: &EvalOptions) -> Result<Evaluation> {
    let d = attack.eve_dim;
    // Eve's state averaged over Alice's bit is the same in every basis (the average input
    // is 1/2 in each), so its entropy is computed once, from the Z-basis conditionals.
    let z_cond = [conditional(attack, &Basis::Z.ket(0)), conditional(attack, &Basis::Z.ket(1))];
    let rho_e_avg = (&z_cond[0].rho_e + &z_cond[1].rho_e) * c(0.5, 0.0);
    let s_avg = von_neumann_entropy(&rho_e_avg);
    let (z, z_eve) = basis_stats_from(Basis::Z, z_cond, s_avg);
    let z = z.checked("z")?;
    let (x, x_eve) = basis_stats(attack, Basis::X, s_avg);
    let x = x.checked("x")?;
    let y = basis_stats(attack, Basis::Y, s_avg).0.checked("y")?;
    let accessible = accessible_pair((&[0.5, 0.5], &z_eve), (&[0.5, 0.5], &x_eve), opts.accessible.as_ref())?;
    assemble(&attack.label, d, [z, x, y], accessible, opts)
}

/// The evaluation of attack `label` (Eve's register of dimension `eve_dim`) from the
/// checked statistics of the bases Z, X, Y and the accessible-information summary of
/// [`accessible_pair`]: every derived quantity, then the NaN check.
#[allow(clippy::type_complexity)]
fn assemble(
    label: &str,
    eve_dim: usize,
    [cz, cx, cy]: [Checked; 3],
    accessible: (Option<f64>, Option<f64>, Option<bool>, Option<f64>),
    opts: &EvalOptions,
) -> Result<Evaluation> {
    let (z, x, y) = (cz.shown, cx.shown, cy.shown);
    // H(X|E) enters the rates and the margin from the unsnapped Holevo quantity; the report
    // shows it snapped, as every bounded quantity.
    let h_x_given_e = 1.0 - cz.raw.holevo;
    let hz = binary_entropy(cz.raw.qber);
    let hx = binary_entropy(cx.raw.qber);
    let weights = six_state_weights(cx.raw.qber, cy.raw.qber, cz.raw.qber);
    let (bound_rate, margin) = match opts.protocol {
        Protocol::Bb84 => (1.0 - hx - hz, h_x_given_e - (1.0 - hx)),
        Protocol::SixState => {
            let h = six_state_entropy(&weights, BOUND_SLACK)?;
            (1.0 - h, h_x_given_e - (1.0 - h + hz))
        }
    };
    let (accessible_z, accessible_x, accessible_converged, accessible_gap) = accessible;
    let eval = Evaluation {
        qber_z: z.qber,
        qber_x: x.qber,
        qber_y: y.qber,
        p_guess_z: z.p_guess,
        p_guess_x: x.p_guess,
        p_guess_y: y.p_guess,
        holevo_z: z.holevo,
        holevo_x: x.holevo,
        holevo_y: y.holevo,
        h_x_given_e: snap(h_x_given_e, 0.0, 1.0),
        accessible_z,
        accessible_x,
        accessible_converged,
        accessible_gap,
        i_ab: snap(mutual_information(&cz.raw.joint_ab), 0.0, 1.0),
        game_win: 0.5 * (z.game + x.game),
        bound_rate,
        attack_rate: h_x_given_e - hz,
        individual_rate: accessible_z.map(|a| 1.0 - hz - a),
        margin: snap(margin, 0.0, f64::INFINITY),
        h_min_x_given_e: -cz.raw.p_guess.log2(),
        pauli_weights: weights,
        eve_dim,
        protocol: opts.protocol,
    };
    check_no_nan(label, &eval)?;
    Ok(eval)
}

/// A NaN in any reported quantity is an error naming the quantity: it would otherwise print
/// as a silent null and slip past every inequality check.
pub fn check_no_nan(label: &str, e: &Evaluation) -> Result<()> {
    for q in QUANTITIES {
        if (q.value)(e).is_some_and(f64::is_nan) {
            return Err(Error::new(ErrorKind::NotANumber, format!("attack `{label}`: {} is NaN", q.key)));
        }
    }
    Ok(())
}

/// Checks the proven inequalities every physical attack satisfies.
pub fn check_bounds(label: &str, e: &Evaluation) -> Result<()> {
    let violation = |what: String| Err(Error::new(ErrorKind::BoundViolation, format!("attack `{label}`: {what}")));
    if e.margin < -BOUND_SLACK {
        return violation(format!(
            "margin {:.3e} < 0: Eve's uncertainty H(X|E) = {} is below what the {} bound guarantees (entropic uncertainty relation, Berta et al. 2010)",
            e.margin, e.h_x_given_e, e.protocol
        ));
    }
    if e.game_win > game_bound() + BOUND_SLACK {
        return violation(format!(
            "guessing-game value {} exceeds 1/2 + 1/(2√2) = {} (Tomamichel, Fehr, Kaniewski, Wehner 2013)",
            e.game_win,
            game_bound()
        ));
    }
    for (name, acc, chi) in [("z", e.accessible_z, e.holevo_z), ("x", e.accessible_x, e.holevo_x)] {
        if let Some(a) = acc {
            if a > chi + BOUND_SLACK {
                return violation(format!("accessible information {a} exceeds the Holevo quantity {chi} in basis {name}"));
            }
        }
    }
    if let Some(gap) = e.accessible_gap {
        if gap < -BOUND_SLACK {
            return violation(format!(
                "the accessible information's proven upper bound lies {:.3e} bits below a value an explicit measurement achieves",
                -gap
            ));
        }
    }
    Ok(())
}

/// Fidelity `<ψ|ρ_clone|ψ>` of Eve's first qubit (her clone, when d_E = 4 holds clone ⊗
/// machine) with the input state `psi`.
#[track_caller]
pub fn eve_clone_fidelity(attack: &Attack, psi: &CVec) -> f64 {
    assert_eq!(attack.eve_dim, 4, "clone fidelity needs Eve's register to be clone ⊗ machine (d_E = 4)");
    let rho_in = psi * psi.adjoint();
    let rho_be = attack.channel.apply(&rho_in);
    let clone = crate::numeric::linalg::partial_trace(&rho_be, &[2, 2, 2], &[1]);
    psi.dotc(&(&clone * psi)).re
}

/// Fidelity `<ψ|ρ_B|ψ>` of Bob's output with the input state `psi`.
pub fn bob_fidelity(attack: &Attack, psi: &CVec) -> f64 {
    let rho_in = psi * psi.adjoint();
    let rho_be = attack.channel.apply(&rho_in);
    let bob = crate::numeric::linalg::partial_trace(&rho_be, &[2, attack.eve_dim], &[0]);
    psi.dotc(&(&bob * psi)).re
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[test]
    fn probabilities_at_the_edge_are_clamped_and_nan_is_an_error() {
        // A full bit flip whose Kraus operator is complete only to 0.9e-9 (inside the
        // default Kraus tolerance): QBER_Z came out as 1.0000000009 and the entropies NaN.
        let scale = (1.0 + 0.9e-9_f64).sqrt();
        let flip = CMat::from_row_slice(2, 2, &[c(0.0, 0.0), c(scale, 0.0), c(scale, 0.0), c(0.0, 0.0)]);
        let attack = Attack::from_kraus("edge", 1, vec![flip], crate::numeric::linalg::Tolerance::default()).unwrap();
        for protocol in [Protocol::Bb84, Protocol::SixState] {
            let e = evaluate(&attack, &EvalOptions::full(protocol)).unwrap();
            assert_eq!(e.qber_z, 1.0);
            assert!(QUANTITIES.iter().all(|q| (q.value)(&e).is_none_or(|v| !v.is_nan())), "{e:?}");
            assert!(e.bound_rate.is_finite() && e.margin >= 0.0);
        }
        assert_eq!(clamp_probability("p", 1.0 + 5e-9).unwrap(), 1.0);
        assert_eq!(clamp_probability("p", -3e-13).unwrap(), 0.0);
        assert_eq!(clamp_probability("p", 0.25).unwrap(), 0.25);
        let far = clamp_probability("qber_z", 1.001).unwrap_err();
        assert_eq!(far.kind(), &ErrorKind::NotANumber);
        assert!(far.message().contains("qber_z"), "{far}");
        assert!(clamp_probability("p", f64::NAN).is_err());
    }

    #[test]
    fn a_nan_in_any_quantity_is_an_error_naming_it() {
        let attack = Attack::builtin("cloner", &BTreeMap::new()).unwrap();
        let mut e = evaluate(&attack, &EvalOptions::fast(Protocol::Bb84)).unwrap();
        assert!(check_no_nan("x", &e).is_ok());
        e.bound_rate = f64::NAN;
        let err = check_no_nan("x", &e).unwrap_err();
        assert_eq!(err.kind(), &ErrorKind::NotANumber);
        assert!(err.message().contains("bound_rate"), "{err}");
    }

    #[test]
    fn rounding_noise_is_reported_as_the_bound() {
        assert_eq!(snap(-6.7e-16, 0.0, 1.0), 0.0);
        assert_eq!(snap(1.0 + 1e-13, 0.0, 1.0), 1.0);
        assert_eq!(snap(-1e-9, 0.0, 1.0), -1e-9, "beyond the slack the value is kept, to be checked");
        for fam in crate::attack::FAMILIES {
            let a = Attack::builtin(fam.name(), &BTreeMap::new()).unwrap();
            let e = evaluate(&a, &EvalOptions::full(Protocol::Bb84)).unwrap();
            for v in [e.accessible_z.unwrap(), e.accessible_x.unwrap(), e.accessible_gap.unwrap(), e.holevo_z, e.margin] {
                assert!(v >= 0.0, "{}: {v}", fam.name());
            }
        }
    }

    #[test]
    fn doctored_evaluations_are_reported_as_bound_violations() {
        let attack = Attack::builtin("cloner", &BTreeMap::new()).unwrap();
        let good = evaluate(&attack, &EvalOptions::fast(Protocol::Bb84)).unwrap();
        assert!(check_bounds("x", &good).is_ok());
        let mut bad = good.clone();
        bad.margin = -1e-6;
        assert!(check_bounds("x", &bad).unwrap_err().is_bound_violation());
        let mut bad = good.clone();
        bad.game_win = game_bound() + 1e-6;
        let err = check_bounds("x", &bad).unwrap_err();
        assert!(err.is_bound_violation() && err.to_string().starts_with("BOUND VIOLATED"), "{err}");
        let mut bad = good.clone();
        bad.accessible_z = Some(bad.holevo_z + 1e-6);
        assert!(check_bounds("x", &bad).unwrap_err().is_bound_violation());
        let mut bad = good;
        bad.accessible_gap = Some(-1e-6);
        assert!(check_bounds("x", &bad).unwrap_err().is_bound_violation());
    }
}
