//! The `tolerance` subcommand: the boundary along one setup key at which a key-length rule
//! starts to leak (or to give no key) against the strongest of a campaign's attacks; the
//! search itself is [`crate::audit::tolerance`]. Exit status 1 when the configured setup is
//! not shown safe (criterion `no-key`: not shown to give a key), 0 when it is, 2 on error.

use super::common::{note, print, Outcome};
use super::run::DemoArg;
use crate::audit::campaign::Scale;
use crate::audit::setup::SetupKey;
use crate::audit::tolerance::{evidence_csv, search, Criterion, Evaluation, Side, Spec};
use crate::audit::Campaign;
use crate::error::{Error, Result};
use std::path::PathBuf;

/// `--scale`.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum ScaleArg {
    /// Bisect on equal differences.
    Linear,
    /// Bisect on equal ratios (both ends > 0).
    Log,
}

/// `--find`.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum FindArg {
    /// Where the rule starts to leak (leak probability above the threshold).
    Leak,
    /// Where the rule stops giving a key (probability of any key at most the threshold).
    NoKey,
}

/// Options of `tolerance`.
#[derive(clap::Args, Debug)]
pub struct ToleranceArgs {
    /// Campaign file (TOML): its setup, attacks, sampler, trials and seed. Without it, a
    /// built-in demo campaign.
    #[arg(value_name = "CAMPAIGN", conflicts_with = "demo")]
    pub campaign: Option<PathBuf>,
    /// Built-in demo campaign to use without a campaign file (default: decoy).
    #[arg(long, value_enum, value_name = "NAME")]
    pub demo: Option<DemoArg>,
    /// A setup file (TOML) that replaces the campaign's setup: the system whose tolerance is
    /// searched, with the campaign's attacks.
    #[arg(long, value_name = "PATH")]
    pub setup: Option<PathBuf>,
    /// The numeric setup key to search, as written in setup files: signals, abort_qber,
    /// test_fraction, test_count, basis_z_probability, ec_efficiency, epsilon_sec, epsilon_cor,
    /// source.intensity, source.decoys[0|1], source.decoy_probabilities[0|1],
    /// channel.length_km (km), channel.attenuation_db_per_km, channel.loss_db (dB),
    /// detector.efficiency, detector.dark_count_probability, detector.misalignment,
    /// detector.mismatch, detector.blinding_catch.
    #[arg(long, value_name = "KEY")]
    pub key: String,
    /// One end of the searched range, in the key's unit.
    #[arg(long, value_name = "VALUE", allow_negative_numbers = true)]
    pub from: f64,
    /// The other end of the range, in the key's unit.
    #[arg(long, value_name = "VALUE", allow_negative_numbers = true)]
    pub to: f64,
    /// Bisect on a linear or a logarithmic scale (log: for block sizes and small
    /// probabilities; both ends > 0).
    #[arg(long, value_enum, default_value_t = ScaleArg::Linear)]
    pub scale: ScaleArg,
    /// The key-length rule judged (default: the setup's key_rule).
    #[arg(long, value_name = "RULE")]
    pub rule: Option<String>,
    /// An attack entry of the campaign, by its label (repeatable; default: all of them).
    /// Every point of an entry's sweep counts.
    #[arg(long = "attack", value_name = "LABEL")]
    pub attacks: Vec<String>,
    /// What to find: where the rule starts to leak, or where it stops giving any key.
    #[arg(long, value_enum, default_value_t = FindArg::Leak)]
    pub find: FindArg,
    /// Threshold probability: leak probability above it is unsafe (with --find no-key: a
    /// probability of giving any key at or below it is no key).
    #[arg(long, default_value_t = 0.05, value_name = "P")]
    pub threshold: f64,
    /// Confidence of each value's classification (one-sided Clopper–Pearson limits, split
    /// over the attack points and looks by the union bound).
    #[arg(long, default_value_t = 0.95, value_name = "C")]
    pub confidence: f64,
    /// Trials of a value's first look (default: the campaign's trials).
    #[arg(long, value_name = "N")]
    pub trials: Option<u64>,
    /// Most trials per attack point at one value; inconclusive values get doubled trials up
    /// to this (default: 8 × --trials, at most 1000000).
    #[arg(long, value_name = "N")]
    pub max_trials: Option<u64>,
    /// Halvings of the range: the boundary is located to 2^(−N) of the range (on its scale),
    /// or to neighbouring integers for integer keys.
    #[arg(long, default_value_t = 10, value_name = "N")]
    pub bisections: u32,
    /// Write the evidence (one row per classified value and attack point) as CSV to this file.
    #[arg(long, value_name = "FILE")]
    pub evidence: Option<PathBuf>,
    /// Replace the evidence file if it exists.
    #[arg(long)]
    pub force: bool,
    /// Print the whole report as one JSON object instead of sentences.
    #[arg(long)]
    pub json: bool,
    /// No progress lines on stderr.
    #[arg(long, short)]
    pub quiet: bool,
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
}

/// Runs `qkd-audit tolerance`.
pub fn cmd_tolerance(a: ToleranceArgs) -> Result<Outcome> {
    let mut campaign = match (&a.campaign, &a.demo) {
        (Some(p), _) => Campaign::load(p)?,
        (None, Some(d)) => Campaign::demo_named(d.name())?,
        (None, None) => Campaign::demo(),
    };
    if let Some(path) = &a.setup {
        campaign.setup = crate::audit::setup::Setup::load(path)?;
    }
    let key = SetupKey::find(&a.key).map_err(|e| e.with_key("--key"))?;
    if !campaign.setup_sweeps.is_empty() {
        note("note: the campaign's [[setup_sweeps]] are not used; the search varies --key on the campaign's setup");
        campaign.setup_sweeps.clear();
        campaign.setups.clear();
    }
    let rule = match &a.rule {
        None => campaign.setup.key_rule.clone(),
        Some(r) => {
            crate::audit::rules::Rule::from(r.parse::<crate::audit::rules::KeyRule>().map_err(|e: String| Error::input_key("--rule", e))?)
        }
    };
    if !a.attacks.is_empty() {
        for label in &a.attacks {
            if !campaign.attacks.iter().any(|e| &e.label == label) {
                let labels: Vec<&str> = campaign.attacks.iter().map(|e| e.label.as_str()).collect();
                return Err(Error::input_key(
                    "--attack",
                    format!("the campaign has no attack `{label}`; its attacks are {}", labels.join(", ")),
                ));
            }
        }
        campaign.attacks.retain(|e| a.attacks.contains(&e.label));
    }
    let trials = a.trials.unwrap_or(campaign.trials);
    let spec = Spec {
        key,
        from: a.from,
        to: a.to,
        scale: match a.scale {
            ScaleArg::Linear => Scale::Linear,
            ScaleArg::Log => Scale::Log,
        },
        rule,
        criterion: match a.find {
            FindArg::Leak => Criterion::Leak,
            FindArg::NoKey => Criterion::NoKey,
        },
        threshold: a.threshold,
        confidence: a.confidence,
        trials,
        max_trials: a.max_trials.unwrap_or_else(|| trials.saturating_mul(8).min(1_000_000)),
        bisections: a.bisections,
    };
    spec.check()?;
    if let Some(path) = &a.evidence {
        crate::output::check_overwrite(path, a.force)?;
    }
    let pool = {
        let mut b = rayon::ThreadPoolBuilder::new();
        if let Some(n) = a.threads {
            // As for `run`: more workers only add memory and scheduling.
            const MAX_THREADS: usize = 256;
            if n == 0 || n > MAX_THREADS {
                return Err(Error::input_key("--threads", format!("{n} is outside [1, {MAX_THREADS}]")));
            }
            b = b.num_threads(n);
        }
        b.build().map_err(|e| Error::input(format!("cannot start worker threads: {e}")))?
    };
    let quiet = a.quiet;
    let progress = |e: &Evaluation| {
        if !quiet {
            let at = e.value.map_or("the configured setup".to_string(), |v| format!("{} = {}", key.name, crate::exact::sweep::fmt_num(v)));
            let d = e.decisive();
            note(&format!(
                "{at}: {} ({} {}: {} of {} trials, limits [{:.4}, {:.4}])",
                e.side,
                d.attack,
                spec.criterion.event(),
                d.events,
                d.trials,
                d.lower,
                d.upper
            ));
        }
    };
    let report = pool.install(|| search(&campaign, &spec, &progress))?;
    if let Some(path) = &a.evidence {
        crate::output::write_atomic(path, evidence_csv(&report)?.as_bytes(), a.force)?;
        if !quiet {
            note(&format!("wrote {} evaluated values to {}", report.evaluations.len(), path.display()));
        }
    }
    if a.json {
        let json = serde_json::to_string_pretty(&report).map_err(|e| Error::new(crate::error::ErrorKind::Io, e.to_string()))?;
        print(&format!("{json}\n"))?;
    } else {
        let mut text = format!("{}\n", report.statement);
        for n in &report.notes {
            text.push_str(&format!("note: {n}\n"));
        }
        print(&text)?;
    }
    Ok(if report.configured == Side::Safe { Outcome::Clean } else { Outcome::Findings })
}
