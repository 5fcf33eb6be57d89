//! The `sweep` subcommand: an attack file's parameter sweep as tidy CSV, computed in
//! parallel over points (the bytes do not depend on the number of threads), optionally one
//! shard of it (`--shard`, joined by `qkd-audit merge`).

use super::common::{note, thread_pool, write_stdout, Outcome, ProtocolArg};
use super::shard::{InputId, Partial, ShardArgs, SweepPayload};
use crate::attack::file as attack_file;
use crate::error::Result;
use crate::exact::eval::EvalOptions;
use crate::exact::sweep::{run_sweep_points, sweep_csv, sweep_header, sweep_row, sweep_values};
use crate::protocol::Protocol;
use std::path::PathBuf;

/// Options of `sweep`.
#[derive(clap::Args, Debug)]
pub struct SweepArgs {
    /// Attack file with a sweep table (a catalogue entry).
    #[arg(long, value_name = "PATH")]
    pub attack_file: PathBuf,
    /// Number of points (overrides the file's `steps`).
    #[arg(long, value_name = "N")]
    pub steps: Option<usize>,
    /// Protocol whose bound the attack is judged against.
    #[arg(long, value_enum, default_value_t = ProtocolArg::Bb84)]
    pub protocol: ProtocolArg,
    /// Output CSV file (default: stdout).
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace the output file if it exists.
    #[arg(long)]
    pub force: bool,
    /// Worker threads (default: all cores, or RAYON_NUM_THREADS). Results do not depend on it.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// Sharding.
    #[command(flatten)]
    pub shard: ShardArgs,
}

/// Runs `qkd-audit sweep`.
pub fn cmd_sweep(a: SweepArgs) -> Result<Outcome> {
    let protocol = Protocol::from(a.protocol);
    // Output problems (an existing file, an unwritable folder, another run) show before the
    // work; a shard writes its partial result instead.
    let target = match (&a.output, a.shard.shard) {
        (Some(o), None) => Some(crate::output::prepare_file(o, a.force)?),
        _ => None,
    };
    let text = std::fs::read_to_string(&a.attack_file).ok();
    let file = attack_file::load(&a.attack_file)?;
    let pool = thread_pool(a.threads)?;
    let opts = EvalOptions::full(protocol);
    if let Some(spec) = a.shard.shard {
        let clock = std::time::Instant::now();
        let (_, values) = sweep_values(&file, a.steps).map_err(|e| e.with_file(&a.attack_file))?;
        let points =
            pool.install(|| run_sweep_points(&file, a.steps, &opts, &|i| spec.owns(i as u64))).map_err(|e| e.with_file(&a.attack_file))?;
        let header = match points.first() {
            Some((0, p)) => Some(sweep_header(p)?),
            _ => None,
        };
        let rows = points.iter().map(|(_, p)| sweep_row(p)).collect::<Result<_>>()?;
        let inputs = vec![InputId {
            origin: a.attack_file.display().to_string(),
            sha256: crate::audit::report::manifest::sha256_hex(text.as_deref().unwrap_or("")),
        }];
        let mut partial = Partial::new("sweep", inputs, spec, values.len() as u64, clock.elapsed().as_secs_f64());
        partial.sweep = Some(SweepPayload { header, rows });
        partial.write(&a.shard.shard_dir, a.force)?;
        return Ok(Outcome::Clean);
    }
    let points = pool
        .install(|| run_sweep_points(&file, a.steps, &opts, &|_| true))
        .map_err(|e| e.with_file(&a.attack_file))?
        .into_iter()
        .map(|(_, p)| p)
        .collect::<Vec<_>>();
    let csv = sweep_csv(&points)?;
    match (target, &a.output) {
        (Some(t), Some(o)) => {
            t.commit(csv.as_bytes())?;
            note(&format!("wrote {} points to {}", points.len(), o.display()));
        }
        _ => write_stdout(&mut std::io::stdout().lock(), &csv)?,
    }
    Ok(Outcome::Clean)
}
