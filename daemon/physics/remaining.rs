//! remaining
