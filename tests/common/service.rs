//! The live service as a test drives it: a configuration file for
//! `lifeledger run`, the sample stream a plant would send, a QoS 1
//! publisher for it, and [`Service`], the `lifeledger run` child process
//! with its JSON API.
//!
//! * [`ServiceConfig`]: the shared test plant (the tube SH-TUBE on TE-1 and
//!   PT-1, the fretting support SUPPORT on LOAD-1 and SLIP-1) and the
//!   `[mqtt]`, `[store]` and `[http]` sections on loopback; a test adds its
//!   own tables.
//! * [`samples`] and [`samples_with_header`]: minute-by-minute streams from
//!   [`T0`].
//! * [`publish_all`]: publishes a stream and returns once the broker has
//!   acknowledged every message; [`publish_messages`] the same for any
//!   topics and payloads.
//! * [`Service`]: started from a configuration, ready once `/healthz`
//!   answers; killed when the handle drops.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Duration;

use rumqttc::{Client, Event, MqttOptions, Packet, QoS};

use super::process::{tail, wait_ready};
use super::{http, poll_until, workspace_bin};

/// Time of the first sample of every stream: 2026-10-01T00:00:00Z.
pub const T0: i64 = 1_790_812_800;

/// One sample as published: tag, Unix time in seconds, value.
pub type Sample = (String, i64, f64);

/// What a test's configuration says beyond the shared plant and sections;
/// [`ServiceConfig::write`] puts the file together. Empty fields add
/// nothing.
#[derive(Debug, Default, Clone, Copy)]
pub struct ServiceConfig<'a> {
    /// `[plant] name`.
    pub plant: &'a str,
    /// `[mqtt] client_id` of the service.
    pub client_id: &'a str,
    /// More `[[tag]]` tables, after TE-1, PT-1, LOAD-1 and SLIP-1.
    pub tags: &'a str,
    /// Sub-tables of SH-TUBE after its geometry, e.g.
    /// `[component.thresholds]` or `[component.initial]`.
    pub tube: &'a str,
    /// Sub-tables of SUPPORT after its wear model.
    pub support: &'a str,
    /// More `[[component]]` tables, after SUPPORT.
    pub components: &'a str,
    /// Text after the `[http]` section, e.g. a `[database]` table.
    pub tail: &'a str,
}

impl ServiceConfig<'_> {
    /// Writes `dir/service.toml`, with the ledger store at
    /// `dir/ledger.sqlite`, the broker on 127.0.0.1:`mqtt_port` and the
    /// HTTP API on 127.0.0.1:`http_port`; returns the file's path.
    ///
    /// SUPPORT and the `components` come last before `[mqtt]`, so a test
    /// can cut them out of the text to reload without them.
    pub fn write(&self, dir: &Path, mqtt_port: u16, http_port: u16) -> PathBuf {
        let ServiceConfig { plant, client_id, tags, tube, support, components, tail } = self;
        let text = format!(
            r#"
[plant]
name = "{plant}"
[engine]
max_hold_s = 600
# A short reorder window, so the tests see held samples released by wall
# time (and persisted across crashes) within seconds.
reorder_window_s = 2
[[tag]]
name = "TE-1"
unit = "degC"
valid_range = [0, 800]
[[tag]]
name = "PT-1"
unit = "bar"
[[tag]]
name = "LOAD-1"
unit = "N"
[[tag]]
name = "SLIP-1"
unit = "um"
{tags}
[[component]]
name = "SH-TUBE"
unit = "U1"
kind = "tube"
material = "2.25Cr-1Mo"
design_temperature = {{ value = 570, unit = "degC" }}
design_pressure = {{ value = 180, unit = "bar" }}
metal_temperature = "TE-1"
pressure = "PT-1"
[component.geometry]
outside_diameter = {{ value = 44.5, unit = "mm" }}
wall = {{ value = 5.0, unit = "mm" }}
{tube}
[[component]]
name = "SUPPORT"
unit = "U1"
kind = "wear_contact"
material = "P22"
[component.wear]
model = "fretting"
normal_load = "LOAD-1"
slip_amplitude = "SLIP-1"
frequency = {{ value = 25, unit = "Hz" }}
wear_coefficient = 1.0e-9
contact_area_mm2 = 30.0
allowable_depth = {{ value = 0.5, unit = "mm" }}
{support}
{components}
[mqtt]
port = {mqtt_port}
client_id = "{client_id}"
reconnect_min_s = 0.1
reconnect_max_s = 0.5
[[mqtt.subscription]]
topic = "plant/{{tag}}"
[store]
path = "{store}"
health_interval_s = 1
[http]
listen = "127.0.0.1:{http_port}"
{tail}
# The test plant's alarm philosophy makes creep life fraction an operator
# alarm (its default class is an engineering alert), so the acknowledge and
# shelve flows are exercised on it.
[alarms.rationale.creep_life_fraction]
class = "operator"
"#,
            store = dir.join("ledger.sqlite").display()
        );
        let p = dir.join("service.toml");
        std::fs::write(&p, text).unwrap();
        p
    }
}

/// The sample stream for the shared plant: minute by minute from [`T0`],
/// four tags (TE-1, PT-1, LOAD-1, SLIP-1), a start-up ramp, a load swing
/// and an over-temperature hour on the tube.
pub fn samples(minutes: i64) -> Vec<Sample> {
    stream(minutes, false)
}

/// [`samples`] with a fifth tag, TE-2, right after TE-1 each minute: the
/// same ramp, then a steadier temperature for a header.
pub fn samples_with_header(minutes: i64) -> Vec<Sample> {
    stream(minutes, true)
}

fn stream(minutes: i64, header: bool) -> Vec<Sample> {
    let mut v = vec![];
    for m in 0..minutes {
        let ts = T0 + 60 * m;
        let x = m as f64;
        let te = if m < 120 {
            300.0 + 2.3 * x
        } else {
            568.0 + 6.0 * (x / 37.0).sin() + if (300..360).contains(&m) { 25.0 } else { 0.0 }
        };
        let pt = 150.0 + 20.0 * (x / 90.0).cos();
        v.push(("TE-1".into(), ts, te));
        if header {
            let te2 = if m < 120 { 300.0 + 2.2 * x } else { 562.0 + 3.0 * (x / 53.0).cos() };
            v.push(("TE-2".into(), ts, te2));
        }
        v.push(("PT-1".into(), ts, pt));
        v.push(("LOAD-1".into(), ts, 80.0 + 10.0 * (x / 13.0).sin()));
        v.push(("SLIP-1".into(), ts, 40.0 + 5.0 * (x / 29.0).cos()));
    }
    v
}

/// The JSON payload the service decodes: `{"value": v, "timestamp": ts}`.
fn payload(ts: i64, v: f64) -> Vec<u8> {
    format!("{{\"value\": {v:?}, \"timestamp\": {ts}}}").into_bytes()
}

/// The largest packet MQTT 3.1.1 can frame: a remaining length of at most
/// 268 435 455 bytes (OASIS MQTT 3.1.1, section 2.2.3; from memory).
pub const MQTT_MAX_PACKET_BYTES: usize = 268_435_455;

/// Publishes every sample to `plant/{tag}` on 127.0.0.1:`port` with QoS 1
/// as MQTT client `id`, and returns once the broker acknowledged every
/// message.
pub fn publish_all(port: u16, s: &[Sample], id: &str) {
    publish_all_paced(port, s, id, Duration::ZERO);
}

/// [`publish_all`] with `pause` after each message.
pub fn publish_all_paced(port: u16, s: &[Sample], id: &str, pause: Duration) {
    let messages = s.iter().map(|(tag, ts, v)| (format!("plant/{tag}"), payload(*ts, *v))).collect();
    publish_paced(port, messages, id, pause);
}

/// Publishes each (topic, payload) in order on 127.0.0.1:`port` with QoS 1
/// as MQTT client `id`, and returns once the broker acknowledged every
/// message.
pub fn publish_messages(port: u16, messages: Vec<(impl Into<String>, Vec<u8>)>, id: &str) {
    publish_paced(port, messages, id, Duration::ZERO);
}

/// [`publish_messages`] with `pause` after each message (a steady stream,
/// as a plant's gateways send).
pub fn publish_paced(port: u16, messages: Vec<(impl Into<String>, Vec<u8>)>, id: &str, pause: Duration) {
    let messages: Vec<(String, Vec<u8>)> = messages.into_iter().map(|(t, p)| (t.into(), p)).collect();
    if messages.is_empty() {
        return;
    }
    let mut o = MqttOptions::new(id, "127.0.0.1", port);
    o.set_keep_alive(Duration::from_secs(30));
    o.set_inflight(100);
    // Up to MQTT's largest packet, so a test can publish oversized messages.
    o.set_max_packet_size(MQTT_MAX_PACKET_BYTES, MQTT_MAX_PACKET_BYTES);
    let (client, mut conn) = Client::new(o, 1000);
    let n = messages.len();
    let pubber = std::thread::spawn(move || {
        for (topic, p) in messages {
            client.publish(topic, QoS::AtLeastOnce, false, p).unwrap();
            if !pause.is_zero() {
                std::thread::sleep(pause);
            }
        }
        client
    });
    // Bounded: a broker that stops answering fails the test after
    // PUBLISH_IDLE_POLLS quiet polls in a row instead of hanging it.
    let (mut acked, mut idle) = (0, 0);
    while acked < n {
        match conn.recv_timeout(PUBLISH_IDLE_WAIT) {
            Ok(Ok(Event::Incoming(Packet::PubAck(_)))) => {
                acked += 1;
                idle = 0;
            }
            Ok(Ok(_)) => idle = 0,
            Ok(Err(e)) => panic!("publisher connection failed: {e}"),
            Err(rumqttc::RecvTimeoutError::Disconnected) => {
                panic!("publisher connection closed after {acked} of {n} acknowledgements")
            }
            Err(rumqttc::RecvTimeoutError::Timeout) => {
                idle += 1;
                assert!(
                    idle < PUBLISH_IDLE_POLLS,
                    "the broker acknowledged {acked} of {n} messages, then nothing for {PUBLISH_IDLE_POLLS} waits of {PUBLISH_IDLE_WAIT:?}"
                );
            }
        }
    }
    let client = pubber.join().unwrap();
    let _ = client.disconnect();
}

/// Quiet waits of [`PUBLISH_IDLE_WAIT`] in a row before
/// [`publish_messages`] gives up (about as long as [`poll_until`]'s budget).
const PUBLISH_IDLE_POLLS: u32 = 60;

/// One wait for the publisher's next event.
const PUBLISH_IDLE_WAIT: Duration = Duration::from_secs(1);

/// Numbers the log files of successive starts, so a restart keeps the log
/// of the run before it.
static STARTS: AtomicUsize = AtomicUsize::new(0);

/// A running `lifeledger run --config ... --init-ledger`; killed (SIGKILL)
/// on drop.
pub struct Service {
    /// Port of the HTTP API on 127.0.0.1.
    pub http_port: u16,
    child: Child,
    log: PathBuf,
}

impl Service {
    /// Starts the service with `config` (whose `[http]` listens on
    /// `http_port`) and waits until `/healthz` answers 200. Its stderr goes
    /// to a log beside the config; if it exits or never gets ready, the
    /// panic carries the log's tail.
    pub fn start(config: &Path, http_port: u16) -> Service {
        Service::start_with_env(config, http_port, &[])
    }

    /// [`Service::start`] with extra environment variables for the child
    /// only (for example the operator token named by `[http] token_env`).
    pub fn start_with_env(config: &Path, http_port: u16, env: &[(&str, &str)]) -> Service {
        let n = STARTS.fetch_add(1, Ordering::Relaxed);
        let log = config.with_extension(format!("{n}.log"));
        let file = std::fs::File::create(&log).unwrap();
        let mut child = Command::new(workspace_bin())
            // A test's ledger starts new on the first start; later starts
            // open the one that is there.
            .args(["run", "--config", config.to_str().unwrap(), "--init-ledger"])
            .envs(env.iter().copied())
            .env("RUST_LOG", "info")
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(file)
            .spawn()
            .unwrap();
        let what = format!("lifeledger run (HTTP on 127.0.0.1:{http_port})");
        wait_ready(&mut child, &what, &log, || http::get(http_port, "/healthz").is_ok_and(|r| r.status == 200));
        Service { http_port, child, log }
    }

    /// `GET target` parsed as JSON, if it answers 200 with JSON.
    pub fn get_json(&self, target: &str) -> Option<serde_json::Value> {
        let r = http::get(self.http_port, target).ok().filter(|r| r.status == 200)?;
        serde_json::from_str(&r.text()).ok()
    }

    /// The snapshot at `/api/components`: ledgers, counters, alarms.
    pub fn snapshot(&self) -> Option<serde_json::Value> {
        self.get_json("/api/components")
    }

    /// Waits until the snapshot says the service is connected to the broker.
    pub fn wait_connected(&self) {
        poll_until("MQTT connection", || self.snapshot().filter(|s| s["mqtt_connected"] == true));
    }

    /// Waits until every component is integrated up to `last_ts` (the
    /// newest sample's time) and returns that snapshot.
    pub fn wait_until_integrated(&self, last_ts: i64) -> serde_json::Value {
        let want = chrono::DateTime::from_timestamp(last_ts, 0).unwrap().format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string();
        poll_until("the ledger to reach the last sample", || {
            self.snapshot().filter(|s| {
                s["components"].as_array().is_some_and(|c| c.iter().all(|c| c["integrated_to"] == want.as_str()))
            })
        })
    }

    /// Sends signal `sig` (`"HUP"`, `"TERM"`, ...) to the service with
    /// `kill(1)`.
    pub fn signal(&self, sig: &str) {
        Command::new("kill").args([&format!("-{sig}"), &self.child.id().to_string()]).status().unwrap();
    }

    /// Waits until the service exits by itself (bounded by [`poll_until`]);
    /// its exit status and log.
    pub fn wait_exit(&mut self, what: &str) -> (ExitStatus, String) {
        let status = poll_until(what, || self.child.try_wait().unwrap());
        (status, std::fs::read_to_string(&self.log).unwrap_or_default())
    }

    /// SIGKILL, as a crash would, and reaps the process.
    pub fn kill9(mut self) {
        self.child.kill().unwrap();
        self.child.wait().unwrap();
    }

    /// SIGTERM and the exit status once the service has stopped.
    pub fn sigterm(self) -> ExitStatus {
        self.sigterm_with_log().0
    }

    /// SIGTERM, the exit status once the service has stopped, and its log.
    pub fn sigterm_with_log(mut self) -> (ExitStatus, String) {
        self.signal("TERM");
        self.wait_exit("the service to stop after SIGTERM")
    }
}

impl Drop for Service {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
        if std::thread::panicking() {
            eprintln!("lifeledger log ({}):\n{}", self.log.display(), tail(&self.log));
        }
    }
}
