//! Errors of the database sink, sorted by what the caller does next.
//!
//! The outbox sender must never drop ledger points silently (design
//! invariant 5), so the distinction that matters is not "error or not" but
//! "are the lines at fault, or is the path to the database?":
//!
//! * [`SinkError::Unreachable`]: no answer, a timeout, a 5xx, 408 or 429.
//!   Nothing is wrong with the lines; keep them and retry after a back-off.
//! * [`SinkError::Rejected`] with [`SinkError::is_bad_data`]: the database
//!   answered 400 or 422, so these lines will never be accepted. The caller
//!   logs and parks them (they are still in the ledger).
//! * [`SinkError::Rejected`] otherwise (401, 403, 404, 413, ...): the
//!   database refuses us, not the data (wrong token, missing bucket, batch
//!   too large). Keep the lines, back off, raise a health alarm.
//! * [`SinkError::Config`]: the settings cannot work at all; fix and restart.
//!
//! No message here ever contains the token.

use thiserror::Error;

/// Why a write or a setup step failed.
#[derive(Debug, Error)]
pub enum SinkError {
    /// The database could not be reached or is temporarily unable to take
    /// the write (connection refused, timeout, HTTP 5xx, 408, 429).
    #[error("time-series database unreachable: {0}")]
    Unreachable(String),
    /// The database answered the write with an HTTP 4xx status.
    #[error("time-series database rejected the write with HTTP {status}: {body}")]
    Rejected {
        /// HTTP status code of the answer.
        status: u16,
        /// Body of the answer (the server's explanation), trimmed.
        body: String,
    },
    /// The `[database]` settings are unusable; the message names the key.
    #[error("database settings: {0}")]
    Config(String),
}

impl SinkError {
    /// Whether the failure is transient: keep the lines in the outbox and
    /// retry them unchanged after a [`crate::sink::Backoff`] delay.
    ///
    /// When neither this nor [`SinkError::is_bad_data`] holds, the database
    /// refuses us rather than the data: keep the lines, raise a health
    /// alarm, and retry slowly (at `backoff_max_s`) until someone fixes it.
    pub fn is_retryable(&self) -> bool {
        matches!(self, SinkError::Unreachable(_))
    }

    /// Whether the lines themselves are at fault (HTTP 400 or 422): retrying
    /// them can never succeed, so the caller parks them and moves on.
    pub fn is_bad_data(&self) -> bool {
        matches!(self, SinkError::Rejected { status: 400 | 422, .. })
    }

    /// Sorts an HTTP answer other than 204 into a variant.
    pub(crate) fn from_status(status: u16, body: &str) -> SinkError {
        let body = body.trim().to_string();
        match status {
            408 | 429 => SinkError::Unreachable(format!("HTTP {status}: {body}")),
            400..=499 => SinkError::Rejected { status, body },
            // 5xx, and anything else that is not the 204 the write API
            // promises (a proxy's 200 or 3xx, say): the write did not land.
            _ => SinkError::Unreachable(format!("HTTP {status}: {body}")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn statuses_sort_into_retry_park_or_refuse() {
        for s in [500, 502, 503, 504, 408, 429] {
            let e = SinkError::from_status(s, "x");
            assert!(e.is_retryable(), "{s} must be retried");
            assert!(!e.is_bad_data());
        }
        for s in [400, 422] {
            let e = SinkError::from_status(s, " bad line \n");
            assert!(e.is_bad_data(), "{s} is bad data");
            assert!(!e.is_retryable());
            assert!(matches!(e, SinkError::Rejected { body, .. } if body == "bad line"));
        }
        for s in [401, 403, 404, 413] {
            let e = SinkError::from_status(s, "");
            assert!(!e.is_bad_data(), "{s} is not the data's fault");
            assert!(!e.is_retryable(), "{s} needs a fix, not a blind retry");
        }
    }
}
