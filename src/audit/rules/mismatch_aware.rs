//! `mismatch-aware`: the finite-key rule of `finite-uncertainty` made safe for detectors
//! whose efficiencies differ by at most the ratio η (`[detector] mismatch`, the smallest
//! ratio η_min(t)/η_max(t) of the two detectors over every parameter t Eve can control; 1
//! with random bit-assignment swapping).
//!
//! Fung, Tamaki, Qi, Lo, Ma (QIC 9, 131, 2009) prove that BB84 stays secure with such
//! detectors at a key rate that depends on the maximal efficiency ratio, and that random
//! swapping of the bit assignment removes the effect. Their explicit rate formula was not
//! available to us, so the rule below is our own derivation by a tagging argument (the
//! device analogue of Gottesman, Lo, Lütkenhaus, Preskill, QIC 4, 325, 2004); we expect it to
//! be no tighter than theirs. Tighter single-photon bounds exist (Bochkov & Trushechkin,
//! PRA 99, 032308, 2019; not used here).
//!
//! # Derivation
//! 1. *Splitting each click.* At a parameter value t, with η_min(t) the smaller and η_max(t)
//!    the larger efficiency and b*(t) the more efficient detector, Bob's click operators are
//!    `F_{β,b}(t) = η_min(t) P_{β,b} + [b = b*] (η_max(t) − η_min(t)) P_{β,b*}` (on mode t).
//!    Refine Bob's measurement virtually into *untagged* clicks `η_min(t) P_{β,b}` and
//!    *tagged* clicks `(η_max − η_min) P_{β,b*}`; the key is unchanged (it only depends on
//!    the coarse outcome). The untagged clicks of both bits sum to `η_min(t)·1`: a filter
//!    that does not depend on Bob's basis, followed by an ideal qubit measurement. So the
//!    untagged rounds are a BB84 run with trusted qubit measurements behind a
//!    basis-independent loss, to which the uncertainty relation applies (q = 1), and in
//!    which the basis of each round is independent of whether it was kept.
//! 2. *How many clicks are tagged.* Given a click at t on any input ρ, the chance it is
//!    tagged is `(η_max − η_min) p_{b*} / (η_min (p₀ + p₁) + (η_max − η_min) p_{b*}) ≤
//!    1 − η_min/η_max ≤ 1 − η` (largest when p_{b*} = 1). This holds for every round
//!    conditioned on everything before, in each basis, so by the Azuma–Hoeffding inequality
//!    the tagged key bits exceed `(1 − η) n + √(n ln(1/ε_t)/2)` with probability at most ε_t,
//!    and likewise for the k X rounds.
//! 3. *Phase error of the untagged key.* Every block that passes has at most `k·Q_tol` X
//!    errors, all of which may sit on untagged rounds: the untagged X error rate is at most
//!    `e_u = k·Q_tol / k_u`, with `k_u` the untagged X rounds. By step 1 the untagged X
//!    rounds are a random sample of the untagged rounds, so (Serfling, as in
//!    [`super::sampling_deviation`]) the untagged key's phase error exceeds `e_u + μ(n_u, k_u)`
//!    with probability at most ε_s².
//! 4. Eve is given the tagged bits: `H_min^ε(X|E) ≥ n_u (1 − h(e_u + μ))`, and as in
//!    [`super::finite_uncertainty`]
//!    `ℓ = n_u (1 − h(e_u + μ)) − leak_EC − 2 log₂(1/(2ε_PA))`.
//!
//! Budget: the three estimates (tags among key bits, tags among X rounds, sampling) fail
//! with ε_smooth²/3 each, where `finite-uncertainty` spends the whole ε_smooth² on sampling:
//! ε_t = ε_smooth²/3 and ε_s = ε_smooth/√3. With η = 1 no click can be tagged, nothing is
//! spent on tags, and the rule equals `finite-uncertainty` exactly.
//!
//! Asymptotically (n, k → ∞) the rate per sifted bit is `η (1 − h(Q_tol/η)) − f h(Q)`:
//! against the time-shift attack (no errors) η ≤ h(1/(1 + η)) = what Eve leaves, and
//! against faked states (Q = 2η/(1 + 3η) ≥ η/2) the phase-error term reaches h(½) and no
//! key is produced.

use super::RuleParams;
use super::{ec_leak_bits, pa_cost_bits, sampling_deviation, BlockStats, EpsilonBudget, KeyLength};
use crate::quantum::measures::binary_entropy_capped;

/// The Azuma–Hoeffding deviation `√(N ln(1/ε)/2)` of a count of N events, each with
/// conditional probability at most its bound.
pub fn tag_deviation(count: u64, eps: f64) -> f64 {
    (count as f64 * (1.0 / eps).ln() / 2.0).sqrt()
}

/// `ℓ = n_u (1 − h(k·Q_tol/k_u + μ(n_u, k_u, ε_s))) − leak_EC − PA` for a block whose
/// untagged key bits are at least `n_u` and untagged X rounds at least `k_u` (steps 3–4 of
/// the module doc); shared with [`super::blinding_aware`].
pub fn untagged_length(obs: &BlockStats, params: &RuleParams, n_u: f64, k_u: f64, eps_s: f64) -> f64 {
    let budget = EpsilonBudget::split(params.epsilon_sec);
    if !(n_u >= 1.0 && k_u >= 1.0) {
        return -ec_leak_bits(obs, params) - pa_cost_bits(budget.pa);
    }
    let (n_int, k_int) = (n_u.floor() as u64, k_u.floor() as u64);
    // All X errors on untagged rounds; with nothing tagged this is Q_tol itself.
    let e_u = if k_int == obs.k { params.abort_qber } else { obs.k as f64 * params.abort_qber / k_int as f64 };
    let mu = sampling_deviation(n_int, k_int, eps_s);
    n_int as f64 * (1.0 - binary_entropy_capped(e_u + mu)) - ec_leak_bits(obs, params) - pa_cost_bits(budget.pa)
}

/// The rule's length for a block that passed the abort test.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let budget = EpsilonBudget::split(params.epsilon_sec);
    let eta = params.mismatch;
    let raw = if eta >= 1.0 {
        untagged_length(obs, params, obs.n as f64, obs.k as f64, budget.smooth)
    } else {
        let eps_t = budget.smooth * budget.smooth / 3.0;
        let eps_s = budget.smooth / 3f64.sqrt();
        let untagged = |count: u64| count as f64 * eta - tag_deviation(count, eps_t);
        untagged_length(obs, params, untagged(obs.n), untagged(obs.k), eps_s)
    };
    KeyLength::new(
        raw,
        "single photons; Bob's detectors' efficiencies differ by at most the ratio [detector] mismatch over everything Eve \
         controls (1 with random swapping), qubit measurements within each mode, detectors not blindable; general attacks",
        "our tagging derivation (module doc) after Fung, Tamaki, Qi, Lo, Ma, QIC 9, 131 (2009) and GLLP, QIC 4, 325 (2004); \
         uncertainty relation as in Tomamichel, Lim, Gisin, Renner, Nat. Commun. 3, 634 (2012)",
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::rules::finite_uncertainty;
    use crate::quantum::measures::binary_entropy;
    use approx::assert_abs_diff_eq;

    fn params(mismatch: f64) -> RuleParams {
        RuleParams { abort_qber: 0.05, ec_efficiency: 1.1, epsilon_sec: 1e-10, epsilon_cor: 1e-12, mismatch, blinding_catch: 1.0 }
    }

    #[test]
    fn without_mismatch_it_is_the_finite_uncertainty_rule() {
        let obs = BlockStats { n: 1_000_000, k: 100_000, m: 1, e_z: 0.01, e_x: 0.01, intensities: None, ..Default::default() };
        assert_eq!(length(&obs, &params(1.0)).raw_bits, finite_uncertainty::length(&obs, &params(1.0)).raw_bits);
    }

    #[test]
    fn regression_value_recomputed_by_hand() {
        // [N] recomputed step by step from the module doc: n = 10⁶, k = 10⁵, Q_tol = 0.05,
        // η = 0.9, ε_sec = 10⁻¹⁰ (ε_smooth = 2.5·10⁻¹¹), f = 1.1, e_Z = 0.01, ε_cor = 10⁻¹².
        let obs = BlockStats { n: 1_000_000, k: 100_000, m: 1, e_z: 0.01, e_x: 0.01, intensities: None, ..Default::default() };
        let p = params(0.9);
        let eps = 2.5e-11_f64;
        let dev = |c: f64| (c * (3.0 / (eps * eps)).ln() / 2.0).sqrt();
        let n_u = (1e6 * 0.9 - dev(1e6)).floor();
        let k_u = (1e5 * 0.9 - dev(1e5)).floor();
        let e_u = 1e5 * 0.05 / k_u;
        let e3 = eps / 3f64.sqrt();
        let mu = ((n_u + k_u) / (n_u * k_u) * (k_u + 1.0) / k_u * (1.0 / e3).ln()).sqrt();
        let leak = 1.1 * 1e6 * binary_entropy(0.01) + (2.0 / 1e-12f64).log2();
        let pa = 2.0 * (1.0 / (2.0 * 5e-11f64)).log2();
        let expected = n_u * (1.0 - binary_entropy(e_u + mu)) - leak - pa;
        assert_abs_diff_eq!(length(&obs, &p).raw_bits, expected, epsilon = 1e-6);
        // and it lies below the asymptotic rate η(1 − h(Q_tol/η)) − f h(e_Z) per key bit
        let asymptotic = 1e6 * (0.9 * (1.0 - binary_entropy(0.05 / 0.9)) - 1.1 * binary_entropy(0.01));
        assert!(expected < asymptotic && expected > 0.8 * asymptotic, "{expected} vs {asymptotic}");
    }

    #[test]
    fn the_key_shrinks_with_the_mismatch() {
        let obs = BlockStats { n: 1_000_000, k: 100_000, m: 1, e_z: 0.0, e_x: 0.0, intensities: None, ..Default::default() };
        let mut last = f64::INFINITY;
        for eta in [1.0, 0.95, 0.8, 0.5, 0.2, 0.05] {
            let l = length(&obs, &params(eta)).raw_bits;
            assert!(l < last, "η = {eta}: {l} ≥ {last}");
            last = l;
        }
    }
}
