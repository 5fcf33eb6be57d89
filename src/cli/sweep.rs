//! The `sweep` subcommand: an attack file's parameter sweep as tidy CSV.

use super::common::{note, write_stdout, Outcome, ProtocolArg};
use crate::attack::file as attack_file;
use crate::error::Result;
use crate::exact::eval::EvalOptions;
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
}

/// Runs `qkd-audit sweep`.
pub fn cmd_sweep(a: SweepArgs) -> Result<Outcome> {
    let protocol = Protocol::from(a.protocol);
    // Output problems (an existing file, an unwritable folder, another run) show before the work.
    let target = a.output.as_deref().map(|o| crate::output::prepare_file(o, a.force)).transpose()?;
    let file = attack_file::load(&a.attack_file)?;
    let points = crate::exact::sweep::run_sweep(&file, a.steps, &EvalOptions::full(protocol)).map_err(|e| e.with_file(&a.attack_file))?;
    let csv = crate::exact::sweep::sweep_csv(&points)?;
    match (target, &a.output) {
        (Some(t), Some(o)) => {
            t.commit(csv.as_bytes())?;
            note(&format!("wrote {} points to {}", points.len(), o.display()));
        }
        _ => write_stdout(&mut std::io::stdout().lock(), &csv)?,
    }
    Ok(Outcome::Clean)
}
