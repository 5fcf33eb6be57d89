//! Tolerance search: along one numeric setup key, where does a key-length rule start to leak
//! (or to lose all key) against the strongest of a campaign's attacks?
//!
//! Owns the search and its evidence; runs every Monte Carlo point through
//! [`super::engine::run`] (one campaign per searched value, with that value's setup); writes
//! nothing (the `tolerance` command writes the evidence table and the JSON).
//!
//! **Classifying a value.** At value v every attack point a of the campaign (each entry at
//! each of its sweep values) gets T Monte Carlo trials judged under the rule; k_a trials show
//! the event: a leak (criterion `leak`), or a key at all (criterion `no-key`). From k_a of T
//! the one-sided Clopper–Pearson limits at level α' give p_a ∈ [lower, upper] (Clopper &
//! Pearson, Biometrika 26, 404, 1934). With threshold θ:
//! - `leak`: v is *unsafe* if some attack has lower > θ (it leaks with probability above θ),
//!   *safe* if every attack has upper ≤ θ;
//! - `no-key`: v is *unsafe* (no key) if some attack has upper ≤ θ (it leaves a key with
//!   probability at most θ), *safe* (keyed) if every attack has lower > θ;
//! - otherwise *inconclusive*: the trials are doubled (a fresh random stream per look) up to
//!   the maximum, and a value still inconclusive then belongs to the uncertainty band.
//!
//! α' = α / (A · L) with α = 1 − confidence, A attack points and L possible looks (the
//! doublings from T to the maximum): by the union bound each classification of a value holds
//! with probability at least 1 − α, whatever the number of attacks and looks. The boundary
//! interval rests on two classifications (its safe and its unsafe end), so it holds with
//! probability at least 1 − 2α.
//!
//! **The search.** Both ends of the range are classified first. One safe and one unsafe end:
//! the interval between the last safe value and the first unsafe value (in the direction from
//! the safe end) is bisected, on the chosen scale, until it is narrower than 2^(−bisections)
//! of the range (integer keys: until its ends are neighbouring integers). Inconclusive values
//! split it into a band; then the narrower edge gap of the band is bisected next. The search
//! assumes one crossing in the range (the typical shape: a finite-size term matters below a
//! block size, an attack wins beyond a distance); a safe value found beyond an unsafe one is
//! reported as a note, and `run` with a `[[setup_sweeps]]` table shows the whole range.
//!
//! **Sampler.** Values are simulated with the count-level sampler whatever the campaign's
//! sampler (the two agree in distribution; the per-round sampler's cost grows with the block,
//! which a search over block sizes or losses would not bound); the report notes the switch.
//!
//! **Determinism.** The random streams of a value depend only on the seed, the value and the
//! look (see [`value_seed`]), never on the order of evaluation or the thread count.
//!
//! **Shards.** A look's evidence is integer counts ([`Counts`]) per attack point, the sum of
//! its (attack point, chunk of trials) units ([`look_unit_counts`], [`LookShape::assemble`]), so
//! separate processes can compute a look's units and the sum is exact. [`search_with`] runs
//! the search on the looks known so far and, where it lacks one, names the looks it needs
//! next ([`Step::Needs`]); `tolerance --shard` and `merge` drive it round by round.

use super::campaign::{Campaign, PointSetup, Scale};
use super::engine::{run_units, UnitCounts, CHUNK_TRIALS};
use super::rules::Rule;
use super::setup::{Setup, SetupKey};
use super::stats::Counts;
use super::trial::Verdict;
use crate::error::{Error, Result};
use crate::numeric::rng::trial_rng;
use rand::RngCore;
use serde::{Deserialize, Serialize};

/// What the search looks for.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Criterion {
    /// Where the rule starts to leak (trials with the verdict `leak`).
    Leak,
    /// Where the rule stops giving any key (trials that neither abort nor give ℓ = 0).
    NoKey,
}

impl Criterion {
    /// The event counted per trial, for tables.
    pub fn event(self) -> &'static str {
        match self {
            Criterion::Leak => "leak",
            Criterion::NoKey => "key",
        }
    }
}

/// How a value (or one attack at it) is classified.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Side {
    /// Shown safe (criterion `no-key`: shown to give a key).
    Safe,
    /// Shown unsafe (criterion `no-key`: shown to give no key).
    Unsafe,
    /// Neither, after the most trials allowed.
    Inconclusive,
}

impl std::fmt::Display for Side {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Side::Safe => "safe",
            Side::Unsafe => "unsafe",
            Side::Inconclusive => "inconclusive",
        })
    }
}

/// A tolerance search.
#[derive(Clone, Debug, Serialize)]
pub struct Spec {
    /// The setup key searched.
    #[serde(serialize_with = "key_name")]
    pub key: SetupKey,
    /// One end of the range.
    pub from: f64,
    /// The other end.
    pub to: f64,
    /// Bisection on equal differences or equal ratios.
    pub scale: Scale,
    /// The rule judged.
    pub rule: Rule,
    /// What to look for.
    pub criterion: Criterion,
    /// θ: the event probability that separates the sides.
    pub threshold: f64,
    /// 1 − α.
    pub confidence: f64,
    /// Trials of a value's first look.
    pub trials: u64,
    /// Most trials of a value (the looks double from `trials`).
    pub max_trials: u64,
    /// The range is bisected down to 2^(−bisections) of its width.
    pub bisections: u32,
}

fn key_name<S: serde::Serializer>(k: &SetupKey, s: S) -> std::result::Result<S::Ok, S::Error> {
    s.serialize_str(k.name)
}

/// Largest number of bisection halvings: 2⁻⁴⁰ of a range is below any physical resolution
/// of a setup value, and each halving costs a Monte Carlo point.
pub const MAX_BISECTIONS: u32 = 40;

impl Spec {
    /// Checks the numbers of the search (the range against the key's allowed values is
    /// checked when each value's setup is built). Errors name the command-line option.
    pub fn check(&self) -> Result<()> {
        for (name, x) in [("--from", self.from), ("--to", self.to)] {
            if !x.is_finite() {
                return Err(Error::input_key(name, format!("{x} is not a finite number")));
            }
        }
        if self.from == self.to {
            return Err(Error::input_key("--to", "must differ from --from"));
        }
        if self.scale == Scale::Log && !(self.from > 0.0 && self.to > 0.0) {
            return Err(Error::input_key("--scale", "a logarithmic search needs --from > 0 and --to > 0"));
        }
        if !(self.threshold > 0.0 && self.threshold < 1.0) {
            return Err(Error::input_key("--threshold", format!("{} is outside (0, 1)", self.threshold)));
        }
        if !(self.confidence >= 0.5 && self.confidence < 1.0) {
            return Err(Error::input_key("--confidence", format!("{} is outside [0.5, 1)", self.confidence)));
        }
        const MAX_TRIALS: u64 = 1_000_000;
        if !(1..=MAX_TRIALS).contains(&self.trials) {
            return Err(Error::input_key("--trials", format!("{} is outside [1, {MAX_TRIALS}]", self.trials)));
        }
        if !(self.trials..=MAX_TRIALS).contains(&self.max_trials) {
            return Err(Error::input_key(
                "--max-trials",
                format!("{} is outside [--trials = {}, {MAX_TRIALS}]", self.max_trials, self.trials),
            ));
        }
        if !(1..=MAX_BISECTIONS).contains(&self.bisections) {
            return Err(Error::input_key("--bisections", format!("{} is outside [1, {MAX_BISECTIONS}]", self.bisections)));
        }
        Ok(())
    }

    /// Number of looks a value may get: trials, 2·trials, … up to `max_trials`.
    pub fn looks(&self) -> u32 {
        let mut n = 1;
        let mut t = self.trials;
        while t.saturating_mul(2) <= self.max_trials {
            t *= 2;
            n += 1;
        }
        n
    }

    /// The value at position `t` ∈ [0, 1] of the range on its scale, rounded for integer keys.
    fn value_at(&self, t: f64) -> f64 {
        self.scale.interpolate(self.from, self.to, t, self.key.integer)
    }
}

/// One attack point at one value.
#[derive(Clone, Debug, Serialize)]
pub struct AttackEvidence {
    /// The attack's label.
    pub attack: String,
    /// Its parameters, `name=value;…`.
    pub params: String,
    /// Trials run (the last look's).
    pub trials: u64,
    /// Trials showing the event (a leak, or a key).
    pub events: u64,
    /// events / trials.
    pub probability: f64,
    /// One-sided lower Clopper–Pearson limit at level α'.
    pub lower: f64,
    /// One-sided upper Clopper–Pearson limit at level α'.
    pub upper: f64,
    /// Mean key length over the trials, bits (aborts count as 0).
    pub key_length_mean_bits: f64,
    /// Fraction of trials that aborted.
    pub abort_probability: f64,
    /// The point's verdict over its trials.
    pub verdict: String,
    /// How this attack alone classifies the value.
    pub side: Side,
}

/// One classified value.
#[derive(Clone, Debug, Serialize)]
pub struct Evaluation {
    /// The setup value (`None` for the configured setup when it does not have the key).
    pub value: Option<f64>,
    /// `end`, `bisection` or `configured`.
    pub role: &'static str,
    /// The classification.
    pub side: Side,
    /// Looks taken (1 = the first `trials`).
    pub looks: u32,
    /// Every attack point, at the last look.
    pub attacks: Vec<AttackEvidence>,
    /// The attack that decides: for an unsafe value the one most clearly past the threshold,
    /// otherwise the one closest to it.
    pub decided_by: usize,
}

impl Evaluation {
    /// The deciding attack's evidence.
    pub fn decisive(&self) -> &AttackEvidence {
        &self.attacks[self.decided_by]
    }
}

/// What the search found.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Finding {
    /// The side changes inside the range.
    Boundary {
        /// The safe value closest to the boundary.
        safe: f64,
        /// The unsafe value closest to the boundary.
        #[serde(rename = "unsafe")]
        unsafe_: f64,
        /// Values left inconclusive between them.
        band: Vec<f64>,
        /// The attack point that is unsafe at `unsafe_` (label and parameters).
        attack: String,
    },
    /// Both ends (and hence, with one crossing, the whole range) are safe.
    SafeThroughout,
    /// Both ends are unsafe.
    UnsafeThroughout {
        /// The attack point deciding at `from` (label and parameters).
        attack: String,
        /// The attack point deciding at `to`.
        attack_at_to: String,
    },
    /// An end stayed inconclusive: no boundary claim.
    InconclusiveEnd {
        /// The inconclusive end's value.
        value: f64,
    },
}

/// The result of a search.
#[derive(Clone, Debug, Serialize)]
pub struct Report {
    /// The search.
    pub spec: Spec,
    /// α' of each one-sided limit.
    pub level_per_limit: f64,
    /// Every classified value, in the order of evaluation (the configured setup last).
    pub evaluations: Vec<Evaluation>,
    /// The finding.
    pub finding: Finding,
    /// The configured setup's own classification.
    pub configured: Side,
    /// The setup's own value of the key, if it has one.
    pub configured_value: Option<f64>,
    /// Remarks (non-monotone evidence).
    pub notes: Vec<String>,
    /// The finding in one sentence.
    pub statement: String,
}

/// One-sided lower Clopper–Pearson limit: the p with P(X ≥ k | n, p) = α (0 when k = 0).
pub fn lower_limit(k: u64, n: u64, alpha: f64) -> f64 {
    if k == 0 || n == 0 {
        0.0
    } else {
        super::stats::beta_quantile(k as f64, (n - k + 1) as f64, alpha)
    }
}

/// One-sided upper Clopper–Pearson limit: the p with P(X ≤ k | n, p) = α (1 when k = n).
pub fn upper_limit(k: u64, n: u64, alpha: f64) -> f64 {
    if k >= n {
        1.0
    } else {
        super::stats::beta_quantile((k + 1) as f64, (n - k) as f64, 1.0 - alpha)
    }
}

/// The campaign seed of look `look` at `value` (`configured`: the setup's own point): a
/// ChaCha8 draw keyed by the campaign seed, the value's bits and the look, so a value's
/// streams do not depend on which values were evaluated before it.
pub fn value_seed(seed: u64, value: f64, look: u32, configured: bool) -> u64 {
    let stream = u64::from(look) | (u64::from(configured) << 32);
    trial_rng(seed, value.to_bits(), stream).next_u64()
}

/// One look of the search: the first `trials · 2^look` trials of every attack point at one
/// value (look 0 has `trials`).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LookId {
    /// The searched key's value (absent for a configured setup without the key).
    pub value: Option<f64>,
    /// Whether this is the configured setup's own point.
    pub configured: bool,
    /// The look's number, from 0.
    pub look: u32,
}

impl LookId {
    /// Trials of every attack point at this look.
    pub fn trials(&self, spec: &Spec) -> u64 {
        spec.trials << self.look
    }

    /// The look for messages: "look 2 (2000 trials) at signals = 1e6".
    pub fn describe(&self, spec: &Spec) -> String {
        let at = match (self.value, self.configured) {
            (Some(v), false) => format!("{} = {}", spec.key.name, num(v)),
            (Some(v), true) => format!("the configured {} = {}", spec.key.name, num(v)),
            (None, _) => "the configured setup".to_string(),
        };
        format!("look {} ({} trials per attack point) at {at}", self.look + 1, self.trials(spec))
    }
}

/// One attack point's counts at one look.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PointCounts {
    /// The attack's label.
    pub attack: String,
    /// Its parameters, `name=value;…`.
    pub params: String,
    /// The point's trials under the searched rule.
    pub counts: Counts,
}

/// A finished look: every attack point's counts, in campaign order.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Look {
    /// Which look.
    pub id: LookId,
    /// Every attack point's counts.
    pub points: Vec<PointCounts>,
}

/// Where a search gets its looks.
#[derive(Clone, Copy, Debug)]
pub enum Looks<'a> {
    /// Computed here, as the search needs them.
    Compute,
    /// Only these (a sharded search): the search stops at the first look it lacks.
    Known(&'a [Look]),
}

/// How far a search got.
#[derive(Clone, Debug)]
pub enum Step {
    /// Finished.
    Done(Box<Report>),
    /// It needs these looks next (with [`Looks::Known`] only). They do not depend on each
    /// other, so they can be computed side by side.
    Needs(Vec<LookId>),
}

/// Runs the search on the campaign's setup, attacks and sampler (its setup sweeps are not
/// used; a campaign with any is refused). `progress` gets one line per classified value.
pub fn search(c: &Campaign, spec: &Spec, progress: &(dyn Fn(&Evaluation) + Sync)) -> Result<Report> {
    match search_with(c, spec, Looks::Compute, progress)? {
        Step::Done(report) => Ok(*report),
        Step::Needs(_) => unreachable!("a search that computes its looks never lacks one"),
    }
}

/// The search, on looks it computes or on looks given (see [`Looks`]). With looks given,
/// the three values every search classifies (both ends and the configured setup) are
/// looked at first, so their looks are asked for together; after them each bisection step
/// needs the one before.
pub fn search_with(c: &Campaign, spec: &Spec, looks: Looks, progress: &(dyn Fn(&Evaluation) + Sync)) -> Result<Step> {
    spec.check()?;
    if !c.setup_sweeps.is_empty() {
        return Err(Error::input_key("setup_sweeps", "a tolerance search varies one key itself: remove the campaign's [[setup_sweeps]]"));
    }
    let points = attack_points(c);
    let alpha = 1.0 - spec.confidence;
    let level = alpha / (points as f64 * f64::from(spec.looks()));
    let setup_at = |v: f64| setup_at(c, spec, v);
    // Both ends are built first, so a range outside the key's allowed values fails at once.
    setup_at(spec.value_at(0.0))?;
    setup_at(spec.value_at(1.0))?;
    let configured_value = c.setup.value(spec.key.name)?;
    c.setup.check_rule(&spec.rule).map_err(|e| e.with_key("--rule"))?;
    let fetch = |id: LookId| -> Result<Option<Vec<PointCounts>>> {
        match looks {
            Looks::Compute => look_counts(c, spec, id, &|_, _| true).map(Some),
            Looks::Known(known) => Ok(known.iter().find(|l| same_look(&l.id, &id)).map(|l| l.points.clone())),
        }
    };
    let judge_value = |v: Option<f64>, configured: bool, role: &'static str| -> Result<std::result::Result<Evaluation, LookId>> {
        let e = classify(spec, level, v, configured, role, &fetch)?;
        if let Ok(e) = &e {
            progress(e);
        }
        Ok(e)
    };
    if let Looks::Known(_) = looks {
        let quiet = |v: Option<f64>, configured: bool| classify(spec, level, v, configured, "end", &fetch);
        let mut needs = Vec::new();
        for (v, configured) in [(Some(spec.value_at(0.0)), false), (Some(spec.value_at(1.0)), false), (configured_value, true)] {
            if let Err(id) = quiet(v, configured)? {
                needs.push(id);
            }
        }
        if !needs.is_empty() {
            return Ok(Step::Needs(needs));
        }
    }
    macro_rules! judged {
        ($e:expr) => {
            match $e? {
                Ok(e) => e,
                Err(id) => return Ok(Step::Needs(vec![id])),
            }
        };
    }
    let mut evaluations = Vec::new();
    // Positions t ∈ [0, 1] on the range and their evaluations.
    let mut at: Vec<(f64, usize)> = Vec::new();
    for t in [0.0, 1.0] {
        let v = spec.value_at(t);
        evaluations.push(judged!(judge_value(Some(v), false, "end")));
        at.push((t, evaluations.len() - 1));
    }
    let (s0, s1) = (evaluations[0].side, evaluations[1].side);
    let mut notes = Vec::new();
    if c.sampler != super::sample::Sampler::Count {
        notes.push(
            "simulated with the count-level sampler (the campaign asks for the per-round sampler; they agree in distribution)".into(),
        );
    }
    let finding = match (s0, s1) {
        (Side::Safe, Side::Safe) => Finding::SafeThroughout,
        (Side::Unsafe, Side::Unsafe) => Finding::UnsafeThroughout {
            attack: attack_text(evaluations[0].decisive()),
            attack_at_to: attack_text(evaluations[1].decisive()),
        },
        (Side::Inconclusive, _) => Finding::InconclusiveEnd { value: spec.value_at(0.0) },
        (_, Side::Inconclusive) => Finding::InconclusiveEnd { value: spec.value_at(1.0) },
        _ => {
            // u(t): the position measured from the safe end.
            let safe_first = s0 == Side::Safe;
            let from_safe = |t: f64| if safe_first { t } else { 1.0 - t };
            let resolution = 0.5f64.powi(spec.bisections as i32);
            loop {
                let mut sorted: Vec<(f64, Side)> = at.iter().map(|&(t, i)| (from_safe(t), evaluations[i].side)).collect();
                sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
                let first_unsafe = sorted.iter().find(|p| p.1 == Side::Unsafe).map_or(1.0, |p| p.0);
                let safe = sorted.iter().filter(|p| p.1 == Side::Safe && p.0 < first_unsafe).map(|p| p.0).fold(0.0, f64::max);
                let band: Vec<f64> = sorted.iter().filter(|p| p.0 > safe && p.0 < first_unsafe).map(|p| p.0).collect();
                // The edge gaps of the band (or the one gap without a band); bisect the wider.
                let gaps = match (band.first(), band.last()) {
                    (Some(&a), Some(&b)) => vec![(safe, a), (b, first_unsafe)],
                    _ => vec![(safe, first_unsafe)],
                };
                let to_t = |u: f64| if safe_first { u } else { 1.0 - u };
                let open: Vec<(f64, f64)> = gaps
                    .into_iter()
                    .filter(|&(a, b)| b - a > resolution && spec.value_at(to_t(0.5 * (a + b))) != spec.value_at(to_t(a)))
                    .filter(|&(a, b)| spec.value_at(to_t(0.5 * (a + b))) != spec.value_at(to_t(b)))
                    .collect();
                let Some(&(a, b)) = open.iter().max_by(|x, y| (x.1 - x.0).total_cmp(&(y.1 - y.0))) else {
                    let value = |u: f64| spec.value_at(to_t(u));
                    let unsafe_eval = at.iter().find(|&&(t, _)| from_safe(t) == first_unsafe).map(|&(_, i)| &evaluations[i]);
                    for &(u, side) in &sorted {
                        if side == Side::Safe && u > first_unsafe {
                            notes.push(format!(
                                "not monotone: safe at {} = {} beyond the unsafe value {}; the search assumes one crossing, a setup sweep shows the whole range",
                                spec.key.name,
                                value(u),
                                value(first_unsafe)
                            ));
                        }
                    }
                    break Finding::Boundary {
                        safe: value(safe),
                        unsafe_: value(first_unsafe),
                        band: band.iter().map(|&u| value(u)).collect(),
                        attack: unsafe_eval.map(|e| attack_text(e.decisive())).unwrap_or_default(),
                    };
                };
                let t = to_t(0.5 * (a + b));
                let v = spec.value_at(t);
                setup_at(v)?;
                evaluations.push(judged!(judge_value(Some(v), false, "bisection")));
                at.push((t, evaluations.len() - 1));
            }
        }
    };
    let own = judged!(judge_value(configured_value, true, "configured"));
    let configured = own.side;
    evaluations.push(own);
    // A configured value inside the range whose side contradicts both ends shows that the
    // search's one-crossing assumption fails here: say so instead of claiming "throughout".
    let (lo, hi) = (spec.value_at(0.0).min(spec.value_at(1.0)), spec.value_at(0.0).max(spec.value_at(1.0)));
    let inside = configured_value.is_some_and(|v| v >= lo && v <= hi);
    let broken = inside
        && matches!((&finding, configured), (Finding::SafeThroughout, Side::Unsafe) | (Finding::UnsafeThroughout { .. }, Side::Safe));
    if broken {
        notes.push(format!(
            "the configured {} = {} lies inside the searched range but is on the other side from both ends: the result is not \
             monotone along {}, so the one-crossing assumption fails; search the sub-ranges on either side of the configured value",
            spec.key.name,
            num(configured_value.unwrap_or(f64::NAN)),
            spec.key.name
        ));
    }
    let statement = statement(spec, &finding, configured, configured_value, broken);
    Ok(Step::Done(Box::new(Report {
        spec: spec.clone(),
        level_per_limit: level,
        evaluations,
        finding,
        configured,
        configured_value,
        notes,
        statement,
    })))
}

/// Whether two looks are the same (values compared bit for bit).
fn same_look(a: &LookId, b: &LookId) -> bool {
    a.value.map(f64::to_bits) == b.value.map(f64::to_bits) && a.configured == b.configured && a.look == b.look
}

/// The campaign's setup with the searched key at `v`, checked for the rule.
fn setup_at(c: &Campaign, spec: &Spec, v: f64) -> Result<Setup> {
    let s = c.setup.with_value(spec.key.name, v).map_err(|e| Error::input(format!("at {} = {v}: {e}", spec.key.name)))?;
    s.check_rule(&spec.rule).map_err(|e| Error::input_key("--rule", format!("at {} = {v}: {e}", spec.key.name)))?;
    Ok(s)
}

/// The campaign that simulates one look: the look's setup, the searched rule alone, the
/// count-level sampler, the look's trials and its own seed ([`value_seed`]).
pub fn look_campaign(c: &Campaign, spec: &Spec, id: LookId) -> Result<Campaign> {
    let setup = match (id.value, id.configured) {
        (Some(v), false) => setup_at(c, spec, v)?,
        _ => c.setup.clone(),
    };
    let mut camp = c.clone();
    camp.setups = vec![PointSetup { values: id.value.map(|v| vec![(spec.key, v)]).unwrap_or_default(), setup: setup.clone() }];
    camp.setup = setup;
    camp.rules = vec![spec.rule.clone()];
    camp.sampler = super::sample::Sampler::Count;
    camp.trials = id.trials(spec);
    camp.seed = value_seed(c.seed, id.value.unwrap_or(f64::NAN), id.look, id.configured);
    Ok(camp)
}

/// Attack points of the campaign (each entry at each of its sweep values).
fn attack_points(c: &Campaign) -> usize {
    c.attacks.iter().map(|e| e.points().len()).sum()
}

/// The work units of one look: (attack point, chunk of trials) pairs, numbered point-major;
/// their number is points × ⌈trials / chunk⌉.
pub fn look_units(c: &Campaign, spec: &Spec, id: LookId) -> u64 {
    attack_points(c) as u64 * id.trials(spec).div_ceil(CHUNK_TRIALS)
}

/// Computes the units of one look that `keep` (point, chunk) accepts.
pub fn look_unit_counts(c: &Campaign, spec: &Spec, id: LookId, keep: &(dyn Fn(u64, u64) -> bool + Sync)) -> Result<Vec<UnitCounts>> {
    run_units(&look_campaign(c, spec, id)?, keep)
}

/// What the units of one look must fit, worked out once per look: its attack points'
/// labels, its trials and chunks, and the signals of its blocks.
#[derive(Clone, Debug)]
pub struct LookShape {
    /// The look, in words (for messages).
    what: String,
    /// Attack label of each point.
    labels: Vec<String>,
    /// Trials of every point.
    trials: u64,
    /// Chunks of every point.
    chunks: u64,
    /// Signals per block.
    signals: u64,
}

impl LookShape {
    /// The shape of look `id` of the search.
    pub fn of(c: &Campaign, spec: &Spec, id: LookId) -> Result<LookShape> {
        let trials = id.trials(spec);
        Ok(LookShape {
            what: id.describe(spec),
            labels: c.attacks.iter().flat_map(|e| std::iter::repeat(e.label.clone()).take(e.points().len())).collect(),
            trials,
            chunks: trials.div_ceil(CHUNK_TRIALS),
            signals: match (id.value, id.configured) {
                (Some(v), false) => setup_at(c, spec, v)?.signals,
                _ => c.setup.signals,
            },
        })
    }

    /// Checks that a unit computed elsewhere fits the search: a point and chunk of the
    /// look, one rule's counts, the chunk's number of trials, verdicts adding up to them,
    /// the point's attack label, and no more key than the look's blocks hold.
    pub fn check(&self, u: &UnitCounts) -> Result<()> {
        let bad = |what: String| {
            Err(Error::input(format!(
                "{}, unit (point {}, chunk {}): {what}; the partial result does not fit the search",
                self.what, u.point, u.chunk
            )))
        };
        let Some(label) = self.labels.get(u.point as usize) else {
            return bad(format!("the search has {} attack points", self.labels.len()));
        };
        if u.chunk >= self.chunks {
            return bad(format!("the look has {} chunk(s)", self.chunks));
        }
        let [k] = u.counts.as_slice() else {
            return bad(format!("{} rules' counts, not 1", u.counts.len()));
        };
        let expected = CHUNK_TRIALS.min(self.trials - u.chunk * CHUNK_TRIALS);
        if k.trials != expected {
            return bad(format!("{} trials counted, the chunk has {expected}", k.trials));
        }
        if k.verdicts.iter().sum::<u64>() != k.trials {
            return bad(format!("verdicts {:?} do not add up to its {} trials", k.verdicts, k.trials));
        }
        if &u.attack != label {
            return bad(format!("attack `{}`, the point's is `{label}`", u.attack));
        }
        if k.key_length_sum > u128::from(self.signals) * u128::from(k.trials) {
            return bad(format!("{} key bits over {} blocks of {} signals", k.key_length_sum, k.trials, self.signals));
        }
        Ok(())
    }

    /// Adds up the units of the look (all of them, in any order) into its attack points'
    /// counts; an error if a unit is missing or given twice.
    pub fn assemble(&self, units: &[UnitCounts]) -> Result<Vec<PointCounts>> {
        let (points, chunks, id) = (self.labels.len(), self.chunks as usize, &self.what);
        let mut seen = vec![false; points * chunks];
        let mut out: Vec<Option<PointCounts>> = vec![None; points];
        for u in units {
            let slot = (u.point as usize).checked_mul(chunks).and_then(|i| i.checked_add(u.chunk as usize));
            let fresh = slot.filter(|&i| (u.chunk as usize) < chunks && i < seen.len() && !seen[i]);
            let Some(i) = fresh else {
                return Err(Error::input(format!("{id}: unit (point {}, chunk {}) is out of range or given twice", u.point, u.chunk)));
            };
            seen[i] = true;
            let [counts] = u.counts.as_slice() else {
                return Err(Error::input(format!(
                    "{id}: unit (point {}, chunk {}) has {} rules' counts, not 1",
                    u.point,
                    u.chunk,
                    u.counts.len()
                )));
            };
            let entry = out[u.point as usize].get_or_insert_with(|| PointCounts {
                attack: u.attack.clone(),
                params: u.params.clone(),
                counts: Counts::default(),
            });
            if (&entry.attack, &entry.params) != (&u.attack, &u.params) {
                return Err(Error::input(format!(
                    "{id}: the units of point {} name different attacks (`{} {}` and `{} {}`)",
                    u.point, entry.attack, entry.params, u.attack, u.params
                )));
            }
            entry.counts.merge(counts);
        }
        if let Some(missing) = seen.iter().position(|s| !s) {
            return Err(Error::input(format!("{id}: unit (point {}, chunk {}) is missing", missing / chunks, missing % chunks)));
        }
        Ok(out.into_iter().map(|p| p.expect("every unit is present")).collect())
    }
}

/// Computes a whole look here.
fn look_counts(c: &Campaign, spec: &Spec, id: LookId, keep: &(dyn Fn(u64, u64) -> bool + Sync)) -> Result<Vec<PointCounts>> {
    let units = look_unit_counts(c, spec, id, keep)?;
    LookShape::of(c, spec, id)?.assemble(&units)
}

/// Classifies one value: looks of doubling trials until the value is safe or unsafe, or the
/// maximum is reached. `Err(look)` when `fetch` lacks that look.
fn classify(
    spec: &Spec,
    level: f64,
    value: Option<f64>,
    configured: bool,
    role: &'static str,
    fetch: &dyn Fn(LookId) -> Result<Option<Vec<PointCounts>>>,
) -> Result<std::result::Result<Evaluation, LookId>> {
    let mut look = 0;
    loop {
        let id = LookId { value, configured, look };
        let Some(points) = fetch(id)? else {
            return Ok(Err(id));
        };
        let attacks: Vec<AttackEvidence> = points.iter().map(|p| evidence(spec, level, p)).collect();
        let side = if attacks.iter().any(|a| a.side == Side::Unsafe) {
            Side::Unsafe
        } else if attacks.iter().all(|a| a.side == Side::Safe) {
            Side::Safe
        } else {
            Side::Inconclusive
        };
        // The attack furthest towards the unsafe side (leak: largest lower limit, then
        // largest upper; no-key: smallest upper limit, then smallest lower), first in
        // campaign order on ties.
        let score = |a: &AttackEvidence| match spec.criterion {
            Criterion::Leak => (a.lower, a.upper),
            Criterion::NoKey => (-a.upper, -a.lower),
        };
        let decided_by = (0..attacks.len()).fold(0, |best, i| if score(&attacks[i]) > score(&attacks[best]) { i } else { best });
        look += 1;
        if side != Side::Inconclusive || id.trials(spec).saturating_mul(2) > spec.max_trials {
            return Ok(Ok(Evaluation { value, role, side, looks: look, attacks, decided_by }));
        }
    }
}

/// The evidence of one attack point.
fn evidence(spec: &Spec, level: f64, p: &PointCounts) -> AttackEvidence {
    let k = &p.counts;
    let n = k.trials;
    let events = match spec.criterion {
        Criterion::Leak => k.count(Verdict::Leak),
        Criterion::NoKey => n - k.count(Verdict::Aborted) - k.count(Verdict::NoKey),
    };
    let (lower, upper) = (lower_limit(events, n, level), upper_limit(events, n, level));
    let side = match spec.criterion {
        Criterion::Leak if lower > spec.threshold => Side::Unsafe,
        Criterion::Leak if upper <= spec.threshold => Side::Safe,
        Criterion::NoKey if upper <= spec.threshold => Side::Unsafe,
        Criterion::NoKey if lower > spec.threshold => Side::Safe,
        _ => Side::Inconclusive,
    };
    let frac = |x: u64| if n == 0 { f64::NAN } else { x as f64 / n as f64 };
    AttackEvidence {
        attack: p.attack.clone(),
        params: p.params.clone(),
        trials: n,
        events,
        probability: frac(events),
        lower,
        upper,
        key_length_mean_bits: k.key_length_mean(),
        abort_probability: frac(k.count(Verdict::Aborted)),
        verdict: k.verdict().to_string(),
        side,
    }
}

/// An attack point for sentences: its label and parameters.
fn attack_text(a: &AttackEvidence) -> String {
    if a.params.is_empty() {
        a.attack.clone()
    } else {
        format!("{} ({})", a.attack, a.params)
    }
}

/// A value as a reader writes it.
fn num(x: f64) -> String {
    if x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e6) {
        // Seven significant digits, as the plain form below keeps six decimals.
        let s = format!("{x:.6e}");
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        format!("{}e{exponent}", mantissa.trim_end_matches('0').trim_end_matches('.'))
    } else {
        let s = format!("{x:.6}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

/// The finding in one sentence.
fn statement(spec: &Spec, finding: &Finding, configured: Side, configured_value: Option<f64>, broken: bool) -> String {
    let key = spec.key.name;
    let unit = if spec.key.unit.is_empty() { String::new() } else { format!(" {}", spec.key.unit) };
    let rule = &spec.rule;
    let (bad, good) = match spec.criterion {
        Criterion::Leak => ("leaks", "stays safe"),
        Criterion::NoKey => ("gives no key", "gives a key"),
    };
    let level = format!(
        "{} probability threshold {}, {} % confidence per value",
        spec.criterion.event(),
        num(spec.threshold),
        num(100.0 * spec.confidence)
    );
    let range = format!("{} to {}{unit}", num(spec.value_at(0.0).min(spec.value_at(1.0))), num(spec.value_at(0.0).max(spec.value_at(1.0))));
    let main = match finding {
        Finding::Boundary { safe, unsafe_, band, attack } => {
            let (lo, hi) = (safe.min(*unsafe_), safe.max(*unsafe_));
            let band = if band.is_empty() { String::new() } else { format!(", {} value(s) between them inconclusive", band.len()) };
            if unsafe_ < safe {
                format!(
                    "the rule `{rule}` {bad} against `{attack}` for {key} below a boundary between {} and {}{unit}, and {good} above it up to {}{unit}{band} ({level}; one crossing assumed)",
                    num(lo),
                    num(hi),
                    num(spec.value_at(0.0).max(spec.value_at(1.0)))
                )
            } else {
                format!(
                    "the rule `{rule}` {good} up to {key} = {}{unit} and {bad} against `{attack}` from {key} = {}{unit} on{band} (searched from {}; {level}; one crossing assumed)",
                    num(lo),
                    num(hi),
                    num(spec.value_at(0.0).min(spec.value_at(1.0)))
                )
            }
        }
        Finding::SafeThroughout if broken => format!(
            "the rule `{rule}` {good} against every listed attack at both ends of {key} = {range} ({level}) but NOT throughout: \
             the configured value inside the range is on the other side, so the result is not monotone and no boundary is claimed"
        ),
        Finding::SafeThroughout => format!("the rule `{rule}` {good} against every listed attack at both ends of {key} = {range} ({level}; one crossing assumed, so throughout)"),
        Finding::UnsafeThroughout { attack, attack_at_to } => {
            let against = if attack == attack_at_to {
                format!("against `{attack}` at both ends of {key} = {range}")
            } else {
                format!(
                    "at both ends of {key} = {range}: against `{attack}` at {}{unit}, against `{attack_at_to}` at {}{unit}",
                    num(spec.value_at(0.0)),
                    num(spec.value_at(1.0))
                )
            };
            if broken {
                format!(
                    "the rule `{rule}` {bad} {against} ({level}) but NOT throughout: the configured value inside the range is on the \
                     other side, so the result is not monotone and no boundary is claimed"
                )
            } else {
                format!("the rule `{rule}` {bad} {against} ({level})")
            }
        }
        Finding::InconclusiveEnd { value } => format!(
            "no boundary claim: at {key} = {}{unit} the evidence stays inconclusive after {} trials per attack ({level}); raise --max-trials or move the range",
            num(*value),
            spec.max_trials
        ),
    };
    let own = match configured_value {
        Some(v) => format!("the configured {key} = {}{unit}", num(v)),
        None => "the configured setup".to_string(),
    };
    let verdict = match (configured, spec.criterion) {
        (Side::Safe, Criterion::Leak) => "is safe",
        (Side::Unsafe, Criterion::Leak) => "LEAKS",
        (Side::Safe, Criterion::NoKey) => "gives a key",
        (Side::Unsafe, Criterion::NoKey) => "GIVES NO KEY",
        (Side::Inconclusive, _) => "cannot be shown safe (inconclusive)",
    };
    let mut s = main;
    if let Some(first) = s.get(..1) {
        s = first.to_uppercase() + &s[1..];
    }
    format!("{s}. At {own} the rule {verdict}.")
}

/// Renders the evidence as CSV: one row per (classified value, attack point).
///
/// Columns: `order` (evaluation order), `role` (end, bisection, configured), `setup_<key>`
/// (the value; empty for a configured setup without the key), `side` (the value's
/// classification), `looks`, `attack`, `attack_params`, `trials`, `event` (leak or key),
/// `event_trials`, `event_probability`, `event_lower_limit`, `event_upper_limit` (one-sided
/// Clopper–Pearson limits at `limit_level`), `limit_level`, `threshold`, `attack_side`,
/// `decides` (1 for the attack that decides the value), `key_length_mean_bits`,
/// `abort_probability`, `verdict` (the point's verdict over its trials).
pub fn evidence_csv(report: &Report) -> Result<String> {
    use crate::exact::sweep::fmt_num;
    let io = |e: csv::Error| Error::new(crate::error::ErrorKind::Io, e.to_string());
    let mut w = csv::Writer::from_writer(Vec::new());
    let column = report.spec.key.column();
    w.write_record([
        "order",
        "role",
        column.as_str(),
        "side",
        "looks",
        "attack",
        "attack_params",
        "trials",
        "event",
        "event_trials",
        "event_probability",
        "event_lower_limit",
        "event_upper_limit",
        "limit_level",
        "threshold",
        "attack_side",
        "decides",
        "key_length_mean_bits",
        "abort_probability",
        "verdict",
    ])
    .map_err(io)?;
    for (order, e) in report.evaluations.iter().enumerate() {
        for (i, a) in e.attacks.iter().enumerate() {
            w.write_record([
                order.to_string(),
                e.role.to_string(),
                e.value.map(fmt_num).unwrap_or_default(),
                e.side.to_string(),
                e.looks.to_string(),
                a.attack.clone(),
                a.params.clone(),
                a.trials.to_string(),
                report.spec.criterion.event().to_string(),
                a.events.to_string(),
                fmt_num(a.probability),
                fmt_num(a.lower),
                fmt_num(a.upper),
                fmt_num(report.level_per_limit),
                fmt_num(report.spec.threshold),
                a.side.to_string(),
                u8::from(i == e.decided_by).to_string(),
                fmt_num(a.key_length_mean_bits),
                fmt_num(a.abort_probability),
                a.verdict.clone(),
            ])
            .map_err(io)?;
        }
    }
    let bytes = w.into_inner().map_err(|e| Error::new(crate::error::ErrorKind::Io, e.to_string()))?;
    Ok(String::from_utf8(bytes).expect("csv is UTF-8"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn one_sided_limits_match_closed_forms_and_the_two_sided_interval() {
        // 0 of n: upper 1 − α^(1/n); n of n: lower α^(1/n) (Beta quantiles at the boundary,
        // common practice).
        assert_abs_diff_eq!(upper_limit(0, 20, 0.05), 1.0 - 0.05f64.powf(1.0 / 20.0), epsilon = 1e-10);
        assert_abs_diff_eq!(lower_limit(20, 20, 0.05), 0.05f64.powf(1.0 / 20.0), epsilon = 1e-10);
        assert_eq!((lower_limit(0, 20, 0.05), upper_limit(20, 20, 0.05)), (0.0, 1.0));
        // Each end of the two-sided 95 % interval is a one-sided 97.5 % limit.
        for (k, n) in [(3, 40), (17, 50), (1, 1000)] {
            let (lo, hi) = super::super::stats::clopper_pearson(k, n);
            assert_abs_diff_eq!(lower_limit(k, n, 0.025), lo, epsilon = 1e-12);
            assert_abs_diff_eq!(upper_limit(k, n, 0.025), hi, epsilon = 1e-12);
        }
    }

    #[test]
    fn a_look_is_assembled_only_from_every_unit_once() {
        let c = Campaign::demo();
        let spec = Spec {
            key: SetupKey::find("abort_qber").unwrap(),
            from: 0.04,
            to: 0.08,
            scale: Scale::Linear,
            rule: c.setup.key_rule.clone(),
            criterion: Criterion::Leak,
            threshold: 0.05,
            confidence: 0.95,
            trials: CHUNK_TRIALS + 1,
            max_trials: 2 * CHUNK_TRIALS + 2,
            bisections: 3,
        };
        let id = LookId { value: Some(0.05), configured: false, look: 0 };
        let points = attack_points(&c);
        assert_eq!(look_units(&c, &spec, id), 2 * points as u64);
        let shape = LookShape::of(&c, &spec, id).unwrap();
        let unit = |point: u64, chunk: u64| UnitCounts {
            point,
            chunk,
            attack: "a".into(),
            params: String::new(),
            counts: vec![Counts { trials: 1, verdicts: [0, 0, 1, 0, 0], key_length_sum: 7 }],
        };
        let all: Vec<UnitCounts> = (0..points as u64).flat_map(|p| [unit(p, 1), unit(p, 0)]).collect();
        let assembled = shape.assemble(&all).unwrap();
        assert_eq!(assembled.len(), points);
        assert!(assembled.iter().all(|p| p.counts == Counts { trials: 2, verdicts: [0, 0, 2, 0, 0], key_length_sum: 14 }));
        let missing = shape.assemble(&all[1..]).unwrap_err().to_string();
        assert!(missing.contains("missing"), "{missing}");
        let mut twice = all.clone();
        twice.push(unit(0, 0));
        assert!(shape.assemble(&twice).unwrap_err().to_string().contains("twice"));
        let beyond = [unit(0, 2)];
        assert!(shape.assemble(&beyond).unwrap_err().to_string().contains("out of range"));
        // Counts survive a text round trip, sums past 2⁶⁴ included.
        let big = Counts { trials: 3, verdicts: [1, 0, 0, 0, 2], key_length_sum: u128::from(u64::MAX) * 5 };
        let text = toml::to_string(&PointCounts { attack: "a".into(), params: String::new(), counts: big }).unwrap();
        assert_eq!(toml::from_str::<PointCounts>(&text).unwrap().counts, big);
    }

    #[test]
    fn looks_double_up_to_the_maximum_and_integer_values_round() {
        let spec = Spec {
            key: SetupKey::find("signals").unwrap(),
            from: 1e4,
            to: 1e10,
            scale: Scale::Log,
            rule: crate::audit::rules::KeyRule::Asymptotic.into(),
            criterion: Criterion::Leak,
            threshold: 0.05,
            confidence: 0.95,
            trials: 100,
            max_trials: 800,
            bisections: 10,
        };
        assert_eq!(spec.looks(), 4);
        assert_eq!(Spec { max_trials: 799, ..spec.clone() }.looks(), 3);
        assert_eq!(spec.value_at(0.5), 1e7);
        assert_eq!(spec.value_at(0.0), 1e4);
        assert!(spec.check().is_ok());
        assert_eq!(Spec { from: -1.0, ..spec.clone() }.check().unwrap_err().key(), Some("--scale"));
        assert_eq!(Spec { max_trials: 50, ..spec.clone() }.check().unwrap_err().key(), Some("--max-trials"));
        assert_ne!(value_seed(1, 1e4, 0, false), value_seed(1, 1e4, 1, false));
        assert_ne!(value_seed(1, 1e4, 0, false), value_seed(1, 1e4, 0, true));
    }
}
