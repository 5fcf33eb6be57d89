//! The `sweep` subcommand: a catalogue entry's parameter sweep as tidy CSV, computed in
//! parallel over points (the bytes do not depend on the number of threads), optionally one
//! shard of it (`--shard`, joined by `qkd-audit merge`). The entry is a built-in one named
//! by `--attack` (as a campaign's `builtin = "…"` and `eval --attack` name it) or a file.

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
#[command(group(clap::ArgGroup::new("entry").required(true).args(["attack", "attack_file"])))]
pub struct SweepArgs {
    /// Built-in catalogue entry to sweep, by name (intercept-resend, breidbart,
    /// universal-cloner, phase-covariant-cloner, entangling-probe, pauli), with its own sweep
    /// table.
    #[arg(long, value_name = "NAME")]
    pub attack: Option<String>,
    /// Attack file with a sweep table (a catalogue entry).
    #[arg(long, value_name = "PATH")]
    pub attack_file: Option<PathBuf>,
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
    let (origin, text, file) = load(&a)?;
    // Errors of the sweep name the file, or the built-in entry.
    let at = |e: crate::error::Error| e.with_file(std::path::Path::new(&origin));
    let pool = thread_pool(a.threads)?;
    let opts = EvalOptions::full(protocol);
    if let Some(spec) = a.shard.shard {
        let clock = std::time::Instant::now();
        let (_, values) = sweep_values(&file, a.steps).map_err(at)?;
        let points = pool.install(|| run_sweep_points(&file, a.steps, &opts, &|i| spec.owns(i as u64))).map_err(at)?;
        let header = match points.first() {
            Some((0, p)) => Some(sweep_header(p)?),
            _ => None,
        };
        let rows = points.iter().map(|(_, p)| sweep_row(p)).collect::<Result<_>>()?;
        let inputs = vec![InputId { origin, sha256: crate::audit::report::manifest::sha256_hex(&text) }];
        let mut partial = Partial::new("sweep", inputs, spec, values.len() as u64, clock.elapsed().as_secs_f64());
        partial.sweep = Some(SweepPayload { header, rows });
        partial.write(&a.shard.shard_dir, a.force, false)?;
        return Ok(Outcome::Clean);
    }
    let points =
        pool.install(|| run_sweep_points(&file, a.steps, &opts, &|_| true)).map_err(at)?.into_iter().map(|(_, p)| p).collect::<Vec<_>>();
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

/// The entries of the built-in catalogue that `sweep` runs: qubit attacks with a sweep
/// table (link-level and detector attacks need a campaign's setup).
pub fn sweepable_entries() -> Vec<&'static str> {
    attack_file::builtin_entry_names()
        .into_iter()
        .filter(|name| {
            attack_file::builtin_entry_text(name, "--attack")
                .ok()
                .and_then(|t| attack_file::parse(t).ok())
                .is_some_and(|f| f.sweep().is_some() && !f.is_pulse_attack() && !f.is_device_attack())
        })
        .collect()
}

/// The entry to sweep: its origin (`builtin:<name>` or the path), text and parsed file.
fn load(a: &SweepArgs) -> Result<(String, String, attack_file::AttackFile)> {
    match (&a.attack, &a.attack_file) {
        (Some(name), None) => {
            let text = attack_file::builtin_entry_text(name, "--attack").map_err(|_| {
                let family = crate::attack::family(name).is_ok();
                crate::error::Error::input_key(
                    "--attack",
                    format!(
                        "no built-in entry `{name}` to sweep{}; the entries sweep runs are {} (link-level and detector attacks run \
                         in campaigns; --attack-file takes an entry of your own)",
                        if family { " (it is an attack family: name one of its catalogue entries)" } else { "" },
                        sweepable_entries().join(", ")
                    ),
                )
            })?;
            let file = attack_file::parse(text).map_err(|mut errs| errs.remove(0).with_key("--attack"))?;
            Ok((format!("builtin:{name}"), text.to_string(), file))
        }
        (None, Some(path)) => {
            let file = attack_file::load(path)?;
            let text = std::fs::read_to_string(path).unwrap_or_default();
            Ok((path.display().to_string(), text, file))
        }
        _ => Err(crate::error::Error::input("give exactly one of --attack and --attack-file")),
    }
}
