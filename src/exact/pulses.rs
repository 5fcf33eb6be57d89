//! The exact per-pulse model of an optical link under a pulse attack (photon-number
//! splitting, beam splitting), a single-photon attack on the single-photon pulses, or no
//! attack: per kind of pulse (intensity), the probabilities of no click, an unsifted click,
//! and sifted clicks per basis split by (error, known to Eve) and by the pulse's
//! photon-number class (0, 1, ≥ 2 photons). The sampler
//! [`crate::audit::sample::pulses`] draws blocks from it.

use super::eval::Evaluation;
use super::signal::{SignalModel, CELL_CATEGORY};
use crate::attack::pulse::{attacked, honest, qubit_on_single_photons, DetectionModel, PulseAttack};
use crate::attack::Attack;
use crate::protocol::optical::{Link, Photons};
use crate::protocol::Protocol;
use crate::quantum::measures::binary_entropy;

/// Largest error probability, and largest advantage of Eve's guess over 1/2, of a qubit
/// attack taken as leaving every single photon alone (an idle attack: intercept-resend at
/// fraction 0, a cloner at QBER 0). Exact evaluations give zero up to rounding.
pub const IDLE_TOL: f64 = 1e-12;

/// Relative difference of a gain or an error rate from the honest link's beyond which a
/// point is not the honest link (rounding in the two computations stays far below it).
pub const HONEST_REL_TOL: f64 = 1e-9;

/// The exact per-pulse statistics of a link under an attack (or none).
#[derive(Clone, Debug, PartialEq)]
pub struct PulseModel {
    /// Kinds of pulse (signal first) and their probabilities: see [`Source::settings`](crate::protocol::optical::Source::settings).
    pub settings: Vec<(Photons, f64)>,
    /// Detection model per intensity.
    pub models: Vec<DetectionModel>,
    /// Basis probabilities (Z first).
    pub basis_prob: Vec<f64>,
    /// Empty, or why the attack cannot hide (it cannot reach the honest signal gain).
    pub note: String,
}

impl PulseModel {
    /// A link-level attack, or the honest link when `attack` is None.
    pub fn new(link: &Link, attack: Option<&PulseAttack>, basis_prob: &[f64]) -> PulseModel {
        let settings = link.source.settings();
        let signal = settings[0].0;
        let models = settings
            .iter()
            .map(|&(photons, _)| match attack {
                Some(a) => attacked(link, a, photons, signal),
                None => honest(link, photons),
            })
            .collect();
        let mut note = String::new();
        if let Some(PulseAttack::PhotonNumberSplitting { fraction }) = attack {
            if *fraction > 0.0 && !crate::attack::pulse::pns_strategy(link, signal).matched {
                note = "photon-number splitting cannot reach the honest signal gain on this link (Eve forwards every pulse)".into();
            }
        }
        PulseModel { settings, models, basis_prob: basis_prob.to_vec(), note }
    }

    /// A single-photon attack applied to the single-photon pulses (see
    /// [`qubit_on_single_photons`]), with Eve's H(X|E) per attacked photon `h_att`.
    pub fn qubit(link: &Link, attack: &Attack, protocol: Protocol, basis_prob: &[f64], h_att: f64) -> PulseModel {
        let sm = SignalModel::new(attack, protocol, basis_prob);
        let nb = sm.bases.len();
        let mut joint = [[0.0; 4]; 3];
        let mut guess = [0.5; 3];
        for b in 0..3 {
            let src = b.min(nb - 1);
            for (c, p) in sm.cells[src][src].iter().enumerate() {
                joint[b][CELL_CATEGORY[c] as usize] += p;
            }
            guess[b] = sm.eve_guess_rate(src);
        }
        let settings = link.source.settings();
        let signal = settings[0].0;
        let mut matched = true;
        let models: Vec<DetectionModel> = settings
            .iter()
            .map(|&(photons, _)| {
                let (m, _, ok) = qubit_on_single_photons(link, joint, h_att, guess, photons, signal);
                matched &= ok;
                m
            })
            .collect();
        let mut notes = Vec::new();
        if !matched {
            notes.push("the attack cannot reach the honest signal gain over a lossless line (Eve forwards every pulse)".to_string());
        }
        let idle = (0..3).all(|b| joint[b][2] + joint[b][3] <= IDLE_TOL && (guess[b] - 0.5).abs() <= IDLE_TOL);
        if idle {
            let at = if attack.params.0.is_empty() {
                "at this point".to_string()
            } else {
                let p: Vec<String> = attack
                    .params
                    .0
                    .iter()
                    .map(|(k, v)| match v {
                        crate::attack::Value::Num(x) => format!("{k}={}", crate::exact::sweep::fmt_num(*x)),
                        crate::attack::Value::Text(t) => format!("{k}={t}"),
                    })
                    .collect();
                format!("at {}", p.join(", "))
            };
            notes.extend(idle_note(link, &settings, &models, &at));
        }
        PulseModel { settings, models, basis_prob: basis_prob.to_vec(), note: notes.join("; ") }
    }

    /// Gain of intensity `i`.
    pub fn gain(&self, i: usize) -> f64 {
        self.models[i].gain
    }
    /// Error rate of intensity `i` in basis `b`.
    pub fn error_rate_in(&self, i: usize, b: usize) -> f64 {
        self.models[i].error_rate(b)
    }
    /// Error rate of intensity `i` (X basis).
    pub fn error_rate(&self, i: usize) -> f64 {
        self.models[i].error_rate(1)
    }
    /// H(X|E) per key bit (signal intensity, Z basis).
    pub fn h_x_given_e(&self) -> f64 {
        self.models[0].h_x_given_e()
    }
}

/// Why a qubit attack that leaves every single photon alone (its point named by `at`) is
/// still not the honest link, or `None` when it is (a single-photon source, or a lossless
/// line): Eve has replaced the lossy line by a lossless one and forwards whole pulses with
/// the probability t that matches Bob's signal gain, where the honest line passes each
/// photon on its own, so multi-photon pulses, and with them the other intensities, reach
/// Bob otherwise.
fn idle_note(link: &Link, settings: &[(Photons, f64)], models: &[DetectionModel], at: &str) -> Option<String> {
    let differs = |a: f64, b: f64| (a - b).abs() > HONEST_REL_TOL * a.abs().max(b.abs());
    let fmt = crate::exact::sweep::fmt_num;
    // The intensity whose gain (or, if no gain differs, X error rate) departs most from the
    // honest link's, relatively.
    let mut worst: Option<(bool, f64, String)> = None;
    for (&(photons, _), m) in settings.iter().zip(models) {
        let h = honest(link, photons);
        let rel = |a: f64, b: f64| (a - b).abs() / a.abs().max(b.abs()).max(f64::MIN_POSITIVE);
        let candidate = if differs(m.gain, h.gain) {
            let words =
                format!("at intensity {} his gain is {:.4e} against {:.4e} on the honest link", fmt(photons.mean()), m.gain, h.gain);
            (true, rel(m.gain, h.gain), words)
        } else if (0..2).any(|b| differs(m.error_rate(b), h.error_rate(b))) {
            let (e, eh) = (m.error_rate(1), h.error_rate(1));
            let words = format!("at intensity {} his X error rate is {:.6} against {:.6} on the honest link", fmt(photons.mean()), e, eh);
            (false, rel(e, eh), words)
        } else {
            continue;
        };
        if !worst.as_ref().is_some_and(|w| (candidate.0, candidate.1) <= (w.0, w.1)) {
            worst = Some(candidate);
        }
    }
    let (_, _, words) = worst?;
    let signal = settings[0].0;
    let t = qubit_on_single_photons(link, [[0.0; 4]; 3], 1.0, [0.5; 3], signal, signal).1;
    Some(format!(
        "{at} the attack leaves every single photon alone, yet the link is not the honest one: Eve still replaces the lossy line by a \
         lossless one and forwards each pulse whole with probability {t:.4}, where the honest line passes each photon on its own \
         with probability {:.4}; Bob's signal gain matches by construction, but multi-photon pulses reach him otherwise ({words}). \
         For the honest link, run `photon-number-splitting` at fraction 0",
        link.channel_transmittance()
    ))
}

/// The exact quantities of a weak-coherent point, in the evaluator's shape: error rates and
/// Eve's guessing probability from the signal intensity's sifted detections,
/// `h_x_given_e` = mean H(X|E) per key bit, `holevo_z` = 1 − that; quantities that have no
/// meaning here (guessing game, qubit bounds, accessible information) are NaN or absent.
pub fn pulse_evaluation(model: &PulseModel, protocol: Protocol) -> Evaluation {
    let d = &model.models[0];
    let (ez, ex) = (d.error_rate(0), d.error_rate(1));
    let h = d.h_x_given_e();
    let hz = binary_entropy(ez.min(0.5));
    Evaluation {
        qber_z: ez,
        qber_x: ex,
        qber_y: if protocol == Protocol::SixState { d.error_rate(2) } else { f64::NAN },
        p_guess_z: d.eve_right(0),
        p_guess_x: d.eve_right(1),
        p_guess_y: f64::NAN,
        holevo_z: 1.0 - h,
        holevo_x: f64::NAN,
        holevo_y: f64::NAN,
        h_x_given_e: h,
        accessible_z: None,
        accessible_x: None,
        accessible_converged: None,
        accessible_gap: None,
        i_ab: 1.0 - hz,
        game_win: f64::NAN,
        bound_rate: f64::NAN,
        attack_rate: h - hz,
        individual_rate: None,
        margin: f64::NAN,
        h_min_x_given_e: -d.eve_right(0).log2(),
        pauli_weights: [f64::NAN; 4],
        eve_dim: 0,
        protocol,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::attack::Value;
    use crate::protocol::optical::Source;
    use std::collections::BTreeMap;

    fn weak_coherent(loss_db: f64) -> Link {
        Link {
            source: Source::WeakCoherent { intensity: 0.5, probability: 0.8, decoys: vec![(0.1, 0.15), (0.0, 0.05)] },
            channel_loss_db: loss_db,
            detector_efficiency: 0.2,
            dark_count_probability: 1e-6,
            misalignment: 0.01,
            ..Link::default()
        }
    }

    fn intercept_resend(fraction: f64) -> Attack {
        Attack::builtin("intercept-resend", &BTreeMap::from([("fraction".to_string(), Value::Num(fraction))])).unwrap()
    }

    const BASES: [f64; 2] = [0.5, 0.5];

    /// An idle qubit attack on a lossy weak-coherent link: Eve learns nothing from the single
    /// photons, yet the gains are not the honest link's, and the note says so with the
    /// numbers; the link it names as honest (photon-number splitting at fraction 0) is.
    #[test]
    fn an_idle_qubit_attack_on_a_lossy_weak_coherent_link_is_noted_as_not_the_honest_link() {
        let link = weak_coherent(5.0);
        let m = PulseModel::qubit(&link, &intercept_resend(0.0), Protocol::Bb84, &BASES, 1.0);
        let honest_link = PulseModel::new(&link, None, &BASES);
        // The premise of the note, computed: the signal gain matches, a decoy's does not.
        assert!((m.gain(0) - honest_link.gain(0)).abs() <= 1e-12 * honest_link.gain(0));
        let decoy_rel = (m.gain(1) - honest_link.gain(1)).abs() / honest_link.gain(1);
        assert!(decoy_rel > 1e-3, "{decoy_rel}");
        assert!(m.note.starts_with("at fraction=0, basis=random the attack leaves every single photon alone"), "{}", m.note);
        assert!(m.note.contains("not the honest one") && m.note.contains("at intensity 0.1 his gain is"), "{}", m.note);
        let pns0 = PulseModel::new(&link, Some(&PulseAttack::PhotonNumberSplitting { fraction: 0.0 }), &BASES);
        assert_eq!(pns0.models, honest_link.models, "the honest link the note names");
        // Not idle: no such note (the attack is plainly not the honest link).
        let half = PulseModel::qubit(&link, &intercept_resend(0.5), Protocol::Bb84, &BASES, 0.75);
        assert!(!half.note.contains("leaves every single photon alone"), "{}", half.note);
    }

    /// Where the idle attack is the honest link, nothing is noted: a single-photon source
    /// (a pulse is one photon, so forwarding the pulse is passing the photon), or a lossless
    /// line.
    #[test]
    fn an_idle_qubit_attack_that_is_the_honest_link_gets_no_note() {
        let single = Link { source: Source::SinglePhoton, ..weak_coherent(5.0) };
        let lossless = weak_coherent(0.0);
        for link in [single, lossless] {
            let m = PulseModel::qubit(&link, &intercept_resend(0.0), Protocol::Bb84, &BASES, 1.0);
            let h = PulseModel::new(&link, None, &BASES);
            for i in 0..m.settings.len() {
                assert!((m.gain(i) - h.gain(i)).abs() <= 1e-12 * h.gain(i), "{link:?}");
            }
            // (On the lossless line the signal gain needs t = 1 up to rounding, which
            // `qubit_on_single_photons` may report as unreachable; that note is not this one.)
            assert!(!m.note.contains("leaves every single photon alone"), "{link:?}: {}", m.note);
        }
    }
}
