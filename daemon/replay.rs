//! Historian CSV replay.
