//! Key-length rules: given the statistics a block actually showed, how many key bits a
//! system extracts. One module per rule; each returns its length together with the
//! assumptions it rests on and its source. Rules consume observed statistics only, never
//! sample. Also the shared finite-size ingredients (ε budget, sampling deviation,
//! privacy-amplification and verification costs) and the AEP achievability bound used to
//! judge keys against a known attack.
//!
//! ε budget (documented choice, used by every finite rule and by the achievability bound):
//! the leftover hash lemma with quantum side information gives secrecy
//! `2ε_smooth + ε_PA` when `ℓ = H_min^{ε_smooth}(X|E') − 2 log₂(1/(2ε_PA))` (Renner 2005;
//! Tomamichel, Schaffner, Smith, Renner, IEEE TIT 57, 5524, 2011). We split
//! `ε_sec = 2ε_smooth + ε_PA` as `ε_smooth = ε_sec/4`, `ε_PA = ε_sec/2`. Error verification
//! with a universal hash costs `log₂(2/ε_cor)` bits (Tomamichel, Lim, Gisin, Renner, Nat.
//! Commun. 3, 634, 2012).

pub mod asymptotic;
pub mod blinding_aware;
pub mod decoy_finite;
pub mod finite_uncertainty;
pub mod game_min_entropy;
pub mod individual;
pub mod mismatch_aware;
pub mod weak_pulse;
pub mod block_vars;
pub mod formula;
pub mod program;
pub mod rule;

pub use rule::{Rule, RuleAnswer};

use crate::quantum::measures::binary_entropy_capped;
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// The key-length rules a system may use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum KeyRule {
    /// Finite-key rule from the smooth-entropy uncertainty relation.
    FiniteUncertainty,
    /// Asymptotic rate applied to a finite block (no finite-size correction).
    Asymptotic,
    /// Csiszár–Körner length against individual attacks, no finite-size correction.
    Individual,
    /// Min-entropy from the monogamy-of-entanglement guessing game.
    GameMinEntropy,
    /// Every detection treated as a single photon (finite-uncertainty form).
    NaiveSinglePhoton,
    /// GLLP worst case without decoys: every multi-photon pulse known to Eve.
    GllpNoDecoy,
    /// Vacuum + weak decoy bounds on the single-photon yield and error, asymptotic.
    DecoyVacuumWeak,
    /// Finite-key decoy-state rule with Hoeffding bounds (three intensities).
    DecoyFinite,
    /// Finite-uncertainty with the clicks that detector efficiency mismatch may bias tagged.
    MismatchAware,
    /// Finite-uncertainty with the blinded periods a monitor may miss tagged.
    BlindingAware,
}

impl KeyRule {
    /// All rules.
    pub const ALL: [KeyRule; 10] = [
        KeyRule::FiniteUncertainty,
        KeyRule::Asymptotic,
        KeyRule::Individual,
        KeyRule::GameMinEntropy,
        KeyRule::NaiveSinglePhoton,
        KeyRule::GllpNoDecoy,
        KeyRule::DecoyVacuumWeak,
        KeyRule::DecoyFinite,
        KeyRule::MismatchAware,
        KeyRule::BlindingAware,
    ];

    /// Whether the rule reads decoy statistics.
    pub fn needs_weak_coherent_source(self) -> bool {
        matches!(self, KeyRule::DecoyVacuumWeak | KeyRule::GllpNoDecoy | KeyRule::DecoyFinite)
    }

    /// Number of intensities the rule needs (signal plus decoys).
    pub fn intensities_needed(self) -> usize {
        match self {
            KeyRule::DecoyVacuumWeak | KeyRule::DecoyFinite => 3,
            KeyRule::GllpNoDecoy => 1,
            _ => 0,
        }
    }

    /// Interface name.
    pub fn name(self) -> &'static str {
        match self {
            KeyRule::FiniteUncertainty => "finite-uncertainty",
            KeyRule::Asymptotic => "asymptotic",
            KeyRule::Individual => "individual",
            KeyRule::GameMinEntropy => "game-min-entropy",
            KeyRule::NaiveSinglePhoton => "naive-single-photon",
            KeyRule::GllpNoDecoy => "gllp-no-decoy",
            KeyRule::DecoyVacuumWeak => "decoy-vacuum-weak",
            KeyRule::DecoyFinite => "decoy-finite",
            KeyRule::MismatchAware => "mismatch-aware",
            KeyRule::BlindingAware => "blinding-aware",
        }
    }

    /// The key length for a block with statistics `obs` under `setup`.
    pub fn length(self, obs: &BlockStats, params: &RuleParams) -> KeyLength {
        match self {
            KeyRule::FiniteUncertainty => finite_uncertainty::length(obs, params),
            KeyRule::Asymptotic => asymptotic::length(obs, params),
            KeyRule::Individual => individual::length(obs, params),
            KeyRule::GameMinEntropy => game_min_entropy::length(obs, params),
            KeyRule::NaiveSinglePhoton => weak_pulse::naive_single_photon(obs, params),
            KeyRule::GllpNoDecoy => weak_pulse::gllp_no_decoy(obs, params),
            KeyRule::DecoyVacuumWeak => weak_pulse::decoy_vacuum_weak(obs, params),
            KeyRule::DecoyFinite => decoy_finite::length(obs, params),
            KeyRule::MismatchAware => mismatch_aware::length(obs, params),
            KeyRule::BlindingAware => blinding_aware::length(obs, params),
        }
    }
}

impl fmt::Display for KeyRule {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for KeyRule {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        KeyRule::ALL.iter().copied().find(|r| r.name() == s).ok_or_else(|| {
            let names: Vec<&str> = KeyRule::ALL.iter().map(|r| r.name()).collect();
            format!("unknown key rule `{s}`; expected one of {}", names.join(", "))
        })
    }
}

/// How campaigns and setups name a rule file: `file:<path>` (relative to the file that
/// names it, as attack files are).
pub const FILE_PREFIX: &str = "file:";

/// Reads a rule file: a formula (`key_length`, see [`formula`]) or a program (`command`, see
/// [`program`]). Every problem is reported with the rule file's name and, where the key is
/// written, its line and column.
pub fn load_rule_file(path: &std::path::Path) -> std::result::Result<Rule, Vec<crate::error::Error>> {
    let text = crate::input::read_text(path).map_err(|e| vec![e])?;
    let origin = path.display().to_string();
    let table = crate::input::parse_toml(&text).map_err(|e| vec![e.with_file(path)])?;
    if table.contains_key("command") {
        let dir = path.parent().map(std::path::Path::to_path_buf).unwrap_or_default();
        let dir = if dir.as_os_str().is_empty() { std::path::PathBuf::from(".") } else { dir };
        program::ProgramRule::from_table(&table, &origin, &dir, &text)
            .map(|r| Rule::Program(std::sync::Arc::new(r)))
            .map_err(|errs| errs.into_iter().map(|e| crate::input::locate(e, &text).with_file(path)).collect())
    } else {
        formula::FormulaRule::parse(&text, &origin).map(|r| Rule::Formula(std::sync::Arc::new(r)))
    }
}

/// A rule named in a campaign or setup: a built-in rule's name, or `file:<path>` with the
/// path relative to `base` (`None`: files are not allowed, as in built-in campaigns).
pub fn resolve_rule(name: &str, base: Option<&std::path::Path>) -> std::result::Result<Rule, Vec<crate::error::Error>> {
    use crate::error::Error;
    match name.strip_prefix(FILE_PREFIX) {
        Some(path) => match base {
            Some(b) => {
                let full = b.join(path);
                if let Err(e) = crate::input::read_text(&full) {
                    return Err(vec![Error::input(format!("cannot read the rule file `{}`: {}", full.display(), e.message()))]);
                }
                load_rule_file(&full)
            }
            None => Err(vec![Error::input(format!("`{name}`: a built-in campaign cannot refer to files"))]),
        },
        None => name
            .parse::<KeyRule>()
            .map(Rule::Builtin)
            .map_err(|e| vec![Error::input(format!("{e}, or a rule file as \"{FILE_PREFIX}<path>\""))]),
    }
}

/// A rule file's `name`: letters, digits, '-', '_' and '.', at most
/// [`crate::input::NAME_MAX_CHARS`] characters (it becomes part of file names and table
/// cells), and not the name of a built-in rule.
pub fn rule_name(v: &toml::Value, key: &str) -> crate::error::Result<String> {
    let s = crate::input::name(v, key)?;
    if !s.chars().all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c)) || s.starts_with('.') {
        return Err(crate::error::Error::input_key(key, format!("`{s}`: a rule's name is made of letters, digits, '-', '_' and '.'")));
    }
    if KeyRule::ALL.iter().any(|r| r.name() == s) {
        return Err(crate::error::Error::input_key(
            key,
            format!("`{s}` is the name of a built-in rule; give the rule file a name of its own"),
        ));
    }
    Ok(s)
}

/// The setup values a key-length rule reads; everything else it learns from the block.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RuleParams {
    /// Abort threshold on every basis's observed error rate.
    pub abort_qber: f64,
    /// Error-correction efficiency f (leak_EC = f·n·h(Q)).
    pub ec_efficiency: f64,
    /// Secrecy parameter ε_sec.
    pub epsilon_sec: f64,
    /// Correctness parameter ε_cor.
    pub epsilon_cor: f64,
    /// The detector's claimed efficiency mismatch ratio η ∈ (0, 1] (1: none, or random
    /// swapping), read by `mismatch-aware` only.
    pub mismatch: f64,
    /// The claimed probability that the monitor notices a blinded detection period
    /// (1: not blindable), read by `blinding-aware` only.
    pub blinding_catch: f64,
}

impl RuleParams {
    /// The setup's abort test of a block: an observed error rate (Z sample, X, Y) above
    /// `abort_qber`; NaN rates (a basis without rounds) never abort.
    pub fn threshold_aborts(&self, obs: &BlockStats) -> bool {
        let exceeds = |e: f64| !e.is_nan() && e > self.abort_qber;
        exceeds(obs.e_x) || exceeds(obs.e_z) || exceeds(obs.e_y)
    }
}

/// What a block showed, as the post-processing sees it (and, in `key_errors`, what error
/// correction learns). Every field is a variable of rule files and rule programs
/// ([`block_vars`]).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Default)]
pub struct BlockStats {
    /// Signals (pulses) sent.
    pub signals: u64,
    /// Key bits: sifted Z bits not disclosed in the test sample.
    pub n: u64,
    /// Sifted X bits, all disclosed to estimate the phase error.
    pub k: u64,
    /// Sifted Z bits disclosed to estimate the bit error rate.
    pub m: u64,
    /// Observed error rate in the Z test sample (NaN when m = 0).
    pub e_z: f64,
    /// Observed error rate on the sifted X bits (NaN when k = 0).
    pub e_x: f64,
    /// Errors in the Z test sample.
    pub m_errors: u64,
    /// Errors among the sifted X bits.
    pub k_errors: u64,
    /// Sifted Y bits (six-state; 0 for BB84), all disclosed.
    pub sifted_y: u64,
    /// Errors among them.
    pub y_errors: u64,
    /// Observed Y error rate (NaN without Y bits).
    pub e_y: f64,
    /// Bit errors in the n key bits: what error correction finds and corrects. Real
    /// systems learn it; the built-in rules do not read it.
    pub key_errors: u64,
    /// Per-intensity statistics of a weak-coherent link (None for single photons).
    pub intensities: Option<IntensityObs>,
}

/// What a block on an optical link showed per kind of pulse (signal first, then decoys).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Default)]
pub struct IntensityObs {
    /// Number of intensities in use.
    pub count: usize,
    /// Intensities, photons per pulse (1 for a single-photon source).
    pub mu: [f64; 3],
    /// Probability that a pulse of each kind holds two or more photons (0 for a
    /// single-photon source).
    pub multi_photon: [f64; 3],
    /// Probability with which each intensity is sent.
    pub probability: [f64; 3],
    /// Pulses sent per intensity.
    pub pulses: [u64; 3],
    /// Detections per intensity (any bases).
    pub detections: [u64; 3],
    /// Sifted Z detections per intensity (for the signal: test sample and key together).
    pub z_detections: [u64; 3],
    /// Sifted X detections per intensity.
    pub x_detections: [u64; 3],
    /// Errors among them.
    pub x_errors: [u64; 3],
}

impl IntensityObs {
    /// Observed gain of intensity `i`.
    pub fn gain(&self, i: usize) -> f64 {
        if self.pulses[i] == 0 {
            f64::NAN
        } else {
            self.detections[i] as f64 / self.pulses[i] as f64
        }
    }
    /// Observed X error rate of intensity `i`.
    pub fn x_error_rate(&self, i: usize) -> f64 {
        if self.x_detections[i] == 0 {
            f64::NAN
        } else {
            self.x_errors[i] as f64 / self.x_detections[i] as f64
        }
    }
}

impl BlockStats {
    /// The bit-error estimate error correction is sized by: the Z sample, or the X
    /// estimate when there is no Z sample.
    pub fn q_for_ec(&self) -> f64 {
        if self.m > 0 {
            self.e_z
        } else {
            self.e_x
        }
    }
}

/// A rule's answer.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct KeyLength {
    /// The formula's value in bits before rounding (may be negative).
    pub raw_bits: f64,
    /// Extracted key length: `floor(raw_bits)`, or 0 when negative (no key).
    pub length: u64,
    /// What the rule assumes.
    pub assumptions: &'static str,
    /// Where the rule comes from.
    pub source: &'static str,
}

impl KeyLength {
    fn new(raw_bits: f64, assumptions: &'static str, source: &'static str) -> Self {
        KeyLength { raw_bits, length: KeyLength::floor_bits(raw_bits), assumptions, source }
    }

    /// The extracted length of a formula's value: `floor(raw_bits)`, or 0 when it is below
    /// 1 or not finite.
    pub fn floor_bits(raw_bits: f64) -> u64 {
        if raw_bits.is_finite() && raw_bits >= 1.0 {
            raw_bits.floor() as u64
        } else {
            0
        }
    }
}

/// The split of ε_sec (see the module doc).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EpsilonBudget {
    /// Smoothing parameter of the min-entropy.
    pub smooth: f64,
    /// Privacy-amplification (leftover hash) term.
    pub pa: f64,
}

impl EpsilonBudget {
    /// `ε_smooth = ε_sec/4`, `ε_PA = ε_sec/2`, so that `2ε_smooth + ε_PA = ε_sec`.
    pub fn split(epsilon_sec: f64) -> Self {
        EpsilonBudget { smooth: epsilon_sec / 4.0, pa: epsilon_sec / 2.0 }
    }
}

/// Privacy-amplification cost `2 log₂(1/(2ε_PA))` bits.
pub fn pa_cost_bits(eps_pa: f64) -> f64 {
    2.0 * (1.0 / (2.0 * eps_pa)).log2()
}

/// Error-verification cost `log₂(2/ε_cor)` bits.
pub fn verification_bits(eps_cor: f64) -> f64 {
    (2.0 / eps_cor).log2()
}

/// Error-correction leak: `f·n·h(Q) + log₂(2/ε_cor)` bits.
pub fn ec_leak_bits(obs: &BlockStats, params: &RuleParams) -> f64 {
    let q = obs.q_for_ec();
    // No observed rate (NaN) charges the full bit, as does a rate of ½ or more.
    params.ec_efficiency * obs.n as f64 * binary_entropy_capped(q) + verification_bits(params.epsilon_cor)
}

/// Deviation μ such that the error rate on `n` unobserved bits exceeds the rate observed
/// on `k` bits sampled without replacement from the same `n + k` by more than μ with
/// probability at most ε² (Serfling's bound as used by Tomamichel et al. 2012):
/// `μ = √((n+k)/(n k) · (k+1)/k · ln(1/ε))`. Infinite when k = 0 or n = 0.
pub fn sampling_deviation(n: u64, k: u64, eps: f64) -> f64 {
    if n == 0 || k == 0 {
        return f64::INFINITY;
    }
    let (n, k) = (n as f64, k as f64);
    ((n + k) / (n * k) * (k + 1.0) / k * (1.0 / eps).ln()).sqrt()
}

/// AEP lower bound on the smooth min-entropy of `n` i.i.d. rounds of a classical bit X
/// with conditional entropy `h` (bits): `n·h − 4 log₂(2+√2) √(n log₂(2/ε²))`, valid for
/// `n ≥ (8/5) log₂(2/ε²)` (Tomamichel, Colbeck, Renner, IEEE TIT 55, 5840, 2009, with
/// υ ≤ √(2^{−H_min}) + √(2^{H_max}) + 1 ≤ 2 + √2 for a bit). `None` outside its range.
pub fn aep_min_entropy(n: u64, h: f64, eps: f64) -> Option<f64> {
    let log_term = (2.0 / (eps * eps)).log2();
    let nf = n as f64;
    if nf < 1.6 * log_term {
        return None;
    }
    Some(nf * h - 4.0 * (2.0 + std::f64::consts::SQRT_2).log2() * (nf * log_term).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn aep_matches_reference_examples() {
        // REFERENCES.md §12 [N; constants M?, Tomamichel, Colbeck, Renner 2009]:
        // 4·log₂(2+√2) = 7.0862133; n = 1e6, ε = 1e-10, H = 0.713603 → 655 410.4;
        // n = 1e5, H = 1 → 81 597.9; n = 1e8, ε = 1e-9, H = 1 − h(0.03) → 8.000830e7.
        assert_abs_diff_eq!(4.0 * (2.0 + std::f64::consts::SQRT_2).log2(), 7.0862133, epsilon = 1e-6);
        assert_abs_diff_eq!(aep_min_entropy(1_000_000, 0.713603, 1e-10).unwrap(), 655_410.4, epsilon = 1.0);
        assert_abs_diff_eq!(aep_min_entropy(100_000, 1.0, 1e-10).unwrap(), 81_597.9, epsilon = 1.0);
        let h = 1.0 - crate::quantum::measures::binary_entropy(0.03);
        assert_abs_diff_eq!(aep_min_entropy(100_000_000, h, 1e-9).unwrap() / 1e7, 8.000830, epsilon = 1e-5);
        assert!(aep_min_entropy(10, 1.0, 1e-10).is_none());
    }

    #[test]
    fn budget_adds_up_and_costs_match_reference() {
        let b = EpsilonBudget::split(1e-10);
        assert_abs_diff_eq!(2.0 * b.smooth + b.pa, 1e-10, epsilon = 1e-25);
        // log₂(2/(ε_sec² ε_cor)) = 107.3016990 for 1e-10, 1e-12 (REFERENCES.md §8 [N]):
        // our PA cost plus verification cost is exactly this term.
        assert_abs_diff_eq!(pa_cost_bits(b.pa) + verification_bits(1e-12), 107.3016990, epsilon = 1e-6);
    }
}
