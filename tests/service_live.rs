//! The live service against real servers: a real mosquitto broker, a real
//! VictoriaMetrics speaking the InfluxDB v2 write API, a real MQTT client
//! publishing QoS 1 and waiting for every acknowledgement. These tests are
//! the acceptance tests of the design invariants:
//! * live and replay of the same samples give identical ledgers;
//! * `kill -9` at any moment loses nothing acknowledged, counts nothing twice;
//! * a database outage loses no point;
//! * SIGTERM stops cleanly, SIGHUP reloads and keeps every ledger;
//! * alarms go out on MQTT (event and retained state topics) and can be
//!   acknowledged by command;
//! * the status page's alarm history and component trends survive a
//!   restart.

mod common;

use common::BoundedOutput;

use common::service::{publish_all, publish_all_paced, publish_messages, samples, Sample, Service, ServiceConfig};
use common::{free_port, http, poll_until, Mosquitto, VictoriaMetrics};
use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

/// Alarm thresholds of the tube, the advisory level low enough for the
/// test streams to raise an advisory alarm.
const TUBE_THRESHOLDS: &str = "[component.thresholds]
life_fraction = { advisory = 0.00002, warning = 0.5, critical = 0.7 }";

/// The shared test plant; with `db`, a `[database]` at that URL with a
/// short backoff.
fn config(dir: &Path, mqtt_port: u16, http_port: u16, db: Option<&str>) -> PathBuf {
    let database = db.map_or(String::new(), |u| format!("[database]\nurl = \"{u}\"\norg = \"test\"\nbucket = \"test\"\nbackoff_initial_s = 0.1\nbackoff_max_s = 0.5\n"));
    ServiceConfig {
        plant: "Test Station",
        client_id: "lifeledger-test",
        tube: TUBE_THRESHOLDS,
        tail: &database,
        ..ServiceConfig::default()
    }
    .write(dir, mqtt_port, http_port)
}

/// A broker of its own and the service on the shared test plant in `dir`
/// (no database), connected to it; with the configuration's path.
fn start_plant(dir: &Path) -> (Mosquitto, PathBuf, Service) {
    let broker = Mosquitto::start();
    let http_port = free_port();
    let cfg = config(dir, broker.port, http_port, None);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    (broker, cfg, svc)
}

/// The environment variable [`with_operator_token`] names in `[http] token_env`.
const TOKEN_VAR: &str = "LIFELEDGER_TEST_OPERATOR_TOKEN";
/// The operator token alarm commands carry (MQTT: the `token` field).
const TOKEN: &str = "live-operator-token";

/// Adds `[http] token_env` to the configuration at `cfg`: alarm commands
/// need the operator token.
fn with_operator_token(cfg: &Path) {
    let text =
        std::fs::read_to_string(cfg).unwrap().replace("[http]\n", &format!("[http]\ntoken_env = \"{TOKEN_VAR}\"\n"));
    std::fs::write(cfg, text).unwrap();
}

/// The service with the operator token in its environment.
fn start_operated(cfg: &Path, http_port: u16) -> Service {
    Service::start_with_env(cfg, http_port, &[(TOKEN_VAR, TOKEN)])
}

fn csv(dir: &Path, s: &[Sample]) -> PathBuf {
    let mut t = String::from("timestamp,tag,value\n");
    for (tag, ts, v) in s {
        t.push_str(&format!("{ts},{tag},{v:?}\n"));
    }
    let p = dir.join("history.csv");
    std::fs::write(&p, t).unwrap();
    p
}

fn replay_json(config: &Path, csv: &Path) -> serde_json::Value {
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["replay", "--config", config.to_str().unwrap(), "--input", csv.to_str().unwrap(), "--format", "json"])
        .bounded_output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

const LEDGER_FIELDS: [&str; 9] = [
    "creep_life_fraction",
    "creep_strain",
    "wear_depth_mm",
    "integrated_h",
    "unmonitored_h",
    "hours_in_creep_range",
    "over_design_h",
    "damage_rate_per_h",
    "histograms",
];

/// Component `name` of a snapshot or report.
fn component<'a>(v: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    v["components"].as_array().unwrap().iter().find(|c| c["component"] == name).unwrap_or_else(|| panic!("no {name}"))
}

fn compare(live: &serde_json::Value, replay: &serde_json::Value, rel: f64) {
    let a = live["components"].as_array().unwrap();
    let b = replay["components"].as_array().unwrap();
    assert_eq!(a.len(), b.len());
    // The API lists the components in the attention ranking, replay in the
    // configuration's order: matched by name.
    for y in b {
        let x = a
            .iter()
            .find(|x| x["component"] == y["component"])
            .unwrap_or_else(|| panic!("{} not live", y["component"]));
        for f in LEDGER_FIELDS {
            if rel == 0.0 || !x[f].is_number() {
                assert_eq!(x[f], y[f], "{} {f}", x["component"]);
            } else {
                let (p, q) = (x[f].as_f64().unwrap(), y[f].as_f64().unwrap());
                assert!((p - q).abs() <= rel * q.abs().max(1e-300), "{} {f}: live {p} replay {q}", x["component"]);
            }
        }
    }
}

#[test]
fn live_and_replay_give_identical_ledgers() {
    let dir = tempfile::tempdir().unwrap();
    let (broker, cfg, svc) = start_plant(dir.path());
    let s = samples(600);
    publish_all(broker.port, &s, "publisher-identity");
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    let replay = replay_json(&cfg, &csv(dir.path(), &s));
    compare(&live, &replay, 0.0);
    assert_eq!(live["engine"]["accepted"], replay["counters"]["accepted"]);
    assert!(component(&live, "SH-TUBE")["creep_life_fraction"].as_f64().unwrap() > 0.0);
    assert!(component(&live, "SUPPORT")["wear_depth_mm"].as_f64().unwrap() > 0.0);
    // `lifeledger ledger` reads the same ledger from the file while the
    // service runs, without changing it.
    let file = ledger_json(&cfg);
    compare(&file, &replay, 0.0);
    assert_eq!(file["counters"]["accepted"], replay["counters"]["accepted"]);
    assert!(file["caution"].as_str().unwrap().contains("governing code"));
    // The alarm states are the ones the service holds (records are stored
    // when their state changes, so values are those of the last change;
    // the tube's low advisory level is passed in this stream).
    let records = |v: &serde_json::Value| -> Vec<serde_json::Value> {
        v["alarms"].as_array().unwrap().iter().flat_map(|c| c["alarms"].as_array().unwrap().clone()).collect()
    };
    let live_records = records(&live);
    for r in records(&file) {
        let l = live_records.iter().find(|l| l["component"] == r["component"] && l["index"] == r["index"]).unwrap();
        for k in ["state", "severity", "since_ms"] {
            assert_eq!(r[k], l[k], "{} {} {k}", r["component"], r["index"]);
        }
    }
    let tube = file["alarms"].as_array().unwrap().iter().find(|a| a["component"] == "SH-TUBE").unwrap();
    assert!(
        tube["alarms"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r["index"] == "creep_life_fraction" && r["severity"] == "advisory"),
        "{tube}"
    );
    assert!(svc.sigterm().success());
    let ledger = dir.path().join("ledger.sqlite");
    let before = std::fs::read(&ledger).unwrap();
    compare(&ledger_json(&cfg), &replay, 0.0);
    assert!(std::fs::read(&ledger).unwrap() == before, "reading the ledger changed the file");
}

/// `lifeledger ledger --format json` on a service's configuration.
fn ledger_json(config: &Path) -> serde_json::Value {
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["ledger", "--config", config.to_str().unwrap(), "--format", "json"])
        .bounded_output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

#[test]
fn kill_9_loses_nothing_and_counts_nothing_twice() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, None);
    let s = samples(3000);
    // First run: make the persistent session exist.
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let publisher = {
        let s = s.clone();
        let port = broker.port;
        std::thread::spawn(move || {
            for (i, chunk) in s.chunks(400).enumerate() {
                publish_all(port, chunk, &format!("publisher-kill-{i}"));
                std::thread::sleep(Duration::from_millis(100));
            }
        })
    };
    // Kill the service repeatedly while the stream runs; restart each time.
    let mut svc = svc;
    let mut last_accepted = 0;
    let mut kills = 0;
    for round in 0..5 {
        let seen = poll_until("progress before a kill", || {
            svc.snapshot().and_then(|v| v["engine"]["accepted"].as_u64()).filter(|&a| a > last_accepted)
        });
        if seen >= s.len() as u64 {
            break;
        }
        last_accepted = seen;
        svc.kill9();
        kills += 1;
        eprintln!("round {round}: killed at {seen} of {} samples", s.len());
        svc = Service::start(&cfg, http_port);
    }
    assert!(kills >= 2, "the stream ended before two kills ({kills})");
    publisher.join().unwrap();
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    let replay = replay_json(&cfg, &csv(dir.path(), &s));
    // The design asks for 1e-12 relative; the engine is deterministic, so
    // the ledgers are in fact identical.
    compare(&live, &replay, 1e-12);
    compare(&live, &replay, 0.0);
    let accepted = live["engine"]["accepted"].as_u64().unwrap();
    assert_eq!(accepted, s.len() as u64, "every sample integrated exactly once");
    drop(svc);
}

#[test]
fn database_outage_loses_no_point() {
    let broker = Mosquitto::start();
    let mut vm = VictoriaMetrics::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, Some(&vm.url()));
    let s = samples(400);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    publish_all(broker.port, &s[..800], "publisher-outage-1");
    svc.wait_until_integrated(s[799].1);
    vm.stop();
    publish_all(broker.port, &s[800..], "publisher-outage-2");
    let during = svc.wait_until_integrated(s.last().unwrap().1);
    assert!(during["outbox_lines"].as_u64().unwrap() > 0, "points wait in the outbox while the database is down");
    vm.start_again();
    let done = poll_until("the outbox to drain", || svc.snapshot().filter(|v| v["outbox_lines"] == 0));
    let series_points = done["service"]["series_points"].as_u64().unwrap();
    vm.flush();
    let exported = vm.export("{__name__=\"component_state_unmonitored_h\"}");
    let n: usize = exported.iter().map(|e| e.samples().len()).sum();
    assert_eq!(n as u64, series_points, "every component_state point arrived");
    // Values: the newest point of the tube equals the ledger.
    let lf = vm.export("{__name__=\"component_state_creep_life_fraction\",component=\"SH-TUBE\"}");
    let newest = lf[0].samples().last().unwrap().1;
    let ledger = component(&done, "SH-TUBE")["creep_life_fraction"].as_f64().unwrap();
    assert!((newest / ledger - 1.0).abs() < 1e-6, "{newest} vs {ledger}");
    // Thresholds and alarm events reached the database too.
    assert!(!vm.export("{__name__=\"alarm_threshold_value\"}").is_empty());
    assert!(!vm.export("{__name__=~\"alarm_event_.*\"}").is_empty());
    // Health points are written on wall-clock time; wait for one to land.
    poll_until("a service_health point in the database", || {
        vm.flush();
        (!vm.export("{__name__=~\"service_health_.*\"}").is_empty()).then_some(())
    });
    drop(svc);
}

#[test]
fn sigterm_stops_cleanly_and_restart_resumes() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, None);
    let s = samples(300);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    publish_all(broker.port, &s[..600], "publisher-term-1");
    svc.wait_until_integrated(s[599].1);
    let (status, log) = svc.sigterm_with_log();
    assert!(status.success(), "clean exit on SIGTERM");
    // A clean stop says so, and the broker closing the connection after the
    // service's DISCONNECT is not reported as a fault.
    let stopping = log.find("SIGTERM: stopping").unwrap_or_else(|| panic!("no stop in the log:\n{log}"));
    let tail = &log[stopping..];
    assert!(tail.contains("stopped"), "{log}");
    assert!(!tail.contains("lost or refused") && !tail.contains("WARN") && !tail.contains("ERROR"), "{tail}");
    // While it is down the broker keeps the backlog of the persistent session.
    publish_all(broker.port, &s[600..], "publisher-term-2");
    let svc = Service::start(&cfg, http_port);
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    compare(&live, &replay_json(&cfg, &csv(dir.path(), &s)), 0.0);
    assert_eq!(live["engine"]["duplicate"], 0);
    // SIGHUP with a configuration that drops a component keeps its ledger.
    let text = std::fs::read_to_string(&cfg).unwrap();
    let cut = text.find("[[component]]\nname = \"SUPPORT\"").unwrap();
    let end = text.find("[mqtt]").unwrap();
    std::fs::write(&cfg, format!("{}{}", &text[..cut], &text[end..])).unwrap();
    svc.signal("HUP");
    let after =
        poll_until("reload", || svc.snapshot().filter(|v| v["components"].as_array().is_some_and(|c| c.len() == 1)));
    assert_eq!(after["retired_components"][0], "SUPPORT");
    assert_eq!(component(&after, "SH-TUBE")["creep_life_fraction"], component(&live, "SH-TUBE")["creep_life_fraction"]);
    assert!(svc.sigterm().success());
}

#[test]
fn alarms_go_out_on_mqtt_and_can_be_acknowledged() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, None);
    with_operator_token(&cfg);
    // A listener for the alarm topics.
    let mut o = MqttOptions::new("alarm-listener", "127.0.0.1", broker.port);
    o.set_keep_alive(Duration::from_secs(30));
    let (client, mut conn) = Client::new(o, 100);
    client.subscribe("lifeledger/alarms/#", QoS::AtLeastOnce).unwrap();
    let (tx, rx) = std::sync::mpsc::channel::<(String, serde_json::Value)>();
    std::thread::spawn(move || {
        for ev in conn.iter() {
            match ev {
                Ok(Event::Incoming(Packet::Publish(p))) => {
                    if let Ok(v) = serde_json::from_slice(&p.payload) {
                        if tx.send((p.topic.clone(), v)).is_err() {
                            break;
                        }
                    }
                }
                Ok(_) => {}
                Err(_) => break,
            }
        }
    });
    let svc = start_operated(&cfg, http_port);
    svc.wait_connected();
    let s = samples(400);
    publish_all(broker.port, &s, "publisher-alarms");
    svc.wait_until_integrated(s.last().unwrap().1);
    let mut got = vec![];
    let event = poll_until("an alarm event on MQTT", || {
        while let Ok(m) = rx.try_recv() {
            got.push(m);
        }
        got.iter().find(|(t, v)| t == "lifeledger/alarms/events" && v["index"] == "creep_life_fraction").cloned()
    });
    let e = &event.1;
    assert_eq!(e["component"], "SH-TUBE");
    assert_eq!(e["severity"], "advisory");
    assert_eq!(e["state"], "unacknowledged");
    assert!(e["caution"].as_str().unwrap().contains("governing code"));
    assert!(e["threshold"].as_f64().is_some() && e["value"].as_f64().is_some() && e["time"].is_string());
    poll_until("the retained state topic", || {
        while let Ok(m) = rx.try_recv() {
            got.push(m);
        }
        got.iter().any(|(t, _)| t == "lifeledger/alarms/state/SH-TUBE").then_some(())
    });
    // Acknowledge by command.
    client
        .publish(
            "lifeledger/commands",
            QoS::AtLeastOnce,
            false,
            serde_json::json!({"action": "acknowledge", "component": "SH-TUBE", "index": "creep_life_fraction",
                               "by": "test operator", "token": TOKEN})
            .to_string(),
        )
        .unwrap();
    poll_until("the acknowledged state", || {
        while let Ok(m) = rx.try_recv() {
            got.push(m);
        }
        got.iter().find(|(t, v)| t == "lifeledger/alarms/events" && v["state"] == "acknowledged").cloned()
    });
    // Durable: after a restart the alarm is still acknowledged.
    assert!(svc.sigterm().success());
    let svc = start_operated(&cfg, http_port);
    // The ledger's first snapshot (the HTTP side may answer with the empty
    // one for a moment after start-up, before it is forwarded).
    let snap = poll_until("the restarted ledger's snapshot with its alarms", || {
        svc.snapshot().filter(|s| s["alarms"][0]["alarms"].is_array())
    });
    let recs = snap["alarms"][0]["alarms"].as_array().unwrap();
    assert!(recs.iter().any(|r| r["index"] == "creep_life_fraction" && r["state"] == "acknowledged"), "{recs:?}");
    let _ = client.disconnect();
}

#[test]
fn bad_messages_are_counted_and_the_service_keeps_running() {
    let dir = tempfile::tempdir().unwrap();
    let (broker, _, svc) = start_plant(dir.path());
    let http_port = svc.http_port;
    let bad: Vec<(&str, Vec<u8>)> = vec![
        ("plant/TE-1", b"not json".to_vec()),
        ("plant/TE-1", br#"{"value": "hot", "timestamp": 1790812800}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 1e999, "timestamp": 1790812800}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 5000, "timestamp": 1790812800}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 500, "timestamp": "yesterday"}"#.to_vec()),
        ("plant/NO-SUCH-TAG", br#"{"value": 1, "timestamp": 1790812800}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 500, "timestamp": 1790812800, "quality": "bad"}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 500, "timestamp": 1790812800}"#.to_vec()),
        ("plant/TE-1", br#"{"value": 500, "timestamp": 1790812800}"#.to_vec()),
    ];
    let n = bad.len();
    publish_messages(broker.port, bad, "bad-publisher");
    let snap = poll_until("all nine messages counted", || {
        svc.snapshot().filter(|v| v["service"]["acked"].as_u64().unwrap_or(0) >= n as u64)
    });
    let e = &snap["engine"];
    let d = &snap["service"]["decode_rejected"];
    assert_eq!(d["malformed_payload"], 3, "{d}"); // not json, "hot", 1e999 (not a JSON number)
    assert_eq!(d["bad_timestamp"], 1);
    assert_eq!(e["out_of_range"], 1);
    assert_eq!(e["unknown_tag"], 1);
    assert_eq!(e["bad_quality"], 1);
    assert_eq!(e["accepted"], 1);
    assert_eq!(e["duplicate"], 1);
    let m = http::get(http_port, "/metrics").unwrap().text();
    assert!(m.contains("lifeledger_samples_rejected_total{reason=\"out_of_range\"} 1"), "{m}");
    assert_eq!(http::get(http_port, "/readyz").unwrap().status, 200);
    assert!(svc.sigterm().success());
}

#[test]
fn outbox_over_quota_pauses_intake_and_resumes_without_loss() {
    let broker = Mosquitto::start();
    let mut vm = VictoriaMetrics::start();
    let url = vm.url();
    vm.stop();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    // A tiny quota: a few dozen points.
    let cfg = config(dir.path(), broker.port, http_port, Some(&url));
    let text = std::fs::read_to_string(&cfg)
        .unwrap()
        .replace("backoff_max_s = 0.5\n", "backoff_max_s = 0.5\noutbox_quota_bytes = 20000\n")
        // Small group commits: each one adds at most a point per component,
        // so the outbox grows in small steps and crosses the quota well
        // before the stream ends, however fast the machine drains the broker.
        .replace("health_interval_s = 1\n", "health_interval_s = 1\ncommit_max_samples = 20\n");
    std::fs::write(&cfg, text).unwrap();
    let s = samples(600);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let publisher = {
        let s = s.clone();
        let port = broker.port;
        std::thread::spawn(move || publish_all(port, &s, "publisher-quota"))
    };
    // The service stops taking messages and says so.
    let held = poll_until("intake to pause", || svc.snapshot().filter(|v| v["holding"] == true));
    assert!(held["outbox_bytes"].as_u64().unwrap() > 20000);
    assert_eq!(http::get(http_port, "/readyz").unwrap().status, 503);
    let a1 = held["engine"]["accepted"].as_u64().unwrap();
    assert!(a1 < s.len() as u64, "intake paused before the end of the stream ({a1} of {} accepted)", s.len());
    eprintln!("intake paused after {a1} of {} samples", s.len());
    let alarm = poll_until("the service-health alarm", || {
        svc.snapshot()
            .filter(|v| v["recent_events"].as_array().is_some_and(|e| e.iter().any(|e| e["index"] == "service_health")))
    });
    assert_eq!(alarm["holding"], true);
    // The database comes back: the outbox drains, intake resumes, and every
    // sample is integrated exactly once.
    vm.start_again();
    publisher.join().unwrap();
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    assert_eq!(live["engine"]["accepted"].as_u64().unwrap(), s.len() as u64);
    compare(&live, &replay_json(&cfg, &csv(dir.path(), &s)), 0.0);
    let done = poll_until("the outbox to drain", || {
        svc.snapshot().filter(|v| v["outbox_lines"] == 0 && v["holding"] == false)
    });
    vm.flush();
    let n: usize = vm.export("{__name__=\"component_state_unmonitored_h\"}").iter().map(|e| e.samples().len()).sum();
    assert_eq!(n as u64, done["service"]["series_points"].as_u64().unwrap());
    drop(svc);
}

/// The events of `/api/components/{component}/alarms?limit=...`, newest first.
fn alarm_history(svc: &Service, component: &str, limit: usize) -> Vec<serde_json::Value> {
    let h = svc
        .get_json(&format!("/api/components/{component}/alarms?limit={limit}"))
        .unwrap_or_else(|| panic!("no alarm history for {component}"));
    assert_eq!(h["component"], component);
    assert!(h["caution"].as_str().unwrap().contains("governing code"));
    h["events"].as_array().unwrap().clone()
}

/// Whether `e` is an event of the tube's creep life-fraction alarm with
/// this `transition`.
fn tube_creep(e: &serde_json::Value, transition: &str) -> bool {
    e["component"] == "SH-TUBE" && e["index"] == "creep_life_fraction" && e["transition"] == transition
}

/// `event` without the journal's `id`, as the snapshot shows it.
fn without_id(event: &serde_json::Value) -> serde_json::Value {
    let mut e = event.clone();
    e.as_object_mut().unwrap().remove("id");
    e
}

#[test]
fn alarm_history_survives_a_restart() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Mosquitto::start();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, None);
    with_operator_token(&cfg);
    let svc = start_operated(&cfg, http_port);
    svc.wait_connected();
    let s = samples(400);
    publish_all(broker.port, &s, "publisher-history");
    svc.wait_until_integrated(s.last().unwrap().1);
    let raised = poll_until("the creep alarm among the recent events", || {
        svc.snapshot().and_then(|v| v["recent_events"].as_array()?.iter().find(|e| tube_creep(e, "activated")).cloned())
    });
    let before = alarm_history(&svc, "SH-TUBE", 1000);
    let journaled = before.iter().find(|e| tube_creep(e, "activated")).expect("the creep alarm in the journal");
    assert_eq!(without_id(journaled), raised, "the journal holds the event as the snapshot shows it");
    assert!(svc.sigterm().success(), "clean exit on SIGTERM");

    // Same store, new process: the history is read back from the ledger.
    let svc = start_operated(&cfg, http_port);
    let snap = poll_until("snapshot", || svc.snapshot());
    let recent = snap["recent_events"].as_array().unwrap();
    assert!(recent.contains(&raised), "the creep alarm is still among the recent events: {recent:?}");
    let after = alarm_history(&svc, "SH-TUBE", 1000);
    for e in &before {
        assert!(after.contains(e), "event {e} of the first run kept, with its id");
    }

    // New events follow the old ones, newest first, none of them twice.
    svc.wait_connected();
    let ack = serde_json::json!({"action": "acknowledge", "component": "SH-TUBE", "index": "creep_life_fraction",
                                 "by": "test operator", "token": TOKEN});
    publish_messages(broker.port, vec![("lifeledger/commands", ack.to_string().into_bytes())], "command-sender");
    let history = poll_until("the acknowledge in the alarm history", || {
        let h = alarm_history(&svc, "SH-TUBE", 1000);
        h.iter().any(|e| tube_creep(e, "acknowledged")).then_some(h)
    });
    let ids: Vec<i64> = history.iter().map(|e| e["id"].as_i64().unwrap()).collect();
    assert!(ids.windows(2).all(|w| w[0] > w[1]), "newest first: {ids:?}");
    let distinct: std::collections::BTreeSet<String> = history.iter().map(|e| without_id(e).to_string()).collect();
    assert_eq!(distinct.len(), history.len(), "no event recorded twice: {history:?}");
    let at = |t: &str| history.iter().position(|e| tube_creep(e, t)).unwrap();
    assert!(at("acknowledged") < at("activated"), "the acknowledge is newer than the activation");
    assert_eq!(alarm_history(&svc, "SH-TUBE", 1), history[..1], "limit=1 is the newest event");
    poll_until("the acknowledge among the recent events", || {
        svc.snapshot()
            .filter(|v| v["recent_events"].as_array().is_some_and(|e| e.iter().any(|e| tube_creep(e, "acknowledged"))))
    });
    assert_eq!(http::get(http_port, "/api/components/NO-SUCH/alarms").unwrap().status, 404);
    assert_eq!(http::get(http_port, "/api/components/SH-TUBE/alarms?limit=many").unwrap().status, 400);
    assert!(svc.sigterm().success());
}

/// The points of `GET /api/components/{component}/trend{query}`, newest last.
fn trend(svc: &Service, component: &str, query: &str) -> Vec<serde_json::Value> {
    let t = svc
        .get_json(&format!("/api/components/{component}/trend{query}"))
        .unwrap_or_else(|| panic!("no trend for {component}{query}"));
    assert_eq!(t["component"], component);
    t["points"].as_array().unwrap().clone()
}

/// The event times of trend points.
fn times(points: &[serde_json::Value]) -> Vec<i64> {
    points.iter().map(|p| p["t"].as_i64().unwrap()).collect()
}

/// Publishes `s` twenty minutes at a time, each part integrated before the
/// next, so every part gives every component a trend point; returns the
/// last snapshot.
fn publish_in_parts(svc: &Service, port: u16, s: &[Sample], id: &str) -> serde_json::Value {
    let mut snap = serde_json::Value::Null;
    for (i, part) in s.chunks(4 * 20).enumerate() {
        publish_all(port, part, &format!("{id}-{i}"));
        snap = svc.wait_until_integrated(part.last().unwrap().1);
    }
    snap
}

#[test]
fn trends_survive_a_restart() {
    let dir = tempfile::tempdir().unwrap();
    let (broker, cfg, svc) = start_plant(dir.path());
    let http_port = svc.http_port;
    let s = samples(300);
    let (first, second) = s.split_at(4 * 200);
    let snap = publish_in_parts(&svc, broker.port, first, "publisher-trend-1");
    let tube = trend(&svc, "SH-TUBE", "");
    let support = trend(&svc, "SUPPORT", "");
    let t = times(&tube);
    assert!(t.len() >= 10, "a point per part at least: {t:?}");
    assert!(t.windows(2).all(|w| w[0] < w[1]), "oldest first, each time once: {t:?}");
    // The newest point is the ledger as the snapshot shows it.
    assert_eq!(*t.last().unwrap(), first.last().unwrap().1 * 1000);
    let ledger = |name: &str| snap["components"].as_array().unwrap().iter().find(|c| c["component"] == name).unwrap();
    let newest = tube.last().unwrap();
    for f in ["creep_life_fraction", "creep_strain", "pressure_mpa", "hoop_stress_mpa", "metal_temperature_c"] {
        assert_eq!(newest[f], ledger("SH-TUBE")[f], "SH-TUBE {f}");
    }
    assert_eq!(support.last().unwrap()["wear_index"], ledger("SUPPORT")["wear_index"]);
    assert!(support.last().unwrap()["wear_index"].as_f64().unwrap() > 0.0);
    assert!(svc.sigterm().success(), "clean exit on SIGTERM");

    // Same store, new process: the trend is read back from the ledger.
    let svc = Service::start(&cfg, http_port);
    assert_eq!(trend(&svc, "SH-TUBE", ""), tube, "the whole trend kept");
    assert_eq!(trend(&svc, "SUPPORT", ""), support);
    // Windows: the newest `limit` of the points at or after `since_ms`.
    let n = tube.len();
    assert_eq!(trend(&svc, "SH-TUBE", "?limit=3"), tube[n - 3..]);
    assert_eq!(trend(&svc, "SH-TUBE", &format!("?since_ms={}", t[n - 2])), tube[n - 2..]);
    assert_eq!(trend(&svc, "SH-TUBE", &format!("?since_ms={}&limit=1", t[1])), tube[n - 1..]);
    assert!(trend(&svc, "SH-TUBE", &format!("?since_ms={}", t[n - 1] + 1)).is_empty());
    assert_eq!(http::get(http_port, "/api/components/NO-SUCH/trend").unwrap().status, 404);
    assert_eq!(http::get(http_port, "/api/components/SH-TUBE/trend?limit=many").unwrap().status, 400);

    // New points follow the old ones, none of them twice.
    svc.wait_connected();
    publish_in_parts(&svc, broker.port, second, "publisher-trend-2");
    let after = trend(&svc, "SH-TUBE", "");
    assert_eq!(after[..n], tube[..], "the points of the first run stay as they were");
    let t = times(&after);
    assert!(t.len() > n && t.windows(2).all(|w| w[0] < w[1]), "new points after the old ones: {t:?}");
    assert_eq!(*t.last().unwrap(), s.last().unwrap().1 * 1000);
    assert!(svc.sigterm().success());
}

#[test]
fn a_sample_stamped_in_2062_is_a_sensor_fault_and_poisons_nothing() {
    // The reproduction: one JSON sample stamped decades ahead used to be
    // integrated to that instant, after which every good sample was late
    // and the component stayed dead.
    let dir = tempfile::tempdir().unwrap();
    let (broker, cfg, svc) = start_plant(dir.path());
    let s = samples(240);
    let (first, rest) = s.split_at(400);
    publish_all(broker.port, first, "publisher-before");
    // 2062-03-01T00:00:00Z, as epoch seconds.
    publish_messages(
        broker.port,
        vec![("plant/TE-1", br#"{"value": 560.0, "timestamp": 2908483200}"#.to_vec())],
        "gateway-with-a-bad-clock",
    );
    publish_all(broker.port, rest, "publisher-after");
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    let replay = replay_json(&cfg, &csv(dir.path(), &s));
    compare(&live, &replay, 0.0);
    assert_eq!(live["engine"]["implausible_time"], 1, "counted by its own reason");
    assert_eq!(live["engine"]["accepted"], replay["counters"]["accepted"]);
    let m = http::get(svc.http_port, "/metrics").unwrap().text();
    assert!(m.contains("lifeledger_samples_rejected_total{reason=\"implausible_time\"} 1"), "{m}");
    // Shown as a sensor fault of the tube that reads TE-1.
    let tube = live["alarms"].as_array().unwrap().iter().find(|a| a["component"] == "SH-TUBE").unwrap();
    let fault = tube["alarms"].as_array().unwrap().iter().find(|r| r["index"] == "sensor_out_of_range");
    assert!(fault.is_some_and(|r| r["state"] != "normal"), "no sensor fault for the 2062 sample: {tube}");
    assert!(svc.sigterm().success());
}

/// The state of alarm `index` of `component` in a snapshot.
fn alarm_state(snap: &serde_json::Value, component: &str, index: &str) -> Option<String> {
    let c = snap["alarms"].as_array()?.iter().find(|a| a["component"] == component)?;
    let r = c["alarms"].as_array()?.iter().find(|r| r["index"] == index)?;
    r["state"].as_str().map(String::from)
}

#[test]
fn a_dead_feed_raises_stale_alarms_by_the_wall_clock_and_readiness_says_so() {
    // The reproduction: ten minutes of samples, then nothing, used to leave
    // every alarm normal and /readyz ready; a tag that never reported
    // raised nothing.
    let dir = tempfile::tempdir().unwrap();
    let broker = Mosquitto::start();
    let http_port = free_port();
    let cfg = ServiceConfig {
        plant: "Test Station",
        client_id: "lifeledger-dead-feed",
        tail: "[alarms]\nstale_grace_s = 1\nno_data_alarm_s = 6\n",
        ..ServiceConfig::default()
    }
    .write(dir.path(), broker.port, http_port);
    let text = std::fs::read_to_string(&cfg).unwrap().replace("max_hold_s = 600", "max_hold_s = 3");
    std::fs::write(&cfg, text).unwrap();
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    // Ten minutes of samples stamped up to now, for every tag but SLIP-1.
    let now_s = chrono::Utc::now().timestamp();
    let mut msgs = vec![];
    for k in (0..10).rev() {
        let ts = now_s - 60 * k;
        for (tag, v) in [("TE-1", 540.0), ("PT-1", 170.0), ("LOAD-1", 80.0)] {
            msgs.push((format!("plant/{tag}"), format!("{{\"value\": {v}, \"timestamp\": {ts}}}").into_bytes()));
        }
    }
    publish_messages(broker.port, msgs, "feed-that-dies");
    let snap = poll_until("the feed's samples to be accepted", || {
        svc.snapshot().filter(|s| s["engine"]["accepted"].as_u64() == Some(30))
    });
    let te = snap["freshness"]["tags"].as_array().unwrap().iter().find(|t| t["tag"] == "TE-1").unwrap().clone();
    assert!(te["data_age_s"].as_f64().is_some(), "{te}");
    // SLIP-1 never reported: the support's stale alarm, from start-up.
    poll_until("the stale alarm of the support (SLIP-1 never reported)", || {
        svc.snapshot().filter(|s| alarm_state(s, "SUPPORT", "sensor_stale").is_some_and(|st| st != "normal"))
    });
    // The feed is dead: the tube's inputs go stale by the wall clock.
    poll_until("the stale alarm of the tube after its feed stopped", || {
        svc.snapshot().filter(|s| alarm_state(s, "SH-TUBE", "sensor_stale").is_some_and(|st| st != "normal"))
    });
    let r = poll_until("/readyz to say there is no plant data", || {
        http::get(http_port, "/readyz").ok().filter(|r| r.status == 503)
    });
    assert!(r.text().contains("no plant data"), "{}", r.text());
    let m = http::get(http_port, "/metrics").unwrap().text();
    assert!(m.contains("lifeledger_tag_data_age_seconds{tag=\"TE-1\"}"), "{m}");
    assert!(m.contains("lifeledger_tag_stale{tag=\"SLIP-1\"} 1"), "{m}");
    assert!(m.contains("lifeledger_plant_data_missing 1"), "{m}");
    assert!(m.contains("lifeledger_component_lag_seconds{component=\"SH-TUBE\"}"), "{m}");
    let snap = svc.snapshot().unwrap();
    let tube =
        snap["freshness"]["components"].as_array().unwrap().iter().find(|c| c["component"] == "SH-TUBE").unwrap();
    assert!(tube["data_age_s"].as_f64().unwrap() >= 3.0, "{tube}");
    // The plant-level service-health alarm went out as an event.
    assert!(
        snap["recent_events"]
            .as_array()
            .unwrap()
            .iter()
            .any(|e| e["index"] == "service_health" && e["component"] == "lifeledger:plant-data"),
        "{}",
        snap["recent_events"]
    );
    assert!(svc.sigterm().success());
}

#[test]
fn series_points_follow_event_time_not_commits() {
    // The reproduction: a backlog of one-minute scans arriving in one burst
    // was committed in a few batches and gave one point per batch (75
    // instead of 84 over 84 minutes). Points are due at every
    // series_interval_s (60 s here) of event time, as `replay --write-lp`
    // writes them.
    let dir = tempfile::tempdir().unwrap();
    let (broker, cfg, svc) = start_plant(dir.path());
    let s = samples(84);
    publish_all(broker.port, &s, "burst-publisher");
    svc.wait_until_integrated(s.last().unwrap().1);
    let live = times(&trend(&svc, "SH-TUBE", ""));
    let lp = dir.path().join("series.lp");
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["replay", "--config", cfg.to_str().unwrap(), "--format", "json", "--lp-interval-s", "60", "--input"])
        .arg(csv(dir.path(), &s))
        .arg("--write-lp")
        .arg(&lp)
        .bounded_output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let replayed: Vec<i64> = std::fs::read_to_string(&lp)
        .unwrap()
        .lines()
        .filter(|l| l.starts_with("component_state,") && l.contains("component=SH-TUBE"))
        .map(|l| l.rsplit(' ').next().unwrap().parse::<i64>().unwrap() / 1_000_000)
        .collect();
    // One point a minute from the first integrated minute to the last.
    assert_eq!(live.len(), 83, "{live:?}");
    assert_eq!(live, replayed, "the live series has the replay's event times");
    assert!(svc.sigterm().success());
}

/// Group commit: 2 000 samples arriving steadily at about 500 a second
/// (a rate at which the ledger thread's queue runs dry after every
/// message) are written in far fewer transactions than samples, because an
/// open batch is committed only once it is `[store] commit_interval_ms`
/// (150 ms by default) old; and nothing is lost: the ledger equals a
/// replay of the same samples.
#[test]
fn a_steady_stream_is_group_committed_and_nothing_is_lost() {
    let dir = tempfile::tempdir().unwrap();
    let (broker, cfg, svc) = start_plant(dir.path());
    let commits = |v: &serde_json::Value| v["service"]["commits"].as_u64().expect("service.commits in the snapshot");
    let before = commits(&svc.snapshot().unwrap());
    let s = samples(500);
    assert_eq!(s.len(), 2000);
    publish_all_paced(broker.port, &s, "steady-publisher", Duration::from_millis(2));
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    let used = commits(&live) - before;
    // About 4 s of stream at 150 ms per batch is some 30 commits, plus one
    // per service_health point (each second in this configuration) and per
    // alarm change; one commit per message would be about 2 000.
    eprintln!("{used} commits for {} samples", s.len());
    assert!(used <= 200, "{used} commits for {} samples: not group-committed", s.len());
    assert_eq!(live["engine"]["accepted"], 2000, "{}", live["engine"]);
    compare(&live, &replay_json(&cfg, &csv(dir.path(), &s)), 0.0);
    assert!(svc.sigterm().success());
}

/// `lifeledger resend`: a database that lost the points it had accepted
/// (here: a new, empty VictoriaMetrics in place of the first) gets a
/// component's series back from the ledger's own records, for the range of
/// event time asked, with the values and event times the service first
/// sent; sending twice changes nothing (points carry their event time).
#[test]
fn resend_restores_lost_points_from_the_ledger_idempotently() {
    let broker = Mosquitto::start();
    let first = VictoriaMetrics::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port, Some(&first.url()));
    let s = samples(240);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    publish_all(broker.port, &s, "publisher-resend");
    svc.wait_until_integrated(s.last().unwrap().1);
    poll_until("the outbox to drain", || svc.snapshot().filter(|v| v["outbox_lines"] == 0));
    assert!(svc.sigterm().success());
    first.flush();
    let series = |vm: &VictoriaMetrics, field: &str, component: &str| -> Vec<(i64, f64)> {
        let e = vm.export(&format!("{{__name__=\"component_state_{field}\",component=\"{component}\"}}"));
        assert!(e.len() <= 1, "one series per component and field: {}", e.len());
        e.first().map(|e| e.samples()).unwrap_or_default()
    };
    let fields = [("creep_life_fraction", "SH-TUBE"), ("metal_temperature_k", "SH-TUBE"), ("wear_index", "SUPPORT")];
    let sent: Vec<Vec<(i64, f64)>> = fields.iter().map(|(f, c)| series(&first, f, c)).collect();
    assert!(sent.iter().all(|v| v.len() > 100), "the service wrote its series first");
    drop(first);

    // The database lost everything: a new one, empty.
    let second = VictoriaMetrics::start();
    let cfg = config(dir.path(), broker.port, http_port, Some(&second.url()));
    let (from_ms, to_ms) = ((common::service::T0 + 3600) * 1000, (common::service::T0 + 3 * 3600) * 1000);
    let rfc = |ms: i64| chrono::DateTime::from_timestamp_millis(ms).unwrap().to_rfc3339();
    for _ in 0..2 {
        let o = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
            .args(["resend", "--config", cfg.to_str().unwrap(), "--all", "--from", &rfc(from_ms), "--to", &rfc(to_ms)])
            .bounded_output()
            .unwrap();
        assert!(o.status.success(), "resend failed: {}", String::from_utf8_lossy(&o.stderr));
    }
    second.flush();
    for ((field, component), before) in fields.iter().zip(&sent) {
        let want: Vec<(i64, f64)> = before.iter().copied().filter(|(t, _)| (from_ms..=to_ms).contains(t)).collect();
        assert!(want.len() >= 100, "{field}: the range holds points");
        let got = series(&second, field, component);
        assert_eq!(
            got.iter().map(|p| p.0).collect::<Vec<_>>(),
            want.iter().map(|p| p.0).collect::<Vec<_>>(),
            "{component} {field}: the same event times, each once, none outside the range"
        );
        for ((t, a), (_, b)) in got.iter().zip(&want) {
            // Temperatures go through the trend's degrees Celsius and back.
            assert!((a - b).abs() <= 1e-9 * b.abs().max(1e-300), "{component} {field} at {t}: resent {a}, sent {b}");
        }
    }
}
