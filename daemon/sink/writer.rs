//! One write attempt of a batch of line protocol to the InfluxDB v2 API.
//!
//! [`Writer`] wraps the `influxdb2` crate's client. It does not loop, queue
//! or sleep: the outbox sender decides what to retry and when (with
//! [`super::Backoff`]), and this type only reports, through [`SinkError`],
//! whether the database took the batch, refused the data, or could not be
//! reached. Each attempt is bounded by `timeout_s`.

use std::fmt;
use std::time::Duration;

use influxdb2::RequestError;

use super::{DatabaseSettings, SinkError};

/// A client for `POST {url}/api/v2/write?org=..&bucket=..&precision=ns`.
///
/// Cheap to clone (the HTTP connection pool is shared). The token lives
/// only inside the client, and `Debug` does not show it.
#[derive(Clone)]
pub struct Writer {
    client: influxdb2::Client,
    url: String,
    org: String,
    bucket: String,
    timeout: Duration,
}

impl fmt::Debug for Writer {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Writer")
            .field("url", &self.url)
            .field("org", &self.org)
            .field("bucket", &self.bucket)
            .field("timeout", &self.timeout)
            .field("token", &"<redacted>")
            .finish()
    }
}

impl Writer {
    /// Validates the settings, reads the token and builds the client. Does
    /// not contact the database (see [`Writer::ping`]).
    pub fn new(s: &DatabaseSettings) -> Result<Writer, SinkError> {
        s.validate()?;
        let token = s.token()?;
        let url = s.url.trim_end_matches('/').to_string();
        // `ClientBuilder::new` panics on a URL it cannot parse. `validate`
        // already refuses the malformed ones we know of; this catches the
        // rest so a bad setting is a config error, not a crash.
        let mut http = reqwest::ClientBuilder::new();
        if let Some(ca) = &s.ca_file {
            for cert in super::settings::read_ca_file(ca)? {
                http = http.add_root_certificate(cert);
            }
        }
        let built = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            influxdb2::ClientBuilder::with_builder(http, url.as_str(), s.org.as_str(), token).build()
        }))
        .map_err(|_| SinkError::Config(format!("database.url = {:?} is not a valid URL", s.url)))?
        .map_err(|e| SinkError::Config(format!("cannot build the HTTP client: {e}")))?;
        Ok(Writer {
            client: built,
            url,
            org: s.org.clone(),
            bucket: s.bucket.clone(),
            timeout: Duration::from_secs_f64(s.timeout_s),
        })
    }

    /// Sends `lines` (joined by `\n`) in one request, once.
    ///
    /// Timestamps in the lines are read as nanoseconds. An empty slice
    /// succeeds without a request. `Ok` means the database answered 204: the
    /// whole batch was accepted. Callers size batches by `batch_lines`.
    pub async fn write_lines(&self, lines: &[String]) -> Result<(), SinkError> {
        if lines.is_empty() {
            return Ok(());
        }
        let body = lines.join("\n");
        let attempt = self.client.write_line_protocol(&self.org, &self.bucket, body);
        match tokio::time::timeout(self.timeout, attempt).await {
            Err(_) => Err(SinkError::Unreachable(format!("{}: no answer within {:?}", self.url, self.timeout))),
            Ok(Ok(())) => Ok(()),
            Ok(Err(e)) => Err(self.classify(e)),
        }
    }

    /// Whether the database answers `GET {url}/ready` with 200 within the
    /// timeout. InfluxDB 2 and VictoriaMetrics both serve `/ready`.
    pub async fn ping(&self) -> bool {
        matches!(tokio::time::timeout(self.timeout, self.client.ready()).await, Ok(Ok(true)))
    }

    /// The base URL written to (for logs and status pages).
    pub fn url(&self) -> &str {
        &self.url
    }

    fn classify(&self, e: RequestError) -> SinkError {
        match e {
            RequestError::Http { status, text } => SinkError::from_status(status.as_u16(), &text),
            // Connection refused or reset, DNS failure, TLS failure, body
            // cut off: the write may or may not have landed; with event
            // timestamps a retry is harmless either way.
            RequestError::ReqwestProcessing { source } => SinkError::Unreachable(format!("{}: {source}", self.url)),
            other => SinkError::Unreachable(format!("{}: {other}", self.url)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn debug_and_errors_never_show_the_token() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("token");
        std::fs::write(&path, "s3cr3t-t0ken\n").unwrap();
        let mut s = DatabaseSettings::new("http://127.0.0.1:9", "org", "bucket");
        s.token_file = Some(path);
        let w = Writer::new(&s).unwrap();
        let shown = format!("{w:?} {s:?}");
        assert!(!shown.contains("s3cr3t"), "token leaked: {shown}");
        assert!(shown.contains("<redacted>"));
    }

    #[tokio::test]
    async fn refused_connection_is_unreachable() {
        // A port that was free a moment ago: the connection is refused.
        let port = {
            let l = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
            l.local_addr().unwrap().port()
        };
        let s = DatabaseSettings::new(&format!("http://127.0.0.1:{port}"), "o", "b");
        let w = Writer::new(&s).unwrap();
        let e = w.write_lines(&["m f=1 1".to_string()]).await.unwrap_err();
        assert!(e.is_retryable(), "{e}");
        assert!(!w.ping().await);
        assert!(w.write_lines(&[]).await.is_ok(), "empty batch needs no server");
    }

    #[test]
    fn unparsable_url_is_a_config_error() {
        let s = DatabaseSettings::new("http://1.2.3.999", "o", "b");
        assert!(matches!(Writer::new(&s), Err(SinkError::Config(_))));
        let s = DatabaseSettings::new("http://db/influx", "o", "b");
        let e = Writer::new(&s).unwrap_err();
        assert!(e.to_string().contains("database.url"), "{e}");
    }
}
