//! Command-line interface: argument parsing (clap) and one function per subcommand.
//!
//! Results go to stdout or to files; diagnostics go to stderr. Each subcommand returns an
//! [`Outcome`] that `main` maps to the exit status: 0 clean, 1 findings, 2 error.

pub mod common;
pub mod eval;
pub mod sweep;
pub mod thresholds;
pub mod validate;
pub mod run;
pub mod rounds;
pub mod keyrate;
pub mod hunt;
pub mod report;
pub mod compare;
pub mod tolerance;
pub mod shard;
pub mod merge;

pub use common::Outcome;

use crate::error::Result;

use clap::{Parser, Subcommand};

/// Audit quantum key distribution configurations against eavesdropping attacks and the
/// proven security bounds.
#[derive(Parser, Debug)]
#[command(name = "qkd-audit", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Evaluate one single-photon attack exactly: error rates, Eve's information, bounds.
    Eval(eval::EvalArgs),
    /// Evaluate a catalogue entry's parameter sweep (a built-in by name, or a file) and
    /// write a tidy CSV.
    Sweep(sweep::SweepArgs),
    /// Print the zero-rate and attack thresholds, each computed and with its source.
    Thresholds(thresholds::ThresholdArgs),
    /// Check input files (campaigns, setups, attack files, rule files) and report every
    /// problem found, each with file, line and column.
    Validate(validate::ValidateArgs),
    /// Run a finite-key audit campaign and write the attack-versus-bound table
    /// (without a file: the built-in demo campaign).
    Run(run::RunArgs),
    /// Write the round-by-round log of one small block as CSV.
    Rounds(rounds::RoundsArgs),
    /// Asymptotic key rate per pulse against distance for the link rules (weak pulses with or
    /// without decoys, or single photons), and each rule's maximum distance.
    Keyrate(keyrate::KeyrateArgs),
    /// Search numerically for the strongest attack, to test how tight each bound is.
    Hunt(hunt::HuntArgs),
    /// Rebuild a results folder's self-contained HTML evidence report (report.html) from its
    /// table and manifest.
    Report(report::ReportArgs),
    /// Compare two results folders: verdict changes, leaks gained or lost, key length per
    /// point (exit 1 when B leaks where A did not).
    Compare(compare::CompareArgs),
    /// Find the value of one setup key (block size, abort threshold, distance, …) at which
    /// a key-length rule starts to leak, or to give no key, against the strongest of a
    /// campaign's attacks; exit status 1 if the configured setup is not shown safe.
    Tolerance(tolerance::ToleranceArgs),
    /// Join the partial results of a job run in shards (`--shard K/N` of sweep, hunt, run
    /// or tolerance) into exactly what the unsharded command writes; a tolerance search is
    /// merged round by round until it is finished.
    Merge(merge::MergeArgs),
}

/// Runs the parsed command.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Eval(a) => eval::cmd_eval(a),
        Command::Sweep(a) => sweep::cmd_sweep(a),
        Command::Thresholds(a) => thresholds::cmd_thresholds(a),
        Command::Validate(a) => validate::cmd_validate(a),
        Command::Run(a) => run::cmd_run(a),
        Command::Rounds(a) => rounds::cmd_rounds(a),
        Command::Keyrate(a) => keyrate::cmd_keyrate(a),
        Command::Hunt(a) => hunt::cmd_hunt(a),
        Command::Report(a) => report::cmd_report(a),
        Command::Compare(a) => compare::cmd_compare(a),
        Command::Tolerance(a) => tolerance::cmd_tolerance(a),
        Command::Merge(a) => merge::cmd_merge(a),
    }
}
