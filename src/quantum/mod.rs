//! Layer 2, quantum information: validated density matrices and kets ([`state`]), channels
//! as Kraus sets and isometries ([`channel`]), and the information measures on them
//! ([`measures`]: entropies in bits, Helstrom, Holevo, accessible information). No
//! protocol words: nothing here knows about bases, sifting or keys.

pub mod state;
pub mod channel;
pub mod measures;
