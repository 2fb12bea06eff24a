//! Shared harness for the integration tests: real servers, started per test.
//!
//! Each test that needs a broker or a database starts its own
//! [`Mosquitto`] or [`VictoriaMetrics`] on a free loopback port with its own
//! temporary directory, and the server is stopped when the handle drops.
//! Nothing here mocks a server; nothing listens beyond 127.0.0.1.
//!
//! * [`free_port`]: a port the kernel just handed out on 127.0.0.1.
//! * [`poll_until`]: the one bounded waiting loop (a count, not a clock).
//! * [`Mosquitto`]: `/usr/sbin/mosquitto` with a generated config.
//! * [`VictoriaMetrics`]: `victoria-metrics` taking InfluxDB v2 writes at
//!   `/api/v2/write`, with [`VictoriaMetrics::export`] and
//!   [`VictoriaMetrics::query`] to read back what arrived.
//! * [`http`]: a tiny blocking HTTP/1.1 client over `std::net::TcpStream`,
//!   so the harness needs no HTTP crate.
//! * [`workspace_bin`]: path of the built `lifeledger` binary.
//! * [`output_within_budget`]: a command's output, failing the test if it
//!   does not exit (for commands that must refuse rather than run on).
//! * [`service`]: the live service under test, `lifeledger run` as a child
//!   process, with its configuration, sample streams and a QoS 1 publisher.
//!
//! Use it from a test file with `mod common;`. Every test crate compiles
//! this module again and uses only part of it, hence the `allow` below.
#![allow(dead_code, unused_imports)]

pub mod chromium;
pub mod http;
mod mosquitto;
mod process;
pub mod service;
mod victoria;

use std::net::TcpListener;
use std::path::PathBuf;
use std::time::Duration;

pub use mosquitto::Mosquitto;
pub use victoria::{ExportedSeries, VictoriaMetrics};

/// How many times [`poll_until`] tries before it gives up.
pub const POLL_TRIES: u32 = 1200;
/// Pause between two tries of [`poll_until`].
pub const POLL_PAUSE: Duration = Duration::from_millis(50);
/// How many [`POLL_PAUSE`]s a command run by [`BoundedOutput`] may take to
/// exit (5 minutes): a guard against a hang, not a speed limit, so it is
/// generous enough for a debug-build replay of the demo history on a
/// loaded 2-core machine (about 70 s seen there, against 10 s when quiet).
pub const EXIT_TRIES: u32 = 6000;

/// A TCP port on 127.0.0.1 that was free a moment ago (bind to port 0 and
/// let the kernel choose). Another process could take it before the server
/// binds it; the servers' start functions then fail with their log.
pub fn free_port() -> u16 {
    let listener = TcpListener::bind("127.0.0.1:0").expect("bind 127.0.0.1:0");
    listener.local_addr().expect("local address").port()
}

/// Calls `probe` up to [`POLL_TRIES`] times, [`POLL_PAUSE`] apart, until it
/// returns `Some`; panics naming `what` when it never does. Bounded by count
/// so a slow machine waits longer per try but never flakes on a deadline
/// tighter than the count allows.
pub fn poll_until<T>(what: &str, probe: impl FnMut() -> Option<T>) -> T {
    poll_until_tries(what, POLL_TRIES, probe)
}

/// [`poll_until`] with its own count of tries, for waits on something that
/// runs on its own clock (a demo scenario) and so needs more than
/// [`POLL_TRIES`] on a loaded machine; still bounded.
pub fn poll_until_tries<T>(what: &str, tries: u32, mut probe: impl FnMut() -> Option<T>) -> T {
    for _ in 0..tries {
        if let Some(v) = probe() {
            return v;
        }
        std::thread::sleep(POLL_PAUSE);
    }
    panic!("gave up waiting for {what} after {tries} tries {POLL_PAUSE:?} apart");
}

/// Path of the `lifeledger` binary cargo built for these tests.
///
/// `CARGO_BIN_EXE_<name>` is set only while compiling integration tests;
/// this module is compiled as part of each of them, so `env!` works here.
pub fn workspace_bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_lifeledger"))
}

/// Runs `cmd` to its exit and returns its output; if it has not exited
/// within the polling budget, kills it and fails the test naming `what`.
/// For commands that must refuse at once (`lifeledger run` on a bad
/// configuration), which would otherwise run, and hang the test, forever.
/// Output goes through files, so a chatty child never blocks on a pipe.
pub fn output_within_budget(mut cmd: std::process::Command, what: &str) -> std::process::Output {
    run_within_budget(&mut cmd, what)
}

/// `Command::output` bounded by the polling budget: a child that does not
/// exit (a hung browser, a command that started serving instead of
/// exiting) is killed and the test fails naming the command, instead of
/// the suite hanging.
pub trait BoundedOutput {
    /// Like `Command::output`, bounded (see [`output_within_budget`]).
    fn bounded_output(&mut self) -> std::io::Result<std::process::Output>;
}

impl BoundedOutput for std::process::Command {
    fn bounded_output(&mut self) -> std::io::Result<std::process::Output> {
        let what = format!("{:?}", self);
        Ok(run_within_budget(self, &what))
    }
}

fn run_within_budget(cmd: &mut std::process::Command, what: &str) -> std::process::Output {
    let dir = tempfile::tempdir().expect("a temporary directory for the output");
    let (out_path, err_path) = (dir.path().join("stdout"), dir.path().join("stderr"));
    let mut child = cmd
        .stdin(std::process::Stdio::null())
        .stdout(std::fs::File::create(&out_path).unwrap())
        .stderr(std::fs::File::create(&err_path).unwrap())
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start {what}: {e}"));
    let mut status = None;
    for _ in 0..EXIT_TRIES {
        if let Some(s) = child.try_wait().unwrap() {
            status = Some(s);
            break;
        }
        std::thread::sleep(POLL_PAUSE);
    }
    let Some(status) = status else {
        let _ = child.kill();
        let _ = child.wait();
        panic!(
            "{what} did not exit within {EXIT_TRIES} polls {POLL_PAUSE:?} apart; stderr:\n{}",
            std::fs::read_to_string(&err_path).unwrap_or_default()
        );
    };
    std::process::Output {
        status,
        stdout: std::fs::read(&out_path).unwrap_or_default(),
        stderr: std::fs::read(&err_path).unwrap_or_default(),
    }
}

/// The shipped demo history's rows with timestamps in [`from`, `to`)
/// (RFC 3339 UTC sorts by text), with the CSV header.
pub fn demo_rows(from: &str, to: &str) -> String {
    use std::io::Read;
    let mut text = String::new();
    flate2::read::GzDecoder::new(std::fs::File::open("config/demo/history.csv.gz").unwrap())
        .read_to_string(&mut text)
        .unwrap();
    let mut out = String::from("timestamp,tag,value,quality\n");
    for line in text.lines().skip(1) {
        let t = line.get(..20).unwrap_or("");
        if t >= from && t < to {
            out.push_str(line);
            out.push('\n');
        }
    }
    out
}
