//! The rule handle: what a campaign judges blocks under. A built-in [`KeyRule`], a rule
//! file's formula ([`super::formula`]) or an external rule program ([`super::program`]).
//! Cheap to clone (the data sits behind an `Arc`); compared by name, which a campaign keeps
//! unique. Campaigns, the engine, the judging and the reports hold this type; the built-in
//! rules keep their enum, so a `Rule` compares equal to the `KeyRule` it wraps.

use super::formula::FormulaRule;
use super::program::ProgramRule;
use super::{BlockStats, KeyRule, RuleParams};
use std::fmt;
use std::sync::Arc;

/// A key-length rule under audit.
#[derive(Clone, Debug)]
pub enum Rule {
    /// One of the tool's rules.
    Builtin(KeyRule),
    /// A formula from a rule file.
    Formula(Arc<FormulaRule>),
    /// An external program named by a rule file.
    Program(Arc<ProgramRule>),
}

/// A rule's decision on one block.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RuleAnswer {
    /// The rule's own abort decision; `None`: the setup's threshold decides.
    pub abort: Option<bool>,
    /// The key length in bits (ignored when the block aborts).
    pub length: u64,
}

impl Rule {
    /// Name in tables and messages (a rule file's `name`).
    pub fn name(&self) -> &str {
        match self {
            Rule::Builtin(r) => r.name(),
            Rule::Formula(f) => &f.name,
            Rule::Program(p) => &p.name,
        }
    }

    /// The built-in rule, if this is one.
    pub fn builtin(&self) -> Option<KeyRule> {
        match self {
            Rule::Builtin(r) => Some(*r),
            _ => None,
        }
    }

    /// The rule file it came from (`None` for built-in rules).
    pub fn origin(&self) -> Option<&str> {
        match self {
            Rule::Builtin(_) => None,
            Rule::Formula(f) => Some(&f.origin),
            Rule::Program(p) => Some(&p.origin),
        }
    }

    /// The rule file's path and text, for the manifest (`None` for built-in rules).
    pub fn file(&self) -> Option<(&str, &str)> {
        match self {
            Rule::Builtin(_) => None,
            Rule::Formula(f) => Some((&f.origin, &f.text)),
            Rule::Program(p) => Some((&p.origin, &p.text)),
        }
    }

    /// The answer of a built-in rule or a formula for a block that did not abort for want
    /// of key or test bits. `threshold_aborts` is the setup's abort test of this block. An
    /// error (a NaN value of a formula) is a message without the trial, which the caller
    /// adds. A program is asked by the engine in batches instead ([`super::program`]).
    pub fn answer(&self, obs: &BlockStats, params: &RuleParams, threshold_aborts: bool) -> Result<RuleAnswer, String> {
        match self {
            // The built-in rules abort by the setup's threshold, and are not asked then.
            Rule::Builtin(r) => Ok(RuleAnswer { abort: None, length: if threshold_aborts { 0 } else { r.length(obs, params).length } }),
            Rule::Formula(f) => {
                let v = f.eval(obs, params);
                if v.abort.is_some_and(f64::is_nan) {
                    return Err(format!("rule file `{}`: abort_if is NaN", f.origin));
                }
                let abort = v.abort.map(|x| x != 0.0);
                let aborted = abort.unwrap_or(threshold_aborts);
                if v.raw_bits.is_nan() && !aborted {
                    return Err(format!("rule file `{}`: key_length is NaN", f.origin));
                }
                // No key is longer than the block's key bits: a larger value (+∞ from a
                // division by zero or log2(0), or 1e30) is a broken formula, not a key, and
                // is never floored or saturated into one.
                if !aborted && v.raw_bits > obs.n as f64 {
                    return Err(format!(
                        "rule file `{}`: key_length is {} bits, more than the block's n = {} key bits",
                        f.origin, v.raw_bits, obs.n
                    ));
                }
                Ok(RuleAnswer { abort, length: super::KeyLength::floor_bits(v.raw_bits) })
            }
            Rule::Program(p) => Err(format!("rule program `{}` is asked in batches, not per block", p.name)),
        }
    }
}

impl PartialEq for Rule {
    fn eq(&self, other: &Rule) -> bool {
        match (self, other) {
            (Rule::Builtin(a), Rule::Builtin(b)) => a == b,
            (Rule::Builtin(_), _) | (_, Rule::Builtin(_)) => false,
            (a, b) => a.name() == b.name(),
        }
    }
}

impl PartialEq<KeyRule> for Rule {
    fn eq(&self, other: &KeyRule) -> bool {
        self.builtin() == Some(*other)
    }
}

impl serde::Serialize for Rule {
    /// A rule serialises as its name (a built-in rule exactly as [`KeyRule`] does).
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.name())
    }
}

impl<'de> serde::Deserialize<'de> for Rule {
    /// Reads a built-in rule back by name (a shard's partial results). A rule file's rule
    /// cannot be rebuilt from its name alone, so shards refuse campaigns with rule files
    /// (`run --shard`), and reading one back is an error.
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Rule, D::Error> {
        let name = String::deserialize(d)?;
        name.parse::<KeyRule>()
            .map(Rule::Builtin)
            .map_err(|_| serde::de::Error::custom(format!("`{name}` is not a built-in rule; results under rule files are not read back")))
    }
}

impl From<KeyRule> for Rule {
    fn from(r: KeyRule) -> Rule {
        Rule::Builtin(r)
    }
}

impl fmt::Display for Rule {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}
