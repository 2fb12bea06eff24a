//! Time-series database sink (in progress).
