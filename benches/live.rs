//! Live service benchmark with a load generator: a real mosquitto broker on
//! loopback, real MQTT clients (rumqttc, QoS 1) and the release
//! `lifeledger run` binary. One run reports:
//!
//! 1. **Sustained zero-loss throughput** against a do-nothing subscriber.
//!    A load generator publishes N tag messages (default 200 000; JSON
//!    `{"value": v, "timestamp": epoch_s}`, 100 tubes × 2 tags, increasing
//!    timestamps) with QoS 1 as fast as the broker acknowledges them
//!    (inflight 500).
//!    (a) Baseline: a subscriber to `plant/#` (QoS 1, persistent session,
//!    automatic acks) that only counts; rate from the first publish to its
//!    last receive (first-to-last-receive is printed too).
//!    (b) The same stream into `lifeledger run` (100 tubes, no database),
//!    which acknowledges each message only after its SQLite group commit.
//!    The stream ends with an alarm command (shelve) as end marker: the
//!    ledger applies it in order and publishes its event right after the
//!    commit that acknowledges everything before it, which times "all
//!    integrated" without the up-to-0.5 s lag of the HTTP snapshot (the
//!    snapshot-poll figure is printed too, and used if the event is lost).
//!    The snapshot then gives `engine.accepted`, `engine.duplicate` and
//!    `service.acked` for the zero-loss check.
//!    (c) The service's own ceiling: a backlog of 90 000 messages (the
//!    broker's queue limit is 100 000 per client) queued while the service
//!    is stopped, drained after a restart; rate from its `online` status to
//!    the end marker's event.
//! 2. **Tag-to-alarm latency** under a paced background of 10 000
//!    samples/s (10 ms slices of 100 messages over 100 tags): one
//!    out-of-range sample on a dedicated tag with `valid_range` every
//!    1.2 s, a good one 100 ms later; latency from the publish call of the
//!    bad sample to the receipt of the `activated` `sensor_out_of_range`
//!    event on `lifeledger/alarms/events` (detail `tag TA`), paired with
//!    the newest bad sample published before it. Not every 200 ms: the
//!    service judges sensor faults at most every 500 ms of wall time and
//!    latches faults between judgements, so the alarm needs about 1 s to
//!    clear, and a 200 ms cycle would keep it active (one event in all).
//!    110 samples; p50, p99, max.
//! 3. **Resident memory with 10 000 components** (10 000 tubes, 20 000
//!    tags): VmRSS after start, then one sample per tag is published and
//!    VmRSS / VmHWM are read once all are accepted or after a poll budget
//!    of 90 s, whichever comes first (the accepted count is reported).
//!
//! Run: `cargo bench --bench live` (or `tests/bench/live.sh`); about 5
//! minutes on 2 cores. Cargo builds the release binary and passes its path
//! as `CARGO_BIN_EXE_lifeledger` (set for benches as for integration
//! tests). Needs `/usr/sbin/mosquitto` (tests/run installs it).
//! Environment: `LIVE_BENCH_BIN` runs another `lifeledger` binary (an
//! older build, for before/after figures); `LIVE_BENCH_N` overrides N; `LIVE_BENCH_PARTS` (default
//! `123`) selects parts; `LIVE_BENCH_KEEP=1` keeps each part's directory
//! (config, service log, ledger) and prints its path. Everything listens on
//! 127.0.0.1 only; every wait is a bounded count of polls that gives up
//! (and reports) on a stall. This is a benchmark: it prints figures and
//! asserts nothing about timing.

#[path = "../tests/common/mod.rs"]
mod common;

use common::{free_port, http, Mosquitto};
use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{mpsc, Arc, Mutex};
use std::time::{Duration, Instant};

const T0: i64 = 1_790_812_800; // 2026-10-01T00:00:00Z
const PAUSE: Duration = Duration::from_millis(20);
/// Polls without progress after which a wait gives up (20 s at 20 ms).
const STALL_POLLS: u32 = 1000;
/// Upper bound on the polls of any wait (20 min at 20 ms); never reached
/// unless the service keeps crawling forward.
const MAX_POLLS: u32 = 60_000;

type Msg = (String, Vec<u8>);

fn payload(ts: i64, v: f64) -> Vec<u8> {
    format!("{{\"value\": {v:.3}, \"timestamp\": {ts}}}").into_bytes()
}

/// The `lifeledger` binary under test: `LIVE_BENCH_BIN` if set (to compare
/// two builds with the same load generator, run alternately), else the one
/// Cargo built with this benchmark.
fn service_binary() -> PathBuf {
    std::env::var_os("LIVE_BENCH_BIN").map_or_else(|| PathBuf::from(env!("CARGO_BIN_EXE_lifeledger")), PathBuf::from)
}

// ---------------------------------------------------------------- config

/// `[[tag]]` T{i}, P{i} and one tube reading them.
fn tube(i: usize) -> String {
    format!(
        "[[tag]]\nname = \"T{i}\"\nunit = \"degC\"\n[[tag]]\nname = \"P{i}\"\nunit = \"bar\"\n\
         [[component]]\nname = \"TUBE-{i}\"\nunit = \"U1\"\nkind = \"tube\"\nmaterial = \"2.25Cr-1Mo\"\n\
         design_temperature = {{ value = 570, unit = \"degC\" }}\ndesign_pressure = {{ value = 180, unit = \"bar\" }}\n\
         metal_temperature = \"T{i}\"\npressure = \"P{i}\"\n\
         [component.geometry]\noutside_diameter = {{ value = 44.5, unit = \"mm\" }}\nwall = {{ value = 5.0, unit = \"mm\" }}\n"
    )
}

/// A tube on a single temperature tag with `valid_range = [0, 800]` and a
/// constant pressure: its out-of-range samples raise sensor alarms.
fn guarded_tube(name: &str, tag: &str) -> String {
    format!(
        "[[tag]]\nname = \"{tag}\"\nunit = \"degC\"\nvalid_range = [0, 800]\n\
         [[component]]\nname = \"{name}\"\nunit = \"U1\"\nkind = \"tube\"\nmaterial = \"2.25Cr-1Mo\"\n\
         design_temperature = {{ value = 570, unit = \"degC\" }}\ndesign_pressure = {{ value = 180, unit = \"bar\" }}\n\
         metal_temperature = \"{tag}\"\npressure = {{ value = 160, unit = \"bar\" }}\n\
         [component.geometry]\noutside_diameter = {{ value = 44.5, unit = \"mm\" }}\nwall = {{ value = 5.0, unit = \"mm\" }}\n"
    )
}

/// A temporary directory for one part; kept (and named) when
/// `LIVE_BENCH_KEEP` is set, to read the service log afterwards.
struct WorkDir(#[allow(dead_code)] Option<tempfile::TempDir>, PathBuf);

impl WorkDir {
    fn new(part: &str) -> WorkDir {
        let d = tempfile::Builder::new().prefix(&format!("lifeledger-bench-{part}-")).tempdir().unwrap();
        if std::env::var_os("LIVE_BENCH_KEEP").is_some() {
            let p = d.keep();
            eprintln!("     keeping {}", p.display());
            WorkDir(None, p)
        } else {
            let p = d.path().to_path_buf();
            WorkDir(Some(d), p)
        }
    }
    fn path(&self) -> &Path {
        &self.1
    }
}

fn service_config(dir: &Path, mqtt_port: u16, http_port: u16, body: &str) -> PathBuf {
    let text = format!(
        "[plant]\nname = \"Bench Station\"\n{body}\n\
         [mqtt]\nport = {mqtt_port}\nclient_id = \"lifeledger-bench\"\nreconnect_min_s = 0.1\nreconnect_max_s = 0.5\n\
         [[mqtt.subscription]]\ntopic = \"plant/{{tag}}\"\n\
         [store]\npath = \"{store}\"\n\
         [http]\nlisten = \"127.0.0.1:{http_port}\"\n",
        store = dir.join("ledger.sqlite").display()
    );
    let p = dir.join("service.toml");
    std::fs::write(&p, text).unwrap();
    p
}

// ---------------------------------------------------------------- service

struct Service {
    child: Child,
    http_port: u16,
    log: PathBuf,
}

impl Service {
    fn start(config: &Path, http_port: u16) -> Service {
        let log = config.with_extension("log");
        let child = Command::new(service_binary())
            .args(["run", "--config", config.to_str().unwrap(), "--init-ledger"])
            .env("RUST_LOG", "info")
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(std::fs::File::create(&log).unwrap())
            .spawn()
            .expect("start lifeledger run");
        let mut s = Service { child, http_port, log };
        s.poll("the service's /healthz", |s| http::get(s.http_port, "/healthz").ok().filter(|r| r.status == 200));
        s
    }

    /// Polls `probe` every [`PAUSE`] until `Some`; bounded by [`MAX_POLLS`].
    fn poll<T>(&mut self, what: &str, mut probe: impl FnMut(&Service) -> Option<T>) -> T {
        for _ in 0..MAX_POLLS / 10 {
            if let Ok(Some(st)) = self.child.try_wait() {
                panic!(
                    "lifeledger exited ({st}) while waiting for {what}; log {}:\n{}",
                    self.log.display(),
                    self.log_tail()
                );
            }
            if let Some(v) = probe(self) {
                return v;
            }
            std::thread::sleep(PAUSE);
        }
        panic!("gave up waiting for {what}; log:\n{}", self.log_tail());
    }

    fn log_tail(&self) -> String {
        let t = std::fs::read_to_string(&self.log).unwrap_or_default();
        let l: Vec<&str> = t.lines().collect();
        l[l.len().saturating_sub(20)..].join("\n")
    }

    fn snapshot(&self) -> Option<serde_json::Value> {
        let r = http::get(self.http_port, "/api/components").ok()?;
        serde_json::from_slice(&r.body).ok()
    }

    /// `VmRSS` and `VmHWM` from /proc, MiB.
    fn memory_mib(&self) -> (f64, f64) {
        let s = std::fs::read_to_string(format!("/proc/{}/status", self.child.id())).unwrap_or_default();
        let kib = |key: &str| {
            s.lines()
                .find(|l| l.starts_with(key))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|v| v.parse::<f64>().ok())
                .unwrap_or(f64::NAN)
        };
        (kib("VmRSS:") / 1024.0, kib("VmHWM:") / 1024.0)
    }

    fn stop(mut self) {
        let _ = Command::new("kill").args(["-TERM", &self.child.id().to_string()]).status();
        for _ in 0..500 {
            if matches!(self.child.try_wait(), Ok(Some(_))) {
                return;
            }
            std::thread::sleep(PAUSE);
        }
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

impl Drop for Service {
    fn drop(&mut self) {
        if matches!(self.child.try_wait(), Ok(None)) {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

fn counter(s: &serde_json::Value, section: &str, key: &str) -> u64 {
    s[section][key].as_u64().unwrap_or(0)
}

// ---------------------------------------------------------------- MQTT clients

fn options(id: &str, port: u16) -> MqttOptions {
    let mut o = MqttOptions::new(id, "127.0.0.1", port);
    o.set_keep_alive(Duration::from_secs(30));
    o.set_max_packet_size(1 << 20, 1 << 20);
    o
}

/// A listener: forwards `(receipt instant, topic, payload)` of every
/// message on `topics`; returns once its subscriptions are acknowledged.
/// The thread ends when the receiver is dropped or the broker goes away.
fn listen(port: u16, id: &str, topics: &[&str]) -> mpsc::Receiver<(Instant, String, Vec<u8>)> {
    let (client, mut conn) = Client::new(options(id, port), 100);
    for t in topics {
        client.subscribe(*t, QoS::AtLeastOnce).unwrap();
    }
    let (tx, rx) = mpsc::channel();
    let (ready_tx, ready_rx) = mpsc::channel();
    let want = topics.len();
    std::thread::spawn(move || {
        let _client = client;
        let mut subacks = 0;
        for ev in conn.iter() {
            match ev {
                Ok(Event::Incoming(Packet::SubAck(_))) => {
                    subacks += 1;
                    if subacks == want {
                        let _ = ready_tx.send(());
                    }
                }
                Ok(Event::Incoming(Packet::Publish(p))) => {
                    if tx.send((Instant::now(), p.topic.clone(), p.payload.to_vec())).is_err() {
                        break;
                    }
                }
                Ok(_) => {}
                Err(_) => break,
            }
        }
    });
    ready_rx.recv_timeout(Duration::from_secs(30)).expect("listener subscribed");
    rx
}

/// What a publish run saw.
struct Published {
    start: Instant,
    last_puback: Instant,
    acked: usize,
}

/// Publishes `msgs` with QoS 1 (inflight 500) as fast as the broker
/// acknowledges them; returns when every PUBACK is in.
fn publish_stream(port: u16, id: &str, msgs: Vec<Msg>) -> Published {
    let mut o = options(id, port);
    o.set_inflight(500);
    let (client, mut conn) = Client::new(o, 1000);
    let n = msgs.len();
    let start = Instant::now();
    let pubber = std::thread::spawn(move || {
        for (topic, p) in msgs {
            client.publish(topic, QoS::AtLeastOnce, false, p).unwrap();
        }
        client
    });
    let mut acked = 0;
    let mut last_puback = start;
    for ev in conn.iter() {
        match ev {
            Ok(Event::Incoming(Packet::PubAck(_))) => {
                acked += 1;
                last_puback = Instant::now();
                if acked == n {
                    break;
                }
            }
            Ok(_) => {}
            Err(e) => panic!("load generator connection failed: {e}"),
        }
    }
    let client = pubber.join().unwrap();
    let _ = client.disconnect();
    let _ = conn.recv_timeout(Duration::from_millis(200));
    Published { start, last_puback, acked }
}

// ---------------------------------------------------------------- 1. throughput

/// `n` messages, round by round (every tag once per round, 60 s of event
/// time apart), starting at round `first`.
fn throughput_stream(n: usize, comps: usize, first: usize) -> Vec<Msg> {
    let per_round = comps * 2;
    let rounds = n.div_ceil(per_round);
    let mut v = Vec::with_capacity(n);
    'outer: for r in first..first + rounds {
        let ts = T0 + 60 * r as i64;
        let x = r as f64;
        for c in 0..comps {
            if v.len() == n {
                break 'outer;
            }
            v.push((format!("plant/T{c}"), payload(ts, 545.0 + 10.0 * (x / 97.0 + c as f64).sin())));
            if v.len() == n {
                break 'outer;
            }
            v.push((format!("plant/P{c}"), payload(ts, 160.0 + 5.0 * (x / 53.0).cos())));
        }
    }
    v
}

struct Throughput {
    n: usize,
    publisher_rate: f64,
    baseline_rate: f64,
    baseline_recv_rate: f64,
    baseline_received: u64,
    service_rate: f64,
    snapshot_rate: f64,
    basis: &'static str,
    service_publisher_rate: f64,
    accepted: u64,
    duplicate: u64,
    acked: u64,
    commits: u64,
    mean_commit_ms: f64,
    max_commit_ms: f64,
    drain: Option<Drain>,
}

fn rate(n: usize, d: Duration) -> f64 {
    n as f64 / d.as_secs_f64()
}

fn baseline(n: usize) -> (Published, u64, Option<(Instant, Instant)>) {
    let broker = Mosquitto::start();
    let count = Arc::new(AtomicU64::new(0));
    let times: Arc<Mutex<Option<(Instant, Instant)>>> = Arc::new(Mutex::new(None));
    let mut o = options("bench-baseline-subscriber", broker.port);
    o.set_clean_session(false);
    let (client, mut conn) = Client::new(o, 1000);
    client.subscribe("plant/#", QoS::AtLeastOnce).unwrap();
    let (ready_tx, ready_rx) = mpsc::channel();
    {
        let (count, times) = (count.clone(), times.clone());
        std::thread::spawn(move || {
            let _client = client;
            for ev in conn.iter() {
                match ev {
                    Ok(Event::Incoming(Packet::SubAck(_))) => {
                        let _ = ready_tx.send(());
                    }
                    Ok(Event::Incoming(Packet::Publish(_))) => {
                        let now = Instant::now();
                        let mut t = times.lock().unwrap();
                        *t = Some(t.map_or((now, now), |(f, _)| (f, now)));
                        drop(t);
                        if count.fetch_add(1, Ordering::Relaxed) + 1 == n as u64 {
                            break;
                        }
                    }
                    Ok(_) => {}
                    Err(_) => break,
                }
            }
        });
    }
    ready_rx.recv_timeout(Duration::from_secs(30)).expect("baseline subscriber subscribed");
    let p = publish_stream(broker.port, "bench-load-baseline", throughput_stream(n, 100, 0));
    let (mut last, mut still) = (u64::MAX, 0);
    for _ in 0..MAX_POLLS {
        let c = count.load(Ordering::Relaxed);
        if c >= n as u64 {
            break;
        }
        if c == last {
            still += 1;
            if still >= STALL_POLLS {
                break;
            }
        } else {
            (last, still) = (c, 0);
        }
        std::thread::sleep(PAUSE);
    }
    let got = count.load(Ordering::Relaxed);
    let t = *times.lock().unwrap();
    (p, got, t)
}

fn throughput(n: usize) -> Throughput {
    eprintln!("[1a] baseline: {n} messages into a do-nothing subscriber");
    let (bp, received, times) = baseline(n);
    let (first, last) = times.expect("the baseline subscriber received something");
    let publisher_rate = rate(bp.acked, bp.last_puback - bp.start);
    let baseline_rate = rate(received as usize, last - bp.start);
    let baseline_recv_rate = rate(received as usize, last - first);
    eprintln!("     received {received}/{n}: {baseline_rate:.0} msg/s (first publish to last receive), {baseline_recv_rate:.0} msg/s (first to last receive); publisher {publisher_rate:.0} msg/s");

    eprintln!("[1b] lifeledger run: the same {n} messages, 100 tubes, no database");
    let broker = Mosquitto::start();
    let dir = WorkDir::new("throughput");
    let http_port = free_port();
    let mut body: String = (0..100).map(tube).collect();
    body.push_str(&guarded_tube("SENTINEL", "SENT"));
    let cfg = service_config(dir.path(), broker.port, http_port, &body);
    let events = listen(broker.port, "bench-listener-1", &["lifeledger/status", "lifeledger/alarms/events"]);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    // Warm-up, untimed: one sample on the sentinel tag, so that the
    // sentinel component has alarm records the end marker can shelve.
    publish_stream(broker.port, "bench-load-warmup", vec![("plant/SENT".into(), payload(T0, 550.0))]);
    svc.poll("the sentinel's alarm records", |s| {
        s.snapshot().filter(|v| {
            v["alarms"].as_array().is_some_and(|a| {
                a.iter().any(|c| c["component"] == "SENTINEL" && c["alarms"].as_array().is_some_and(|r| !r.is_empty()))
            })
        })
    });
    let mut msgs = throughput_stream(n, 100, 0);
    // End marker: a shelve command. The ledger applies it in order and
    // publishes its `shelved` event right after the commit that
    // acknowledges every earlier message (if the client's request channel
    // has room: `try_publish`).
    msgs.push((
        "lifeledger/commands".into(),
        br#"{"action":"shelve","component":"SENTINEL","index":"sensor_stale","duration_h":1,"by":"bench","reason":"end-of-stream marker"}"#.to_vec(),
    ));
    let sp = publish_stream(broker.port, "bench-load-service", msgs);
    let service_publisher_rate = rate(sp.acked, sp.last_puback - sp.start);
    let want = n as u64 + 1; // + the warm-up sample
    let (marker_at, snapshot_at, snap) = wait_integrated(&svc, &events, want, "shelved");
    let (done, basis) = match marker_at {
        Some(t) => (t, "end-marker event"),
        None => (snapshot_at, "snapshot poll (up to ~0.5 s late; end-marker event not received)"),
    };
    let service_rate = rate(n, done - sp.start);
    let snapshot_rate = rate(n, snapshot_at - sp.start);
    let commits = counter(&snap, "service", "commits");
    let total_ms = snap["service"]["total_commit_ms"].as_f64().unwrap_or(0.0);
    let mut r = Throughput {
        n,
        publisher_rate,
        baseline_rate,
        baseline_recv_rate,
        baseline_received: received,
        service_rate,
        snapshot_rate,
        basis,
        service_publisher_rate,
        accepted: counter(&snap, "engine", "accepted").saturating_sub(1),
        duplicate: counter(&snap, "engine", "duplicate"),
        acked: counter(&snap, "service", "acked").saturating_sub(1),
        commits,
        mean_commit_ms: total_ms / commits.max(1) as f64,
        max_commit_ms: snap["service"]["max_commit_ms"].as_f64().unwrap_or(0.0),
        drain: None,
    };
    eprintln!(
        "     accepted {} duplicate {} acked {} of {} (+ marker): {service_rate:.0} msg/s by {basis}, {snapshot_rate:.0} msg/s by snapshot poll; publisher {service_publisher_rate:.0} msg/s; {} commits, mean {:.2} ms, max {:.1} ms",
        r.accepted, r.duplicate, r.acked, n, r.commits, r.mean_commit_ms, r.max_commit_ms
    );
    let failed = std::fs::read_to_string(&svc.log).unwrap_or_default().matches("MQTT acknowledge failed").count();
    if failed > 0 {
        eprintln!("     service log: {failed} \"MQTT acknowledge failed\" errors");
    }
    svc.stop();
    drop(broker);
    r.drain = Some(drain(DRAIN.min(n), n.div_ceil(200)));
    r
}

/// [1c] The service's own ceiling, without the load generator in the way:
/// a backlog queued at the broker for the service's persistent session
/// while it is stopped, drained after a restart. Its own broker and store,
/// so nothing left unacknowledged by 1b is redelivered here. Bounded by
/// the broker's queue of 100 000 messages per client (tests/common).
fn drain(m: usize, first_round: usize) -> Drain {
    eprintln!("[1c] backlog drain: {m} messages queued at the broker while the service is stopped");
    let broker = Mosquitto::start();
    let dir = WorkDir::new("drain");
    let http_port = free_port();
    let mut body: String = (0..100).map(tube).collect();
    body.push_str(&guarded_tube("SENTINEL", "SENT"));
    let cfg = service_config(dir.path(), broker.port, http_port, &body);
    let events = listen(broker.port, "bench-listener-1c", &["lifeledger/status", "lifeledger/alarms/events"]);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    publish_stream(broker.port, "bench-load-warmup-1c", vec![("plant/SENT".into(), payload(T0, 550.0))]);
    svc.poll("the sentinel's alarm records", |s| {
        s.snapshot().filter(|v| {
            v["alarms"].as_array().is_some_and(|a| {
                a.iter().any(|c| c["component"] == "SENTINEL" && c["alarms"].as_array().is_some_and(|r| !r.is_empty()))
            })
        })
    });
    svc.stop();
    let mut backlog = throughput_stream(m, 100, first_round);
    backlog.push((
        "lifeledger/commands".into(),
        br#"{"action":"shelve","component":"SENTINEL","index":"sensor_stale","duration_h":1,"by":"bench","reason":"end-of-backlog marker"}"#.to_vec(),
    ));
    publish_stream(broker.port, "bench-load-backlog", backlog);
    while events.try_recv().is_ok() {}
    let svc = Service::start(&cfg, http_port);
    let online = wait_online(&events);
    let (marker_at, snapshot_at, snap) = wait_integrated(&svc, &events, 1 + m as u64, "shelved");
    let done = marker_at.unwrap_or(snapshot_at);
    let d = Drain {
        m,
        rate: rate(m, done - online),
        basis: if marker_at.is_some() { "end-marker event" } else { "snapshot poll" },
        accepted: counter(&snap, "engine", "accepted").saturating_sub(1),
        duplicate: counter(&snap, "engine", "duplicate"),
        // `acked` counts per process: this run's backlog and the marker.
        acked: counter(&snap, "service", "acked"),
    };
    eprintln!(
        "     accepted {} duplicate {} of {m}, acknowledged {} of {} at {:.0} msg/s (service online to {})",
        d.accepted,
        d.duplicate,
        d.acked,
        m + 1,
        d.rate,
        d.basis
    );
    let failed = std::fs::read_to_string(&svc.log).unwrap_or_default().matches("MQTT acknowledge failed").count();
    if failed > 0 {
        eprintln!("     service log: {failed} \"MQTT acknowledge failed\" errors");
    }
    svc.stop();
    d
}

/// Messages of the backlog drained in 1c.
const DRAIN: usize = 90_000;

struct Drain {
    m: usize,
    rate: f64,
    basis: &'static str,
    accepted: u64,
    duplicate: u64,
    acked: u64,
}

/// Waits until the snapshot shows `want` samples integrated (accepted +
/// duplicate), watching meanwhile for the end marker: the SENTINEL alarm
/// event with `transition`. Returns the marker's receipt, the time the
/// snapshot showed completion, and a snapshot taken after the last commit.
fn wait_integrated(
    svc: &Service,
    events: &mpsc::Receiver<(Instant, String, Vec<u8>)>,
    want: u64,
    transition: &str,
) -> (Option<Instant>, Instant, serde_json::Value) {
    let mut marker_at = None;
    let mut snapshot_at = None;
    let (mut last, mut still) = (u64::MAX, 0);
    for _ in 0..MAX_POLLS {
        while let Ok((t, topic, p)) = events.try_recv() {
            if topic == "lifeledger/alarms/events" && marker_at.is_none() {
                let v: serde_json::Value = serde_json::from_slice(&p).unwrap_or_default();
                if v["component"] == "SENTINEL" && v["transition"] == transition {
                    marker_at = Some(t);
                }
            }
        }
        if snapshot_at.is_none() {
            if let Some(s) = svc.snapshot() {
                let integrated = counter(&s, "engine", "accepted") + counter(&s, "engine", "duplicate");
                if integrated >= want {
                    snapshot_at = Some(Instant::now());
                } else if integrated == last {
                    still += 1;
                    if still >= STALL_POLLS {
                        eprintln!("     stalled at {integrated} of {want} integrated");
                        snapshot_at = Some(Instant::now());
                    }
                } else {
                    (last, still) = (integrated, 0);
                }
            }
        }
        if let Some(t) = snapshot_at {
            // Give the marker up to 2 s more after the snapshot showed completion.
            if marker_at.is_some() || t.elapsed() > Duration::from_secs(2) {
                break;
            }
        }
        std::thread::sleep(PAUSE);
    }
    let snapshot_at = snapshot_at.expect("a snapshot");
    // Counters after the last commit: one more idle snapshot period.
    std::thread::sleep(Duration::from_millis(1200));
    (marker_at, snapshot_at, svc.snapshot().expect("a final snapshot"))
}

/// Waits for the service's `online` status; returns when it was received.
fn wait_online(events: &mpsc::Receiver<(Instant, String, Vec<u8>)>) -> Instant {
    for _ in 0..MAX_POLLS {
        match events.recv_timeout(PAUSE) {
            Ok((t, topic, p)) if topic == "lifeledger/status" && p.windows(6).any(|w| w == b"online") => return t,
            Ok(_) | Err(mpsc::RecvTimeoutError::Timeout) => {}
            Err(mpsc::RecvTimeoutError::Disconnected) => panic!("listener gone"),
        }
    }
    panic!("the service never published its online status");
}

/// Whether `payload` is an alarm event on `tag` with `index` and `transition`.
fn is_event(payload: &[u8], tag: &str, index: &str, transition: &str) -> bool {
    let Ok(v) = serde_json::from_slice::<serde_json::Value>(payload) else { return false };
    v["index"] == index && v["transition"] == transition && v["detail"] == format!("tag {tag}").as_str()
}

// ---------------------------------------------------------------- 2. latency

struct Latency {
    samples: usize,
    expected: usize,
    p50_ms: f64,
    p99_ms: f64,
    max_ms: f64,
    achieved_rate: f64,
}

/// Out-of-range samples sent in part 2.
const ALARMS: usize = 110;
/// One out-of-range sample every CYCLE slices of 10 ms (1.2 s); the good
/// sample follows 10 slices (100 ms) later. The service judges sensor
/// faults at most every 500 ms of wall time and latches a fault seen since
/// the last judgement, so the alarm needs about two judgements (~1 s) to
/// clear: a 200 ms cycle would keep it active for good and give one event.
const CYCLE: usize = 120;

fn latency() -> Latency {
    eprintln!(
        "[2]  tag-to-alarm latency at 10 000 samples/s ({ALARMS} out-of-range samples, one every {} ms)",
        CYCLE * 10
    );
    let broker = Mosquitto::start();
    let dir = WorkDir::new("latency");
    let http_port = free_port();
    let mut body: String = (0..50).map(tube).collect();
    body.push_str(&guarded_tube("ALARM-TUBE", "TA"));
    let cfg = service_config(dir.path(), broker.port, http_port, &body);
    let events = listen(broker.port, "bench-listener-2", &["lifeledger/status", "lifeledger/alarms/events"]);
    let svc = Service::start(&cfg, http_port);
    wait_online(&events);

    let slices = ALARMS * CYCLE;
    let total = slices * 100 + ALARMS * 2;
    let mut o = options("bench-load-paced", broker.port);
    o.set_inflight(500);
    let (client, mut conn) = Client::new(o, 1000);
    let acker = std::thread::spawn(move || {
        let mut acked = 0;
        for ev in conn.iter() {
            match ev {
                Ok(Event::Incoming(Packet::PubAck(_))) => {
                    acked += 1;
                    if acked == total {
                        break;
                    }
                }
                Ok(_) => {}
                Err(e) => panic!("paced load generator connection failed: {e}"),
            }
        }
        acked
    });
    // Event time advances one second per 10 ms slice on every tag alike,
    // so no tag ever looks stale next to the others.
    let mut sent_at: Vec<Instant> = vec![];
    let start = Instant::now();
    for k in 0..slices {
        let ts = T0 + k as i64;
        let x = k as f64;
        for c in 0..50 {
            client
                .publish(
                    format!("plant/T{c}"),
                    QoS::AtLeastOnce,
                    false,
                    payload(ts, 545.0 + 10.0 * (x / 97.0 + c as f64).sin()),
                )
                .unwrap();
            client
                .publish(format!("plant/P{c}"), QoS::AtLeastOnce, false, payload(ts, 160.0 + 5.0 * (x / 53.0).cos()))
                .unwrap();
        }
        if k % CYCLE == 0 {
            sent_at.push(Instant::now());
            client.publish("plant/TA", QoS::AtLeastOnce, false, payload(ts, 5000.0)).unwrap();
        } else if k % CYCLE == 10 {
            client.publish("plant/TA", QoS::AtLeastOnce, false, payload(ts, 550.0)).unwrap();
        }
        let next = start + Duration::from_millis(10 * (k as u64 + 1));
        if let Some(d) = next.checked_duration_since(Instant::now()) {
            std::thread::sleep(d);
        }
    }
    let elapsed = start.elapsed();
    let acked = acker.join().unwrap();
    let achieved_rate = rate(slices * 100, elapsed);
    let _ = client.disconnect();
    // Pair each activation with the newest out-of-range publish before its
    // receipt (latencies are well below one cycle), each publish at most once.
    let mut lat = vec![];
    let mut used = vec![false; sent_at.len()];
    let mut tally = std::collections::BTreeMap::new();
    let mut still = 0;
    for _ in 0..MAX_POLLS {
        match events.recv_timeout(PAUSE) {
            Ok((t, topic, p)) => {
                still = 0;
                if topic != "lifeledger/alarms/events" {
                    continue;
                }
                if let Ok(v) = serde_json::from_slice::<serde_json::Value>(&p) {
                    *tally.entry(format!("{} {} {}", v["index"], v["transition"], v["detail"])).or_insert(0usize) += 1;
                }
                if is_event(&p, "TA", "sensor_out_of_range", "activated") {
                    if let Some(i) = sent_at.iter().rposition(|s| *s <= t) {
                        if !used[i] {
                            used[i] = true;
                            lat.push((t - sent_at[i]).as_secs_f64() * 1000.0);
                        }
                    }
                }
            }
            Err(mpsc::RecvTimeoutError::Timeout) => {
                // Every event is in well before 2 s of silence.
                still += 1;
                if still >= 100 {
                    break;
                }
            }
            Err(mpsc::RecvTimeoutError::Disconnected) => break,
        }
    }
    if lat.len() < ALARMS {
        eprintln!("     {} of {ALARMS} out-of-range samples got their own activation; events seen (index transition detail: count): {tally:?}", lat.len());
    }
    lat.sort_by(f64::total_cmp);
    let pct = |q: f64| {
        lat.get(((q * lat.len() as f64).ceil() as usize).clamp(1, lat.len().max(1)) - 1).copied().unwrap_or(f64::NAN)
    };
    let r = Latency {
        samples: lat.len(),
        expected: ALARMS,
        p50_ms: pct(0.50),
        p99_ms: pct(0.99),
        max_ms: lat.last().copied().unwrap_or(f64::NAN),
        achieved_rate,
    };
    eprintln!(
        "     background {achieved_rate:.0} samples/s achieved ({acked}/{total} PUBACKs); {} of {ALARMS} alarms: p50 {:.1} ms, p99 {:.1} ms, max {:.1} ms",
        r.samples, r.p50_ms, r.p99_ms, r.max_ms
    );
    svc.stop();
    r
}

// ---------------------------------------------------------------- 3. memory

struct Memory {
    components: usize,
    idle_rss: f64,
    rss: f64,
    hwm: f64,
    accepted: u64,
    want: u64,
    ingest_s: f64,
}

/// Poll budget of part 3: 360 polls 250 ms apart (90 s).
const MEMORY_POLLS: u32 = 360;

fn memory() -> Memory {
    const COMPONENTS: usize = 10_000;
    eprintln!("[3]  resident memory: {COMPONENTS} tubes, {} tags, one sample per tag", 2 * COMPONENTS);
    let broker = Mosquitto::start();
    let dir = WorkDir::new("memory");
    let http_port = free_port();
    let body: String = (0..COMPONENTS).map(tube).collect();
    let cfg = service_config(dir.path(), broker.port, http_port, &body);
    let events = listen(broker.port, "bench-listener-3", &["lifeledger/status"]);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    let (idle_rss, _) = svc.memory_mib();
    let mut msgs = Vec::with_capacity(2 * COMPONENTS);
    for c in 0..COMPONENTS {
        msgs.push((format!("plant/T{c}"), payload(T0, 545.0 + 10.0 * (c as f64).sin())));
        msgs.push((format!("plant/P{c}"), payload(T0, 160.0)));
    }
    let want = msgs.len() as u64;
    let p = publish_stream(broker.port, "bench-load-memory", msgs);
    // Poll /metrics (small) rather than the 30 MB JSON snapshot, and
    // rarely: the snapshot of 10 000 components is costly to serve. The
    // poll budget is bounded: at most MEMORY_POLLS polls 250 ms apart.
    let mut accepted = 0;
    for _ in 0..MEMORY_POLLS {
        if let Ok(Some(st)) = svc.child.try_wait() {
            panic!("lifeledger exited ({st}):\n{}", svc.log_tail());
        }
        accepted = http::get(svc.http_port, "/metrics")
            .ok()
            .and_then(|r| {
                r.text().lines().find_map(|l| {
                    l.strip_prefix("lifeledger_samples_accepted_total ").and_then(|v| v.trim().parse::<f64>().ok())
                })
            })
            .map_or(accepted, |v| v as u64);
        if accepted >= want {
            break;
        }
        std::thread::sleep(Duration::from_millis(250));
    }
    let ingest_s = (Instant::now() - p.start).as_secs_f64();
    let (rss, hwm) = svc.memory_mib();
    let r = Memory { components: COMPONENTS, idle_rss, rss, hwm, accepted, want, ingest_s };
    eprintln!(
        "     accepted {accepted}/{want} after {ingest_s:.1} s{}; VmRSS {idle_rss:.1} MiB after start, {rss:.1} MiB at the end; VmHWM {hwm:.1} MiB",
        if accepted < want { " (poll budget used up)" } else { "" }
    );
    svc.stop();
    r
}

// ---------------------------------------------------------------- main

fn main() {
    // `cargo bench` passes `--bench`; accept and ignore any arguments.
    let n: usize = std::env::var("LIVE_BENCH_N").ok().and_then(|v| v.parse().ok()).unwrap_or(200_000);
    let parts = std::env::var("LIVE_BENCH_PARTS").unwrap_or_else(|_| "123".into());
    let t = parts.contains('1').then(|| throughput(n));
    let l = parts.contains('2').then(latency);
    let m = parts.contains('3').then(memory);
    let yes = |b: bool| if b { "met" } else { "NOT MET" };
    println!();
    println!("Live service (load generator)");
    println!("| measure | figure | goal |");
    println!("|---|---|---|");
    if let Some(t) = t {
        let ratio = t.service_rate / t.baseline_rate;
        let integrated = t.accepted == t.n as u64 && t.duplicate == 0;
        let acked = t.acked == t.n as u64 + 1;
        println!("| N (messages, 100 tubes × 2 tags) | {} | |", t.n);
        println!(
            "| load generator alone (publish to last PUBACK), baseline run / service run | {:.0} / {:.0} msg/s | |",
            t.publisher_rate, t.service_publisher_rate
        );
        println!("| baseline subscriber, first publish to last receive | {:.0} msg/s | |", t.baseline_rate);
        println!("| baseline subscriber, first to last receive | {:.0} msg/s | |", t.baseline_recv_rate);
        println!("| lifeledger run, first publish to all integrated ({}) | {:.0} msg/s | |", t.basis, t.service_rate);
        println!("| lifeledger run, same, by snapshot poll | {:.0} msg/s | |", t.snapshot_rate);
        println!("| ratio service / baseline | {:.0} % | ≥ 90 %: {} |", 100.0 * ratio, yes(ratio >= 0.9));
        println!(
            "| integrated without loss: accepted {} duplicate {} of {}; baseline received {} | {} | all |",
            t.accepted,
            t.duplicate,
            t.n,
            t.baseline_received,
            if integrated { "yes" } else { "NO" }
        );
        println!(
            "| acknowledged to the broker (service.acked, incl. end marker) | {} of {} | all: {} |",
            t.acked,
            t.n + 1,
            yes(acked)
        );
        println!(
            "| commits (mean / max commit time) | {} ({:.2} / {:.1} ms) | |",
            t.commits, t.mean_commit_ms, t.max_commit_ms
        );
        if let Some(d) = &t.drain {
            println!("| backlog drain after restart ({} queued; online to {}) | {:.0} msg/s | |", d.m, d.basis, d.rate);
            println!(
                "| backlog drain: accepted {} duplicate {} of {}; acknowledged {} of {} | {} | all |",
                d.accepted,
                d.duplicate,
                d.m,
                d.acked,
                d.m + 1,
                if d.accepted == d.m as u64 && d.acked == d.m as u64 + 1 { "yes" } else { "NO" }
            );
        }
    }
    if let Some(l) = l {
        println!(
            "| tag-to-alarm latency p50 / p99 / max ({} of {} matched, background {:.0} samples/s) | {:.1} / {:.1} / {:.1} ms | |",
            l.samples, l.expected, l.achieved_rate, l.p50_ms, l.p99_ms, l.max_ms
        );
    }
    if let Some(m) = m {
        println!(
            "| VmRSS, {} components: after start / at the end (peak VmHWM) | {:.1} / {:.1} MiB ({:.1}) | |",
            m.components, m.idle_rss, m.rss, m.hwm
        );
        println!(
            "| samples accepted, {} components, after {:.1} s | {} of {} | |",
            m.components, m.ingest_s, m.accepted, m.want
        );
    }
}
