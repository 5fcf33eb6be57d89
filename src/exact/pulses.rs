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
        let models = settings
            .iter()
            .map(|&(photons, _)| {
                let (m, _, ok) = qubit_on_single_photons(link, joint, h_att, guess, photons, signal);
                matched &= ok;
                m
            })
            .collect();
        let note = if matched {
            String::new()
        } else {
            "the attack cannot reach the honest signal gain over a lossless line (Eve forwards every pulse)".into()
        };
        PulseModel { settings, models, basis_prob: basis_prob.to_vec(), note }
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
