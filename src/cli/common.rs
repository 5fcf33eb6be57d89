//! What the subcommands share: the [`Outcome`] that `main` maps to an exit status, the
//! attack options of `eval` and `rounds`, `--set` and `--protocol` parsing, and writing to
//! stdout.

use crate::attack::file as attack_file;
use crate::attack::{Attack, Value, FAMILIES};
use crate::error::{Error, Result};
use crate::protocol::Protocol;
use std::collections::BTreeMap;
use std::io::Write;
use std::path::PathBuf;

/// What a command found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Nothing to report (exit 0).
    Clean,
    /// Findings such as a leak verdict (exit 1).
    Findings,
}

/// Which single-photon attack a command works on (shared by `eval` and `rounds`).
#[derive(clap::Args, Debug)]
pub struct AttackArgs {
    /// Built-in attack family: intercept-resend, cloner, entangling-probe, pauli.
    #[arg(long, conflicts_with = "attack_file", required_unless_present = "attack_file")]
    pub attack: Option<String>,
    /// Attack file: a catalogue entry or a kraus file (see attacks/README.md).
    #[arg(long, value_name = "PATH")]
    pub attack_file: Option<PathBuf>,
    /// Set an attack parameter, e.g. --set fraction=0.5 (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
}

impl AttackArgs {
    /// Builds the chosen attack; errors name the file or the `--set` key at fault.
    pub fn build(&self) -> Result<Attack> {
        let sets = parse_sets(&self.set)?;
        match (&self.attack, &self.attack_file) {
            (Some(f), None) => Attack::builtin(f, &sets).map_err(|e| {
                if e.key().is_some() && !e.message().contains("unknown attack family") {
                    e.with_key("--set")
                } else {
                    e
                }
            }),
            (None, Some(p)) => attack_file::load(p)?.attack(&sets).map_err(|e| e.with_file(p)),
            _ => Err(Error::input("give exactly one of --attack and --attack-file")),
        }
    }
}

/// Parses `--protocol`.
pub fn parse_protocol(s: &str) -> Result<Protocol> {
    s.parse().map_err(|e: String| Error::input_key("--protocol", e))
}

/// Parses `KEY=VALUE` overrides.
pub fn parse_sets(sets: &[String]) -> Result<BTreeMap<String, Value>> {
    let mut out = BTreeMap::new();
    for s in sets {
        let (k, v) = s.split_once('=').ok_or_else(|| Error::input_key("--set", format!("`{s}` is not KEY=VALUE")))?;
        if k.trim().is_empty() {
            return Err(Error::input_key("--set", format!("`{s}` has an empty key")));
        }
        out.insert(k.trim().to_string(), Value::parse(v));
    }
    Ok(out)
}

/// Writes to stdout; a closed pipe (e.g. `| head`) is not an error.
pub fn write_stdout(out: &mut impl Write, text: &str) -> Result<()> {
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        // A closed pipe (e.g. `| head`) is not an error.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(e.into()),
    }
}

/// Names of the built-in families, for help texts.
pub fn family_names() -> Vec<&'static str> {
    FAMILIES.iter().map(|f| f.name()).collect()
}
