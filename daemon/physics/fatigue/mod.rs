//! Fatigue of thick-walled parts from the plant's own cycles: rainflow
//! counting (ASTM E1049-85), the thermal stress at the assessed location,
//! design fatigue curves with Miner's rule, and creep-fatigue interaction.
//!
//! Pure functions and plain state; the engine's `fatigue` module feeds
//! them with the stress history it computes. Built-in curves and
//! envelopes are screening values written from memory, not the codes.

pub mod curve;
pub mod interaction;
pub mod rainflow;
pub mod thermal;
