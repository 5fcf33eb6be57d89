//! Layer 6, the finite-key audit: the system under test ([`setup`]), what a block shows
//! ([`rules::BlockStats`]) and the key-length rules that read it ([`rules`]), the block
//! samplers ([`sample`]), campaign files ([`campaign`]), the engine that runs them
//! ([`engine`]), the judging of each trial ([`trial`]), per-point statistics ([`stats`])
//! and the result files ([`report`]).

pub mod setup;
pub mod rules;
pub mod sample;
pub mod campaign;
pub mod trial;
pub mod stats;
pub mod engine;
pub mod tolerance;
pub mod report;

pub use campaign::{AttackEntry, Campaign, DEMO_CAMPAIGNS};
pub use engine::{point_count, run, PointResult};
