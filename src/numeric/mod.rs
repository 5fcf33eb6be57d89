//! Layer 1, numerics without physics: complex matrices and the eigen-solves on them
//! ([`linalg`], the only module that names nalgebra), one-dimensional searches and the
//! Riemannian ascents over rank-one POVMs ([`optimize`]), and per-trial random streams
//! ([`rng`]). Nothing here knows what a qubit, an attack or a key is.

pub mod linalg;
pub mod optimize;
pub mod rng;
