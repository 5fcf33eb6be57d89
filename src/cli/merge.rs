//! Shards and the `merge` subcommand: splitting `sweep`, `hunt`, `run` and `tolerance` over
//! separate processes (a cluster's job array, say) and joining their partial results into
//! exactly what the unsharded command writes.
//!
//! Work units: a sweep's points, a campaign's attack points, a hunt's (target, start)
//! pairs, numbered in the order the unsharded command takes them; for a tolerance search,
//! the (look, attack point, chunk of trials) triples of one round (below). Shard K of N
//! (`--shard K/N`, 1 ≤ K ≤ N) computes the units whose number u has u mod N = K − 1; every
//! unit keeps its number, hence its random stream, so results do not depend on N. A shard
//! writes one partial file `<dir>/<command>-shard-K-of-N.toml` (`--shard-dir`, default
//! `shards`) and nothing else.
//!
//! Partial file (TOML): `format`, `version` (of the tool), `command`, `args` (the
//! command's arguments that determine the result: everything but `--shard`,
//! `--shard-dir`, `--threads`, the output location, `--force` and `--quiet`), `inputs`
//! (origin and SHA-256 of every input file), `shard`, `shards`, `units`, `indices` (the
//! units computed), `elapsed_s`, and the payload of its command: sweep CSV records, hunt
//! start results, or campaign point results. Floating-point values are written in full
//! (shortest round-trip), so a merge reproduces every digit.
//!
//! `merge` refuses (exit status 2) partial files of different versions, commands,
//! arguments, inputs or shard counts, a shard given twice, a missing shard, and a shard
//! whose units are not the ones its number owns. It then writes what the unsharded command
//! would: the sweep CSV, the hunt folder, or the campaign's results folder through the
//! same report writers (only the manifest's `command_line`, start time, elapsed time and
//! threads differ, as between any two runs). Its exit status is the unsharded command's.
//!
//! A tolerance search runs in rounds, since each bisection step depends on the one before.
//! Its state, `<shard dir>/tolerance-state.toml` ([`super::tolerance::State`]), holds the
//! integer counts of every look merged so far; a shard replays the search on them
//! ([`crate::audit::tolerance::search_with`]) to find the looks needed next, and computes its
//! units of those. `merge` checks that the partials are of the state's round and of the looks
//! it needs, adds them to the state (written atomically), removes the merged partial files,
//! and, once the replay finishes, writes the evidence and prints the result as the unsharded
//! search does. Counts are integers, so the result does not depend on N.
//!
//! The shard side (units, the partial file) is [`super::shard`]. This module reads the
//! three commands' arguments back with clap; it must not compute anything those commands
//! do not.

use super::common::{note, write_stdout, Outcome};
use super::shard::{Partial, ShardSpec, FORMAT};
use super::Cli;
use crate::error::{Error, ErrorKind, Result};
use clap::Parser;
use std::path::{Path, PathBuf};

/// Options of `merge`.
#[derive(clap::Args, Debug)]
pub struct MergeArgs {
    /// Partial results of one sharded job (files, or folders holding `*-shard-*-of-*.toml`),
    /// all N of them (for `tolerance`: all N of one round, in the search's shard folder).
    #[arg(required = true, value_name = "PARTIAL")]
    pub partials: Vec<PathBuf>,
    /// Where the merged result goes: for `sweep` the CSV file (default: stdout), for `hunt`
    /// the output folder (default: results/hunt-OBJECTIVE-PROTOCOL), for `run` the folder
    /// that receives `<campaign name>/` (default: results), for `tolerance` the evidence CSV
    /// (written by the merge that finishes the search; default: none).
    #[arg(short, long, value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Replace an existing output file or folder.
    #[arg(long)]
    pub force: bool,
    /// No summary line on stderr (as `run --quiet`).
    #[arg(long, short)]
    pub quiet: bool,
    /// `tolerance`: print the finished search's report as one JSON object instead of the
    /// sentence (as `tolerance --json`).
    #[arg(long)]
    pub json: bool,
}

/// The partial files named by `paths` (folders expanded to their shard files, sorted).
fn partial_files(paths: &[PathBuf]) -> Result<Vec<PathBuf>> {
    let mut files = Vec::new();
    for p in paths {
        if p.is_dir() {
            let rd = std::fs::read_dir(p).map_err(|e| Error::new(ErrorKind::Io, format!("cannot read folder {}: {e}", p.display())))?;
            let mut found: Vec<PathBuf> = rd
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|f| f.file_name().and_then(|n| n.to_str()).is_some_and(|n| n.contains("-shard-") && n.ends_with(".toml")))
                .collect();
            if found.is_empty() {
                return Err(Error::input(format!("folder {} holds no partial results (*-shard-K-of-N.toml)", p.display())));
            }
            found.sort();
            files.extend(found);
        } else {
            files.push(p.clone());
        }
    }
    Ok(files)
}

fn read_partial(path: &Path) -> Result<Partial> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::new(ErrorKind::Io, format!("cannot read {}: {e}", path.display())))?;
    let p: Partial =
        toml::from_str(&text).map_err(|e| Error::input(format!("not a qkd-audit partial result: {}", e.message())).with_file(path))?;
    if p.format != FORMAT {
        return Err(Error::input_key("format", format!("`{}` is not `{FORMAT}`", p.format)).with_file(path));
    }
    Ok(p)
}

/// Reads, checks and orders the partial results: all N shards of one job, once each.
pub fn check_partials(paths: &[PathBuf]) -> Result<Vec<Partial>> {
    let files = partial_files(paths)?;
    let mut parts: Vec<(PathBuf, Partial)> = Vec::new();
    for f in files {
        let p = read_partial(&f)?;
        parts.push((f, p));
    }
    let (first_path, first) = &parts[0];
    for (path, p) in &parts[1..] {
        let differs = |what: &str, a: &dyn std::fmt::Debug, b: &dyn std::fmt::Debug| {
            Err(Error::input(format!(
                "{} and {} are not shards of one job: their {what} differ ({a:?} against {b:?})",
                first_path.display(),
                path.display()
            )))
        };
        if p.version != first.version {
            return differs("tool versions", &first.version, &p.version);
        }
        if p.command != first.command {
            return differs("commands", &first.command, &p.command);
        }
        if p.args != first.args {
            return differs("arguments (seed, targets, steps, ...)", &first.args, &p.args);
        }
        if p.inputs != first.inputs {
            return differs("input files (SHA-256)", &first.inputs, &p.inputs);
        }
        if p.shards != first.shards {
            return differs("shard counts", &first.shards, &p.shards);
        }
        if p.units != first.units {
            return differs("numbers of work units", &first.units, &p.units);
        }
    }
    if first.version != env!("CARGO_PKG_VERSION") {
        return Err(Error::input(format!(
            "{} was written by qkd-audit {}; this is {}: merge with the version that computed the shards",
            first_path.display(),
            first.version,
            env!("CARGO_PKG_VERSION")
        )));
    }
    let n = first.shards;
    let mut slots: Vec<Option<(PathBuf, Partial)>> = (0..n).map(|_| None).collect();
    for (path, p) in parts {
        if p.shard == 0 || p.shard > n {
            return Err(Error::input_key("shard", format!("{} is outside [1, {n}]", p.shard)).with_file(&path));
        }
        let spec = ShardSpec { k: p.shard, n };
        if p.indices != spec.units(p.units) {
            return Err(Error::input(format!("the units listed are not those of shard {}/{n}", p.shard)).with_file(&path));
        }
        let slot = p.shard - 1;
        if let Some((other, _)) = &slots[slot] {
            return Err(Error::input(format!("shard {}/{n} is given twice: {} and {}", p.shard, other.display(), path.display())));
        }
        slots[slot] = Some((path, p));
    }
    let missing: Vec<String> = slots.iter().enumerate().filter(|(_, s)| s.is_none()).map(|(i, _)| format!("{}/{n}", i + 1)).collect();
    if !missing.is_empty() {
        return Err(Error::input(format!(
            "missing shard(s) {}: a merge needs all {n} (run the missing ones with the same arguments, then merge again)",
            missing.join(", ")
        )));
    }
    Ok(slots.into_iter().map(|s| s.expect("checked").1).collect())
}

/// The command's arguments as clap reads them.
fn reparse(command: &str, args: &[String]) -> Result<super::Command> {
    let argv = ["qkd-audit".to_string(), command.to_string()].into_iter().chain(args.iter().cloned());
    Cli::try_parse_from(argv)
        .map(|c| c.command)
        .map_err(|e| Error::input(format!("the partial results' arguments do not parse as `{command}`: {e}")))
}

/// Runs `qkd-audit merge`.
pub fn cmd_merge(a: MergeArgs) -> Result<Outcome> {
    let tolerance = || super::tolerance::MergeOptions { output: a.output.clone(), force: a.force, quiet: a.quiet, json: a.json };
    // A tolerance search's folder without partial results: its result again, or what it needs.
    if let [dir] = a.partials.as_slice() {
        if dir.is_dir() && partial_files(&a.partials).is_err() {
            if let Some(state) = super::tolerance::read_state_file(dir)? {
                let super::Command::Tolerance(t) = reparse("tolerance", &state.args)? else { unreachable!("reparsed as tolerance") };
                return super::tolerance::report_state(t, state, dir, &tolerance());
            }
        }
    }
    let files = partial_files(&a.partials)?;
    let parts = check_partials(&a.partials)?;
    let command = reparse(&parts[0].command, &parts[0].args)?;
    match command {
        super::Command::Sweep(_) => merge_sweep(parts, &a),
        super::Command::Hunt(h) => super::hunt::merge_hunt(h, parts, a.output.clone(), a.force, a.quiet),
        super::Command::Run(r) => super::run::merge_run(r, parts, a.output.clone(), a.force, a.quiet),
        super::Command::Tolerance(t) => super::tolerance::merge_tolerance(t, parts, &files, &tolerance()),
        _ => Err(Error::input(format!("`{}` is not a sharded command", parts[0].command))),
    }
}

fn merge_sweep(parts: Vec<Partial>, a: &MergeArgs) -> Result<Outcome> {
    if let Some(o) = &a.output {
        crate::output::check_overwrite(o, a.force)?;
    }
    let units = parts[0].units as usize;
    let mut rows: Vec<Option<String>> = vec![None; units];
    let mut header = None;
    for p in parts {
        let payload = p.sweep.ok_or_else(|| Error::input(format!("shard {}/{} carries no sweep records", p.shard, p.shards)))?;
        if payload.rows.len() != p.indices.len() {
            return Err(Error::input(format!(
                "shard {}/{} lists {} units but {} records",
                p.shard,
                p.shards,
                p.indices.len(),
                payload.rows.len()
            )));
        }
        if p.indices.first() == Some(&0) {
            header = payload.header;
        }
        for (i, r) in p.indices.into_iter().zip(payload.rows) {
            rows[i as usize] = Some(r);
        }
    }
    let mut csv = header.ok_or_else(|| Error::input("the shard holding the first point carries no CSV header"))?;
    for r in rows {
        csv.push_str(&r.expect("every unit is owned by exactly one checked shard"));
    }
    match &a.output {
        Some(o) => {
            crate::output::write_atomic(o, csv.as_bytes(), a.force)?;
            note(&format!("wrote {units} points to {}", o.display()));
        }
        None => write_stdout(&mut std::io::stdout().lock(), &csv)?,
    }
    Ok(Outcome::Clean)
}
