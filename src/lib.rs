//! qkd-audit: audit quantum key distribution configurations against eavesdropping attacks
//! and proven security bounds.
//!
//! Layers, each depending only on those above it:
//! 1. [`linalg`]: matrices, tolerances, tensor products, partial traces, eigen-solves;
//! 2. [`state`], [`channel`]: validated density matrices, Kraus channels;
//! 3. [`measures`]: entropies, trace norm, Helstrom, Holevo, accessible information;
//! 4. [`protocol`]: BB84 and six-state signal states;
//! 5. [`attack`]: the attack catalogue and user Kraus attacks;
//! 6. [`bounds`]: security bounds and thresholds; [`eval`]: the exact per-attack evaluator;
//!    [`thresholds`]: threshold table; [`sweep`]: parameter sweeps and their CSV;
//! 7. [`output`]: safe file writing.

pub mod attack;
pub mod audit;
pub mod bounds;
pub mod channel;
pub mod cli;
pub mod error;
pub mod eval;
pub mod game;
pub mod hunt;
pub mod keyrate;
pub mod linalg;
pub mod link;
pub mod measures;
pub mod output;
pub mod protocol;
pub mod report;
pub mod rules;
pub mod setup;
pub mod sim;
pub mod state;
pub mod sweep;
pub mod thresholds;

pub use error::{Error, ErrorKind, Result};
