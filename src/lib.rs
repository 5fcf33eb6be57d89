//! qkd-audit: audit quantum key distribution configurations against eavesdropping attacks
//! and proven security bounds.
//!
//! The crate is layered; a module uses only modules of its own layer or of layers listed
//! before it. The order of the `pub mod` declarations below *is* the layer order, and
//! `tests/layers.rs` reads it from this file and fails on any import that goes up a layer
//! (or on an import cycle between the modules of one layer). DEVELOPERS.md explains why
//! each boundary sits where it does.
//!
//! 0. [`error`], [`input`], [`output`]: the error type; reading user files (TOML with
//!    line and column, numbers, allowed keys); atomic files and locked output folders.
//!    Base utilities, importable from anywhere.
//! 1. [`numeric`]: matrices and eigen-solves, one-dimensional searches, the Riemannian
//!    ascents over POVMs, per-trial random streams. No physics words.
//! 2. [`quantum`]: validated states and channels; entropies, Helstrom, Holevo, accessible
//!    information.
//! 3. [`protocol`]: bases and protocols (BB84, six-state); the optical link (sources,
//!    channel loss, detectors, exact gains).
//! 4. [`attack`]: the attack catalogue (single-photon families, pulse attacks) and attack
//!    files.
//! 5. [`exact`]: the exact evaluator, security bounds, thresholds, sweeps, key rates, and
//!    the exact per-signal and per-pulse models the samplers draw from.
//! 6. [`audit`]: the system under test, key-length rules, samplers, campaigns, trial
//!    judging, per-point statistics and the reports.
//! 7. [`search`]: numerical hunts for the strongest attack and the guessing game.
//! 8. [`cli`]: the command line, one module per subcommand.

// Index loops over small fixed arrays (bases, bits, photon-number classes) read like the
// formulas they implement; iterator chains over three zipped arrays would not.
#![allow(clippy::needless_range_loop)]

pub mod error;
pub mod input;
pub mod output;
pub mod numeric;
pub mod quantum;
pub mod protocol;
pub mod attack;
pub mod exact;
pub mod audit;
pub mod search;
pub mod cli;

pub use error::{Error, ErrorKind, Result};
