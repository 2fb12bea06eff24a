//! Alarms (in progress).
