//! The `eval` subcommand: one single-photon attack, evaluated exactly. An attack on Bob's
//! detection device (`time-shift`, `faked-state`, `detector-blinding`) is evaluated against
//! the detector given by `--mismatch`, `--random-swap` and `--blinding-catch` (the ideal
//! device by default), conditioned on Bob's clicks ([`crate::exact::device`]).

use super::common::{parse_sets, write_stdout, AttackArgs, Outcome, ProtocolArg};
use crate::attack::device::DeviceAttack;
use crate::attack::file as attack_file;
use crate::attack::{AnyAttack, Attack, ParamSet};
use crate::error::{check_range, Error, Result};
use crate::exact::device::evaluate_device;
use crate::exact::eval::{evaluate, EvalOptions, Evaluation, Shown, QUANTITIES};
use crate::protocol::detector::DetectorFlaws;
use crate::protocol::Protocol;

/// Options of `eval`.
#[derive(clap::Args, Debug)]
pub struct EvalArgs {
    /// The attack.
    #[command(flatten)]
    pub attack: AttackArgs,
    /// Protocol whose bound the attack is judged against.
    #[arg(long, value_enum, default_value_t = ProtocolArg::Bb84)]
    pub protocol: ProtocolArg,
    /// Print one JSON object instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Device attacks only: the detectors' efficiency mismatch ratio η in (0, 1] at Eve's
    /// best arrival time (1 = none).
    #[arg(long, value_name = "RATIO", default_value_t = 1.0)]
    pub mismatch: f64,
    /// Device attacks only: Bob swaps his detectors' bit assignment at random each round.
    #[arg(long)]
    pub random_swap: bool,
    /// Device attacks only: probability in [0, 1] that a monitor notices a blinded
    /// detection period (1 = the detectors cannot be blinded unnoticed).
    #[arg(long, value_name = "PROBABILITY", default_value_t = 1.0)]
    pub blinding_catch: f64,
}

/// Runs `qkd-audit eval`.
pub fn cmd_eval(a: EvalArgs) -> Result<Outcome> {
    let protocol = Protocol::from(a.protocol);
    let mut out = std::io::stdout().lock();
    if let Some(attack) = device_attack(&a.attack)? {
        let flaws = detector_flaws(&a)?;
        let probs = vec![1.0 / protocol.bases().len() as f64; protocol.bases().len()];
        let point = evaluate_device(&attack, &flaws, protocol, &probs, &EvalOptions::full(protocol))?;
        let what = Described { label: &attack.label, family: &attack.family, params: &attack.params };
        let text = if a.json {
            let mut m = what.json(&point.evaluation);
            m.insert("detection_ratio".into(), point.detection_ratio.into());
            m.insert("alarm_odds".into(), point.alarm_odds.into());
            m.insert("detector".into(), serde_json::to_value(flaws).unwrap_or_default());
            serde_json::to_string_pretty(&serde_json::Value::Object(m)).map_err(|e| Error::input(e.to_string()))? + "\n"
        } else {
            let mut t = what.table(&point.evaluation);
            t.push_str(&format!(
                "  detector: mismatch {} random_swap {} blinding_catch {}; every quantity is per detected sifted round\n",
                flaws.mismatch, flaws.random_swap, flaws.blinding_catch
            ));
            t.push_str(&format!(
                "  {:<16} {:>14.10}  Bob's detection rate relative to the honest device\n",
                "detection_ratio", point.detection_ratio
            ));
            t.push_str(&format!("  {:<16} {:>14.1e}  monitor alarms per detected round\n", "alarm_odds", point.alarm_odds));
            if point.evaluation.margin < 0.0 {
                t.push_str("  note: margin < 0: the detector flaw breaks the uncertainty bound that flaw-blind rules rest on\n");
            }
            t
        };
        write_stdout(&mut out, &text)?;
        return Ok(Outcome::Clean);
    }
    let attack = a.attack.build()?;
    let eval = evaluate(&attack, &EvalOptions::full(protocol))?;
    let text = if a.json { eval_json(&attack, &eval)? + "\n" } else { eval_table(&attack, &eval) };
    write_stdout(&mut out, &text)?;
    Ok(Outcome::Clean)
}

/// The device attack the options name, if they name one.
fn device_attack(a: &AttackArgs) -> Result<Option<DeviceAttack>> {
    let file = match (&a.attack, &a.attack_file) {
        (Some(name), None) if attack_file::builtin_entry_names().contains(&name.as_str()) => {
            attack_file::parse(attack_file::builtin_entry_text(name, "--attack")?).map_err(|mut errs| errs.remove(0))?
        }
        (None, Some(p)) => attack_file::load(p)?,
        _ => return Ok(None),
    };
    if !file.is_device_attack() {
        return Ok(None);
    }
    let sets = parse_sets(&a.set)?;
    match file.build(&sets) {
        Ok(AnyAttack::Device(d)) => Ok(Some(d)),
        Ok(_) => Ok(None),
        Err(e) => Err(if e.key().is_some() && a.attack.is_some() { e.with_key("--set") } else { e }),
    }
}

/// The detector of `--mismatch`, `--random-swap`, `--blinding-catch`.
fn detector_flaws(a: &EvalArgs) -> Result<DetectorFlaws> {
    if !(a.mismatch > 0.0 && a.mismatch <= 1.0) {
        return Err(Error::input_key("--mismatch", format!("{} is outside (0, 1]", a.mismatch)));
    }
    let blinding_catch = check_range("--blinding-catch", a.blinding_catch, 0.0, 1.0)?;
    Ok(DetectorFlaws { mismatch: a.mismatch, random_swap: a.random_swap, blinding_catch })
}

/// The JSON object of `eval`: the evaluator's fields plus `attack`, `family`, `params`.
pub fn eval_json(attack: &Attack, eval: &Evaluation) -> Result<String> {
    let m = Described { label: &attack.label, family: &attack.family, params: &attack.params }.json(eval);
    serde_json::to_string_pretty(&serde_json::Value::Object(m)).map_err(|e| Error::input(e.to_string()))
}

/// An attack's label, family and parameters, as `eval` prints them.
struct Described<'a> {
    label: &'a str,
    family: &'a str,
    params: &'a ParamSet,
}

impl Described<'_> {
    fn json(&self, eval: &Evaluation) -> serde_json::Map<String, serde_json::Value> {
        let mut m = eval.to_json();
        m.insert("attack".into(), self.label.into());
        m.insert("family".into(), self.family.into());
        let params: serde_json::Map<String, serde_json::Value> =
            self.params.0.iter().map(|(k, v)| (k.clone(), serde_json::to_value(v).unwrap_or_default())).collect();
        m.insert("params".into(), params.into());
        m
    }

    fn table(&self, e: &Evaluation) -> String {
        table_of(self.label, self.family, self.params, e)
    }
}

fn eval_table(attack: &Attack, e: &Evaluation) -> String {
    table_of(&attack.label, &attack.family, &attack.params, e)
}

fn table_of(label: &str, family: &str, params: &ParamSet, e: &Evaluation) -> String {
    let params: Vec<String> = params.0.iter().map(|(k, v)| format!("{k}={v}")).collect();
    let mut s = format!("attack {} ({}) {}  eve_dim {}  protocol {}\n", label, family, params.join(" "), e.eve_dim, e.protocol);
    for q in QUANTITIES {
        let v = match ((q.value)(e), q.shown) {
            (_, Shown::Hidden) => continue,
            (None, _) => "-".to_string(),
            (Some(v), Shown::Fixed) => format!("{v:.10}"),
            // An exact zero (the bound met exactly) reads as 0, not 0.0e0.
            (Some(0.0), Shown::Scientific) => "0".to_string(),
            (Some(v), Shown::Scientific) => format!("{v:.1e}"),
        };
        s.push_str(&format!("  {:<16} {v:>14}  {}\n", q.key, q.help));
    }
    if e.accessible_converged == Some(false) {
        s.push_str("  note: the accessible-information search hit its iteration cap; the values are lower bounds\n");
    }
    s
}
