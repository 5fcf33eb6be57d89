//! Attacks on Bob's detection device: channels from Alice's qubit into Bob's extended input
//! space of [`crate::protocol::detector`] (arrival-time modes, vacuum, bright triggers) and
//! Eve's register. They exploit the setup's `[detector]` flaws and are evaluated by
//! [`crate::exact::device`] against the device's POVM, never by a formula.
//!
//! Kraus operators have shape (`BOB_DIM`·d_E) × 2, B first (row `b·d_E + e`), like every
//! other attack but with Bob's extended space in place of his qubit.
//!
//! - `time-shift` (Qi, Fung, Lo, Ma, QIC 7, 73, 2007): Eve leaves the photon untouched but,
//!   on a `fraction` of the signals, shifts its arrival to the early or the late instant at
//!   random and remembers which. No errors; she learns from the mismatch which detector was
//!   the likelier to click.
//! - `faked-state` (Makarov, Anisimov, Skaar, PRA 74, 022313, 2006): on a `fraction` of the
//!   signals Eve measures in Z or X at random, finds bit b in basis β and resends the
//!   opposite bit in the opposite basis, timed so that the detector of the opposite bit is
//!   the suppressed one; she remembers (β, b).
//! - `detector-blinding` (Lydersen et al., Nat. Photonics 4, 686, 2010): on a `fraction` of
//!   the detection periods Eve blinds Bob's detectors, measures in Z or X (`bases = "zx"`) or
//!   in Z, X or Y (`"zxy"`, against the six-state protocol) at random and
//!   sends the bright trigger of her result, which clicks Bob's detector of her bit when he
//!   measures in her basis and nothing otherwise; she remembers (β, b).
//!
//! Eve's register: index 0 = signal passed at the nominal time; `time-shift`: 1 = early,
//! 2 = late; the others: `1 + 2β + b` = measured in basis β (0 Z, 1 X, 2 Y) with result b.

use super::{resolve, Family, ParamKind, ParamSet, ParamSpec, Value};
use crate::error::{Error, Result};
use crate::numeric::linalg::{c, CMat, Tolerance};
use crate::protocol::detector::{photon_index, trigger_index, Timing, BOB_DIM};
use crate::protocol::Basis;
use crate::quantum::channel::KrausChannel;
use std::collections::BTreeMap;

const FRACTION: &[ParamSpec] = &[ParamSpec {
    name: "fraction",
    kind: ParamKind::Number { lo: 0.0, hi: 1.0 },
    help: "fraction of the signals (detection periods) Eve attacks (default 1)",
}];

/// `time-shift`.
pub struct TimeShift;
/// `faked-state`.
pub struct FakedState;
/// `detector-blinding`.
pub struct DetectorBlinding;

/// The device-attack families, in catalogue order.
pub static DEVICE_FAMILIES: &[&dyn Family] = &[&TimeShift, &FakedState, &DetectorBlinding];

/// The family of that name, if it is a device attack.
pub fn device_family(name: &str) -> Option<&'static dyn Family> {
    DEVICE_FAMILIES.iter().copied().find(|f| f.name() == name)
}

/// Column `|k><q|` scaled by `w`, as an operator from the qubit into Bob's space ⊗ E, with
/// Eve's record `e` of dimension `d_e`: entries are (row `k·d_e + e`, column `q`).
fn add_entry(op: &mut CMat, d_e: usize, k: usize, e: usize, q: usize, w: crate::numeric::linalg::C64) {
    op[(k * d_e + e, q)] += w;
}

/// The operator `√w · |out>_B |e>_E <in|` with `out` a qubit state placed in Bob's photon
/// mode `t` (or, for a trigger, the single index `trigger`) and `inn` a qubit state.
fn measure_and_send(d_e: usize, e: usize, w: f64, inn: &crate::numeric::linalg::CVec, out: Out) -> CMat {
    let mut op = CMat::zeros(BOB_DIM * d_e, 2);
    let s = c(w.sqrt(), 0.0);
    for q in 0..2 {
        let bra = inn[q].conj();
        match &out {
            Out::Photon(t, ket) => {
                for (i, amp) in ket.iter().enumerate() {
                    add_entry(&mut op, d_e, photon_index(*t, i), e, q, s * amp * bra);
                }
            }
            Out::Trigger(k) => add_entry(&mut op, d_e, *k, e, q, s * bra),
        }
    }
    op
}

enum Out {
    Photon(Timing, crate::numeric::linalg::CVec),
    Trigger(usize),
}

/// `√(1 − f)` · (the photon passes at the nominal time, Eve's record 0).
fn pass(d_e: usize, f: f64) -> CMat {
    let mut op = CMat::zeros(BOB_DIM * d_e, 2);
    for q in 0..2 {
        add_entry(&mut op, d_e, photon_index(Timing::Nominal, q), 0, q, c((1.0 - f).sqrt(), 0.0));
    }
    op
}

const EVE_BASES: [Basis; 2] = [Basis::Z, Basis::X];

impl Family for TimeShift {
    fn name(&self) -> &'static str {
        "time-shift"
    }
    fn summary(&self) -> &'static str {
        "shift the arrival time of a fraction of the photons to where one detector is less efficient (needs [detector] mismatch)"
    }
    fn params(&self) -> &'static [ParamSpec] {
        FRACTION
    }
    fn default_value(&self, _name: &str, _earlier: &ParamSet) -> Value {
        Value::Num(1.0)
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let f = p.num("fraction");
        let d_e = 3;
        // One isometry: Σ_t √w_t |t>_B-mode ⊗ |t>_E ⊗ 1_qubit.
        let mut op = pass(d_e, f);
        for (e, t) in [(1, Timing::Early), (2, Timing::Late)] {
            for q in 0..2 {
                add_entry(&mut op, d_e, photon_index(t, q), e, q, c((0.5 * f).sqrt(), 0.0));
            }
        }
        (d_e, vec![op])
    }
}

impl Family for FakedState {
    fn name(&self) -> &'static str {
        "faked-state"
    }
    fn summary(&self) -> &'static str {
        "measure, then resend the opposite bit in the opposite basis timed to suppress its detector (needs [detector] mismatch)"
    }
    fn params(&self) -> &'static [ParamSpec] {
        FRACTION
    }
    fn default_value(&self, _name: &str, _earlier: &ParamSet) -> Value {
        Value::Num(1.0)
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let f = p.num("fraction");
        let d_e = 5;
        let mut ops = vec![pass(d_e, f)];
        for (bi, beta) in EVE_BASES.iter().enumerate() {
            let other = EVE_BASES[1 - bi];
            for b in 0..2 {
                let out = Out::Photon(Timing::suppressing(1 - b), other.ket(1 - b));
                ops.push(measure_and_send(d_e, 1 + 2 * bi + b, 0.5 * f, &beta.ket(b), out));
            }
        }
        (d_e, ops)
    }
}

const BLINDING_PARAMS: &[ParamSpec] = &[
    ParamSpec {
        name: "fraction",
        kind: ParamKind::Number { lo: 0.0, hi: 1.0 },
        help: "fraction of the detection periods Eve blinds (default 1)",
    },
    ParamSpec {
        name: "bases",
        kind: ParamKind::Choice(&["zx", "zxy"]),
        help: "Eve's measurement bases, each equally likely: zx (BB84's) or zxy (the six-state protocol's) (default zx)",
    },
];

impl Family for DetectorBlinding {
    fn name(&self) -> &'static str {
        "detector-blinding"
    }
    fn summary(&self) -> &'static str {
        "blind the detectors on a fraction of the periods and click them with bright triggers (needs [detector] blinding_catch < 1)"
    }
    fn params(&self) -> &'static [ParamSpec] {
        BLINDING_PARAMS
    }
    fn default_value(&self, name: &str, _earlier: &ParamSet) -> Value {
        match name {
            "fraction" => Value::Num(1.0),
            _ => Value::Text("zx".into()),
        }
    }
    fn kraus(&self, p: &ParamSet) -> (usize, Vec<CMat>) {
        let f = p.num("fraction");
        let bases: &[Basis] = if p.text("bases") == "zxy" { &Basis::ALL } else { &EVE_BASES };
        let d_e = 1 + 2 * bases.len();
        let w = f / bases.len() as f64;
        let mut ops = vec![pass(d_e, f)];
        for (bi, beta) in bases.iter().enumerate() {
            for b in 0..2 {
                ops.push(measure_and_send(d_e, 1 + 2 * bi + b, w, &beta.ket(b), Out::Trigger(trigger_index(*beta, b))));
            }
        }
        (d_e, ops)
    }
}

/// A device attack ready to evaluate: label, family, resolved parameters, Eve's register
/// dimension and the validated channel from C² to C^BOB_DIM ⊗ C^d_E.
#[derive(Clone, Debug)]
pub struct DeviceAttack {
    /// Display label (the family name).
    pub label: String,
    /// Family name.
    pub family: String,
    /// Resolved parameters.
    pub params: ParamSet,
    /// Dimension of Eve's register.
    pub eve_dim: usize,
    /// The channel.
    pub channel: KrausChannel,
}

impl DeviceAttack {
    /// A device attack from its family name and user-given parameters.
    pub fn builtin(family_name: &str, given: &BTreeMap<String, Value>) -> Result<DeviceAttack> {
        let fam =
            device_family(family_name).ok_or_else(|| Error::input_key("family", format!("`{family_name}` is not a device attack")))?;
        let params = resolve(fam, given)?;
        let (eve_dim, ops) = fam.kraus(&params);
        let channel = KrausChannel::new(ops, Tolerance::default())?;
        Ok(DeviceAttack { label: fam.name().to_string(), family: fam.name().to_string(), params, eve_dim, channel })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_device_family_builds_complete_channels_into_bobs_extended_space() {
        for fam in DEVICE_FAMILIES {
            for f in [0.0, 0.3, 1.0] {
                let mut given = BTreeMap::new();
                given.insert("fraction".to_string(), Value::Num(f));
                let a = DeviceAttack::builtin(fam.name(), &given).unwrap();
                assert!(a.channel.completeness_defect() < 1e-12, "{}", fam.name());
                assert_eq!(a.channel.d_out(), BOB_DIM * a.eve_dim);
                assert_eq!(a.channel.d_in(), 2);
            }
        }
        assert!(DeviceAttack::builtin("cloner", &BTreeMap::new()).is_err());
    }
}
