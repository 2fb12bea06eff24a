//! A real VictoriaMetrics single-node server (Debian `victoria-metrics`
//! 1.79) for one test, taking InfluxDB v2 writes at `/api/v2/write`.
//!
//! What VictoriaMetrics does with InfluxDB line protocol (observed with
//! 1.79.5 through `/api/v2/write?org=..&bucket=..&precision=ns`):
//!
//! * `m,tag=v f=1.5,g=2i,ok=true 1700000000123456789` becomes one series
//!   per field, named `{measurement}_{field}`: `m_f` and `m_g` and `m_ok`,
//!   each with label `tag="v"`. Escaped tag values arrive unescaped
//!   (`component=SH\ 1` gives label `component="SH 1"`).
//! * No `db` label is added from `bucket` or `org` on the v2 endpoint
//!   (only the v1 `?db=` parameter adds one).
//! * Integers and booleans become floats (`2i` -> 2, `true` -> 1). String
//!   fields are stored as the number 0: text such as an alarm `message`
//!   does not survive.
//! * Floats are stored as decimals of about 15 significant digits, so
//!   `0.43210000000000004` comes back as `0.4321`: compare with a relative
//!   tolerance near 1e-12, not bit for bit.
//! * Timestamps are trimmed to milliseconds (`-influxTrimTimestamp=1ms`):
//!   export shows 1700000000123 for ...123456789 ns.
//! * Unparsable lines are logged and skipped; the request still gets 204.
//! * Without deduplication, writing the same point twice stores two
//!   samples with the same timestamp. With `-dedup.minScrapeInterval=1ms`
//!   (set here, and needed in production for design invariant 4) only one
//!   sample per series and millisecond remains, the later write's value.
//! * Samples older than `-retentionPeriod` (100 years here) are dropped, so
//!   tests use realistic event times (e.g. 2023), not 0.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Child;

use serde::Deserialize;
use tempfile::TempDir;

use super::free_port;
use super::http::{self, encode};
use super::process::{spawn, tail, terminate, wait_ready};

const VICTORIA_METRICS: &str = "victoria-metrics";

/// One series as `/api/v1/export` returns it.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct ExportedSeries {
    /// Labels, including `__name__`.
    pub metric: BTreeMap<String, String>,
    /// Sample values, oldest first.
    pub values: Vec<f64>,
    /// Sample times in milliseconds since the epoch.
    pub timestamps: Vec<i64>,
}

impl ExportedSeries {
    /// The metric name (`__name__`).
    pub fn name(&self) -> &str {
        self.metric.get("__name__").map(String::as_str).unwrap_or("")
    }

    /// The value of label `key`, if present.
    pub fn label(&self, key: &str) -> Option<&str> {
        self.metric.get(key).map(String::as_str)
    }

    /// `(timestamp_ms, value)` pairs.
    pub fn samples(&self) -> Vec<(i64, f64)> {
        self.timestamps.iter().copied().zip(self.values.iter().copied()).collect()
    }
}

/// A running VictoriaMetrics; stopped (and its data removed) on drop.
pub struct VictoriaMetrics {
    /// HTTP port on 127.0.0.1 (write, query, export, health).
    pub port: u16,
    dir: TempDir,
    log: PathBuf,
    child: Option<Child>,
    /// Flags beyond the defaults, kept for [`VictoriaMetrics::start_again`].
    extra: Vec<String>,
}

impl VictoriaMetrics {
    /// Starts a server on a free port with an empty data directory and
    /// waits until `/health` answers `OK`.
    pub fn start() -> VictoriaMetrics {
        VictoriaMetrics::start_with(&[])
    }

    /// [`VictoriaMetrics::start`] with more command-line flags, e.g.
    /// `-httpAuth.username=...` for a server that refuses every write
    /// carrying a token (HTTP 401) while `/health` still answers.
    pub fn start_with(extra: &[&str]) -> VictoriaMetrics {
        let dir = tempfile::tempdir().expect("temp dir for victoria-metrics");
        let log = dir.path().join("victoria-metrics.log");
        let extra = extra.iter().map(|s| s.to_string()).collect();
        let mut vm = VictoriaMetrics { port: free_port(), dir, log, child: None, extra };
        vm.spawn();
        vm
    }

    /// `http://127.0.0.1:PORT`, the base URL for the InfluxDB v2 API.
    pub fn url(&self) -> String {
        format!("http://127.0.0.1:{}", self.port)
    }

    /// Stops the server cleanly (flush, SIGTERM), keeping the data
    /// directory, to simulate a database outage. Idempotent.
    pub fn stop(&mut self) {
        if let Some(mut child) = self.child.take() {
            let _ = http::get(self.port, "/internal/force_flush");
            terminate(&mut child);
        }
    }

    /// Starts the server again on the same port and data directory after
    /// [`VictoriaMetrics::stop`].
    pub fn start_again(&mut self) {
        assert!(self.child.is_none(), "victoria-metrics is still running");
        self.spawn();
    }

    /// Starts the server again like [`VictoriaMetrics::start_again`], but
    /// without the extra flags it was started with.
    pub fn restart_without_flags(&mut self) {
        self.extra.clear();
        self.start_again();
    }

    /// Whether the server process is running.
    pub fn is_running(&mut self) -> bool {
        matches!(self.child.as_mut().map(Child::try_wait), Some(Ok(None)))
    }

    /// Every series matching the series selector (e.g. `{__name__=~"m_.*"}`
    /// or `component_state_wear_index{component="SH 1"}`), sorted by labels.
    /// Flushes first, so writes acknowledged before the call are included.
    pub fn export(&self, match_selector: &str) -> Vec<ExportedSeries> {
        self.flush();
        let target = format!("/api/v1/export?match[]={}", encode(match_selector));
        let resp = http::get(self.port, &target).unwrap_or_else(|e| panic!("GET {target} on victoria-metrics: {e}"));
        assert_eq!(resp.status, 200, "export {match_selector}: {}", resp.text());
        let mut series: Vec<ExportedSeries> = resp
            .text()
            .lines()
            .filter(|l| !l.trim().is_empty())
            .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("export line {l:?}: {e}")))
            .collect();
        series.sort_by(|a, b| a.metric.cmp(&b.metric));
        series
    }

    /// Result of an instant PromQL/MetricsQL query at `time` (Unix seconds),
    /// the whole JSON answer (`{"status":"success","data":{...}}`).
    pub fn query(&self, promql: &str, time: f64) -> serde_json::Value {
        self.flush();
        let target = format!("/api/v1/query?query={}&time={time}", encode(promql));
        let resp = http::get(self.port, &target).unwrap_or_else(|e| panic!("GET {target} on victoria-metrics: {e}"));
        assert_eq!(resp.status, 200, "query {promql}: {}", resp.text());
        serde_json::from_slice(&resp.body).unwrap_or_else(|e| panic!("query answer: {e}"))
    }

    /// Makes recently written samples visible to export and query.
    pub fn flush(&self) {
        let resp = http::get(self.port, "/internal/force_flush")
            .unwrap_or_else(|e| panic!("force_flush on victoria-metrics: {e}"));
        assert_eq!(resp.status, 200, "force_flush: {}", resp.text());
    }

    /// The server's log so far, for failure messages.
    pub fn log(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap_or_default()
    }

    fn spawn(&mut self) {
        let mut args = vec![
            format!("-httpListenAddr=127.0.0.1:{}", self.port),
            format!("-storageDataPath={}", self.dir.path().join("data").display()),
            "-retentionPeriod=100y".to_string(),
            // Fresh samples are visible to queries at once.
            "-search.latencyOffset=0s".to_string(),
            "-search.disableCache".to_string(),
            // One sample per series and millisecond: a retried batch
            // overwrites itself, as it does in InfluxDB.
            "-dedup.minScrapeInterval=1ms".to_string(),
        ];
        args.extend(self.extra.iter().cloned());
        let mut child = spawn(VICTORIA_METRICS, &args, &self.log);
        let port = self.port;
        let what = format!("victoria-metrics on 127.0.0.1:{port}");
        wait_ready(
            &mut child,
            &what,
            &self.log,
            || matches!(http::get(port, "/health"), Ok(r) if r.status == 200 && r.text().trim() == "OK"),
        );
        self.child = Some(child);
    }
}

impl Drop for VictoriaMetrics {
    fn drop(&mut self) {
        if let Some(mut child) = self.child.take() {
            terminate(&mut child);
        }
        if std::thread::panicking() {
            eprintln!("victoria-metrics log ({}):\n{}", self.dir.path().display(), tail(&self.log));
        }
    }
}
