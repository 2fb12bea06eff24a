//! stress
