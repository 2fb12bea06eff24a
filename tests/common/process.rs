//! Starting and stopping a server process owned by a test.
//!
//! Servers log to a file in their temporary directory (so test output stays
//! readable); when a start fails, the panic message carries the log's tail.

use std::fs::File;
use std::path::Path;
use std::process::{Child, Command, Stdio};

use super::{POLL_PAUSE, POLL_TRIES};

/// Spawns `program args` with stdout and stderr appended to `log`.
pub(crate) fn spawn(program: &str, args: &[String], log: &Path) -> Child {
    let out = File::options()
        .create(true)
        .append(true)
        .open(log)
        .unwrap_or_else(|e| panic!("open log {}: {e}", log.display()));
    let err = out.try_clone().expect("clone log handle");
    Command::new(program)
        .args(args)
        .stdin(Stdio::null())
        .stdout(out)
        .stderr(err)
        .spawn()
        .unwrap_or_else(|e| panic!("cannot start {program}: {e} (is it installed? see tests/run)"))
}

/// Stops a child we started: SIGTERM (so the server flushes and closes
/// cleanly), then SIGKILL if it has not exited after the polling budget.
/// Always reaps it.
pub(crate) fn terminate(child: &mut Child) {
    if matches!(child.try_wait(), Ok(Some(_))) {
        return;
    }
    // std only offers SIGKILL; `kill -TERM <pid>` targets exactly our child.
    let _ = Command::new("kill")
        .arg("-TERM")
        .arg(child.id().to_string())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status();
    for _ in 0..POLL_TRIES {
        if matches!(child.try_wait(), Ok(Some(_))) {
            return;
        }
        std::thread::sleep(POLL_PAUSE);
    }
    let _ = child.kill();
    let _ = child.wait();
}

/// Polls `ready` ([`POLL_TRIES`] times, [`POLL_PAUSE`] apart) until it
/// holds. Panics with the log's tail if the server exits first or never
/// gets ready.
pub(crate) fn wait_ready(child: &mut Child, what: &str, log: &Path, mut ready: impl FnMut() -> bool) {
    for _ in 0..POLL_TRIES {
        if let Ok(Some(status)) = child.try_wait() {
            panic!("{what} exited during start-up ({status}); log {}:\n{}", log.display(), tail(log));
        }
        if ready() {
            return;
        }
        std::thread::sleep(POLL_PAUSE);
    }
    terminate(child);
    panic!("{what} not ready after {POLL_TRIES} tries {POLL_PAUSE:?} apart; log {}:\n{}", log.display(), tail(log));
}

/// The last lines of a log file worth reading after a failure: warnings
/// and errors if there are any (shutdown chatter hides them otherwise),
/// else simply the last lines.
pub(crate) fn tail(log: &Path) -> String {
    let text = std::fs::read_to_string(log).unwrap_or_default();
    let loud = |l: &&str| {
        let l = l.to_ascii_lowercase();
        ["error", "warn", "fatal", "panic"].iter().any(|w| l.contains(w))
    };
    let mut lines: Vec<&str> = text.lines().filter(loud).collect();
    if lines.is_empty() {
        lines = text.lines().collect();
    }
    lines[lines.len().saturating_sub(30)..].join("\n")
}
