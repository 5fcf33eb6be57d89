//! The `tolerance` subcommand: the boundary along one setup key at which a key-length rule
//! starts to leak (or to give no key) against the strongest of a campaign's attacks; the
//! search itself is [`crate::audit::tolerance`]. Exit status 1 when the configured setup is
//! not shown safe (criterion `no-key`: not shown to give a key), 0 when it is, 2 on error.

use super::common::{note, print, Outcome};
use super::run::DemoArg;
use super::shard::{identity_args, InputId, Partial, ShardArgs, ShardSpec, ShardUnit, TolerancePayload};
use crate::audit::campaign::Scale;
use crate::audit::engine::UnitCounts;
use crate::audit::report::manifest::sha256_hex;
use crate::audit::setup::SetupKey;
use crate::audit::tolerance::{
    evidence_csv, look_unit_counts, look_units, search, search_with, Criterion, Evaluation, Look, LookId, LookShape, Looks, Report, Side,
    Spec, Step,
};
use crate::audit::Campaign;
use crate::error::{Error, ErrorKind, Result};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

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
    /// Write the evidence (one row per classified value and attack point) as CSV to this file
    /// (a sharded search: `qkd-audit merge <shard dir> -o FILE` writes it).
    #[arg(long, value_name = "FILE")]
    pub evidence: Option<PathBuf>,
    /// Replace the evidence file if it exists (with --shard: this shard's partial file of
    /// the round).
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
    /// Sharding, round by round: each run of the N shards computes its part of the looks the
    /// search needs next (every attack point's trials, in chunks), and `qkd-audit merge` adds
    /// them to the search's state in --shard-dir; repeat until the merge prints the result.
    #[command(flatten)]
    pub shard: ShardArgs,
}

/// The format of the search's state file, `<shard dir>/tolerance-state.toml`.
const STATE_FORMAT: &str = "qkd-audit tolerance state";

/// The state of a sharded search between rounds: the looks merged so far. Written by
/// `merge` only; read by the shards to find the looks of the next round.
#[derive(Debug, Serialize, Deserialize)]
pub struct State {
    /// Always "qkd-audit tolerance state".
    pub format: String,
    /// Tool version.
    pub version: String,
    /// The search's identifying arguments (as in partial results).
    pub args: Vec<String>,
    /// Its input files.
    pub inputs: Vec<InputId>,
    /// Rounds merged.
    pub rounds: u64,
    /// Whether the search is finished (its result written by the last merge).
    pub finished: bool,
    /// Every look merged, in the order merged.
    pub looks: Vec<Look>,
}

fn state_path(dir: &Path) -> PathBuf {
    dir.join("tolerance-state.toml")
}

/// The state in `dir`, if any, as written (not checked against a search).
pub fn read_state_file(dir: &Path) -> Result<Option<State>> {
    let path = state_path(dir);
    let text = match std::fs::read_to_string(&path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(Error::new(ErrorKind::Io, format!("cannot read {}: {e}", path.display()))),
    };
    let state: State =
        toml::from_str(&text).map_err(|e| Error::input(format!("not a qkd-audit tolerance state: {}", e.message())).with_file(&path))?;
    if state.format != STATE_FORMAT {
        return Err(Error::input_key("format", format!("`{}` is not `{STATE_FORMAT}`", state.format)).with_file(&path));
    }
    Ok(Some(state))
}

/// The input files whose hashes differ between `then` and `now`, for messages.
fn changed_inputs(then: &[InputId], now: &[InputId]) -> String {
    let mut changed: Vec<String> = then
        .iter()
        .filter(|t| !now.contains(t))
        .map(|t| match now.iter().find(|n| n.origin == t.origin) {
            Some(n) => format!(
                "{} (SHA-256 {}… then, {}… now)",
                t.origin,
                &t.sha256[..12.min(t.sha256.len())],
                &n.sha256[..12.min(n.sha256.len())]
            ),
            None => format!("{} (no longer an input)", t.origin),
        })
        .collect();
    changed.extend(now.iter().filter(|n| !then.iter().any(|t| t.origin == n.origin)).map(|n| format!("{} (a new input)", n.origin)));
    changed.join(", ")
}

/// The state in `dir`, if any, checked to belong to the search identified by `args` and
/// `inputs`.
fn read_state(dir: &Path, args: &[String], inputs: &[InputId]) -> Result<Option<State>> {
    let Some(state) = read_state_file(dir)? else {
        return Ok(None);
    };
    check_state(&state, dir, args, inputs)?;
    Ok(Some(state))
}

/// Checks that `state` (in `dir`) was written by this version for the search identified by
/// `args` and `inputs`; the error says which differs and what to do.
fn check_state(state: &State, dir: &Path, args: &[String], inputs: &[InputId]) -> Result<()> {
    let path = state_path(dir);
    if state.version != env!("CARGO_PKG_VERSION") {
        return Err(Error::input(format!(
            "{} was written by qkd-audit {}; this is {}: continue the search with that version, or start it again in an empty --shard-dir",
            path.display(),
            state.version,
            env!("CARGO_PKG_VERSION")
        )));
    }
    if state.args != args {
        return Err(Error::input(format!(
            "{} holds the state of another search: its arguments are `{}`, these are `{}`; continue it with its own arguments, \
             or give this search an empty --shard-dir",
            path.display(),
            state.args.join(" "),
            args.join(" ")
        )));
    }
    if state.inputs != inputs {
        return Err(Error::input(format!(
            "input files changed since the search in {} began: {}; restore them, or start the search again in an empty --shard-dir",
            dir.display(),
            changed_inputs(&state.inputs, inputs)
        )));
    }
    Ok(())
}

/// The campaign, the search and the input files of the command's arguments.
fn build(a: &ToleranceArgs) -> Result<(Campaign, Spec, Vec<InputId>)> {
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
    let mut inputs: Vec<InputId> = campaign.inputs.iter().map(|(o, t)| InputId { origin: o.clone(), sha256: sha256_hex(t) }).collect();
    if let Some(path) = &a.setup {
        let text = std::fs::read_to_string(path).map_err(|e| Error::new(ErrorKind::Io, format!("cannot read {}: {e}", path.display())))?;
        inputs.push(InputId { origin: path.display().to_string(), sha256: sha256_hex(&text) });
    }
    Ok((campaign, spec, inputs))
}

/// Runs `qkd-audit tolerance`.
pub fn cmd_tolerance(a: ToleranceArgs) -> Result<Outcome> {
    let (campaign, spec, inputs) = build(&a)?;
    let pool = super::common::thread_pool(a.threads)?;
    if let Some(shard) = a.shard.shard {
        return pool.install(|| run_shard(&a, &campaign, &spec, inputs, shard));
    }
    // Every output problem shows now, before the computation; the lock holds until written.
    let evidence = a.evidence.as_deref().map(|p| crate::output::prepare_file(p, a.force)).transpose()?;
    let quiet = a.quiet;
    let key = spec.key;
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
    conclude(&report, evidence, a.json, a.quiet)
}

/// Writes the evidence (if asked), prints the statement or the JSON, and gives the exit
/// status: the end of `tolerance`, and of the `merge` that finishes a sharded search.
fn conclude(report: &Report, evidence: Option<crate::output::FileGuard>, json: bool, quiet: bool) -> Result<Outcome> {
    if let Some(guard) = evidence {
        let path = guard.path().to_path_buf();
        guard.commit(evidence_csv(report)?.as_bytes())?;
        if !quiet {
            note(&format!("wrote {} evaluated values to {}", report.evaluations.len(), path.display()));
        }
    }
    if json {
        let json = serde_json::to_string_pretty(report).map_err(|e| Error::new(ErrorKind::Io, e.to_string()))?;
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

/// The looks of the next round and their units: (look, offset of its first unit, units).
fn round_plan(campaign: &Campaign, spec: &Spec, looks: &[LookId]) -> (Vec<(LookId, u64, u64)>, u64) {
    let mut total = 0;
    let plan = looks
        .iter()
        .map(|&id| {
            let units = look_units(campaign, spec, id);
            total += units;
            (id, total - units, units)
        })
        .collect();
    (plan, total)
}

/// `tolerance --shard K/N`: computes this shard's part of the looks the search needs next
/// (from the state in the shard folder) and writes it as a partial result.
fn run_shard(a: &ToleranceArgs, campaign: &Campaign, spec: &Spec, inputs: Vec<InputId>, shard: ShardSpec) -> Result<Outcome> {
    if spec.rule.builtin().is_none() {
        return Err(Error::input_key(
            "--shard",
            format!("the search judges the rule file `{}`; sharded searches support built-in rules only (run it unsharded)", spec.rule),
        ));
    }
    if a.evidence.is_some() {
        return Err(Error::input_key(
            "--evidence",
            "a sharded search writes its evidence at the merge that finishes it: give the file to `qkd-audit merge <shard dir> -o FILE`",
        ));
    }
    if a.json && !a.quiet {
        note("note: --json is for the merge that finishes the search: `qkd-audit merge <shard dir> --json`");
    }
    let clock = std::time::Instant::now();
    let dir = &a.shard.shard_dir;
    let args = identity_args();
    let state = read_state(dir, &args, &inputs)?;
    let known = state.as_ref().map(|s| s.looks.as_slice()).unwrap_or_default();
    let needs = match search_with(campaign, spec, Looks::Known(known), &|_| {})? {
        Step::Done(_) => {
            note(&format!(
                "nothing to do: the search in {} is finished (`qkd-audit merge {}` gives its result again)",
                dir.display(),
                dir.display()
            ));
            return Ok(Outcome::Clean);
        }
        Step::Needs(needs) => needs,
    };
    let (plan, total) = round_plan(campaign, spec, &needs);
    let mut units = Vec::new();
    for (look, &(id, offset, count)) in plan.iter().enumerate() {
        let chunks = id.trials(spec).div_ceil(crate::audit::engine::CHUNK_TRIALS);
        let owned = |point: u64, chunk: u64| shard.owns(offset + point * chunks + chunk);
        if !(offset..offset + count).any(|u| shard.owns(u)) {
            continue;
        }
        for counts in look_unit_counts(campaign, spec, id, &owned)? {
            units.push(ShardUnit { look, counts });
        }
    }
    let round = state.as_ref().map_or(0, |s| s.rounds);
    let mut partial = Partial::new("tolerance", inputs, shard, total, clock.elapsed().as_secs_f64());
    partial.tolerance = Some(TolerancePayload { round, looks: needs, units });
    partial.write(dir, a.force, a.quiet)?;
    Ok(Outcome::Clean)
}

/// The merge's own options for a tolerance search.
#[derive(Debug, Clone)]
pub struct MergeOptions {
    /// The evidence CSV, written when the search finishes.
    pub output: Option<PathBuf>,
    /// Replace an existing evidence file.
    pub force: bool,
    /// No notes on stderr.
    pub quiet: bool,
    /// Print the report as JSON instead of the sentence.
    pub json: bool,
}

/// `merge` of one round of `tolerance` shards: adds the round's looks to the search's state
/// (beside the partial files, which are then removed), and when the search is finished
/// writes and prints its result as the unsharded search does (evidence to `output`).
pub fn merge_tolerance(a: ToleranceArgs, parts: Vec<Partial>, files: &[PathBuf], o: &MergeOptions) -> Result<Outcome> {
    let (campaign, spec, inputs) = build(&a)?;
    if parts[0].inputs != inputs {
        return Err(Error::input(format!(
            "input files changed since the shards ran: {}; restore them and merge again, or start the search again in an empty --shard-dir",
            changed_inputs(&parts[0].inputs, &inputs)
        )));
    }
    let dir = files[0].parent().map(Path::to_path_buf).unwrap_or_default();
    if let Some(other) = files.iter().find(|f| f.parent() != Some(dir.as_path())) {
        return Err(Error::input(format!(
            "{} is not in {}: the shards of a search, and its state, are kept in one --shard-dir",
            other.display(),
            dir.display()
        )));
    }
    // The state's lock holds from here until the new state is in place: one merge at a time.
    let state_guard = crate::output::prepare_file(&state_path(&dir), true)?;
    let args = parts[0].args.clone();
    let mut state = read_state(&dir, &args, &inputs)?.unwrap_or_else(|| State {
        format: STATE_FORMAT.to_string(),
        version: env!("CARGO_PKG_VERSION").to_string(),
        args: args.clone(),
        inputs: inputs.clone(),
        rounds: 0,
        finished: false,
        looks: Vec::new(),
    });
    let needs = match search_with(&campaign, &spec, Looks::Known(&state.looks), &|_| {})? {
        Step::Done(_) => {
            return Err(Error::input(format!(
                "the search in {} is already finished: these partial results are left over (delete them; `qkd-audit merge {}` gives the result again)",
                dir.display(),
                dir.display()
            )))
        }
        Step::Needs(needs) => needs,
    };
    let names: Vec<String> = files.iter().map(|f| f.display().to_string()).collect();
    let mut units: Vec<Vec<UnitCounts>> = needs.iter().map(|_| Vec::new()).collect();
    let shapes = needs.iter().map(|id| LookShape::of(&campaign, &spec, *id)).collect::<Result<Vec<_>>>()?;
    for p in parts {
        let (k, n) = (p.shard, p.shards);
        let payload = p.tolerance.ok_or_else(|| Error::input(format!("shard {k}/{n} carries no tolerance looks")))?;
        if payload.round < state.rounds {
            return Err(Error::input(format!(
                "shard {k}/{n} was computed for round {}, which {} holds already ({} round(s) merged): the partial results are left \
                 over from an earlier round; delete {} and run this round's shards",
                payload.round + 1,
                state_path(&dir).display(),
                state.rounds,
                names.join(", ")
            )));
        }
        if payload.round > state.rounds {
            return Err(Error::input(format!(
                "shard {k}/{n} was computed after {} merged round(s), but {} holds {}: the state was replaced or removed; start the \
                 search again in an empty --shard-dir",
                payload.round,
                state_path(&dir).display(),
                state.rounds
            )));
        }
        if payload.looks != needs {
            return Err(Error::input(format!("shard {k}/{n} computed other looks than the search needs next")));
        }
        for u in payload.units {
            let Some(shape) = shapes.get(u.look) else {
                return Err(Error::input(format!("shard {k}/{n} names look {} of {}", u.look, needs.len())));
            };
            shape.check(&u.counts).map_err(|e| Error::input(format!("shard {k}/{n}: {e}")))?;
            units[u.look].push(u.counts);
        }
    }
    let evidence = o.output.as_deref().map(|p| crate::output::prepare_file(p, o.force)).transpose()?;
    for ((id, shape), units) in needs.iter().zip(&shapes).zip(&units) {
        let points = shape.assemble(units)?;
        state.looks.push(Look { id: *id, points });
    }
    state.rounds += 1;
    let step = search_with(&campaign, &spec, Looks::Known(&state.looks), &|_| {})?;
    state.finished = matches!(step, Step::Done(_));
    let text = toml::to_string(&state).map_err(|e| Error::new(ErrorKind::Io, format!("cannot encode the search's state: {e}")))?;
    state_guard.commit(text.as_bytes())?;
    for f in files {
        std::fs::remove_file(f)
            .map_err(|e| Error::new(ErrorKind::Io, format!("cannot remove the merged partial result {}: {e}", f.display())))?;
    }
    match step {
        Step::Done(report) => {
            if !o.quiet {
                note(&format!("merged round {}: the search is finished ({} looks)", state.rounds, state.looks.len()));
            }
            conclude(&report, evidence, o.json, o.quiet)
        }
        Step::Needs(next) => {
            if !o.quiet {
                let next: Vec<String> = next.iter().map(|id| id.describe(&spec)).collect();
                note(&format!(
                    "merged round {} ({} looks so far); the search needs next: {}. Run the shards again with the same arguments, then merge",
                    state.rounds,
                    state.looks.len(),
                    next.join("; ")
                ));
            }
            Ok(Outcome::Clean)
        }
    }
}

/// `merge <shard dir>` on a search without partial results: a finished search gives its
/// result again (the evidence to `output`, the sentence or the JSON on stdout, the exit
/// status); an unfinished one is an error that names the looks it needs next.
pub fn report_state(a: ToleranceArgs, state: State, dir: &Path, o: &MergeOptions) -> Result<Outcome> {
    let (campaign, spec, inputs) = build(&a)?;
    check_state(&state, dir, &state.args, &inputs)?;
    let evidence = o.output.as_deref().map(|p| crate::output::prepare_file(p, o.force)).transpose()?;
    match search_with(&campaign, &spec, Looks::Known(&state.looks), &|_| {})? {
        Step::Done(report) => conclude(&report, evidence, o.json, o.quiet),
        Step::Needs(next) => {
            let next: Vec<String> = next.iter().map(|id| id.describe(&spec)).collect();
            Err(Error::input(format!(
                "{} holds no partial results, and the search there is not finished ({} round(s) merged); it needs next: {}. Run \
                 the shards with the search's arguments, then merge",
                dir.display(),
                state.rounds,
                next.join("; ")
            )))
        }
    }
}
