//! histogram
