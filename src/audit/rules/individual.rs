//! `individual`: the Csiszár–Körner key length against individual attacks,
//! `n·(1 − f·h(e_Z) − I_E(D))` with `I_E(D) = 1 − h(½ + √(D(1−D)))` the optimal individual
//! attack's information at the observed disturbance D = max(e_Z, e_X) (Csiszár & Körner,
//! IEEE TIT 24, 339, 1978; Fuchs, Gisin, Griffiths, Niu, Peres, PRA 56, 1163, 1997). No
//! finite-size correction. Insecure against collective attacks.

use super::RuleParams;
use super::{BlockStats, KeyLength};
use crate::exact::bounds::fggnp_information;
use crate::quantum::measures::binary_entropy_capped;

/// The rule's length.
pub fn length(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let d = obs.q_for_ec().max(if obs.e_x.is_nan() { 0.0 } else { obs.e_x });
    let info = if d.is_nan() || d >= 0.5 { 1.0 } else { fggnp_information(d.max(0.0)) };
    let raw = obs.n as f64 * (1.0 - params.ec_efficiency * binary_entropy_capped(obs.q_for_ec()) - info);
    KeyLength::new(
        raw,
        "Eve measures each signal individually after the basis announcement; asymptotic; no ε",
        "Csiszar & Korner, IEEE TIT 24, 339 (1978); Fuchs, Gisin, Griffiths, Niu, Peres, PRA 56, 1163 (1997)",
    )
}
