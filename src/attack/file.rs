//! Attack files (TOML): catalogue entries for built-in families and user `kraus` attacks.
//!
//! Catalogue entry:
//! ```toml
//! family = "intercept-resend"
//! description = "one line"
//! [params]
//! fraction = 1.0
//! basis = "random"
//! [sweep]            # optional: the default sweep of one numeric parameter
//! param = "fraction"
//! from = 0.0
//! to = 1.0
//! steps = 11
//! ```
//! Kraus file: `name`, `eve_dim`, `operators` = a list of matrices, each a list of
//! 2·eve_dim rows, each row two entries, each entry `[re, im]` (tensor order B first), and
//! an optional `description`. Parsing collects every problem it can find, each naming the
//! file and the key (e.g. `operators[1][3][0]`), so `validate` reports them all at once.
//! The built-in catalogue is embedded in the binary ([`builtin_catalogue`]).

use super::{AnyAttack, Attack, Value};
use crate::error::{Error, Result};
use crate::input::{check_keys, parse_toml, unknown_keys};
use crate::numeric::linalg::{c, CMat, Tolerance};
use std::collections::BTreeMap;
use std::path::Path;

/// Largest register Eve may have in a kraus file. The accessible-information search runs on
/// Eve's d_E-dimensional states with up to d_E² outcomes; beyond 16 an unstructured attack
/// takes minutes (32 took over 300 s).
pub const MAX_EVE_DIM: usize = 16;

/// A parsed attack file.
#[derive(Clone, Debug)]
pub enum AttackFile {
    /// A catalogue entry for a built-in family.
    Catalogue(CatalogueEntry),
    /// A user-defined attack.
    Kraus(KrausAttack),
}

/// A catalogue entry: a built-in family, its parameters and an optional sweep.
#[derive(Clone, Debug)]
pub struct CatalogueEntry {
    /// Family name.
    pub family: String,
    /// One-line description.
    pub description: String,
    /// Parameters set by the entry (others take the family defaults).
    pub params: BTreeMap<String, Value>,
    /// The entry's default sweep.
    pub sweep: Option<Sweep>,
}

/// A sweep of one numeric parameter over `steps` evenly spaced values from `from` to `to`.
#[derive(Clone, Debug, PartialEq)]
pub struct Sweep {
    /// Parameter name.
    pub param: String,
    /// First value.
    pub from: f64,
    /// Last value.
    pub to: f64,
    /// Number of points (≥ 1; with 1 only `from` is used).
    pub steps: usize,
}

impl Sweep {
    /// The swept values.
    pub fn values(&self) -> Vec<f64> {
        if self.steps <= 1 {
            return vec![self.from];
        }
        (0..self.steps).map(|i| self.from + (self.to - self.from) * i as f64 / (self.steps - 1) as f64).collect()
    }
}

/// A user-defined attack read from a file.
#[derive(Clone, Debug)]
pub struct KrausAttack {
    /// Name used as the attack's label.
    pub name: String,
    /// Optional description.
    pub description: String,
    /// Dimension of Eve's register.
    pub eve_dim: usize,
    /// The Kraus operators, (2·eve_dim) × 2 each.
    pub operators: Vec<CMat>,
}

impl AttackFile {
    /// Builds the attack, applying `overrides` to a catalogue entry's parameters (a kraus
    /// file has no parameters, so overrides are an error).
    pub fn attack(&self, overrides: &BTreeMap<String, Value>) -> Result<Attack> {
        match self {
            AttackFile::Catalogue(e) if self.is_device_attack() => Err(Error::input_key(
                "family",
                format!(
                    "`{}` attacks Bob's detection device: use it in a campaign, whose setup describes the detector ([detector] mismatch, blinding_catch), or in `eval` with --mismatch, --blinding-catch",
                    e.family
                ),
            )),
            AttackFile::Catalogue(e) if self.is_pulse_attack() => Err(Error::input_key(
                "family",
                format!(
                    "`{}` is a link-level attack: use it in a campaign, whose setup describes the link (source, channel, detector)",
                    e.family
                ),
            )),
            AttackFile::Catalogue(e) => {
                let mut params = e.params.clone();
                params.extend(overrides.iter().map(|(k, v)| (k.clone(), v.clone())));
                Attack::builtin(&e.family, &params).map_err(|err| {
                    if err.key().is_some() && err.key() != Some("family") {
                        err.with_key("params")
                    } else {
                        err
                    }
                })
            }
            AttackFile::Kraus(k) => {
                if let Some(key) = overrides.keys().next() {
                    return Err(Error::input_key(key.clone(), "a kraus attack has no parameters to set"));
                }
                Attack::from_kraus(&k.name, k.eve_dim, k.operators.clone(), Tolerance::default())
            }
        }
    }
    /// Builds the attack, of whichever kind the file describes, with `overrides` applied.
    pub fn build(&self, overrides: &BTreeMap<String, Value>) -> Result<AnyAttack> {
        if self.is_pulse_attack() {
            self.pulse_attack(overrides).map(AnyAttack::Pulse)
        } else if let (AttackFile::Catalogue(e), true) = (self, self.is_device_attack()) {
            let mut params = e.params.clone();
            params.extend(overrides.iter().map(|(k, v)| (k.clone(), v.clone())));
            super::device::DeviceAttack::builtin(&e.family, &params).map(AnyAttack::Device).map_err(|err| {
                if err.key().is_some() && err.key() != Some("family") {
                    err.with_key("params")
                } else {
                    err
                }
            })
        } else {
            self.attack(overrides).map(AnyAttack::Qubit)
        }
    }

    /// True for a catalogue entry of a link-level family (photon-number splitting, beam
    /// splitting), which acts on weak-coherent pulses rather than qubits.
    pub fn is_pulse_attack(&self) -> bool {
        matches!(self, AttackFile::Catalogue(e) if super::pulse::PULSE_FAMILIES.iter().any(|(n, _)| *n == e.family))
    }

    /// True for a catalogue entry of a device family (time shift, faked states, blinding),
    /// which acts on Bob's detection device ([`super::device`]).
    pub fn is_device_attack(&self) -> bool {
        matches!(self, AttackFile::Catalogue(e) if super::device::device_family(&e.family).is_some())
    }

    /// The link-level attack of a link catalogue entry, with `overrides` applied.
    pub fn pulse_attack(&self, overrides: &BTreeMap<String, Value>) -> Result<super::pulse::PulseAttack> {
        let AttackFile::Catalogue(e) = self else {
            return Err(Error::input_key("family", "a kraus attack is not a link attack"));
        };
        let mut params = e.params.clone();
        params.extend(overrides.iter().map(|(k, v)| (k.clone(), v.clone())));
        for key in params.keys() {
            if key != "fraction" {
                return Err(Error::input_key(
                    format!("params.{key}"),
                    format!("`{}` has no parameter `{key}`; its parameter is fraction", e.family),
                ));
            }
        }
        let fraction = match params.get("fraction") {
            None => 1.0,
            Some(Value::Num(x)) => *x,
            Some(Value::Text(t)) => return Err(Error::input_key("params.fraction", format!("`{t}` is not a number in [0, 1]"))),
        };
        super::pulse::PulseAttack::new(&e.family, fraction).map_err(|err| err.with_key("params"))
    }

    /// The entry's sweep, if any.
    pub fn sweep(&self) -> Option<&Sweep> {
        match self {
            AttackFile::Catalogue(e) => e.sweep.as_ref(),
            AttackFile::Kraus(_) => None,
        }
    }
    /// Label of the file's attack (family or kraus name).
    pub fn label(&self) -> &str {
        match self {
            AttackFile::Catalogue(e) => &e.family,
            AttackFile::Kraus(k) => &k.name,
        }
    }
}

/// Reads and parses an attack file; the first problem is returned with the file named.
pub fn load(path: &Path) -> Result<AttackFile> {
    let text = crate::input::read_text(path)?;
    parse(&text).map_err(|mut errs| crate::input::locate(errs.remove(0), &text).with_file(path))
}

/// Checks a file completely: every problem found (parse, parameters, shapes, entries,
/// completeness), each naming the file.
pub fn validate(path: &Path) -> Vec<Error> {
    let text = match crate::input::read_text(path) {
        Ok(t) => t,
        Err(e) => return vec![e],
    };
    match parse(&text) {
        Err(errs) => errs.into_iter().map(|e| crate::input::locate(e, &text).with_file(path)).collect(),
        Ok(file) => {
            let mut errs = Vec::new();
            let build = |o: &BTreeMap<String, Value>| file.build(o).map(|_| ());
            if let Err(e) = build(&BTreeMap::new()) {
                errs.push(crate::input::locate(e, &text).with_file(path));
            }
            if let (AttackFile::Catalogue(entry), Some(sweep)) = (&file, file.sweep()) {
                for v in sweep.values() {
                    let mut o = BTreeMap::new();
                    o.insert(sweep.param.clone(), Value::Num(v));
                    if let Err(e) = build(&o) {
                        errs.push(e.with_key("sweep").with_file(path));
                        break;
                    }
                }
                let _ = entry;
            }
            errs
        }
    }
}

/// Parses the text of an attack file. Returns every problem found.
pub fn parse(text: &str) -> std::result::Result<AttackFile, Vec<Error>> {
    let table = parse_toml(text).map_err(|e| vec![e])?;
    if table.contains_key("operators") {
        parse_kraus(&table)
    } else {
        parse_catalogue(&table).map_err(|e| vec![e])
    }
}

fn parse_catalogue(t: &toml::Table) -> Result<AttackFile> {
    check_keys(t, &["family", "description", "params", "sweep"], "a catalogue entry (a kraus file has operators)")?;
    let family = match t.get("family") {
        Some(toml::Value::String(s)) => s.clone(),
        Some(_) => return Err(Error::input_key("family", "must be a string")),
        None => {
            return Err(Error::input_key("family", "missing; an attack file needs `family` (catalogue entry) or `operators` (kraus file)"))
        }
    };
    let is_link = super::pulse::PULSE_FAMILIES.iter().any(|(n, _)| *n == family);
    let qubit_or_device = |name: &str| super::device::device_family(name).map_or_else(|| super::family(name), Ok);
    if !is_link {
        qubit_or_device(&family)?;
    }
    let description = match t.get("description") {
        Some(toml::Value::String(s)) => s.clone(),
        None => String::new(),
        Some(_) => return Err(Error::input_key("description", "must be a string")),
    };
    let params = match t.get("params") {
        None => BTreeMap::new(),
        Some(v) => params_table(v)?,
    };
    let sweep = match t.get("sweep") {
        None => None,
        Some(toml::Value::Table(s)) => Some(parse_sweep(s).map_err(|e| e.with_key("sweep"))?),
        Some(_) => return Err(Error::input_key("sweep", "must be a table")),
    };
    if let (Some(s), true) = (&sweep, is_link) {
        if s.param != "fraction" {
            return Err(Error::input_key("sweep.param", format!("`{family}` has no parameter `{}`; its parameter is fraction", s.param)));
        }
    }
    if let (Some(s), false) = (&sweep, is_link) {
        let fam = qubit_or_device(&family)?;
        match fam.params().iter().find(|p| p.name == s.param) {
            Some(p) if matches!(p.kind, super::ParamKind::Number { .. }) => {}
            Some(_) => return Err(Error::input_key("sweep.param", format!("`{}` is not a numeric parameter", s.param))),
            None => return Err(Error::input_key("sweep.param", format!("`{family}` has no parameter `{}`", s.param))),
        }
    }
    Ok(AttackFile::Catalogue(CatalogueEntry { family, description, params, sweep }))
}

/// Parses a `params` table: each value a number or a keyword; errors name `params.<key>`.
pub fn params_table(v: &toml::Value) -> Result<BTreeMap<String, Value>> {
    let table = v.as_table().ok_or_else(|| Error::input_key("params", "must be a table"))?;
    let mut params = BTreeMap::new();
    for (k, v) in table {
        let value = match v {
            toml::Value::Float(x) => Value::Num(*x),
            toml::Value::Integer(i) => Value::Num(*i as f64),
            toml::Value::String(s) => Value::Text(s.clone()),
            _ => return Err(Error::input_key(format!("params.{k}"), "must be a number or a string")),
        };
        params.insert(k.clone(), value);
    }
    Ok(params)
}

fn parse_sweep(s: &toml::Table) -> Result<Sweep> {
    check_keys(s, &["param", "from", "to", "steps"], "a sweep")?;
    let param = match s.get("param") {
        Some(toml::Value::String(p)) => p.clone(),
        _ => return Err(Error::input_key("param", "missing or not a string: the name of the swept parameter")),
    };
    let num = |k: &str| -> Result<f64> {
        match s.get(k) {
            Some(toml::Value::Float(x)) if x.is_finite() => Ok(*x),
            Some(toml::Value::Integer(i)) => Ok(*i as f64),
            _ => Err(Error::input_key(k, "missing or not a finite number")),
        }
    };
    // Whole-valued floats (`steps = 1e3`) are taken as the integer they name (`input::integer`).
    let steps = match s.get("steps") {
        Some(v) => crate::input::integer(v, "steps", 1, 100_000)? as usize,
        None => return Err(Error::input_key("steps", "missing: give an integer in [1, 100000]")),
    };
    Ok(Sweep { param, from: num("from")?, to: num("to")?, steps })
}

fn parse_kraus(t: &toml::Table) -> std::result::Result<AttackFile, Vec<Error>> {
    let mut errs = Vec::new();
    errs.extend(unknown_keys(t, &["name", "description", "eve_dim", "operators", "family"], "a kraus file"));
    if let Some(f) = t.get("family") {
        if f.as_str() != Some("kraus") {
            errs.push(Error::input_key("family", "a file with operators must have family = \"kraus\" or no family"));
        }
    }
    let name = match t.get("name").map(|v| crate::input::name(v, "name")) {
        Some(Ok(s)) => s,
        Some(Err(e)) => {
            errs.push(e);
            String::new()
        }
        None => {
            errs.push(Error::input_key("name", "missing: a kraus file names its attack"));
            String::new()
        }
    };
    let description = t.get("description").and_then(|v| v.as_str()).unwrap_or("").to_string();
    // The cap keeps an exact evaluation within about a minute.
    let eve_dim = match t.get("eve_dim").map(|v| crate::input::integer(v, "eve_dim", 1, MAX_EVE_DIM as u64)) {
        Some(Ok(n)) => Some(n as usize),
        Some(Err(e)) => {
            errs.push(e);
            None
        }
        None => {
            errs.push(Error::input_key("eve_dim", format!("missing: give an integer in [1, {MAX_EVE_DIM}]")));
            None
        }
    };
    let mut operators = Vec::new();
    match t.get("operators") {
        Some(toml::Value::Array(ops)) if !ops.is_empty() => {
            for (k, op) in ops.iter().enumerate() {
                if let Some(m) = parse_operator(op, k, eve_dim, &mut errs) {
                    operators.push(m);
                }
            }
        }
        _ => errs.push(Error::input_key("operators", "must be a non-empty list of matrices")),
    }
    if errs.is_empty() {
        let d = eve_dim.unwrap_or(1);
        if let Err(e) = Attack::from_kraus(&name, d, operators.clone(), Tolerance::default()) {
            errs.push(e);
        }
    }
    if errs.is_empty() {
        Ok(AttackFile::Kraus(KrausAttack { name, description, eve_dim: eve_dim.unwrap_or(1), operators }))
    } else {
        Err(errs)
    }
}

fn parse_operator(op: &toml::Value, k: usize, eve_dim: Option<usize>, errs: &mut Vec<Error>) -> Option<CMat> {
    let key = format!("operators[{k}]");
    let rows = match op.as_array() {
        Some(r) => r,
        None => {
            errs.push(Error::input_key(key, "must be a matrix: a list of rows"));
            return None;
        }
    };
    if let Some(d) = eve_dim {
        if rows.len() != 2 * d {
            errs.push(Error::input_key(key.clone(), format!("has {} rows, expected 2·eve_dim = {}", rows.len(), 2 * d)));
            return None;
        }
    }
    let mut m = CMat::zeros(rows.len(), 2);
    let mut ok = true;
    for (i, row) in rows.iter().enumerate() {
        let entries = match row.as_array() {
            Some(e) if e.len() == 2 => e,
            _ => {
                errs.push(Error::input_key(format!("{key}[{i}]"), "must be a row of exactly two entries"));
                ok = false;
                continue;
            }
        };
        for (j, entry) in entries.iter().enumerate() {
            let parts = entry.as_array().filter(|p| p.len() == 2).and_then(|p| Some((num_of(&p[0])?, num_of(&p[1])?)));
            match parts {
                Some((re, im)) if re.is_finite() && im.is_finite() => m[(i, j)] = c(re, im),
                Some(_) => {
                    errs.push(Error::input_key(format!("{key}[{i}][{j}]"), "entry is not finite"));
                    ok = false;
                }
                None => {
                    errs.push(Error::input_key(format!("{key}[{i}][{j}]"), "entry must be [re, im] with two numbers"));
                    ok = false;
                }
            }
        }
    }
    ok.then_some(m)
}

fn num_of(v: &toml::Value) -> Option<f64> {
    match v {
        toml::Value::Float(x) => Some(*x),
        toml::Value::Integer(i) => Some(*i as f64),
        _ => None,
    }
}

/// The text of the built-in catalogue entry `name` (without `.toml`), or an error naming
/// `key` that lists the entries.
pub fn builtin_entry_text(name: &str, key: &str) -> Result<&'static str> {
    let file_name = format!("{name}.toml");
    builtin_catalogue().iter().find(|(n, _)| *n == file_name).map(|(_, t)| *t).ok_or_else(|| {
        Error::input_key(key, format!("no built-in entry `{name}`; built-in entries are {}", builtin_entry_names().join(", ")))
    })
}

/// Names of the built-in catalogue entries (`intercept-resend`, `universal-cloner`, …).
pub fn builtin_entry_names() -> Vec<&'static str> {
    builtin_catalogue().iter().map(|(n, _)| n.trim_end_matches(".toml")).collect()
}

/// The built-in catalogue, embedded at build time: `(file name, contents)`.
pub fn builtin_catalogue() -> &'static [(&'static str, &'static str)] {
    &[
        ("intercept-resend.toml", include_str!("../../attacks/intercept-resend.toml")),
        ("breidbart.toml", include_str!("../../attacks/breidbart.toml")),
        ("universal-cloner.toml", include_str!("../../attacks/universal-cloner.toml")),
        ("phase-covariant-cloner.toml", include_str!("../../attacks/phase-covariant-cloner.toml")),
        ("entangling-probe.toml", include_str!("../../attacks/entangling-probe.toml")),
        ("pauli.toml", include_str!("../../attacks/pauli.toml")),
        ("photon-number-splitting.toml", include_str!("../../attacks/photon-number-splitting.toml")),
        ("beam-splitting.toml", include_str!("../../attacks/beam-splitting.toml")),
        ("time-shift.toml", include_str!("../../attacks/time-shift.toml")),
        ("faked-state.toml", include_str!("../../attacks/faked-state.toml")),
        ("detector-blinding.toml", include_str!("../../attacks/detector-blinding.toml")),
    ]
}

/// Writes a user attack as a kraus TOML file's text.
pub fn kraus_toml(name: &str, description: &str, eve_dim: usize, ops: &[CMat]) -> String {
    let mut s = format!("name = {name:?}\ndescription = {description:?}\neve_dim = {eve_dim}\noperators = [\n");
    for op in ops {
        s.push_str("  [\n");
        for i in 0..op.nrows() {
            s.push_str(&format!("    [[{:e}, {:e}], [{:e}, {:e}]],\n", op[(i, 0)].re, op[(i, 0)].im, op[(i, 1)].re, op[(i, 1)].im));
        }
        s.push_str("  ],\n");
    }
    s.push_str("]\n");
    s
}
