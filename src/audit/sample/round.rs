//! Per-round block sampler: one draw per signal from an alias table (Walker 1977, Vose
//! 1991) over the full joint distribution (Alice's basis, Bob's basis, Alice's bit, Bob's
//! outcome, Eve's guess). Optionally reports every round, for round logs of small blocks.
//!
//! A draw uses one 64-bit random number u: the high word of the 128-bit product u·K picks
//! a column uniformly and the low word (the fractional part, uniform on 64 bits) is
//! compared with the column's integer threshold to choose between the column and its
//! alias (Lemire's multiply-shift; thresholds have 2⁻⁶⁴ resolution).

use super::BlockCounts;
use crate::exact::signal::{SignalModel, CELL_CATEGORY};
use rand::RngCore;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

/// One round of a round log.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct RoundRecord {
    /// Round number, from 0.
    pub round: u64,
    /// Alice's basis (z, x, y).
    pub alice_basis: &'static str,
    /// Bob's basis.
    pub bob_basis: &'static str,
    /// Alice's bit.
    pub alice_bit: u8,
    /// Bob's outcome.
    pub bob_bit: u8,
    /// Eve's guess of Alice's bit (Helstrom measurement for Alice's basis).
    pub eve_guess: u8,
    /// `discarded` (bases differ), `test-z` (disclosed Z sample), `key`, or `test-x` /
    /// `test-y` (sifted in the test bases, all disclosed).
    pub role: &'static str,
}

/// An alias table over the joint cells of a [`SignalModel`].
pub struct RoundSampler {
    threshold: Vec<u64>,
    alias: Vec<u32>,
    /// For each column: (alice basis, bob basis, cell).
    meaning: Vec<(u8, u8, u8)>,
    bases: Vec<&'static str>,
    alarm_odds: f64,
}

impl RoundSampler {
    /// Builds the table (Vose's method).
    pub fn new(model: &SignalModel) -> Self {
        let nb = model.bases.len();
        let mut weights = Vec::with_capacity(nb * nb * 8);
        let mut meaning = Vec::with_capacity(nb * nb * 8);
        for a in 0..nb {
            for b in 0..nb {
                for c in 0..8 {
                    weights.push(model.pair_weight(a, b) * model.cells[a][b][c]);
                    meaning.push((a as u8, b as u8, c as u8));
                }
            }
        }
        let k = weights.len();
        let total: f64 = weights.iter().sum();
        let mut scaled: Vec<f64> = weights.iter().map(|w| w * k as f64 / total).collect();
        let mut prob = vec![1.0; k];
        let mut alias: Vec<u32> = (0..k as u32).collect();
        let (mut small, mut large): (Vec<usize>, Vec<usize>) = (0..k).partition(|&i| scaled[i] < 1.0);
        while let (Some(s), Some(&l)) = (small.pop(), large.last()) {
            prob[s] = scaled[s];
            alias[s] = l as u32;
            scaled[l] -= 1.0 - scaled[s];
            if scaled[l] < 1.0 {
                large.pop();
                small.push(l);
            }
        }
        // Leftovers have probability 1 up to rounding.
        let threshold = prob.iter().map(|&p| if p >= 1.0 { u64::MAX } else { (p * 18_446_744_073_709_551_616.0) as u64 }).collect();
        let bases = model.bases.iter().map(|b| b.name()).collect();
        RoundSampler { threshold, alias, meaning, bases, alarm_odds: model.alarm_odds }
    }

    #[inline]
    fn draw(&self, rng: &mut ChaCha8Rng) -> usize {
        let wide = u128::from(rng.next_u64()) * self.threshold.len() as u128;
        let i = (wide >> 64) as usize;
        if (wide as u64) < self.threshold[i] {
            i
        } else {
            self.alias[i] as usize
        }
    }

    /// Draws a block of `signals` rounds. The first `test_size(sifted_z)` sifted Z rounds
    /// form the test sample; since `sifted_z` is known only at the end, the rounds are
    /// first tallied and the test sample is then taken as the first `m` sifted Z rounds
    /// of the stored sequence of Z cells. With `log`, every round is reported.
    pub fn sample(
        &self,
        signals: u64,
        test_size: &dyn Fn(u64) -> u64,
        rng: &mut ChaCha8Rng,
        mut log: Option<&mut dyn FnMut(RoundRecord)>,
    ) -> BlockCounts {
        let mut out = BlockCounts { signals, ..BlockCounts::default() };
        let mut tally = [[0u64; 4]; 3];
        let mut z_categories: Vec<u8> = Vec::new();
        let mut records: Vec<RoundRecord> = Vec::new();
        for round in 0..signals {
            let (a, b, c) = self.meaning[self.draw(rng)];
            if a == b {
                let cat = CELL_CATEGORY[c as usize];
                tally[a as usize][cat as usize] += 1;
                if a == 0 {
                    z_categories.push(cat);
                }
            }
            if log.is_some() {
                let c = c as usize;
                records.push(RoundRecord {
                    round,
                    alice_basis: self.bases[a as usize],
                    bob_basis: self.bases[b as usize],
                    alice_bit: (c / 4) as u8,
                    bob_bit: ((c / 2) % 2) as u8,
                    eve_guess: (c % 2) as u8,
                    role: match (a == b, a) {
                        (false, _) => "discarded",
                        (true, 0) => "key",
                        (true, 1) => "test-x",
                        _ => "test-y",
                    },
                });
            }
        }
        for i in 0..3 {
            out.sifted[i] = tally[i].iter().sum();
            out.errors[i] = tally[i][2] + tally[i][3];
        }
        let m = (test_size(out.sifted[0]) as usize).min(z_categories.len());
        out.test_z = m as u64;
        out.test_z_errors = z_categories[..m].iter().filter(|&&c| c >= 2).count() as u64;
        out.key = tally[0];
        for &c in &z_categories[..m] {
            out.key[c as usize] -= 1;
        }
        if let Some(f) = log.as_mut() {
            let mut seen = 0usize;
            for mut r in records {
                if r.role == "key" {
                    if seen < m {
                        r.role = "test-z";
                    }
                    seen += 1;
                }
                f(r);
            }
        }
        out.alarm = super::monitor_alarm(self.alarm_odds, signals, rng);
        out
    }
}
