//! `finite-uncertainty`: the finite-key rule from the smooth-entropy uncertainty relation
//! (Tomamichel, Lim, Gisin, Renner, Nat. Commun. 3, 634, 2012; re-derived in Tomamichel &
//! Leverrier, Quantum 1, 14, 2017).
//!
//! Derivation chain, each ε named (budget in the parent module):
//! 1. uncertainty relation: `H_min^ε(X|E) ≥ n·q − H_max^ε(Z|B)`, q = log₂(1/c) = 1 for BB84
//!    bases (Tomamichel & Renner, PRL 106, 110506, 2011);
//! 2. sampling: the phase-error rate on the n key bits exceeds the abort threshold Q_tol by
//!    more than μ = √((n+k)/(nk)·(k+1)/k·ln(1/ε_smooth)) with probability ≤ ε_smooth², so
//!    `H_max^{ε_smooth}(Z|B) ≤ n·h(Q_tol + μ)` for blocks that pass (Serfling);
//! 3. chain rule for the public error-correction syndrome and verification hash:
//!    `H_min(X|E') ≥ H_min(X|E) − leak_EC`, leak_EC = f·n·h(Q) + log₂(2/ε_cor);
//! 4. leftover hash: `ℓ = H_min − 2 log₂(1/(2ε_PA))` is (2ε_smooth + ε_PA)-secret.
//!
//! So `ℓ = n(1 − h(Q_tol + μ)) − leak_EC − 2 log₂(1/(2ε_PA))`. With ε_smooth = ε_sec/4 this is
//! the `ln(4/ε_sec)` form of the rule (REFERENCES.md §8 discusses the ln(2/ε_sec) variant).

use super::RuleParams;
use super::{ec_leak_bits, pa_cost_bits, sampling_deviation, BlockStats, EpsilonBudget, KeyLength};
use crate::quantum::measures::binary_entropy_capped;

/// The rule's length for a block that passed the abort test.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let budget = EpsilonBudget::split(params.epsilon_sec);
    let mu = sampling_deviation(obs.n, obs.k, budget.smooth);
    let raw = obs.n as f64 * (1.0 - binary_entropy_capped(params.abort_qber + mu)) - ec_leak_bits(obs, params) - pa_cost_bits(budget.pa);
    KeyLength::new(
        raw,
        "qubit signals (or squashing), trusted measurements, abort if the X error rate exceeds abort_qber; general attacks",
        "Tomamichel, Lim, Gisin, Renner, Nat. Commun. 3, 634 (2012); Tomamichel & Leverrier, Quantum 1, 14 (2017)",
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn single_point_regression() {
        // REFERENCES.md §8 [N; formula M?]: n = 1e6, k = 1e5, Q = 0.01, ε_sec = 1e-10,
        // ε_cor = 1e-12, f = 1.1: with ln(4/ε_sec) (our budget ε_smooth = ε_sec/4),
        // μ = 0.0163871 and ℓ = 735 084.0.
        let params =
            RuleParams { abort_qber: 0.01, ec_efficiency: 1.1, epsilon_sec: 1e-10, epsilon_cor: 1e-12, mismatch: 1.0, blinding_catch: 1.0 };
        let obs = BlockStats { n: 1_000_000, k: 100_000, m: 1, e_z: 0.01, e_x: 0.01, intensities: None, ..Default::default() };
        assert_abs_diff_eq!(sampling_deviation(obs.n, obs.k, 1e-10 / 4.0), 0.0163871, epsilon = 1e-7);
        let l = length(&obs, &params);
        assert_abs_diff_eq!(l.raw_bits, 735_084.0, epsilon = 0.5);
        assert_eq!(l.length, 735_083);
        // The ln(2/ε_sec) variant of the sheet: μ = 0.0161527579 with ε = ε_sec/2.
        assert_abs_diff_eq!(sampling_deviation(obs.n, obs.k, 1e-10 / 2.0), 0.0161527579, epsilon = 1e-8);
    }
}
