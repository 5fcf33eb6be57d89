//! Layer 7, searches for the strongest attack: [`hunt`] (over isometries, per objective,
//! compared with the proven bound) and [`game`] (the multi-round guessing game). They call
//! the exact evaluator and the numeric ascents; nothing below depends on them.

pub mod hunt;
pub mod game;
