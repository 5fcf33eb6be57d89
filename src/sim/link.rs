//! Count-level block sampler for weak-coherent links: pulses split by intensity, then per
//! intensity into no click, unsifted click, and sifted clicks per basis by (error, known to
//! Eve); the Z test sample and the key are drawn from the signal intensity's sifted Z
//! detections (independent multinomials of sizes m and n_Z − m given n_Z, by
//! exchangeability). Eve's guess of a key bit she does not know is a fair coin.

use super::count::multinomial;
use super::BlockCounts;
use crate::attack::link_attack::{attacked_split, honest_split, DetectionSplit, LinkAttack};
use crate::link::Link;
use crate::rules::IntensityObs;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Binomial, Distribution};

/// The exact per-pulse statistics of a link under an attack (or none).
#[derive(Clone, Debug, PartialEq)]
pub struct LinkModel {
    /// Intensities (signal first) and their probabilities.
    pub intensities: Vec<(f64, f64)>,
    /// Detection split per intensity.
    pub splits: Vec<DetectionSplit>,
    /// Basis probabilities (Z first).
    pub basis_prob: Vec<f64>,
}

impl LinkModel {
    /// Builds the model; `attack = None` is the honest link.
    pub fn new(link: &Link, attack: Option<&LinkAttack>, basis_prob: &[f64]) -> LinkModel {
        let intensities = link.source.intensities();
        let signal = intensities[0].0;
        let splits = intensities
            .iter()
            .map(|&(mu, _)| match attack {
                Some(a) => attacked_split(link, a, mu, signal),
                None => honest_split(link, mu),
            })
            .collect();
        LinkModel { intensities, splits, basis_prob: basis_prob.to_vec() }
    }
    /// Gain of intensity `i`.
    pub fn gain(&self, i: usize) -> f64 {
        self.splits[i].iter().sum()
    }
    /// Error rate of intensity `i`.
    pub fn error_rate(&self, i: usize) -> f64 {
        (self.splits[i][2] + self.splits[i][3]) / self.gain(i)
    }
    /// Fraction of the signal's detections whose bit Eve knows.
    pub fn known_fraction(&self) -> f64 {
        (self.splits[0][1] + self.splits[0][3]) / self.gain(0)
    }
}

fn binomial(n: u64, p: f64, rng: &mut impl Rng) -> u64 {
    if n == 0 || p <= 0.0 {
        return 0;
    }
    if p >= 1.0 {
        return n;
    }
    Binomial::new(n, p).expect("probability in [0, 1]").sample(rng)
}

/// Draws one block of `signals` pulses.
pub fn sample(model: &LinkModel, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
    let ni = model.intensities.len();
    let nb = model.basis_prob.len();
    let mut probs = [0.0; 3];
    for (p, (_, q)) in probs.iter_mut().zip(&model.intensities) {
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
        obs.mu[k] = model.intensities[k].0;
        obs.probability[k] = model.intensities[k].1;
        obs.pulses[k] = pulses[k];
        let split = model.splits[k];
        let gain: f64 = split.iter().sum();
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
        let err_rate = (split[2] + split[3]) / gain;
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
                obs.x_errors[k] = binomial(det, err_rate, rng);
                if k == 0 {
                    out.errors[1] = obs.x_errors[k];
                }
            } else if b == 2 && k == 0 {
                out.errors[2] = binomial(det, err_rate, rng);
            } else if b == 0 && k == 0 {
                let m = test_size(det).min(det);
                out.test_z = m;
                out.test_z_errors = binomial(m, err_rate, rng);
                // Key bits by (error, known).
                let cond = [split[0] / gain, split[1] / gain, split[2] / gain, split[3] / gain];
                let mut key = [0u64; 4];
                multinomial(det - m, &cond, rng, &mut key);
                // key = [ok & unknown, ok & known, err & unknown, err & known]; Eve's guess
                // is right on known bits and on half the unknown ones at random.
                let ok_right = key[1] + binomial(key[0], 0.5, rng);
                let err_right = key[3] + binomial(key[2], 0.5, rng);
                out.key = [key[0] + key[1] - ok_right, ok_right, key[2] + key[3] - err_right, err_right];
                out.errors[0] = out.test_z_errors + key[2] + key[3];
            }
        }
    }
    out.link = Some(obs);
    out
}
