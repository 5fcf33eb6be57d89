//! `pauli`: Bob receives the Pauli channel `ρ ↦ Σ p_k σ_k ρ σ_k`; Eve keeps its purification
//! (Stinespring isometry `|ψ> ↦ Σ √p_k σ_k|ψ> ⊗ |k>`, d_E = 4). Also provides the Pauli
//! isometry with an arbitrary orthonormal Eve basis, shared with the cloner family.

use super::{paulis, Family, ParamKind, ParamSet, ParamSpec, Value};
use crate::error::{Error, Result};
use crate::numeric::linalg::{c, kron, CMat, CVec};

/// The `pauli` family.
pub struct Pauli;

const PARAMS: &[ParamSpec] = &[
    ParamSpec { name: "px", kind: ParamKind::Number { lo: 0.0, hi: 1.0 }, help: "probability of a bit flip σx (default 0)" },
    ParamSpec { name: "py", kind: ParamKind::Number { lo: 0.0, hi: 1.0 }, help: "probability of σy (default 0)" },
    ParamSpec { name: "pz", kind: ParamKind::Number { lo: 0.0, hi: 1.0 }, help: "probability of a phase flip σz (default 0)" },
];

impl Family for Pauli {
    fn name(&self) -> &'static str {
        "pauli"
    }
    fn summary(&self) -> &'static str {
        "Pauli channel to Bob; Eve keeps the purification"
    }
    fn params(&self) -> &'static [ParamSpec] {
        PARAMS
    }
    fn default_value(&self, _name: &str, _earlier: &ParamSet) -> Value {
        Value::Num(0.0)
    }
    fn check(&self, p: &ParamSet) -> Result<()> {
        // Decimal weights that sum to exactly 1 on paper (0.1 + 0.2 + 0.7) can exceed it by
        // a few ulps in binary; more than that is a user error.
        const WEIGHT_SUM_SLACK: f64 = 1e-12;
        let sum = p.num("px") + p.num("py") + p.num("pz");
        if sum > 1.0 + WEIGHT_SUM_SLACK {
            return Err(Error::input_key("px", format!("px + py + pz = {sum} exceeds 1")));
        }
        Ok(())
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let weights = pauli_weights(p);
        let basis: Vec<CVec> = (0..4).map(|k| CVec::from_fn(4, |i, _| c(if i == k { 1.0 } else { 0.0 }, 0.0))).collect();
        (4, vec![pauli_isometry(weights, &basis)])
    }
}

/// The channel's weights (I, X, Y, Z) from resolved parameters `px`, `py`, `pz`; the weight
/// of I is `1 − px − py − pz`, read as 0 when the sum exceeds 1 within the family's slack.
pub fn pauli_weights(p: &ParamSet) -> [f64; 4] {
    let (px, py, pz) = (p.num("px"), p.num("py"), p.num("pz"));
    [(1.0 - px - py - pz).max(0.0), px, py, pz]
}

/// `V = Σ_k √w_k σ_k ⊗ |e_k>`: a (2·4) × 2 isometry when the weights `(I, X, Y, Z)` sum to
/// one and the `e_k` are orthonormal in C⁴.
pub fn pauli_isometry(weights: [f64; 4], eve: &[CVec]) -> CMat {
    let sig = paulis();
    let mut v = CMat::zeros(8, 2);
    for k in 0..4 {
        if weights[k] > 0.0 {
            let e = CMat::from_column_slice(4, 1, eve[k].as_slice());
            v += kron(&sig[k], &e) * c(weights[k].sqrt(), 0.0);
        }
    }
    v
}
