//! SIGHUP reloads of the live service against a real mosquitto broker:
//! * a reload that would retire every component is refused, the running
//!   configuration stays and samples keep being integrated;
//! * a changed subscription topic template changes the broker
//!   subscription (samples on the new topic are integrated);
//! * a changed `[http] listen` is not applied and is reported as needing a
//!   restart;
//! * `run` refuses a configuration without components.

#![allow(dead_code)]

mod common;

use common::BoundedOutput;

use common::service::{publish_all, publish_messages, samples, Service, ServiceConfig};
use common::{free_port, http, poll_until, workspace_bin, Mosquitto};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

fn config(dir: &Path, mqtt_port: u16, http_port: u16) -> PathBuf {
    ServiceConfig { plant: "Reload Station", client_id: "lifeledger-reload", ..ServiceConfig::default() }
        .write(dir, mqtt_port, http_port)
}

fn rfc3339(ts: i64) -> String {
    chrono::DateTime::from_timestamp(ts, 0).unwrap().format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string()
}

/// Every log line the service wrote in `dir` (each start has its own file).
fn logs(dir: &Path) -> String {
    let mut all = String::new();
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        if e.path().extension().is_some_and(|x| x == "log") {
            all.push_str(&std::fs::read_to_string(e.path()).unwrap_or_default());
        }
    }
    all
}

#[test]
fn a_reload_to_an_empty_configuration_is_refused_and_intake_goes_on() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let s = samples(200);
    publish_all(broker.port, &s[..400], "publisher-reload-1");
    svc.wait_until_integrated(s[399].1);

    // An empty file: every component would be retired.
    std::fs::write(&cfg, "").unwrap();
    svc.signal("HUP");
    let after = poll_until("the reload to be refused or applied", || {
        svc.snapshot()
            .filter(|v| !v["reload_refused"].is_null() || v["components"].as_array().is_some_and(|c| c.len() < 2))
    });
    assert_eq!(after["components"].as_array().map(|c| c.len()), Some(2), "both components still configured: {after}");
    assert_eq!(after["retired_components"].as_array().map(|c| c.len()), Some(0), "{after}");
    let why = after["reload_refused"].as_str().unwrap_or_default();
    assert!(why.contains("retire 2 of the 2") && why.contains("allow_retiring_most"), "{why}");
    assert!(logs(dir.path()).contains("SIGHUP: configuration not reloaded"), "the refusal is logged");

    // The old configuration keeps running: the next samples are integrated.
    publish_all(broker.port, &s[400..], "publisher-reload-2");
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    assert_eq!(live["engine"]["duplicate"], 0);
    assert!(svc.sigterm().success());
}

#[test]
fn a_changed_topic_template_changes_the_subscription() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let s = samples(100);
    publish_all(broker.port, &s[..200], "publisher-topic-1");
    svc.wait_until_integrated(s[199].1);

    let text = std::fs::read_to_string(&cfg).unwrap();
    assert!(text.contains("topic = \"plant/{tag}\""));
    std::fs::write(&cfg, text.replace("topic = \"plant/{tag}\"", "topic = \"site2/{tag}\"")).unwrap();
    svc.signal("HUP");

    // Publish minute by minute on the new topic until one minute is
    // integrated (the subscription takes a round trip to the broker; a
    // message published before it is in place reaches nobody).
    let mut integrated = None;
    for (i, minute) in s[200..].chunks(4).enumerate() {
        let messages: Vec<(String, Vec<u8>)> = minute
            .iter()
            .map(|(tag, ts, v)| {
                (format!("site2/{tag}"), format!("{{\"value\": {v:?}, \"timestamp\": {ts}}}").into_bytes())
            })
            .collect();
        publish_messages(broker.port, messages, &format!("publisher-topic-2-{i}"));
        std::thread::sleep(Duration::from_millis(300));
        // Past the last minute on the old topic: a minute on the new one
        // was integrated (after the reorder window of 2 s released it).
        let before = rfc3339(s[199].1);
        let snap = svc.snapshot().unwrap();
        let comps = snap["components"].as_array().cloned().unwrap_or_default();
        if !comps.is_empty() && comps.iter().all(|c| c["integrated_to"].as_str() > Some(before.as_str())) {
            integrated = Some(i);
            break;
        }
        if i >= 40 {
            break;
        }
    }
    let log = logs(dir.path());
    assert!(
        integrated.is_some(),
        "no sample on the new topic site2/... was integrated within 40 minutes' messages:\n{log}"
    );
    assert!(log.contains("subscribed to site2/+") && log.contains("unsubscribed from plant/+"), "{log}");
    assert!(svc.sigterm().success());
}

#[test]
fn a_changed_http_listen_is_reported_as_needing_a_restart() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let text = std::fs::read_to_string(&cfg).unwrap();
    let other = free_port();
    let listen = format!("listen = \"127.0.0.1:{http_port}\"");
    assert!(text.contains(&listen));
    std::fs::write(&cfg, text.replace(&listen, &format!("listen = \"127.0.0.1:{other}\""))).unwrap();
    svc.signal("HUP");
    // Still answering on the old address, and saying why.
    let snap = poll_until("the reload to name [http] listen as needing a restart", || {
        svc.snapshot().filter(|v| v["restart_required"].as_array().is_some_and(|r| !r.is_empty()))
    });
    assert_eq!(snap["restart_required"], serde_json::json!(["[http] listen"]), "{snap}");
    let ready = http::get(http_port, "/readyz").unwrap();
    assert!(ready.text().contains("restart required for [http] listen"), "{}", ready.text());
    let metrics = http::get(http_port, "/metrics").unwrap().text();
    assert!(metrics.contains("lifeledger_restart_required 1"), "{metrics}");
    assert!(http::get(other, "/healthz").is_err(), "the new address is not served before a restart");
    let log = logs(dir.path());
    assert!(log.contains("not applied until the service restarts: [http] listen"), "{log}");
    assert!(svc.sigterm().success());
}

#[test]
fn run_refuses_a_plant_without_components_unless_allowed() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = dir.path().join("empty.toml");
    let store = dir.path().join("ledger.sqlite");
    let http_port = free_port();
    std::fs::write(
        &cfg,
        format!("[store]\npath = {:?}\n[http]\nlisten = \"127.0.0.1:{http_port}\"\n[mqtt]\nport = 9\n", store),
    )
    .unwrap();
    let mut run = Command::new(workspace_bin());
    run.args(["run", "--config", cfg.to_str().unwrap()]);
    let out = common::output_within_budget(run, "run on a plant without components (it must refuse)");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "run must refuse an empty plant: {err}");
    assert!(err.contains("no [[component]] is configured") && err.contains("allow_retiring_most"), "{err}");
    assert!(!store.exists(), "no ledger is created for a refused configuration");
    // check-config, the unit's pre-start check, refuses it the same way.
    let out = Command::new(workspace_bin()).args(["check-config", cfg.to_str().unwrap()]).bounded_output().unwrap();
    let text = format!("{}{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
    assert_eq!(out.status.code(), Some(1), "{text}");
    assert!(text.contains("no [[component]] is configured"), "{text}");
    // Allowed: check-config passes with a warning.
    std::fs::write(&cfg, format!("[plant]\nallow_retiring_most = true\n{}", std::fs::read_to_string(&cfg).unwrap()))
        .unwrap();
    let out = Command::new(workspace_bin()).args(["check-config", cfg.to_str().unwrap()]).bounded_output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{text}");
    assert!(text.contains("warning: no [[component]] is configured"), "{text}");
}
