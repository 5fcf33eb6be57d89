//! The `eval` subcommand: one single-photon attack, evaluated exactly.

use super::common::{write_stdout, AttackArgs, Outcome, ProtocolArg};
use crate::attack::Attack;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation, Shown, QUANTITIES};
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
}

/// Runs `qkd-audit eval`.
pub fn cmd_eval(a: EvalArgs) -> Result<Outcome> {
    let protocol = Protocol::from(a.protocol);
    let attack = a.attack.build()?;
    let eval = evaluate(&attack, &EvalOptions::full(protocol))?;
    let mut out = std::io::stdout().lock();
    let text = if a.json { eval_json(&attack, &eval)? + "\n" } else { eval_table(&attack, &eval) };
    write_stdout(&mut out, &text)?;
    Ok(Outcome::Clean)
}

/// The JSON object of `eval`: the evaluator's fields plus `attack`, `family`, `params`.
pub fn eval_json(attack: &Attack, eval: &Evaluation) -> Result<String> {
    let mut m = eval.to_json();
    m.insert("attack".into(), attack.label.clone().into());
    m.insert("family".into(), attack.family.clone().into());
    let params: serde_json::Map<String, serde_json::Value> =
        attack.params.0.iter().map(|(k, v)| (k.clone(), serde_json::to_value(v).unwrap_or_default())).collect();
    m.insert("params".into(), params.into());
    serde_json::to_string_pretty(&serde_json::Value::Object(m)).map_err(|e| Error::input(e.to_string()))
}

fn eval_table(attack: &Attack, e: &Evaluation) -> String {
    let params: Vec<String> = attack.params.0.iter().map(|(k, v)| format!("{k}={v}")).collect();
    let mut s =
        format!("attack {} ({}) {}  eve_dim {}  protocol {}\n", attack.label, attack.family, params.join(" "), e.eve_dim, e.protocol);
    for q in QUANTITIES {
        let v = match ((q.value)(e), q.shown) {
            (_, Shown::Hidden) => continue,
            (None, _) => "-".to_string(),
            (Some(v), Shown::Fixed) => format!("{v:.10}"),
            (Some(v), Shown::Scientific) => format!("{v:.1e}"),
        };
        s.push_str(&format!("  {:<16} {v:>14}  {}\n", q.key, q.help));
    }
    if e.accessible_converged == Some(false) {
        s.push_str("  note: the accessible-information search hit its iteration cap; the values are lower bounds\n");
    }
    s
}
