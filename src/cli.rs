//! Command-line interface: argument parsing (clap) and one function per subcommand.
//!
//! Results go to stdout or to files; diagnostics go to stderr. Each subcommand returns an
//! [`Outcome`] that `main` maps to the exit status: 0 clean, 1 findings, 2 error.

use crate::attack::file::{self as attack_file, AttackFile};
use crate::attack::{Attack, Value, FAMILIES};
use crate::error::{Error, Result};
use crate::eval::{evaluate, EvalOptions, Evaluation};
use crate::protocol::Protocol;
use clap::{Parser, Subcommand};
use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

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
    Eval(EvalArgs),
    /// Evaluate an attack file's parameter sweep and write a tidy CSV.
    Sweep(SweepArgs),
    /// Print the zero-rate and attack thresholds, each computed and with its source.
    Thresholds(ThresholdArgs),
    /// Check attack files and report every problem found.
    Validate(ValidateArgs),
    /// Run a finite-key audit campaign and write the attack-versus-bound table
    /// (without a file: the built-in demo campaign).
    Run(crate::audit::cli::RunArgs),
    /// Write the round-by-round log of one small block as CSV.
    Rounds(crate::audit::cli::RoundsArgs),
    /// Asymptotic key rate per pulse against distance for the link rules (weak pulses with or
    /// without decoys, or single photons), and each rule's maximum distance.
    Keyrate(KeyrateArgs),
    /// Search numerically for the strongest attack, to test how tight each bound is.
    Hunt(HuntArgs),
}

/// Which single-photon attack a command works on (shared by `eval` and `rounds`).
#[derive(clap::Args, Debug)]
pub struct AttackArgs {
    /// Built-in attack family: intercept-resend, cloner, entangling-probe, pauli.
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
            (Some(f), None) => Attack::builtin(f, &sets).map_err(|e| {
                if e.key().is_some() && !e.message().contains("unknown attack family") {
                    e.with_key("--set")
                } else {
                    e
                }
            }),
            (None, Some(p)) => load_attack_file(p)?.attack(&sets).map_err(|e| e.with_file(p)),
            _ => Err(Error::input("give exactly one of --attack and --attack-file")),
        }
    }
}

/// Options of `eval`.
#[derive(clap::Args, Debug)]
pub struct EvalArgs {
    /// The attack.
    #[command(flatten)]
    pub attack: AttackArgs,
    /// Protocol whose bound the attack is judged against.
    #[arg(long, default_value = "bb84", value_parser = ["bb84", "six-state"])]
    pub protocol: String,
    /// Print one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Options of `sweep`.
#[derive(clap::Args, Debug)]
pub struct SweepArgs {
    /// Attack file with a [sweep] table (catalogue entry).
    #[arg(long, value_name = "PATH")]
    pub attack_file: PathBuf,
    /// Number of points (overrides the file's `steps`).
    #[arg(long, value_name = "N")]
    pub steps: Option<usize>,
    /// Protocol whose bound the attack is judged against.
    #[arg(long, default_value = "bb84", value_parser = ["bb84", "six-state"])]
    pub protocol: String,
    /// Output CSV file (default: stdout).
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace the output file if it exists.
    #[arg(long)]
    pub force: bool,
}

/// Options of `thresholds`.
#[derive(clap::Args, Debug)]
pub struct ThresholdArgs {
    /// Error-correction efficiency f ≥ 1 (leak = f·h(Q) per bit); 1 is the Shannon limit.
    #[arg(long, default_value_t = 1.0, value_name = "F")]
    pub f_ec: f64,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Options of `validate`.
#[derive(clap::Args, Debug)]
pub struct ValidateArgs {
    /// Attack files to check.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
}

/// Options of `keyrate`.
#[derive(clap::Args, Debug)]
pub struct KeyrateArgs {
    /// Setup file with a [source] (weak-coherent: the weak-pulse rules; single-photon: the
    /// single-photon rate), [channel] (attenuation, dB/km) and [detector]; default: the standard parameter set of Ma, Qi, Zhao, Lo (2005): 0.21 dB/km,
    /// η_Bob = 0.045, Y₀ = 1.7e-6, e_d = 0.033, μ = 0.48, weak decoy ν = 0.05.
    #[arg(long, value_name = "FILE")]
    pub setup: Option<PathBuf>,
    /// First distance, km.
    #[arg(long, default_value_t = 0.0)]
    pub from_km: f64,
    /// Last distance, km.
    #[arg(long, default_value_t = 200.0)]
    pub to_km: f64,
    /// Number of distances.
    #[arg(long, default_value_t = 201)]
    pub steps: usize,
    /// Optimise the signal intensity μ at each distance (otherwise the setup's μ).
    #[arg(long)]
    pub optimize_mu: bool,
    /// Error-correction efficiency f (default: the setup's, or 1.22 with the default link).
    #[arg(long, value_name = "F")]
    pub f_ec: Option<f64>,
    /// Sifting factor q: fraction of detections kept (½ for symmetric BB84).
    #[arg(long, default_value_t = 0.5)]
    pub sifting: f64,
    /// Output CSV (default: stdout).
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Also write an SVG plot of rate against distance.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
    /// Replace output files that exist.
    #[arg(long)]
    pub force: bool,
}

fn cmd_keyrate(a: KeyrateArgs) -> Result<Outcome> {
    use crate::keyrate::{max_distance, rate_table, LinkRule, RateParams};
    use crate::link::Link;
    crate::error::check_range("--sifting", a.sifting, 1e-6, 1.0)?;
    crate::error::check_range("--from-km", a.from_km, 0.0, 1000.0)?;
    crate::error::check_range("--to-km", a.to_km, a.from_km, 1000.0)?;
    if a.steps == 0 || a.steps > 1_000_000 {
        return Err(Error::input_key("--steps", format!("{} is outside [1, 1000000]", a.steps)));
    }
    for o in [&a.output, &a.svg].into_iter().flatten() {
        crate::output::check_overwrite(o, a.force)?;
    }
    let (link, f_default) = match &a.setup {
        Some(p) => {
            let s = crate::setup::Setup::load(p)?;
            (s.link, s.ec_efficiency)
        }
        None => (Link::reference_parameter_set(), 1.22),
    };
    if link.attenuation_db_per_km.is_none() {
        return Err(Error::input_key(
            "channel.attenuation_db_per_km",
            "keyrate sweeps distance: give the channel as length_km and attenuation_db_per_km",
        ));
    }
    let f_ec = a.f_ec.unwrap_or(f_default);
    crate::error::check_range("--f-ec", f_ec, 1.0, 3.0)?;
    let ints = link.source.intensities();
    let nu = ints.iter().skip(1).map(|x| x.0).filter(|m| *m > 0.0).fold(f64::NAN, f64::min);
    let mut rules = if ints.is_empty() {
        vec![LinkRule::SinglePhoton]
    } else {
        vec![LinkRule::NaiveSinglePhoton, LinkRule::GllpNoDecoy, LinkRule::DecoyIdeal]
    };
    if nu.is_finite() {
        rules.push(LinkRule::DecoyVacuumWeak);
    }
    let params = RateParams { sifting: a.sifting, f_ec, nu: if nu.is_finite() { nu } else { 0.0 } };
    // A single-photon source has no intensity to set or optimise.
    let mu = if a.optimize_mu || ints.is_empty() { None } else { Some(ints[0].0) };
    let distances: Vec<f64> = if a.steps == 1 {
        vec![a.from_km]
    } else {
        (0..a.steps).map(|i| a.from_km + (a.to_km - a.from_km) * i as f64 / (a.steps - 1) as f64).collect()
    };
    let rows = rate_table(&link, &distances, &rules, mu, &params);
    let mut w = csv::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| Error::new(crate::error::ErrorKind::Io, e.to_string());
    w.write_record(["distance_km", "transmittance", "rule", "mu_photons_per_pulse", "gain_per_pulse", "error_rate", "rate_bits_per_pulse"])
        .map_err(io)?;
    for r in &rows {
        w.write_record([
            crate::sweep::fmt_num(r.distance_km),
            crate::sweep::fmt_num(r.transmittance),
            r.rule.name().to_string(),
            crate::sweep::fmt_num(r.mu),
            crate::sweep::fmt_num(r.gain),
            crate::sweep::fmt_num(r.error_rate),
            crate::sweep::fmt_num(r.rate_bits_per_pulse),
        ])
        .map_err(io)?;
    }
    let csv_text = String::from_utf8(w.into_inner().map_err(|e| Error::input(e.to_string()))?).expect("csv is UTF-8");
    let mut table = format!(
        "maximum distance per rule ({}; f = {f_ec}, q = {}):\n",
        if ints.is_empty() {
            "single photons".to_string()
        } else if a.optimize_mu {
            "μ optimised".to_string()
        } else {
            format!("μ = {}", ints[0].0)
        },
        a.sifting
    );
    for &rule in &rules {
        let d = max_distance(rule, &link, mu, &params)?;
        table.push_str(&format!("  {:<22} {}\n", rule.name(), d.map_or("no key at 0 km".to_string(), |d| format!("{d:.2} km"))));
    }
    if let Some(svg) = &a.svg {
        crate::output::write_atomic(svg, crate::report::plots::keyrate_svg(&rows, &rules)?.as_bytes(), a.force)?;
    }
    match &a.output {
        Some(o) => {
            crate::output::write_atomic(o, csv_text.as_bytes(), a.force)?;
            write_stdout(&mut std::io::stdout().lock(), &table)?;
        }
        None => {
            write_stdout(&mut std::io::stdout().lock(), &csv_text)?;
            eprint!("{table}");
        }
    }
    Ok(Outcome::Clean)
}

/// Options of `hunt`.
#[derive(clap::Args, Debug)]
pub struct HuntArgs {
    /// What to maximise: holevo, accessible, guess (Eve's information or guessing
    /// probability about the key bit) or game (the guessing game).
    #[arg(long, value_parser = ["holevo", "accessible", "guess", "game"])]
    pub objective: String,
    /// Protocol: its error-rate constraints and its bound.
    #[arg(long, default_value = "bb84", value_parser = ["bb84", "six-state"])]
    pub protocol: String,
    /// Dimension of Eve's register, 2..8.
    #[arg(long, default_value_t = 4)]
    pub eve_dim: usize,
    /// Error-rate targets Q (QBER ≤ Q in every basis), comma-separated fractions.
    #[arg(long, value_delimiter = ',', default_values_t = vec![0.02, 0.05, 0.1])]
    pub q: Vec<f64>,
    /// Random starts per target (run in parallel).
    #[arg(long, default_value_t = 16)]
    pub starts: usize,
    /// Seed of the starts.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// L-BFGS iterations per penalty stage.
    #[arg(long, default_value_t = 100)]
    pub iters: u64,
    /// The guessing game in its own setting with this many rounds (B untrusted); with
    /// --objective game only.
    #[arg(long)]
    pub rounds: Option<usize>,
    /// Dimension of B's system in the game setting.
    #[arg(long, default_value_t = 2)]
    pub dim_b: usize,
    /// Dimension of E's system in the game setting.
    #[arg(long, default_value_t = 2)]
    pub dim_e: usize,
    /// Output folder for hunt.csv and the best attack per target as kraus files
    /// (default: results/hunt-<objective>-<protocol>).
    #[arg(long, value_name = "DIR")]
    pub out_dir: Option<PathBuf>,
    /// Replace the output folder if it exists.
    #[arg(long)]
    pub force: bool,
}

fn cmd_hunt(a: HuntArgs) -> Result<Outcome> {
    use crate::hunt::{hunt, HuntOptions, Objective};
    let objective: Objective = a.objective.parse().map_err(|e: String| Error::input_key("--objective", e))?;
    let protocol = parse_protocol(&a.protocol)?;
    if let Some(n) = a.rounds {
        if objective != Objective::Game {
            return Err(Error::input_key("--rounds", "the multi-round game setting needs --objective game"));
        }
        let r = crate::game::hunt_game(n, a.dim_b, a.dim_e, a.starts, a.seed, 500)?;
        let exceeded = r.value > r.bound + 1e-9;
        let text = format!(
            "guessing game, {} round(s), dim B = {}, dim E = {}, {} starts: best winning probability {:.12}; bound (1/2 + 1/(2*sqrt 2))^{} = {:.12}; gap {:.3e}\n",
            n, a.dim_b, a.dim_e, a.starts, r.value, n, r.bound, r.bound - r.value
        );
        write_stdout(&mut std::io::stdout().lock(), &text)?;
        if exceeded {
            eprintln!("BOUND VIOLATED: the game hunt exceeded (1/2 + 1/(2 sqrt 2))^n; this is a finding about the code or the bound");
            return Ok(Outcome::Findings);
        }
        return Ok(Outcome::Clean);
    }
    let dir = a.out_dir.clone().unwrap_or_else(|| PathBuf::from(format!("results/hunt-{}-{}", objective.name(), protocol)));
    if dir.exists() && !a.force {
        return Err(
            Error::input("output folder already exists; refusing to overwrite results (pass --force to replace it)").with_file(&dir)
        );
    }
    let opts = HuntOptions { protocol, objective, eve_dim: a.eve_dim, starts: a.starts, seed: a.seed, max_iters: a.iters };
    let points = hunt(&opts, &a.q)?;
    let unit = match objective {
        Objective::Holevo | Objective::Accessible => "bits",
        Objective::Guess | Objective::Game => "probability",
    };
    let mut w = csv::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| Error::new(crate::error::ErrorKind::Io, e.to_string());
    w.write_record([
        "q",
        "objective",
        "unit",
        "protocol",
        "eve_dim",
        "value",
        "bound",
        "gap",
        "bound_at_attack_qber",
        "qber_z",
        "qber_x",
        "qber_y",
        "feasible_starts",
        "starts",
        "attack_file",
    ])
    .map_err(io)?;
    let mut files = Vec::new();
    let mut violations = 0;
    for p in &points {
        let file = format!("attack_q{}.toml", p.q);
        let name = format!("hunted-{}-{}-q{}", objective.name(), protocol, p.q);
        let desc = format!("best {} attack found at Q = {} (value {:.12}, bound {:.12})", objective.name(), p.q, p.value, p.bound);
        files.push((file.clone(), crate::attack::file::kraus_toml(&name, &desc, p.attack.eve_dim, p.attack.channel.operators())));
        if p.value > p.bound_at_attack + 1e-9 {
            violations += 1;
        }
        let n = crate::sweep::fmt_num;
        w.write_record([
            n(p.q),
            objective.name().to_string(),
            unit.to_string(),
            protocol.to_string(),
            p.attack.eve_dim.to_string(),
            n(p.value),
            n(p.bound),
            n(p.bound - p.value),
            n(p.bound_at_attack),
            n(p.eval.qber_z),
            n(p.eval.qber_x),
            n(p.eval.qber_y),
            p.feasible_starts.to_string(),
            a.starts.to_string(),
            file,
        ])
        .map_err(io)?;
    }
    let csv_text = String::from_utf8(w.into_inner().map_err(|e| Error::input(e.to_string()))?).expect("csv is UTF-8");
    files.push(("hunt.csv".to_string(), csv_text.clone()));
    crate::output::write_folder_files(&dir, &files, a.force)?;
    write_stdout(&mut std::io::stdout().lock(), &csv_text)?;
    eprintln!("wrote {}", dir.display());
    if violations > 0 {
        eprintln!("BOUND VIOLATED at {violations} target(s): keep the attack files as regression fixtures; this is a finding about the code or the bound");
        return Ok(Outcome::Findings);
    }
    Ok(Outcome::Clean)
}

/// What a command found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Nothing to report (exit 0).
    Clean,
    /// Findings such as a leak verdict (exit 1).
    Findings,
}

/// Runs the parsed command.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Eval(a) => cmd_eval(a),
        Command::Sweep(a) => cmd_sweep(a),
        Command::Thresholds(a) => cmd_thresholds(a),
        Command::Validate(a) => cmd_validate(a),
        Command::Run(a) => crate::audit::cli::cmd_run(a),
        Command::Rounds(a) => crate::audit::cli::cmd_rounds(a),
        Command::Keyrate(a) => cmd_keyrate(a),
        Command::Hunt(a) => cmd_hunt(a),
    }
}

fn parse_protocol(s: &str) -> Result<Protocol> {
    s.parse().map_err(|e: String| Error::input_key("--protocol", e))
}

/// Parses `KEY=VALUE` overrides.
pub fn parse_sets(sets: &[String]) -> Result<BTreeMap<String, Value>> {
    let mut out = BTreeMap::new();
    for s in sets {
        let (k, v) = s.split_once('=').ok_or_else(|| Error::input_key("--set", format!("`{s}` is not KEY=VALUE")))?;
        if k.trim().is_empty() {
            return Err(Error::input_key("--set", format!("`{s}` has an empty key")));
        }
        out.insert(k.trim().to_string(), Value::parse(v));
    }
    Ok(out)
}

fn load_attack_file(path: &Path) -> Result<AttackFile> {
    attack_file::load(path)
}

fn cmd_eval(a: EvalArgs) -> Result<Outcome> {
    let protocol = parse_protocol(&a.protocol)?;
    let attack = a.attack.build()?;
    let eval = evaluate(&attack, &EvalOptions::full(protocol))?;
    let mut out = std::io::stdout().lock();
    let text = if a.json { eval_json(&attack, &eval)? + "\n" } else { eval_table(&attack, &eval) };
    write_stdout(&mut out, &text)?;
    Ok(Outcome::Clean)
}

/// The JSON object of `eval`: the evaluator's fields plus `attack`, `family`, `params`.
pub fn eval_json(attack: &Attack, eval: &Evaluation) -> Result<String> {
    let mut v = serde_json::to_value(eval).map_err(|e| Error::input(e.to_string()))?;
    if let serde_json::Value::Object(m) = &mut v {
        m.insert("attack".into(), attack.label.clone().into());
        m.insert("family".into(), attack.family.clone().into());
        let params: serde_json::Map<String, serde_json::Value> =
            attack.params.0.iter().map(|(k, v)| (k.clone(), serde_json::to_value(v).unwrap_or_default())).collect();
        m.insert("params".into(), params.into());
    }
    serde_json::to_string_pretty(&v).map_err(|e| Error::input(e.to_string()))
}

fn eval_table(attack: &Attack, e: &Evaluation) -> String {
    let params: Vec<String> = attack.params.0.iter().map(|(k, v)| format!("{k}={v}")).collect();
    let mut s =
        format!("attack {} ({}) {}  eve_dim {}  protocol {}\n", attack.label, attack.family, params.join(" "), e.eve_dim, e.protocol);
    let opt = |x: Option<f64>| x.map_or("-".to_string(), |v| format!("{v:.10}"));
    let rows: Vec<(&str, String, &str)> = vec![
        ("qber_z", format!("{:.10}", e.qber_z), "error rate, Z (key) basis"),
        ("qber_x", format!("{:.10}", e.qber_x), "error rate, X basis"),
        ("qber_y", format!("{:.10}", e.qber_y), "error rate, Y basis"),
        ("p_guess_z", format!("{:.10}", e.p_guess_z), "Eve's Helstrom guessing probability, Z"),
        ("p_guess_x", format!("{:.10}", e.p_guess_x), "same, X"),
        ("p_guess_y", format!("{:.10}", e.p_guess_y), "same, Y"),
        ("holevo_z", format!("{:.10}", e.holevo_z), "Holevo quantity of Eve's states, Z (bits)"),
        ("holevo_x", format!("{:.10}", e.holevo_x), "same, X (bits)"),
        ("holevo_y", format!("{:.10}", e.holevo_y), "same, Y (bits)"),
        ("h_x_given_e", format!("{:.10}", e.h_x_given_e), "H(X|E) of the key bit (bits)"),
        ("accessible_z", opt(e.accessible_z), "accessible information, Z (bits)"),
        ("accessible_x", opt(e.accessible_x), "accessible information, X (bits)"),
        (
            "accessible_gap",
            e.accessible_gap.map_or("-".to_string(), |v| format!("{v:.1e}")),
            "upper bound minus accessible value, worse of Z, X (bits)",
        ),
        ("i_ab", format!("{:.10}", e.i_ab), "I(A:B), Z basis (bits)"),
        ("game_win", format!("{:.10}", e.game_win), "guessing game with honest Bob (bound 0.8535533906)"),
        ("bound_rate", format!("{:.10}", e.bound_rate), "proven rate at these QBERs (bits/sifted bit)"),
        ("attack_rate", format!("{:.10}", e.attack_rate), "Devetak-Winter rate against this attack"),
        ("individual_rate", opt(e.individual_rate), "Csiszar-Korner rate, attack measured individually"),
        ("margin", format!("{:.10}", e.margin), "H(X|E) minus what the bound assumes (>= 0)"),
    ];
    for (k, v, m) in rows {
        s.push_str(&format!("  {k:<16} {v:>14}  {m}\n"));
    }
    if e.accessible_converged == Some(false) {
        s.push_str("  note: the accessible-information search hit its iteration cap; the values are lower bounds\n");
    }
    s
}

fn write_stdout(out: &mut impl Write, text: &str) -> Result<()> {
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        // A closed pipe (e.g. `| head`) is not an error.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(e.into()),
    }
}

fn cmd_sweep(a: SweepArgs) -> Result<Outcome> {
    let protocol = parse_protocol(&a.protocol)?;
    if let Some(o) = &a.output {
        crate::output::check_overwrite(o, a.force)?;
    }
    let file = load_attack_file(&a.attack_file)?;
    let points = crate::sweep::run_sweep(&file, a.steps, &EvalOptions::full(protocol)).map_err(|e| e.with_file(&a.attack_file))?;
    let csv = crate::sweep::sweep_csv(&points)?;
    match &a.output {
        Some(o) => {
            crate::output::write_atomic(o, csv.as_bytes(), a.force)?;
            eprintln!("wrote {} points to {}", points.len(), o.display());
        }
        None => write_stdout(&mut std::io::stdout().lock(), &csv)?,
    }
    Ok(Outcome::Clean)
}

fn cmd_thresholds(a: ThresholdArgs) -> Result<Outcome> {
    crate::error::check_range("--f-ec", a.f_ec, 1.0, 3.0)?;
    let table = crate::thresholds::threshold_table(a.f_ec)?;
    let text = if a.json {
        serde_json::to_string_pretty(&table).map_err(|e| Error::input(e.to_string()))? + "\n"
    } else {
        let mut s = format!("thresholds (QBER as a fraction; error-correction efficiency f = {})\n", a.f_ec);
        for t in &table {
            s.push_str(&format!("  {:<34} {:.10}  {}\n  {:<34} {:>12}  source: {}\n", t.name, t.qber, t.method, "", "", t.source));
        }
        s
    };
    write_stdout(&mut std::io::stdout().lock(), &text)?;
    Ok(Outcome::Clean)
}

fn cmd_validate(a: ValidateArgs) -> Result<Outcome> {
    let mut problems = 0;
    for f in &a.files {
        let errs = attack_file::validate(f);
        if errs.is_empty() {
            println!("ok {}", f.display());
        } else {
            for e in &errs {
                eprintln!("error: {e}");
            }
            problems += errs.len();
        }
    }
    if problems > 0 {
        return Err(Error::input(format!("{problems} problem(s) found in {} file(s)", a.files.len())));
    }
    Ok(Outcome::Clean)
}

/// Names of the built-in families, for help texts.
pub fn family_names() -> Vec<&'static str> {
    FAMILIES.iter().map(|f| f.name()).collect()
}
