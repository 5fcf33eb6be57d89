//! Audit campaigns: a system under test, a list of attacks (with sweeps), trials per point
//! and a seed, read and validated from TOML.
//!
//! Campaign file (TOML):
//! ```toml
//! name = "my-audit"            # output folder results/<name>/
//! seed = 1                     # campaign seed (integer ≥ 0)
//! trials = 200                 # Monte Carlo trials per attack point, 1..=1e6
//! sampler = "count"            # count (default) | round
//! setup = "setup.toml"         # a setup file (relative to this file), or an inline [setup] table
//! rules = ["decoy-vacuum-weak", "file:rules/vendor.toml"]  # optional: comparison rules judged
//!                              # on the same blocks, besides the setup's own key_rule (always
//!                              # judged): built-in names, or rule files (formula or program,
//!                              # `audit::rules::formula` / `audit::rules::program`) relative to
//!                              # this file
//! [[attacks]]
//! builtin = "intercept-resend" # an entry of the built-in catalogue, or
//! # file = "attacks/x.toml"    # a catalogue entry or kraus file (relative to this file)
//! steps = 11                   # optional: override the entry's sweep (also from, to)
//! params = { basis = "z" }     # optional: parameter overrides
//! [[setup_sweeps]]             # optional, repeatable: sweep a numeric setup key
//! key = "signals"              # a name of `setup::SETUP_KEYS`
//! from = 1e4                   # first and last value, in the key's unit
//! to = 1e10
//! steps = 7                    # 1..=100000
//! scale = "log"                # linear (default) | log (from, to > 0)
//! ```
//! A point is (attack entry × the entry's sweep value × setup), with one setup per
//! combination of the setup sweeps (the first sweep outermost; without setup sweeps the
//! one setup of the file). Every swept setup is built by [`Setup::with_value`], so a value
//! out of the key's range is an error before any work; integer keys (`signals`,
//! `test_count`) are rounded to the nearest integer, and a sweep whose rounded values
//! repeat is refused. The integer keys of the file (`seed`, `trials`, `steps`) take a float
//! with a whole value (`trials = 1e3`) as that integer ([`crate::input::integer`]), and
//! refuse a fraction. The engine that runs a campaign is [`super::engine`].

use crate::attack::file::{builtin_entry_text, parse as parse_attack, AttackFile, Sweep};
use crate::attack::Value;
use crate::audit::rules::Rule;
use crate::audit::sample::Sampler;
use crate::audit::setup::{Setup, SetupKey};
use crate::error::{Error, Result};
use crate::input::{first, parse_toml, unknown_keys, Problems};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// A swept parameter and its value at one point.
pub type Swept = (String, f64);

/// One attack entry of a campaign.
#[derive(Clone, Debug)]
pub struct AttackEntry {
    /// Label in tables: the built-in entry's name, or the file's attack name or stem.
    pub label: String,
    /// Where it came from: `builtin:<name>` or the file path.
    pub origin: String,
    /// The file's text (hashed into the manifest).
    pub text: String,
    /// The parsed file.
    pub file: AttackFile,
    /// The sweep to run (the file's, with overrides), if any.
    pub sweep: Option<Sweep>,
    /// Fixed parameter overrides.
    pub params: BTreeMap<String, Value>,
}

/// How a setup sweep steps from `from` to `to`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scale {
    /// Equal differences.
    Linear,
    /// Equal ratios (from and to positive).
    Log,
}

impl Scale {
    /// The value at position `t` ∈ [0, 1] between `from` and `to` on this scale (the ends
    /// exactly), rounded to an integer when `integer`. Setup sweeps and the tolerance search
    /// both step through setup keys this way.
    pub fn interpolate(self, from: f64, to: f64, t: f64, integer: bool) -> f64 {
        let x = if t <= 0.0 {
            from
        } else if t >= 1.0 {
            to
        } else {
            match self {
                Scale::Linear => from + (to - from) * t,
                Scale::Log => (from.ln() + (to.ln() - from.ln()) * t).exp(),
            }
        };
        if integer {
            x.round()
        } else {
            x
        }
    }
}

/// A sweep of one numeric setup key.
#[derive(Clone, Debug, PartialEq)]
pub struct SetupSweep {
    /// The key.
    pub key: SetupKey,
    /// First value.
    pub from: f64,
    /// Last value.
    pub to: f64,
    /// Number of values (with 1 only `from`).
    pub steps: usize,
    /// Linear or logarithmic steps.
    pub scale: Scale,
}

impl SetupSweep {
    /// The swept values, `from` and `to` exactly, integer keys rounded to the nearest integer.
    pub fn values(&self) -> Vec<f64> {
        (0..self.steps).map(|i| self.value_at(i)).collect()
    }

    fn value_at(&self, i: usize) -> f64 {
        let n = self.steps.max(2) - 1;
        self.scale.interpolate(self.from, self.to, i as f64 / n as f64, self.key.integer)
    }
}

/// The setup of some of a campaign's points: the swept keys' values and the setup they give.
#[derive(Clone, Debug, PartialEq)]
pub struct PointSetup {
    /// The swept keys and their values (empty without setup sweeps).
    pub values: Vec<(SetupKey, f64)>,
    /// The setup with those values.
    pub setup: Setup,
}

/// Most setups a campaign's setup sweeps may combine into (the product of their steps):
/// the same cap as one sweep's steps.
pub const MAX_SETUP_POINTS: usize = crate::exact::sweep::MAX_SWEEP_STEPS;

/// Most warnings about swept setups printed before the rest are counted: one per swept
/// setup would bury the other warnings.
const MAX_SWEPT_SETUP_WARNINGS: usize = 10;

/// A validated campaign.
#[derive(Clone, Debug)]
pub struct Campaign {
    /// Name (output folder).
    pub name: String,
    /// Seed.
    pub seed: u64,
    /// Trials per point.
    pub trials: u64,
    /// Block sampler.
    pub sampler: Sampler,
    /// System under test, as the campaign's setup (file or table) gives it.
    pub setup: Setup,
    /// Setup sweeps (`[[setup_sweeps]]`), in the file's order.
    pub setup_sweeps: Vec<SetupSweep>,
    /// The setups of the points: one per combination of the setup sweeps' values, or
    /// `setup` alone. [`crate::audit::engine::PointResult::setup`] indexes this list.
    pub setups: Vec<PointSetup>,
    /// Key-length rules judged on the same blocks: the setup's `key_rule` first, then the
    /// campaign's comparison `rules` not already listed.
    pub rules: Vec<Rule>,
    /// Attacks.
    pub attacks: Vec<AttackEntry>,
    /// Inputs and their texts, for the manifest: (origin, text).
    pub inputs: Vec<(String, String)>,
    /// Settings a reviewer should look at twice, found before any work (see
    /// [`preflight_warnings`]); printed on stderr and in the summary.
    pub warnings: Vec<String>,
}

/// The built-in demo campaigns (invented scenarios): (name, text). The first is the default.
pub const DEMO_CAMPAIGNS: &[(&str, &str)] = &[
    ("decoy", include_str!("../../campaigns/demo-decoy.toml")),
    ("single-photon", include_str!("../../campaigns/demo-single-photon.toml")),
    ("detector-mismatch", include_str!("../../campaigns/demo-detector-mismatch.toml")),
];

impl Campaign {
    /// Reads a campaign file (the first problem; [`Campaign::load_all`] gives all).
    pub fn load(path: &Path) -> Result<Campaign> {
        Campaign::load_all(path).map_err(first)
    }

    /// Reads a campaign file and reports every problem found in it and in the setup and
    /// attack files it names, each with its file and, where the key is written, its line and
    /// column.
    pub fn load_all(path: &Path) -> std::result::Result<Campaign, Vec<Error>> {
        let text = crate::input::read_text(path).map_err(|e| vec![e])?;
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        Campaign::parse_all(&text, &path.display().to_string(), Some(&base))
            .map_err(|errs| errs.into_iter().map(|e| crate::input::locate(e, &text).with_file(path)).collect())
    }

    /// The default built-in demo campaign.
    pub fn demo() -> Campaign {
        Campaign::demo_named(DEMO_CAMPAIGNS[0].0).expect("the built-in demo campaigns are valid")
    }

    /// A built-in demo campaign by name (`decoy`, `single-photon`).
    pub fn demo_named(name: &str) -> Result<Campaign> {
        let (n, text) = DEMO_CAMPAIGNS.iter().find(|(n, _)| *n == name).ok_or_else(|| {
            let names: Vec<&str> = DEMO_CAMPAIGNS.iter().map(|(n, _)| *n).collect();
            Error::input_key("--demo", format!("no built-in demo `{name}`; demos are {}", names.join(", ")))
        })?;
        Campaign::parse(text, &format!("builtin:demo-{n}"), None)
    }

    /// Parses campaign text; relative paths resolve against `base` (None: no files allowed).
    /// The first problem; [`Campaign::parse_all`] gives all.
    pub fn parse(text: &str, origin: &str, base: Option<&Path>) -> Result<Campaign> {
        Campaign::parse_all(text, origin, base).map_err(first)
    }

    /// Parses campaign text and reports every problem found: each top-level key, the setup
    /// (inline or the file it names) and each attack entry are checked on their own.
    pub fn parse_all(text: &str, origin: &str, base: Option<&Path>) -> std::result::Result<Campaign, Vec<Error>> {
        let t = parse_toml(text).map_err(|e| vec![e])?;
        let mut p = Problems::new();
        p.nested("", unknown_keys(&t, &["name", "seed", "trials", "sampler", "setup", "rules", "attacks", "setup_sweeps"], "a campaign"));
        let name = match t.get("name") {
            Some(toml::Value::String(s)) if valid_name(s) => s.clone(),
            Some(_) => {
                p.push(Error::input_key("name", "must be a non-empty string of letters, digits, '-', '_' or '.'"));
                String::new()
            }
            None => {
                p.push(Error::input_key("name", "missing: the campaign's name (its output folder)"));
                String::new()
            }
        };
        let seed = match t.get("seed") {
            Some(v) => p.check(crate::input::integer(v, "seed", 0, i64::MAX as u64)).unwrap_or(0),
            None => 0,
        };
        let trials = match t.get("trials") {
            Some(v) => p.check(crate::input::integer(v, "trials", 1, 1_000_000)).unwrap_or(200),
            None => 200,
        };
        let sampler = match t.get("sampler").map(|v| v.as_str()) {
            None | Some(Some("count")) => Some(Sampler::Count),
            Some(Some("round")) => Some(Sampler::Round),
            _ => {
                p.push(Error::input_key("sampler", "must be \"count\" or \"round\""));
                None
            }
        };
        let mut inputs = vec![(origin.to_string(), text.to_string())];
        let setup = match t.get("setup") {
            Some(toml::Value::Table(s)) => Setup::parse_all_in(s, base).map_err(|errs| p.nested("setup", errs)).ok(),
            Some(toml::Value::String(f)) => match resolve(base, f) {
                Err(e) => {
                    p.push(e.with_key("setup"));
                    None
                }
                Ok(path) => match crate::input::read_text(&path) {
                    Err(e) => {
                        p.push(unreadable(e, "setup", &path));
                        None
                    }
                    Ok(setup_text) => match Setup::load_all(&path) {
                        Ok(s) => {
                            inputs.push((path.display().to_string(), setup_text));
                            Some(s)
                        }
                        Err(errs) => {
                            p.nested("", errs);
                            None
                        }
                    },
                },
            },
            None => Some(Setup::default()),
            Some(_) => {
                p.push(Error::input_key("setup", "must be a file path or a table"));
                None
            }
        };
        // The system's own rule is always judged (first), and it alone sets the exit status;
        // the list adds comparison rules. Whether a rule fits the link is asked only of a
        // valid setup.
        let mut rules = setup.iter().map(|s| s.key_rule.clone()).collect::<Vec<_>>();
        match t.get("rules") {
            None => {}
            Some(toml::Value::Array(a)) if !a.is_empty() => {
                for (i, v) in a.iter().enumerate() {
                    let key = format!("rules[{i}]");
                    let rule = match v.as_str() {
                        None => Err(vec![Error::input("must be a key-rule name or \"file:<path>\"")]),
                        Some(name) => crate::audit::rules::resolve_rule(name, base),
                    };
                    let rule = match rule {
                        Ok(r) => r,
                        Err(errs) => {
                            p.nested(&key, errs);
                            continue;
                        }
                    };
                    if let Some(s) = &setup {
                        if p.check(s.check_rule(&rule).map_err(|e| e.with_key(key.clone()))).is_none() {
                            continue;
                        }
                    }
                    // Rules are told apart by name: the same file twice is one rule, two
                    // files of one name are a mistake.
                    match rules.iter().find(|r| **r == rule) {
                        Some(r) if r.origin() != rule.origin() => p.push(Error::input_key(
                            key,
                            format!(
                                "a second rule named `{rule}` (from {}); rule files need names of their own",
                                rule.origin().unwrap_or("-")
                            ),
                        )),
                        Some(_) => {}
                        None => rules.push(rule),
                    }
                }
            }
            Some(_) => p.push(Error::input_key("rules", "must be a non-empty list of key-rule names or \"file:<path>\" rule files")),
        }
        for (origin, text) in rules.iter().filter_map(|r| r.file()) {
            inputs.push((origin.to_string(), text.to_string()));
        }
        let mut attacks = Vec::new();
        // The position of each parsed entry in the file's `[[attacks]]` list (entries that
        // failed to parse are missing from `attacks`).
        let mut attack_index = Vec::new();
        match t.get("attacks") {
            Some(toml::Value::Array(list)) if !list.is_empty() => {
                for (i, entry) in list.iter().enumerate() {
                    let key = format!("attacks[{i}]");
                    let Some(table) = entry.as_table() else {
                        p.push(Error::input_key(key, "must be a table"));
                        continue;
                    };
                    match parse_entry(table, base) {
                        Ok(e) => {
                            inputs.push((e.origin.clone(), e.text.clone()));
                            attacks.push(e);
                            attack_index.push(i);
                        }
                        Err(errs) => p.nested(&key, errs),
                    }
                }
            }
            _ => p.push(Error::input_key("attacks", "must be a non-empty list of [[attacks]] tables")),
        }
        let setup_sweeps = match t.get("setup_sweeps") {
            None => Vec::new(),
            Some(toml::Value::Array(list)) => {
                let mut out = Vec::new();
                for (i, entry) in list.iter().enumerate() {
                    let key = format!("setup_sweeps[{i}]");
                    match entry.as_table() {
                        None => p.push(Error::input_key(key, "must be a table")),
                        Some(table) => match parse_setup_sweep(table) {
                            Ok(sw) if out.iter().any(|o: &SetupSweep| o.key == sw.key) => {
                                p.push(Error::input_key(format!("{key}.key"), format!("`{}` is swept twice", sw.key.name)))
                            }
                            Ok(sw) => {
                                if let Some(s) = &setup {
                                    p.check(check_sweep_values(s, &sw, i));
                                }
                                out.push(sw);
                            }
                            Err(errs) => p.nested(&key, errs),
                        },
                    }
                }
                out
            }
            Some(_) => {
                p.push(Error::input_key("setup_sweeps", "must be a list of [[setup_sweeps]] tables"));
                Vec::new()
            }
        };
        let setups = match &setup {
            Some(s) => point_setups(s, &setup_sweeps, &rules, &mut p),
            None => Vec::new(),
        };
        for (entry, &i) in attacks.iter().zip(&attack_index) {
            p.check(check_device_link(entry, i, &setups));
        }
        let (Some(setup), Some(sampler)) = (setup, sampler) else {
            return Err(p.finish(()).err().unwrap_or_else(|| vec![Error::input("invalid campaign")]));
        };
        // The per-round sampler draws every signal: about 10⁸ signals per second per core.
        const ROUND_SAMPLER_MAX_SIGNALS: u64 = 1_000_000_000;
        let largest = setups.iter().map(|s| &s.setup).max_by_key(|s| s.signals).unwrap_or(&setup);
        if sampler == Sampler::Round && largest.signals > ROUND_SAMPLER_MAX_SIGNALS {
            let points: usize = attacks.iter().map(|e| e.points().len()).sum::<usize>() * setups.len().max(1);
            let seconds = largest.signals as f64 * trials as f64 * points as f64 / 1e8;
            p.push(Error::input_key(
                "sampler",
                format!(
                    "the per-round sampler draws every one of the {} signals of a block: about {seconds:.1e} CPU seconds for this \
                     campaign; it is capped at {ROUND_SAMPLER_MAX_SIGNALS} signals per block. Use sampler = \"count\" (exact in \
                     distribution, cost independent of the block size)",
                    largest.signals
                ),
            ));
        } else if sampler == Sampler::Round && !setups.iter().all(|s| s.setup.link.is_ideal_single_photon()) {
            p.push(Error::input_key("sampler", "the per-round sampler supports the ideal single-photon link only; use \"count\""));
        }
        let warnings = if setup_sweeps.is_empty() { preflight_warnings(&setup, &attacks) } else { swept_setup_warnings(&setups, &attacks) };
        p.finish(Campaign { name, seed, trials, sampler, setup, setup_sweeps, setups, rules, attacks, inputs, warnings })
    }
}

/// Expected number of sifted Z bits per block without an attack: signals × P(signal
/// intensity) × its gain × P(Z)² on an optical link, signals × P(Z)² on the ideal one.
pub fn expected_sifted_z_bits(setup: &Setup) -> f64 {
    let pz = setup.basis_z_probability;
    let per_signal = if setup.link.is_ideal_single_photon() {
        1.0
    } else {
        let model = crate::exact::pulses::PulseModel::new(&setup.link, None, &setup.basis_probabilities());
        model.settings[0].1 * model.models[0].gain
    };
    setup.signals as f64 * per_signal * pz * pz
}

/// Settings that are valid but that a reviewer should look at twice: a setup that can never
/// give a key, a test sample too small to estimate the error rate at ε_sec, an abort
/// threshold above the protocol's zero-rate QBER (with one-way post-processing at the
/// Shannon limit), a parameter override that a sweep replaces, and a device attack whose
/// flaw the detector does not have (an inert attack).
pub fn preflight_warnings(setup: &Setup, attacks: &[AttackEntry]) -> Vec<String> {
    let mut out = setup_warnings(setup);
    out.extend(attack_warnings(attacks));
    out.extend(device_warnings(&[setup], attacks));
    out
}

/// Whether the device attacks can run on `link`: the exact device model
/// ([`crate::exact::device`]) describes single photons reaching a detector without dark
/// counts or misalignment (loss and the common efficiency drop out once the audit
/// conditions on Bob's clicks). The engine refuses any other link the same way.
pub fn link_supports_device_attacks(link: &crate::protocol::optical::Link) -> bool {
    matches!(link.source, crate::protocol::optical::Source::SinglePhoton) && link.dark_count_probability == 0.0 && link.misalignment == 0.0
}

/// Refuses a device attack (entry `i` of `[[attacks]]`) before any work when one of the
/// campaign's setups (every swept setup included) is a link the device model does not
/// cover; the error names the entry's `builtin` or `file` key and what the link has.
fn check_device_link(entry: &AttackEntry, i: usize, setups: &[PointSetup]) -> Result<()> {
    if !entry.file.is_device_attack() {
        return Ok(());
    }
    let Some(bad) = setups.iter().find(|s| !link_supports_device_attacks(&s.setup.link)) else { return Ok(()) };
    let link = &bad.setup.link;
    let mut has = Vec::new();
    if !matches!(link.source, crate::protocol::optical::Source::SinglePhoton) {
        has.push("a weak-coherent [source]".to_string());
    }
    if link.dark_count_probability != 0.0 {
        has.push(format!("detector.dark_count_probability = {}", shown_value(link.dark_count_probability)));
    }
    if link.misalignment != 0.0 {
        has.push(format!("detector.misalignment = {}", shown_value(link.misalignment)));
    }
    let at = if bad.values.is_empty() { String::new() } else { format!(" at {}", setup_values_text(&bad.values)) };
    let key = if entry.origin.starts_with("builtin:") { "builtin" } else { "file" };
    let why = crate::exact::device::unsupported_link(&entry.label);
    Err(Error::input_key(format!("attacks[{i}].{key}"), format!("{}; the setup{at} has {}", why.message(), has.join(", "))))
}

/// The warnings of [`preflight_warnings`] about device attacks whose flaw is absent from
/// every one of `setups`: a mismatch attack against matched detectors (`mismatch = 1`: the
/// time shift tells Eve nothing, faked states cause QBER ½ and abort), a blinding attack
/// against a monitor that catches every blinded period (`blinding_catch = 1`: every blinded
/// block aborts). Such an entry shows nothing about the system, which is worth a second look
/// (a flaw left at its ideal default), not an error.
fn device_warnings(setups: &[&Setup], attacks: &[AttackEntry]) -> Vec<String> {
    let mut out = Vec::new();
    for e in attacks {
        let AttackFile::Catalogue(c) = &e.file else { continue };
        let flaws = |s: &&Setup| s.link.flaws;
        let text = match c.family.as_str() {
            "time-shift" | "faked-state" if setups.iter().map(flaws).all(|f| f.mismatch == 1.0) => format!(
                "attack `{}` exploits a detector efficiency mismatch, but the setup's detectors have none ([detector] mismatch = 1, \
                 the ideal device): the attack is inert ({}); set [detector] mismatch to the characterised ratio",
                e.label,
                if c.family == "time-shift" { "shifted photons tell Eve nothing" } else { "faked states cause a QBER of ½ and abort" }
            ),
            "detector-blinding" if setups.iter().map(flaws).all(|f| f.blinding_catch == 1.0) => format!(
                "attack `{}` blinds the detectors, but the setup's monitor catches every blinded period ([detector] \
                 blinding_catch = 1, the ideal device): every blinded block aborts and the attack is inert; set [detector] \
                 blinding_catch to the catch probability the system claims",
                e.label
            ),
            _ => continue,
        };
        out.push(text);
    }
    out
}

/// The warnings of [`preflight_warnings`] about the setup.
fn setup_warnings(setup: &Setup) -> Vec<String> {
    let mut out = Vec::new();
    let sifted = expected_sifted_z_bits(setup);
    let key_bits = sifted - setup.test_sample.size(sifted.floor() as u64) as f64;
    if key_bits < 1.0 {
        out.push(format!(
            "the setup cannot give a key: about {} sifted Z bits are expected per block without any attack, {} after the \
             test sample; every point will be `no-key` or `aborted` (check signals, channel loss, detector efficiency and \
             basis_z_probability)",
            approx(sifted),
            approx(key_bits.max(0.0))
        ));
    }
    // A test sample of m bits estimates the bit error rate within δ = √(ln(2/ε)/(2m)) except
    // with probability ε (Hoeffding, JASA 58, 13, 1963); at ε_sec, a δ above the abort
    // threshold means the sample cannot tell an acceptable error rate from an abort.
    let m = setup.test_sample.size(sifted.floor().max(0.0) as u64);
    if m > 0 {
        let delta = ((2.0 / setup.epsilon_sec).ln() / (2.0 * m as f64)).sqrt();
        if delta > setup.abort_qber {
            out.push(format!(
                "the test sample is too small for ε_sec = {:e}: about {m} sifted Z bits are disclosed per block, and at that \
                 confidence they estimate the bit error rate only within ±{:.3} (Hoeffding), more than the abort threshold {}",
                setup.epsilon_sec, delta, setup.abort_qber
            ));
        }
    }
    let zero_rate = match setup.protocol {
        crate::protocol::Protocol::Bb84 => crate::exact::bounds::bb84_threshold(1.0),
        crate::protocol::Protocol::SixState => crate::exact::bounds::six_state_threshold(1.0),
    };
    if let Ok(q) = zero_rate {
        if setup.abort_qber > q {
            out.push(format!(
                "abort_qber = {} lies above the {} zero-rate QBER {:.4}: blocks the proven rate cannot turn into key are \
                 accepted (the key rule must then give no key on its own)",
                setup.abort_qber, setup.protocol, q
            ));
        }
    }
    out
}

/// The warnings of [`preflight_warnings`] about the attack entries.
fn attack_warnings(attacks: &[AttackEntry]) -> Vec<String> {
    let mut out = Vec::new();
    for e in attacks {
        if let Some(s) = &e.sweep {
            if e.params.contains_key(&s.param) {
                out.push(format!("attack `{}`: params.{} is ignored, because the sweep sets {} at every point", e.label, s.param, s.param));
            }
        }
    }
    out
}

/// The warnings of a campaign with setup sweeps: each swept setup's (see
/// [`preflight_warnings`]) prefixed by its values, at most [`MAX_SWEPT_SETUP_WARNINGS`] of
/// them, then the attack entries'.
fn swept_setup_warnings(setups: &[PointSetup], attacks: &[AttackEntry]) -> Vec<String> {
    let mut per_setup = Vec::new();
    for s in setups {
        for w in setup_warnings(&s.setup) {
            per_setup.push(format!("at {}: {w}", setup_values_text(&s.values)));
        }
    }
    let more = per_setup.len().saturating_sub(MAX_SWEPT_SETUP_WARNINGS);
    per_setup.truncate(MAX_SWEPT_SETUP_WARNINGS);
    if more > 0 {
        per_setup.push(format!("{more} more warning(s) about swept setups like the above"));
    }
    per_setup.extend(attack_warnings(attacks));
    let all: Vec<&Setup> = setups.iter().map(|s| &s.setup).collect();
    per_setup.extend(device_warnings(&all, attacks));
    per_setup
}

/// `key = value, …` of swept setup values, for sentences.
pub fn setup_values_text(values: &[(SetupKey, f64)]) -> String {
    values.iter().map(|(k, v)| format!("{} = {}", k.name, shown_value(*v))).collect::<Vec<_>>().join(", ")
}

/// A swept value in a message: scientific notation when very large or small (`1e16`, not
/// seventeen digits).
fn shown_value(x: f64) -> String {
    if x != 0.0 && (x.abs() >= 1e6 || x.abs() < 1e-3) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// Reads one `[[setup_sweeps]]` table; errors name its keys.
fn parse_setup_sweep(t: &toml::Table) -> std::result::Result<SetupSweep, Vec<Error>> {
    let mut p = Problems::new();
    p.nested("", unknown_keys(t, &["key", "from", "to", "steps", "scale"], "a setup sweep"));
    let key = match t.get("key") {
        Some(toml::Value::String(k)) => p.check(SetupKey::find(k).map_err(|e| e.with_key("key"))),
        Some(_) => {
            p.push(Error::input_key("key", "must be a string naming a numeric setup key"));
            None
        }
        None => {
            p.push(Error::input_key("key", "missing: the numeric setup key to sweep (e.g. \"signals\")"));
            None
        }
    };
    let mut ends = [None, None];
    for (slot, name) in ends.iter_mut().zip(["from", "to"]) {
        match t.get(name) {
            Some(v) => *slot = p.check(crate::input::number(v, name)),
            None => {
                p.push(Error::input_key(name, format!("missing: the {} value of the sweep", if name == "from" { "first" } else { "last" })))
            }
        }
    }
    let max = crate::exact::sweep::MAX_SWEEP_STEPS;
    let steps = match t.get("steps") {
        Some(v) => p.check(crate::input::integer(v, "steps", 1, max as u64)).map(|n| n as usize),
        None => {
            p.push(Error::input_key("steps", "missing: the number of values"));
            None
        }
    };
    let scale = match t.get("scale").map(|v| v.as_str()) {
        None | Some(Some("linear")) => Some(Scale::Linear),
        Some(Some("log")) => Some(Scale::Log),
        Some(_) => {
            p.push(Error::input_key("scale", "must be \"linear\" or \"log\""));
            None
        }
    };
    let (Some(key), [Some(from), Some(to)], Some(steps), Some(scale)) = (key, ends, steps, scale) else {
        return Err(p.finish(()).err().unwrap_or_default());
    };
    if scale == Scale::Log && !(from > 0.0 && to > 0.0) {
        p.push(Error::input_key(if from > 0.0 { "to" } else { "from" }, "a logarithmic sweep needs from > 0 and to > 0"));
    }
    let sweep = SetupSweep { key, from, to, steps, scale };
    if p.is_empty() && key.integer {
        let mut values = sweep.values();
        values.dedup();
        if values.len() < steps {
            p.push(Error::input_key(
                "steps",
                format!(
                    "{} takes integers: {steps} steps from {from} to {to} repeat values after rounding; use at most {} steps",
                    key.name,
                    values.len()
                ),
            ));
        }
    }
    p.finish(sweep)
}

/// Checks every value of the `i`-th setup sweep alone against the campaign's setup, through
/// [`Setup::with_value`]: the first invalid value is reported at the sweep's `from` (the
/// first value) or `to` (a later one), with the value and the setup parser's message.
fn check_sweep_values(base: &Setup, sw: &SetupSweep, i: usize) -> Result<()> {
    let values = sw.values();
    for (k, &v) in values.iter().enumerate() {
        if let Err(e) = base.with_value(sw.key.name, v) {
            let end = if k == 0 { "from" } else { "to" };
            return Err(Error::input_key(
                format!("setup_sweeps[{i}].{end}"),
                format!("value {} of {} ({} = {}) is not a valid setup: {e}", k + 1, values.len(), sw.key.name, shown_value(v)),
            ));
        }
    }
    Ok(())
}

/// The setups of a campaign's points: every combination of the setup sweeps' values (the
/// first sweep outermost), each built and validated by [`Setup::with_value`] and checked
/// against every rule of the campaign. Empty when a sweep has an invalid value (reported
/// by [`check_sweep_values`]) or the combination is refused (reported here).
fn point_setups(base: &Setup, sweeps: &[SetupSweep], rules: &[Rule], p: &mut Problems) -> Vec<PointSetup> {
    let ok = sweeps.iter().enumerate().all(|(i, sw)| check_sweep_values(base, sw, i).is_ok());
    let total = sweeps.iter().try_fold(1usize, |acc, sw| acc.checked_mul(sw.steps));
    if total.map_or(true, |n| n > MAX_SETUP_POINTS) {
        p.push(Error::input_key(
            "setup_sweeps",
            format!("the sweeps combine into more than {MAX_SETUP_POINTS} setups (the product of their steps); use fewer steps"),
        ));
        return Vec::new();
    }
    if !ok {
        return Vec::new();
    }
    let mut setups = vec![PointSetup { values: Vec::new(), setup: base.clone() }];
    for sw in sweeps {
        let mut next = Vec::with_capacity(setups.len() * sw.steps);
        for s in &setups {
            for v in sw.values() {
                let mut values = s.values.clone();
                values.push((sw.key, v));
                match s.setup.with_value(sw.key.name, v) {
                    Ok(setup) => next.push(PointSetup { values, setup }),
                    Err(e) => {
                        p.push(Error::input_key(
                            "setup_sweeps",
                            format!("the swept values {} do not make a valid setup together: {e}", setup_values_text(&values)),
                        ));
                        return Vec::new();
                    }
                }
            }
        }
        setups = next;
    }
    // The comparison rules must fit every swept setup's link, like the setup's own rule.
    for s in setups.iter().filter(|s| !s.values.is_empty()) {
        for rule in rules {
            if let Err(e) = s.setup.check_rule(rule) {
                p.push(Error::input_key("setup_sweeps", format!("at {}: rule {e}", setup_values_text(&s.values))));
                return Vec::new();
            }
        }
    }
    setups
}

/// A count for a sentence: 3 decimals, or 2 significant digits in scientific notation when
/// very small or large.
fn approx(x: f64) -> String {
    if x == 0.0 {
        "0".into()
    } else if x.abs() < 1e-3 || x.abs() >= 1e6 {
        format!("{x:.2e}")
    } else {
        format!("{x:.3}")
    }
}

fn valid_name(s: &str) -> bool {
    !s.is_empty() && s != "." && s != ".." && s.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c))
}

/// A file named by `key` that cannot be read: reported at the key that names it (so with the
/// campaign's line and column), with the path and the reason.
fn unreadable(e: Error, key: &str, path: &Path) -> Error {
    Error::input_key(key, format!("cannot read `{}`: {}", path.display(), e.message()))
}

fn resolve(base: Option<&Path>, p: &str) -> Result<PathBuf> {
    match base {
        Some(b) => Ok(b.join(p)),
        None => Err(Error::input(format!("`{p}`: the built-in campaign cannot refer to files"))),
    }
}

fn parse_entry(t: &toml::Table, base: Option<&Path>) -> std::result::Result<AttackEntry, Vec<Error>> {
    let mut p = Problems::new();
    p.nested("", unknown_keys(t, &["builtin", "file", "steps", "from", "to", "params"], "an attack entry"));
    let source = match (t.get("builtin"), t.get("file")) {
        (Some(toml::Value::String(name)), None) => {
            p.check(builtin_entry_text(name, "builtin").map(|text| (format!("builtin:{name}"), text.to_string())))
        }
        (None, Some(toml::Value::String(f))) => {
            p.check(resolve(base, f).map_err(|e| e.with_key("file")).and_then(|path| match crate::input::read_text(&path) {
                Ok(text) => Ok((path.display().to_string(), text)),
                Err(e) => Err(unreadable(e, "file", &path)),
            }))
        }
        _ => {
            p.push(Error::input_key("builtin", "give exactly one of `builtin` (a catalogue name) and `file` (a path)"));
            None
        }
    };
    let file = match &source {
        Some((origin, text)) => match parse_attack(text) {
            Ok(f) => Some(f),
            Err(errs) => {
                p.nested("", errs.into_iter().map(|e| crate::input::locate(e, text).with_file(origin)).collect());
                None
            }
        },
        None => None,
    };
    let params = match t.get("params") {
        None => Some(BTreeMap::new()),
        Some(v) => p.check(crate::attack::file::params_table(v)),
    };
    let mut sweep = file.as_ref().and_then(|f| f.sweep().cloned());
    for key in ["steps", "from", "to"] {
        let Some(v) = t.get(key) else { continue };
        let value = match (key, v) {
            ("steps", v) => p.check(crate::input::integer(v, "steps", 1, crate::exact::sweep::MAX_SWEEP_STEPS as u64)).map(|n| n as f64),
            (_, toml::Value::Float(x)) if x.is_finite() => Some(*x),
            (_, toml::Value::Integer(i)) => Some(*i as f64),
            _ => {
                p.push(Error::input_key(key, format!("must be a finite number, not {}", crate::input::shown(v))));
                None
            }
        };
        match (file.as_ref(), sweep.as_mut(), value) {
            (Some(_), None, _) => p.push(Error::input_key(key, "this attack has no sweep to override")),
            (_, Some(s), Some(x)) => match key {
                "steps" => s.steps = x as usize,
                "from" => s.from = x,
                _ => s.to = x,
            },
            _ => {}
        }
    }
    let (Some((origin, text)), Some(file), Some(params)) = (source, file, params) else {
        return Err(p.finish(()).err().unwrap_or_else(|| vec![Error::input("invalid attack entry")]));
    };
    if !p.is_empty() {
        return p.finish(AttackEntry { label: String::new(), origin, text, file, sweep, params });
    }
    let label = match (&file, t.get("builtin").and_then(|v| v.as_str())) {
        (_, Some(name)) => name.to_string(),
        (AttackFile::Kraus(k), None) => k.name.clone(),
        (AttackFile::Catalogue(_), None) => {
            Path::new(&origin).file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_else(|| origin.clone())
        }
    };
    let entry = AttackEntry { label, origin, text, file, sweep, params };
    // Build every point once now, so bad values are reported before any work (the first
    // failing point: the others fail the same way).
    for (swept, overrides) in entry.points() {
        if let Err(e) = entry.file.build(&overrides) {
            // A value the sweep produced is reported at the sweep key the user wrote
            // (`from` or `to`), not at a parameter the entry never names.
            let at_sweep = swept.as_ref().filter(|(param, _)| e.key().is_some_and(|k| k.ends_with(param.as_str())));
            match (at_sweep, &entry.sweep) {
                (Some((param, v)), Some(_)) => {
                    // The end the user moved: `to` if written, else `from`, else the entry's own sweep.
                    let key = ["to", "from", "steps"].into_iter().find(|k| t.contains_key(*k)).unwrap_or("builtin");
                    p.push(Error::input_key(key, format!("the sweep reaches {param} = {v}, where {}", e.message())));
                }
                _ => p.push(e),
            }
            break;
        }
    }
    p.finish(entry)
}

impl AttackEntry {
    /// The points of this entry: (swept parameter and value, parameter overrides).
    pub fn points(&self) -> Vec<(Option<Swept>, BTreeMap<String, Value>)> {
        match &self.sweep {
            None => vec![(None, self.params.clone())],
            Some(s) => s
                .values()
                .into_iter()
                .map(|v| {
                    let mut o = self.params.clone();
                    o.insert(s.param.clone(), Value::Num(v));
                    (Some((s.param.clone(), v)), o)
                })
                .collect(),
        }
    }
}
