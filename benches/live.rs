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
//!    The stream ends with an alarm command as end marker: a shelve of the
//!    SENTINEL part's over-design alarm, carrying the operator token (`[http]
//!    token_env` names a variable set on the service's process only) and
//!    an `id`. The ledger applies it in order; once the commit that holds
//!    it and acknowledges everything before it is done, the service
//!    publishes the command's reply on `lifeledger/commands/replies` and
//!    its `shelved` event. The first of the two to arrive times "all
//!    integrated" without the up-to-0.5 s lag of the HTTP snapshot (the
//!    snapshot-poll figure is printed too, and used if neither comes).
//!    The snapshot then gives `engine.accepted`, `engine.duplicate` and
//!    `service.acked` for the zero-loss check.
//!    (c) The service's own ceiling: a backlog of 90 000 messages (the
//!    broker's queue limit is 100 000 per client) queued while the service
//!    is stopped, drained after a restart; rate from its `online` status to
//!    the end marker.
//! 2. **Tag-to-alarm latency** under a paced background of 10 000
//!    samples/s (10 ms slices of 100 messages over 100 tags): one
//!    out-of-range sample on a dedicated tag TA with `valid_range` every
//!    1.2 s, a good one 100 ms later; latency from the publish call of the
//!    bad sample to the receipt of the `activated` `sensor_out_of_range`
//!    event of tag TA on `lifeledger/alarms/events`, paired with the newest
//!    bad sample published before it. Each bad sample needs an alarm that
//!    has cleared since the one before, so the part sets
//!    `[alarms.delays.sensor_out_of_range]` on- and off-delay to 0 (the
//!    default off-delay holds the alarm until an hour of event time of
//!    good data, here 120 s of event time pass between bad samples; the
//!    setting is plant-wide per index, and the bench has no other
//!    out-of-range tag). What is timed is therefore the fault's way in:
//!    decode, plausibility, the sensor judgement, the commit and the event
//!    publish; not the delays, which are the plant's choice of alarm
//!    philosophy and add their own event time. Not every 200 ms: the
//!    service judges sensor faults at most every 500 ms of wall time and
//!    latches faults between judgements, so the alarm needs about 1 s to
//!    clear, and a 200 ms cycle would keep it active (one event in all).
//!    110 samples; p50, p99, max.
//! 3. **Resident memory with 10 000 components** (10 000 tubes, 20 000
//!    tags): VmRSS after start, then one sample per tag is published and
//!    VmRSS / VmHWM are read once all are accepted or after a poll budget
//!    of 90 s, whichever comes first (the accepted count is reported).
//! 4. **Write volume per sample** with a database: VictoriaMetrics
//!    (`victoria-metrics`, started here on a free loopback port with its
//!    own data directory) behind a counting relay (`live/write_tap.rs`),
//!    so the outbox is kept and drained as in production. 100 tubes × 2
//!    tags, the part-1 stream paced at `LIVE_BENCH_WRITE_RATE` msg/s
//!    (default 1 000) for `LIVE_BENCH_WRITE_S` s (default 30), 60 s of
//!    event time between rounds (every tag once a round; a historian's
//!    1-minute scan compressed in time). The window opens once the
//!    start-up points are delivered and closes when every sample is
//!    integrated, none waits in the reorder window and the outbox is
//!    empty. Per sample: ledger commits (`service.commits`), write
//!    requests to the database (each accepted one also removes its lines
//!    from the outbox in a transaction of its own), line-protocol lines
//!    and bytes sent, per measurement (`alarm_threshold`'s share
//!    included), and bytes the service wrote to storage (/proc/PID/io).
//!    The figures depend on the event-time spacing and on the ratio of
//!    components to tags: `component_state` is one line per component per
//!    60 s of event time, `alarm_threshold` lines at most once an hour of
//!    event time per component, `service_health` one line per 10 s of
//!    wall time.
//!
//! **Older builds.** `LIVE_BENCH_BIN` runs another `lifeledger` binary,
//! e.g. one from before issue 10, for before/after figures; the bench asks
//! the binary what it takes ([`Build`]) and adapts: `run --init-ledger`
//! only if `run --help` offers it, `[alarms.delays]` only if
//! `check-config` takes it, and the end marker with token and `id` only if
//! a probe run shelves with them (else without: earlier builds refuse the
//! unknown fields and need no token; the marker then shelves the
//! sentinel's stale alarm, which earlier builds keep per component). The end-marker reply exists only in
//! later builds; earlier ones are timed by the `shelved` event, which they
//! publish right after the commit as later builds publish the reply.
//!
//! Run: `cargo bench --bench live` (or `tests/bench/live.sh`); about 7
//! minutes on 2 cores. Cargo builds the release binary and passes its path
//! as `CARGO_BIN_EXE_lifeledger` (set for benches as for integration
//! tests). Needs `/usr/sbin/mosquitto` and `victoria-metrics` (tests/run
//! installs both). Environment: `LIVE_BENCH_BIN` (above); `LIVE_BENCH_N`
//! overrides N; `LIVE_BENCH_PARTS` (default `1234`) selects parts;
//! `LIVE_BENCH_WRITE_RATE`, `LIVE_BENCH_WRITE_S` (part 4);
//! `LIVE_BENCH_KEEP=1` keeps each part's directory (config, service log,
//! ledger) and prints its path. Everything listens on 127.0.0.1 only;
//! every wait is a bounded count of polls that gives up (and reports) on a
//! stall. This is a benchmark: it prints figures and asserts nothing about
//! timing.

#[path = "../tests/common/mod.rs"]
mod common;
#[path = "live/write_tap.rs"]
mod write_tap;

use common::{free_port, http, Mosquitto, VictoriaMetrics};
use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{mpsc, Arc, Mutex, OnceLock};
use std::time::{Duration, Instant};
use write_tap::{WriteTally, WriteTap};

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

// ---------------------------------------------------------------- the build under test

/// The operator token the bench's services are given (through the
/// variable [`TOKEN_ENV`], set on the child process only).
const OPERATOR_TOKEN: &str = "bench-operator-token-0123456789";
/// `[http] token_env` of the bench's services.
const TOKEN_ENV: &str = "LIFELEDGER_BENCH_OPERATOR_TOKEN";
/// `id` of the end-marker command, echoed in its reply.
const MARKER_ID: &str = "bench-end-marker";

/// What the binary under test takes, found out by asking it, so that one
/// load generator drives builds from before and after issue 10 alike:
///
/// * `run --init-ledger` (later builds refuse to start on a missing
///   ledger without it; earlier ones do not know the flag): from
///   `run --help`.
/// * `[alarms.delays.<index>]` (on- and off-delays, later builds): from
///   `check-config` on a one-tube configuration with and without it.
/// * MQTT commands with `token` and `id` (later builds refuse a command
///   without the operator token and answer on `PREFIX/commands/replies`;
///   earlier ones refuse the unknown fields): from a short service run
///   that sends a shelve in the new form and, if no `shelved` event
///   follows, in the old one.
#[derive(Debug, Clone, Copy)]
struct Build {
    init_ledger: bool,
    alarm_delays: bool,
    command_token: bool,
}

static BUILD: OnceLock<Build> = OnceLock::new();
/// [`Build::init_ledger`], known first (the command probe starts a service).
static INIT_LEDGER: OnceLock<bool> = OnceLock::new();

fn build() -> Build {
    *BUILD.get().expect("the build was probed at start")
}

impl Build {
    fn probe() -> Build {
        let bin = service_binary();
        let help = Command::new(&bin).args(["run", "--help"]).output().expect("run lifeledger run --help");
        let init_ledger = String::from_utf8_lossy(&help.stdout).contains("--init-ledger");
        let dir = WorkDir::new("probe");
        let check = |extra: &str| {
            let cfg = service_config(dir.path(), 1883, 8470, &guarded_tube("PROBE", "PROBE-T"), extra, false);
            let out = Command::new(&bin)
                .args(["check-config", cfg.to_str().unwrap()])
                .env(TOKEN_ENV, OPERATOR_TOKEN)
                .output()
                .expect("run lifeledger check-config");
            (
                out.status.success(),
                String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr),
            )
        };
        let (plain_ok, plain_out) = check("");
        assert!(plain_ok, "check-config refuses the bench's plain configuration:\n{plain_out}");
        let alarm_delays = check(OFF_DELAY_NONE).0;
        // Commands: a real service.
        let _ = INIT_LEDGER.set(init_ledger);
        let broker = Mosquitto::start();
        let http_port = free_port();
        let cfg = service_config(dir.path(), broker.port, http_port, &guarded_tube("SENTINEL", "SENT"), "", true);
        let events = listen(broker.port, "bench-listener-probe", &["lifeledger/status", "lifeledger/alarms/events"]);
        let mut svc = Service::start(&cfg, http_port);
        wait_online(&events);
        warm_up_sentinel(&mut svc, broker.port, "bench-load-probe");
        let mut command_token = None;
        for with_token in [true, false] {
            let msg = vec![("lifeledger/commands".to_string(), shelve_command(with_token, "build probe"))];
            publish_stream(broker.port, "bench-load-probe-command", msg);
            // Bounded: 5 s for the event of the shelve.
            for _ in 0..250 {
                if let Ok((_, topic, p)) = events.recv_timeout(PAUSE) {
                    let v: serde_json::Value = serde_json::from_slice(&p).unwrap_or_default();
                    if topic == "lifeledger/alarms/events" && v["transition"] == "shelved" {
                        command_token = Some(with_token);
                        break;
                    }
                }
            }
            if command_token.is_some() {
                break;
            }
        }
        svc.stop();
        let command_token = command_token.unwrap_or_else(|| {
            panic!("the build shelved nothing, with the operator token or without; is the command topic lifeledger/commands?")
        });
        Build { init_ledger, alarm_delays, command_token }
    }
}

/// `[alarms]` text that lets an out-of-range alarm clear as soon as a good
/// sample is judged (part 2; builds with alarm delays only).
const OFF_DELAY_NONE: &str = "[alarms.delays.sensor_out_of_range]\non_delay_s = 0\noff_delay_s = 0\n";

/// The bench's end marker, a shelve of one of the sentinel's alarms: in
/// the later form with the operator token and an `id` (echoed in the
/// reply), of its over-design alarm (sensor alarms are the tag's there,
/// and the component's own records exist once it has integrated an
/// interval); or in the earlier form without either, of its stale alarm
/// (sensor alarms were the component's, recorded at its first sample).
fn shelve_command(with_token: bool, reason: &str) -> Vec<u8> {
    let index = if with_token { "metal_temperature_over_design" } else { "sensor_stale" };
    let mut v = serde_json::json!({
        "action": "shelve", "component": "SENTINEL", "index": index,
        "duration_h": 1, "by": "bench", "reason": reason,
    });
    if with_token {
        v["token"] = OPERATOR_TOKEN.into();
        v["id"] = MARKER_ID.into();
    }
    serde_json::to_vec(&v).unwrap()
}

fn end_marker(reason: &str) -> Msg {
    ("lifeledger/commands".into(), shelve_command(build().command_token, reason))
}

/// Samples of [`warm_up_sentinel`], counted by the engine (its counters
/// are kept in the ledger across restarts).
const WARM_UP: u64 = 3;

/// Three samples on the sentinel's tag before the stream's first event
/// time, the last one more than the reorder window (120 s of event time by
/// default) after the first two, so that those two are released at once
/// and the sentinel integrates one interval: its alarm records then exist
/// (later builds make a component's records at its first evaluation).
/// Then waits for them (untimed). The end marker shelves one of them.
fn warm_up_sentinel(svc: &mut Service, broker_port: u16, id: &str) {
    let warm = [300, 240, 110].map(|before| ("plant/SENT".to_string(), payload(T0 - before, 550.0))).to_vec();
    publish_stream(broker_port, id, warm);
    svc.poll("the sentinel's alarm records", |s| {
        s.snapshot().filter(|v| {
            v["alarms"].as_array().is_some_and(|a| {
                a.iter().any(|c| c["component"] == "SENTINEL" && c["alarms"].as_array().is_some_and(|r| !r.is_empty()))
            })
        })
    });
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

/// The service's configuration: `[plant]`, the `body` (tags and
/// components), the sections every part shares, and `tail` (e.g.
/// `[database]`, `[alarms]`). With `token`, `[http] token_env` names
/// [`TOKEN_ENV`] (set on the child only), the operator token that MQTT
/// commands carry in later builds.
fn service_config(dir: &Path, mqtt_port: u16, http_port: u16, body: &str, tail: &str, token: bool) -> PathBuf {
    let token = if token { format!("token_env = \"{TOKEN_ENV}\"\n") } else { String::new() };
    let text = format!(
        "[plant]\nname = \"Bench Station\"\n{body}\n\
         [mqtt]\nport = {mqtt_port}\nclient_id = \"lifeledger-bench\"\nreconnect_min_s = 0.1\nreconnect_max_s = 0.5\n\
         [[mqtt.subscription]]\ntopic = \"plant/{{tag}}\"\n\
         [store]\npath = \"{store}\"\n\
         [http]\nlisten = \"127.0.0.1:{http_port}\"\n{token}{tail}",
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
        let mut args = vec!["run", "--config", config.to_str().unwrap()];
        if *INIT_LEDGER.get().expect("the build was probed at start") {
            args.push("--init-ledger");
        }
        let child = Command::new(service_binary())
            .args(args)
            .env("RUST_LOG", "info")
            .env(TOKEN_ENV, OPERATOR_TOKEN)
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

    /// Bytes the service caused to be written to storage so far
    /// (`write_bytes` of /proc/PID/io: the ledger, its WAL and checkpoints,
    /// the log); `None` where the kernel does not say.
    fn disk_write_bytes(&self) -> Option<u64> {
        let s = std::fs::read_to_string(format!("/proc/{}/io", self.child.id())).ok()?;
        s.lines().find_map(|l| l.strip_prefix("write_bytes:")).and_then(|v| v.trim().parse().ok())
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

/// A paced load generator's client (inflight 500) and the thread that
/// polls its connection, counting PUBACKs until `total` have come (the
/// count is what the thread returns; a failed connection, or a minute
/// without any event, panics it rather than leaving the bench waiting).
fn paced_publisher(id: &str, port: u16, total: usize) -> (Client, std::thread::JoinHandle<usize>) {
    let mut o = options(id, port);
    o.set_inflight(500);
    let (client, mut conn) = Client::new(o, 1000);
    let acker = std::thread::spawn(move || {
        let mut acked = 0;
        while acked < total {
            match conn.recv_timeout(Duration::from_secs(60)) {
                Ok(Ok(Event::Incoming(Packet::PubAck(_)))) => acked += 1,
                Ok(Ok(_)) => {}
                Ok(Err(e)) => panic!("paced load generator connection failed: {e}"),
                Err(e) => panic!("paced load generator: {acked} of {total} acknowledged, then {e:?}"),
            }
        }
        acked
    });
    (client, acker)
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
    let cfg = service_config(dir.path(), broker.port, http_port, &body, "", true);
    let events = listen(broker.port, "bench-listener-1", &MARKER_TOPICS);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    // Warm-up, untimed: one sample on the sentinel tag, so that the
    // sentinel component has alarm records the end marker can shelve.
    warm_up_sentinel(&mut svc, broker.port, "bench-load-warmup");
    let mut msgs = throughput_stream(n, 100, 0);
    // End marker: a shelve command. The ledger applies it in order, and
    // once the commit that acknowledges every earlier message is done it
    // publishes its reply (later builds) and its `shelved` event.
    msgs.push(end_marker("end-of-stream marker"));
    let sp = publish_stream(broker.port, "bench-load-service", msgs);
    let service_publisher_rate = rate(sp.acked, sp.last_puback - sp.start);
    let want = n as u64 + WARM_UP;
    let (marker, snapshot_at, snap) = wait_integrated(&svc, &events, want);
    let (done, basis) = match marker {
        Some((t, basis)) => (t, basis),
        None => (snapshot_at, "snapshot poll (up to ~0.5 s late; no end marker received)"),
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
        accepted: counter(&snap, "engine", "accepted").saturating_sub(WARM_UP),
        duplicate: counter(&snap, "engine", "duplicate"),
        acked: counter(&snap, "service", "acked").saturating_sub(WARM_UP),
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
    let cfg = service_config(dir.path(), broker.port, http_port, &body, "", true);
    let events = listen(broker.port, "bench-listener-1c", &MARKER_TOPICS);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    warm_up_sentinel(&mut svc, broker.port, "bench-load-warmup-1c");
    svc.stop();
    let mut backlog = throughput_stream(m, 100, first_round);
    backlog.push(end_marker("end-of-backlog marker"));
    publish_stream(broker.port, "bench-load-backlog", backlog);
    while events.try_recv().is_ok() {}
    let svc = Service::start(&cfg, http_port);
    let online = wait_online(&events);
    let (marker, snapshot_at, snap) = wait_integrated(&svc, &events, WARM_UP + m as u64);
    let (done, basis) = marker.unwrap_or((snapshot_at, "snapshot poll"));
    let d = Drain {
        m,
        rate: rate(m, done - online),
        basis,
        accepted: counter(&snap, "engine", "accepted").saturating_sub(WARM_UP),
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

/// Topics a part with an end marker listens to: the service's status, the
/// alarm events and the command replies.
const MARKER_TOPICS: [&str; 3] = ["lifeledger/status", "lifeledger/alarms/events", "lifeledger/commands/replies"];

/// Whether a message is the end marker's outcome, and which: its `applied`
/// reply (later builds, published right after the commit that holds the
/// shelve) or its `shelved` event (the only shelve in a part's run; later
/// builds publish it from the journal over a second connection, earlier
/// ones right after the commit).
fn marker_outcome(topic: &str, payload: &[u8]) -> Option<&'static str> {
    let v: serde_json::Value = serde_json::from_slice(payload).ok()?;
    match topic {
        "lifeledger/commands/replies" if v["id"] == MARKER_ID && v["outcome"] == "applied" => Some("end-marker reply"),
        "lifeledger/alarms/events" if v["transition"] == "shelved" => Some("end-marker event"),
        _ => None,
    }
}

/// Waits until the snapshot shows `want` samples integrated (accepted +
/// duplicate), watching meanwhile for the end marker (the first of its
/// reply and its event, see [`marker_outcome`]). Returns the marker's
/// receipt and kind, the time the snapshot showed completion, and a
/// snapshot taken after the last commit.
fn wait_integrated(
    svc: &Service,
    events: &mpsc::Receiver<(Instant, String, Vec<u8>)>,
    want: u64,
) -> (Option<(Instant, &'static str)>, Instant, serde_json::Value) {
    let mut marker_at = None;
    let mut snapshot_at = None;
    let (mut last, mut still) = (u64::MAX, 0);
    for _ in 0..MAX_POLLS {
        while let Ok((t, topic, p)) = events.try_recv() {
            if marker_at.is_none() {
                if let Some(kind) = marker_outcome(&topic, &p) {
                    marker_at = Some((t, kind));
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

/// Whether `payload` is an alarm event on `tag` with `index` and
/// `transition`: the tag's own sensor alarm (later builds: one per tag,
/// `component` is the tag's name) or a component's sensor alarm naming
/// the tag in its detail (earlier builds).
fn is_event(payload: &[u8], tag: &str, index: &str, transition: &str) -> bool {
    let Ok(v) = serde_json::from_slice::<serde_json::Value>(payload) else { return false };
    v["index"] == index
        && v["transition"] == transition
        && (v["component"] == tag || v["detail"] == format!("tag {tag}").as_str())
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
    let delays = if build().alarm_delays { OFF_DELAY_NONE } else { "" };
    let cfg = service_config(dir.path(), broker.port, http_port, &body, delays, true);
    let events = listen(broker.port, "bench-listener-2", &["lifeledger/status", "lifeledger/alarms/events"]);
    let svc = Service::start(&cfg, http_port);
    wait_online(&events);

    let slices = ALARMS * CYCLE;
    let total = slices * 100 + ALARMS * 2;
    let (client, acker) = paced_publisher("bench-load-paced", broker.port, total);
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
    let cfg = service_config(dir.path(), broker.port, http_port, &body, "", true);
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

// ---------------------------------------------------------------- 4. write volume

struct WriteVolume {
    n: usize,
    target_rate: usize,
    achieved_rate: f64,
    accepted: u64,
    window_s: f64,
    commits: u64,
    stream_s: f64,
    stream_commits: u64,
    window: WriteTally,
    startup: WriteTally,
    disk_bytes: Option<u64>,
    /// Lines ever appended to the outbox (its AUTOINCREMENT sequence) and
    /// lines the relay saw, both over the whole run including shutdown.
    outbox_appended: Option<u64>,
    relayed_lines: u64,
}

/// Event time between two rounds of the stream (every tag once a round).
const ROUND_S: i64 = 60;

fn write_volume(target_rate: usize, seconds: usize) -> WriteVolume {
    let n = target_rate * seconds;
    eprintln!(
        "[4]  write volume: {n} samples at {target_rate} msg/s into lifeledger run with a database (VictoriaMetrics behind a counting relay)"
    );
    let broker = Mosquitto::start();
    let vm = VictoriaMetrics::start();
    let tap = WriteTap::start(vm.port);
    let dir = WorkDir::new("writes");
    let http_port = free_port();
    let body: String = (0..100).map(tube).collect();
    let tail = format!("[database]\nurl = \"{}\"\norg = \"bench\"\nbucket = \"bench\"\n", tap.url());
    let cfg = service_config(dir.path(), broker.port, http_port, &body, &tail, true);
    let events = listen(broker.port, "bench-listener-4", &["lifeledger/status"]);
    let mut svc = Service::start(&cfg, http_port);
    wait_online(&events);
    // The start-up writes (threshold lines of every component, the first
    // health point) are delivered before the window opens.
    let s0 = svc.poll("the start-up points delivered (outbox empty after a write)", |s| {
        s.snapshot().filter(|v| v["outbox_lines"].as_u64() == Some(0) && tap.tally().accepted > 0)
    });
    let (startup, commits0, disk0) = (tap.tally(), counter(&s0, "service", "commits"), svc.disk_write_bytes());

    // Paced: `per_slice` messages every 10 ms, round by round as in part 1.
    let msgs = throughput_stream(n, 100, 0);
    let per_slice = target_rate.div_ceil(100).max(1);
    let (client, acker) = paced_publisher("bench-load-writes", broker.port, n);
    let start = Instant::now();
    for (k, slice) in msgs.chunks(per_slice).enumerate() {
        for (topic, p) in slice {
            client.publish(topic.clone(), QoS::AtLeastOnce, false, p.clone()).unwrap();
        }
        let next = start + Duration::from_millis(10 * (k as u64 + 1));
        if let Some(d) = next.checked_duration_since(Instant::now()) {
            std::thread::sleep(d);
        }
    }
    let achieved_rate = rate(n, start.elapsed());
    let acked = acker.join().unwrap();
    let _ = client.disconnect();
    // Commits while the stream runs (to its last PUBACK): the steady rate,
    // without the idle tail below (health points, the reorder window's
    // release after one window of wall time).
    let stream_s = start.elapsed().as_secs_f64();
    let stream_commits = svc.snapshot().map(|v| counter(&v, "service", "commits")).unwrap_or(commits0) - commits0;
    // Done when every sample is accepted, none waits in the reorder window
    // and the outbox is empty, twice 1.5 s apart (the outbox figure of a
    // snapshot can be a moment old).
    let done = |s: &Service| {
        s.snapshot().filter(|v| {
            counter(v, "engine", "accepted") + counter(v, "engine", "duplicate") >= n as u64
                && v["held_samples"].as_u64() == Some(0)
                && v["outbox_lines"].as_u64() == Some(0)
        })
    };
    let mut snap = svc.poll("every sample integrated and every point delivered", done);
    for _ in 0..20 {
        std::thread::sleep(Duration::from_millis(1500));
        match done(&svc) {
            Some(v) => {
                snap = v;
                break;
            }
            None => snap = svc.poll("every sample integrated and every point delivered", done),
        }
    }
    let window_s = start.elapsed().as_secs_f64();
    let window = tap.tally().since(&startup);
    let disk_bytes = svc.disk_write_bytes().zip(disk0).map(|(a, b)| a - b);
    let commits = counter(&snap, "service", "commits") - commits0;
    let accepted = counter(&snap, "engine", "accepted");
    svc.stop();
    let relayed_lines = tap.tally().lines;
    let outbox_appended = rusqlite::Connection::open_with_flags(
        dir.path().join("ledger.sqlite"),
        rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY,
    )
    .and_then(|c| c.query_row("SELECT seq FROM sqlite_sequence WHERE name = 'outbox'", [], |r| r.get::<_, i64>(0)))
    .ok()
    .map(|v| v as u64);
    let r = WriteVolume {
        n,
        target_rate,
        achieved_rate,
        accepted,
        window_s,
        commits,
        stream_s,
        stream_commits,
        window,
        startup,
        disk_bytes,
        outbox_appended,
        relayed_lines,
    };
    let per = |x: u64| x as f64 / n as f64;
    eprintln!(
        "     {acked}/{n} PUBACKs at {achieved_rate:.0} msg/s; accepted {accepted}; in {window_s:.1} s: {commits} commits ({:.4}/sample), {} write requests ({} accepted), {} lines ({:.3}/sample), {} bytes ({:.1}/sample); by measurement {:?}; disk {:?} bytes; outbox sequence {:?}, relayed lines {relayed_lines}",
        per(commits),
        r.window.requests,
        r.window.accepted,
        r.window.lines,
        per(r.window.lines),
        r.window.bytes,
        per(r.window.bytes),
        r.window.by_measurement,
        r.disk_bytes,
        r.outbox_appended,
    );
    drop(vm);
    r
}

// ---------------------------------------------------------------- main

fn main() {
    // `cargo bench` passes `--bench`; accept and ignore any arguments.
    let n: usize = std::env::var("LIVE_BENCH_N").ok().and_then(|v| v.parse().ok()).unwrap_or(200_000);
    let parts = std::env::var("LIVE_BENCH_PARTS").unwrap_or_else(|_| "1234".into());
    let env_usize = |k: &str, d: usize| std::env::var(k).ok().and_then(|v| v.parse().ok()).unwrap_or(d);
    let write_rate = env_usize("LIVE_BENCH_WRITE_RATE", 1000).max(1);
    let write_s = env_usize("LIVE_BENCH_WRITE_S", 30).max(1);
    let b = Build::probe();
    eprintln!(
        "     build under test {}: run --init-ledger {}, [alarms.delays] {}, MQTT commands with token and id {}",
        service_binary().display(),
        b.init_ledger,
        b.alarm_delays,
        b.command_token
    );
    let _ = BUILD.set(b);
    let t = parts.contains('1').then(|| throughput(n));
    let l = parts.contains('2').then(latency);
    let m = parts.contains('3').then(memory);
    let w = parts.contains('4').then(|| write_volume(write_rate, write_s));
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
    if let Some(w) = w {
        let per = |x: u64| x as f64 / w.n as f64;
        let (lines, bytes) = (w.window.lines, w.window.bytes);
        println!(
            "| write volume: samples paced (100 tubes × 2 tags, {ROUND_S} s of event time per round), target / achieved | {} at {} / {:.0} msg/s, {} accepted, window {:.1} s | |",
            w.n, w.target_rate, w.achieved_rate, w.accepted, w.window_s
        );
        println!(
            "| ledger commits per sample: while the stream runs ({:.1} s) / to all delivered ({:.1} s, idle tail included) | {:.4} ({} commits) / {:.4} ({}) | |",
            w.stream_s,
            w.window_s,
            per(w.stream_commits),
            w.stream_commits,
            per(w.commits),
            w.commits
        );
        println!(
            "| database writes per sample (each accepted one removes its lines from the outbox in one more transaction) | {:.4} ({} requests, {} accepted) | |",
            per(w.window.requests),
            w.window.requests,
            w.window.accepted
        );
        println!(
            "| outbox lines / bytes per sample (sent to the database) | {:.3} / {:.1} ({lines} lines, {bytes} bytes) | |",
            per(lines),
            per(bytes)
        );
        for (m, (l, b)) in &w.window.by_measurement {
            println!(
                "| lines of `{m}`: per sample, share of lines (bytes) | {:.4}, {:.1} % ({b} bytes, {:.1} % ) | |",
                per(*l),
                100.0 * *l as f64 / lines.max(1) as f64,
                100.0 * *b as f64 / bytes.max(1) as f64
            );
        }
        if let Some(d) = w.disk_bytes {
            println!(
                "| bytes written to storage by the service per sample (/proc/PID/io) | {:.0} ({d} bytes) | |",
                per(d)
            );
        }
        println!(
            "| start-up writes before the stream (not counted above): lines / bytes / requests | {} / {} / {} | |",
            w.startup.lines, w.startup.bytes, w.startup.requests
        );
        println!(
            "| lines appended to the outbox over the run (its sequence) / lines the relay passed on | {} / {} | equal |",
            w.outbox_appended.map_or("?".to_string(), |v| v.to_string()),
            w.relayed_lines
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
