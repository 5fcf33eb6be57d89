//! qkd-audit: audit quantum key distribution configurations against eavesdropping attacks
//! and proven security bounds.
//!
//! Layers, each depending only on those above it:
//! 1. [`linalg`]: matrices, tolerances, tensor products, partial traces, eigen-solves;
//!    [`optimize1d`]: golden-section search;
//! 2. [`state`], [`channel`]: validated density matrices, Kraus channels;
//! 3. [`measures`]: entropies, trace norm, Helstrom, Holevo, accessible information;
//! 4. [`protocol`]: BB84 and six-state signal states; [`link`]: sources, loss, detectors;
//! 5. [`attack`]: the attack catalogue (single-photon families, link-level attacks) and user
//!    Kraus attacks;
//! 6. [`bounds`]: security bounds and thresholds; [`eval`]: the exact per-attack evaluator;
//!    [`thresholds`]: threshold table; [`sweep`]: parameter sweeps and their CSV;
//!    [`keyrate`]: asymptotic weak-pulse key rates; [`hunt`], [`game`]: searches for the
//!    strongest attack;
//! 7. [`setup`]: the system under test; [`rules`]: key-length rules; [`sim`]: Monte Carlo
//!    samplers; [`audit`]: campaigns, trials and verdicts; [`report`]: output files;
//! 8. [`output`]: safe file writing; [`cli`]: the command line.

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
pub mod optimize1d;
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
