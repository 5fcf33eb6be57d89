//! `intercept-resend`: with probability 1 − `fraction` the qubit passes untouched;
//! otherwise Eve measures it in a basis chosen by `basis` and resends the state she found.
//! E records the flag, the basis used and the outcome: d_E = 1 + 2·(number of bases), with
//! index 0 = "passed" and `1 + 2β + o` = "measured in basis β with outcome o". With
//! `random-zxy` Eve picks each of the six-state protocol's three bases with probability 1/3,
//! which causes QBER 1/3 in every basis (Bruß, PRL 81, 3018, 1998). The Breidbart
//! basis is {cos(π/8)|0> + sin(π/8)|1>, −sin(π/8)|0> + cos(π/8)|1>} (Bennett, Bessette,
//! Brassard, Salvail, Smolin, J. Cryptology 5, 3, 1992).

use super::{Family, ParamKind, ParamSet, ParamSpec, Value};
use crate::numeric::linalg::{c, kron, kron_vec, CMat, CVec};
use crate::protocol::Basis;

/// The `intercept-resend` family.
pub struct InterceptResend;

const PARAMS: &[ParamSpec] = &[
    ParamSpec {
        name: "fraction",
        kind: ParamKind::Number { lo: 0.0, hi: 1.0 },
        help: "probability p that Eve intercepts a signal (default 1)",
    },
    ParamSpec {
        name: "basis",
        kind: ParamKind::Choice(&["z", "x", "random", "random-zxy", "breidbart"]),
        help: "Eve's measurement: z, x, random (z or x with probability 1/2), random-zxy (z, x or y with probability 1/3: \
               the six-state protocol's bases), breidbart (default random)",
    },
];

impl Family for InterceptResend {
    fn name(&self) -> &'static str {
        "intercept-resend"
    }
    fn summary(&self) -> &'static str {
        "measure a fraction of the signals and resend what was found"
    }
    fn params(&self) -> &'static [ParamSpec] {
        PARAMS
    }
    fn default_value(&self, name: &str, _earlier: &ParamSet) -> Value {
        match name {
            "fraction" => Value::Num(1.0),
            _ => Value::Text("random".into()),
        }
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let fraction = p.num("fraction");
        let bases = measurement_bases(p.text("basis"));
        let d_e = 1 + 2 * bases.len();
        let record = |i: usize| CVec::from_fn(d_e, |r, _| c(if r == i { 1.0 } else { 0.0 }, 0.0));
        let mut ops = Vec::new();
        // Pass: √(1−p) · 1_B ⊗ |0>_E.
        let pass = kron(&CMat::identity(2, 2), &CMat::from_column_slice(d_e, 1, record(0).as_slice()));
        ops.push(pass * c((1.0 - fraction).sqrt(), 0.0));
        for (beta, (weight, kets)) in bases.iter().enumerate() {
            for (o, ket) in kets.iter().enumerate() {
                // √(p·w) |φ_o>_B |1+2β+o>_E <φ_o|
                let out = kron_vec(ket, &record(1 + 2 * beta + o));
                ops.push(out * ket.adjoint() * c((fraction * weight).sqrt(), 0.0));
            }
        }
        (d_e, ops)
    }
}

/// Eve's measurements for the `basis` keyword: each basis with the probability she picks
/// it, in the order of her register's records (`1 + 2β + o` for basis β, outcome o).
pub fn measurement_bases(basis: &str) -> Vec<(f64, [CVec; 2])> {
    match basis {
        "z" => vec![(1.0, [Basis::Z.ket(0), Basis::Z.ket(1)])],
        "x" => vec![(1.0, [Basis::X.ket(0), Basis::X.ket(1)])],
        "breidbart" => vec![(1.0, breidbart())],
        "random-zxy" => [Basis::Z, Basis::X, Basis::Y].iter().map(|b| (1.0 / 3.0, [b.ket(0), b.ket(1)])).collect(),
        _ => vec![(0.5, [Basis::Z.ket(0), Basis::Z.ket(1)]), (0.5, [Basis::X.ket(0), Basis::X.ket(1)])],
    }
}

/// The Breidbart basis: polarisation angle π/8, halfway between Z and X on the Bloch circle.
pub fn breidbart() -> [CVec; 2] {
    let a = std::f64::consts::PI / 8.0;
    [CVec::from_vec(vec![c(a.cos(), 0.0), c(a.sin(), 0.0)]), CVec::from_vec(vec![c(-a.sin(), 0.0), c(a.cos(), 0.0)])]
}
