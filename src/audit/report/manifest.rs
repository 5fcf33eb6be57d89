//! `manifest.json`: how a result folder was made, and what the report needs to rebuild itself.
//!
//! Keys: `tool` and `version`, `command_line` (the arguments), `campaign`, `seed`,
//! `trials`, `sampler`, `inputs` (each input's origin and SHA-256 of its text; built-in
//! entries are named `builtin:<name>`), `started_unix_s`, `elapsed_s`, `threads`; then the
//! system under test as the report shows it: `setup` (every setup value as `key`, `value`,
//! `unit`), `protocol`, `system_rule` (the setup's own key-length rule), `rules` (every rule
//! judged, the system's first) and `warnings` (found before the run); a campaign with setup
//! sweeps adds `setup_sweeps`: per swept key its `key` (dotted, as in setup files), `column`
//! (its `setup_<key>` column of the table), `unit` (empty for pure numbers), `scale`
//! (`linear` or `log`), `from`, `to` and `steps`, which the figures need to label and scale
//! their axes. Only `started_unix_s`,
//! `elapsed_s` and `threads` vary between runs with the same inputs.
//! Rule files are inputs like attack files; a campaign with rule programs adds
//! `rule_programs`: per program its `rule`, `rule_file`, `command`, `working_dir`, `files`
//! (every file the command names, the program found on PATH included, with its SHA-256) and
//! `version_output` (what `<command> --version` printed, or null).
//!
//! [`Record`] reads a manifest back (for `qkd-audit report` and `compare`); every key the
//! report adds is optional there, so a folder written before them still reads.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// One input's identity.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
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

/// One value of the system under test, as the report prints it.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct SetupValue {
    /// The setup file's key (e.g. `abort_qber`, `source.intensity`).
    pub key: String,
    /// The value, as text.
    pub value: String,
    /// Its unit (`–` for none).
    pub unit: String,
}

/// One swept setup key, as the report labels and scales it.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq, Default)]
pub struct SweptKey {
    /// The setup file's key (e.g. `signals`, `channel.length_km`).
    pub key: String,
    /// Its column in `attack_vs_bound.csv` (`setup_signals`, `setup_channel_length_km`).
    pub column: String,
    /// Its unit (empty for probabilities, rates and other pure numbers).
    #[serde(default)]
    pub unit: String,
    /// `linear` or `log`.
    #[serde(default)]
    pub scale: String,
    /// First value.
    #[serde(default)]
    pub from: f64,
    /// Last value.
    #[serde(default)]
    pub to: f64,
    /// Number of values.
    #[serde(default)]
    pub steps: usize,
}

impl SweptKey {
    /// The campaign's setup sweeps, as the manifest records them.
    pub fn of(c: &crate::audit::Campaign) -> Vec<SweptKey> {
        use crate::audit::campaign::Scale;
        c.setup_sweeps
            .iter()
            .map(|s| SweptKey {
                key: s.key.name.to_string(),
                column: s.key.column(),
                unit: s.key.unit.to_string(),
                scale: match s.scale {
                    Scale::Linear => "linear",
                    Scale::Log => "log",
                }
                .to_string(),
                from: s.from,
                to: s.to,
                steps: s.steps,
            })
            .collect()
    }

    /// Whether the sweep steps by equal ratios.
    pub fn log(&self) -> bool {
        self.scale == "log"
    }
}

/// What the report needs about the campaign beyond the table.
#[derive(Clone, Debug, Serialize)]
struct CampaignContext {
    setup: Vec<SetupValue>,
    protocol: String,
    system_rule: String,
    rules: Vec<String>,
    warnings: Vec<String>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    setup_sweeps: Vec<SweptKey>,
}

#[derive(Serialize)]
struct Full<'a> {
    #[serde(flatten)]
    manifest: &'a Manifest,
    #[serde(flatten)]
    context: CampaignContext,
}

/// A manifest read back from a results folder.
#[derive(Clone, Debug, Deserialize, Default)]
pub struct Record {
    /// Tool name.
    #[serde(default)]
    pub tool: String,
    /// Tool version.
    #[serde(default)]
    pub version: String,
    /// Command line.
    #[serde(default)]
    pub command_line: Vec<String>,
    /// Campaign name.
    #[serde(default)]
    pub campaign: String,
    /// Seed.
    #[serde(default)]
    pub seed: u64,
    /// Trials per point.
    #[serde(default)]
    pub trials: u64,
    /// Sampler name.
    #[serde(default)]
    pub sampler: String,
    /// Inputs.
    #[serde(default)]
    pub inputs: Vec<InputHash>,
    /// Start time, seconds since the Unix epoch.
    #[serde(default)]
    pub started_unix_s: u64,
    /// Wall-clock duration, seconds.
    #[serde(default)]
    pub elapsed_s: f64,
    /// Worker threads used.
    #[serde(default)]
    pub threads: usize,
    /// The system under test (empty in folders written before the HTML report).
    #[serde(default)]
    pub setup: Vec<SetupValue>,
    /// Protocol name.
    #[serde(default)]
    pub protocol: String,
    /// The setup's own key-length rule.
    #[serde(default)]
    pub system_rule: String,
    /// Every rule judged, the system's first.
    #[serde(default)]
    pub rules: Vec<String>,
    /// Warnings found before the run.
    #[serde(default)]
    pub warnings: Vec<String>,
    /// The swept setup keys (empty without setup sweeps, and in folders written before the
    /// report knew them).
    #[serde(default)]
    pub setup_sweeps: Vec<SweptKey>,
}

/// Hex SHA-256 of a text.
pub fn sha256_hex(text: &str) -> String {
    Sha256::digest(text.as_bytes()).iter().map(|b| format!("{b:02x}")).collect()
}

/// A number as a setup file writes it: up to 12 significant digits, no float noise.
fn num(x: f64) -> String {
    crate::exact::sweep::fmt_num(x)
}

/// A small number in scientific notation as a setup file writes it (`1e-10`), zero as `0`.
fn sci(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else {
        format!("{x:e}")
    }
}

/// Every value of the system under test with its unit, in the README's order.
pub fn setup_values(s: &crate::audit::setup::Setup) -> Vec<SetupValue> {
    use crate::audit::setup::TestSample;
    use crate::protocol::optical::Source;
    let v = |key: &str, value: String, unit: &str| SetupValue { key: key.into(), value, unit: unit.into() };
    let mut out = vec![
        v("name", s.name.clone(), "–"),
        v("protocol", s.protocol.to_string(), "–"),
        v("signals", s.signals.to_string(), "signals per block"),
        v("basis_z_probability", num(s.basis_z_probability), "probability"),
        match s.test_sample {
            TestSample::Fraction(f) => v("test_fraction", num(f), "fraction of sifted Z bits"),
            TestSample::Count(n) => v("test_count", n.to_string(), "sifted Z bits"),
        },
        v("abort_qber", num(s.abort_qber), "error rate"),
        v("ec_efficiency", num(s.ec_efficiency), "– (f)"),
        v("epsilon_sec", sci(s.epsilon_sec), "–"),
        v("epsilon_cor", sci(s.epsilon_cor), "–"),
        v("key_rule", s.key_rule.to_string(), "–"),
    ];
    let l = &s.link;
    match &l.source {
        Source::SinglePhoton => out.push(v("source.kind", "single-photon".into(), "–")),
        Source::WeakCoherent { intensity, probability, decoys } => {
            out.push(v("source.kind", "weak-coherent".into(), "–"));
            out.push(v("source.intensity", num(*intensity), "photons per pulse"));
            out.push(v("source.signal_probability", num(*probability), "probability"));
            let list = |f: &dyn Fn(&(f64, f64)) -> f64| decoys.iter().map(|d| num(f(d))).collect::<Vec<_>>().join(", ");
            out.push(v("source.decoys", if decoys.is_empty() { "none".into() } else { list(&|d| d.0) }, "photons per pulse"));
            if !decoys.is_empty() {
                out.push(v("source.decoy_probabilities", list(&|d| d.1), "probability"));
            }
        }
    }
    if let Some(len) = l.length_km {
        out.push(v("channel.length_km", num(len), "km"));
    }
    if let Some(a) = l.attenuation_db_per_km {
        out.push(v("channel.attenuation_db_per_km", num(a), "dB/km"));
    }
    out.push(v("channel.loss_db", num(l.channel_loss_db), "dB"));
    out.push(v("detector.efficiency", num(l.detector_efficiency), "probability"));
    out.push(v("detector.dark_count_probability", sci(l.dark_count_probability), "per gate"));
    out.push(v("detector.misalignment", num(l.misalignment), "probability"));
    out
}

impl Manifest {
    /// Pretty JSON of the run alone.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("manifest serialises") + "\n"
    }

    /// Pretty JSON of the run and of the campaign's system under test, rules and warnings:
    /// what `manifest.json` holds.
    pub fn to_json_with(&self, c: &crate::audit::Campaign) -> String {
        let context = CampaignContext {
            setup: setup_values(&c.setup),
            protocol: c.setup.protocol.to_string(),
            system_rule: c.setup.key_rule.to_string(),
            rules: c.rules.iter().map(|r| r.to_string()).collect(),
            warnings: c.warnings.clone(),
            setup_sweeps: SweptKey::of(c),
        };
        serde_json::to_string_pretty(&Full { manifest: self, context }).expect("manifest serialises") + "\n"
    }
}

impl Record {
    /// Parses `manifest.json` text; `origin` names the file in errors.
    pub fn parse(text: &str, origin: &str) -> crate::error::Result<Record> {
        serde_json::from_str(text)
            .map_err(|e| crate::error::Error::input(format!("{origin}:{}:{}: not a qkd-audit manifest: {e}", e.line(), e.column())))
    }
}
