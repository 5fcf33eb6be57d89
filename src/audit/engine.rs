//! The campaign engine: for each point (attack entry × the entry's sweep value × setup of
//! [`Campaign::setups`], in that order, the setup innermost), the exact quantities and the
//! model to sample are computed once, with the point's own setup; then every trial draws a block from its own random stream
//! ([`crate::numeric::rng::trial_rng`] with the point's index and the trial's index),
//! post-processes it and is judged under every rule of the campaign ([`super::trial`]).
//! Trials run in chunks of [`CHUNK_TRIALS`]: a chunk is sampled in parallel, then every rule
//! answers for the whole chunk (built-in rules and formulas block by block in parallel, a
//! rule program in one batch round trip), then the blocks are judged and fed to the point's
//! [`stats::Tally`] in trial order, so output bytes do not depend on threads. With a rule
//! program the points run one after another (the program sees point, then trial order);
//! otherwise points run in parallel too.

use super::campaign::{AttackEntry, Campaign};
use super::rules::program::{ProgramLog, Session, TrialId};
use super::rules::{BlockStats, Rule, RuleAnswer, RuleParams};
use super::sample::{sample_block, BlockCounts};
use super::{stats, trial};
use crate::attack::{AnyAttack, Value};
use crate::error::{Error, ErrorKind, Result};
use crate::exact::device::evaluate_device;
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
    /// The point's setup: an index into [`Campaign::setups`] (0 without setup sweeps).
    pub setup: usize,
    /// The key-length rule judged.
    pub rule: Rule,
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

/// Trials of one point sampled and judged together: the batch a rule program gets in one
/// round trip, and the bound on per-point memory (besides 8 bytes per trial and rule for
/// the exact key-length quantiles, see [`stats::Tally`]).
pub const CHUNK_TRIALS: u64 = 4096;

/// One point with its exact quantities and the model to sample, computed once.
struct Prepared<'a> {
    index: usize,
    entry: usize,
    attack_entry: &'a AttackEntry,
    swept: Option<(String, f64)>,
    /// Index of the point's setup in `Campaign::setups`.
    setup: usize,
    family: String,
    params: Vec<(String, Value)>,
    exact: Evaluation,
    model: PointModel,
    note: String,
}

/// Runs the campaign; `progress` is called once per finished point.
pub fn run(c: &Campaign, progress: &(dyn Fn() + Sync)) -> Result<Vec<PointResult>> {
    run_logged(c, progress).map(|(results, _)| results)
}

/// Runs the campaign and gives, besides the results, the log of every rule program (its
/// stderr and notes) for the results folder.
pub fn run_logged(c: &Campaign, progress: &(dyn Fn() + Sync)) -> Result<(Vec<PointResult>, Vec<ProgramLog>)> {
    run_points(c, progress, &|_| true)
}

/// Runs only the points whose campaign index `keep` accepts (a shard of the campaign,
/// `run --shard`); each point keeps its index, hence its random streams, so the union of
/// the shards' results is the full run's, row for row.
pub fn run_points(
    c: &Campaign,
    progress: &(dyn Fn() + Sync),
    keep: &(dyn Fn(u64) -> bool + Sync),
) -> Result<(Vec<PointResult>, Vec<ProgramLog>)> {
    let prepared = prepare(c, keep)?;
    let (per_point, logs) = for_each_point(c, &prepared, progress, &|p, sessions| run_point(c, p, sessions))?;
    // Rule-major order within each entry keeps each attack's sweep together per rule.
    let mut out: Vec<PointResult> = per_point.into_iter().flatten().collect();
    out.sort_by_key(|r| (r.entry, c.rules.iter().position(|x| *x == r.rule).unwrap_or(0), r.index));
    Ok((out, logs))
}

/// The counts of one work unit of [`run_units`]: one chunk of one point's trials, under
/// every rule of the campaign.
#[derive(Clone, Debug, serde::Serialize, serde::Deserialize)]
pub struct UnitCounts {
    /// Index of the point in the campaign.
    pub point: u64,
    /// Index of the chunk: trials `chunk · CHUNK_TRIALS ..` of the point.
    pub chunk: u64,
    /// The point's attack label.
    pub attack: String,
    /// The point's resolved attack parameters, `name=value;…` (as in the results tables).
    pub params: String,
    /// The chunk's counts, one per rule of the campaign (in its order).
    pub counts: Vec<stats::Counts>,
}

/// Number of trial chunks of each point: ⌈trials / [`CHUNK_TRIALS`]⌉.
pub fn chunk_count(c: &Campaign) -> u64 {
    c.trials.div_ceil(CHUNK_TRIALS)
}

/// Runs only the (point, chunk) work units that `keep` accepts and gives their integer
/// counts, point by point and chunk by chunk in order. Each trial keeps its random stream
/// (the point's index and the trial's), so the counts of a unit are the same whichever
/// process computes it, and adding the units' counts gives the whole campaign's (the
/// tolerance search's shards). Rule programs are asked in point, then trial order.
pub fn run_units(c: &Campaign, keep: &(dyn Fn(u64, u64) -> bool + Sync)) -> Result<Vec<UnitCounts>> {
    let chunks = chunk_count(c);
    let prepared = prepare(c, &|point| (0..chunks).any(|chunk| keep(point, chunk)))?;
    let work = |p: &Prepared, sessions: &mut [Option<Session>]| -> Result<Vec<UnitCounts>> {
        let mut units = Vec::new();
        for chunk in (0..chunks).filter(|&chunk| keep(p.index as u64, chunk)) {
            let start = chunk * CHUNK_TRIALS;
            let outcomes = judge_chunk(c, p, sessions, start, (start + CHUNK_TRIALS).min(c.trials))?;
            let counts = outcomes
                .iter()
                .map(|rule_outcomes| {
                    let mut k = stats::Counts::default();
                    rule_outcomes.iter().for_each(|o| k.add(o));
                    k
                })
                .collect();
            units.push(UnitCounts {
                point: p.index as u64,
                chunk,
                attack: p.attack_entry.label.clone(),
                params: super::report::params_string(&p.params),
                counts,
            });
        }
        Ok(units)
    };
    let (per_point, _logs) = for_each_point(c, &prepared, &|| {}, &work)?;
    Ok(per_point.into_iter().flatten().collect())
}

/// Builds the points whose campaign index `keep` accepts: their attacks, exact quantities
/// and the models to sample.
fn prepare<'a>(c: &'a Campaign, keep: &(dyn Fn(u64) -> bool + Sync)) -> Result<Vec<Prepared<'a>>> {
    let mut jobs = Vec::new();
    for (ei, entry) in c.attacks.iter().enumerate() {
        for (swept, overrides) in entry.points() {
            for si in 0..c.setups.len() {
                jobs.push((ei, entry, swept.clone(), overrides.clone(), si));
            }
        }
    }
    let jobs: Vec<_> = jobs.into_iter().enumerate().filter(|(index, _)| keep(*index as u64)).collect();
    jobs.par_iter()
        .map(|(index, (ei, entry, swept, overrides, si))| {
            let index = *index;
            let setup = &c.setups[*si].setup;
            let eval_opts = EvalOptions::full(setup.protocol);
            let basis_prob = setup.basis_probabilities();
            // Every link but the ideal single-photon one goes through the link model.
            let link_model = !setup.link.is_ideal_single_photon();
            let attack = entry.file.build(overrides).map_err(|e| e.with_file(&entry.origin))?;
            let (family, params, exact, model, note) = match attack {
                AnyAttack::Pulse(attack) => {
                    let model = PulseModel::new(&setup.link, Some(&attack), &basis_prob);
                    let exact = pulse_evaluation(&model, setup.protocol);
                    let note = model.note.clone();
                    (
                        attack.name().to_string(),
                        vec![("fraction".to_string(), Value::Num(attack.fraction()))],
                        exact,
                        PointModel::Pulse(model),
                        note,
                    )
                }
                AnyAttack::Device(attack) => {
                    let link = &setup.link;
                    if !matches!(link.source, crate::protocol::optical::Source::SinglePhoton)
                        || link.dark_count_probability != 0.0
                        || link.misalignment != 0.0
                    {
                        return Err(crate::exact::device::unsupported_link(&attack.label));
                    }
                    let point = evaluate_device(&attack, &link.flaws, setup.protocol, &basis_prob, &eval_opts)?;
                    (attack.family.clone(), attack.params.0.clone(), point.evaluation, PointModel::Qubit(point.model), point.note)
                }
                AnyAttack::Qubit(attack) if link_model => {
                    let qubit = evaluate(&attack, &EvalOptions::fast(setup.protocol))?;
                    let model = PulseModel::qubit(&setup.link, &attack, setup.protocol, &basis_prob, qubit.h_x_given_e);
                    let exact = pulse_evaluation(&model, setup.protocol);
                    let note = model.note.clone();
                    (attack.family.clone(), attack.params.0.clone(), exact, PointModel::Pulse(model), note)
                }
                AnyAttack::Qubit(attack) => {
                    let exact = evaluate(&attack, &eval_opts)?;
                    let model = SignalModel::new(&attack, setup.protocol, &basis_prob);
                    (attack.family.clone(), attack.params.0.clone(), exact, PointModel::Qubit(model), String::new())
                }
            };
            Ok(Prepared { index, entry: *ei, attack_entry: entry, swept: swept.clone(), setup: *si, family, params, exact, model, note })
        })
        .collect::<Result<_>>()
}

/// The work done on one prepared point, given the running rule programs (if any).
type PointWork<'w, T> = dyn Fn(&Prepared, &mut [Option<Session>]) -> Result<T> + Sync + 'w;

/// Runs `work` on every prepared point and gives its results in point order, with the
/// logs of the rule programs. With a rule program the points run one after the other (the
/// program sees point, then trial order) and `work` gets the running programs; otherwise
/// points run in parallel and `work` gets none.
fn for_each_point<T: Send>(
    c: &Campaign,
    prepared: &[Prepared],
    progress: &(dyn Fn() + Sync),
    work: &PointWork<T>,
) -> Result<(Vec<T>, Vec<ProgramLog>)> {
    let has_program = c.rules.iter().any(|r| matches!(r, Rule::Program(_)));
    if has_program {
        let mut sessions: Vec<Option<Session>> =
            c.rules.iter().map(|r| if let Rule::Program(p) = r { p.start().map(Some) } else { Ok(None) }).collect::<Result<_>>()?;
        let results = prepared
            .iter()
            .map(|p| {
                let r = work(p, &mut sessions);
                progress();
                r
            })
            .collect::<Result<Vec<_>>>()?;
        let logs = sessions.into_iter().flatten().map(Session::finish).collect::<Result<Vec<_>>>()?;
        Ok((results, logs))
    } else {
        let results = prepared
            .par_iter()
            .map(|p| {
                let r = work(p, &mut []);
                progress();
                r
            })
            .collect::<Result<Vec<_>>>()?;
        Ok((results, Vec::new()))
    }
}

/// Samples and judges every trial of one point, chunk by chunk, under every rule;
/// `sessions[i]` is the running program of rule i, if it is one.
fn run_point(c: &Campaign, p: &Prepared, sessions: &mut [Option<Session>]) -> Result<Vec<PointResult>> {
    let mut tallies: Vec<stats::Tally> = c.rules.iter().map(|_| stats::Tally::with_capacity(c.trials)).collect();
    let mut start = 0;
    while start < c.trials {
        let end = (start + CHUNK_TRIALS).min(c.trials);
        for (tally, outcomes) in tallies.iter_mut().zip(judge_chunk(c, p, sessions, start, end)?) {
            outcomes.iter().for_each(|o| tally.add(o));
        }
        start = end;
    }
    let exact_eve_guess = match &p.model {
        PointModel::Qubit(m) => m.eve_guess_rate(0),
        PointModel::Pulse(_) => p.exact.p_guess_z,
    };
    Ok(c.rules
        .iter()
        .zip(tallies)
        .map(|(rule, tally)| PointResult {
            entry: p.entry,
            index: p.index as u64,
            attack: p.attack_entry.label.clone(),
            family: p.family.clone(),
            params: p.params.clone(),
            swept: p.swept.clone(),
            setup: p.setup,
            rule: rule.clone(),
            exact: p.exact.clone(),
            exact_eve_guess,
            note: p.note.clone(),
            stats: tally.finish(),
        })
        .collect())
}

/// Samples trials `start..end` of one point in parallel (each from its own stream), asks
/// every rule (a rule program in one batch round trip) and judges the blocks: the outcomes
/// per rule, in trial order.
fn judge_chunk(
    c: &Campaign,
    p: &Prepared,
    sessions: &mut [Option<Session>],
    start: u64,
    end: u64,
) -> Result<Vec<Vec<trial::TrialOutcome>>> {
    let setup = &c.setups[p.setup].setup;
    let rule_params = setup.rule_params();
    let test_size = |z: u64| setup.test_sample.size(z);
    let h = p.exact.h_x_given_e;
    let blocks: Vec<(BlockCounts, BlockStats)> = (start..end)
        .into_par_iter()
        .map(|t| {
            let mut rng = trial_rng(c.seed, p.index as u64, t);
            let counts = match &p.model {
                PointModel::Qubit(m) => sample_block(c.sampler, m, setup.signals, &test_size, &mut rng),
                PointModel::Pulse(m) => crate::audit::sample::pulses::sample(m, setup.signals, &test_size, &mut rng),
            };
            let stats = trial::block_stats(&counts);
            (counts, stats)
        })
        .collect();
    let id = |i: usize| TrialId { point: p.index as u64, trial: start + i as u64 };
    let mut per_rule = Vec::with_capacity(c.rules.len());
    for (ri, rule) in c.rules.iter().enumerate() {
        let answers: Vec<Option<RuleAnswer>> = match (rule, sessions.get_mut(ri).and_then(Option::as_mut)) {
            (Rule::Program(_), Some(session)) => {
                let asked: Vec<(TrialId, &BlockStats, &RuleParams)> = blocks
                    .iter()
                    .enumerate()
                    .filter(|(_, (_, s))| !trial::is_empty(s))
                    .map(|(i, (_, s))| (id(i), s, &rule_params))
                    .collect();
                let mut given = session.ask(&asked)?.into_iter();
                blocks
                    .iter()
                    .map(|(_, s)| {
                        (!trial::is_empty(s)).then(|| given.next().map(|a| RuleAnswer { abort: a.abort, length: a.length })).flatten()
                    })
                    .collect()
            }
            _ => blocks
                .par_iter()
                .enumerate()
                .map(|(i, (_, s))| {
                    if trial::is_empty(s) {
                        return Ok(None);
                    }
                    rule.answer(s, &rule_params, trial::threshold_aborts(s, &rule_params))
                        .map(Some)
                        .map_err(|m| Error::new(ErrorKind::NotANumber, format!("{m}, at {} ({})", id(i), p.attack_entry.label)))
                })
                .collect::<Result<_>>()?,
        };
        per_rule.push(
            blocks.par_iter().zip(answers).map(|((counts, s), answer)| trial::judge_answer(counts, *s, answer, &rule_params, h)).collect(),
        );
    }
    Ok(per_rule)
}

/// Number of points a campaign will run.
pub fn point_count(c: &Campaign) -> usize {
    c.attacks.iter().map(|e| e.points().len()).sum::<usize>() * c.setups.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::trial::Verdict;

    /// The units' counts, added up per point, agree with the point results of `run` (the
    /// same trials through the tally), and any split of the units adds up to the same counts.
    #[test]
    fn unit_counts_add_up_to_the_run_and_do_not_depend_on_the_split() {
        let mut c = Campaign::demo();
        c.attacks.truncate(2);
        c.rules.truncate(1);
        c.trials = CHUNK_TRIALS + 904;
        let results = run(&c, &|| {}).unwrap();
        let all = run_units(&c, &|_, _| true).unwrap();
        let chunks = chunk_count(&c);
        assert_eq!(chunks, 2);
        assert_eq!(all.len() as u64, results.len() as u64 * chunks);
        let by_point = |units: &[UnitCounts]| {
            let mut out = std::collections::BTreeMap::<u64, stats::Counts>::new();
            for u in units {
                out.entry(u.point).or_default().merge(&u.counts[0]);
            }
            out
        };
        let whole = by_point(&all);
        for r in &results {
            let k = &whole[&r.index];
            let s = &r.stats;
            assert_eq!(k.trials, s.trials);
            assert_eq!(k.count(Verdict::Leak) as f64 / k.trials as f64, s.leak_probability);
            assert_eq!(k.count(Verdict::Aborted) as f64 / k.trials as f64, s.abort_probability);
            assert_eq!(k.count(Verdict::NoKey) as f64 / k.trials as f64, s.no_key_fraction);
            assert_eq!(k.verdict(), s.verdict);
            assert!((k.key_length_mean() - s.key_length_mean).abs() <= 1e-9 * s.key_length_mean.abs().max(1.0), "{r:?}");
        }
        // Two halves computed separately, and chunk by chunk in reverse: the same counts.
        let odd = run_units(&c, &|p, ch| (p + ch) % 2 == 1).unwrap();
        let even = run_units(&c, &|p, ch| (p + ch) % 2 == 0).unwrap();
        assert_eq!(odd.len() + even.len(), all.len());
        let mut halves: Vec<UnitCounts> = even.into_iter().chain(odd).collect();
        halves.reverse();
        assert_eq!(by_point(&halves), whole);
    }
}
