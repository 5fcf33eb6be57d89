//! `blinding-aware`: the finite-key rule of `finite-uncertainty` made safe for detectors
//! that Eve can blind and control (Lydersen et al., Nat. Photonics 4, 686, 2010), given a
//! monitor that notices each blinded detection period with probability at least
//! c = `[detector] blinding_catch` and then aborts the block.
//!
//! # Derivation (ours; the tagging argument of Gottesman, Lo, Lütkenhaus, Preskill, QIC 4,
//! 325, 2004, with the monitor bounding the number of tagged rounds)
//! 1. On a blinded period Eve decides Bob's click, so she may know its bit and it may show
//!    no error: treat every blinded round as *tagged* (given to Eve). Unblinded rounds are
//!    ordinary BB84 rounds with trusted detectors.
//! 2. Each blinded period is noticed with probability at least c, independently of the
//!    others given the past, so B blinded periods all pass unnoticed with probability at
//!    most (1 − c)^B. Let `K` be the largest B with `(1 − c)^B > ε_b`:
//!    `K = ⌈ln ε_b / ln(1 − c)⌉ − 1` for 0 < c < 1, K = 0 for c = 1 (blinding is always
//!    noticed), and no key for c = 0. Except with probability ε_b, a block that passes has
//!    at most K tagged rounds in all, among its key bits and its X rounds together.
//! 3. With `n_u = n − K` untagged key bits and `k_u = k − K` untagged X rounds, the untagged
//!    X error rate is at most `k·Q_tol / k_u`, and the untagged key's phase error follows by
//!    sampling, exactly as in steps 3–4 of [`super::mismatch_aware`] (the unblinded rounds'
//!    bases are independent of whether Eve blinded them: she does not know Bob's basis in
//!    advance). So `ℓ = n_u (1 − h(k·Q_tol/k_u + μ(n_u, k_u))) − leak_EC − 2 log₂(1/(2ε_PA))`.
//!
//! Budget: ε_b = ε_smooth²/2 and sampling ε_s = ε_smooth/√2 (where `finite-uncertainty`
//! spends all of ε_smooth² on sampling); with c = 1 nothing is spent on blinding and the
//! rule equals `finite-uncertainty` exactly.
//!
//! Tolerance: the rule removes K bits, so a system that uses it stays secure for every c
//! it claims; a system using a blinding-blind rule stays secure only if its monitor makes
//! the blinded periods that its key-length slack cannot absorb unlikely to pass: the
//! campaign sweep in the README states the smallest c at which the audit finds no leak.

use super::mismatch_aware::untagged_length;
use super::RuleParams;
use super::{BlockStats, EpsilonBudget, KeyLength};

/// The largest number of blinded periods that pass a monitor of catch probability `c`
/// unnoticed with probability above `eps` (None: unbounded, c = 0).
pub fn undetected_blinded_periods(c: f64, eps: f64) -> Option<u64> {
    if c >= 1.0 {
        Some(0)
    } else if c <= 0.0 {
        None
    } else {
        let b = (eps.ln() / (-c).ln_1p()).ceil();
        Some((b - 1.0).max(0.0) as u64)
    }
}

/// The rule's length for a block that passed the abort test.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let budget = EpsilonBudget::split(params.epsilon_sec);
    let raw = if params.blinding_catch >= 1.0 {
        untagged_length(obs, params, obs.n as f64, obs.k as f64, budget.smooth)
    } else {
        let eps_b = budget.smooth * budget.smooth / 2.0;
        match undetected_blinded_periods(params.blinding_catch, eps_b) {
            None => f64::NEG_INFINITY,
            Some(tags) => {
                let t = tags as f64;
                untagged_length(obs, params, obs.n as f64 - t, obs.k as f64 - t, budget.smooth / 2f64.sqrt())
            }
        }
    };
    KeyLength::new(
        raw,
        "single photons, trusted detectors except that Eve may blind and control them; a monitor notices each blinded period \
         with probability at least [detector] blinding_catch and aborts; general attacks",
        "our tagging derivation (module doc) after GLLP, QIC 4, 325 (2004); blinding: Lydersen et al., Nat. Photonics 4, 686 \
         (2010); uncertainty relation as in Tomamichel, Lim, Gisin, Renner, Nat. Commun. 3, 634 (2012)",
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::rules::finite_uncertainty;

    fn params(c: f64) -> RuleParams {
        RuleParams { abort_qber: 0.05, ec_efficiency: 1.1, epsilon_sec: 1e-10, epsilon_cor: 1e-12, mismatch: 1.0, blinding_catch: c }
    }

    #[test]
    fn undetected_periods_follow_from_the_catch_probability() {
        // (1 − c)^K > ε ≥ (1 − c)^(K+1): c = ½, ε = 2⁻¹⁰ → K = 9; c = 0.1, ε = 10⁻⁶ →
        // ln 10⁻⁶ / ln 0.9 = 131.1 → K = 131 [N, by hand].
        assert_eq!(undetected_blinded_periods(0.5, 2f64.powi(-10)), Some(9));
        assert_eq!(undetected_blinded_periods(0.1, 1e-6), Some(131));
        assert_eq!(undetected_blinded_periods(1.0, 1e-6), Some(0));
        assert_eq!(undetected_blinded_periods(0.0, 1e-6), None);
        let k = undetected_blinded_periods(0.1, 1e-6).unwrap() as i32;
        assert!(0.9f64.powi(k) > 1e-6 && 0.9f64.powi(k + 1) <= 1e-6);
    }

    #[test]
    fn the_ideal_monitor_gives_finite_uncertainty_and_a_weaker_one_less() {
        let obs = BlockStats { n: 1_000_000, k: 100_000, m: 1, e_z: 0.01, e_x: 0.01, intensities: None, ..Default::default() };
        let full = finite_uncertainty::length(&obs, &params(1.0)).raw_bits;
        assert_eq!(length(&obs, &params(1.0)).raw_bits, full);
        let weak = length(&obs, &params(1e-3)).raw_bits;
        assert!(weak < full - 40_000.0, "{weak} vs {full}: about 4.8·10⁴ blinded bits to remove");
        assert_eq!(length(&obs, &params(0.0)).length, 0);
    }
}
