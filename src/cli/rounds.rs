//! The `rounds` subcommand: the round-by-round log of one small block.

use super::common::{AttackArgs, Outcome};
use crate::audit::sample::round::{RoundRecord, RoundSampler};
use crate::audit::setup::Setup;
use crate::error::{Error, Result};
use crate::exact::signal::SignalModel;
use crate::numeric::rng::trial_rng;
use std::path::PathBuf;

/// Options of `rounds`.
#[derive(clap::Args, Debug)]
pub struct RoundsArgs {
    /// The attack.
    #[command(flatten)]
    pub attack: AttackArgs,
    /// Setup file for protocol, basis probabilities and test sample (default: built-in defaults).
    #[arg(long, value_name = "FILE")]
    pub setup: Option<PathBuf>,
    /// Number of signals (at most 1000000).
    #[arg(long, default_value_t = 1000)]
    pub signals: u64,
    /// Seed of the random stream.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Output CSV (default: stdout).
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace the output file if it exists.
    #[arg(long)]
    pub force: bool,
}

/// Runs `qkd-audit rounds`: the round-by-round log of one block (per-round sampler).
pub fn cmd_rounds(a: RoundsArgs) -> Result<Outcome> {
    if a.signals == 0 || a.signals > 1_000_000 {
        return Err(Error::input_key("--signals", format!("{} is outside [1, 1000000]", a.signals)));
    }
    let setup = match &a.setup {
        Some(p) => {
            let s = Setup::load(p)?;
            // The per-round log draws single photons on the ideal link only; a setup that
            // describes another link would be silently ignored, so it is refused.
            if !s.link.is_ideal_single_photon() {
                return Err(Error::input(
                    "rounds logs single photons on an ideal link (lossless, perfect detectors); this setup describes another \
                     source, channel or detector, which the log would ignore: remove those tables, or run a campaign",
                )
                .with_file(p));
            }
            s
        }
        None => Setup::default(),
    };
    let attack = a.attack.build()?;
    // Output problems (an existing file, an unwritable folder, another run) show before the work.
    let target = a.output.as_deref().map(|o| crate::output::prepare_file(o, a.force)).transpose()?;
    let model = SignalModel::new(&attack, setup.protocol, &setup.basis_probabilities());
    let mut rng = trial_rng(a.seed, 0, 0);
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut failure: Option<csv::Error> = None;
    let mut sink = |r: RoundRecord| {
        if failure.is_none() {
            if let Err(e) = w.serialize(&r) {
                failure = Some(e);
            }
        }
    };
    let test_size = |z: u64| setup.test_sample.size(z);
    RoundSampler::new(&model).sample(a.signals, &test_size, &mut rng, Some(&mut sink));
    if let Some(e) = failure {
        return Err(Error::input(e.to_string()));
    }
    let bytes = w.into_inner().map_err(|e| Error::input(e.to_string()))?;
    match target {
        Some(t) => t.commit(&bytes)?,
        None => {
            use std::io::Write;
            let mut out = std::io::stdout().lock();
            if let Err(e) = out.write_all(&bytes) {
                if e.kind() != std::io::ErrorKind::BrokenPipe {
                    return Err(e.into());
                }
            }
        }
    }
    Ok(Outcome::Clean)
}
