//! Count-level block sampler for optical links (weak coherent pulses or single photons):
//! pulses split by kind (intensity), then per kind into no click, unsifted click, and sifted clicks per basis by (error, known to
//! Eve); the Z test sample and the key are drawn from the signal intensity's sifted Z
//! detections (independent multinomials of sizes m and n_Z − m given n_Z, by
//! exchangeability), by photon-number class of the pulse (0, 1, ≥ 2 photons) and category
//! (error, Eve's guess right); what Eve knows about the key is then summed class by class.

use super::count::{binomial, multinomial};
use super::{BlockCounts, SignalModel, CELL_CATEGORY};
use crate::attack::link_attack::{attacked, honest, qubit_on_single_photons, DetectionModel, LinkAttack};
use crate::attack::Attack;
use crate::link::{Link, Photons};
use crate::protocol::Protocol;
use crate::rules::IntensityObs;
use rand_chacha::ChaCha8Rng;

/// The exact per-pulse statistics of a link under an attack (or none).
#[derive(Clone, Debug, PartialEq)]
pub struct LinkModel {
    /// Kinds of pulse (signal first) and their probabilities: see [`Source::settings`](crate::link::Source::settings).
    pub settings: Vec<(Photons, f64)>,
    /// Detection model per intensity.
    pub models: Vec<DetectionModel>,
    /// Basis probabilities (Z first).
    pub basis_prob: Vec<f64>,
    /// Empty, or why the attack cannot hide (it cannot reach the honest signal gain).
    pub note: String,
}

impl LinkModel {
    /// A link-level attack, or the honest link when `attack` is None.
    pub fn new(link: &Link, attack: Option<&LinkAttack>, basis_prob: &[f64]) -> LinkModel {
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
        if let Some(LinkAttack::PhotonNumberSplitting { fraction }) = attack {
            if *fraction > 0.0 && !crate::attack::link_attack::pns_strategy(link, signal).matched {
                note = "photon-number splitting cannot reach the honest signal gain on this link (Eve forwards every pulse)".into();
            }
        }
        LinkModel { settings, models, basis_prob: basis_prob.to_vec(), note }
    }

    /// A single-photon attack applied to the single-photon pulses (see
    /// [`qubit_on_single_photons`]), with Eve's H(X|E) per attacked photon `h_att`.
    pub fn qubit(link: &Link, attack: &Attack, protocol: Protocol, basis_prob: &[f64], h_att: f64) -> LinkModel {
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
        LinkModel { settings, models, basis_prob: basis_prob.to_vec(), note }
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

/// Draws one block of `signals` pulses.
pub fn sample(model: &LinkModel, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
    let ni = model.settings.len();
    let nb = model.basis_prob.len();
    let mut probs = [0.0; 3];
    for (p, (_, q)) in probs.iter_mut().zip(&model.settings) {
        *p = *q;
    }
    let mut pulses = [0u64; 3];
    multinomial(signals, &probs[..ni], rng, &mut pulses[..ni]);
    let mut out = BlockCounts { signals, ..BlockCounts::default() };
    let mut obs = IntensityObs { count: ni, ..IntensityObs::default() };
    let mut sift = [0.0; 3];
    for (s, p) in sift.iter_mut().zip(&model.basis_prob) {
        *s = p * p;
    }
    let sifted_total: f64 = sift.iter().sum();
    for k in 0..ni {
        obs.mu[k] = model.settings[k].0.mean();
        obs.multi_photon[k] = model.settings[k].0.multi_photon_probability();
        obs.probability[k] = model.settings[k].1;
        obs.pulses[k] = pulses[k];
        let dm = &model.models[k];
        let gain = dm.gain;
        // Categories: no click, unsifted click, then per basis a sifted click.
        let mut p = [0.0; 5];
        p[0] = 1.0 - gain;
        p[1] = gain * (1.0 - sifted_total);
        for b in 0..nb {
            p[2 + b] = gain * sift[b];
        }
        let mut c = [0u64; 5];
        multinomial(pulses[k], &p[..2 + nb], rng, &mut c[..2 + nb]);
        obs.detections[k] = pulses[k] - c[0];
        for b in 0..nb {
            let det = c[2 + b];
            if b == 0 {
                obs.z_detections[k] = det;
            }
            if k == 0 {
                out.sifted[b] = det;
            }
            if b == 1 {
                obs.x_detections[k] = det;
                obs.x_errors[k] = binomial(det, dm.error_rate(1), rng);
                if k == 0 {
                    out.errors[1] = obs.x_errors[k];
                }
            } else if b == 2 && k == 0 {
                out.errors[2] = binomial(det, dm.error_rate(2), rng);
            } else if b == 0 && k == 0 {
                let m = test_size(det).min(det);
                out.test_z = m;
                out.test_z_errors = binomial(m, dm.error_rate(0), rng);
                // Key bits by photon-number class and category 2·error + eve_right.
                let z_gain: f64 = dm.class_z.iter().flatten().sum();
                let mut cond = [0.0; 12];
                for c in 0..3 {
                    for cat in 0..4 {
                        cond[c * 4 + cat] = dm.class_z[c][cat] / z_gain;
                    }
                }
                let mut cells = [0u64; 12];
                multinomial(det - m, &cond, rng, &mut cells);
                let mut key = [0u64; 4];
                let mut classes = [0u64; 3];
                let mut entropy = 0.0;
                for c in 0..3 {
                    let n_c: u64 = cells[c * 4..c * 4 + 4].iter().sum();
                    classes[c] = n_c;
                    let p_c: f64 = dm.class_z[c].iter().sum();
                    if n_c > 0 && p_c > 0.0 {
                        entropy += n_c as f64 * dm.class_h[c] / p_c;
                    }
                    for cat in 0..4 {
                        key[cat] += cells[c * 4 + cat];
                    }
                }
                out.key = key;
                out.key_classes = Some(classes);
                out.key_entropy_bits = Some(entropy);
                out.errors[0] = out.test_z_errors + key[2] + key[3];
            }
        }
    }
    out.link = Some(obs);
    out
}
