//! Count-level block sampler for optical links (weak coherent pulses or single photons):
//! pulses split by kind (intensity), then per kind into no click, unsifted click, and sifted
//! clicks per basis by (error, known to Eve); the Z test sample and the key are drawn from
//! the signal intensity's sifted Z detections (independent multinomials of sizes m and
//! n_Z − m given n_Z, by exchangeability), by photon-number class of the pulse (0, 1, ≥ 2
//! photons) and category (error, Eve's guess right); what Eve knows about the key is then
//! summed class by class.

use super::count::{binomial, multinomial};
use super::BlockCounts;
use crate::audit::rules::IntensityObs;
use crate::exact::pulses::PulseModel;
use rand_chacha::ChaCha8Rng;

/// Draws one block of `signals` pulses.
pub fn sample(model: &PulseModel, signals: u64, test_size: &dyn Fn(u64) -> u64, rng: &mut ChaCha8Rng) -> BlockCounts {
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
    out.intensities = Some(obs);
    out
}
