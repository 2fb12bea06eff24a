//! Alarm event messages are published from the durable alarm journal until
//! the broker acknowledges them (issue 10, defect 9): with a real mosquitto,
//! events committed while the broker is down and a `kill -9` of the service
//! before it ever reaches the broker again still reach a subscriber once
//! broker and service are back, each with its sequence number (duplicates
//! allowed; every committed sequence number present).

mod common;

use common::service::{publish_all, samples, Service, ServiceConfig};
use common::{free_port, http, poll_until, Mosquitto};
use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::mpsc::Receiver;
use std::time::Duration;

/// The environment variable the test's `[http] token_env` names.
const TOKEN_VAR: &str = "LIFELEDGER_TEST_OPERATOR_TOKEN";
/// The operator token the service is started with.
const TOKEN: &str = "op-token-event-journal-7c21";
const EVENTS: &str = "lifeledger/alarms/events";

/// The shared test plant with the tube's advisory creep level low enough
/// for 400 minutes of samples to raise it, and the operator token.
fn config(dir: &Path, mqtt_port: u16, http_port: u16) -> PathBuf {
    let tail = format!("token_env = \"{TOKEN_VAR}\"\n");
    ServiceConfig {
        plant: "Event Station",
        client_id: "lifeledger-events-test",
        tube: "[component.thresholds]\nlife_fraction = { advisory = 0.00002, warning = 0.5, critical = 0.7 }",
        tail: &tail,
        ..ServiceConfig::default()
    }
    .write(dir, mqtt_port, http_port)
}

/// A subscriber to the event topic, reconnecting after errors and
/// subscribing on every connection without a kept session, until the
/// receiver is dropped; every event's JSON goes to the channel, and a
/// `{"suback": true}` for each subscription the broker confirms.
fn subscriber(port: u16) -> (Client, Receiver<serde_json::Value>) {
    let mut o = MqttOptions::new("event-consumer", "127.0.0.1", port);
    o.set_keep_alive(Duration::from_secs(5));
    o.set_clean_session(false);
    let (client, mut conn) = Client::new(o, 100);
    let (tx, rx) = std::sync::mpsc::channel();
    let resubscribe = client.clone();
    std::thread::spawn(move || {
        for ev in conn.iter() {
            match ev {
                Ok(Event::Incoming(Packet::Publish(p))) if p.topic == EVENTS => {
                    let v = serde_json::from_slice(&p.payload).unwrap_or_default();
                    if tx.send(v).is_err() {
                        break;
                    }
                }
                // A broker that forgot the session (mosquitto here cannot
                // write its persistence file): subscribe again.
                Ok(Event::Incoming(Packet::ConnAck(c))) if !c.session_present => {
                    let _ = resubscribe.try_subscribe(EVENTS, QoS::AtLeastOnce);
                }
                Ok(Event::Incoming(Packet::SubAck(_))) => {
                    if tx.send(serde_json::json!({"suback": true})).is_err() {
                        break;
                    }
                }
                Ok(_) => {}
                // The broker is down for part of the test: try again.
                Err(_) => std::thread::sleep(Duration::from_millis(100)),
            }
        }
    });
    (client, rx)
}

/// The sequence numbers of the events received so far.
fn drain(rx: &Receiver<serde_json::Value>, seqs: &mut Vec<u64>) {
    while let Ok(v) = rx.try_recv() {
        if let Some(s) = v["seq"].as_u64() {
            seqs.push(s);
        }
    }
}

fn command(svc: &Service, body: &str) {
    let r = http::request(
        svc.http_port,
        "POST",
        "/api/alarms/command",
        &[("Authorization", &format!("Bearer {TOKEN}"))],
        body.as_bytes(),
    )
    .unwrap();
    assert_eq!(r.status, 200, "the command is carried out and committed: {}", r.text());
}

#[test]
fn events_committed_while_the_broker_is_down_survive_a_kill_9() {
    let mut broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let (sub, rx) = subscriber(broker.port);
    poll_until("the event subscriber's subscription", || rx.try_recv().ok().filter(|v| v["suback"] == true));

    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    let s = samples(400);
    publish_all(broker.port, &s, "publisher-events");
    svc.wait_until_integrated(s.last().unwrap().1);
    let mut seqs = vec![];
    // The advisory's activation reaches the subscriber while all is well.
    poll_until("the creep advisory's event on the event topic", || {
        drain(&rx, &mut seqs);
        (!seqs.is_empty()).then_some(())
    });

    // The broker goes away; operators act meanwhile; their events are
    // committed (the HTTP answer comes after the commit) but cannot be
    // published. Then the service dies without a chance to send them.
    broker.stop();
    poll_until("the service to notice the broker is gone", || svc.snapshot().filter(|v| v["mqtt_connected"] == false));
    command(&svc, r#"{"action":"acknowledge","component":"SH-TUBE","by":"shift engineer"}"#);
    command(
        &svc,
        r#"{"action":"shelve","component":"SH-TUBE","index":"creep_life_fraction","duration_h":8,"by":"I&C","reason":"test"}"#,
    );
    let snap = svc.snapshot().unwrap();
    let committed: BTreeSet<u64> =
        snap["recent_events"].as_array().unwrap().iter().filter_map(|e| e["seq"].as_u64()).collect();
    let newest = *committed.iter().max().unwrap();
    assert!(committed.len() >= 3, "activation, acknowledge and shelve are committed: {committed:?}");
    svc.kill9();

    // Broker back, the subscriber subscribed again, then the service.
    broker.restart();
    poll_until("the subscriber's subscription to the restarted broker", || {
        rx.try_recv().ok().filter(|v| v["suback"] == true)
    });
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    let got: BTreeSet<u64> = poll_until("every committed event on the event topic after the restart", || {
        drain(&rx, &mut seqs);
        let got: BTreeSet<u64> = seqs.iter().copied().collect();
        committed.is_subset(&got).then_some(got)
    });
    assert!(got.contains(&newest), "the newest committed event arrived: {got:?}");
    // Every event a consumer needs, each with its number; duplicates only
    // of numbers already seen, so a consumer can drop them.
    let _ = sub.disconnect();
    assert!(svc.sigterm().success());
}
