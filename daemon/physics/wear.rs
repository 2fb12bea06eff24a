//! wear
