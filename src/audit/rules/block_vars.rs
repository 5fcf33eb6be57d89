//! The variables a user's rule reads: one list, [`VARIABLES`], shared by rule files
//! ([`super::formula`], where each name is a variable of the expressions) and rule programs
//! ([`super::program`], where each name is a field of a block's JSON object). The README's
//! variable table is this list; `tests/rule_files.rs` checks that the two agree.
//!
//! Everything here is what the block showed the post-processing, plus the setup's four
//! rule parameters and the tool's standard leak_EC. Nothing here samples or judges.

use super::{ec_leak_bits, BlockStats, RuleParams};

/// One variable: name, unit, meaning.
pub struct Variable {
    /// Name in expressions and JSON.
    pub name: &'static str,
    /// Unit.
    pub unit: &'static str,
    /// What it is.
    pub meaning: &'static str,
}

const fn var(name: &'static str, unit: &'static str, meaning: &'static str) -> Variable {
    Variable { name, unit, meaning }
}

/// Number of variables that do not depend on the intensity.
const SCALARS: usize = 24;

/// Number of per-intensity variables (each for intensities 1, 2, 3).
const PER_INTENSITY: usize = 9;

/// Number of variables.
pub const COUNT: usize = SCALARS + 3 * PER_INTENSITY;

/// Every variable, in slot order. Rates are NaN when their denominator is 0; the
/// per-intensity variables (suffix 1 for the signal, 2 and 3 for the decoys in the order of
/// `[source].decoys`) are NaN on links without that intensity.
pub const VARIABLES: [Variable; COUNT] = [
    var("signals", "signals", "signals (pulses) sent in the block"),
    var("sifted_z", "bits", "sifted Z bits (test sample and key): m + n"),
    var("sifted_x", "bits", "sifted X bits, all disclosed: the same as k"),
    var("sifted_y", "bits", "sifted Y bits (six-state; 0 for BB84), all disclosed"),
    var("n", "bits", "key bits: sifted Z bits not in the test sample"),
    var("m", "bits", "size of the Z test sample (disclosed sifted Z bits)"),
    var("k", "bits", "sifted X bits used to estimate the phase error"),
    var("m_errors", "bits", "errors in the Z test sample"),
    var("k_errors", "bits", "errors among the sifted X bits"),
    var("y_errors", "bits", "errors among the sifted Y bits"),
    var("key_errors", "bits", "bit errors in the n key bits: what error correction finds and corrects"),
    var("e_z", "1", "observed Z error rate, m_errors / m"),
    var("e_x", "1", "observed X error rate, k_errors / k"),
    var("e_y", "1", "observed Y error rate, y_errors / sifted_y"),
    var("q_ec", "1", "the error rate error correction is sized by: e_z, or e_x when m = 0"),
    var("abort_qber", "1", "the setup's abort threshold on every observed error rate"),
    var("f", "1", "the setup's error-correction efficiency ec_efficiency"),
    var("eps_sec", "1", "the setup's secrecy parameter epsilon_sec"),
    var("eps_cor", "1", "the setup's correctness parameter epsilon_cor"),
    var("leak_ec", "bits", "the tool's standard error-correction leak f·n·h(q_ec) + log2(2/eps_cor)"),
    var("mismatch", "1", "the detector's claimed efficiency mismatch ratio (1 = none; setup detector.mismatch)"),
    var("blinding_catch", "1", "the claimed probability that the monitor catches a blinded period (1 = not blindable)"),
    var("intensities", "1", "number of intensities on the link (0 for single photons)"),
    var("single_photon", "1", "1 on a single-photon link, 0 on a weak-coherent one"),
    var("mu1", "photons/pulse", "mean photon number of intensity 1 (the signal)"),
    var("p1", "1", "probability with which intensity 1 is sent"),
    var("pulses1", "pulses", "pulses of intensity 1 sent"),
    var("detections1", "detections", "detections of intensity 1 (any basis)"),
    var("gain1", "1", "observed gain of intensity 1: detections1 / pulses1"),
    var("z_detections1", "detections", "sifted Z detections of intensity 1 (test sample and key)"),
    var("x_detections1", "detections", "sifted X detections of intensity 1"),
    var("x_errors1", "detections", "errors among x_detections1"),
    var("e_x1", "1", "observed X error rate of intensity 1: x_errors1 / x_detections1"),
    var("mu2", "photons/pulse", "as mu1, intensity 2 (first decoy)"),
    var("p2", "1", "as p1, intensity 2"),
    var("pulses2", "pulses", "as pulses1, intensity 2"),
    var("detections2", "detections", "as detections1, intensity 2"),
    var("gain2", "1", "as gain1, intensity 2"),
    var("z_detections2", "detections", "as z_detections1, intensity 2"),
    var("x_detections2", "detections", "as x_detections1, intensity 2"),
    var("x_errors2", "detections", "as x_errors1, intensity 2"),
    var("e_x2", "1", "as e_x1, intensity 2"),
    var("mu3", "photons/pulse", "as mu1, intensity 3 (second decoy)"),
    var("p3", "1", "as p1, intensity 3"),
    var("pulses3", "pulses", "as pulses1, intensity 3"),
    var("detections3", "detections", "as detections1, intensity 3"),
    var("gain3", "1", "as gain1, intensity 3"),
    var("z_detections3", "detections", "as z_detections1, intensity 3"),
    var("x_detections3", "detections", "as x_detections1, intensity 3"),
    var("x_errors3", "detections", "as x_errors1, intensity 3"),
    var("e_x3", "1", "as e_x1, intensity 3"),
];

/// Slot of a variable by name.
pub fn slot(name: &str) -> Option<usize> {
    VARIABLES.iter().position(|v| v.name == name)
}

/// The intensity (1, 2 or 3) a per-intensity variable belongs to, `None` for the others.
pub fn intensity_of(slot: usize) -> Option<usize> {
    (slot >= SCALARS).then(|| (slot - SCALARS) / PER_INTENSITY + 1)
}

/// Counts as exact doubles: every count of a block is far below 2⁵³.
fn c(x: u64) -> f64 {
    x as f64
}

/// The values of every variable for one block, in slot order.
pub fn values(obs: &BlockStats, params: &RuleParams) -> [f64; COUNT] {
    let mut v = [f64::NAN; COUNT];
    let scalars = [
        c(obs.signals),
        c(obs.n + obs.m),
        c(obs.k),
        c(obs.sifted_y),
        c(obs.n),
        c(obs.m),
        c(obs.k),
        c(obs.m_errors),
        c(obs.k_errors),
        c(obs.y_errors),
        c(obs.key_errors),
        obs.e_z,
        obs.e_x,
        obs.e_y,
        obs.q_for_ec(),
        params.abort_qber,
        params.ec_efficiency,
        params.epsilon_sec,
        params.epsilon_cor,
        ec_leak_bits(obs, params),
        params.mismatch,
        params.blinding_catch,
        c(obs.intensities.map_or(0, |i| i.count as u64)),
        if obs.intensities.is_some_and(|i| i.multi_photon.iter().any(|&p| p > 0.0)) { 0.0 } else { 1.0 },
    ];
    v[..SCALARS].copy_from_slice(&scalars);
    if let Some(l) = &obs.intensities {
        for i in 0..l.count.min(3) {
            let at = SCALARS + i * PER_INTENSITY;
            v[at..at + PER_INTENSITY].copy_from_slice(&[
                l.mu[i],
                l.probability[i],
                c(l.pulses[i]),
                c(l.detections[i]),
                l.gain(i),
                c(l.z_detections[i]),
                c(l.x_detections[i]),
                c(l.x_errors[i]),
                l.x_error_rate(i),
            ]);
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_and_slots_match_the_values() {
        for (i, a) in VARIABLES.iter().enumerate() {
            assert_eq!(slot(a.name), Some(i));
        }
        assert_eq!(VARIABLES[SCALARS].name, "mu1");
        assert_eq!(VARIABLES[SCALARS + PER_INTENSITY].name, "mu2");
        assert_eq!(VARIABLES[SCALARS - 1].name, "single_photon");
        assert_eq!(intensity_of(slot("e_x3").unwrap()), Some(3));
        assert_eq!(intensity_of(slot("n").unwrap()), None);
        let obs = BlockStats { signals: 9, n: 5, k: 3, m: 2, e_z: 0.5, e_x: 0.0, key_errors: 1, ..Default::default() };
        let params =
            RuleParams { abort_qber: 0.1, ec_efficiency: 1.2, epsilon_sec: 1e-9, epsilon_cor: 1e-12, mismatch: 1.0, blinding_catch: 1.0 };
        let v = values(&obs, &params);
        assert_eq!(v[slot("sifted_z").unwrap()], 7.0);
        assert_eq!(v[slot("key_errors").unwrap()], 1.0);
        assert_eq!(v[slot("leak_ec").unwrap()], ec_leak_bits(&obs, &params));
        assert_eq!(v[slot("single_photon").unwrap()], 1.0);
        assert_eq!(v[slot("mismatch").unwrap()], 1.0);
        assert_eq!(v[slot("blinding_catch").unwrap()], 1.0);
        assert!(v[slot("mu1").unwrap()].is_nan());
    }
}
