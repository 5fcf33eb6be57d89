//! Key-length rules for weak-coherent-pulse links.
//!
//! - `naive-single-photon`: the finite-uncertainty rule applied as if every detection were
//!   a single photon. Known insecure with weak pulses: photon-number splitting gives Eve the
//!   multi-photon detections without errors (Brassard, Lütkenhaus, Mor, Sanders, PRL 85,
//!   1330, 2000).
//! - `gllp-no-decoy`: worst case that every multi-photon pulse is detected and known to Eve
//!   (Gottesman, Lo, Lütkenhaus, Preskill, QIC 4, 325, 2004): with Δ = P_{n≥2}(μ)/Q_μ,
//!   `ℓ = n(1 − Δ)[1 − h(e_X/(1 − Δ))] − leak_EC`, observed Q_μ and e_X, asymptotic.
//! - `decoy-vacuum-weak`: the vacuum + weak decoy bounds of Ma, Qi, Zhao, Lo (PRA 72,
//!   012326, 2005) on the single-photon yield and error from observed gains:
//!   `ℓ = n·(Q₁ᴸ/Q_μ)[1 − h(e₁ᵁ)] − leak_EC`, asymptotic (no finite-size terms).

use super::RuleParams;
use super::{ec_leak_bits, finite_uncertainty, BlockStats, KeyLength};
use crate::exact::keyrate::vacuum_weak_bounds;
use crate::quantum::measures::binary_entropy_capped;

/// `naive-single-photon`.
pub fn naive_single_photon(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    let fu = finite_uncertainty::length(obs, params);
    KeyLength::new(
        fu.raw_bits,
        "every detection treated as a single photon (finite-uncertainty form); ignores multi-photon pulses",
        "Tomamichel, Lim, Gisin, Renner 2012, misapplied to weak coherent pulses",
    )
}

/// `gllp-no-decoy`.
pub fn gllp_no_decoy(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    const ASSUMPTIONS: &str = "every multi-photon pulse detected and known to Eve; single photons tagged-free; asymptotic";
    const SOURCE: &str = "Gottesman, Lo, Lutkenhaus, Preskill, QIC 4, 325 (2004)";
    let Some(l) = obs.intensities else {
        return KeyLength::new(f64::NAN, ASSUMPTIONS, SOURCE);
    };
    let q = l.gain(0);
    let delta = l.multi_photon[0] / q;
    let raw = if delta.is_nan() || delta >= 1.0 {
        -ec_leak_bits(obs, params)
    } else {
        obs.n as f64 * (1.0 - delta) * (1.0 - binary_entropy_capped(obs.e_x / (1.0 - delta))) - ec_leak_bits(obs, params)
    };
    KeyLength::new(raw, ASSUMPTIONS, SOURCE)
}

/// `decoy-vacuum-weak`.
pub fn decoy_vacuum_weak(obs: &BlockStats, params: &RuleParams) -> KeyLength {
    const ASSUMPTIONS: &str = "Poisson source with vacuum and weak decoys; observed gains taken as exact; asymptotic";
    const SOURCE: &str = "Ma, Qi, Zhao, Lo, PRA 72, 012326 (2005)";
    let Some(l) = obs.intensities else {
        return KeyLength::new(f64::NAN, ASSUMPTIONS, SOURCE);
    };
    let vac = (1..l.count).find(|&i| l.mu[i] == 0.0);
    let weak = (1..l.count).find(|&i| l.mu[i] > 0.0);
    let (Some(v), Some(w)) = (vac, weak) else {
        return KeyLength::new(f64::NAN, ASSUMPTIONS, SOURCE);
    };
    let (mu, nu) = (l.mu[0], l.mu[w]);
    let q_mu = l.gain(0);
    let (y1l, e1u) = vacuum_weak_bounds(mu, nu, q_mu, l.gain(w), l.x_error_rate(w), l.gain(v));
    let single_fraction = (y1l * mu * (-mu).exp() / q_mu).clamp(0.0, 1.0);
    let raw = if y1l > 0.0 && single_fraction.is_finite() {
        obs.n as f64 * single_fraction * (1.0 - binary_entropy_capped(e1u)) - ec_leak_bits(obs, params)
    } else {
        -ec_leak_bits(obs, params)
    };
    KeyLength::new(raw, ASSUMPTIONS, SOURCE)
}
