//! Layer 5, exact computation: what an attack does, computed once and without sampling.
//! The per-attack evaluator ([`eval`]) and the proven bounds it checks ([`bounds`]), the
//! threshold table ([`thresholds`]), parameter sweeps ([`sweep`]), asymptotic key rates of
//! optical links ([`keyrate`]), and the exact distributions the Monte Carlo samplers draw
//! from: one signal under a single-photon attack ([`signal`]) and one pulse per kind of
//! pulse on an optical link ([`pulses`]); attacks on Bob's detection device, conditioned on
//! his clicks ([`device`]).

pub mod bounds;
pub mod eval;
pub mod thresholds;
pub mod sweep;
pub mod keyrate;
pub mod signal;
pub mod pulses;
pub mod device;
