//! The `run` subcommand: a finite-key audit campaign into a results folder.

use super::common::{note, print, Outcome};
use crate::audit::report::manifest::{sha256_hex, InputHash, Manifest};
use crate::audit::trial::Verdict;
use crate::audit::{point_count, run, Campaign};
use crate::error::{Error, Result};
use std::io::IsTerminal;
use std::path::PathBuf;

/// `--demo`: which built-in demo campaign runs without a campaign file.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum DemoArg {
    /// Weak pulses with decoys against photon-number splitting and beam splitting.
    Decoy,
    /// The single-photon attack catalogue.
    SinglePhoton,
}

impl DemoArg {
    /// The demo's name in `audit::DEMO_CAMPAIGNS`.
    pub fn name(self) -> &'static str {
        match self {
            DemoArg::Decoy => "decoy",
            DemoArg::SinglePhoton => "single-photon",
        }
    }
}

/// Options of `run`.
#[derive(clap::Args, Debug)]
pub struct RunArgs {
    /// Campaign file (TOML). Without it, a built-in demo campaign runs.
    #[arg(value_name = "CAMPAIGN", conflicts_with = "demo")]
    pub campaign: Option<PathBuf>,
    /// Which built-in demo to run without a campaign file: decoy (weak pulses with decoys,
    /// photon-number splitting and beam splitting against four rules; the default) or
    /// single-photon (the single-photon attack catalogue against the finite-key rule).
    #[arg(long, value_enum, value_name = "NAME")]
    pub demo: Option<DemoArg>,
    /// Folder that receives `<campaign name>/`.
    #[arg(long, default_value = "results", value_name = "DIR")]
    pub results_dir: PathBuf,
    /// Replace an existing output folder.
    #[arg(long)]
    pub force: bool,
    /// No progress bar.
    #[arg(long, short)]
    pub quiet: bool,
    /// Worker threads (default: all cores, or RAYON_NUM_THREADS). Results do not depend on it.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Exit with status 1 when a row under any of the campaign's rules leaks (by default only
    /// the setup's own key_rule gates the exit status; other rules are comparisons).
    #[arg(long)]
    pub fail_on_any_rule: bool,
}

/// Runs `qkd-audit run`.
pub fn cmd_run(a: RunArgs) -> Result<Outcome> {
    let campaign = match (&a.campaign, &a.demo) {
        (Some(p), _) => Campaign::load(p)?,
        (None, Some(d)) => Campaign::demo_named(d.name())?,
        (None, None) => Campaign::demo(),
    };
    for w in &campaign.warnings {
        note(&format!("warning: {w}"));
    }
    let dir = a.results_dir.join(&campaign.name);
    // Every output problem shows now, before the computation; the lock holds until written.
    crate::output::clean_up_on_signals();
    let folder = crate::output::prepare_folder(&dir, a.force)?;
    folder.notes().iter().for_each(|n| note(n));
    let pool = {
        let mut b = rayon::ThreadPoolBuilder::new();
        if let Some(n) = a.threads {
            // More workers than this only adds memory and scheduling; results do not change.
            const MAX_THREADS: usize = 256;
            if n == 0 || n > MAX_THREADS {
                return Err(Error::input_key("--threads", format!("{n} is outside [1, {MAX_THREADS}]")));
            }
            b = b.num_threads(n);
        }
        b.build().map_err(|e| Error::input(format!("cannot start worker threads: {e}")))?
    };
    let started = std::time::SystemTime::now();
    let clock = std::time::Instant::now();
    let total = point_count(&campaign) as u64;
    let bar = if !a.quiet && std::io::stderr().is_terminal() {
        let pb = indicatif::ProgressBar::new(total);
        pb.set_style(indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} attack points {elapsed}").expect("valid template"));
        Some(pb)
    } else {
        None
    };
    let tick = || {
        if let Some(b) = &bar {
            b.inc(1);
        }
    };
    let results = pool.install(|| run(&campaign, &tick))?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let manifest = Manifest {
        tool: "qkd-audit",
        version: env!("CARGO_PKG_VERSION"),
        command_line: std::env::args().collect(),
        campaign: campaign.name.clone(),
        seed: campaign.seed,
        trials: campaign.trials,
        sampler: campaign.sampler,
        inputs: campaign.inputs.iter().map(|(o, t)| InputHash { origin: o.clone(), sha256: sha256_hex(t) }).collect(),
        started_unix_s: started.duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs()).unwrap_or(0),
        elapsed_s: clock.elapsed().as_secs_f64(),
        threads: pool.current_num_threads(),
    };
    crate::audit::report::write_folder(folder, &campaign, &results, &manifest)?;
    let system_rule = campaign.setup.key_rule;
    let leaks = results.iter().filter(|r| r.stats.verdict == Verdict::Leak).count();
    let gating = results.iter().filter(|r| r.stats.verdict == Verdict::Leak && (a.fail_on_any_rule || r.rule == system_rule)).count();
    if !a.quiet {
        let comparison = leaks - results.iter().filter(|r| r.stats.verdict == Verdict::Leak && r.rule == system_rule).count();
        note(&format!(
            "{} rows ({} trials each), {:.1} s; {}{}",
            results.len(),
            campaign.trials,
            manifest.elapsed_s,
            if leaks == comparison {
                format!("no leak under the system's rule `{system_rule}`")
            } else {
                format!("LEAK under the system's rule `{system_rule}`")
            },
            if comparison > 0 { format!("; {comparison} leaking row(s) under comparison rules") } else { String::new() }
        ));
    }
    print(&format!("{}\n", dir.display()))?;
    Ok(if gating > 0 { Outcome::Findings } else { Outcome::Clean })
}
