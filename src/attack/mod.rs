//! The attack catalogue: a trait, one file per built-in family, and user attacks as data.
//!
//! An attack is a channel from Alice's qubit to Bob's qubit B and Eve's register E, given
//! by Kraus operators of shape (2·d_E) × 2 in tensor order B first (output row index
//! `b·d_E + e`). Eve holds E only, never the Kraus index: whatever she must remember (a
//! flag, her basis, her outcome) lives in E. Built-in families implement [`Family`] and
//! are listed in [`FAMILIES`]; attacks on Bob's detection device ([`device`]) map into his
//! extended input space instead of his qubit and are listed in [`device::DEVICE_FAMILIES`]; user-defined attacks arrive as `kraus` files (see [`mod@file`])
//! and become the same [`Attack`] value, so every consumer serves both alike. This module
//! knows nothing about bounds or evaluation.

pub mod cloner;
pub mod device;
pub mod entangling_probe;
pub mod file;
pub mod intercept_resend;
pub mod pulse;
pub mod pauli;

use crate::error::{check_range, Error, Result};
use crate::numeric::linalg::{CMat, Tolerance};
use crate::quantum::channel::KrausChannel;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fmt;

/// A parameter value: a number or a keyword.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Value {
    /// A real number.
    Num(f64),
    /// A keyword such as a basis name.
    Text(String),
}

impl Value {
    /// Parses a command-line value: a number if it parses as one, else a keyword.
    pub fn parse(s: &str) -> Value {
        match s.trim().parse::<f64>() {
            Ok(x) => Value::Num(x),
            Err(_) => Value::Text(s.trim().to_string()),
        }
    }
}

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Value::Num(x) => write!(f, "{x}"),
            Value::Text(s) => f.write_str(s),
        }
    }
}

/// What values a parameter takes.
#[derive(Clone, Copy, Debug)]
pub enum ParamKind {
    /// A real number in the closed interval `[lo, hi]`.
    Number {
        /// Smallest allowed value.
        lo: f64,
        /// Largest allowed value.
        hi: f64,
    },
    /// One of a fixed list of keywords.
    Choice(&'static [&'static str]),
}

/// One parameter of a family.
#[derive(Clone, Copy, Debug)]
pub struct ParamSpec {
    /// Interface name.
    pub name: &'static str,
    /// Allowed values.
    pub kind: ParamKind,
    /// One-line meaning, with the default.
    pub help: &'static str,
}

/// Resolved parameters (every parameter of the family, defaults filled in), in the
/// family's declaration order.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct ParamSet(pub Vec<(String, Value)>);

impl ParamSet {
    /// The number under `name`. Panics if absent or not a number: a family only asks for
    /// what it declared.
    #[track_caller]
    pub fn num(&self, name: &str) -> f64 {
        match self.get(name) {
            Some(Value::Num(x)) => *x,
            other => panic!("parameter `{name}` is not a resolved number: {other:?}"),
        }
    }
    /// The keyword under `name` (panics like [`Self::num`]).
    #[track_caller]
    pub fn text(&self, name: &str) -> &str {
        match self.get(name) {
            Some(Value::Text(s)) => s,
            other => panic!("parameter `{name}` is not a resolved keyword: {other:?}"),
        }
    }
    /// The value under `name`.
    pub fn get(&self, name: &str) -> Option<&Value> {
        self.0.iter().find(|(k, _)| k == name).map(|(_, v)| v)
    }
}

/// An attack of either kind the catalogue holds, built and validated: a channel applied to
/// every single photon (the families of [`FAMILIES`] and kraus files), or an attack on the
/// pulses of an optical link ([`pulse::PULSE_FAMILIES`]). Attack files build one with
/// [`file::AttackFile::build`]; the campaign engine matches on it.
#[derive(Clone, Debug)]
pub enum AnyAttack {
    /// A single-photon attack.
    Qubit(Attack),
    /// An attack on the pulses of an optical link.
    Pulse(pulse::PulseAttack),
    /// An attack on Bob's detection device (single photons into his extended input space).
    Device(device::DeviceAttack),
}

/// A built-in attack family.
pub trait Family: Sync {
    /// Interface name (`intercept-resend`, `cloner`, …).
    fn name(&self) -> &'static str;
    /// One-line description.
    fn summary(&self) -> &'static str;
    /// Declared parameters, in output order.
    fn params(&self) -> &'static [ParamSpec];
    /// Default of parameter `name`, given the parameters resolved before it.
    fn default_value(&self, name: &str, earlier: &ParamSet) -> Value;
    /// Cross-parameter checks (ranges of single parameters are already checked).
    fn check(&self, _params: &ParamSet) -> Result<()> {
        Ok(())
    }
    /// Eve's register dimension and the Kraus operators, complete by construction.
    fn kraus(&self, params: &ParamSet) -> (usize, Vec<CMat>);
}

/// The built-in families, in catalogue order.
pub static FAMILIES: &[&dyn Family] =
    &[&intercept_resend::InterceptResend, &cloner::Cloner, &entangling_probe::EntanglingProbe, &pauli::Pauli];

/// Looks up a built-in family by name.
pub fn family(name: &str) -> Result<&'static dyn Family> {
    FAMILIES.iter().copied().find(|f| f.name() == name).ok_or_else(|| {
        let names: Vec<&str> = FAMILIES.iter().map(|f| f.name()).collect();
        let hint = if name == "kraus" {
            "; a kraus attack is read from a file (--attack-file)"
        } else if device::device_family(name).is_some() {
            "; this attacks Bob's detection device: use it in a campaign, whose setup describes the detector"
        } else if pulse::PULSE_FAMILIES.iter().any(|(n, _)| *n == name) {
            "; this is a link-level attack: use it in a campaign, whose setup describes the link (source, channel, detector)"
        } else {
            ""
        };
        Error::input_key("family", format!("unknown attack family `{name}`; built-in families are {}{hint}", names.join(", ")))
    })
}

/// Resolves user-given parameters against a family: unknown keys, wrong types and values
/// out of range are errors naming the key; missing parameters take their defaults.
pub fn resolve(fam: &dyn Family, given: &BTreeMap<String, Value>) -> Result<ParamSet> {
    for key in given.keys() {
        if !fam.params().iter().any(|p| p.name == key) {
            let names: Vec<&str> = fam.params().iter().map(|p| p.name).collect();
            return Err(Error::input_key(
                key.clone(),
                format!("`{}` has no parameter `{key}`; its parameters are {}", fam.name(), names.join(", ")),
            ));
        }
    }
    let mut set = ParamSet::default();
    for spec in fam.params() {
        let value = match given.get(spec.name) {
            Some(v) => v.clone(),
            None => fam.default_value(spec.name, &set),
        };
        let value = check_param(spec, value)?;
        set.0.push((spec.name.to_string(), value));
    }
    fam.check(&set)?;
    Ok(set)
}

fn check_param(spec: &ParamSpec, value: Value) -> Result<Value> {
    match (spec.kind, value) {
        (ParamKind::Number { lo, hi }, Value::Num(x)) => Ok(Value::Num(check_range(spec.name, x, lo, hi)?)),
        (ParamKind::Number { lo, hi }, Value::Text(s)) => {
            Err(Error::input_key(spec.name, format!("`{s}` is not a number; expected a number in [{lo}, {hi}]")))
        }
        (ParamKind::Choice(options), Value::Text(s)) if options.contains(&s.as_str()) => Ok(Value::Text(s)),
        (ParamKind::Choice(options), v) => {
            Err(Error::input_key(spec.name, format!("`{v}` is not allowed; expected one of {}", options.join(", "))))
        }
    }
}

/// An attack ready to evaluate: its label, family, resolved parameters, Eve's register
/// dimension and its validated channel from C² to C² ⊗ C^d_E (B first).
#[derive(Clone, Debug)]
pub struct Attack {
    /// Display label (family name, or the `name` of a kraus file).
    pub label: String,
    /// Family name (`kraus` for user attacks).
    pub family: String,
    /// Resolved parameters (empty for kraus attacks).
    pub params: ParamSet,
    /// Dimension of Eve's register.
    pub eve_dim: usize,
    /// The channel.
    pub channel: KrausChannel,
}

impl Attack {
    /// A built-in attack from its family name and user-given parameters.
    pub fn builtin(family_name: &str, given: &BTreeMap<String, Value>) -> Result<Attack> {
        let fam = family(family_name)?;
        let params = resolve(fam, given)?;
        let (eve_dim, ops) = fam.kraus(&params);
        let channel = KrausChannel::new(ops, Tolerance::default())?;
        Ok(Attack { label: fam.name().to_string(), family: fam.name().to_string(), params, eve_dim, channel })
    }

    /// A user attack from Kraus operators of shape (2·eve_dim) × 2, completeness checked to
    /// `tol`.
    pub fn from_kraus(name: &str, eve_dim: usize, ops: Vec<CMat>, tol: Tolerance) -> Result<Attack> {
        if eve_dim == 0 {
            return Err(Error::input_key("eve_dim", "must be at least 1"));
        }
        for (k, op) in ops.iter().enumerate() {
            if op.shape() != (2 * eve_dim, 2) {
                return Err(Error::input_key(
                    format!("operators[{k}]"),
                    format!("has shape {}×{}, expected {}×2 (2·eve_dim rows, 2 columns)", op.nrows(), op.ncols(), 2 * eve_dim),
                ));
            }
        }
        let channel = KrausChannel::new(ops, tol)?;
        Ok(Attack { label: name.to_string(), family: "kraus".into(), params: ParamSet::default(), eve_dim, channel })
    }
}

/// The Pauli matrices (I, X, Y, Z).
pub fn paulis() -> [CMat; 4] {
    use crate::numeric::linalg::c;
    let z0 = c(0.0, 0.0);
    let one = c(1.0, 0.0);
    [
        CMat::from_row_slice(2, 2, &[one, z0, z0, one]),
        CMat::from_row_slice(2, 2, &[z0, one, one, z0]),
        CMat::from_row_slice(2, 2, &[z0, c(0.0, -1.0), c(0.0, 1.0), z0]),
        CMat::from_row_slice(2, 2, &[one, z0, z0, -one]),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_family_builds_with_defaults_and_complete_kraus_sets() {
        for fam in FAMILIES {
            let a = Attack::builtin(fam.name(), &BTreeMap::new()).unwrap();
            assert!(a.channel.completeness_defect() < 1e-12, "{}", fam.name());
            assert_eq!(a.channel.d_out(), 2 * a.eve_dim);
            assert_eq!(a.channel.d_in(), 2);
        }
    }

    #[test]
    fn unknown_keys_and_out_of_range_values_are_rejected_by_name() {
        let mut given = BTreeMap::new();
        given.insert("fraction".to_string(), Value::Num(1.5));
        let e = Attack::builtin("intercept-resend", &given).unwrap_err();
        assert!(e.to_string().contains("fraction") && e.to_string().contains("[0, 1]"), "{e}");
        let mut given = BTreeMap::new();
        given.insert("colour".to_string(), Value::Text("red".into()));
        let e = Attack::builtin("cloner", &given).unwrap_err();
        assert!(e.to_string().contains("colour"), "{e}");
        let e = Attack::builtin("nonesuch", &BTreeMap::new()).unwrap_err();
        assert!(e.to_string().contains("intercept-resend"), "{e}");
    }
}
