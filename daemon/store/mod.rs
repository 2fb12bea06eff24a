//! Ledger store (in progress).
