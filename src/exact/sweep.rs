//! Sweeps of one attack parameter and the tidy CSV that records them.
//!
//! CSV schema (one row per point): `attack`, `family`, `protocol`, then one column per
//! family parameter (named `param_<name>`), then the evaluator's quantities:
//! `qber_z`, `qber_x`, `qber_y`, `p_guess_z`, `p_guess_x`, `p_guess_y` (probabilities),
//! `holevo_z_bits`, `holevo_x_bits`, `holevo_y_bits`, `h_x_given_e_bits`,
//! `accessible_z_bits`, `accessible_x_bits`, `i_ab_bits`, `game_win` (probability),
//! `bound_rate_bits`, `attack_rate_bits`, `individual_rate_bits`, `margin_bits` (bits per
//! sifted bit), `h_min_x_given_e_bits`, `accessible_gap_bits` (how far the accessible
//! values may be below the true maximum: upper bound minus value, the larger of Z and X).
//! Numbers are printed with 12 significant digits.

use crate::attack::file::AttackFile;
use crate::attack::Value;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation};
use std::collections::BTreeMap;

/// Quantity columns of the sweep CSV, in order.
pub const QUANTITY_COLUMNS: &[&str] = &[
    "qber_z",
    "qber_x",
    "qber_y",
    "p_guess_z",
    "p_guess_x",
    "p_guess_y",
    "holevo_z_bits",
    "holevo_x_bits",
    "holevo_y_bits",
    "h_x_given_e_bits",
    "accessible_z_bits",
    "accessible_x_bits",
    "i_ab_bits",
    "game_win",
    "bound_rate_bits",
    "attack_rate_bits",
    "individual_rate_bits",
    "margin_bits",
    "h_min_x_given_e_bits",
    "accessible_gap_bits",
];

/// The quantity values of an evaluation in [`QUANTITY_COLUMNS`] order (missing accessible
/// information is NaN).
pub fn quantity_values(e: &Evaluation) -> Vec<f64> {
    let o = |x: Option<f64>| x.unwrap_or(f64::NAN);
    vec![
        e.qber_z,
        e.qber_x,
        e.qber_y,
        e.p_guess_z,
        e.p_guess_x,
        e.p_guess_y,
        e.holevo_z,
        e.holevo_x,
        e.holevo_y,
        e.h_x_given_e,
        o(e.accessible_z),
        o(e.accessible_x),
        e.i_ab,
        e.game_win,
        e.bound_rate,
        e.attack_rate,
        o(e.individual_rate),
        e.margin,
        e.h_min_x_given_e,
        o(e.accessible_gap),
    ]
}

/// Formats a number for CSV: 12 significant digits, `NaN` as an empty cell.
pub fn fmt_num(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else if x == 0.0 {
        "0".into()
    } else {
        let s = format!("{x:.11e}");
        // Parse back to drop trailing zeros while keeping the value exact at 12 digits.
        let v: f64 = s.parse().unwrap_or(x);
        format!("{v}")
    }
}

/// One evaluated point of a sweep.
pub struct SweepPoint {
    /// Attack label.
    pub label: String,
    /// Family name.
    pub family: String,
    /// Resolved parameters.
    pub params: Vec<(String, Value)>,
    /// The evaluation.
    pub eval: Evaluation,
}

/// Evaluates the file's sweep (with `steps` overriding the file's number of points).
pub fn run_sweep(file: &AttackFile, steps: Option<usize>, opts: &EvalOptions) -> Result<Vec<SweepPoint>> {
    let mut sweep = file.sweep().cloned().ok_or_else(|| Error::input_key("sweep", "the file has no [sweep] table to run"))?;
    if let Some(n) = steps {
        if n == 0 {
            return Err(Error::input_key("--steps", "must be at least 1"));
        }
        sweep.steps = n;
    }
    sweep
        .values()
        .into_iter()
        .map(|v| {
            let mut o = BTreeMap::new();
            o.insert(sweep.param.clone(), Value::Num(v));
            let attack = file.attack(&o)?;
            let eval = evaluate(&attack, opts)?;
            Ok(SweepPoint { label: attack.label.clone(), family: attack.family.clone(), params: attack.params.0.clone(), eval })
        })
        .collect()
}

/// Renders sweep points as CSV text.
pub fn sweep_csv(points: &[SweepPoint]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header = vec!["attack".to_string(), "family".to_string(), "protocol".to_string()];
    if let Some(p) = points.first() {
        header.extend(p.params.iter().map(|(k, _)| format!("param_{k}")));
    }
    header.extend(QUANTITY_COLUMNS.iter().map(|s| s.to_string()));
    w.write_record(&header).map_err(csv_err)?;
    for p in points {
        let mut row = vec![p.label.clone(), p.family.clone(), p.eval.protocol.to_string()];
        row.extend(p.params.iter().map(|(_, v)| match v {
            Value::Num(x) => fmt_num(*x),
            Value::Text(s) => s.clone(),
        }));
        row.extend(quantity_values(&p.eval).into_iter().map(fmt_num));
        w.write_record(&row).map_err(csv_err)?;
    }
    let bytes = w.into_inner().map_err(|e| Error::input(e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv output is UTF-8"))
}

fn csv_err(e: csv::Error) -> Error {
    Error::new(crate::error::ErrorKind::Io, e.to_string())
}
