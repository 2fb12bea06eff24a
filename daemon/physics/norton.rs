//! norton
