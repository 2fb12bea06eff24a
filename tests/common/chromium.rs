//! Headless Chromium for the page tests: the one set of flags and the one
//! bounded run (Debian's `chromium`, which tests/run installs).

use super::BoundedOutput;
use std::path::Path;
use std::process::{Command, Stdio};

/// Where Debian installs Chromium.
pub const CHROMIUM: &str = "/usr/bin/chromium";

/// Flags of every headless run: no sandbox (tests run as root in CI), no
/// network of its own, no first-run pages.
const FLAGS: [&str; 10] = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-dev-shm-usage",
    "--hide-scrollbars",
];

/// The Chromium binary, or a failure that says how to get it.
pub fn chromium() -> &'static str {
    assert!(
        Path::new(CHROMIUM).exists(),
        "headless Chromium not found at {CHROMIUM}: these tests need the Debian package `chromium`; run tests/run"
    );
    CHROMIUM
}

/// Headless Chromium on `url` with `extra` arguments, a virtual-time budget
/// of `budget_ms`, in `profile`, with the environment `env`; its stdout.
/// Bounded (`BoundedOutput`); a failed run fails the test with stderr.
pub fn run(url: &str, budget_ms: u32, extra: &[&str], profile: &Path, env: &[(&str, &str)]) -> String {
    let mut args: Vec<String> = FLAGS.iter().map(|s| s.to_string()).collect();
    args.push(format!("--virtual-time-budget={budget_ms}"));
    args.push(format!("--user-data-dir={}", profile.display()));
    args.extend(extra.iter().map(|s| s.to_string()));
    args.push(url.to_string());
    let mut cmd = Command::new(chromium());
    cmd.args(&args).stdin(Stdio::null());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let out = cmd.bounded_output().expect("run chromium");
    assert!(
        out.status.success(),
        "chromium {args:?} failed ({}):\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}
