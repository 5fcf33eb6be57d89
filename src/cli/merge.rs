//! Shards and the `merge` subcommand: splitting `sweep`, `hunt` and `run` over separate
//! processes (a cluster's job array, say) and joining their partial results into exactly
//! what the unsharded command writes.
//!
//! Work units: a sweep's points, a campaign's attack points, a hunt's (target, start)
//! pairs, numbered in the order the unsharded command takes them. Shard K of N
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
//! This module reads the three commands' arguments back with clap; it must not compute
//! anything those commands do not.

use super::common::{note, write_stdout, Outcome};
use super::Cli;
use crate::audit::PointResult;
use crate::error::{Error, ErrorKind, Result};
use clap::Parser;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::str::FromStr;

/// Most shards a job may be split into: more than any cluster array a user would submit
/// (Slurm's default `MaxArraySize` is 1001), and a bound on the files a merge opens.
pub const MAX_SHARDS: usize = 100_000;

/// `--shard K/N`: this process computes shard K of N.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ShardSpec {
    /// Shard number, 1..=N.
    pub k: usize,
    /// Number of shards.
    pub n: usize,
}

impl FromStr for ShardSpec {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let bad = || format!("`{s}` is not K/N with 1 <= K <= N <= {MAX_SHARDS} (e.g. 3/8)");
        let (k, n) = s.split_once('/').ok_or_else(bad)?;
        let (k, n): (usize, usize) = (k.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
        if k == 0 || k > n || n > MAX_SHARDS {
            return Err(bad());
        }
        Ok(ShardSpec { k, n })
    }
}

impl ShardSpec {
    /// Whether unit `u` belongs to this shard.
    pub fn owns(&self, u: u64) -> bool {
        u % self.n as u64 == (self.k - 1) as u64
    }
    /// The units of `0..units` this shard owns.
    pub fn units(&self, units: u64) -> Vec<u64> {
        ((self.k - 1) as u64..units).step_by(self.n).collect()
    }
}

/// Options shared by the sharded commands.
#[derive(clap::Args, Debug, Clone)]
pub struct ShardArgs {
    /// Compute only shard K of N (1 <= K <= N) and write a partial result to --shard-dir;
    /// join the N partial results with `qkd-audit merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<ShardSpec>,
    /// Folder for the partial result of --shard (created if missing).
    #[arg(long, value_name = "DIR", default_value = "shards", requires = "shard")]
    pub shard_dir: PathBuf,
}

const FORMAT: &str = "qkd-audit partial result";

/// One input's identity in a partial file.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct InputId {
    /// Path or `builtin:<name>`.
    pub origin: String,
    /// SHA-256 of its text, hex.
    pub sha256: String,
}

/// A shard's partial result.
#[derive(Debug, Serialize, Deserialize)]
pub struct Partial {
    /// Always "qkd-audit partial result".
    pub format: String,
    /// Tool version.
    pub version: String,
    /// `sweep`, `hunt` or `run`.
    pub command: String,
    /// The arguments that determine the result.
    pub args: Vec<String>,
    /// Input files.
    pub inputs: Vec<InputId>,
    /// This shard's number K.
    pub shard: usize,
    /// Number of shards N.
    pub shards: usize,
    /// Work units of the whole job.
    pub units: u64,
    /// Units this shard computed.
    pub indices: Vec<u64>,
    /// Wall-clock seconds this shard took.
    pub elapsed_s: f64,
    /// `sweep`: the CSV header (with its line end) and one CSV record per point.
    pub sweep: Option<SweepPayload>,
    /// `hunt`: one result per (target, start).
    pub hunt: Option<Vec<HuntStart>>,
    /// `run`: the point results (every rule of each point).
    pub run: Option<Vec<PointResult>>,
}

/// Sweep records of a shard.
#[derive(Debug, Serialize, Deserialize)]
pub struct SweepPayload {
    /// The header line (every shard with a point has the same one).
    pub header: Option<String>,
    /// CSV records, one per unit of `indices`, in that order.
    pub rows: Vec<String>,
}

/// One optimised start of a hunt.
#[derive(Debug, Serialize, Deserialize)]
pub struct HuntStart {
    /// Final parameters of the start (absent when the start failed).
    pub x: Option<Vec<f64>>,
    /// The start's error, if it failed.
    pub error: Option<String>,
}

/// Options that never change a result: dropped from the arguments that identify a job.
/// (flag, takes a value)
const NEUTRAL_OPTIONS: &[(&str, bool)] = &[
    ("--shard", true),
    ("--shard-dir", true),
    ("--threads", true),
    ("--output", true),
    ("-o", true),
    ("--results-dir", true),
    ("--out-dir", true),
    ("--force", false),
    ("--quiet", false),
    ("-q", false),
];

/// The arguments of this process after the subcommand, without [`NEUTRAL_OPTIONS`].
pub fn identity_args() -> Vec<String> {
    let all: Vec<String> = std::env::args().skip(2).collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < all.len() {
        let a = &all[i];
        let (name, inline) = match a.split_once('=') {
            Some((n, _)) if a.starts_with("--") => (n, true),
            _ => (a.as_str(), false),
        };
        match NEUTRAL_OPTIONS.iter().find(|(f, _)| *f == name) {
            Some((_, takes)) => i += if *takes && !inline { 2 } else { 1 },
            None => {
                out.push(a.clone());
                i += 1;
            }
        }
    }
    out
}

impl Partial {
    /// A partial result of `command` for `shard` over `units` units, payload unset.
    pub fn new(command: &str, inputs: Vec<InputId>, shard: ShardSpec, units: u64, elapsed_s: f64) -> Self {
        Partial {
            format: FORMAT.to_string(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            command: command.to_string(),
            args: identity_args(),
            inputs,
            shard: shard.k,
            shards: shard.n,
            units,
            indices: shard.units(units),
            elapsed_s,
            sweep: None,
            hunt: None,
            run: None,
        }
    }

    /// Writes the partial to `<dir>/<command>-shard-K-of-N.toml` (replacing an older one
    /// only with `force`) and says so on stderr.
    pub fn write(&self, dir: &Path, force: bool) -> Result<()> {
        std::fs::create_dir_all(dir).map_err(|e| Error::new(ErrorKind::Io, format!("cannot create {}: {e}", dir.display())))?;
        let path = dir.join(format!("{}-shard-{}-of-{}.toml", self.command, self.shard, self.shards));
        let text = toml::to_string(self).map_err(|e| Error::new(ErrorKind::Io, format!("cannot encode the partial result: {e}")))?;
        crate::output::write_atomic(&path, text.as_bytes(), force)?;
        note(&format!("wrote shard {}/{} ({} of {} units) to {}", self.shard, self.shards, self.indices.len(), self.units, path.display()));
        Ok(())
    }
}

/// Options of `merge`.
#[derive(clap::Args, Debug)]
pub struct MergeArgs {
    /// Partial results of one sharded job (files, or folders holding `*-shard-*-of-*.toml`),
    /// all N of them.
    #[arg(required = true, value_name = "PARTIAL")]
    pub partials: Vec<PathBuf>,
    /// Where the merged result goes: for `sweep` the CSV file (default: stdout), for `hunt`
    /// the output folder (default: results/hunt-OBJECTIVE-PROTOCOL), for `run` the folder
    /// that receives `<campaign name>/` (default: results).
    #[arg(short, long, value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Replace an existing output file or folder.
    #[arg(long)]
    pub force: bool,
    /// No summary line on stderr (as `run --quiet`).
    #[arg(long, short)]
    pub quiet: bool,
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
        return Err(Error::input(format!("missing shard(s) {}: a merge needs all {n}", missing.join(", "))));
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
    let parts = check_partials(&a.partials)?;
    let command = reparse(&parts[0].command, &parts[0].args)?;
    match command {
        super::Command::Sweep(_) => merge_sweep(parts, &a),
        super::Command::Hunt(h) => super::hunt::merge_hunt(h, parts, a.output.clone(), a.force),
        super::Command::Run(r) => super::run::merge_run(r, parts, a.output.clone(), a.force, a.quiet),
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shard_specs_parse_and_partition_the_units() {
        assert_eq!("2/5".parse::<ShardSpec>(), Ok(ShardSpec { k: 2, n: 5 }));
        for bad in ["0/3", "4/3", "3", "a/b", "1/0", "1/1000000"] {
            assert!(bad.parse::<ShardSpec>().is_err(), "{bad}");
        }
        for n in 1..7usize {
            let mut seen = [0; 11];
            for k in 1..=n {
                for u in (ShardSpec { k, n }).units(11) {
                    assert!((ShardSpec { k, n }).owns(u));
                    seen[u as usize] += 1;
                }
            }
            assert!(seen.iter().all(|&c| c == 1), "N = {n}");
        }
    }
}
