//! Link-level attacks on optical links (weak coherent pulses or single photons, through
//! their photon-number distribution [`Photons`]). Each declares exactly what Eve knows
//! about each detected signal: per kind of pulse, the probability of a detection that is
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
//!   fibre's loss, storing what she taps. Bob's statistics do not change; with her memory
//!   she learns the bit of every pulse of which she holds a photon (for Poisson pulses
//!   with probability 1 − e^{−μ(1−t)}, t the fibre transmittance, independent of Bob's
//!   click; a single photon she holds never reaches Bob).

use super::{ParamKind, ParamSpec};
use crate::error::{check_range, Error, Result};
use crate::protocol::optical::{Link, Photons, E0};
use serde::Serialize;

/// Link-level attack families, by name.
pub const PULSE_FAMILIES: &[(&str, &str)] = &[
    ("photon-number-splitting", "photon-number splitting with gain matching"),
    ("beam-splitting", "beam splitter taking the fibre loss, with a quantum memory"),
];

/// Their one parameter.
pub const PULSE_PARAMS: &[ParamSpec] =
    &[ParamSpec { name: "fraction", kind: ParamKind::Number { lo: 0.0, hi: 1.0 }, help: "fraction of the pulses Eve attacks (default 1)" }];

/// A link-level attack.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub enum PulseAttack {
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

impl PulseAttack {
    /// Builds from a family name and its `fraction`.
    pub fn new(family: &str, fraction: f64) -> Result<PulseAttack> {
        let fraction = check_range("fraction", fraction, 0.0, 1.0)?;
        match family {
            "photon-number-splitting" => Ok(PulseAttack::PhotonNumberSplitting { fraction }),
            "beam-splitting" => Ok(PulseAttack::BeamSplitting { fraction }),
            other => Err(Error::input_key("family", format!("`{other}` is not a link attack"))),
        }
    }
    /// Family name.
    pub fn name(&self) -> &'static str {
        match self {
            PulseAttack::PhotonNumberSplitting { .. } => "photon-number-splitting",
            PulseAttack::BeamSplitting { .. } => "beam-splitting",
        }
    }
    /// The attacked fraction.
    pub fn fraction(&self) -> f64 {
        match *self {
            PulseAttack::PhotonNumberSplitting { fraction } | PulseAttack::BeamSplitting { fraction } => fraction,
        }
    }
}

const MAX_PHOTONS: u32 = 40;

/// What one intensity's pulses produce at Bob, per pulse: for each sifted basis (Z, X, Y)
/// the probability of a detection by category `2·error + eve_right` (Bob's bit differs
/// from Alice's; Eve's guess of Alice's bit after the basis announcement is right), and the
/// detection-weighted conditional entropy Σ P(detection)·H(X|E) of Alice's bit.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct DetectionModel {
    /// Gain: probability that a pulse gives a detection.
    pub gain: f64,
    /// `cats[basis][2·error + eve_right]`, per pulse; each row sums to `gain`.
    pub cats: [[f64; 4]; 3],
    /// Σ over detections of P(detection)·H(X|E), per pulse.
    pub h_weighted: f64,
    /// Z-basis detections split by photon-number class (0, 1, ≥ 2 photons sent):
    /// `class_z[class][2·error + eve_right]`, per pulse; sums to `cats[0]`.
    pub class_z: [[f64; 4]; 3],
    /// Per class, Σ P(detection)·H(X|E), per pulse.
    pub class_h: [f64; 3],
}

impl DetectionModel {
    fn zero() -> Self {
        DetectionModel { gain: 0.0, cats: [[0.0; 4]; 3], h_weighted: 0.0, class_z: [[0.0; 4]; 3], class_h: [0.0; 3] }
    }
    /// Error rate of sifted detections in basis `b`.
    pub fn error_rate(&self, b: usize) -> f64 {
        (self.cats[b][2] + self.cats[b][3]) / self.gain
    }
    /// Probability that Eve's guess of Alice's bit is right, for sifted detections in basis `b`.
    pub fn eve_right(&self, b: usize) -> f64 {
        (self.cats[b][1] + self.cats[b][3]) / self.gain
    }
    /// Mean H(X|E) per detection.
    pub fn h_x_given_e(&self) -> f64 {
        self.h_weighted / self.gain
    }
    /// Adds detections of pulses in photon-number class `class` with probability `p` per
    /// pulse, error rate `err[b]` per basis, Eve right with probability `right`
    /// independently of the error, and H(X|E) = `h`.
    fn add(&mut self, class: usize, p: f64, err: [f64; 3], right: f64, h: f64) {
        let mut joint = [[0.0; 4]; 3];
        for b in 0..3 {
            joint[b] = [(1.0 - err[b]) * (1.0 - right), (1.0 - err[b]) * right, err[b] * (1.0 - right), err[b] * right];
        }
        self.add_joint(class, p, joint, h);
    }
    /// Adds detections whose joint (error, eve_right) distribution per basis is given.
    fn add_joint(&mut self, class: usize, p: f64, joint: [[f64; 4]; 3], h: f64) {
        if p <= 0.0 {
            return;
        }
        self.gain += p;
        self.h_weighted += p * h;
        self.class_h[class] += p * h;
        for b in 0..3 {
            for c in 0..4 {
                self.cats[b][c] += p * joint[b][c];
            }
        }
        for c in 0..4 {
            self.class_z[class][c] += p * joint[0][c];
        }
    }
    /// `(1 − f)·self + f·other`.
    fn mix(&self, other: &DetectionModel, f: f64) -> DetectionModel {
        let mut out = DetectionModel::zero();
        out.gain = (1.0 - f) * self.gain + f * other.gain;
        out.h_weighted = (1.0 - f) * self.h_weighted + f * other.h_weighted;
        for b in 0..3 {
            for c in 0..4 {
                out.cats[b][c] = (1.0 - f) * self.cats[b][c] + f * other.cats[b][c];
                out.class_z[b][c] = (1.0 - f) * self.class_z[b][c] + f * other.class_z[b][c];
            }
            out.class_h[b] = (1.0 - f) * self.class_h[b] + f * other.class_h[b];
        }
        out
    }
}

/// Detection by photons (probability `photon`, error e_d) or, failing that, by a dark count
/// (error ½); Eve right with probability `right`, H(X|E) = `h`.
fn add_clicks(m: &mut DetectionModel, n: u32, weight: f64, photon: f64, link: &Link, right: f64, h: f64) {
    let e_d = link.misalignment;
    let class = (n as usize).min(2);
    m.add(class, weight * photon, [e_d; 3], right, h);
    m.add(class, weight * (1.0 - photon) * link.dark_count_probability, [E0; 3], right, h);
}

/// The honest link for pulses with photon numbers `photons`, photon number by photon
/// number (Eve knows nothing).
pub fn honest(link: &Link, photons: Photons) -> DetectionModel {
    let eta = link.transmittance();
    let mut m = DetectionModel::zero();
    for n in 0..=MAX_PHOTONS {
        add_clicks(&mut m, n, photons.probability(n), 1.0 - (1.0 - eta).powi(n as i32), link, 0.5, 1.0);
    }
    m
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

/// Eve's choice of (t₁, t_m) for the signal pulses `signal`: Bob's detection probability
/// for a forwarded pulse of n photons (n − 1 after splitting) is his efficiency applied to
/// what reaches him over a lossless line.
pub fn pns_strategy(link: &Link, signal: Photons) -> PnsStrategy {
    let eta_b = link.detector_efficiency;
    let target = honest(link, signal).gain;
    let y0 = link.dark_count_probability;
    let (mut base, mut single, mut multi) = (0.0, 0.0, 0.0);
    for n in 0..=MAX_PHOTONS {
        let p = signal.probability(n);
        base += p * y0;
        match n {
            0 => {}
            1 => single += p * eta_b * (1.0 - y0),
            _ => multi += p * (1.0 - (1.0 - eta_b).powi(n as i32 - 1)) * (1.0 - y0),
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

/// Pulses `photons` under a link-level attack whose strategy was chosen for the signal
/// pulses `signal`. Under photon-number splitting Eve knows Alice's bit for every
/// detection of a pulse with two or more photons (she holds one of them), whether Bob's
/// click came from a photon or a dark count. Under beam splitting an n-photon pulse leaves
/// her none of its photons with probability tⁿ (t the fibre transmittance); with her
/// memory she knows the bit whenever she holds at least one, and Bob's photons are what
/// passed: P(Bob's photons click, Eve holds one) = 1 − (1 − tη_B)ⁿ − tⁿ(1 − (1 − η_B)ⁿ).
/// For Poisson pulses this gives the familiar 1 − e^{−μ(1−t)} independently of Bob's click;
/// a single photon that Bob detects is never known to her.
pub fn attacked(link: &Link, attack: &PulseAttack, photons: Photons, signal: Photons) -> DetectionModel {
    let h = honest(link, photons);
    let a = match attack {
        PulseAttack::PhotonNumberSplitting { .. } => {
            let s = pns_strategy(link, signal);
            let eta_b = link.detector_efficiency;
            let mut m = DetectionModel::zero();
            for n in 0..=MAX_PHOTONS {
                let p = photons.probability(n);
                match n {
                    0 => add_clicks(&mut m, n, p, 0.0, link, 0.5, 1.0),
                    1 => add_clicks(&mut m, n, p, s.t1 * eta_b, link, 0.5, 1.0),
                    _ => add_clicks(&mut m, n, p, s.tm * (1.0 - (1.0 - eta_b).powi(n as i32 - 1)), link, 1.0, 0.0),
                }
            }
            m
        }
        PulseAttack::BeamSplitting { .. } => {
            let t = link.channel_transmittance();
            let eta_b = link.detector_efficiency;
            let mut m = DetectionModel::zero();
            for n in 0..=MAX_PHOTONS {
                let p = photons.probability(n);
                if p == 0.0 {
                    continue;
                }
                let k = n as i32;
                let none_to_eve = t.powi(k);
                let bob_click_all = 1.0 - (1.0 - eta_b).powi(k);
                let click_and_eve = (1.0 - (1.0 - t * eta_b).powi(k)) - none_to_eve * bob_click_all;
                let eve = 1.0 - none_to_eve;
                // Eve holds nothing: Bob has all n photons.
                add_clicks(&mut m, n, p * none_to_eve, bob_click_all, link, 0.5, 1.0);
                // Eve holds at least one: Bob's photons click with the conditional probability.
                if eve > 0.0 {
                    add_clicks(&mut m, n, p * eve, (click_and_eve / eve).clamp(0.0, 1.0), link, 1.0, 0.0);
                }
            }
            m
        }
    };
    h.mix(&a, attack.fraction())
}

/// A single-photon attack applied to the single-photon pulses of a link (every pulse, for
/// a single-photon source).
///
/// Eve replaces the lossy line by a lossless one, applies the qubit attack (given by its
/// joint per-basis distribution `joint[b][2·error + eve_right]` and its H(X|E)) to every
/// single-photon pulse, passes vacuum and multi-photon pulses untouched, and forwards every
/// pulse with the probability t that makes Bob's signal gain equal the honest link's. Bob's
/// misalignment then flips his bit with probability e_d; a dark-count click gives a random
/// bit. Returns the model and t (t > 1 would be needed when the attack cannot hide: t is
/// then capped at 1 and `matched` is false).
pub fn qubit_on_single_photons(
    link: &Link,
    joint: [[f64; 4]; 3],
    h_att: f64,
    p_guess: [f64; 3],
    photons: Photons,
    signal: Photons,
) -> (DetectionModel, f64, bool) {
    let eta_b = link.detector_efficiency;
    let y0 = link.dark_count_probability;
    // Signal gain as a function of t: base + t·slope.
    let (mut base, mut slope) = (0.0, 0.0);
    for n in 0..=MAX_PHOTONS {
        let p = signal.probability(n);
        let d = 1.0 - (1.0 - eta_b).powi(n as i32);
        base += p * y0;
        slope += p * d * (1.0 - y0);
    }
    let target = honest(link, signal).gain;
    let t_needed = if slope > 0.0 { (target - base) / slope } else { 1.0 };
    let t = t_needed.clamp(0.0, 1.0);
    let e_d = link.misalignment;
    let mut m = DetectionModel::zero();
    for n in 0..=MAX_PHOTONS {
        let p = photons.probability(n);
        let photon = t * (1.0 - (1.0 - eta_b).powi(n as i32));
        if n == 1 {
            // Misalignment flips Bob's bit: (e, g) → (1 − e, g) with probability e_d.
            let mut mis = [[0.0; 4]; 3];
            for b in 0..3 {
                for g in 0..2 {
                    mis[b][g] = (1.0 - e_d) * joint[b][g] + e_d * joint[b][2 + g];
                    mis[b][2 + g] = (1.0 - e_d) * joint[b][2 + g] + e_d * joint[b][g];
                }
            }
            m.add_joint(1, p * photon, mis, h_att);
            // A dark count on an attacked single photon: random bit, Eve still holds her probe.
            let dark = p * (1.0 - photon) * y0;
            if dark > 0.0 {
                let mut dj = [[0.0; 4]; 3];
                for b in 0..3 {
                    dj[b] = [0.5 * (1.0 - p_guess[b]), 0.5 * p_guess[b], 0.5 * (1.0 - p_guess[b]), 0.5 * p_guess[b]];
                }
                m.add_joint(1, dark, dj, h_att);
            }
        } else {
            add_clicks(&mut m, n, p, photon, link, 0.5, 1.0);
        }
    }
    // On a lossless line t_needed is 1 up to rounding in the sums above (a few ulps):
    // within 1e-12 it is reachable.
    (m, t, t_needed <= 1.0 + REACH_TOLERANCE)
}

/// Rounding slack of the forwarding probability a qubit attack needs to match the honest
/// gain: the sums over photon numbers that give it are exact to a few ulps.
const REACH_TOLERANCE: f64 = 1e-12;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::protocol::optical::Source;
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
    fn an_idle_qubit_attack_reaches_the_honest_gain_of_a_lossless_line() {
        // Eve forwards every pulse (t = 1, up to rounding): the gain is reachable, for any
        // mean photon number and Bob's efficiency, with or without dark counts.
        let grid = (1..=20).flat_map(|i| (1..=10).flat_map(move |j| [0.0, 1e-6, 3e-5].map(|y0| (0.05 * i as f64, 0.1 * j as f64, y0))));
        for (mu, eta_b, y0) in grid {
            let l = Link { detector_efficiency: eta_b, dark_count_probability: y0, ..link(0.0) }.at_mu(mu);
            let signal = Photons::Poisson { mean: mu };
            let idle = [[0.5, 0.0, 0.5, 0.0]; 3];
            let (_, t, reachable) = qubit_on_single_photons(&l, idle, 1.0, [0.5; 3], signal, signal);
            assert!(reachable, "mu {mu}, eta_b {eta_b}, y0 {y0}: t = {t}");
            assert!((t - 1.0).abs() < 1e-12, "{t}");
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
            let below = pns_strategy(&link(loss_c + 0.01).at_mu(mu), Photons::Poisson { mean: mu });
            assert!(below.matched && below.t1 == 0.0 && below.tm < 1.0, "{below:?}");
            let above = pns_strategy(&link(loss_c - 0.01).at_mu(mu), Photons::Poisson { mean: mu });
            assert!(above.matched && above.t1 > 0.0 && above.tm == 1.0, "{above:?}");
        }
        assert_relative_eq!(Photons::Poisson { mean: 0.1 }.multi_photon_probability(), 0.0046788, max_relative = 1e-4);
    }

    #[test]
    fn pns_matches_gain_and_adds_no_errors() {
        let l = Link { dark_count_probability: 1e-6, misalignment: 0.02, detector_efficiency: 0.1, ..link(10.0) };
        let half = Photons::Poisson { mean: 0.5 };
        let h = honest(&l, half);
        let pns = attacked(&l, &PulseAttack::PhotonNumberSplitting { fraction: 1.0 }, half, half);
        assert_relative_eq!(h.gain, pns.gain, max_relative = 1e-9);
        // Error rate unchanged up to the share of dark counts.
        assert!((h.error_rate(0) - pns.error_rate(0)).abs() < 1e-3);
        assert!(pns.h_x_given_e() < 0.5, "Eve should know most detections at 10 dB with η_B = 0.1");
        assert!((h.h_x_given_e() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn single_photons_give_the_single_photon_yield_and_error() {
        // The honest link on single photons: gain Y₁ = Y₀ + η − Y₀η of the standard model
        // (module `link`); error (e_d η + ½Y₀(1 − η))/Y₁, a dark count counting only when
        // the photon is not detected (the first-order e₁ = (½Y₀ + e_d η)/Y₁ keeps the ½Y₀η
        // cross term).
        let l =
            Link { source: Source::SinglePhoton, dark_count_probability: 1e-5, misalignment: 0.02, detector_efficiency: 0.2, ..link(7.0) };
        let h = honest(&l, Photons::Single);
        let s = l.stats(0.5);
        let (eta, y0, e_d) = (l.transmittance(), l.dark_count_probability, l.misalignment);
        assert_relative_eq!(h.gain, s.y1, max_relative = 1e-12);
        assert_relative_eq!(h.error_rate(0), (e_d * eta + E0 * y0 * (1.0 - eta)) / s.y1, max_relative = 1e-12);
        assert!((h.error_rate(0) - s.e1).abs() <= E0 * y0 * eta / s.y1 * 1.000001);
        assert_eq!(h.class_z[0], [0.0; 4]);
        assert_eq!(h.class_z[2], [0.0; 4]);
    }

    #[test]
    fn splitting_attacks_learn_nothing_from_detected_single_photons() {
        // Photon-number splitting has no second photon to keep, so Eve only blocks; beam
        // splitting takes photons that then never reach Bob, so she knows a detected bit
        // only when Bob's click is a dark count: a share (1 − t)Y₀ / Y₁ of the detections.
        let l =
            Link { source: Source::SinglePhoton, dark_count_probability: 1e-4, misalignment: 0.02, detector_efficiency: 0.2, ..link(7.0) };
        let h = honest(&l, Photons::Single);
        let pns = attacked(&l, &PulseAttack::PhotonNumberSplitting { fraction: 1.0 }, Photons::Single, Photons::Single);
        assert_relative_eq!(pns.gain, h.gain, max_relative = 1e-12);
        assert_relative_eq!(pns.error_rate(0), h.error_rate(0), max_relative = 1e-9);
        assert_relative_eq!(pns.h_x_given_e(), 1.0, max_relative = 1e-12);
        let bs = attacked(&l, &PulseAttack::BeamSplitting { fraction: 1.0 }, Photons::Single, Photons::Single);
        assert_relative_eq!(bs.gain, h.gain, max_relative = 1e-12);
        let t = l.channel_transmittance();
        let known = (1.0 - t) * l.dark_count_probability / h.gain;
        assert_relative_eq!(1.0 - bs.h_x_given_e(), known, max_relative = 1e-9);
        // Those dark-count clicks carry a random bit: error rate ½ among them.
        assert_relative_eq!(bs.error_rate(0), h.error_rate(0), max_relative = 1e-9);
    }

    #[test]
    fn beam_splitting_per_photon_number_sums_to_the_poisson_closed_form() {
        // For Poisson pulses Eve's share is independent of Bob's click: 1 − e^{−μ(1−t)} of
        // the detections, for any detector efficiency and dark-count rate.
        for (mu, loss, eta_b, y0) in [(0.5, 3.0, 0.1, 1e-6), (0.1, 10.0, 1.0, 0.0), (0.8, 20.0, 0.3, 1e-4)] {
            let l = Link { detector_efficiency: eta_b, dark_count_probability: y0, ..link(loss) };
            let p = Photons::Poisson { mean: mu };
            let bs = attacked(&l, &PulseAttack::BeamSplitting { fraction: 1.0 }, p, p);
            let p_e = 1.0 - (-mu * (1.0 - l.channel_transmittance())).exp();
            assert_relative_eq!(1.0 - bs.h_x_given_e(), p_e, max_relative = 1e-9);
            assert_relative_eq!(bs.gain, honest(&l, p).gain, max_relative = 1e-12);
        }
    }

    #[test]
    fn beam_splitting_information() {
        // REFERENCES.md §10 [N]: μ = 0.1, channel transmittance 0.1: p_E = 0.086069.
        let l = Link { channel_loss_db: 10.0, detector_efficiency: 1.0, ..Link::default() };
        let weak = Photons::Poisson { mean: 0.1 };
        let s = attacked(&l, &PulseAttack::BeamSplitting { fraction: 1.0 }, weak, weak);
        assert_relative_eq!(1.0 - s.h_x_given_e(), 0.086069, max_relative = 1e-5);
        assert_relative_eq!(s.gain, honest(&l, weak).gain, max_relative = 1e-12);
    }
}
