//! The `eval` subcommand: one single-photon attack, evaluated exactly.

use super::common::{parse_protocol, write_stdout, AttackArgs, Outcome};
use crate::attack::Attack;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation};

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

/// Runs `qkd-audit eval`.
pub fn cmd_eval(a: EvalArgs) -> Result<Outcome> {
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
