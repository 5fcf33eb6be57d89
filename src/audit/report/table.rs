//! `attack_vs_bound.csv`: one row per attack point, tidy, units in column names.
//!
//! | column | meaning |
//! |---|---|
//! | campaign, attack, family | names |
//! | entry | index of the attack's entry in the campaign, from 0 (the points of one entry share it) |
//! | point | index of the point in the campaign (its random-stream key) |
//! | `param_<name>` | one column per attack parameter over all rows (e.g. `param_fraction`, `param_kind`), empty where an attack has no such parameter |
//! | sweep_param, sweep_value | the swept parameter and its value (empty if none) |
//! | `setup_<key>` | campaigns with `[[setup_sweeps]]` only: one column per swept setup key, its value at the row's point (dots and brackets of the key as underscores: `setup_signals`, `setup_channel_length_km`, `setup_source_decoys_0`) |
//! | protocol, key_rule, signals, trials | the row's setup and the trial count |
//! | qber_z, qber_x, qber_y | exact error rates |
//! | p_guess_z | exact Helstrom probability that Eve guesses a key bit |
//! | holevo_z_bits, h_x_given_e_bits, accessible_z_bits | exact information quantities |
//! | accessible_gap_bits | proven upper bound on the accessible information minus its value (worse of Z, X) |
//! | bound_rate_bits, attack_rate_bits, margin_bits | exact rates per sifted bit (see `eval`) |
//! | mc_qber_z, mc_qber_x, mc_qber_y | mean observed error rates over trials (Y: six-state only) |
//! | mc_eve_guess_rate | fraction of all key bits Eve guessed (Monte Carlo) |
//! | mc_key_fraction_single_photon, mc_key_fraction_multi_photon | weak-coherent links: share of the key bits from single- and multi-photon pulses (empty otherwise) |
//! | mean_key_bits_n | mean number of key bits n (sifted Z minus the test sample) |
//! | abort_probability, abort_ci_low, abort_ci_high | with the Clopper–Pearson 95 % interval |
//! | key_length_mean_bits, key_length_q05_bits, key_length_q95_bits | extracted key ℓ (aborts count as 0; nearest-rank quantiles) |
//! | secure_fraction, inconclusive_fraction, no_key_fraction | trial verdict fractions |
//! | leak_probability, leak_ci_low, leak_ci_high | trials with ℓ > capacity + 2 log₂ n |
//! | mean_excess_bits | mean ℓ − capacity over trials with a key |
//! | leak_excess_mean_bits, leak_excess_max_bits | mean and largest ℓ − capacity over the leaking trials (empty without one) |
//! | mean_capacity_bits, mean_achievable_bits | means over trials that did not abort |
//! | leak_cause | for a leaking row, one sentence on which assumption of the rule the attack breaks (empty otherwise) |
//! | verdict | the point's verdict: leak, inconclusive, secure, no-key (no trial gave a key) or aborted (every trial aborted) |
//! | note | remarks, e.g. an attack that cannot match the honest gain |
//!
//! With several rules (campaign key `rules`), each point has one row per rule, all judged
//! on the same sampled blocks. For link-level attacks the information columns are
//! classical: Eve knows a fraction of the key bits exactly (`holevo_z_bits` = that
//! fraction); Y-basis, game and qubit-bound columns are empty.

use crate::attack::Value;
use crate::audit::trial::Verdict;
use crate::audit::{Campaign, PointResult};
use crate::error::{Error, ErrorKind, Result};
use crate::exact::eval::Quantity;
use crate::exact::sweep::fmt_num;

/// One column: its header and how a row's cell is made.
struct Column {
    header: &'static str,
    cell: fn(&Campaign, &PointResult) -> String,
}

/// The columns before the attack parameters.
const LEADING: usize = 5;

/// The columns between the attack parameters and the swept setup keys
/// (`sweep_param, sweep_value`).
const SWEEP: usize = 2;

/// A column of the evaluator's quantities, under the quantity's own CSV column name.
macro_rules! exact {
    ($column:literal) => {
        Column { header: $column, cell: |_, r| fmt_num((Quantity::by_column($column).value)(&r.exact).unwrap_or(f64::NAN)) }
    };
}

macro_rules! column {
    ($header:literal, |$c:ident, $r:ident| $cell:expr) => {
        Column { header: $header, cell: |$c, $r| $cell }
    };
}

/// The columns, in order.
const COLUMNS: &[Column] = &[
    column!("campaign", |c, _r| c.name.clone()),
    column!("attack", |_c, r| r.attack.clone()),
    column!("family", |_c, r| r.family.clone()),
    column!("entry", |_c, r| r.entry.to_string()),
    column!("point", |_c, r| r.index.to_string()),
    column!("sweep_param", |_c, r| r.swept.as_ref().map_or(String::new(), |(p, _)| p.clone())),
    column!("sweep_value", |_c, r| r.swept.as_ref().map_or(String::new(), |(_, v)| fmt_num(*v))),
    column!("protocol", |c, r| c.setups[r.setup].setup.protocol.to_string()),
    column!("key_rule", |_c, r| r.rule.to_string()),
    column!("signals", |c, r| c.setups[r.setup].setup.signals.to_string()),
    column!("trials", |_c, r| r.stats.trials.to_string()),
    exact!("qber_z"),
    exact!("qber_x"),
    exact!("qber_y"),
    exact!("p_guess_z"),
    exact!("holevo_z_bits"),
    exact!("h_x_given_e_bits"),
    exact!("accessible_z_bits"),
    exact!("accessible_gap_bits"),
    exact!("bound_rate_bits"),
    exact!("attack_rate_bits"),
    exact!("margin_bits"),
    column!("mc_qber_z", |_c, r| fmt_num(r.stats.mean_e_z)),
    column!("mc_qber_x", |_c, r| fmt_num(r.stats.mean_e_x)),
    column!("mc_qber_y", |_c, r| fmt_num(r.stats.mean_e_y)),
    column!("mc_eve_guess_rate", |_c, r| fmt_num(r.stats.eve_guess_rate)),
    column!("mc_key_fraction_single_photon", |_c, r| fmt_num(r.stats.key_fraction_single)),
    column!("mc_key_fraction_multi_photon", |_c, r| fmt_num(r.stats.key_fraction_multi)),
    column!("mean_key_bits_n", |_c, r| fmt_num(r.stats.mean_key_bits)),
    column!("abort_probability", |_c, r| fmt_num(r.stats.abort_probability)),
    column!("abort_ci_low", |_c, r| fmt_num(r.stats.abort_ci.0)),
    column!("abort_ci_high", |_c, r| fmt_num(r.stats.abort_ci.1)),
    column!("key_length_mean_bits", |_c, r| fmt_num(r.stats.key_length_mean)),
    column!("key_length_q05_bits", |_c, r| r.stats.key_length_q05.to_string()),
    column!("key_length_q95_bits", |_c, r| r.stats.key_length_q95.to_string()),
    column!("secure_fraction", |_c, r| fmt_num(r.stats.secure_fraction)),
    column!("inconclusive_fraction", |_c, r| fmt_num(r.stats.inconclusive_fraction)),
    column!("no_key_fraction", |_c, r| fmt_num(r.stats.no_key_fraction)),
    column!("leak_probability", |_c, r| fmt_num(r.stats.leak_probability)),
    column!("leak_ci_low", |_c, r| fmt_num(r.stats.leak_ci.0)),
    column!("leak_ci_high", |_c, r| fmt_num(r.stats.leak_ci.1)),
    column!("mean_excess_bits", |_c, r| fmt_num(r.stats.mean_excess)),
    column!("leak_excess_mean_bits", |_c, r| fmt_num(r.stats.leak_excess_mean)),
    column!("leak_excess_max_bits", |_c, r| fmt_num(r.stats.leak_excess_max)),
    column!("mean_capacity_bits", |_c, r| fmt_num(r.stats.mean_capacity)),
    column!("mean_achievable_bits", |_c, r| fmt_num(r.stats.mean_achievable)),
    column!("leak_cause", |c, r| if r.stats.verdict == Verdict::Leak { super::summary::leak_cause(c, r) } else { String::new() }),
    column!("verdict", |_c, r| r.stats.verdict.to_string()),
    column!("note", |_c, r| r.note.clone()),
];

/// The names of the attack parameters over all rows, in order of first appearance: one
/// `param_<name>` column each, empty where a row's attack has no such parameter.
fn parameter_names(results: &[PointResult]) -> Vec<String> {
    let mut names: Vec<String> = Vec::new();
    for r in results {
        for (k, _) in &r.params {
            if !names.contains(k) {
                names.push(k.clone());
            }
        }
    }
    names
}

/// The header, in order, for rows with attack parameters `params` and swept setup keys
/// `setup_columns` (`setup_<key>`).
pub fn header(params: &[String], setup_columns: &[String]) -> Vec<String> {
    let fixed = COLUMNS.iter().map(|c| c.header.to_string());
    fixed
        .clone()
        .take(LEADING)
        .chain(params.iter().map(|p| format!("param_{p}")))
        .chain(fixed.clone().skip(LEADING).take(SWEEP))
        .chain(setup_columns.iter().cloned())
        .chain(fixed.skip(LEADING + SWEEP))
        .collect()
}

/// Renders the table.
pub fn render(c: &Campaign, results: &[PointResult]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| Error::new(ErrorKind::Io, e.to_string());
    let params = parameter_names(results);
    let setup_columns: Vec<String> = c.setup_sweeps.iter().map(|s| s.key.column()).collect();
    w.write_record(header(&params, &setup_columns)).map_err(io)?;
    for r in results {
        let cells = COLUMNS.iter().map(|col| (col.cell)(c, r));
        let values = params.iter().map(|p| match r.params.iter().find(|(k, _)| k == p) {
            Some((_, Value::Num(x))) => fmt_num(*x),
            Some((_, Value::Text(s))) => s.clone(),
            None => String::new(),
        });
        let setup_values = c.setups[r.setup].values.iter().map(|(_, v)| fmt_num(*v));
        let row: Vec<String> = cells
            .clone()
            .take(LEADING)
            .chain(values)
            .chain(cells.clone().skip(LEADING).take(SWEEP))
            .chain(setup_values)
            .chain(cells.skip(LEADING + SWEEP))
            .collect();
        w.write_record(row).map_err(io)?;
    }
    let bytes = w.into_inner().map_err(|e| Error::new(ErrorKind::Io, e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv is UTF-8"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn headers_are_unique_and_tidy() {
        let mut seen = std::collections::BTreeSet::new();
        for h in header(&["fraction".to_string()], &["setup_signals".to_string()]) {
            assert!(h.chars().all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_'), "{h}");
            assert!(seen.insert(h.clone()), "duplicate column {h}");
        }
    }
}
