//! Sweeps of one attack parameter and the tidy CSV that records them.
//!
//! CSV schema (one row per point): `attack`, `family`, `protocol`, then one column per
//! family parameter (named `param_<name>`), then every evaluator quantity of
//! [`crate::exact::eval::QUANTITIES`] under its CSV column (probabilities bare, information
//! in `_bits`, rates in bits per sifted bit). Numbers are printed with 12 significant digits;
//! a quantity not computed is an empty cell.

use crate::attack::file::AttackFile;
use crate::attack::Value;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation, QUANTITIES};
use std::collections::BTreeMap;

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

/// Most points a sweep evaluates (the campaign files' cap on `steps` too): at the slowest
/// family's tens of thousands of evaluations per second, a few seconds of work; a larger
/// request is refused before any allocation.
pub const MAX_SWEEP_STEPS: usize = 100_000;

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
        if n == 0 || n > MAX_SWEEP_STEPS {
            return Err(Error::input_key("--steps", format!("{n} is outside [1, {MAX_SWEEP_STEPS}]")));
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
    header.extend(QUANTITIES.iter().map(|q| q.column.to_string()));
    w.write_record(&header).map_err(csv_err)?;
    for p in points {
        let mut row = vec![p.label.clone(), p.family.clone(), p.eval.protocol.to_string()];
        row.extend(p.params.iter().map(|(_, v)| match v {
            Value::Num(x) => fmt_num(*x),
            Value::Text(s) => s.clone(),
        }));
        row.extend(QUANTITIES.iter().map(|q| fmt_num((q.value)(&p.eval).unwrap_or(f64::NAN))));
        w.write_record(&row).map_err(csv_err)?;
    }
    let bytes = w.into_inner().map_err(|e| Error::input(e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv output is UTF-8"))
}

fn csv_err(e: csv::Error) -> Error {
    Error::new(crate::error::ErrorKind::Io, e.to_string())
}
