//! Monte Carlo block samplers: draw whole blocks from the exact per-signal models of
//! [`crate::exact`] and return [`BlockCounts`], what the post-processing sees.
//!
//! Two samplers of single-photon points must agree in distribution: [`count`] (multinomial,
//! binomial and hypergeometric draws; cost independent of the block size; the default) and
//! [`round`] (an alias table, one draw per signal, constant memory; can also write the
//! round log of a small block). [`pulses`] draws blocks of an optical link's pulses per kind of pulse.
//!
//! Test sample: a uniformly random subset of the sifted Z rounds of the configured size m is
//! disclosed. Rounds are i.i.d. and hence exchangeable, so the per-round sampler draws the
//! test sample's categories from its tallies (a multivariate hypergeometric draw, constant
//! memory) or, when it logs rounds, takes the first m sifted Z rounds; the count-level
//! sampler draws the test sample and the key as independent multinomials of sizes m and
//! n_Z − m given n_Z.
//!
//! Every (point, trial) has its own random stream ([`crate::numeric::rng::trial_rng`]), so
//! results do not depend on the number of threads.

pub mod count;
pub mod pulses;
pub mod round;

use crate::exact::signal::SignalModel;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

/// Counts of one simulated block: what the post-processing and the judge need.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct BlockCounts {
    /// Signals sent.
    pub signals: u64,
    /// Sifted rounds per basis (Z, X, Y).
    pub sifted: [u64; 3],
    /// Errors among the sifted rounds of each basis (for Z: test sample and key together).
    pub errors: [u64; 3],
    /// Size of the disclosed Z test sample.
    pub test_z: u64,
    /// Errors in the Z test sample.
    pub test_z_errors: u64,
    /// Key bits (sifted Z not in the test sample) by category `2·error + eve_correct`.
    pub key: [u64; 4],
    /// Per-intensity statistics of a weak-coherent link (None for single photons).
    pub intensities: Option<crate::audit::rules::IntensityObs>,
    /// Weak-coherent links: key bits by photon-number class of the pulse (0, 1, ≥ 2).
    pub key_classes: Option<[u64; 3]>,
    /// Weak-coherent links: Σ over the sampled key bits of H(X|E) of their class, bits.
    pub key_entropy_bits: Option<f64>,
    /// Device attacks: the blinding monitor fired during the block (the block aborts).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub alarm: bool,
}

impl BlockCounts {
    /// Number of key bits n.
    pub fn key_bits(&self) -> u64 {
        self.key.iter().sum()
    }
    /// Errors among the key bits.
    pub fn key_errors(&self) -> u64 {
        self.key[2] + self.key[3]
    }
    /// Key bits Eve guessed correctly.
    pub fn eve_correct_key(&self) -> u64 {
        self.key[1] + self.key[3]
    }
}

/// Whether the monitor fires during a block of `rounds` detected rounds when it fires
/// `odds` times per detected round on average (alarms and clicks as competing events of a
/// detection period: no alarm before the last click with probability `(1 + odds)^−rounds`).
/// Draws nothing when `odds` is 0, so models without a monitor keep their random streams.
pub fn monitor_alarm(odds: f64, rounds: u64, rng: &mut ChaCha8Rng) -> bool {
    if odds <= 0.0 {
        return false;
    }
    let quiet = (-(rounds as f64) * odds.ln_1p()).exp();
    rand::Rng::gen::<f64>(rng) >= quiet
}

/// Which block sampler to use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Sampler {
    /// Count-level draws (default; cost independent of the block size).
    #[default]
    Count,
    /// One alias-table draw per signal.
    Round,
}

/// Draws one block of `signals` signals with a test sample of `test_size(sifted_z)` Z bits.
pub fn sample_block(
    sampler: Sampler,
    model: &SignalModel,
    signals: u64,
    test_size: &dyn Fn(u64) -> u64,
    rng: &mut ChaCha8Rng,
) -> BlockCounts {
    match sampler {
        Sampler::Count => count::sample(model, signals, test_size, rng),
        Sampler::Round => round::RoundSampler::new(model).sample(signals, test_size, rng, None),
    }
}
