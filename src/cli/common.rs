//! What the subcommands share: the [`Outcome`] that `main` maps to an exit status, the
//! attack options of `eval` and `rounds`, `--set` and `--protocol` parsing, and writing to
//! stdout.

use crate::attack::file as attack_file;
use crate::attack::{Attack, Value, FAMILIES};
use crate::error::{Error, Result};
use crate::protocol::Protocol;
use std::collections::BTreeMap;
use std::io::Write;
use std::path::PathBuf;

/// What a command found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Nothing to report (exit 0).
    Clean,
    /// Findings such as a leak verdict (exit 1).
    Findings,
}

/// Which single-photon attack a command works on (shared by `eval` and `rounds`).
#[derive(clap::Args, Debug)]
pub struct AttackArgs {
    /// Built-in attack: a family (intercept-resend, cloner, entangling-probe, pauli) or a
    /// catalogue entry (breidbart, universal-cloner, phase-covariant-cloner, …) with its
    /// parameters; --set overrides either.
    #[arg(long, conflicts_with = "attack_file", required_unless_present = "attack_file")]
    pub attack: Option<String>,
    /// Attack file: a catalogue entry or a kraus file (see attacks/README.md).
    #[arg(long, value_name = "PATH")]
    pub attack_file: Option<PathBuf>,
    /// Set an attack parameter, e.g. --set fraction=0.5 (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    pub set: Vec<String>,
}

impl AttackArgs {
    /// Builds the chosen attack; errors name the file or the `--set` key at fault.
    pub fn build(&self) -> Result<Attack> {
        let sets = parse_sets(&self.set)?;
        match (&self.attack, &self.attack_file) {
            (Some(name), None) => {
                // Parameter errors name their key; under `eval` that key came from `--set`.
                let from_set = |e: Error| if e.key().is_some() { e.with_key("--set") } else { e };
                if let Ok(family) = crate::attack::family(name) {
                    Attack::builtin(family.name(), &sets).map_err(from_set)
                } else if attack_file::builtin_entry_names().contains(&name.as_str()) {
                    let text = attack_file::builtin_entry_text(name, "--attack")?;
                    let entry = attack_file::parse(text).map_err(|mut errs| errs.remove(0))?;
                    if entry.is_pulse_attack() {
                        return Err(Error::input_key(
                            "--attack",
                            format!("`{name}` attacks the pulses of an optical link: use it in a campaign, whose setup describes the link"),
                        ));
                    }
                    let mut attack = entry.attack(&sets).map_err(from_set)?;
                    attack.label = name.clone();
                    Ok(attack)
                } else {
                    let families: Vec<&str> = FAMILIES.iter().map(|f| f.name()).collect();
                    Err(Error::input_key(
                        "--attack",
                        format!(
                            "no built-in attack `{name}`; families are {}; catalogue entries are {}",
                            families.join(", "),
                            attack_file::builtin_entry_names().join(", ")
                        ),
                    ))
                }
            }
            (None, Some(p)) => attack_file::load(p)?.attack(&sets).map_err(|e| e.with_file(p)),
            _ => Err(Error::input("give exactly one of --attack and --attack-file")),
        }
    }
}

/// `--protocol`: the protocol whose bases and bound apply.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum ProtocolArg {
    /// BB84: bases Z and X.
    Bb84,
    /// The six-state protocol: bases Z, X and Y.
    SixState,
}

impl From<ProtocolArg> for Protocol {
    fn from(p: ProtocolArg) -> Protocol {
        match p {
            ProtocolArg::Bb84 => Protocol::Bb84,
            ProtocolArg::SixState => Protocol::SixState,
        }
    }
}

/// Parses `KEY=VALUE` overrides.
pub fn parse_sets(sets: &[String]) -> Result<BTreeMap<String, Value>> {
    let mut out = BTreeMap::new();
    for s in sets {
        let (k, v) = s.split_once('=').ok_or_else(|| Error::input_key("--set", format!("`{s}` is not KEY=VALUE")))?;
        if k.trim().is_empty() {
            return Err(Error::input_key("--set", format!("`{s}` has an empty key")));
        }
        if let Some(old) = out.insert(k.trim().to_string(), Value::parse(v)) {
            note(&format!("warning: --set {} given more than once; the last value ({}) replaces {old}", k.trim(), v.trim()));
        }
    }
    Ok(out)
}

/// `text` with every control character but the line break written as a `\u{…}` escape,
/// so that a value a user wrote (echoed in an error) cannot drive the terminal.
pub fn printable(text: &str) -> String {
    text.chars().map(|c| if c.is_control() && c != '\n' { c.escape_unicode().to_string() } else { c.to_string() }).collect()
}

/// A diagnostic line on stderr, made [`printable`]. Never panics: if stderr is closed or
/// full the line is dropped, and the command's outcome is unchanged.
pub fn note(text: &str) {
    let mut err = std::io::stderr().lock();
    let _ = writeln!(err, "{}", printable(text));
}

/// Writes `text` to stdout. A closed pipe (`| head`, `| true`) is not an error: the
/// command keeps its outcome. Any other write failure (a full disk, `> /dev/full`) is an
/// error, never a panic.
pub fn print(text: &str) -> Result<()> {
    write_stdout(&mut std::io::stdout().lock(), text)
}

/// Writes to `out`; a closed pipe (e.g. `| head`) is not an error (see [`fn@print`]).
pub fn write_stdout(out: &mut impl Write, text: &str) -> Result<()> {
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        // A closed pipe (e.g. `| head`) is not an error.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Error::new(crate::error::ErrorKind::Io, format!("cannot write to stdout: {e}"))),
    }
}

/// Most worker threads `--threads` accepts: more only adds memory and scheduling; results
/// do not change.
pub const MAX_THREADS: usize = 256;

/// A rayon pool of `threads` workers (default: all cores, or RAYON_NUM_THREADS).
pub fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool> {
    let mut b = rayon::ThreadPoolBuilder::new();
    if let Some(n) = threads {
        if n == 0 || n > MAX_THREADS {
            return Err(crate::error::Error::input_key("--threads", format!("{n} is outside [1, {MAX_THREADS}]")));
        }
        b = b.num_threads(n);
    }
    b.build().map_err(|e| crate::error::Error::input(format!("cannot start worker threads: {e}")))
}
