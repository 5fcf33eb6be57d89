//! `cloner`: Pauli cloning machines (Cerf, PRL 84, 4497, 2000). The isometry is
//! `V|ψ> = Σ_k √w_k σ_k|ψ> ⊗ (σ_k ⊗ 1)|Φ+>`: Bob gets the first output, Eve (d_E = 4) holds
//! her clone and the machine qubit.
//! - universal: weights (I, X, Y, Z) = (1 − 3D/2, D/2, D/2, D/2); at D = 1/6 both clones
//!   have fidelity 5/6 (Bužek–Hillery, PRA 54, 1844, 1996);
//! - phase-covariant: (I, X, Z, Y) = ((1−D)², D(1−D), D(1−D), D²); at D = (1 − 1/√2)/2 both
//!   clones have fidelity ½ + 1/√8 (Bruß, Cinchetti, D'Ariano, Macchiavello, PRA 62,
//!   012302, 2000). It is the optimal collective attack on BB84.

use super::pauli::pauli_isometry;
use super::{paulis, Family, ParamKind, ParamSet, ParamSpec, Value};
use crate::numeric::linalg::{c, CMat, CVec};

/// The `cloner` family.
pub struct Cloner;

const PARAMS: &[ParamSpec] = &[
    ParamSpec {
        name: "kind",
        kind: ParamKind::Choice(&["universal", "phase-covariant"]),
        help: "universal (all qubit states) or phase-covariant (the x-z great circle) (default phase-covariant)",
    },
    ParamSpec {
        name: "qber",
        kind: ParamKind::Number { lo: 0.0, hi: 0.5 },
        help: "Bob's error rate D in Z and X (default: the symmetric point, 1/6 universal, (1-1/√2)/2 phase-covariant)",
    },
];

/// The symmetric point of the universal cloner (Bužek–Hillery): D = 1/6.
pub const UNIVERSAL_SYMMETRIC_QBER: f64 = 1.0 / 6.0;

/// The symmetric point of the phase-covariant cloner: D = (1 − 1/√2)/2.
pub fn phase_covariant_symmetric_qber() -> f64 {
    (1.0 - std::f64::consts::FRAC_1_SQRT_2) / 2.0
}

impl Family for Cloner {
    fn name(&self) -> &'static str {
        "cloner"
    }
    fn summary(&self) -> &'static str {
        "Pauli cloning machine (universal or phase-covariant); Eve keeps clone and machine qubit"
    }
    fn params(&self) -> &'static [ParamSpec] {
        PARAMS
    }
    fn default_value(&self, name: &str, earlier: &ParamSet) -> Value {
        match name {
            "kind" => Value::Text("phase-covariant".into()),
            _ => match earlier.get("kind") {
                Some(Value::Text(k)) if k == "universal" => Value::Num(UNIVERSAL_SYMMETRIC_QBER),
                _ => Value::Num(phase_covariant_symmetric_qber()),
            },
        }
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        (4, vec![cloner_isometry(p.text("kind") == "universal", p.num("qber"))])
    }
}

/// The cloner's Pauli weights in the order (I, X, Y, Z) for error rate `d`: Bob receives
/// the Pauli channel with these weights.
pub fn cloner_weights(universal: bool, d: f64) -> [f64; 4] {
    if universal {
        [1.0 - 1.5 * d, d / 2.0, d / 2.0, d / 2.0]
    } else {
        [(1.0 - d) * (1.0 - d), d * (1.0 - d), d * d, d * (1.0 - d)]
    }
}

/// The cloner isometry for error rate `d`.
pub fn cloner_isometry(universal: bool, d: f64) -> CMat {
    let w = cloner_weights(universal, d);
    let phi_plus =
        CVec::from_vec(vec![c(std::f64::consts::FRAC_1_SQRT_2, 0.0), c(0.0, 0.0), c(0.0, 0.0), c(std::f64::consts::FRAC_1_SQRT_2, 0.0)]);
    let sig = paulis();
    let bell: Vec<CVec> = sig.iter().map(|s| crate::numeric::linalg::kron(s, &CMat::identity(2, 2)) * &phi_plus).collect();
    pauli_isometry(w, &bell)
}
