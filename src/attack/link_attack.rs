//! Link-level attacks on weak-coherent-pulse links. Each declares exactly what Eve knows
//! about each detected signal: per intensity, the probability of a detection that is
//! correct or wrong and whose bit Eve does or does not know.
//!
//! - `photon-number-splitting` (Huttner, Imoto, Gisin, Mor, PRA 51, 1863, 1995; Brassard,
//!   Lütkenhaus, Mor, Sanders, PRL 85, 1330, 2000): on a `fraction` of the pulses Eve
//!   measures the photon number without disturbing polarisation, keeps one photon of every
//!   multi-photon pulse in a memory until the basis is announced, forwards the rest over a
//!   lossless line, and forwards single-photon pulses only with probability t₁, chosen so
//!   that Bob's signal gain matches the honest link's; if the multi-photon pulses alone
//!   already exceed it she also blocks a share of those. She cannot tell intensities apart,
//!   so decoys see the same (t₁, t_m). Bob's detector (efficiency, dark counts,
//!   misalignment) is untouched. If even t₁ = 1 cannot reach the honest gain, the attack
//!   reports that it cannot hide (`matched = false`).
//! - `beam-splitting` (Bennett et al., J. Cryptology 5, 3, 1992): on a `fraction` of the
//!   pulses Eve replaces the fibre by a lossless one and a beam splitter that takes the
//!   fibre's loss, storing what she taps. Bob's statistics do not change; she holds ≥ 1
//!   photon with probability 1 − e^{−μ(1−t)} (t the fibre transmittance), independent of
//!   Bob's click, and with her memory learns those bits.

use super::{ParamKind, ParamSpec};
use crate::error::{check_range, Error, Result};
use crate::link::{poisson, Link, E0};
use serde::Serialize;

/// Link-level attack families, by name.
pub const LINK_FAMILIES: &[(&str, &str)] = &[
    ("photon-number-splitting", "photon-number splitting with gain matching"),
    ("beam-splitting", "beam splitter taking the fibre loss, with a quantum memory"),
];

/// Their one parameter.
pub const LINK_PARAMS: &[ParamSpec] = &[ParamSpec {
    name: "fraction",
    kind: ParamKind::Number { lo: 0.0, hi: 1.0 },
    help: "fraction of the pulses Eve attacks (default 1)",
}];

/// A link-level attack.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub enum LinkAttack {
    /// Photon-number splitting on a fraction of the pulses.
    PhotonNumberSplitting {
        /// Fraction of pulses attacked.
        fraction: f64,
    },
    /// Beam splitting on a fraction of the pulses.
    BeamSplitting {
        /// Fraction of pulses attacked.
        fraction: f64,
    },
}

/// Per-intensity detection statistics: probabilities per pulse of a detection that is
/// `[correct & unknown, correct & known, error & unknown, error & known]` to Eve.
pub type DetectionSplit = [f64; 4];

impl LinkAttack {
    /// Builds from a family name and its `fraction`.
    pub fn new(family: &str, fraction: f64) -> Result<LinkAttack> {
        let fraction = check_range("fraction", fraction, 0.0, 1.0)?;
        match family {
            "photon-number-splitting" => Ok(LinkAttack::PhotonNumberSplitting { fraction }),
            "beam-splitting" => Ok(LinkAttack::BeamSplitting { fraction }),
            other => Err(Error::input_key("family", format!("`{other}` is not a link attack"))),
        }
    }
    /// Family name.
    pub fn name(&self) -> &'static str {
        match self {
            LinkAttack::PhotonNumberSplitting { .. } => "photon-number-splitting",
            LinkAttack::BeamSplitting { .. } => "beam-splitting",
        }
    }
    /// The attacked fraction.
    pub fn fraction(&self) -> f64 {
        match *self {
            LinkAttack::PhotonNumberSplitting { fraction } | LinkAttack::BeamSplitting { fraction } => fraction,
        }
    }
}

const MAX_PHOTONS: u32 = 40;

/// Detection statistics of an honest link at intensity `mu`, photon number by photon
/// number: each pulse is detected by a photon (error e_d) or, failing that, by a dark count
/// (error ½). Returned as a split with nothing known to Eve.
pub fn honest_split(link: &Link, mu: f64) -> DetectionSplit {
    let eta = link.transmittance();
    let y0 = link.dark_count_probability;
    let mut out = [0.0; 4];
    for n in 0..=MAX_PHOTONS {
        let p = poisson(mu, n);
        let photon = 1.0 - (1.0 - eta).powi(n as i32);
        add_click(&mut out, p, photon, y0, link.misalignment, false);
    }
    out
}

fn add_click(out: &mut DetectionSplit, weight: f64, photon: f64, y0: f64, e_d: f64, known: bool) {
    let dark = (1.0 - photon) * y0;
    let k = usize::from(known);
    out[k] += weight * photon * (1.0 - e_d);
    out[2 + k] += weight * photon * e_d;
    out[0] += weight * dark * (1.0 - E0);
    out[2] += weight * dark * E0;
}

/// What the photon-number-splitting strategy chose.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PnsStrategy {
    /// Probability of forwarding a single-photon pulse.
    pub t1: f64,
    /// Probability of forwarding (the rest of) a multi-photon pulse.
    pub tm: f64,
    /// Whether Bob's signal gain matches the honest link's.
    pub matched: bool,
}

/// Eve's choice of (t₁, t_m) for signal intensity `mu`: Bob's detection probability for a
/// forwarded pulse of n photons (n − 1 after splitting) is his efficiency applied to what
/// reaches him over a lossless line.
pub fn pns_strategy(link: &Link, mu: f64) -> PnsStrategy {
    let eta_b = link.detector_efficiency;
    let target: f64 = honest_split(link, mu).iter().sum();
    let y0 = link.dark_count_probability;
    // Gain as a function of (t1, tm): dark-only baseline plus photon terms.
    let (mut base, mut single, mut multi) = (0.0, 0.0, 0.0);
    for n in 0..=MAX_PHOTONS {
        let p = poisson(mu, n);
        match n {
            0 => base += p * y0,
            1 => {
                base += p * y0;
                single += p * eta_b * (1.0 - y0);
            }
            _ => {
                base += p * y0;
                multi += p * (1.0 - (1.0 - eta_b).powi(n as i32 - 1)) * (1.0 - y0);
            }
        }
    }
    if base + multi >= target {
        PnsStrategy { t1: 0.0, tm: ((target - base) / multi).clamp(0.0, 1.0), matched: true }
    } else if base + multi + single >= target {
        PnsStrategy { t1: ((target - base - multi) / single).clamp(0.0, 1.0), tm: 1.0, matched: true }
    } else {
        PnsStrategy { t1: 1.0, tm: 1.0, matched: false }
    }
}

/// Detection split at intensity `mu` under `attack`, given the strategy chosen for the
/// signal intensity.
pub fn attacked_split(link: &Link, attack: &LinkAttack, mu: f64, signal_mu: f64) -> DetectionSplit {
    let honest = honest_split(link, mu);
    let f = attack.fraction();
    let mut attacked = [0.0; 4];
    match attack {
        LinkAttack::PhotonNumberSplitting { .. } => {
            let s = pns_strategy(link, signal_mu);
            let eta_b = link.detector_efficiency;
            let y0 = link.dark_count_probability;
            for n in 0..=MAX_PHOTONS {
                let p = poisson(mu, n);
                let (photon, known) = match n {
                    0 => (0.0, false),
                    1 => (s.t1 * eta_b, false),
                    _ => (s.tm * (1.0 - (1.0 - eta_b).powi(n as i32 - 1)), true),
                };
                add_click(&mut attacked, p, photon, y0, link.misalignment, known);
            }
        }
        LinkAttack::BeamSplitting { .. } => {
            let p_e = 1.0 - (-mu * (1.0 - link.channel_transmittance())).exp();
            attacked = [honest[0] * (1.0 - p_e), honest[0] * p_e, honest[2] * (1.0 - p_e), honest[2] * p_e];
            // The honest split has nothing in the known columns.
        }
    }
    let mut out = [0.0; 4];
    for i in 0..4 {
        out[i] = (1.0 - f) * honest[i] + f * attacked[i];
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::link::Source;
    use approx::assert_relative_eq;

    fn link(loss_db: f64) -> Link {
        Link {
            source: Source::WeakCoherent { intensity: 0.5, probability: 1.0, decoys: vec![] },
            channel_loss_db: loss_db,
            detector_efficiency: 1.0,
            ..Link::default()
        }
    }

    #[test]
    fn pns_critical_transmittance() {
        // REFERENCES.md §10 [N]: with η the total transmittance and no dark counts, PNS is
        // undetectable iff P_{n≥2}(μ) ≥ 1 − e^{−ημ}; η_c = 0.046898 (μ = 0.1), 0.189070 (μ = 0.5).
        // With Bob's efficiency 1, a forwarded multi-photon pulse is always detected, so the
        // strategy blocks all single photons exactly at η_c.
        for (mu, eta_c) in [(0.1, 0.046898), (0.5, 0.189070)] {
            let loss_c = -10.0 * f64::log10(eta_c);
            let below = pns_strategy(&link(loss_c + 0.01).at_mu(mu), mu);
            assert!(below.matched && below.t1 == 0.0 && below.tm < 1.0, "{below:?}");
            let above = pns_strategy(&link(loss_c - 0.01).at_mu(mu), mu);
            assert!(above.matched && above.t1 > 0.0 && above.tm == 1.0, "{above:?}");
        }
        assert_relative_eq!(crate::keyrate::multi_photon_probability(0.1), 0.0046788, max_relative = 1e-4);
    }

    #[test]
    fn pns_matches_gain_and_adds_no_errors() {
        let l = Link { dark_count_probability: 1e-6, misalignment: 0.02, detector_efficiency: 0.1, ..link(10.0) };
        let honest = honest_split(&l, 0.5);
        let pns = attacked_split(&l, &LinkAttack::PhotonNumberSplitting { fraction: 1.0 }, 0.5, 0.5);
        let (gh, gp): (f64, f64) = (honest.iter().sum(), pns.iter().sum());
        assert_relative_eq!(gh, gp, max_relative = 1e-9);
        // Error rate unchanged up to the share of dark counts.
        assert!(((honest[2] + honest[3]) / gh - (pns[2] + pns[3]) / gp).abs() < 1e-3);
        assert!(pns[1] + pns[3] > 0.5 * gp, "Eve should know most detections at 10 dB with η_B = 0.1");
    }

    #[test]
    fn beam_splitting_information() {
        // REFERENCES.md §10 [N]: μ = 0.1, channel transmittance 0.1: p_E = 0.086069.
        let l = Link { channel_loss_db: 10.0, detector_efficiency: 1.0, ..Link::default() };
        let s = attacked_split(&l, &LinkAttack::BeamSplitting { fraction: 1.0 }, 0.1, 0.1);
        let g: f64 = s.iter().sum();
        assert_relative_eq!((s[1] + s[3]) / g, 0.086069, max_relative = 1e-5);
        assert_relative_eq!(g, honest_split(&l, 0.1).iter().sum::<f64>(), max_relative = 1e-12);
    }
}
