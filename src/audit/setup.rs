//! The system under test: protocol, basis choice, block size, test sample, abort
//! threshold, error correction, security parameters and the key-length rule, read from a
//! TOML setup file and validated key by key.
//!
//! Keys (all documented with units and ranges in README.md):
//! `protocol` (bb84 | six-state), `signals` (integer ≥ 100: signals sent, each detected in
//! the single-photon model), `basis_z_probability` (0, 1), `test_fraction` [0, 1) or
//! `test_count` ≥ 0 (sifted Z bits disclosed to estimate the bit error rate; at most one of
//! the two, default `test_fraction = 0.1`), `abort_qber` [0, 0.5], `ec_efficiency` [1, 3],
//! `epsilon_sec` and `epsilon_cor` (0, 0.1], `key_rule` (finite-uncertainty | asymptotic |
//! individual | game-min-entropy | naive-single-photon | gllp-no-decoy | decoy-vacuum-weak),
//! optional `name`, and the link tables `[source]`, `[channel]`, `[detector]` of
//! [`crate::protocol::optical`].

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
            let n = number(v, "signals").and_then(|n| {
                if n.fract() != 0.0 || !(100.0..=1e15).contains(&n) {
                    return Err(Error::input_key("signals", format!("{n} is not an integer in [100, 1e15]")));
                }
                Ok(n as u64)
            });
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
                let c = number(v, "test_count").and_then(|c| {
                    if c.fract() != 0.0 || !(0.0..=1e15).contains(&c) {
                        return Err(Error::input_key("test_count", format!("{c} is not an integer in [0, 1e15]")));
                    }
                    Ok(c as u64)
                });
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
}
