//! The physics core: pure functions of the trade, no I/O, no clocks.
//!
//! Internal units everywhere: temperature K, stress and pressure MPa,
//! rupture life hours, integration time seconds, length mm, force N.
//! Conversions from the units in configuration and payloads live in
//! [`units`] and happen at the edges.

pub mod fatigue;
pub mod histogram;
pub mod inspection;
pub mod larson_miller;
pub mod material;
pub mod norton;
pub mod remaining;
pub mod robinson;
pub mod stress;
pub mod temperature;
pub mod units;
pub mod wear;
