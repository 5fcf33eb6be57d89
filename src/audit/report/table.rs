//! `attack_vs_bound.csv`: one row per attack point, tidy, units in column names.
//!
//! | column | meaning |
//! |---|---|
//! | campaign, attack, family | names |
//! | point | index of the point in the campaign (its random-stream key) |
//! | params | all resolved parameters, `name=value;…` |
//! | sweep_param, sweep_value | the swept parameter and its value (empty if none) |
//! | protocol, key_rule, signals, trials | the setup and the trial count |
//! | qber_z, qber_x, qber_y | exact error rates |
//! | p_guess_z | exact Helstrom probability that Eve guesses a key bit |
//! | holevo_z_bits, h_x_given_e_bits, accessible_z_bits | exact information quantities |
//! | accessible_gap_bits | proven upper bound on the accessible information minus its value (worse of Z, X) |
//! | bound_rate_bits, attack_rate_bits, margin_bits | exact rates per sifted bit (see `eval`) |
//! | mc_qber_z, mc_qber_x | mean observed error rates over trials |
//! | mc_eve_guess_rate | fraction of all key bits Eve guessed (Monte Carlo) |
//! | mc_key_fraction_single_photon, mc_key_fraction_multi_photon | weak-coherent links: share of the key bits from single- and multi-photon pulses (empty otherwise) |
//! | mean_key_bits_n | mean number of key bits n (sifted Z minus the test sample) |
//! | abort_probability, abort_ci_low, abort_ci_high | with the Clopper–Pearson 95 % interval |
//! | key_length_mean_bits, key_length_q05_bits, key_length_q95_bits | extracted key ℓ (aborts count as 0; nearest-rank quantiles) |
//! | secure_fraction, inconclusive_fraction, no_key_fraction | trial verdict fractions |
//! | leak_probability, leak_ci_low, leak_ci_high | trials with ℓ > capacity + 2 log₂ n |
//! | mean_excess_bits | mean ℓ − capacity over trials with a key |
//! | mean_capacity_bits, mean_achievable_bits | means over trials that did not abort |
//! | verdict | leak, inconclusive, caught (all aborted) or secure |
//! | note | remarks, e.g. an attack that cannot match the honest gain |
//!
//! With several rules (campaign key `rules`), each point has one row per rule, all judged
//! on the same sampled blocks. For link-level attacks the information columns are
//! classical: Eve knows a fraction of the key bits exactly (`holevo_z_bits` = that
//! fraction); Y-basis, game and qubit-bound columns are empty.

use super::params_string;
use crate::audit::{Campaign, PointResult};
use crate::error::{Error, ErrorKind, Result};
use crate::exact::sweep::fmt_num;

/// The header, in order.
pub const COLUMNS: &[&str] = &[
    "campaign",
    "attack",
    "family",
    "point",
    "params",
    "sweep_param",
    "sweep_value",
    "protocol",
    "key_rule",
    "signals",
    "trials",
    "qber_z",
    "qber_x",
    "qber_y",
    "p_guess_z",
    "holevo_z_bits",
    "h_x_given_e_bits",
    "accessible_z_bits",
    "accessible_gap_bits",
    "bound_rate_bits",
    "attack_rate_bits",
    "margin_bits",
    "mc_qber_z",
    "mc_qber_x",
    "mc_eve_guess_rate",
    "mc_key_fraction_single_photon",
    "mc_key_fraction_multi_photon",
    "mean_key_bits_n",
    "abort_probability",
    "abort_ci_low",
    "abort_ci_high",
    "key_length_mean_bits",
    "key_length_q05_bits",
    "key_length_q95_bits",
    "secure_fraction",
    "inconclusive_fraction",
    "no_key_fraction",
    "leak_probability",
    "leak_ci_low",
    "leak_ci_high",
    "mean_excess_bits",
    "mean_capacity_bits",
    "mean_achievable_bits",
    "verdict",
    "note",
];

/// Renders the table.
pub fn render(c: &Campaign, results: &[PointResult]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| Error::new(ErrorKind::Io, e.to_string());
    w.write_record(COLUMNS).map_err(io)?;
    for r in results {
        let s = &r.stats;
        let e = &r.exact;
        let (sp, sv) = match &r.swept {
            Some((p, v)) => (p.clone(), fmt_num(*v)),
            None => (String::new(), String::new()),
        };
        let n = fmt_num;
        let row: Vec<String> = vec![
            c.name.clone(),
            r.attack.clone(),
            r.family.clone(),
            r.index.to_string(),
            params_string(&r.params),
            sp,
            sv,
            c.setup.protocol.to_string(),
            r.rule.to_string(),
            c.setup.signals.to_string(),
            s.trials.to_string(),
            n(e.qber_z),
            n(e.qber_x),
            n(e.qber_y),
            n(e.p_guess_z),
            n(e.holevo_z),
            n(e.h_x_given_e),
            n(e.accessible_z.unwrap_or(f64::NAN)),
            n(e.accessible_gap.unwrap_or(f64::NAN)),
            n(e.bound_rate),
            n(e.attack_rate),
            n(e.margin),
            n(s.mean_e_z),
            n(s.mean_e_x),
            n(s.eve_guess_rate),
            n(s.key_fraction_single),
            n(s.key_fraction_multi),
            n(s.mean_key_bits),
            n(s.abort_probability),
            n(s.abort_ci.0),
            n(s.abort_ci.1),
            n(s.key_length_mean),
            s.key_length_q05.to_string(),
            s.key_length_q95.to_string(),
            n(s.secure_fraction),
            n(s.inconclusive_fraction),
            n(s.no_key_fraction),
            n(s.leak_probability),
            n(s.leak_ci.0),
            n(s.leak_ci.1),
            n(s.mean_excess),
            n(s.mean_capacity),
            n(s.mean_achievable),
            s.verdict.to_string(),
            r.note.clone(),
        ];
        debug_assert_eq!(row.len(), COLUMNS.len());
        w.write_record(&row).map_err(io)?;
    }
    let bytes = w.into_inner().map_err(|e| Error::new(ErrorKind::Io, e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv is UTF-8"))
}
