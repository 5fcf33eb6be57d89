//! Sweeps of one attack parameter and the tidy CSV that records them.
//!
//! CSV schema (one row per point): `attack`, `family`, `protocol`, then one column per
//! family parameter (named `param_<name>`), then every evaluator quantity of
//! [`crate::exact::eval::QUANTITIES`] under its CSV column (probabilities bare, information
//! in `_bits`, rates in bits per sifted bit). Numbers are printed by [`fmt_num`] (integers
//! exactly, other values at 12 significant digits); a quantity not computed is an empty cell.

use crate::attack::file::AttackFile;
use crate::attack::Value;
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, EvalOptions, Evaluation, QUANTITIES};
use rayon::prelude::*;
use std::collections::BTreeMap;

/// Significant digits of a non-integer CSV number: the evaluator's results are accurate to
/// about 1e-12 (`exact::eval::ROUNDING_SLACK`), so further digits are rounding noise
/// (`0.30000000000000004`, `0.12000000000000001`) and would only be misread as data. `--json`
/// output keeps every digit.
pub const CSV_SIGNIFICANT_DIGITS: usize = 12;

/// Largest integer an `f64` holds exactly (2⁵³); integers below it print exactly.
const EXACT_INTEGER_LIMIT: f64 = 9_007_199_254_740_992.0;

/// Formats a number for CSV, `NaN` as an empty cell. Integers of magnitude below 2⁵³
/// (counts, key lengths) print exactly; other values are rounded to
/// [`CSV_SIGNIFICANT_DIGITS`] significant digits with trailing zeros dropped.
///
/// Layout: plain decimal for magnitudes in [1e-5, 1e16) (`0.25`, `1200`, `0.0000125`), and
/// exponent form outside it (`2.22044604925e-16`, `1e20`); both zeros print `0`.
/// Infinities print `inf` / `-inf`, which Rust's `f64::from_str` reads back. The one
/// formatter every CSV writer of the crate uses, so a column never mixes conventions. One
/// formatting pass, no re-parse.
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
    if x.fract() == 0.0 && x.abs() < EXACT_INTEGER_LIMIT {
        return format!("{}", x as i64);
    }
    // d.ddddddddddde±x: the digits, rounded once, and the decimal exponent.
    let sci = format!("{:.*e}", CSV_SIGNIFICANT_DIGITS - 1, x.abs());
    let (mantissa, exponent) = sci.split_once('e').expect("exponent form");
    let exponent: i32 = exponent.parse().expect("an integer exponent");
    let digits: String = mantissa.chars().filter(char::is_ascii_digit).collect();
    let digits = digits.trim_end_matches('0');
    let digits = if digits.is_empty() { "0" } else { digits };
    let sign = if x < 0.0 { "-" } else { "" };
    if (-5..16).contains(&exponent) {
        let point = exponent + 1; // digits before the decimal point
        if point <= 0 {
            format!("{sign}0.{}{digits}", "0".repeat((-point) as usize))
        } else if point as usize >= digits.len() {
            format!("{sign}{digits}{}", "0".repeat(point as usize - digits.len()))
        } else {
            let (int, frac) = digits.split_at(point as usize);
            format!("{sign}{int}.{frac}")
        }
    } else {
        let (first, rest) = digits.split_at(1);
        let rest = if rest.is_empty() { String::new() } else { format!(".{rest}") };
        format!("{sign}{first}{rest}e{exponent}")
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
    use super::{fmt_num, EXACT_INTEGER_LIMIT};
    use proptest::prelude::*;

    #[test]
    fn layout_is_plain_for_ordinary_magnitudes_and_exponent_outside() {
        assert_eq!(fmt_num(0.0), "0");
        assert_eq!(fmt_num(-0.0), "0");
        assert_eq!(fmt_num(1.0), "1");
        assert_eq!(fmt_num(-1200.0), "-1200");
        assert_eq!(fmt_num(0.25), "0.25");
        assert_eq!(fmt_num(-0.25), "-0.25");
        assert_eq!(fmt_num(0.1 + 0.2), "0.3");
        assert_eq!(fmt_num(0.12000000000000001), "0.12");
        assert_eq!(fmt_num(0.9999999999999999), "1");
        assert_eq!(fmt_num(1.25e-5), "0.0000125");
        assert_eq!(fmt_num(123456.789), "123456.789");
        assert_eq!(fmt_num(f64::EPSILON), "2.22044604925e-16");
        assert_eq!(fmt_num(1e20), "1e20");
        assert_eq!(fmt_num(1.5e-7), "1.5e-7");
        assert_eq!(fmt_num(999_999_999_999_999.0), "999999999999999");
        assert_eq!(fmt_num(f64::NAN), "");
        assert_eq!(fmt_num(f64::INFINITY), "inf");
        assert_eq!(fmt_num(f64::NEG_INFINITY), "-inf");
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(20_000))]
        /// Every bit pattern: NaN is an empty cell, integers below 2⁵³ come back exactly,
        /// anything else within the rounding of 12 significant digits.
        #[test]
        fn every_value_reads_back_within_its_digits(bits in any::<u64>()) {
            let x = f64::from_bits(bits);
            let s = fmt_num(x);
            if x.is_nan() {
                prop_assert_eq!(s, "");
            } else {
                let back: f64 = s.parse().unwrap();
                if x.is_infinite() || (x.fract() == 0.0 && x.abs() < EXACT_INTEGER_LIMIT) {
                    prop_assert_eq!(back, x, "{} printed as {}", x, s);
                } else if x.abs() > 1e-300 && x.abs() < 1e300 {
                    prop_assert!(((back - x) / x).abs() <= 5.01e-12, "{} printed as {}", x, s);
                }
            }
        }

        /// Probabilities and rates: within half a unit of the 12th digit, at most 12
        /// significant digits, no exponent above 1e-5.
        #[test]
        fn probabilities_read_back(x in 1e-5f64..1.0) {
            let s = fmt_num(x);
            let back: f64 = s.parse().unwrap();
            prop_assert!(((back - x) / x).abs() <= 5.01e-12, "{} printed as {}", x, s);
            prop_assert!(!s.contains('e'));
            prop_assert!(s.trim_start_matches("0.").trim_start_matches('0').len() <= 12, "{}", s);
        }
    }
}
