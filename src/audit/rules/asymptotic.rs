//! `asymptotic`: the asymptotic BB84 rate `1 − h(e_X) − f·h(e_Z)` per key bit applied to a
//! finite block with the observed error rates and no finite-size correction (Shor &
//! Preskill, PRL 85, 441, 2000 for the asymptotic rate). Using it on finite blocks is a
//! common mistake in deployed configurations (common practice, no source); the audit shows
//! where it leaks.

use super::RuleParams;
use super::{BlockStats, KeyLength};
use crate::quantum::measures::binary_entropy_capped;

/// `n·(1 − h(e_X) − f·h(e_Z))` with observed rates (the EC estimate stands in for e_Z).
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let raw = obs.n as f64 * (1.0 - binary_entropy_capped(obs.e_x) - params.ec_efficiency * binary_entropy_capped(obs.q_for_ec()));
    KeyLength::new(
        raw,
        "asymptotic block length: observed error rates taken as exact, no finite-size terms, no ε",
        "Shor & Preskill, PRL 85, 441 (2000), applied without finite-size correction",
    )
}
