//! The `[database]` settings: where the sink writes and how hard it tries.
//!
//! The token itself is never part of the settings: they name an environment
//! variable (`token_env`) or a file (`token_file`) that holds it, so the
//! configuration file can be shared, logged and committed without leaking
//! it. [`DatabaseSettings::token`] reads it when the writer is built.

use std::path::PathBuf;

use serde::Deserialize;

use super::SinkError;

/// Connection and delivery settings for the InfluxDB v2 write API.
///
/// ```toml
/// [database]
/// url = "http://127.0.0.1:8428"   # scheme, host and port; no path
/// org = "plant"
/// bucket = "lifeledger"
/// token_env = "LIFELEDGER_DB_TOKEN"  # or token_file = "/etc/lifeledger/db-token"
/// ```
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatabaseSettings {
    /// Base URL of the database, `http://` or `https://`, host and port
    /// only: requests go to `{url}/api/v2/write` and `{url}/ready`.
    pub url: String,
    /// InfluxDB organization (ignored by VictoriaMetrics).
    pub org: String,
    /// InfluxDB bucket (VictoriaMetrics 1.79 ignores it too).
    pub bucket: String,
    /// Name of an environment variable holding the API token.
    pub token_env: Option<String>,
    /// Path of a file holding the API token (surrounding whitespace trimmed).
    pub token_file: Option<PathBuf>,
    /// Most lines the outbox sender puts in one write request.
    #[serde(default = "default_batch_lines")]
    pub batch_lines: usize,
    /// Seconds one write attempt (connect, send, answer) may take.
    #[serde(default = "default_timeout_s")]
    pub timeout_s: f64,
    /// First retry delay ceiling in seconds; doubles per failure.
    #[serde(default = "default_backoff_initial_s")]
    pub backoff_initial_s: f64,
    /// Largest retry delay ceiling in seconds.
    #[serde(default = "default_backoff_max_s")]
    pub backoff_max_s: f64,
    /// Disk the outbox may use before the service stops acknowledging MQTT
    /// (design invariant 5).
    #[serde(default = "default_outbox_quota_bytes")]
    pub outbox_quota_bytes: u64,
    /// PEM file of certificate authorities (a plant CA) trusted for an
    /// `https` database, besides the bundled public roots.
    #[serde(default)]
    pub ca_file: Option<PathBuf>,
}

/// The certificates of the PEM file `path` for the database client's root
/// store; an error (naming the file) when it cannot be read or holds no
/// certificate.
pub fn read_ca_file(path: &std::path::Path) -> Result<Vec<reqwest::Certificate>, SinkError> {
    let bytes = std::fs::read(path)
        .map_err(|e| SinkError::Config(format!("database.ca_file {}: cannot read: {e}", path.display())))?;
    let certs = reqwest::Certificate::from_pem_bundle(&bytes)
        .map_err(|e| SinkError::Config(format!("database.ca_file {}: not PEM certificates: {e}", path.display())))?;
    if certs.is_empty() {
        return Err(SinkError::Config(format!(
            "database.ca_file {}: no PEM CERTIFICATE block in the file",
            path.display()
        )));
    }
    // The TLS library reads each certificate when a client is built: build
    // one now, so that a block that is not a certificate is refused here.
    let mut probe = reqwest::ClientBuilder::new();
    for c in &certs {
        probe = probe.add_root_certificate(c.clone());
    }
    probe.build().map_err(|e| {
        SinkError::Config(format!("database.ca_file {}: not a usable certificate: {e}", path.display()))
    })?;
    Ok(certs)
}

fn default_batch_lines() -> usize {
    5000
}
fn default_timeout_s() -> f64 {
    10.0
}
fn default_backoff_initial_s() -> f64 {
    0.5
}
fn default_backoff_max_s() -> f64 {
    60.0
}
fn default_outbox_quota_bytes() -> u64 {
    512 * 1024 * 1024
}

impl DatabaseSettings {
    /// Settings for `url`, `org` and `bucket` with no token and every other
    /// field at its default. Handy for tests and the demo.
    pub fn new(url: &str, org: &str, bucket: &str) -> DatabaseSettings {
        DatabaseSettings {
            url: url.to_string(),
            org: org.to_string(),
            bucket: bucket.to_string(),
            token_env: None,
            token_file: None,
            batch_lines: default_batch_lines(),
            timeout_s: default_timeout_s(),
            backoff_initial_s: default_backoff_initial_s(),
            backoff_max_s: default_backoff_max_s(),
            outbox_quota_bytes: default_outbox_quota_bytes(),
            ca_file: None,
        }
    }

    /// Checks every field; the error names the key and what to change.
    pub fn validate(&self) -> Result<(), SinkError> {
        let cfg = |m: String| Err(SinkError::Config(m));
        check_url(&self.url)?;
        if self.bucket.trim().is_empty() {
            return cfg("database.bucket is empty; name the bucket to write to".into());
        }
        if self.batch_lines == 0 {
            return cfg("database.batch_lines is 0; use at least 1 (default 5000)".into());
        }
        for (key, v) in [
            ("timeout_s", self.timeout_s),
            ("backoff_initial_s", self.backoff_initial_s),
            ("backoff_max_s", self.backoff_max_s),
        ] {
            // Upper bound keeps Duration::from_secs_f64 far from overflow.
            if !(v.is_finite() && v > 0.0 && v <= 1e9) {
                return cfg(format!("database.{key} = {v}; use a positive number of seconds"));
            }
        }
        if self.backoff_max_s < self.backoff_initial_s {
            return cfg(format!(
                "database.backoff_max_s ({}) is below database.backoff_initial_s ({}); \
                 raise the maximum",
                self.backoff_max_s, self.backoff_initial_s
            ));
        }
        if self.outbox_quota_bytes == 0 {
            return cfg("database.outbox_quota_bytes is 0; allow the outbox some disk".into());
        }
        Ok(())
    }

    /// The API token: from `token_env`, from `token_file`, or empty (no
    /// `Authorization` header) when neither is set. Never log the result.
    pub fn token(&self) -> Result<String, SinkError> {
        self.token_with(|var| std::env::var(var).ok())
    }

    /// [`Self::token`] with environment variables read through `env`.
    pub fn token_with(&self, env: impl Fn(&str) -> Option<String>) -> Result<String, SinkError> {
        match (&self.token_env, &self.token_file) {
            (Some(_), Some(_)) => {
                Err(SinkError::Config("database.token_env and database.token_file are both set; keep one".into()))
            }
            (None, None) => Ok(String::new()),
            (Some(var), None) => match env(var) {
                Some(t) if !t.trim().is_empty() => Ok(t.trim().to_string()),
                Some(_) => Err(SinkError::Config(format!("database.token_env: environment variable {var} is empty"))),
                None => Err(SinkError::Config(format!(
                    "database.token_env: environment variable {var} is not set \
                     (or not valid UTF-8); export it before starting"
                ))),
            },
            (None, Some(path)) => {
                let text = std::fs::read_to_string(path).map_err(|e| {
                    SinkError::Config(format!("database.token_file: cannot read {}: {e}", path.display()))
                })?;
                let token = text.trim();
                if token.is_empty() {
                    return Err(SinkError::Config(format!("database.token_file: {} is empty", path.display())));
                }
                Ok(token.to_string())
            }
        }
    }
}

/// `url` with any `user:password@` part replaced by `***@`: the form in
/// which a database URL may be printed or logged.
pub fn redacted_url(url: &str) -> String {
    if let Some((scheme, rest)) = url.split_once("://") {
        let host_end = rest.find(['/', '?', '#']).unwrap_or(rest.len());
        if let Some(at) = rest[..host_end].rfind('@') {
            return format!("{scheme}://***@{}", &rest[at + 1..]);
        }
    }
    url.to_string()
}

/// Accepts `http(s)://host[:port][/]` only. The influxdb2 client replaces
/// the URL's path with `/api/v2/write`, so a path prefix (say a proxy's
/// `/influx`) would be silently dropped; refuse it instead.
fn check_url(url: &str) -> Result<(), SinkError> {
    let bad = |why: &str| {
        let shown = redacted_url(url);
        Err(SinkError::Config(format!("database.url = {shown:?}: {why}; write it as http://HOST:PORT")))
    };
    let Some(("http" | "https", rest)) = url.split_once("://") else {
        return bad("the scheme must be http or https");
    };
    let authority = rest.strip_suffix('/').unwrap_or(rest);
    if authority.is_empty() {
        return bad("no host");
    }
    if authority.contains(['/', '?', '#']) {
        return bad("a path, query or fragment is not supported");
    }
    if authority.contains('@') {
        return bad("credentials in the URL are not supported (use token_env or token_file)");
    }
    let host = match authority.rsplit_once(':') {
        Some((host, port)) if !port.ends_with(']') => host,
        _ => authority,
    };
    let host_ok = if let Some(ip6) = host.strip_prefix('[').and_then(|h| h.strip_suffix(']')) {
        !ip6.is_empty() && ip6.chars().all(|c| c.is_ascii_hexdigit() || c == ':' || c == '.')
    } else {
        !host.is_empty() && host.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '.' | '_'))
    };
    if !host_ok {
        return bad("the host must be a plain name or an IP address");
    }
    // A name ending in a numeric label is read as an IPv4 address by URL
    // parsers (WHATWG), so it must be one.
    let last_label = host.rsplit('.').next().unwrap_or_default();
    if !host.starts_with('[')
        && last_label.bytes().all(|b| b.is_ascii_digit())
        && !last_label.is_empty()
        && host.parse::<std::net::Ipv4Addr>().is_err()
    {
        return bad("not a valid IPv4 address");
    }
    if let Some((host, port)) = authority.rsplit_once(':') {
        // An IPv6 literal without a port, "[::1]", ends with ']'.
        if !port.ends_with(']') && (host.is_empty() || port.parse::<u16>().is_err()) {
            return bad("the port must be a number from 0 to 65535");
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {

    #[test]
    fn printed_urls_hide_credentials() {
        assert_eq!(redacted_url("http://u:p@db.plant:8086"), "http://***@db.plant:8086");
        assert_eq!(redacted_url("https://u:p%40x@db/path"), "https://***@db/path");
        assert_eq!(redacted_url("http://db.plant:8086"), "http://db.plant:8086");
        assert_eq!(redacted_url("http://db/?q=a@b"), "http://db/?q=a@b");
    }
    use super::*;

    fn settings() -> DatabaseSettings {
        DatabaseSettings::new("http://127.0.0.1:8428", "org", "bucket")
    }

    #[test]
    fn defaults_fill_in_when_parsed() {
        let s: DatabaseSettings = serde_json::from_str(r#"{"url":"http://db:8086","org":"o","bucket":"b"}"#).unwrap();
        assert_eq!(s.batch_lines, 5000);
        assert_eq!(s.timeout_s, 10.0);
        assert_eq!((s.backoff_initial_s, s.backoff_max_s), (0.5, 60.0));
        assert_eq!(s.outbox_quota_bytes, 512 << 20);
        s.validate().unwrap();
    }

    #[test]
    fn unknown_keys_are_refused() {
        let e =
            serde_json::from_str::<DatabaseSettings>(r#"{"url":"http://db:8086","org":"o","bucket":"b","token":"x"}"#)
                .unwrap_err();
        assert!(e.to_string().contains("unknown field `token`"), "{e}");
    }

    #[test]
    fn urls_with_paths_or_odd_schemes_are_refused() {
        for good in ["http://db:8086", "https://db.example/", "http://[::1]:8428", "http://[::1]"] {
            check_url(good).unwrap_or_else(|e| panic!("{good}: {e}"));
        }
        for bad in
            ["db:8086", "ftp://db", "http://", "http://db/influx", "http://db:x", "http://a b", "http://1.2.3.999"]
        {
            assert!(check_url(bad).is_err(), "{bad} accepted");
        }
    }

    #[test]
    fn validation_names_the_key() {
        let mut s = settings();
        s.timeout_s = 0.0;
        assert!(s.validate().unwrap_err().to_string().contains("timeout_s"));
        let mut s = settings();
        s.backoff_max_s = 0.1;
        assert!(s.validate().unwrap_err().to_string().contains("backoff_max_s"));
        let mut s = settings();
        s.batch_lines = 0;
        assert!(s.validate().unwrap_err().to_string().contains("batch_lines"));
    }

    #[test]
    fn token_from_env_file_or_none() {
        assert_eq!(settings().token().unwrap(), "");

        // The environment is given to the reader, never set process-wide.
        let env = |var: &str| (var == "LIFELEDGER_SINK_TEST_TOKEN_ENV").then(|| " env-token\n".to_string());
        let mut s = settings();
        s.token_env = Some("LIFELEDGER_SINK_TEST_TOKEN_ENV_UNSET".into());
        assert!(s.token_with(env).is_err(), "unset variable must be an error");
        s.token_env = Some("LIFELEDGER_SINK_TEST_TOKEN_ENV".into());
        assert_eq!(s.token_with(env).unwrap(), "env-token");
        let blank = |_: &str| Some("  ".to_string());
        assert!(s.token_with(blank).unwrap_err().to_string().contains("empty"));

        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("token");
        std::fs::write(&path, "file-token\n").unwrap();
        let mut s = settings();
        s.token_file = Some(path.clone());
        assert_eq!(s.token().unwrap(), "file-token");

        s.token_env = Some("LIFELEDGER_SINK_TEST_TOKEN_ENV".into());
        assert!(s.token().is_err(), "both set must be an error");

        std::fs::write(&path, "  \n").unwrap();
        s.token_env = None;
        assert!(s.token().unwrap_err().to_string().contains("empty"));
    }
}
