//! Sweeps of one attack parameter and the tidy CSV that records them.
//!
//! CSV schema (one row per point): `attack`, `family`, `protocol`, then one column per
//! family parameter (named `param_<name>`), then every evaluator quantity of
//! [`crate::exact::eval::QUANTITIES`] under its CSV column (probabilities bare, information
//! in `_bits`, rates in bits per sifted bit). Numbers are printed by [`fmt_num`] (integers
//! exactly, other values at 12 significant digits); a quantity not computed is an empty cell.

use crate::attack::file::AttackFile;
use crate::attack::{family, resolve, Value};
use crate::error::{Error, Result};
use crate::exact::eval::{evaluate, ClosedForm, EvalOptions, Evaluation, QUANTITIES};
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
    let mut out = String::new();
    push_num(&mut out, x);
    out
}

/// Appends [`fmt_num`]`(x)` to `out`, allocating nothing beyond `out`'s growth.
///
/// The digits are the value correctly rounded to [`CSV_SIGNIFICANT_DIGITS`] significant
/// digits, ties to even (what `format!("{:.11e}")` prints). For magnitudes in about
/// [1e-16, 1e12) they come from exact integer arithmetic: with `|x| = m·2^e` (m < 2⁵³) and
/// `k = 11 − ⌊log₁₀|x|⌋ ∈ [0, 27]`, `|x|·10^k = m·5^k·2^(e+k)` and `m·5^k < 2¹¹⁶` fits in a
/// `u128`, so the rounding to an integer is one shift with the remainder compared to one
/// half. Other magnitudes go through the standard library's formatter.
pub fn push_num(out: &mut String, x: f64) {
    if x.is_nan() {
        return;
    }
    if x == 0.0 {
        out.push('0');
        return;
    }
    if x.is_infinite() {
        out.push_str(if x > 0.0 { "inf" } else { "-inf" });
        return;
    }
    if x.fract() == 0.0 && x.abs() < EXACT_INTEGER_LIMIT {
        push_integer(out, x as i64);
        return;
    }
    match twelve_digits(x.abs()) {
        Some((digits, exponent)) => {
            let mut buf = [0u8; CSV_SIGNIFICANT_DIGITS];
            let mut d = digits;
            for b in buf.iter_mut().rev() {
                *b = b'0' + (d % 10) as u8;
                d /= 10;
            }
            let len = buf.iter().rposition(|&b| b != b'0').map_or(1, |i| i + 1);
            let text = std::str::from_utf8(&buf[..len]).expect("ASCII digits");
            lay_out(out, x < 0.0, text, exponent);
        }
        None => {
            let (digits, exponent) = std_digits(x.abs());
            lay_out(out, x < 0.0, &digits, exponent);
        }
    }
}

/// The significant digits (trailing zeros dropped) and decimal exponent of the positive
/// finite `a` rounded to [`CSV_SIGNIFICANT_DIGITS`] digits by the standard library's
/// formatter: `d.ddddddddddde±x`, rounded once.
fn std_digits(a: f64) -> (String, i32) {
    let sci = format!("{:.*e}", CSV_SIGNIFICANT_DIGITS - 1, a);
    let (mantissa, exponent) = sci.split_once('e').expect("exponent form");
    let exponent: i32 = exponent.parse().expect("an integer exponent");
    let digits: String = mantissa.chars().filter(char::is_ascii_digit).collect();
    let digits = digits.trim_end_matches('0');
    (if digits.is_empty() { "0".to_string() } else { digits.to_string() }, exponent)
}

/// Writes the significant `digits` (no trailing zeros) of a number whose first digit has
/// decimal exponent `exponent`, in the layout of [`fmt_num`].
fn lay_out(out: &mut String, negative: bool, digits: &str, exponent: i32) {
    if negative {
        out.push('-');
    }
    if (-5..16).contains(&exponent) {
        let point = exponent + 1; // digits before the decimal point
        if point <= 0 {
            out.push_str("0.");
            for _ in 0..-point {
                out.push('0');
            }
            out.push_str(digits);
        } else if point as usize >= digits.len() {
            out.push_str(digits);
            for _ in 0..point as usize - digits.len() {
                out.push('0');
            }
        } else {
            let (int, frac) = digits.split_at(point as usize);
            out.push_str(int);
            out.push('.');
            out.push_str(frac);
        }
    } else {
        let (first, rest) = digits.split_at(1);
        out.push_str(first);
        if !rest.is_empty() {
            out.push('.');
            out.push_str(rest);
        }
        out.push('e');
        push_integer(out, exponent.into());
    }
}

/// Appends the decimal digits of `n` (the standard library's integer formatting writes
/// into `out` without an allocation of its own).
fn push_integer(out: &mut String, n: i64) {
    use std::fmt::Write;
    write!(out, "{n}").expect("writing to a String cannot fail");
}

/// `5^k` for `k` in 0..=27.
const POW5: [u128; 28] = {
    let mut t = [1u128; 28];
    let mut k = 1;
    while k < 28 {
        t[k] = t[k - 1] * 5;
        k += 1;
    }
    t
};

/// `(n, E)` with `10¹¹ ≤ n < 10¹²` and `n·10^(E−11)` the positive finite `a` rounded to
/// twelve significant digits, ties to even; `None` outside the range of the exact integer
/// route (see [`push_num`]).
fn twelve_digits(a: f64) -> Option<(u64, i32)> {
    const LOW: u128 = 100_000_000_000; // 10¹¹
    const HIGH: u128 = 1_000_000_000_000; // 10¹²
    let bits = a.to_bits();
    let biased = ((bits >> 52) & 0x7ff) as i32;
    if biased == 0 {
        return None; // subnormal: far below the range
    }
    let m = u128::from((bits & ((1u64 << 52) - 1)) | (1u64 << 52));
    let e2 = biased - 1075; // a = m·2^e2
                            // A first guess of ⌊log₁₀ a⌋ from the binary exponent, ⌊(biased − 1023)·log₁₀ 2⌋
                            // (78913 / 2¹⁸ = 0.30103 to six digits, exact in the floor for the exponents of f64):
                            // `a` lies in [2^b, 2^(b+1)), so the guess is the answer or one below it, and the loop
                            // corrects it.
    let mut exponent = ((biased - 1023) * 78913) >> 18;
    for _ in 0..3 {
        let k = 11 - exponent;
        if !(0..=27).contains(&k) {
            return None;
        }
        let scaled = m * POW5[k as usize]; // < 2⁵³·5²⁷ < 2¹¹⁶
        let shift = e2 + k; // a·10^k = scaled·2^shift
                            // v = a·10^k = scaled·2^shift: its integer part and its rounding to an integer.
        let (floor, rounded) = if shift >= 0 {
            if scaled.leading_zeros() <= shift as u32 {
                return None;
            }
            (scaled << shift, scaled << shift)
        } else {
            let s = (-shift) as u32;
            if s >= 127 {
                return None;
            }
            let q = scaled >> s;
            let r = scaled & ((1u128 << s) - 1);
            let half = 1u128 << (s - 1);
            (q, if r > half || (r == half && q & 1 == 1) { q + 1 } else { q })
        };
        if floor < LOW {
            exponent -= 1;
        } else if floor >= HIGH {
            exponent += 1;
        } else if rounded == HIGH {
            // Rounded up to the next power of ten: 9.99999999999(9…) → 1.00000000000e(E+1).
            return Some((LOW as u64, exponent + 1));
        } else {
            return Some((rounded as u64, exponent));
        }
    }
    None
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
    // A built-in single-photon family: its parameters are resolved per point and the point
    // is evaluated in closed form (`exact::eval::ClosedForm`), without building Kraus
    // operators. Anything else, and any point whose parameters do not resolve (so that the
    // error is the one `AttackFile::attack` reports), takes the general route.
    let builtin = match file {
        AttackFile::Catalogue(e) if !file.is_device_attack() && !file.is_pulse_attack() => family(&e.family).ok().map(|f| (f, e)),
        _ => None,
    };
    todo.into_par_iter()
        .map(|(i, v)| {
            if let Some((fam, entry)) = builtin {
                let mut given = entry.params.clone();
                given.insert(param.clone(), Value::Num(v));
                if let Ok(params) = resolve(fam, &given) {
                    if let Some(form) = ClosedForm::of(fam.name(), &params) {
                        let eval = form.evaluate(fam.name(), opts)?;
                        let name = fam.name().to_string();
                        return Ok((i, SweepPoint { label: name.clone(), family: name, params: params.0, eval }));
                    }
                }
            }
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
    let protocol = p.eval.protocol.to_string();
    let texts = p.params.iter().filter_map(|(_, v)| match v {
        Value::Text(s) => Some(s.as_str()),
        Value::Num(_) => None,
    });
    if ![p.label.as_str(), p.family.as_str(), protocol.as_str()].into_iter().chain(texts).all(is_plain_field) {
        return sweep_row_quoted(p);
    }
    // No field needs quoting (numbers never do): the record is the fields joined by commas.
    let mut out = String::with_capacity(64 + 20 * (p.params.len() + QUANTITIES.len()));
    for s in [p.label.as_str(), p.family.as_str(), protocol.as_str()] {
        out.push_str(s);
        out.push(',');
    }
    for (_, v) in &p.params {
        match v {
            Value::Num(x) => push_num(&mut out, *x),
            Value::Text(s) => out.push_str(s),
        }
        out.push(',');
    }
    for q in QUANTITIES {
        push_num(&mut out, (q.value)(&p.eval).unwrap_or(f64::NAN));
        out.push(',');
    }
    out.pop();
    out.push('\n');
    Ok(out)
}

/// Whether the `csv` crate writes `field` as it is (inside a record of several fields): no
/// delimiter, quote or line break, and, to stay clear of its other rules, printable ASCII
/// only and not empty.
fn is_plain_field(field: &str) -> bool {
    !field.is_empty() && field.bytes().all(|b| b.is_ascii_graphic() && !matches!(b, b',' | b'"' | b'\\' | b'#'))
}

/// [`sweep_row`] through the `csv` crate's writer, for fields that need quoting.
fn sweep_row_quoted(p: &SweepPoint) -> Result<String> {
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
    use super::{fmt_num, run_sweep, std_digits, twelve_digits, EXACT_INTEGER_LIMIT};
    use crate::attack::file::{builtin_catalogue, parse};
    use crate::attack::Value;
    use crate::exact::eval::{evaluate, EvalOptions, QUANTITIES};
    use crate::protocol::Protocol;
    use proptest::prelude::*;
    use std::collections::BTreeMap;

    #[test]
    fn closed_form_points_match_the_general_route() {
        // Every built-in single-photon sweep: each point as the sweep computes it (closed
        // forms) against the attack built from its Kraus operators and the general
        // evaluator, to 1e-12 in every quantity; labels and parameters identical.
        let mut families = 0;
        for (name, text) in builtin_catalogue() {
            let file = parse(text).unwrap();
            if file.is_pulse_attack() || file.is_device_attack() || file.sweep().is_none() {
                continue;
            }
            families += 1;
            let param = file.sweep().unwrap().param.clone();
            for protocol in [Protocol::Bb84, Protocol::SixState] {
                let opts = EvalOptions::full(protocol);
                for p in run_sweep(&file, Some(23), &opts).unwrap() {
                    let Some((_, Value::Num(v))) = p.params.iter().find(|(k, _)| *k == param) else { panic!("{name}: no {param}") };
                    let attack = file.attack(&BTreeMap::from([(param.clone(), Value::Num(*v))])).unwrap();
                    let general = evaluate(&attack, &opts).unwrap();
                    assert_eq!((&p.label, &p.family, &p.params), (&attack.label, &attack.family, &attack.params.0), "{name}");
                    assert_eq!(p.eval.accessible_converged, general.accessible_converged);
                    for q in QUANTITIES {
                        let (a, b) = ((q.value)(&p.eval).unwrap(), (q.value)(&general).unwrap());
                        assert!((a - b).abs() <= 1e-12, "{name} {param} = {v} ({protocol}): {} {a} vs {b}", q.key);
                    }
                }
            }
        }
        assert!(families >= 6, "the built-in catalogue's single-photon sweeps: {families}");
    }

    /// The exact integer route's digits, trailing zeros dropped, as `std_digits` gives them.
    fn fast_digits(a: f64) -> Option<(String, i32)> {
        twelve_digits(a).map(|(n, e)| (n.to_string().trim_end_matches('0').to_string(), e))
    }

    #[test]
    fn the_integer_route_rounds_like_the_standard_formatter_at_the_edges() {
        // Ties (|x|·10^k a half-integer) go to even, as `format!("{:.11e}")` does.
        for x in [123456789012.5, 123456789013.5, 100000000000.5, 999999999999.5, 0.5, 2.5, 0.125, 0.375] {
            assert_eq!(fast_digits(x), Some(std_digits(x)), "{x}");
        }
        // Next to powers of ten, where the first guess of the exponent is off by one or
        // the rounding carries into a new digit.
        for e in -16..12 {
            let p = 10f64.powi(e);
            let mut x = p;
            for _ in 0..40 {
                x = f64::from_bits(x.to_bits() - 1);
            }
            for _ in 0..80 {
                if let Some(d) = fast_digits(x) {
                    assert_eq!(d, std_digits(x), "{x:e}");
                }
                x = f64::from_bits(x.to_bits() + 1);
            }
            for y in [p * (1.0 - 4e-13), p * (1.0 - 5e-13), p * (1.0 - 6e-13), p * (1.0 + 5e-12)] {
                if let Some(d) = fast_digits(y) {
                    assert_eq!(d, std_digits(y), "{y:e}");
                }
            }
        }
        // The route covers what the CSVs print: probabilities, bits, small gaps.
        for x in [1.5e-16, 3.3e-11, 1e-5, 0.25, 0.999999999999, 12345.678] {
            assert!(twelve_digits(x).is_some(), "{x}");
        }
    }

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

        /// The exact integer route and the standard formatter give the same digits.
        #[test]
        fn the_integer_route_matches_the_standard_formatter(bits in any::<u64>(), x in 1e-17f64..2e12) {
            for a in [f64::from_bits(bits).abs(), x] {
                if a.is_finite() && a > 0.0 {
                    if let Some(d) = fast_digits(a) {
                        prop_assert_eq!(d, std_digits(a), "{:e}", a);
                    }
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
