//! The campaign engine: for each attack point, the exact quantities and the model to sample
//! are computed once; then every trial draws a block from its own random stream
//! ([`crate::numeric::rng::trial_rng`] with the point's index and the trial's index),
//! post-processes it and is judged under every rule of the campaign ([`super::trial`]).
//! Trials are collected in order, so output bytes do not depend on threads.

use super::campaign::Campaign;
use super::rules::KeyRule;
use super::sample::sample_block;
use super::{stats, trial};
use crate::attack::{AnyAttack, Value};
use crate::error::Result;
use crate::exact::eval::{evaluate, EvalOptions, Evaluation};
use crate::exact::pulses::{pulse_evaluation, PulseModel};
use crate::exact::signal::SignalModel;
use crate::numeric::rng::trial_rng;
use rayon::prelude::*;

/// The result for one attack point under one key-length rule. Serialisable so that a
/// shard's results can be merged (`qkd-audit merge`).
#[derive(Clone, Debug, serde::Serialize, serde::Deserialize)]
pub struct PointResult {
    /// Index of the attack entry in the campaign.
    pub entry: usize,
    /// Index of the point in the campaign (its random-stream key).
    pub index: u64,
    /// Attack label.
    pub attack: String,
    /// Family.
    pub family: String,
    /// Resolved parameters.
    pub params: Vec<(String, Value)>,
    /// The swept parameter and its value, if any.
    pub swept: Option<(String, f64)>,
    /// The key-length rule judged.
    pub rule: KeyRule,
    /// The evaluator's exact quantities. For link-level attacks Eve's knowledge is
    /// classical (she knows a fraction of the key bits exactly), and the fields are filled
    /// accordingly (see [`pulse_evaluation`]).
    pub exact: Evaluation,
    /// Exact probability that Eve guesses a sifted key bit.
    pub exact_eve_guess: f64,
    /// Remarks about the point (e.g. an attack that cannot match the honest gain).
    pub note: String,
    /// Monte Carlo summary.
    pub stats: stats::PointStats,
}

/// A point ready to sample.
enum PointModel {
    Qubit(SignalModel),
    Pulse(PulseModel),
}

/// Runs the campaign; `progress` is called once per finished point.
pub fn run(c: &Campaign, progress: &(dyn Fn() + Sync)) -> Result<Vec<PointResult>> {
    run_points(c, progress, &|_| true)
}

/// Runs only the points whose campaign index `keep` accepts (a shard of the campaign,
/// `run --shard`); each point keeps its index, hence its random streams, so the union of
/// the shards' results is the full run's, row for row.
pub fn run_points(c: &Campaign, progress: &(dyn Fn() + Sync), keep: &(dyn Fn(u64) -> bool + Sync)) -> Result<Vec<PointResult>> {
    let mut jobs = Vec::new();
    for (ei, entry) in c.attacks.iter().enumerate() {
        for (swept, overrides) in entry.points() {
            jobs.push((ei, entry, swept, overrides));
        }
    }
    let jobs: Vec<_> = jobs.into_iter().enumerate().filter(|(index, _)| keep(*index as u64)).collect();
    let eval_opts = EvalOptions::full(c.setup.protocol);
    let basis_prob = c.setup.basis_probabilities();
    let rule_params = c.setup.rule_params();
    let per_point: Vec<Vec<PointResult>> = jobs
        .par_iter()
        .map(|(index, (ei, entry, swept, overrides))| {
            let index = *index;
            // Every link but the ideal single-photon one goes through the link model.
            let link_model = !c.setup.link.is_ideal_single_photon();
            let attack = entry.file.build(overrides).map_err(|e| e.with_file(&entry.origin))?;
            let (family, params, exact, model, note) = match attack {
                AnyAttack::Pulse(attack) => {
                    let model = PulseModel::new(&c.setup.link, Some(&attack), &basis_prob);
                    let exact = pulse_evaluation(&model, c.setup.protocol);
                    let note = model.note.clone();
                    (
                        attack.name().to_string(),
                        vec![("fraction".to_string(), Value::Num(attack.fraction()))],
                        exact,
                        PointModel::Pulse(model),
                        note,
                    )
                }
                AnyAttack::Qubit(attack) if link_model => {
                    let qubit = evaluate(&attack, &EvalOptions::fast(c.setup.protocol))?;
                    let model = PulseModel::qubit(&c.setup.link, &attack, c.setup.protocol, &basis_prob, qubit.h_x_given_e);
                    let exact = pulse_evaluation(&model, c.setup.protocol);
                    let note = model.note.clone();
                    (attack.family.clone(), attack.params.0.clone(), exact, PointModel::Pulse(model), note)
                }
                AnyAttack::Qubit(attack) => {
                    let exact = evaluate(&attack, &eval_opts)?;
                    let model = SignalModel::new(&attack, c.setup.protocol, &basis_prob);
                    (attack.family.clone(), attack.params.0.clone(), exact, PointModel::Qubit(model), String::new())
                }
            };
            let setup = &c.setup;
            let test_size = |z: u64| setup.test_sample.size(z);
            let trials: Vec<Vec<trial::TrialOutcome>> = (0..c.trials)
                .into_par_iter()
                .map(|t| {
                    let mut rng = trial_rng(c.seed, index as u64, t);
                    let counts = match &model {
                        PointModel::Qubit(m) => sample_block(c.sampler, m, setup.signals, &test_size, &mut rng),
                        PointModel::Pulse(m) => crate::audit::sample::pulses::sample(m, setup.signals, &test_size, &mut rng),
                    };
                    c.rules.iter().map(|&rule| trial::judge(&counts, rule, &rule_params, exact.h_x_given_e)).collect()
                })
                .collect();
            progress();
            let exact_eve_guess = match &model {
                PointModel::Qubit(m) => m.eve_guess_rate(0),
                PointModel::Pulse(_) => exact.p_guess_z,
            };
            Ok(c.rules
                .iter()
                .enumerate()
                .map(|(ri, rule)| {
                    let outcomes: Vec<trial::TrialOutcome> = trials.iter().map(|v| v[ri].clone()).collect();
                    PointResult {
                        entry: *ei,
                        index: index as u64,
                        attack: entry.label.clone(),
                        family: family.clone(),
                        params: params.clone(),
                        swept: swept.clone(),
                        rule: *rule,
                        exact: exact.clone(),
                        exact_eve_guess,
                        note: note.clone(),
                        stats: stats::summarize(&outcomes),
                    }
                })
                .collect())
        })
        .collect::<Result<_>>()?;
    // Rule-major order within each entry keeps each attack's sweep together per rule.
    let mut out: Vec<PointResult> = per_point.into_iter().flatten().collect();
    out.sort_by_key(|r| (r.entry, c.rules.iter().position(|x| *x == r.rule).unwrap_or(0), r.index));
    Ok(out)
}

/// Number of points a campaign will run.
pub fn point_count(c: &Campaign) -> usize {
    c.attacks.iter().map(|e| e.points().len()).sum()
}
