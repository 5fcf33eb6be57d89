//! `manifest.json`: how a result folder was made.
//!
//! Keys: `tool` and `version`, `command_line` (the arguments), `campaign`, `seed`,
//! `trials`, `sampler`, `inputs` (each input's origin and SHA-256 of its text; built-in
//! entries are named `builtin:<name>`), `started_unix_s`, `elapsed_s`, `threads`. Only
//! `started_unix_s`, `elapsed_s` and `threads` vary between runs with the same inputs.
//! Rule files are inputs like attack files; a campaign with rule programs adds
//! `rule_programs`: per program its `rule`, `rule_file`, `command`, `working_dir`, `files`
//! (every file the command names, the program found on PATH included, with its SHA-256) and
//! `version_output` (what `<command> --version` printed, or null).

use serde::Serialize;
use sha2::{Digest, Sha256};

/// One input's identity.
#[derive(Clone, Debug, Serialize)]
pub struct InputHash {
    /// Path or `builtin:<name>`.
    pub origin: String,
    /// SHA-256 of its text, hex.
    pub sha256: String,
}

/// The manifest.
#[derive(Clone, Debug, Serialize)]
pub struct Manifest {
    /// Tool name.
    pub tool: &'static str,
    /// Tool version.
    pub version: &'static str,
    /// Command line.
    pub command_line: Vec<String>,
    /// Campaign name.
    pub campaign: String,
    /// Seed.
    pub seed: u64,
    /// Trials per point.
    pub trials: u64,
    /// Sampler.
    pub sampler: crate::audit::sample::Sampler,
    /// Inputs.
    pub inputs: Vec<InputHash>,
    /// Start time, seconds since the Unix epoch.
    pub started_unix_s: u64,
    /// Wall-clock duration of the run, seconds.
    pub elapsed_s: f64,
    /// Worker threads used.
    pub threads: usize,
    /// Rule programs run (command, SHA-256 of the files it names, `--version` output);
    /// left out when there are none.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub rule_programs: Vec<crate::audit::rules::program::Provenance>,
}

/// Hex SHA-256 of a text.
pub fn sha256_hex(text: &str) -> String {
    Sha256::digest(text.as_bytes()).iter().map(|b| format!("{b:02x}")).collect()
}

impl Manifest {
    /// Pretty JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("manifest serialises") + "\n"
    }
}
