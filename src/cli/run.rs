//! The `run` subcommand: a finite-key audit campaign into a results folder.

use super::common::{note, print, Outcome};
use super::shard::{InputId, Partial, ShardArgs};
use crate::audit::report::manifest::{sha256_hex, InputHash, Manifest};
use crate::audit::trial::Verdict;
use crate::audit::{point_count, Campaign};
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
    /// Mismatched detectors under time-shift and faked-state attacks.
    DetectorMismatch,
}

impl DemoArg {
    /// The demo's name in `audit::DEMO_CAMPAIGNS`.
    pub fn name(self) -> &'static str {
        match self {
            DemoArg::Decoy => "decoy",
            DemoArg::SinglePhoton => "single-photon",
            DemoArg::DetectorMismatch => "detector-mismatch",
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
    /// single-photon (the single-photon attack catalogue against the finite-key rule) or
    /// detector-mismatch (detectors with an efficiency mismatch under time-shift and
    /// faked-state attacks, judged by the flaw-blind finite-key rule and by mismatch-aware).
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
    /// Print the plan (points, trials, rules, sampler), an estimate of time and memory and the
    /// output folder (warnings go to stderr as always), and stop without computing or
    /// writing anything.
    #[arg(long)]
    pub dry_run: bool,
    /// Sharding (by attack point). A shard exits 0 when it computed its points; the merge
    /// gives the campaign's exit status.
    #[command(flatten)]
    pub shard: ShardArgs,
}

/// The plan of a campaign and a rough estimate of its cost, for `--dry-run`. The rates are
/// this machine class's measured orders of magnitude (DEVELOPERS.md, "Measured speed"):
/// about 1 µs per judged trial and rule with the count-level sampler, 10⁸ signals per
/// second with the per-round sampler, a millisecond per point for the exact evaluation;
/// memory about 1 kB per block and rule of a chunk of trials, plus 8 bytes per trial and
/// rule, for each point in flight. Rule programs are not timed (their speed is theirs).
fn plan(campaign: &Campaign, dir: &std::path::Path, force: bool) -> String {
    let points = point_count(campaign);
    let rules = campaign.rules.len();
    let trials = campaign.trials as f64;
    let per_trial_s = match campaign.sampler {
        crate::audit::sample::Sampler::Count => 1e-6 * rules as f64,
        crate::audit::sample::Sampler::Round => {
            // The mean block over the swept setups (the one setup without setup sweeps).
            let signals = campaign.setups.iter().map(|s| s.setup.signals as f64).sum::<f64>() / campaign.setups.len().max(1) as f64;
            signals / 1e8 + 1e-6 * rules as f64
        }
    };
    let cpu_s = points as f64 * (trials * per_trial_s + 1e-3);
    let threads = rayon::current_num_threads();
    // Per point in flight: a chunk of sampled and judged blocks (about 1 kB each per rule)
    // and 8 bytes per trial and rule for the key-length quantiles.
    let chunk = trials.min(crate::audit::engine::CHUNK_TRIALS as f64);
    let memory_mb = threads.min(points) as f64 * rules as f64 * (chunk * 1e3 + trials * 8.0) / 1e6;
    let folder = if dir.exists() {
        if force {
            "exists; --force replaces it"
        } else {
            "exists; the run would refuse without --force"
        }
    } else {
        "new"
    };
    format!(
        "campaign {}: {points} attack points × {} trials, judged under {rules} rule(s) ({}), sampler {}, {} signals per block\n\
         estimate: {} of CPU time ({} on {threads} thread{}), about {memory_mb:.0} MB of memory\n\
         output folder: {} ({folder})\n",
        campaign.name,
        campaign.trials,
        campaign.rules.iter().map(|r| r.name()).collect::<Vec<_>>().join(", "),
        match campaign.sampler {
            crate::audit::sample::Sampler::Count => "count",
            crate::audit::sample::Sampler::Round => "round",
        },
        campaign.setup.signals,
        duration(cpu_s),
        duration(cpu_s / threads as f64),
        if threads == 1 { "" } else { "s" },
        dir.display()
    )
}

/// Seconds as a reader wants them.
fn duration(seconds: f64) -> String {
    if seconds < 1.0 {
        "under a second".into()
    } else if seconds < 120.0 {
        format!("{seconds:.0} s")
    } else if seconds < 7200.0 {
        format!("{:.0} min", seconds / 60.0)
    } else if seconds < 2.0 * 86400.0 {
        format!("{:.1} h", seconds / 3600.0)
    } else {
        format!("{:.0} days", seconds / 86400.0)
    }
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
    // The thread count is checked before anything, the dry run included.
    let pool = super::common::thread_pool(a.threads)?;
    if a.dry_run {
        print(&plan(&campaign, &dir, a.force))?;
        return Ok(Outcome::Clean);
    }
    if let Some(spec) = a.shard.shard {
        if let Some(r) = campaign.rules.iter().find(|r| r.builtin().is_none()) {
            return Err(Error::input_key(
                "--shard",
                format!("the campaign judges the rule file `{r}`; sharded runs support built-in rules only (run it unsharded)"),
            ));
        }
        let clock = std::time::Instant::now();
        let (results, _logs) = pool.install(|| crate::audit::engine::run_points(&campaign, &|| {}, &|i| spec.owns(i)))?;
        let inputs = campaign.inputs.iter().map(|(o, t)| InputId { origin: o.clone(), sha256: sha256_hex(t) }).collect();
        let mut partial = Partial::new("run", inputs, spec, point_count(&campaign) as u64, clock.elapsed().as_secs_f64());
        partial.run = Some(results);
        partial.write(&a.shard.shard_dir, a.force, a.quiet)?;
        return Ok(Outcome::Clean);
    }
    // Every output problem shows now, before the computation; the lock holds until written.
    crate::output::clean_up_on_signals();
    let folder = crate::output::prepare_folder(&dir, a.force)?;
    folder.notes().iter().for_each(|n| note(n));
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
    let (results, logs) = pool.install(|| crate::audit::engine::run_logged(&campaign, &tick))?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let manifest = manifest_of(&campaign, started, clock.elapsed().as_secs_f64(), pool.current_num_threads());
    finish(&a, &campaign, &dir, folder, &results, &manifest, &logs)
}

/// Writes the results folder (with the rule programs' logs) and reports the verdicts (the
/// end of `run`, and of `merge`).
fn finish(
    a: &RunArgs,
    campaign: &Campaign,
    dir: &std::path::Path,
    folder: crate::output::FolderGuard,
    results: &[crate::audit::PointResult],
    manifest: &Manifest,
    logs: &[crate::audit::rules::program::ProgramLog],
) -> Result<Outcome> {
    crate::audit::report::write_folder_with(folder, campaign, results, manifest, logs)?;
    let system_rule = campaign.setup.key_rule.clone();
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

/// `merge` of `run` shards: checks the campaign still has the inputs the shards ran on,
/// orders the point results as the engine does, and writes the results folder under
/// `output` (default `results`; the shards' `--results-dir` is not part of a job's
/// identity). The manifest's elapsed time is the slowest shard's.
pub fn merge_run(a: RunArgs, parts: Vec<Partial>, output: Option<PathBuf>, force: bool, quiet: bool) -> Result<Outcome> {
    let campaign = match (&a.campaign, &a.demo) {
        (Some(p), _) => Campaign::load(p)?,
        (None, Some(d)) => Campaign::demo_named(d.name())?,
        (None, None) => Campaign::demo(),
    };
    let inputs: Vec<InputId> = campaign.inputs.iter().map(|(o, t)| InputId { origin: o.clone(), sha256: sha256_hex(t) }).collect();
    if inputs != parts[0].inputs {
        return Err(Error::input(format!(
            "the campaign's input files changed since the shards ran (SHA-256 differ): {}",
            inputs.iter().map(|i| i.origin.as_str()).collect::<Vec<_>>().join(", ")
        )));
    }
    let a = RunArgs { results_dir: output.unwrap_or_else(|| PathBuf::from("results")), force, quiet, ..a };
    let dir = a.results_dir.join(&campaign.name);
    crate::output::clean_up_on_signals();
    let folder = crate::output::prepare_folder(&dir, a.force)?;
    folder.notes().iter().for_each(|n| note(n));
    let started = std::time::SystemTime::now();
    let elapsed_s = parts.iter().map(|p| p.elapsed_s).fold(0.0, f64::max);
    let mut results = Vec::new();
    for p in parts {
        let (k, n) = (p.shard, p.shards);
        results.extend(p.run.ok_or_else(|| Error::input(format!("shard {k}/{n} carries no campaign results")))?);
    }
    // The engine's order: entry, then rule, then point.
    results.sort_by_key(|r| (r.entry, campaign.rules.iter().position(|x| *x == r.rule).unwrap_or(0), r.index));
    // Sharded runs refuse rule programs (see the shard branch of `cmd_run`), so none is recorded.
    let manifest = manifest_of(&campaign, started, elapsed_s, rayon::current_num_threads());
    finish(&a, &campaign, &dir, folder, &results, &manifest, &[])
}

/// The manifest of a campaign run (or of merged shards) that started at `started`.
fn manifest_of(campaign: &Campaign, started: std::time::SystemTime, elapsed_s: f64, threads: usize) -> Manifest {
    Manifest {
        tool: "qkd-audit",
        version: env!("CARGO_PKG_VERSION"),
        command_line: std::env::args().collect(),
        campaign: campaign.name.clone(),
        seed: campaign.seed,
        trials: campaign.trials,
        sampler: campaign.sampler,
        inputs: campaign.inputs.iter().map(|(o, t)| InputHash { origin: o.clone(), sha256: sha256_hex(t) }).collect(),
        started_unix_s: started.duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs()).unwrap_or(0),
        elapsed_s,
        threads,
        rule_programs: campaign
            .rules
            .iter()
            .filter_map(|r| match r {
                crate::audit::rules::Rule::Program(p) => Some(p.provenance()),
                _ => None,
            })
            .collect(),
    }
}
