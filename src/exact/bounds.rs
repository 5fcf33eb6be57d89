//! Asymptotic security bounds, the guessing-game constant and the zero-rate thresholds.
//!
//! Each function's doc names the result it implements. Thresholds are found by bisection
//! to 1e-12 on the formulas here, never typed in; the `thresholds` command also evaluates
//! attacks from the catalogue. Rates are per sifted bit and are not clipped at zero.

use crate::error::{Error, ErrorKind, Result};
use crate::numeric::optimize::bisect;
use crate::quantum::measures::{binary_entropy, shannon_entropy};

/// Bracket width at which the zero-rate threshold bisections stop, as a QBER (a fraction).
/// Ten times finer than the 1e-12 to which the thresholds are stated, and far above the
/// rounding noise of the rate formulas near their roots (rates of order one with slopes of
/// order one in the QBER, so about 1e-16 in QBER), so a bisection ends on its width rather
/// than on noise. Shared with the other threshold searches of [`crate::exact::thresholds`].
pub const THRESHOLD_BISECTION_TOL: f64 = 1e-13;

/// Lower end of the threshold brackets `[THRESHOLD_BRACKET_LOW, ½]`: just inside the open
/// interval (0, ½) on which a zero-rate QBER is sought. Every rate here is about 1 > 0 at
/// that end and negative at ½, which is the sign change bisection needs; 1e-15 is a hundred
/// times below [`THRESHOLD_BISECTION_TOL`], so it does not limit the accuracy.
const THRESHOLD_BRACKET_LOW: f64 = 1e-15;

/// Slack on the non-negativity of the six-state Pauli weights that [`six_state_rate`]
/// computes from its QBERs: a weight down to −1e-9 is taken as rounding and counts as zero;
/// below that the QBERs are not those of a qubit channel. The same slack, and the same
/// value, as the evaluator's proven-inequality slack
/// ([`crate::exact::eval::BOUND_SLACK`]), which this module cannot import since the
/// evaluator imports it.
const PAULI_WEIGHT_SLACK: f64 = 1e-9;

/// The monogamy-of-entanglement guessing-game value per round, ½ + 1/(2√2) = cos²(π/8)
/// (Tomamichel, Fehr, Kaniewski, Wehner, NJP 15, 103002, 2013).
pub fn game_bound() -> f64 {
    0.5 + 0.5 * std::f64::consts::FRAC_1_SQRT_2
}

/// BB84 key rate per sifted bit with phase error `e_x`, bit error `e_z` and
/// error-correction efficiency `f`: `1 − h(e_x) − f·h(e_z)` (Shor & Preskill, PRL 85, 441,
/// 2000; entropic form via Berta et al., Nature Phys. 6, 659, 2010).
pub fn bb84_rate(e_x: f64, e_z: f64, f: f64) -> f64 {
    1.0 - binary_entropy(e_x) - f * binary_entropy(e_z)
}

/// Six-state Pauli weights `(p_I, p_X, p_Y, p_Z)` from the three QBERs:
/// p_I = 1 − (Q_X+Q_Y+Q_Z)/2, p_X = (Q_Y+Q_Z−Q_X)/2, p_Y = (Q_X+Q_Z−Q_Y)/2, p_Z = (Q_X+Q_Y−Q_Z)/2.
pub fn six_state_weights(q_x: f64, q_y: f64, q_z: f64) -> [f64; 4] {
    [1.0 - (q_x + q_y + q_z) / 2.0, (q_y + q_z - q_x) / 2.0, (q_x + q_z - q_y) / 2.0, (q_x + q_y - q_z) / 2.0]
}

/// Entropy `H(p)` in bits of six-state weights. Weights below −`tol` are an error (they
/// cannot come from a physical channel); weights in (−tol, 0) are rounding and count as 0.
pub fn six_state_entropy(weights: &[f64; 4], tol: f64) -> Result<f64> {
    if let Some(w) = weights.iter().find(|w| **w < -tol) {
        return Err(Error::new(
            ErrorKind::BoundViolation,
            format!("six-state Pauli weight {w} is negative: the QBERs are not those of a qubit channel"),
        ));
    }
    Ok(shannon_entropy(weights))
}

/// Six-state key rate per sifted bit (Lo, QIC 1, 81, 2001; Renner, Gisin, Kraus 2005):
/// `1 − H(p) + h(Q_Z) − f·h(Q_Z)`. With f = 1 this is `1 − H(p)`.
pub fn six_state_rate(q_x: f64, q_y: f64, q_z: f64, f: f64) -> Result<f64> {
    let h = six_state_entropy(&six_state_weights(q_x, q_y, q_z), PAULI_WEIGHT_SLACK)?;
    Ok(1.0 - h + binary_entropy(q_z) - f * binary_entropy(q_z))
}

/// Eve's Shannon information under the optimal individual attack at symmetric disturbance
/// D ≤ ½: `1 − h(½ + √(D(1−D)))` (Fuchs, Gisin, Griffiths, Niu, Peres, PRA 56, 1163, 1997).
pub fn fggnp_information(d: f64) -> f64 {
    1.0 - binary_entropy(0.5 + (d * (1.0 - d)).sqrt())
}

/// BB84 zero-rate QBER for symmetric errors: root of `1 − (1+f)·h(e)` on (0, ½).
pub fn bb84_threshold(f: f64) -> Result<f64> {
    bisect(|e| bb84_rate(e, e, f), THRESHOLD_BRACKET_LOW, 0.5, THRESHOLD_BISECTION_TOL)
}

/// Six-state zero-rate QBER for the symmetric (depolarising) attack, Q_X = Q_Y = Q_Z = Q.
pub fn six_state_threshold(f: f64) -> Result<f64> {
    bisect(|q| six_state_rate(q, q, q, f).unwrap_or(f64::NAN), THRESHOLD_BRACKET_LOW, 0.5, THRESHOLD_BISECTION_TOL)
}

/// The individual-attack limit: the QBER where Bob's key information after error
/// correction, `1 − f·h(D)`, equals Eve's under the optimal individual attack
/// (Csiszár & Körner, IEEE TIT 24, 339, 1978, with Fuchs et al. 1997).
pub fn individual_threshold(f: f64) -> Result<f64> {
    bisect(|d| 1.0 - f * binary_entropy(d) - fggnp_information(d), THRESHOLD_BRACKET_LOW, 0.5, THRESHOLD_BISECTION_TOL)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn six_state_weights_invert_pauli_qbers() {
        // Pauli channel (p_I, p_X, p_Y, p_Z): Q_Z = p_X + p_Y, Q_X = p_Z + p_Y, Q_Y = p_X + p_Z.
        let p = [0.7, 0.1, 0.05, 0.15];
        let w = six_state_weights(p[3] + p[2], p[1] + p[3], p[1] + p[2]);
        for (a, b) in w.iter().zip(p.iter()) {
            assert_abs_diff_eq!(a, b, epsilon = 1e-15);
        }
    }
}
