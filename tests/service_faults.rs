//! The live service under what operators and the outside world do to it,
//! against real servers (mosquitto, VictoriaMetrics, the stock `sqlite3`
//! tool):
//! * the documented online backup (`sqlite3 LEDGER ".backup 'B'"`, see
//!   deploy/README.md) taken while the service runs, followed by `kill -9`,
//!   loses nothing acknowledged;
//! * one message larger than the client would take does not stop intake:
//!   it is counted as rejected and the samples behind it are processed;
//! * commits that keep failing are counted, make `/readyz` answer not
//!   ready, and end the process with a clear error after the configured
//!   time, having acknowledged nothing they did not write;
//! * a missing or empty ledger file (a data volume that did not mount) is
//!   refused, creating nothing, unless `run --init-ledger` asks for a new
//!   ledger;
//! * a batch the database refuses as malformed is parked in the ledger,
//!   counted and reported, not dropped and not counted as delivered, and
//!   the points behind it go on;
//! * a database that refuses the service itself (a wrong token: HTTP 401)
//!   raises the service-health alarm and shows in the snapshot and
//!   `/metrics`, keeps every point in the outbox, and clears when the
//!   database takes the points again;
//! * under systemd (`Type=notify`), readiness is sent once intake runs and
//!   the watchdog is fed only while the ledger commits; each log line
//!   carries its journald priority.

mod common;

use common::BoundedOutput;

use common::service::{publish_all, publish_messages, samples, Service, ServiceConfig};
use common::{free_port, http, poll_until, Mosquitto, VictoriaMetrics};
use std::path::{Path, PathBuf};
use std::process::Command;

/// The shared test plant with `tail` after its `[http]` section.
fn config(dir: &Path, mqtt_port: u16, http_port: u16, tail: &str) -> PathBuf {
    ServiceConfig { plant: "Test Station", client_id: "lifeledger-faults", tail, ..ServiceConfig::default() }
        .write(dir, mqtt_port, http_port)
}

/// A `[database]` section for VictoriaMetrics at `url`, short backoff.
fn database(url: &str) -> String {
    format!(
        "[database]\nurl = \"{url}\"\norg = \"test\"\nbucket = \"test\"\nbackoff_initial_s = 0.1\nbackoff_max_s = 0.5\n"
    )
}

/// Runs the stock `sqlite3` tool on `db` with `args`; panics with its
/// output unless it succeeds. Returns its standard output. It waits up to
/// 10 s for a lock the service holds in a commit rather than failing at once.
fn sqlite3(db: &Path, args: &[&str]) -> String {
    let o = Command::new("sqlite3")
        .args(["-cmd", ".timeout 10000"])
        .arg(db)
        .args(args)
        .bounded_output()
        .unwrap_or_else(|e| panic!("cannot run sqlite3 (is it installed? see tests/run): {e}"));
    assert!(
        o.status.success(),
        "sqlite3 {} {args:?} failed: {}{}",
        db.display(),
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// The number of messages the service has acknowledged, from its snapshot.
fn acked(svc: &Service) -> Option<u64> {
    svc.snapshot().and_then(|v| v["service"]["acked"].as_u64())
}

/// deploy/README.md's online backup, taken while the service runs with a
/// database configured (so the outbox sender holds a second connection to
/// the ledger), must not cost durability: every sample acknowledged after
/// the backup is still in the ledger after a `kill -9`. The broker does not
/// redeliver what was acknowledged, so a lost commit would show as missing
/// samples.
#[test]
fn an_online_backup_then_kill_9_loses_nothing_acknowledged() {
    let broker = Mosquitto::start();
    let vm = VictoriaMetrics::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, &database(&vm.url()));
    let ledger = dir.path().join("ledger.sqlite");
    let backup = dir.path().join("backup.ledger");
    let s = samples(300);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();

    publish_all(broker.port, &s[..400], "publisher-backup-1");
    svc.wait_until_integrated(s[399].1);
    // The backup step exactly as deploy/README.md gives it.
    sqlite3(&ledger, &[&format!(".backup '{}'", backup.display())]);
    assert_eq!(sqlite3(&backup, &["PRAGMA integrity_check"]).trim(), "ok", "the backup is a sound SQLite file");

    publish_all(broker.port, &s[400..], "publisher-backup-2");
    svc.wait_until_integrated(s.last().unwrap().1);
    poll_until("every message acknowledged", || acked(&svc).filter(|&a| a >= s.len() as u64));
    // What the service acknowledged is in the file for other readers too.
    let n: u64 =
        sqlite3(&ledger, &["SELECT json_extract(value, '$.accepted') FROM meta WHERE key = 'engine_counters'"])
            .trim()
            .parse()
            .unwrap();
    assert_eq!(n, s.len() as u64, "the ledger file holds every acknowledged sample while the service runs");

    svc.kill9();
    let svc = Service::start(&cfg, http_port);
    let snap = poll_until("the snapshot after the restart", || svc.snapshot());
    assert_eq!(
        snap["engine"]["accepted"].as_u64(),
        Some(s.len() as u64),
        "every sample acknowledged before the kill is in the ledger after it"
    );
    assert!(svc.sigterm().success());
}

/// One message far larger than any tag sample (2 MiB) must not stop
/// intake: the service takes it, rejects it as `oversized`, acknowledges
/// it once the rejection is committed, and goes on with the samples behind
/// it. Before, the client refused the packet and dropped the connection,
/// and the broker redelivered it on every reconnect.
#[test]
fn an_oversized_message_is_counted_and_intake_goes_on() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, "");
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();

    let s = samples(60);
    let pad = "x".repeat(2 << 20);
    let big = format!("{{\"value\": 500.0, \"timestamp\": {}, \"pad\": \"{pad}\"}}", s[0].1).into_bytes();
    publish_messages(broker.port, vec![("plant/TE-1", big)], "publisher-oversized-1");
    publish_all(broker.port, &s, "publisher-oversized-2");
    let snap = svc.wait_until_integrated(s.last().unwrap().1);
    assert_eq!(snap["engine"]["accepted"].as_u64(), Some(s.len() as u64), "every normal sample integrated");
    let all = s.len() as u64 + 1;
    poll_until("every message acknowledged, the oversized one too", || acked(&svc).filter(|&a| a >= all));
    let m = http::get(http_port, "/metrics").unwrap().text();
    assert!(m.contains("lifeledger_samples_rejected_total{reason=\"oversized\"} 1"), "{m}");
    assert_eq!(http::get(http_port, "/readyz").unwrap().status, 200);
    assert!(svc.sigterm().success());
}

/// Triggers that make every write of the service's counters fail, as a
/// full disk or a ledger file the service may not write would: every
/// commit writes the counters. They work whoever runs the test, root
/// included (file permissions do not stop root), and come off again with
/// [`ALLOW_WRITES`].
const REFUSE_WRITES: &str = "CREATE TRIGGER test_refuse_insert BEFORE INSERT ON meta \
     BEGIN SELECT RAISE(ABORT, 'writes refused by the test'); END; \
     CREATE TRIGGER test_refuse_update BEFORE UPDATE ON meta \
     BEGIN SELECT RAISE(ABORT, 'writes refused by the test'); END;";
const ALLOW_WRITES: &str = "DROP TRIGGER test_refuse_insert; DROP TRIGGER test_refuse_update;";

/// The value of an unlabelled metric in `/metrics` text.
fn metric(text: &str, name: &str) -> Option<f64> {
    text.lines().find_map(|l| l.strip_prefix(name)?.strip_prefix(' ')?.trim().parse().ok())
}

/// While every commit fails the service must say so and not spin: failures
/// are counted in `/metrics`, `/readyz` answers 503 naming the cause, the
/// error is logged a few times rather than thousands, and after
/// `commit_failure_limit_s` the process ends with a clear error and a
/// non-zero status (so systemd restarts it). Nothing it could not write was
/// acknowledged: once writes work again, a restart takes the redelivered
/// messages and the ledger holds every sample exactly once.
#[test]
fn failing_commits_are_reported_and_end_the_process_after_the_limit() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, "");
    let text = std::fs::read_to_string(&cfg).unwrap();
    let limit = "health_interval_s = 1\ncommit_failure_limit_s = 15\n";
    std::fs::write(&cfg, text.replace("health_interval_s = 1\n", limit)).unwrap();
    let ledger = dir.path().join("ledger.sqlite");
    let s = samples(200);
    let mut svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    publish_all(broker.port, &s[..400], "publisher-failing-1");
    svc.wait_until_integrated(s[399].1);
    assert_eq!(http::get(http_port, "/readyz").unwrap().status, 200);

    sqlite3(&ledger, &[REFUSE_WRITES]);
    publish_all(broker.port, &s[400..], "publisher-failing-2");
    let why = poll_until("/readyz to answer not ready while commits fail", || {
        http::get(http_port, "/readyz").ok().filter(|r| r.status == 503).map(|r| r.text())
    });
    assert!(why.contains("commit"), "readiness names the failing commits: {why}");
    let failures = poll_until("lifeledger_commit_failures_total above 0", || {
        let m = http::get(http_port, "/metrics").ok()?.text();
        metric(&m, "lifeledger_commit_failures_total").filter(|&n| n > 0.0)
    });
    assert!(failures >= 1.0);

    let (status, log) = svc.wait_exit("the service to stop after commits failed for commit_failure_limit_s");
    assert!(!status.success(), "a service that cannot write its ledger exits with an error: {status}");
    assert!(log.contains("commits have failed for"), "a clear last word in the log:\n{log}");
    let logged = log.lines().filter(|l| l.contains("ledger commit failed")).count();
    assert!((1..=20).contains(&logged), "commit errors are rate-limited, {logged} lines:\n{log}");
    drop(svc);

    sqlite3(&ledger, &[ALLOW_WRITES]);
    let svc = Service::start(&cfg, http_port);
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    assert_eq!(live["engine"]["accepted"].as_u64(), Some(s.len() as u64), "every sample exactly once");
    assert!(svc.sigterm().success());
}

/// A ledger that is not there (a data volume that failed to mount leaves
/// an empty directory, or a 0-byte file) must not silently become a new
/// ledger that restarts every component from its initial values: `run`
/// refuses, names the file and the fix, and creates nothing; with
/// `--init-ledger` it starts a new ledger.
#[test]
fn a_missing_or_empty_ledger_is_refused_unless_run_is_told_to_create_one() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, "");
    let ledger = dir.path().join("ledger.sqlite");
    let listing = |d: &Path| {
        let mut v: Vec<String> =
            std::fs::read_dir(d).unwrap().map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect();
        v.sort();
        v
    };
    struct Kill(std::process::Child);
    impl Drop for Kill {
        fn drop(&mut self) {
            let _ = self.0.kill();
            let _ = self.0.wait();
        }
    }
    // The log lives outside the ledger's directory, so the listing sees
    // only what the service itself made.
    let logs = tempfile::tempdir().unwrap();
    let spawn = |log: &Path| {
        Kill(
            Command::new(common::workspace_bin())
                .args(["run", "--config", cfg.to_str().unwrap()])
                .env("RUST_LOG", "info")
                .stdin(std::process::Stdio::null())
                .stdout(std::process::Stdio::null())
                .stderr(std::fs::File::create(log).unwrap())
                .spawn()
                .unwrap(),
        )
    };
    let run = |log: &Path| {
        let mut child = spawn(log);
        let status = poll_until("run without --init-ledger to refuse and exit", || child.0.try_wait().unwrap());
        (status, std::fs::read_to_string(log).unwrap())
    };

    for empty in [false, true] {
        if empty {
            std::fs::write(&ledger, b"").unwrap();
        }
        let before = listing(dir.path());
        // Refused before it connects anywhere, so this returns at once.
        let (status, err) = run(&logs.path().join(format!("refused-{empty}.log")));
        assert!(!status.success(), "run must refuse a ledger that is not there:\n{err}");
        let what = if empty { "the file is empty" } else { "the file does not exist" };
        assert!(err.contains(&ledger.display().to_string()) && err.contains(what), "{err}");
        assert!(err.contains("--init-ledger") && err.contains("Nothing was created"), "{err}");
        assert_eq!(listing(dir.path()), before, "a refused start must create nothing");
        if empty {
            assert_eq!(std::fs::metadata(&ledger).unwrap().len(), 0, "the empty file stays empty");
        }
    }

    // Told to, it creates the ledger and runs (Service::start passes
    // --init-ledger); afterwards the ledger opens without the flag.
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    assert!(svc.sigterm().success());
    assert!(std::fs::metadata(&ledger).unwrap().len() > 0);
    let _again = spawn(&logs.path().join("again.log"));
    poll_until("the restarted service (no --init-ledger) to answer /healthz", || {
        http::get(http_port, "/healthz").ok().filter(|r| r.status == 200)
    });
}

/// A point the database refuses as malformed (VictoriaMetrics answers 400
/// to a line longer than its 256 KiB line limit; its default
/// `-influx.maxLineSize`, checked against the running server by the test)
/// is parked: kept in the ledger's `parked_line` table with the database's
/// answer, counted in the snapshot and in `/metrics`, never counted as
/// delivered; the points before and after it are delivered.
#[test]
fn a_batch_the_database_refuses_is_parked_counted_and_kept() {
    let broker = Mosquitto::start();
    let vm = VictoriaMetrics::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    // One line per batch, so the refused line is a batch of its own.
    let tail = format!("{}batch_lines = 1\n", database(&vm.url()));
    let cfg = config(dir.path(), broker.port, http_port, &tail);
    let t = "1790812800000000000";
    let huge = format!("parking_probe,k=b s=\"{}\" {t}", "x".repeat(300 * 1024));
    let lines = vec![format!("parking_probe,k=a v=1 {t}"), huge.clone(), format!("parking_probe,k=c v=3 {t}")];
    {
        let mut store = lifeledger::store::Store::open(&dir.path().join("ledger.sqlite")).unwrap();
        store.commit(&lifeledger::store::Commit { outbox: &lines, ..Default::default() }).unwrap();
    }
    let svc = Service::start(&cfg, http_port);
    let snap = poll_until("the outbox to empty with one line parked", || {
        svc.snapshot().filter(|s| s["outbox_lines"] == 0 && s["outbox_parked_lines"] == 1)
    });
    assert_eq!(snap["outbox_parked_lines"], 1, "{snap}");
    let metrics = http::get(http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&metrics, "lifeledger_outbox_parked_lines"), Some(1.0), "{metrics}");
    vm.flush();
    let mut delivered: Vec<String> =
        vm.export("{__name__=\"parking_probe_v\"}").iter().map(|e| e.label("k").unwrap().to_string()).collect();
    delivered.sort();
    assert_eq!(delivered, ["a", "c"], "the points before and after the refused one are delivered");
    assert!(svc.sigterm().success());
    let store = lifeledger::store::Store::open(&dir.path().join("ledger.sqlite")).unwrap();
    let parked = store.parked_lines().unwrap();
    assert_eq!(parked.len(), 1);
    assert_eq!(parked[0].0, huge, "the refused line is kept as it was");
    assert!(parked[0].2.contains("400"), "the database's answer is kept: {}", parked[0].2);
}

/// A database that refuses the service (VictoriaMetrics with basic
/// authentication answers 401 to the token the InfluxDB v2 API carries)
/// raises the `lifeledger:database` service-health alarm with the
/// database's answer, shows in the snapshot and in `/metrics`, and loses
/// nothing: the points stay in the outbox. With a database that takes the
/// token again (restarted without authentication on the same port), the
/// outbox drains and the alarm returns to normal.
#[test]
fn a_database_that_refuses_the_token_raises_the_service_health_alarm() {
    let broker = Mosquitto::start();
    let mut vm = VictoriaMetrics::start_with(&["-httpAuth.username=someone", "-httpAuth.password=else"]);
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, &database(&vm.url()));
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let s = samples(20);
    publish_all(broker.port, &s, "faults-refused");
    // The alarm record of the database, when there is one.
    let record = |v: &serde_json::Value| -> Option<serde_json::Value> {
        v["alarms"]
            .as_array()?
            .iter()
            .find(|c| c["component"] == "lifeledger:database")
            .and_then(|c| c["alarms"].as_array()?.first().cloned())
    };
    let snap = poll_until("the service-health alarm for the refusing database", || {
        svc.snapshot().filter(|v| record(v).is_some_and(|r| r["condition"].is_string()))
    });
    let alarm = record(&snap).unwrap();
    assert_eq!(alarm["index"], "service_health", "{alarm}");
    assert!(alarm["detail"].as_str().unwrap_or("").contains("401"), "the database's answer is named: {alarm}");
    assert!(snap["database_refusal"].as_str().is_some_and(|r| r.contains("401")), "{snap}");
    assert!(snap["outbox_lines"].as_u64().unwrap_or(0) > 0, "points stay in the outbox: {snap}");
    let metrics = http::get(http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&metrics, "lifeledger_database_refusing"), Some(1.0), "{metrics}");
    // Alarm counts by state and severity, and the build, are on /metrics too.
    let standing: f64 = metrics
        .lines()
        .filter(|l| l.starts_with("lifeledger_alarms{") && l.contains("state=\"unacknowledged\""))
        .filter_map(|l| l.rsplit(' ').next()?.parse::<f64>().ok())
        .sum();
    assert!(standing >= 1.0, "the database alarm is counted as unacknowledged:\n{metrics}");
    let build = format!("lifeledger_build_info{{version=\"{}\"}} 1", env!("CARGO_PKG_VERSION"));
    assert!(metrics.lines().any(|l| l == build), "{build} missing:\n{metrics}");
    // The database takes the token again: the outbox drains, the alarm clears.
    vm.stop();
    vm.restart_without_flags();
    let snap = poll_until("the outbox to drain and the database alarm to clear", || {
        svc.snapshot().filter(|v| {
            v["outbox_lines"] == 0
                && v["database_refusal"].is_null()
                && record(v).is_some_and(|r| r["condition"].is_null())
        })
    });
    assert_eq!(snap["database_reachable"], true, "{snap}");
    let metrics = http::get(http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&metrics, "lifeledger_database_refusing"), Some(0.0), "{metrics}");
    assert!(svc.sigterm().success());
}

/// The service under systemd's side channel: `READY=1` once intake runs,
/// `WATCHDOG=1` pings at half the `WATCHDOG_USEC` interval while commits
/// succeed and none while they fail (systemd then restarts a wedged
/// service); with `JOURNAL_STREAM` set, every log line starts with its
/// `sd-daemon(3)` priority (`<6>` info, `<4>` warning, `<3>` error), so
/// `journalctl -p warning` finds the warnings. The variables are given to
/// the child process only.
#[test]
fn under_systemd_readiness_watchdog_and_log_priorities_tell_the_truth() {
    use std::os::unix::net::UnixDatagram;
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, "");
    let sock_path = dir.path().join("notify.sock");
    let sock = UnixDatagram::bind(&sock_path).unwrap();
    sock.set_read_timeout(Some(std::time::Duration::from_millis(50))).unwrap();
    let env =
        [("NOTIFY_SOCKET", sock_path.to_str().unwrap()), ("WATCHDOG_USEC", "1000000"), ("JOURNAL_STREAM", "8:12345")];
    let svc = Service::start_with_env(&cfg, http_port, &env);
    let recv = || -> Option<String> {
        let mut buf = [0u8; 4096];
        sock.recv(&mut buf).ok().map(|n| String::from_utf8_lossy(&buf[..n]).into_owned())
    };
    let mut seen: Vec<String> = vec![];
    poll_until("READY=1 and two WATCHDOG=1 pings on NOTIFY_SOCKET", || {
        seen.extend(recv());
        (seen.iter().any(|m| m.starts_with("READY=1"))
            && seen.iter().filter(|m| m.starts_with("WATCHDOG=1")).count() >= 2)
            .then_some(())
    });
    let first_ping = seen.iter().position(|m| m.starts_with("WATCHDOG=1")).unwrap();
    let ready = seen.iter().position(|m| m.starts_with("READY=1")).unwrap();
    assert!(ready < first_ping, "readiness comes before the first ping: {seen:?}");

    // Commits fail: the pings stop (status lines say why), readiness fails.
    svc.wait_connected();
    sqlite3(&dir.path().join("ledger.sqlite"), &[REFUSE_WRITES]);
    publish_all(broker.port, &samples(5), "publisher-systemd");
    poll_until("/readyz to answer not ready while commits fail", || {
        http::get(http_port, "/readyz").ok().filter(|r| r.status == 503)
    });
    // Drain what was sent before the failure was seen, then listen for
    // several watchdog intervals: status lines, no ping.
    while recv().is_some() {}
    let mut during: Vec<String> = vec![];
    for _ in 0..80 {
        during.extend(recv());
    }
    assert!(!during.is_empty(), "status lines keep coming while commits fail");
    assert!(during.iter().all(|m| !m.starts_with("WATCHDOG=1")), "no watchdog ping while commits fail: {during:?}");
    assert!(during.iter().any(|m| m.contains("commit")), "the status says why: {during:?}");
    sqlite3(&dir.path().join("ledger.sqlite"), &[ALLOW_WRITES]);
    poll_until("a WATCHDOG=1 ping once commits succeed again", || recv().filter(|m| m.starts_with("WATCHDOG=1")));

    let (status, log) = svc.sigterm_with_log();
    assert!(status.success());
    let lines: Vec<&str> = log.lines().filter(|l| !l.trim().is_empty()).collect();
    assert!(lines.iter().any(|l| l.starts_with("<6>") && l.contains("INFO")), "info lines carry <6>:\n{log}");
    assert!(lines.iter().any(|l| l.starts_with("<3>") && l.contains("ERROR")), "error lines carry <3>:\n{log}");
    for l in &lines {
        let p = ["<3>", "<4>", "<6>", "<7>"].iter().find(|p| l.starts_with(**p));
        if let Some(p) = p {
            let level = match *p {
                "<3>" => "ERROR",
                "<4>" => "WARN",
                "<6>" => "INFO",
                _ => "DEBUG",
            };
            assert!(l.contains(level), "priority {p} on a line of another level: {l}");
        }
    }
    assert!(!log.contains("\u{1b}["), "no colour escapes when stderr is not a terminal:\n{log}");
}
