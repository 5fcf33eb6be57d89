//! The system under test: protocol, basis choice, block size, test sample, abort
//! threshold, error correction, security parameters and the key-length rule, read from a
//! TOML setup file and validated key by key.
//!
//! Keys (all documented with units and ranges in README.md):
//! `protocol` (bb84 | six-state), `signals` (integer in [100, 1e15]: signals sent, each
//! detected in the single-photon model), `basis_z_probability` (0, 1), `test_fraction` [0, 1)
//! or `test_count` integer ≥ 0 (sifted Z bits disclosed to estimate the bit error rate; at most one of
//! the two, default `test_fraction = 0.1`), `abort_qber` [0, 0.5], `ec_efficiency` [1, 3],
//! `epsilon_sec` and `epsilon_cor` (0, 0.1], `key_rule` (finite-uncertainty | asymptotic |
//! individual | game-min-entropy | naive-single-photon | gllp-no-decoy | decoy-vacuum-weak),
//! optional `name`, and the link tables `[source]`, `[channel]`, `[detector]` of
//! [`crate::protocol::optical`]. An integer key takes a float with a whole value
//! (`signals = 1e6`) as that integer and refuses a fraction ([`crate::input::integer`]).

use crate::audit::rules::{KeyRule, Rule, RuleParams};
use crate::error::{check_range, Error, Result};
use crate::input::{first, number, parse_toml, unknown_keys, Problems};
use crate::protocol::optical::Link;
use crate::protocol::Protocol;
use serde::Serialize;
use std::path::Path;

/// How the test sample of sifted Z bits is sized.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TestSample {
    /// A fraction of the sifted Z bits (rounded down).
    Fraction(f64),
    /// A fixed number of sifted Z bits (all of them if fewer are available).
    Count(u64),
}

impl TestSample {
    /// Number of sifted Z bits disclosed when `sifted_z` are available.
    pub fn size(&self, sifted_z: u64) -> u64 {
        match *self {
            TestSample::Fraction(f) => ((sifted_z as f64) * f).floor() as u64,
            TestSample::Count(c) => c.min(sifted_z),
        }
    }
}

/// A validated setup.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Setup {
    /// Name for reports.
    pub name: String,
    /// Protocol.
    pub protocol: Protocol,
    /// Number of signals sent.
    pub signals: u64,
    /// Probability that Alice (and, independently, Bob) chooses the key basis Z; the other
    /// bases share the rest equally.
    pub basis_z_probability: f64,
    /// Test sample of sifted Z bits.
    pub test_sample: TestSample,
    /// Abort when an observed error rate (Z sample or X) exceeds this.
    pub abort_qber: f64,
    /// Error-correction efficiency f: leak = f·n·h(Q) + log₂(2/ε_cor).
    pub ec_efficiency: f64,
    /// Secrecy parameter ε_sec.
    pub epsilon_sec: f64,
    /// Correctness parameter ε_cor.
    pub epsilon_cor: f64,
    /// The key-length rule the system uses: a built-in rule, or a rule file
    /// (`key_rule = "file:<path>"`, relative to the setup file).
    pub key_rule: Rule,
    /// The optical link (default: ideal single photons, no loss, perfect detectors).
    pub link: Link,
}

impl Default for Setup {
    fn default() -> Self {
        Setup {
            name: "setup".into(),
            protocol: Protocol::Bb84,
            signals: 1_000_000,
            basis_z_probability: 0.5,
            test_sample: TestSample::Fraction(0.1),
            abort_qber: 0.11,
            ec_efficiency: 1.16,
            epsilon_sec: 1e-10,
            epsilon_cor: 1e-12,
            key_rule: Rule::Builtin(KeyRule::FiniteUncertainty),
            link: Link::default(),
        }
    }
}

const KEYS: &[&str] = &[
    "name",
    "protocol",
    "signals",
    "basis_z_probability",
    "test_fraction",
    "test_count",
    "abort_qber",
    "ec_efficiency",
    "epsilon_sec",
    "epsilon_cor",
    "key_rule",
    "source",
    "channel",
    "detector",
];

impl Setup {
    /// Reads and validates a setup file (the first problem; [`Setup::load_all`] gives all).
    pub fn load(path: &Path) -> Result<Setup> {
        Setup::load_all(path).map_err(first)
    }

    /// Reads and validates a setup file, reporting every problem found, each with the file
    /// and, where the key is written in it, its line and column.
    pub fn load_all(path: &Path) -> std::result::Result<Setup, Vec<Error>> {
        let text = crate::input::read_text(path).map_err(|e| vec![e])?;
        let table: toml::Table = parse_toml(&text).map_err(|e| vec![e.with_file(path)])?;
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        Setup::parse_all_in(&table, Some(&base))
            .map_err(|errs| errs.into_iter().map(|e| crate::input::locate(e, &text).with_file(path)).collect())
    }

    /// Validates a parsed TOML table; every key is optional and defaults as in
    /// [`Setup::default`]. The first problem; [`Setup::parse_all`] gives all.
    pub fn from_table(t: &toml::Table) -> Result<Setup> {
        Setup::parse_all(t).map_err(first)
    }

    /// Validates a parsed TOML table and reports every problem found: each key is checked
    /// on its own, so a file with four mistakes gets four errors in one pass.
    pub fn parse_all(t: &toml::Table) -> std::result::Result<Setup, Vec<Error>> {
        Setup::parse_all_in(t, None)
    }

    /// As [`Setup::parse_all`], with a rule file named by `key_rule = "file:<path>"` read
    /// relative to `base` (`None`: rule files are not allowed).
    pub fn parse_all_in(t: &toml::Table, base: Option<&Path>) -> std::result::Result<Setup, Vec<Error>> {
        let mut p = Problems::new();
        p.nested("", unknown_keys(t, KEYS, "a setup"));
        let mut s = Setup::default();
        if let Some(v) = t.get("name") {
            if let Some(n) = p.check(crate::input::name(v, "name")) {
                s.name = n;
            }
        }
        if let Some(v) = t.get("protocol") {
            let parsed = v
                .as_str()
                .ok_or_else(|| Error::input_key("protocol", "must be a string: bb84 or six-state"))
                .and_then(|x| x.parse().map_err(|e: String| Error::input_key("protocol", e)));
            if let Some(x) = p.check(parsed) {
                s.protocol = x;
            }
        }
        if let Some(v) = t.get("signals") {
            let n = crate::input::integer(v, "signals", 100, 1_000_000_000_000_000);
            if let Some(n) = p.check(n) {
                s.signals = n;
            }
        }
        if let Some(v) = t.get("basis_z_probability") {
            let x = number(v, "basis_z_probability").and_then(|x| {
                if !(x > 0.0 && x < 1.0) {
                    return Err(Error::input_key("basis_z_probability", format!("{x} is outside the open interval (0, 1)")));
                }
                Ok(x)
            });
            if let Some(x) = p.check(x) {
                s.basis_z_probability = x;
            }
        }
        match (t.get("test_fraction"), t.get("test_count")) {
            (Some(_), Some(_)) => p.push(Error::input_key("test_count", "give test_fraction or test_count, not both")),
            (Some(v), None) => {
                let f = number(v, "test_fraction").and_then(|f| {
                    if !(0.0..1.0).contains(&f) {
                        return Err(Error::input_key("test_fraction", format!("{f} is outside [0, 1)")));
                    }
                    Ok(f)
                });
                if let Some(f) = p.check(f) {
                    s.test_sample = TestSample::Fraction(f);
                }
            }
            (None, Some(v)) => {
                let c = crate::input::integer(v, "test_count", 0, 1_000_000_000_000_000);
                if let Some(c) = p.check(c) {
                    s.test_sample = TestSample::Count(c);
                }
            }
            (None, None) => {}
        }
        if let Some(v) = t.get("abort_qber") {
            if let Some(x) = p.check(number(v, "abort_qber").and_then(|x| check_range("abort_qber", x, 0.0, 0.5))) {
                s.abort_qber = x;
            }
        }
        if let Some(v) = t.get("ec_efficiency") {
            if let Some(x) = p.check(number(v, "ec_efficiency").and_then(|x| check_range("ec_efficiency", x, 1.0, 3.0))) {
                s.ec_efficiency = x;
            }
        }
        for key in ["epsilon_sec", "epsilon_cor"] {
            if let Some(v) = t.get(key) {
                let e = number(v, key).and_then(|e| {
                    if !(e > 0.0 && e <= 0.1) {
                        return Err(Error::input_key(key, format!("{e} is outside (0, 0.1]")));
                    }
                    Ok(e)
                });
                match (key, p.check(e)) {
                    ("epsilon_sec", Some(e)) => s.epsilon_sec = e,
                    (_, Some(e)) => s.epsilon_cor = e,
                    (_, None) => {}
                }
            }
        }
        let mut rule_ok = true;
        if let Some(v) = t.get("key_rule") {
            let r = match v.as_str() {
                None => Err(vec![Error::input("must be a string")]),
                Some(r) => crate::audit::rules::resolve_rule(r, base),
            };
            match r {
                Ok(r) => s.key_rule = r,
                Err(errs) => {
                    p.nested("key_rule", errs);
                    rule_ok = false;
                }
            }
        }
        match Link::parse_all(t.get("source"), t.get("channel"), t.get("detector")) {
            Ok(link) => {
                s.link = link;
                // Whether the rule fits the link is only asked of a rule and a link that
                // are both valid; otherwise the answer would be about defaults.
                if rule_ok {
                    p.check(s.check_rule(&s.key_rule).map_err(|e| e.with_key("key_rule")));
                }
            }
            Err(errs) => p.nested("", errs),
        }
        p.finish(s)
    }

    /// Checks that `rule` can run on this setup's link: decoy rules need the decoys they
    /// read, and a rule file must not read intensities the link does not have.
    pub fn check_rule(&self, rule: &Rule) -> Result<()> {
        match rule {
            Rule::Builtin(r) => self.check_key_rule(*r),
            Rule::Formula(f) => {
                let have = self.link.source.intensities().len();
                if f.intensities_read > have {
                    return Err(Error::input(format!(
                        "rule file `{}` reads variables of intensity {}, but the link has {have} intensit{} ([source])",
                        f.origin,
                        f.intensities_read,
                        if have == 1 { "y" } else { "ies" }
                    )));
                }
                Ok(())
            }
            Rule::Program(_) => Ok(()),
        }
    }

    /// Checks that the built-in `rule` can run on this setup's link.
    pub fn check_key_rule(&self, rule: KeyRule) -> Result<()> {
        let ints = self.link.source.intensities();
        if rule.needs_weak_coherent_source() && ints.len() < rule.intensities_needed() {
            return Err(Error::input(format!(
                "`{rule}` needs a weak-coherent [source] with {} intensities (signal and decoys)",
                rule.intensities_needed()
            )));
        }
        if rule == KeyRule::DecoyFinite {
            let (m1, m2, m3) = (ints[0].0, ints[1].0.max(ints[2].0), ints[1].0.min(ints[2].0));
            if !(m1 > m2 + m3 && m2 > m3) {
                return Err(Error::input("decoy-finite needs intensities μ1 > μ2 + μ3 and μ2 > μ3 ≥ 0 (signal μ1, decoys μ2, μ3)"));
            }
        }
        if rule == KeyRule::DecoyVacuumWeak && (!ints[1..].iter().any(|(m, _)| *m == 0.0) || !ints[1..].iter().any(|(m, _)| *m > 0.0)) {
            return Err(Error::input("decoy-vacuum-weak needs one vacuum decoy (0) and one weak decoy (> 0) in [source].decoys"));
        }
        Ok(())
    }

    /// The values a key-length rule reads.
    pub fn rule_params(&self) -> RuleParams {
        RuleParams {
            abort_qber: self.abort_qber,
            ec_efficiency: self.ec_efficiency,
            epsilon_sec: self.epsilon_sec,
            epsilon_cor: self.epsilon_cor,
            mismatch: self.link.flaws.effective_mismatch(),
            blinding_catch: self.link.flaws.blinding_catch,
        }
    }

    /// The same setup with the numeric key `key` (a dotted name of [`SETUP_KEYS`], e.g.
    /// `signals`, `channel.length_km`, `source.decoys[1]`) set to `value`, validated by the
    /// setup parser exactly as if the value had been written in the file: an out-of-range
    /// value is an error naming the key and the allowed range, and every check across keys
    /// (decoys below the signal intensity, the key rule's needs of the link) runs again.
    ///
    /// Setting `channel.length_km` replaces a fixed `channel.loss_db` (and needs an
    /// attenuation), setting `channel.loss_db` replaces a fibre length; `test_fraction` and
    /// `test_count` replace each other. An integer key (`signals`, `test_count`) takes only
    /// an integral value: callers that step through a range round first.
    pub fn with_value(&self, key: &str, value: f64) -> Result<Setup> {
        let spec = SetupKey::find(key)?;
        let mut t = self.to_table();
        let wrong_source = || Error::input_key(key, "is not a key of this setup: it needs a weak-coherent [source]");
        match spec.name {
            "source.intensity"
            | "source.decoys[0]"
            | "source.decoys[1]"
            | "source.decoy_probabilities[0]"
            | "source.decoy_probabilities[1]" => {
                let Some(src) = t.get_mut("source").and_then(|v| v.as_table_mut()) else { return Err(wrong_source()) };
                if src.get("kind").and_then(|k| k.as_str()) != Some("weak-coherent") {
                    return Err(wrong_source());
                }
                match spec.name.split_once('[') {
                    None => {
                        src.insert("intensity".into(), toml::Value::Float(value));
                    }
                    Some((list, index)) => {
                        let list = list.trim_start_matches("source.");
                        let i: usize = index.trim_end_matches(']').parse().expect("index of a listed key");
                        let slot = src.get_mut(list).and_then(|v| v.as_array_mut()).and_then(|a| a.get_mut(i));
                        match slot {
                            Some(x) => *x = toml::Value::Float(value),
                            None => {
                                return Err(Error::input_key(
                                    key,
                                    format!("is not a key of this setup: its source has fewer than {} decoys", i + 1),
                                ))
                            }
                        }
                    }
                }
            }
            dotted => {
                let (table, leaf) = match dotted.split_once('.') {
                    Some((table, leaf)) => (Some(table), leaf),
                    None => (None, dotted),
                };
                let target = match table {
                    None => &mut t,
                    Some(name) => t
                        .entry(name.to_string())
                        .or_insert_with(|| toml::Value::Table(toml::Table::new()))
                        .as_table_mut()
                        .expect("the setup's own tables"),
                };
                let replaced = match leaf {
                    "length_km" => Some("loss_db"),
                    "loss_db" => Some("length_km"),
                    "test_fraction" => Some("test_count"),
                    "test_count" => Some("test_fraction"),
                    _ => None,
                };
                if let Some(r) = replaced {
                    target.remove(r);
                }
                let v = if spec.integer && value.fract() == 0.0 && value.abs() < 9.0e15 {
                    toml::Value::Integer(value as i64)
                } else {
                    toml::Value::Float(value)
                };
                target.insert(leaf.to_string(), v);
            }
        }
        // The rule is carried over as it is (not re-read by name), then checked against the
        // new link like the parser does.
        t.remove("key_rule");
        let mut s = Setup::parse_all(&t).map_err(first)?;
        s.key_rule = self.key_rule.clone();
        s.check_rule(&s.key_rule).map_err(|e| e.with_key("key_rule"))?;
        Ok(s)
    }

    /// The value of the numeric key `key` (see [`SETUP_KEYS`]) in this setup; `None` when the
    /// setup does not have it (a decoy of a single-photon source, a fibre length of a link
    /// given by its loss, a test count of a setup with a test fraction).
    pub fn value(&self, key: &str) -> Result<Option<f64>> {
        let spec = SetupKey::find(key)?;
        let ints = self.link.source.intensities();
        let decoy = |i: usize| ints.get(i + 1).copied();
        Ok(match spec.name {
            "signals" => Some(self.signals as f64),
            "basis_z_probability" => Some(self.basis_z_probability),
            "test_fraction" => match self.test_sample {
                TestSample::Fraction(f) => Some(f),
                TestSample::Count(_) => None,
            },
            "test_count" => match self.test_sample {
                TestSample::Count(c) => Some(c as f64),
                TestSample::Fraction(_) => None,
            },
            "abort_qber" => Some(self.abort_qber),
            "ec_efficiency" => Some(self.ec_efficiency),
            "epsilon_sec" => Some(self.epsilon_sec),
            "epsilon_cor" => Some(self.epsilon_cor),
            "source.intensity" => ints.first().map(|(m, _)| *m),
            "source.decoys[0]" => decoy(0).map(|(m, _)| m),
            "source.decoys[1]" => decoy(1).map(|(m, _)| m),
            "source.decoy_probabilities[0]" => decoy(0).map(|(_, p)| p),
            "source.decoy_probabilities[1]" => decoy(1).map(|(_, p)| p),
            "channel.length_km" => self.link.length_km,
            "channel.attenuation_db_per_km" => self.link.attenuation_db_per_km,
            "channel.loss_db" => Some(self.link.channel_loss_db),
            "detector.efficiency" => Some(self.link.detector_efficiency),
            "detector.dark_count_probability" => Some(self.link.dark_count_probability),
            "detector.misalignment" => Some(self.link.misalignment),
            "detector.mismatch" => Some(self.link.flaws.mismatch),
            "detector.blinding_catch" => Some(self.link.flaws.blinding_catch),
            other => unreachable!("SETUP_KEYS lists `{other}` without a value"),
        })
    }

    /// The setup written back as the TOML table its parser reads: parsing it gives this
    /// setup again. Every field is named (the destructuring below fails to compile when a
    /// field is added), so a new key cannot be dropped silently.
    pub fn to_table(&self) -> toml::Table {
        use crate::protocol::optical::Source;
        let Setup {
            name,
            protocol,
            signals,
            basis_z_probability,
            test_sample,
            abort_qber,
            ec_efficiency,
            epsilon_sec,
            epsilon_cor,
            key_rule,
            link,
        } = self;
        let mut t = toml::Table::new();
        let float = |x: f64| toml::Value::Float(x);
        t.insert("name".into(), toml::Value::String(name.clone()));
        t.insert("protocol".into(), toml::Value::String(protocol.name().into()));
        t.insert("signals".into(), toml::Value::Integer(*signals as i64));
        t.insert("basis_z_probability".into(), float(*basis_z_probability));
        match *test_sample {
            TestSample::Fraction(f) => t.insert("test_fraction".into(), float(f)),
            TestSample::Count(c) => t.insert("test_count".into(), toml::Value::Integer(c as i64)),
        };
        t.insert("abort_qber".into(), float(*abort_qber));
        t.insert("ec_efficiency".into(), float(*ec_efficiency));
        t.insert("epsilon_sec".into(), float(*epsilon_sec));
        t.insert("epsilon_cor".into(), float(*epsilon_cor));
        t.insert("key_rule".into(), toml::Value::String(key_rule.name().into()));
        let Link {
            source,
            channel_loss_db,
            length_km,
            attenuation_db_per_km,
            detector_efficiency,
            dark_count_probability,
            misalignment,
            flaws,
        } = link;
        let mut src = toml::Table::new();
        match source {
            Source::SinglePhoton => {
                src.insert("kind".into(), toml::Value::String("single-photon".into()));
            }
            Source::WeakCoherent { intensity, probability: _, decoys } => {
                // The signal's probability is implied by the decoys' (the parser computes it).
                src.insert("kind".into(), toml::Value::String("weak-coherent".into()));
                src.insert("intensity".into(), float(*intensity));
                src.insert("decoys".into(), toml::Value::Array(decoys.iter().map(|(m, _)| float(*m)).collect()));
                src.insert("decoy_probabilities".into(), toml::Value::Array(decoys.iter().map(|(_, p)| float(*p)).collect()));
            }
        }
        t.insert("source".into(), toml::Value::Table(src));
        let mut channel = toml::Table::new();
        match length_km {
            // The parser computes the loss from the length and the attenuation.
            Some(km) if attenuation_db_per_km.is_some() => {
                channel.insert("length_km".into(), float(*km));
            }
            _ => {
                channel.insert("loss_db".into(), float(*channel_loss_db));
            }
        }
        if let Some(a) = attenuation_db_per_km {
            channel.insert("attenuation_db_per_km".into(), float(*a));
        }
        t.insert("channel".into(), toml::Value::Table(channel));
        let mut detector = toml::Table::new();
        detector.insert("efficiency".into(), float(*detector_efficiency));
        detector.insert("dark_count_probability".into(), float(*dark_count_probability));
        detector.insert("misalignment".into(), float(*misalignment));
        let crate::protocol::detector::DetectorFlaws { mismatch, random_swap, blinding_catch } = flaws;
        detector.insert("mismatch".into(), float(*mismatch));
        detector.insert("random_swap".into(), toml::Value::Boolean(*random_swap));
        detector.insert("blinding_catch".into(), float(*blinding_catch));
        t.insert("detector".into(), toml::Value::Table(detector));
        t
    }

    /// Probabilities of Alice's (and Bob's) basis choices, in the order of
    /// `protocol.bases()`.
    pub fn basis_probabilities(&self) -> Vec<f64> {
        let rest = 1.0 - self.basis_z_probability;
        match self.protocol {
            Protocol::Bb84 => vec![self.basis_z_probability, rest],
            Protocol::SixState => vec![self.basis_z_probability, rest / 2.0, rest / 2.0],
        }
    }
}

/// A numeric setup key that campaigns may sweep and `tolerance` may search.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SetupKey {
    /// The dotted name, as in setup files (`channel.length_km`, `source.decoys[0]`).
    pub name: &'static str,
    /// Unit, for sentences and axis labels (empty for probabilities, rates and other pure
    /// numbers).
    pub unit: &'static str,
    /// Whether the key takes integers only (swept values are rounded to the nearest integer).
    pub integer: bool,
}

/// Every numeric setup key, in the order of the README's setup tables. Their allowed ranges
/// are the setup parser's ([`Setup::with_value`] re-validates every value).
pub const SETUP_KEYS: &[SetupKey] = &[
    SetupKey { name: "signals", unit: "signals", integer: true },
    SetupKey { name: "basis_z_probability", unit: "", integer: false },
    SetupKey { name: "test_fraction", unit: "", integer: false },
    SetupKey { name: "test_count", unit: "sifted Z bits", integer: true },
    SetupKey { name: "abort_qber", unit: "", integer: false },
    SetupKey { name: "ec_efficiency", unit: "", integer: false },
    SetupKey { name: "epsilon_sec", unit: "", integer: false },
    SetupKey { name: "epsilon_cor", unit: "", integer: false },
    SetupKey { name: "source.intensity", unit: "photons per pulse", integer: false },
    SetupKey { name: "source.decoys[0]", unit: "photons per pulse", integer: false },
    SetupKey { name: "source.decoys[1]", unit: "photons per pulse", integer: false },
    SetupKey { name: "source.decoy_probabilities[0]", unit: "", integer: false },
    SetupKey { name: "source.decoy_probabilities[1]", unit: "", integer: false },
    SetupKey { name: "channel.length_km", unit: "km", integer: false },
    SetupKey { name: "channel.attenuation_db_per_km", unit: "dB/km", integer: false },
    SetupKey { name: "channel.loss_db", unit: "dB", integer: false },
    SetupKey { name: "detector.efficiency", unit: "", integer: false },
    SetupKey { name: "detector.dark_count_probability", unit: "per gate", integer: false },
    SetupKey { name: "detector.misalignment", unit: "", integer: false },
    SetupKey { name: "detector.mismatch", unit: "", integer: false },
    SetupKey { name: "detector.blinding_catch", unit: "", integer: false },
];

impl SetupKey {
    /// The key named `name`; the error lists every numeric key.
    pub fn find(name: &str) -> Result<SetupKey> {
        SETUP_KEYS.iter().copied().find(|k| k.name == name).ok_or_else(|| {
            let names: Vec<&str> = SETUP_KEYS.iter().map(|k| k.name).collect();
            Error::input(format!("`{name}` is not a numeric setup key; the numeric keys are {}", names.join(", ")))
        })
    }

    /// The key as a CSV column: `setup_` and the name with dots and brackets as
    /// underscores (`channel.length_km` → `setup_channel_length_km`, `source.decoys[0]` →
    /// `setup_source_decoys_0`).
    pub fn column(&self) -> String {
        let mut c = String::from("setup_");
        c.extend(self.name.chars().filter(|ch| *ch != ']').map(|ch| if ch == '.' || ch == '[' { '_' } else { ch }));
        c
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(s: &str) -> Result<Setup> {
        Setup::from_table(&s.parse::<toml::Table>().unwrap())
    }

    #[test]
    fn bad_values_name_key_and_range() {
        for (text, key) in [
            ("abort_qber = 0.7", "abort_qber"),
            ("signals = 10", "signals"),
            ("basis_z_probability = 1.0", "basis_z_probability"),
            ("test_fraction = 0.1\ntest_count = 5", "test_count"),
            ("epsilon_sec = 0", "epsilon_sec"),
            ("key_rule = \"magic\"", "key_rule"),
            ("protocol = \"b92\"", "protocol"),
            ("colour = 1", "colour"),
            ("ec_efficiency = 0.9", "ec_efficiency"),
        ] {
            let e = parse(text).unwrap_err();
            assert_eq!(e.key(), Some(key), "{text}: {e}");
        }
    }

    #[test]
    fn good_file_parses() {
        let s = parse("protocol = \"six-state\"\nsignals = 1e6\ntest_count = 1000\nkey_rule = \"asymptotic\"").unwrap();
        assert_eq!(s.signals, 1_000_000);
        assert_eq!(s.test_sample.size(500), 500);
        assert_eq!(s.basis_probabilities().len(), 3);
        assert_eq!(s.key_rule, KeyRule::Asymptotic);
        assert!(parse("key_rule = \"file:x.toml\"").unwrap_err().message().contains("cannot refer to files"));
    }

    const LINK_SETUP: &str = "signals = 1e8\ntest_count = 5000\nabort_qber = 0.06\nkey_rule = \"decoy-finite\"\n\
        [source]\nkind = \"weak-coherent\"\nintensity = 0.5\ndecoys = [0.1, 0.0]\ndecoy_probabilities = [0.1, 0.05]\n\
        [channel]\nlength_km = 25\nattenuation_db_per_km = 0.2\n[detector]\nefficiency = 0.2\ndark_count_probability = 1e-6\n\
        misalignment = 0.01";

    #[test]
    fn the_table_of_a_setup_parses_back_to_it() {
        for text in [
            "",
            LINK_SETUP,
            "protocol = \"six-state\"\n[channel]\nloss_db = 3.5\nattenuation_db_per_km = 0.3",
            "[detector]\nmismatch = 0.25\nrandom_swap = true\nblinding_catch = 3e-5",
        ] {
            let s = parse(text).unwrap();
            assert_eq!(Setup::from_table(&s.to_table()).unwrap(), s, "{text}");
        }
    }

    #[test]
    fn setting_a_key_revalidates_through_the_parser() {
        let s = parse(LINK_SETUP).unwrap();
        let t = s.with_value("channel.length_km", 50.0).unwrap();
        assert_eq!(t.link.channel_loss_db, 50.0 * 0.2);
        assert_eq!(t.value("channel.length_km").unwrap(), Some(50.0));
        let t = s.with_value("channel.loss_db", 7.0).unwrap();
        assert_eq!((t.link.channel_loss_db, t.link.length_km), (7.0, None));
        assert_eq!(s.with_value("signals", 1e10).unwrap().signals, 10_000_000_000);
        let t = s.with_value("source.decoys[0]", 0.2).unwrap();
        assert_eq!(t.link.source.intensities()[1].0, 0.2);
        assert_eq!(t.with_value("test_fraction", 0.2).unwrap().test_sample, TestSample::Fraction(0.2));
        // Out of range, not an integer, against another key, against the rule's needs.
        for (key, value, named) in [
            ("signals", 1e16, "signals"),
            ("signals", 1234.5, "signals"),
            ("abort_qber", 0.6, "abort_qber"),
            ("source.decoys[0]", 0.6, "decoys[0]"),
            ("source.decoys[1]", 0.45, "key_rule"),
            ("detector.efficiency", 0.0, "detector.efficiency"),
        ] {
            let e = s.with_value(key, value).unwrap_err();
            assert!(e.key().is_some_and(|k| k.ends_with(named)), "{key} = {value}: {e}");
        }
        // Keys this setup does not have, and names that are not numeric keys.
        let plain = Setup::default();
        assert!(plain.with_value("source.intensity", 0.5).unwrap_err().message().contains("weak-coherent"));
        assert!(plain.with_value("channel.length_km", 5.0).unwrap_err().message().contains("attenuation"));
        assert!(plain.with_value("key_rule", 1.0).unwrap_err().message().contains("numeric setup key"));
        assert_eq!(plain.value("channel.length_km").unwrap(), None);
        assert_eq!(plain.with_value("detector.misalignment", 0.02).unwrap().link.misalignment, 0.02);
        // The detector flaws: written into [detector] beside the other keys, checked by its parser.
        let flawed = plain.with_value("detector.mismatch", 0.26).unwrap();
        assert_eq!((flawed.link.flaws.mismatch, flawed.value("detector.mismatch").unwrap()), (0.26, Some(0.26)));
        let blind = flawed.with_value("detector.blinding_catch", 1e-5).unwrap();
        assert_eq!((blind.link.flaws.mismatch, blind.link.flaws.blinding_catch), (0.26, 1e-5));
        assert_eq!(plain.value("detector.blinding_catch").unwrap(), Some(1.0));
        for (key, value) in [("detector.mismatch", 0.0), ("detector.mismatch", 1.5), ("detector.blinding_catch", -0.1)] {
            let e = plain.with_value(key, value).unwrap_err();
            assert_eq!(e.key(), Some(key), "{key} = {value}: {e}");
        }
    }

    #[test]
    fn every_key_has_a_tidy_column_and_a_value_query() {
        let s = parse(LINK_SETUP).unwrap();
        for k in SETUP_KEYS {
            let c = k.column();
            assert!(c.chars().all(|ch| ch.is_ascii_lowercase() || ch.is_ascii_digit() || ch == '_'), "{c}");
            s.value(k.name).unwrap();
        }
        assert_eq!(SetupKey::find("source.decoys[0]").unwrap().column(), "setup_source_decoys_0");
    }
}
