//! `entangling-probe`: the two-dimensional probe (no ancilla) that realises the optimal
//! individual attack of Fuchs, Gisin, Griffiths, Niu and Peres (PRA 56, 1163, 1997), in
//! the form of the economical phase-covariant cloner (Niu & Griffiths, PRA 60, 2764, 1999).
//! In the σ_Y eigenbasis |y0>, |y1>: `V|y0> = |y0>_B|y0>_E`,
//! `V|y1> = cos η |y1>_B|y0>_E + sin η |y0>_B|y1>_E`, with `cos η = 1 − 2D`. It gives QBER D
//! in Z and X and Eve's Helstrom success ½ + √(D(1−D)) on the key bit.

use super::{Family, ParamKind, ParamSet, ParamSpec, Value};
use crate::numeric::linalg::{c, kron_vec, CMat, CVec};
use crate::protocol::Basis;

/// The `entangling-probe` family.
pub struct EntanglingProbe;

const PARAMS: &[ParamSpec] = &[ParamSpec {
    name: "qber",
    kind: ParamKind::Number { lo: 0.0, hi: 0.5 },
    help: "the error rate D the probe causes in Z and X (default 0.1)",
}];

impl Family for EntanglingProbe {
    fn name(&self) -> &'static str {
        "entangling-probe"
    }
    fn summary(&self) -> &'static str {
        "optimal individual attack (two-dimensional probe, no ancilla)"
    }
    fn params(&self) -> &'static [ParamSpec] {
        PARAMS
    }
    fn default_value(&self, _name: &str, _earlier: &ParamSet) -> Value {
        Value::Num(0.1)
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let (cos_eta, sin_eta) = probe_angle(p.num("qber"));
        let y0 = Basis::Y.ket(0);
        let y1 = Basis::Y.ket(1);
        let out0: CVec = kron_vec(&y0, &y0);
        let out1: CVec = kron_vec(&y1, &y0) * c(cos_eta, 0.0) + kron_vec(&y0, &y1) * c(sin_eta, 0.0);
        let v = &out0 * y0.adjoint() + &out1 * y1.adjoint();
        (2, vec![v])
    }
}

/// `(cos η, sin η)` of the probe for error rate `d`: `cos η = 1 − 2D`, `sin η = 2√(D(1−D))`.
pub fn probe_angle(d: f64) -> (f64, f64) {
    (1.0 - 2.0 * d, 2.0 * (d * (1.0 - d)).sqrt())
}
