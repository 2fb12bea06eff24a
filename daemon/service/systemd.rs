//! The service manager's side channel: readiness, watchdog and status
//! messages over the `NOTIFY_SOCKET` datagram socket (the protocol of
//! `sd_notify(3)`: `KEY=value` lines in one datagram), and the priority
//! prefix journald reads from each log line on standard error
//! (`<N>`, syslog levels: 3 error, 4 warning, 6 info, 7 debug;
//! `sd-daemon(3)`).
//!
//! Without `NOTIFY_SOCKET` (not started by systemd with `Type=notify`)
//! every message is a no-op; without `JOURNAL_STREAM` log lines carry no
//! prefix. The variables are read once, by the binary at start-up, and
//! passed in here, so that tests can hand them to a child process only.

use std::io::Write;
use std::os::unix::net::UnixDatagram;
use std::time::Duration;

/// Where readiness, watchdog and status messages go.
#[derive(Debug, Default)]
pub struct Notifier {
    socket: Option<(UnixDatagram, String)>,
    /// The watchdog interval systemd expects pings within
    /// (`WATCHDOG_USEC`), when it has one for this process.
    pub watchdog: Option<Duration>,
}

impl Notifier {
    /// From the values of `NOTIFY_SOCKET`, `WATCHDOG_USEC` and
    /// `WATCHDOG_PID` (this process's id, when set, or it is not ours).
    pub fn new(notify_socket: Option<String>, watchdog_usec: Option<String>, watchdog_pid: Option<String>) -> Notifier {
        let socket = notify_socket.filter(|s| !s.is_empty()).and_then(|path| match UnixDatagram::unbound() {
            Ok(s) => Some((s, path)),
            Err(e) => {
                tracing::warn!(
                    "NOTIFY_SOCKET {path}: cannot make a datagram socket ({e}); systemd is not told of readiness"
                );
                None
            }
        });
        let ours = watchdog_pid.is_none_or(|p| p.trim() == std::process::id().to_string());
        let watchdog = watchdog_usec
            .and_then(|u| u.trim().parse::<u64>().ok())
            .filter(|&u| u > 0 && ours && socket.is_some())
            .map(Duration::from_micros);
        Notifier { socket, watchdog }
    }

    /// From this process's environment (the binary's start-up only).
    pub fn from_env() -> Notifier {
        let var = |k: &str| std::env::var(k).ok();
        Notifier::new(var("NOTIFY_SOCKET"), var("WATCHDOG_USEC"), var("WATCHDOG_PID"))
    }

    /// Sends `message` (newline-separated `KEY=value` lines); false when
    /// there is no socket or the send failed (logged once per kind).
    pub fn send(&self, message: &str) -> bool {
        let Some((sock, path)) = &self.socket else { return false };
        let r = if let Some(name) = path.strip_prefix('@') {
            send_abstract(sock, name, message)
        } else {
            sock.send_to(message.as_bytes(), path).map(|_| ())
        };
        match r {
            Ok(()) => true,
            Err(e) => {
                tracing::warn!("NOTIFY_SOCKET {path}: {e}");
                false
            }
        }
    }

    /// `READY=1` with a status line.
    pub fn ready(&self, status: &str) -> bool {
        self.send(&format!("READY=1\nSTATUS={}", one_line(status)))
    }

    /// `WATCHDOG=1` with a status line.
    pub fn watchdog_ping(&self, status: &str) -> bool {
        self.send(&format!("WATCHDOG=1\nSTATUS={}", one_line(status)))
    }

    /// A status line alone (no ping: the watchdog is not fed).
    pub fn status(&self, status: &str) -> bool {
        self.send(&format!("STATUS={}", one_line(status)))
    }

    /// `STOPPING=1`.
    pub fn stopping(&self) -> bool {
        self.send("STOPPING=1\nSTATUS=stopping")
    }
}

/// A status fits one `KEY=value` line.
fn one_line(s: &str) -> String {
    s.replace(['\n', '\r'], " ")
}

/// Linux abstract socket names (`@name` in `NOTIFY_SOCKET`).
#[cfg(target_os = "linux")]
fn send_abstract(sock: &UnixDatagram, name: &str, message: &str) -> std::io::Result<()> {
    use std::os::linux::net::SocketAddrExt;
    let addr = std::os::unix::net::SocketAddr::from_abstract_name(name.as_bytes())?;
    sock.send_to_addr(message.as_bytes(), &addr).map(|_| ())
}

#[cfg(not(target_os = "linux"))]
fn send_abstract(_: &UnixDatagram, _: &str, _: &str) -> std::io::Result<()> {
    Err(std::io::Error::new(std::io::ErrorKind::Unsupported, "abstract socket names need Linux"))
}

/// The journald priority prefix of a log level (`sd-daemon(3)`).
pub fn priority_prefix(level: &tracing::Level) -> &'static [u8] {
    match *level {
        tracing::Level::ERROR => b"<3>",
        tracing::Level::WARN => b"<4>",
        tracing::Level::INFO => b"<6>",
        tracing::Level::DEBUG | tracing::Level::TRACE => b"<7>",
    }
}

/// Log writer for standard error that starts each event with its journald
/// priority prefix when `prefix` is on (standard error is the journal:
/// `JOURNAL_STREAM` is set).
#[derive(Debug, Clone, Copy)]
pub struct JournalStderr {
    pub prefix: bool,
}

/// One event's writer: the prefix goes before its first byte.
pub struct PrefixedStderr {
    prefix: Option<&'static [u8]>,
}

impl Write for PrefixedStderr {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let mut err = std::io::stderr().lock();
        if let Some(p) = self.prefix.take() {
            // One write for prefix and line, so that lines of concurrent
            // events do not interleave.
            let mut line = Vec::with_capacity(p.len() + buf.len());
            line.extend_from_slice(p);
            line.extend_from_slice(buf);
            err.write_all(&line)?;
            return Ok(buf.len());
        }
        err.write(buf)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        std::io::stderr().flush()
    }
}

impl<'a> tracing_subscriber::fmt::MakeWriter<'a> for JournalStderr {
    type Writer = PrefixedStderr;

    fn make_writer(&'a self) -> PrefixedStderr {
        PrefixedStderr { prefix: None }
    }

    fn make_writer_for(&'a self, meta: &tracing::Metadata<'_>) -> PrefixedStderr {
        PrefixedStderr { prefix: self.prefix.then(|| priority_prefix(meta.level())) }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_reach_the_socket_as_one_datagram() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("notify");
        let rx = UnixDatagram::bind(&path).unwrap();
        rx.set_read_timeout(Some(Duration::from_secs(10))).unwrap();
        let n = Notifier::new(Some(path.display().to_string()), Some("2000000".into()), None);
        assert_eq!(n.watchdog, Some(Duration::from_secs(2)));
        assert!(n.ready("intake\nrunning"));
        let mut buf = [0u8; 256];
        let k = rx.recv(&mut buf).unwrap();
        assert_eq!(std::str::from_utf8(&buf[..k]).unwrap(), "READY=1\nSTATUS=intake running");
    }

    #[test]
    fn without_a_socket_nothing_is_sent_and_no_watchdog_is_kept() {
        let n = Notifier::new(None, Some("2000000".into()), None);
        assert!(!n.ready("x"));
        assert_eq!(n.watchdog, None);
        // A watchdog meant for another process is not ours.
        let n = Notifier::new(Some("/nonexistent".into()), Some("2000000".into()), Some("1".into()));
        assert_eq!(n.watchdog, None);
    }

    #[test]
    fn priorities_follow_sd_daemon() {
        // sd-daemon(3): SD_ERR "<3>", SD_WARNING "<4>", SD_INFO "<6>", SD_DEBUG "<7>".
        assert_eq!(priority_prefix(&tracing::Level::ERROR), b"<3>");
        assert_eq!(priority_prefix(&tracing::Level::WARN), b"<4>");
        assert_eq!(priority_prefix(&tracing::Level::INFO), b"<6>");
        assert_eq!(priority_prefix(&tracing::Level::DEBUG), b"<7>");
    }
}
