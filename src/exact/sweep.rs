//! Sweeps of one attack parameter and the tidy CSV that records them.
//!
//! CSV schema (one row per point): `attack`, `family`, `protocol`, then one column per
//! family parameter (named `param_<name>`), then every evaluator quantity of
//! [`crate::exact::eval::QUANTITIES`] under its CSV column (probabilities bare, information
//! in `_bits`, rates in bits per sifted bit). Numbers are printed by [`fmt_num`] (shortest
//! round-trip decimal); a quantity not computed is an empty cell.

use crate::attack::file::AttackFile;
use crate::attack::Value;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation, QUANTITIES};
use rayon::prelude::*;
use std::collections::BTreeMap;

/// Formats a number for CSV: the shortest decimal that parses back to the same `f64`
/// (Ryū, via the `ryu` crate), `NaN` as an empty cell.
///
/// Layout: plain decimal for magnitudes in [1e-5, 1e16) (`0.25`, `1200`, `0.0000125`), and
/// exponent form outside it (`2.220446049250313e-16`, `1e20`); whole numbers carry no `.0`
/// and both zeros print `0` (the sign of zero is not kept; `-0.0 == 0.0`). Infinities print
/// `inf` / `-inf`, which Rust's `f64::from_str` reads back. The one formatter every CSV
/// writer of the crate uses, so a column never mixes conventions.
pub fn fmt_num(x: f64) -> String {
    if x.is_nan() {
        return String::new();
    }
    if x == 0.0 {
        return "0".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "inf".into() } else { "-inf".into() };
    }
    let mut buf = ryu::Buffer::new();
    let s = buf.format_finite(x);
    s.strip_suffix(".0").unwrap_or(s).to_string()
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

/// Evaluates the file's sweep (with `steps` overriding the file's number of points), in
/// parallel over points on the current rayon pool; the points come back in sweep order and
/// each is computed on its own, so the result does not depend on the number of threads.
pub fn run_sweep(file: &AttackFile, steps: Option<usize>, opts: &EvalOptions) -> Result<Vec<SweepPoint>> {
    Ok(run_sweep_points(file, steps, opts, &|_| true)?.into_iter().map(|(_, p)| p).collect())
}

/// The sweep's values (with `steps` overriding the file's number of points).
pub fn sweep_values(file: &AttackFile, steps: Option<usize>) -> Result<(String, Vec<f64>)> {
    let mut sweep = file.sweep().cloned().ok_or_else(|| Error::input_key("sweep", "the file has no [sweep] table to run"))?;
    if let Some(n) = steps {
        if n == 0 || n > MAX_SWEEP_STEPS {
            return Err(Error::input_key("--steps", format!("{n} is outside [1, {MAX_SWEEP_STEPS}]")));
        }
        sweep.steps = n;
    }
    Ok((sweep.param.clone(), sweep.values()))
}

/// Like [`run_sweep`], but only the points whose index `keep` accepts (a shard), each with
/// its index. The first error in sweep order is returned.
pub fn run_sweep_points(
    file: &AttackFile,
    steps: Option<usize>,
    opts: &EvalOptions,
    keep: &(dyn Fn(usize) -> bool + Sync),
) -> Result<Vec<(usize, SweepPoint)>> {
    let (param, values) = sweep_values(file, steps)?;
    let todo: Vec<(usize, f64)> = values.into_iter().enumerate().filter(|(i, _)| keep(*i)).collect();
    todo.into_par_iter()
        .map(|(i, v)| {
            let mut o = BTreeMap::new();
            o.insert(param.clone(), Value::Num(v));
            let attack = file.attack(&o)?;
            let eval = evaluate(&attack, opts)?;
            Ok((i, SweepPoint { label: attack.label.clone(), family: attack.family.clone(), params: attack.params.0.clone(), eval }))
        })
        .collect()
}

/// Renders sweep points as CSV text.
pub fn sweep_csv(points: &[SweepPoint]) -> Result<String> {
    let mut out = match points.first() {
        Some(p) => sweep_header(p)?,
        None => csv_line(&header_fields(&[]))?,
    };
    for p in points {
        out.push_str(&sweep_row(p)?);
    }
    Ok(out)
}

fn header_fields(params: &[(String, Value)]) -> Vec<String> {
    let mut header = vec!["attack".to_string(), "family".to_string(), "protocol".to_string()];
    header.extend(params.iter().map(|(k, _)| format!("param_{k}")));
    header.extend(QUANTITIES.iter().map(|q| q.column.to_string()));
    header
}

/// The CSV header line of a sweep whose first point is `first` (its parameter names give
/// the `param_` columns), with its line end.
pub fn sweep_header(first: &SweepPoint) -> Result<String> {
    csv_line(&header_fields(&first.params))
}

/// One point's CSV record, with its line end: the bytes [`sweep_csv`] writes for it.
pub fn sweep_row(p: &SweepPoint) -> Result<String> {
    let mut row = vec![p.label.clone(), p.family.clone(), p.eval.protocol.to_string()];
    row.extend(p.params.iter().map(|(_, v)| match v {
        Value::Num(x) => fmt_num(*x),
        Value::Text(s) => s.clone(),
    }));
    row.extend(QUANTITIES.iter().map(|q| fmt_num((q.value)(&p.eval).unwrap_or(f64::NAN))));
    csv_line(&row)
}

/// One CSV record (quoted as the `csv` crate quotes, `\n` line end).
fn csv_line(fields: &[String]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(fields).map_err(csv_err)?;
    let bytes = w.into_inner().map_err(|e| Error::input(e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv output is UTF-8"))
}

fn csv_err(e: csv::Error) -> Error {
    Error::new(crate::error::ErrorKind::Io, e.to_string())
}

#[cfg(test)]
mod tests {
    use super::fmt_num;
    use proptest::prelude::*;

    #[test]
    fn layout_is_plain_for_ordinary_magnitudes_and_exponent_outside() {
        assert_eq!(fmt_num(0.0), "0");
        assert_eq!(fmt_num(-0.0), "0");
        assert_eq!(fmt_num(1.0), "1");
        assert_eq!(fmt_num(-1200.0), "-1200");
        assert_eq!(fmt_num(0.25), "0.25");
        assert_eq!(fmt_num(0.1 + 0.2), "0.30000000000000004");
        assert_eq!(fmt_num(1.25e-5), "0.0000125");
        assert_eq!(fmt_num(f64::EPSILON), "2.220446049250313e-16");
        assert_eq!(fmt_num(1e20), "1e20");
        assert_eq!(fmt_num(f64::NAN), "");
        assert_eq!(fmt_num(f64::INFINITY), "inf");
        assert_eq!(fmt_num(f64::NEG_INFINITY), "-inf");
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(20_000))]
        /// Every bit pattern: NaN is an empty cell, anything else parses back to the same
        /// value (zeros compare equal whatever their sign).
        #[test]
        fn every_value_round_trips(bits in any::<u64>()) {
            let x = f64::from_bits(bits);
            let s = fmt_num(x);
            if x.is_nan() {
                prop_assert_eq!(s, "");
            } else {
                let back: f64 = s.parse().unwrap();
                prop_assert_eq!(back, x, "{} printed as {}", x, s);
            }
        }

        /// Values from the typical range of probabilities and rates, where bit patterns
        /// rarely land.
        #[test]
        fn probabilities_round_trip(x in 0.0f64..1.0) {
            let back: f64 = fmt_num(x).parse().unwrap();
            prop_assert_eq!(back.to_bits(), x.to_bits());
        }
    }
}
