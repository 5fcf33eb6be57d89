//! Shards of a job (`--shard K/N` on `sweep`, `hunt`, `run` and `tolerance`): which work units a shard
//! owns, and the partial result file it writes. `qkd-audit merge` ([`super::merge`]) joins
//! the partial results; its module doc describes the scheme and the file.

use super::common::note;
use crate::audit::engine::UnitCounts;
use crate::audit::tolerance::LookId;
use crate::audit::PointResult;
use crate::error::{Error, ErrorKind, Result};
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

/// The `format` value of every partial result file.
pub const FORMAT: &str = "qkd-audit partial result";

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
    /// `sweep`, `hunt`, `run` or `tolerance`.
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
    /// `tolerance`: the units of one round of the search.
    pub tolerance: Option<TolerancePayload>,
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

/// The units of a shard of one round.
#[derive(Debug, Serialize, Deserialize)]
pub struct TolerancePayload {
    /// Rounds merged into the state when the shard ran.
    pub round: u64,
    /// The looks of this round, in unit order.
    pub looks: Vec<LookId>,
    /// The units this shard computed.
    pub units: Vec<ShardUnit>,
}

/// One unit of a round: a chunk of one attack point's trials at one of the round's looks.
#[derive(Debug, Serialize, Deserialize)]
pub struct ShardUnit {
    /// Index into the round's looks.
    pub look: usize,
    /// The counts.
    pub counts: UnitCounts,
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
    ("--evidence", true),
    ("--json", false),
    ("--force", false),
    ("--quiet", false),
    ("-q", false),
];

/// The arguments of this process after the subcommand, without the options that never
/// change a result (`--shard`, `--shard-dir`, `--threads`, the output location, `--force`,
/// `--quiet`, and `--json`, which only `tolerance` has and its merge takes instead).
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
            tolerance: None,
        }
    }

    /// Writes the partial to `<dir>/<command>-shard-K-of-N.toml` (replacing an older one
    /// only with `force`) and, unless `quiet`, says so on stderr.
    pub fn write(&self, dir: &Path, force: bool, quiet: bool) -> Result<()> {
        std::fs::create_dir_all(dir).map_err(|e| Error::new(ErrorKind::Io, format!("cannot create {}: {e}", dir.display())))?;
        let path = dir.join(format!("{}-shard-{}-of-{}.toml", self.command, self.shard, self.shards));
        let text = toml::to_string(self).map_err(|e| Error::new(ErrorKind::Io, format!("cannot encode the partial result: {e}")))?;
        crate::output::write_atomic(&path, text.as_bytes(), force)?;
        if !quiet {
            note(&format!(
                "wrote shard {}/{} ({} of {} units) to {}",
                self.shard,
                self.shards,
                self.indices.len(),
                self.units,
                path.display()
            ));
        }
        Ok(())
    }
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
