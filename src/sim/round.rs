//! Per-round block sampler: one draw per signal from an alias table (Walker 1977, Vose
//! 1991) over the full joint distribution (Alice's basis, Bob's basis, Alice's bit, Bob's
//! outcome, Eve's guess). Optionally reports every round, for transcripts of small blocks.
//!
//! A draw uses one 64-bit random number: its top 53 bits give a uniform `x ∈ [0, K)`, the
//! integer part picks a column and the fractional part decides between the column and its
//! alias.

use super::{BlockCounts, SignalModel};
use rand::RngCore;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

/// One round of a transcript.
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
    prob: Vec<f64>,
    alias: Vec<u32>,
    /// For each column: (alice basis, bob basis, cell).
    meaning: Vec<(u8, u8, u8)>,
    bases: Vec<&'static str>,
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
                    weights.push(model.basis_prob[a] * model.basis_prob[b] * model.cells[a][b][c]);
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
        let bases = model.bases.iter().map(|b| b.name()).collect();
        RoundSampler { prob, alias, meaning, bases }
    }

    #[inline]
    fn draw(&self, rng: &mut ChaCha8Rng) -> usize {
        let u = rng.next_u64();
        let x = (u >> 11) as f64 * (1.0 / (1u64 << 53) as f64) * self.prob.len() as f64;
        let i = (x as usize).min(self.prob.len() - 1);
        if x - (i as f64) < self.prob[i] {
            i
        } else {
            self.alias[i] as usize
        }
    }

    /// Draws a block of `signals` rounds. The first `test_size(sifted_z)` sifted Z rounds
    /// form the test sample; since `sifted_z` is known only at the end, the rounds are
    /// first tallied and the test sample is then taken as the first `m` sifted Z rounds
    /// of the stored sequence of Z cells. With `transcript`, every round is reported.
    pub fn sample(
        &self,
        signals: u64,
        test_size: &dyn Fn(u64) -> u64,
        rng: &mut ChaCha8Rng,
        mut transcript: Option<&mut dyn FnMut(RoundRecord)>,
    ) -> BlockCounts {
        let mut out = BlockCounts { signals, ..BlockCounts::default() };
        let mut z_cells: Vec<u8> = Vec::new();
        let mut records: Vec<RoundRecord> = Vec::new();
        for round in 0..signals {
            let (a, b, c) = self.meaning[self.draw(rng)];
            if a == b {
                out.sifted[a as usize] += 1;
                out.cells[a as usize][c as usize] += 1;
                if a == 0 {
                    z_cells.push(c);
                }
            }
            if transcript.is_some() {
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
        let m = test_size(out.sifted[0]) as usize;
        for &c in &z_cells[..m.min(z_cells.len())] {
            out.test_z[c as usize] += 1;
        }
        if let Some(f) = transcript.as_mut() {
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
        out
    }
}
