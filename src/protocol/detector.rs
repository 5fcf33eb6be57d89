//! Bob's detection device with its implementation flaws, as a POVM on an extended input
//! space, so that attacks exploiting the flaws are evaluated with the same density-matrix
//! machinery as every other attack ([`crate::exact::device`]).
//!
//! Owns the `[detector]` keys `mismatch`, `random_swap` and `blinding_catch` (parsed by
//! [`crate::protocol::optical`] beside the detector's efficiency), the layout of Bob's
//! extended input space and the click and alarm operators. Knows nothing about attacks.
//!
//! # Bob's input space
//! A single photon reaching Bob is a polarisation qubit in one of three arrival-time modes
//! that Eve can choose: `nominal` (where the honest signal arrives and both detectors have
//! the same efficiency), `early` and `late`. Besides, Bob's input may be empty (vacuum) or a
//! bright classical trigger pulse, one per (basis, bit), used against blinded detectors. The
//! space is the direct sum (dimension [`BOB_DIM`] = 13):
//! `|t, q>` at index `2t + q` (t = 0 nominal, 1 early, 2 late; q the qubit), vacuum at 6,
//! trigger (β, b) at `7 + 2β + b` (β = 0 Z, 1 X, 2 Y).
//!
//! # Efficiency mismatch (two-value model)
//! Relative efficiencies (η₀(t), η₁(t)) of the detectors of bit 0 and bit 1: nominal (1, 1),
//! early (1, η), late (η, 1), with η = `mismatch` ∈ (0, 1] the smallest ratio of the two
//! efficiencies over the times Eve can choose (1 = no mismatch, the ideal device). This is
//! the model of the time-shift attack (Qi, Fung, Lo, Ma, QIC 7, 73, 2007) and of the
//! faked-state attack (Makarov, Anisimov, Skaar, PRA 74, 022313, 2006) reduced to its worst
//! two instants. The detector's common efficiency (`[detector] efficiency`) scales every
//! click alike and drops out once the audit conditions on Bob's clicks.
//!
//! For Bob in basis β, with P_{β,b} = |β,b><β,b| on the qubit, the click operator of bit b is
//! `F_{β,b} = Σ_t η_b(t) P_{β,b} ⊗ |t><t| + (1 − c)·|trig_{β,b}><trig_{β,b}|`, the alarm
//! operator (the blinding monitor fires) `A = c Σ_{β,b} |trig_{β,b}><trig_{β,b}|`, and
//! no-click is `1 − F_{β,0} − F_{β,1} − A ≥ 0` (vacuum, lost photons, triggers in another
//! basis).
//!
//! # Random bit-assignment swapping
//! With `random_swap = true` Bob flips, at random in each round, which detector registers
//! bit 0 (a bit flip in the measured basis before the detectors, undone in his record;
//! Fung, Tamaki, Qi, Lo, Ma, QIC 9, 131, 2009). Bit b is then registered by detector b ⊕ s
//! with s uniform and private to Bob, so its click operator is the average
//! `Σ_t ½(η₀(t) + η₁(t)) P_{β,b} ⊗ |t><t|`: the same efficiency for both bits at every time,
//! and the mismatch no longer correlates Eve's timing with Bob's bit. A bright trigger is
//! flipped with the photon and still makes Bob record Eve's bit: swapping does not help
//! against blinding.
//!
//! # Detector blinding (Lydersen et al., Nat. Photonics 4, 686, 2010)
//! Bright light turns blindable detectors into classical threshold switches: a trigger for
//! (β, b) makes detector b click when Bob measures in β and nothing in another basis (each
//! detector then receives half the trigger, below threshold). `blinding_catch` c ∈ [0, 1] is
//! the probability that the system's monitor notices a blinded detection period, which aborts
//! the block; c = 1 (the default) is the ideal device, which cannot be blinded unnoticed.

use crate::error::{check_range, Error};
use crate::input::{number as num, Problems};
use crate::numeric::linalg::{c, CMat};
use crate::protocol::Basis;
use serde::Serialize;

/// Dimension of Bob's extended input space (see the module doc).
pub const BOB_DIM: usize = 13;

/// Index of the vacuum state.
pub const VACUUM: usize = 6;

/// Arrival-time modes Eve can choose.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Timing {
    /// The honest arrival time: both detectors equally efficient.
    Nominal,
    /// Detector 1 suppressed to the ratio η.
    Early,
    /// Detector 0 suppressed to the ratio η.
    Late,
}

impl Timing {
    fn index(self) -> usize {
        match self {
            Timing::Nominal => 0,
            Timing::Early => 1,
            Timing::Late => 2,
        }
    }
    /// The timing at which the detector of `bit` is the suppressed one.
    pub fn suppressing(bit: usize) -> Timing {
        if bit == 0 {
            Timing::Late
        } else {
            Timing::Early
        }
    }
}

/// Index of photon state `|t, q>` in Bob's space.
pub fn photon_index(t: Timing, q: usize) -> usize {
    2 * t.index() + q
}

/// Index of the bright trigger for (basis, bit).
pub fn trigger_index(basis: Basis, bit: usize) -> usize {
    7 + 2 * basis_index(basis) + bit
}

fn basis_index(b: Basis) -> usize {
    match b {
        Basis::Z => 0,
        Basis::X => 1,
        Basis::Y => 2,
    }
}

/// The flaws of Bob's detection device (the ideal device by default).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct DetectorFlaws {
    /// Efficiency mismatch ratio η ∈ (0, 1] at Eve's best timing (1 = none).
    pub mismatch: f64,
    /// Random bit-assignment swapping (the countermeasure to mismatch).
    pub random_swap: bool,
    /// Probability that the monitor catches a blinded detection period (1 = not blindable).
    pub blinding_catch: f64,
}

impl Default for DetectorFlaws {
    fn default() -> Self {
        DetectorFlaws { mismatch: 1.0, random_swap: false, blinding_catch: 1.0 }
    }
}

/// The `[detector]` keys this module owns.
pub const KEYS: &[&str] = &["mismatch", "random_swap", "blinding_catch"];

impl DetectorFlaws {
    /// True for the ideal device (no mismatch, no swapping needed, not blindable).
    pub fn is_ideal(&self) -> bool {
        *self == DetectorFlaws::default()
    }

    /// One line for reports, e.g. `detector efficiency mismatch 0.25 (no random swapping),
    /// blinding monitor catch probability 1`.
    pub fn describe(&self) -> String {
        format!(
            "detector efficiency mismatch {} ({}), blinding monitor catch probability {}",
            self.mismatch,
            if self.random_swap { "random bit-assignment swapping" } else { "no random swapping" },
            self.blinding_catch
        )
    }

    /// Relative efficiencies (η₀, η₁) of the two detectors at arrival time `t`.
    pub fn efficiencies(&self, t: Timing) -> [f64; 2] {
        match t {
            Timing::Nominal => [1.0, 1.0],
            Timing::Early => [1.0, self.mismatch],
            Timing::Late => [self.mismatch, 1.0],
        }
    }

    /// The efficiency with which bit `b` is registered at time `t`, swapping included.
    pub fn bit_efficiency(&self, t: Timing, b: usize) -> f64 {
        let e = self.efficiencies(t);
        if self.random_swap {
            0.5 * (e[0] + e[1])
        } else {
            e[b]
        }
    }

    /// The largest ratio of the two bits' registration efficiencies at any time Eve can
    /// choose, as the mismatch-aware key-length rule reads it: η, or 1 with random swapping.
    pub fn effective_mismatch(&self) -> f64 {
        if self.random_swap {
            1.0
        } else {
            self.mismatch
        }
    }

    /// Bob's click operator for bit `b` when he measures in `basis` (BOB_DIM × BOB_DIM).
    pub fn click_operator(&self, basis: Basis, b: usize) -> CMat {
        let mut f = CMat::zeros(BOB_DIM, BOB_DIM);
        let ket = basis.ket(b);
        for t in [Timing::Nominal, Timing::Early, Timing::Late] {
            let eta = self.bit_efficiency(t, b);
            for i in 0..2 {
                for j in 0..2 {
                    f[(photon_index(t, i), photon_index(t, j))] = ket[i] * ket[j].conj() * c(eta, 0.0);
                }
            }
        }
        let k = trigger_index(basis, b);
        f[(k, k)] = c(1.0 - self.blinding_catch, 0.0);
        f
    }

    /// The monitor's alarm operator: a blinded period is caught with probability c.
    pub fn alarm_operator(&self) -> CMat {
        let mut a = CMat::zeros(BOB_DIM, BOB_DIM);
        for k in 7..BOB_DIM {
            a[(k, k)] = c(self.blinding_catch, 0.0);
        }
        a
    }

    /// Reads the keys of [`KEYS`] from a `[detector]` table, collecting every problem.
    pub fn parse(t: &toml::Table, p: &mut Problems) -> DetectorFlaws {
        let mut d = DetectorFlaws::default();
        if let Some(v) = t.get("mismatch") {
            let e = num(v, "detector.mismatch").and_then(|e| {
                if !(e > 0.0 && e <= 1.0) {
                    return Err(Error::input_key(
                        "detector.mismatch",
                        format!("{e} is outside (0, 1]: the smallest ratio of the two detectors' efficiencies (1 = no mismatch)"),
                    ));
                }
                Ok(e)
            });
            if let Some(e) = p.check(e) {
                d.mismatch = e;
            }
        }
        if let Some(v) = t.get("random_swap") {
            match v.as_bool() {
                Some(b) => d.random_swap = b,
                None => p.push(Error::input_key("detector.random_swap", format!("`{v}` is not true or false"))),
            }
        }
        if let Some(v) = t.get("blinding_catch") {
            let key = "detector.blinding_catch";
            if let Some(x) = p.check(num(v, key).and_then(|x| check_range(key, x, 0.0, 1.0))) {
                d.blinding_catch = x;
            }
        }
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::linalg::hermitian_eigenvalues;

    #[test]
    fn click_and_alarm_operators_form_a_povm_for_every_device() {
        for mismatch in [1.0, 0.5, 0.01] {
            for random_swap in [false, true] {
                for blinding_catch in [0.0, 0.3, 1.0] {
                    let d = DetectorFlaws { mismatch, random_swap, blinding_catch };
                    for basis in Basis::ALL {
                        let sum = d.click_operator(basis, 0) + d.click_operator(basis, 1) + d.alarm_operator();
                        let rest = CMat::identity(BOB_DIM, BOB_DIM) - &sum;
                        for op in [d.click_operator(basis, 0), d.click_operator(basis, 1), d.alarm_operator(), rest] {
                            let min = hermitian_eigenvalues(&op).into_iter().fold(f64::INFINITY, f64::min);
                            assert!(min > -1e-12, "{d:?} {basis:?}: eigenvalue {min}");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn the_ideal_device_registers_every_nominal_photon_and_swapping_equalises_the_bits() {
        let ideal = DetectorFlaws::default();
        assert!(ideal.is_ideal());
        let ket = Basis::X.ket(1);
        let v = |t: Timing| {
            let mut s = crate::numeric::linalg::CVec::zeros(BOB_DIM);
            s[photon_index(t, 0)] = ket[0];
            s[photon_index(t, 1)] = ket[1];
            s
        };
        let p = |d: &DetectorFlaws, t: Timing, b: usize| v(t).dotc(&(d.click_operator(Basis::X, b) * v(t))).re;
        assert!((p(&ideal, Timing::Nominal, 1) - 1.0).abs() < 1e-15);
        let flawed = DetectorFlaws { mismatch: 0.2, ..ideal };
        assert!((p(&flawed, Timing::Early, 1) - 0.2).abs() < 1e-15);
        assert!((p(&flawed, Timing::Late, 1) - 1.0).abs() < 1e-15);
        let swapped = DetectorFlaws { random_swap: true, ..flawed };
        assert!((p(&swapped, Timing::Early, 1) - 0.6).abs() < 1e-15);
        assert!((p(&swapped, Timing::Late, 1) - 0.6).abs() < 1e-15);
        assert_eq!(swapped.effective_mismatch(), 1.0);
        assert_eq!(flawed.effective_mismatch(), 0.2);
    }
}
