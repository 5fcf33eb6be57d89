//! The prepare-and-measure protocols: signal states and bases.
//!
//! BB84 uses Z = {|0>, |1>} and X = {|+>, |->}; the six-state protocol adds
//! Y = {(|0> + i|1>)/√2, (|0> − i|1>)/√2}. The key basis is Z and Alice's bit is uniform.
//! This module only names states; attacks and evaluation live elsewhere. `detector` models
//! Bob's detection device with its implementation flaws as a POVM; `optical` the link.

pub mod detector;
pub mod optical;

use crate::numeric::linalg::{c, CVec};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// A preparation and measurement basis.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Basis {
    /// Computational basis {|0>, |1>}: the key basis.
    Z,
    /// Hadamard basis {|+>, |->}.
    X,
    /// Circular basis {(|0> + i|1>)/√2, (|0> − i|1>)/√2}.
    Y,
}

impl Basis {
    /// All three bases in the order Z, X, Y.
    pub const ALL: [Basis; 3] = [Basis::Z, Basis::X, Basis::Y];

    /// The ket encoding `bit` (0 or 1) in this basis.
    #[track_caller]
    pub fn ket(self, bit: usize) -> CVec {
        assert!(bit < 2, "bit must be 0 or 1");
        let s = std::f64::consts::FRAC_1_SQRT_2;
        let sign = if bit == 0 { 1.0 } else { -1.0 };
        match self {
            Basis::Z => {
                if bit == 0 {
                    CVec::from_vec(vec![c(1.0, 0.0), c(0.0, 0.0)])
                } else {
                    CVec::from_vec(vec![c(0.0, 0.0), c(1.0, 0.0)])
                }
            }
            Basis::X => CVec::from_vec(vec![c(s, 0.0), c(sign * s, 0.0)]),
            Basis::Y => CVec::from_vec(vec![c(s, 0.0), c(0.0, sign * s)]),
        }
    }

    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Basis::Z => "z",
            Basis::X => "x",
            Basis::Y => "y",
        }
    }
}

/// Which protocol's bound an evaluation is judged against.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
pub enum Protocol {
    /// BB84: Z and X bases.
    #[default]
    #[serde(rename = "bb84")]
    Bb84,
    /// Six-state: Z, X and Y bases.
    #[serde(rename = "six-state")]
    SixState,
}

impl Protocol {
    /// The bases Alice and Bob use.
    pub fn bases(self) -> &'static [Basis] {
        match self {
            Protocol::Bb84 => &Basis::ALL[..2],
            Protocol::SixState => &Basis::ALL,
        }
    }
    /// Interface name.
    pub fn name(self) -> &'static str {
        match self {
            Protocol::Bb84 => "bb84",
            Protocol::SixState => "six-state",
        }
    }
}

impl fmt::Display for Protocol {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Protocol {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "bb84" => Ok(Protocol::Bb84),
            "six-state" => Ok(Protocol::SixState),
            other => Err(format!("unknown protocol `{other}`; expected bb84 or six-state")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bases_are_orthonormal_and_mutually_unbiased() {
        for b in Basis::ALL {
            for x in 0..2 {
                for y in 0..2 {
                    let ip = b.ket(x).dotc(&b.ket(y)).norm();
                    assert!((ip - if x == y { 1.0 } else { 0.0 }).abs() < 1e-15);
                }
            }
            for b2 in Basis::ALL {
                if b2 != b {
                    assert!((b.ket(0).dotc(&b2.ket(1)).norm_sqr() - 0.5).abs() < 1e-15);
                }
            }
        }
    }
}
