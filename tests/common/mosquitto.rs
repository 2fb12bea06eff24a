//! A real Mosquitto broker (Debian `mosquitto` 2.0) for one test.
//!
//! The generated config listens on 127.0.0.1 only, allows anonymous
//! clients, and lifts the per-client queue limits (`max_queued_messages
//! 100000`, `max_inflight_messages 0` = unlimited; both accepted by 2.0.11)
//! so a backlog built up while the service stops acking is kept, not
//! dropped by the broker.

use std::net::TcpStream;
use std::path::PathBuf;
use std::process::Child;

use tempfile::TempDir;

use super::free_port;
use super::process::{spawn, tail, terminate, wait_ready};

const MOSQUITTO: &str = "/usr/sbin/mosquitto";

/// A running broker; stopped (and its directory removed) on drop.
pub struct Mosquitto {
    /// TCP port of the MQTT listener on 127.0.0.1.
    pub port: u16,
    dir: TempDir,
    conf: PathBuf,
    log: PathBuf,
    child: Option<Child>,
}

impl Mosquitto {
    /// Starts a broker without persistence: a restart forgets sessions and
    /// queued messages, like a broker that crashed without a disk.
    pub fn start() -> Mosquitto {
        Mosquitto::start_with(false)
    }

    /// Starts a broker with persistence in its temporary directory, so
    /// [`Mosquitto::restart`] keeps persistent sessions, retained messages
    /// and queued QoS 1 messages (written on a clean SIGTERM shutdown).
    pub fn start_persistent() -> Mosquitto {
        Mosquitto::start_with(true)
    }

    fn start_with(persistence: bool) -> Mosquitto {
        let dir = tempfile::tempdir().expect("temp dir for mosquitto");
        let port = free_port();
        let conf = dir.path().join("mosquitto.conf");
        let log = dir.path().join("mosquitto.log");
        let mut text = format!(
            "listener {port} 127.0.0.1\n\
             allow_anonymous true\n\
             max_queued_messages 100000\n\
             max_inflight_messages 0\n\
             log_dest stderr\n\
             log_type error\nlog_type warning\nlog_type notice\nlog_type information\n"
        );
        if persistence {
            text.push_str(&format!(
                "persistence true\npersistence_location {}/\nautosave_interval 1\n",
                dir.path().display()
            ));
        } else {
            text.push_str("persistence false\n");
        }
        std::fs::write(&conf, text).expect("write mosquitto.conf");
        let mut broker = Mosquitto { port, dir, conf, log, child: None };
        broker.spawn();
        broker
    }

    /// `127.0.0.1`, for client options.
    pub fn host(&self) -> &'static str {
        "127.0.0.1"
    }

    /// Stops the broker (SIGTERM, then SIGKILL). Idempotent.
    pub fn stop(&mut self) {
        if let Some(mut child) = self.child.take() {
            terminate(&mut child);
        }
    }

    /// Stops the broker if it runs and starts it again on the same port
    /// with the same config (and persistence file, if any).
    pub fn restart(&mut self) {
        self.stop();
        self.spawn();
    }

    /// Whether the broker process is running.
    pub fn is_running(&mut self) -> bool {
        matches!(self.child.as_mut().map(Child::try_wait), Some(Ok(None)))
    }

    /// The broker's log so far, for failure messages.
    pub fn log(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap_or_default()
    }

    fn spawn(&mut self) {
        let args = vec!["-c".to_string(), self.conf.display().to_string()];
        let mut child = spawn(MOSQUITTO, &args, &self.log);
        let port = self.port;
        let what = format!("mosquitto on 127.0.0.1:{port}");
        wait_ready(&mut child, &what, &self.log, || TcpStream::connect(("127.0.0.1", port)).is_ok());
        self.child = Some(child);
    }
}

impl Drop for Mosquitto {
    fn drop(&mut self) {
        self.stop();
        if std::thread::panicking() {
            eprintln!("mosquitto log ({}):\n{}", self.dir.path().display(), tail(&self.log));
        }
    }
}
