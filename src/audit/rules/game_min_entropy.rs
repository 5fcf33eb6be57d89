//! `game-min-entropy`: the min-entropy bound of the monogamy-of-entanglement guessing game
//! (Tomamichel, Fehr, Kaniewski, Wehner, NJP 15, 103002, 2013): per key bit
//! `−log₂(½ + 1/(2√2)) − h(δ)`, with δ the estimated error rate plus its sampling
//! deviation. Valid even when Bob's measurement device is not trusted; conservative.
//!
//! δ = max(e_Z + μ(n, m), e_X + μ(n, k)) over the tested bases (μ as in
//! [`super::sampling_deviation`] with ε_smooth), capped at ½. Then
//! `ℓ = n(−log₂ β − h(δ)) − leak_EC − 2 log₂(1/(2ε_PA))`.

use super::RuleParams;
use super::{ec_leak_bits, pa_cost_bits, sampling_deviation, BlockStats, EpsilonBudget, KeyLength};
use crate::exact::bounds::game_bound;
use crate::quantum::measures::binary_entropy_capped;

/// The rule's length.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let budget = EpsilonBudget::split(params.epsilon_sec);
    let mut delta = f64::NEG_INFINITY;
    if obs.m > 0 {
        delta = delta.max(obs.e_z + sampling_deviation(obs.n, obs.m, budget.smooth));
    }
    if obs.k > 0 {
        delta = delta.max(obs.e_x + sampling_deviation(obs.n, obs.k, budget.smooth));
    }
    if delta == f64::NEG_INFINITY {
        delta = 0.5;
    }
    let per_bit = -game_bound().log2() - binary_entropy_capped(delta);
    let raw = obs.n as f64 * per_bit - ec_leak_bits(obs, params) - pa_cost_bits(budget.pa);
    KeyLength::new(
        raw,
        "Alice's preparations trusted, Bob's device untrusted (one-sided device independent); general attacks",
        "Tomamichel, Fehr, Kaniewski, Wehner, NJP 15, 103002 (2013)",
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::optimize::bisect;
    use crate::quantum::measures::binary_entropy;
    use approx::assert_abs_diff_eq;

    #[test]
    fn per_round_constant_and_zero_point() {
        // −log₂(½ + 1/(2√2)) = 0.2284466968; 0.22845 − 2h(δ) = 0 at δ = 0.015309
        // (REFERENCES.md §11 [N; rate form M?]).
        assert_abs_diff_eq!(-game_bound().log2(), 0.2284466968, epsilon = 1e-9);
        let root = bisect(|d| -game_bound().log2() - 2.0 * binary_entropy(d), 1e-9, 0.5, 1e-12).unwrap();
        assert_abs_diff_eq!(root, 0.015309, epsilon = 1e-5);
    }
}
