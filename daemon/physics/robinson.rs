//! robinson
