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

use crate::audit::rules::{KeyRule, RuleParams};
use crate::error::{check_range, Error, Result};
use crate::input::{check_keys, number, parse_toml};
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
    /// The key-length rule the system uses.
    pub key_rule: KeyRule,
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
            key_rule: KeyRule::FiniteUncertainty,
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
    /// Reads and validates a setup file.
    pub fn load(path: &Path) -> Result<Setup> {
        let text = crate::input::read_text(path)?;
        let table: toml::Table = parse_toml(&text).map_err(|e| e.with_file(path))?;
        Setup::from_table(&table).map_err(|e| crate::input::locate(e, &text).with_file(path))
    }

    /// Validates a parsed TOML table; every key is optional and defaults as in
    /// [`Setup::default`].
    pub fn from_table(t: &toml::Table) -> Result<Setup> {
        check_keys(t, KEYS, "a setup")?;
        let mut s = Setup::default();
        if let Some(v) = t.get("name") {
            s.name = crate::input::name(v, "name")?;
        }
        if let Some(v) = t.get("protocol") {
            let p = v.as_str().ok_or_else(|| Error::input_key("protocol", "must be a string: bb84 or six-state"))?;
            s.protocol = p.parse().map_err(|e: String| Error::input_key("protocol", e))?;
        }
        if let Some(v) = t.get("signals") {
            let n = number(v, "signals")?;
            if n.fract() != 0.0 || !(100.0..=1e15).contains(&n) {
                return Err(Error::input_key("signals", format!("{n} is not an integer in [100, 1e15]")));
            }
            s.signals = n as u64;
        }
        if let Some(v) = t.get("basis_z_probability") {
            let p = number(v, "basis_z_probability")?;
            if !(p > 0.0 && p < 1.0) {
                return Err(Error::input_key("basis_z_probability", format!("{p} is outside the open interval (0, 1)")));
            }
            s.basis_z_probability = p;
        }
        match (t.get("test_fraction"), t.get("test_count")) {
            (Some(_), Some(_)) => return Err(Error::input_key("test_count", "give test_fraction or test_count, not both")),
            (Some(v), None) => {
                let f = number(v, "test_fraction")?;
                if !(0.0..1.0).contains(&f) {
                    return Err(Error::input_key("test_fraction", format!("{f} is outside [0, 1)")));
                }
                s.test_sample = TestSample::Fraction(f);
            }
            (None, Some(v)) => {
                let c = number(v, "test_count")?;
                if c.fract() != 0.0 || !(0.0..=1e15).contains(&c) {
                    return Err(Error::input_key("test_count", format!("{c} is not an integer in [0, 1e15]")));
                }
                s.test_sample = TestSample::Count(c as u64);
            }
            (None, None) => {}
        }
        if let Some(v) = t.get("abort_qber") {
            s.abort_qber = check_range("abort_qber", number(v, "abort_qber")?, 0.0, 0.5)?;
        }
        if let Some(v) = t.get("ec_efficiency") {
            s.ec_efficiency = check_range("ec_efficiency", number(v, "ec_efficiency")?, 1.0, 3.0)?;
        }
        for key in ["epsilon_sec", "epsilon_cor"] {
            if let Some(v) = t.get(key) {
                let e = number(v, key)?;
                if !(e > 0.0 && e <= 0.1) {
                    return Err(Error::input_key(key, format!("{e} is outside (0, 0.1]")));
                }
                if key == "epsilon_sec" {
                    s.epsilon_sec = e;
                } else {
                    s.epsilon_cor = e;
                }
            }
        }
        if let Some(v) = t.get("key_rule") {
            let r = v.as_str().ok_or_else(|| Error::input_key("key_rule", "must be a string"))?;
            s.key_rule = r.parse().map_err(|e: String| Error::input_key("key_rule", e))?;
        }
        s.link = Link::from_tables(t.get("source"), t.get("channel"), t.get("detector"))?;
        s.check_rule(s.key_rule).map_err(|e| e.with_key("key_rule"))?;
        Ok(s)
    }

    /// Checks that `rule` can run on this setup's link (decoy rules need the decoys they
    /// read).
    pub fn check_rule(&self, rule: KeyRule) -> Result<()> {
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
    }
}
