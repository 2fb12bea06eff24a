//! Operator commands against the live service, a real mosquitto broker and
//! a real VictoriaMetrics:
//! * an MQTT command without the operator token changes nothing and is
//!   counted as `unauthorised` (and the token is never echoed in the log);
//! * HTTP commands are answered with their real outcome (200 with the
//!   resulting state, 404 for an unknown component, 400 for an invalid
//!   command, 401 for a wrong token);
//! * the database's reachability reaches the snapshot and `/metrics`;
//! * the retained alarm state of every component is published again at
//!   each connection, so a state message lost in a crash after the commit
//!   comes back with the next start;
//! * MQTT commands are answered on the reply topic with their outcome, and
//!   alarm events carry gapless sequence numbers.

mod common;

use common::service::{publish_all, publish_messages, samples, Service, ServiceConfig};
use common::{free_port, http, poll_until, Mosquitto, VictoriaMetrics};
use rumqttc::{Client, Event, MqttOptions, Packet, QoS};
use std::path::{Path, PathBuf};
use std::time::Duration;

/// The environment variable the tests' `[http] token_env` names.
const TOKEN_VAR: &str = "LIFELEDGER_TEST_OPERATOR_TOKEN";
/// The operator token the service is started with.
const TOKEN: &str = "op-token-4f1d9c7e2b";

/// The shared test plant with the tube's advisory creep level low enough
/// for 400 minutes of samples to raise it, the operator token from
/// [`TOKEN_VAR`], and `tail` after the `[http]` section.
fn config(dir: &Path, mqtt_port: u16, http_port: u16, tail: &str) -> PathBuf {
    let tail = format!("token_env = \"{TOKEN_VAR}\"\n{tail}");
    ServiceConfig {
        plant: "Command Station",
        client_id: "lifeledger-commands",
        tube: "[component.thresholds]\nlife_fraction = { advisory = 0.00002, warning = 0.5, critical = 0.7 }",
        tail: &tail,
        ..ServiceConfig::default()
    }
    .write(dir, mqtt_port, http_port)
}

/// The state of alarm `index` of `component` in a snapshot.
fn alarm_state(snap: &serde_json::Value, component: &str, index: &str) -> Option<String> {
    let c = snap["alarms"].as_array()?.iter().find(|a| a["component"] == component)?;
    let r = c["alarms"].as_array()?.iter().find(|r| r["index"] == index)?;
    r["state"].as_str().map(String::from)
}

/// Starts the service with the operator token, feeds it 400 minutes and
/// waits for the tube's creep advisory to be unacknowledged.
fn plant_with_an_alarm(dir: &Path, broker: &Mosquitto, tail: &str) -> Service {
    let http_port = free_port();
    let cfg = config(dir, broker.port, http_port, tail);
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    let s = samples(400);
    publish_all(broker.port, &s, "publisher-commands");
    svc.wait_until_integrated(s.last().unwrap().1);
    poll_until("the tube's creep advisory", || {
        svc.snapshot().filter(|v| alarm_state(v, "SH-TUBE", "creep_life_fraction").as_deref() == Some("unacknowledged"))
    });
    svc
}

/// The value of the Prometheus series `name` (with its labels) in `m`.
fn metric(m: &str, series: &str) -> Option<f64> {
    m.lines().find_map(|l| l.strip_prefix(series).and_then(|v| v.strip_prefix(' ')).and_then(|v| v.parse().ok()))
}

#[test]
fn mqtt_commands_without_the_operator_token_change_nothing_and_are_counted() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let svc = plant_with_an_alarm(dir.path(), &broker, "");
    let wrong = "guessed-token-0000";
    let shelve = |token: Option<&str>, by: &str, hours: f64| {
        let mut c = serde_json::json!({"action": "shelve", "component": "SH-TUBE", "duration_h": hours,
                                       "by": by, "reason": "hostile"});
        if let Some(t) = token {
            c["token"] = t.into();
        }
        ("lifeledger/commands", c.to_string().into_bytes())
    };
    let ack = serde_json::json!({"action": "acknowledge", "component": "SH-TUBE", "index": "creep_life_fraction",
                                 "by": "shift engineer", "token": TOKEN});
    publish_messages(
        broker.port,
        vec![
            // The reproduction: an anonymous shelve of every alarm of the part.
            shelve(None, "anyone", 720.0),
            shelve(Some(wrong), "anyone", 720.0),
            // With the token, but without a name or beyond the bound.
            shelve(Some(TOKEN), " ", 8.0),
            shelve(Some(TOKEN), "shift engineer", 721.0),
            // The one command that may act; sent last, so once it shows,
            // every command before it has been judged.
            ("lifeledger/commands", ack.to_string().into_bytes()),
        ],
        "hostile-neighbour",
    );
    let snap = poll_until("the authorised acknowledge", || {
        svc.snapshot().filter(|v| alarm_state(v, "SH-TUBE", "creep_life_fraction").as_deref() == Some("acknowledged"))
    });
    let tube = snap["alarms"].as_array().unwrap().iter().find(|a| a["component"] == "SH-TUBE").unwrap();
    assert_eq!(tube["shelved"], 0, "nothing shelved: {tube}");
    let m = http::get(svc.http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&m, "lifeledger_commands_rejected_total{reason=\"unauthorised\"}"), Some(2.0), "{m}");
    assert_eq!(metric(&m, "lifeledger_commands_rejected_total{reason=\"invalid\"}"), Some(2.0), "{m}");
    assert_eq!(metric(&m, "lifeledger_commands_applied_total"), Some(1.0), "{m}");
    let (status, log) = svc.sigterm_with_log();
    assert!(status.success());
    assert!(log.contains("unauthorised"), "the refusal is logged:\n{log}");
    assert!(!log.contains(wrong) && !log.contains(TOKEN), "no token is echoed in the log:\n{log}");
}

#[test]
fn http_commands_answer_with_their_real_outcome() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let svc = plant_with_an_alarm(dir.path(), &broker, "");
    let bearer = format!("Bearer {TOKEN}");
    let post = |auth: &str, body: &str| {
        http::request(svc.http_port, "POST", "/api/alarms/command", &[("Authorization", auth)], body.as_bytes())
            .unwrap()
    };
    // Unknown component: the alarm book refuses it, and the answer says so.
    let r = post(&bearer, r#"{"action":"acknowledge","component":"NO-SUCH-PART","by":"shift engineer"}"#);
    assert_eq!(r.status, 404, "{}", r.text());
    assert!(r.text().contains("NO-SUCH-PART"), "{}", r.text());
    // Invalid: no `by`.
    let r = post(&bearer, r#"{"action":"acknowledge","component":"SH-TUBE"}"#);
    assert_eq!(r.status, 400, "{}", r.text());
    assert!(r.text().contains("\"by\""), "{}", r.text());
    // Wrong token.
    let r = post("Bearer not-the-token", r#"{"action":"acknowledge","component":"SH-TUBE","by":"x"}"#);
    assert_eq!(r.status, 401, "{}", r.text());
    // Applied: 200 with the component's alarms as they now are.
    let r = post(
        &bearer,
        r#"{"action":"shelve","component":"SH-TUBE","index":"creep_life_fraction","duration_h":8,"by":"I&C","reason":"thermocouple replacement"}"#,
    );
    assert_eq!(r.status, 200, "{}", r.text());
    let v: serde_json::Value = serde_json::from_str(&r.text()).unwrap();
    assert_eq!(v["component"], "SH-TUBE", "{v}");
    assert_eq!(
        alarm_state(&serde_json::json!({"alarms": [v.clone()]}), "SH-TUBE", "creep_life_fraction").as_deref(),
        Some("shelved"),
        "{v}"
    );
    // Durable before the answer: the snapshot agrees at once.
    let snap = svc.snapshot().unwrap();
    assert_eq!(alarm_state(&snap, "SH-TUBE", "creep_life_fraction").as_deref(), Some("shelved"));
    assert!(svc.sigterm().success());
}

#[test]
fn database_reachability_reaches_the_snapshot_and_metrics() {
    let broker = Mosquitto::start();
    let mut vm = VictoriaMetrics::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let db = format!(
        "[database]\nurl = \"{}\"\norg = \"test\"\nbucket = \"test\"\nbackoff_initial_s = 0.1\nbackoff_max_s = 0.5\n",
        vm.url()
    );
    let cfg = config(dir.path(), broker.port, http_port, &db);
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    // Health points go out every second, so the sender talks to the
    // database without any plant data.
    poll_until("database_reachable true in the snapshot", || {
        svc.snapshot().filter(|v| v["database_reachable"] == true)
    });
    let m = http::get(http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&m, "lifeledger_database_reachable"), Some(1.0), "{m}");
    vm.stop();
    poll_until("database_reachable false once the database is gone", || {
        svc.snapshot().filter(|v| v["database_reachable"] == false)
    });
    let m = http::get(http_port, "/metrics").unwrap().text();
    assert_eq!(metric(&m, "lifeledger_database_reachable"), Some(0.0), "{m}");
    assert!(svc.sigterm().success());
}

/// Subscribes to `filter` on 127.0.0.1:`port` as client `id`; every
/// message received (topic, payload) goes to the returned channel.
fn listen(port: u16, filter: &str, id: &str) -> (Client, std::sync::mpsc::Receiver<(String, Vec<u8>)>) {
    let mut o = MqttOptions::new(id, "127.0.0.1", port);
    o.set_keep_alive(Duration::from_secs(30));
    let (client, mut conn) = Client::new(o, 100);
    client.subscribe(filter, QoS::AtLeastOnce).unwrap();
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        for ev in conn.iter() {
            match ev {
                Ok(Event::Incoming(Packet::Publish(p))) => {
                    if tx.send((p.topic.clone(), p.payload.to_vec())).is_err() {
                        break;
                    }
                }
                Ok(_) => {}
                Err(_) => break,
            }
        }
    });
    (client, rx)
}

/// Clears the retained message of `topic` (an empty retained publish,
/// MQTT 3.1.1 section 3.3.1.3) and waits for the broker's acknowledgement.
fn clear_retained(port: u16, topic: &str) {
    let mut o = MqttOptions::new("retained-clearer", "127.0.0.1", port);
    o.set_keep_alive(Duration::from_secs(30));
    let (client, mut conn) = Client::new(o, 10);
    client.publish(topic, QoS::AtLeastOnce, true, Vec::new()).unwrap();
    for ev in conn.iter() {
        match ev {
            Ok(Event::Incoming(Packet::PubAck(_))) => break,
            Ok(_) => {}
            Err(e) => panic!("clearing the retained {topic} failed: {e}"),
        }
    }
    let _ = client.disconnect();
}

#[test]
fn the_retained_alarm_state_is_published_again_at_each_connection() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let svc = plant_with_an_alarm(dir.path(), &broker, "");
    let http_port = svc.http_port;
    let topic = "lifeledger/alarms/state/SH-TUBE";
    let (first, rx) = listen(broker.port, topic, "state-listener-1");
    poll_until("the retained SH-TUBE state", || rx.try_recv().ok().filter(|(_, p)| !p.is_empty()));
    let _ = first.disconnect();
    assert!(svc.sigterm().success());
    // The state message lost, as when the process dies between the commit
    // and the publish: the broker no longer holds it.
    clear_retained(broker.port, topic);

    let svc = Service::start_with_env(&dir.path().join("service.toml"), http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    let (second, rx) = listen(broker.port, topic, "state-listener-2");
    let state: serde_json::Value = poll_until("the SH-TUBE state published again after the restart", || {
        rx.try_recv().ok().and_then(|(_, p)| serde_json::from_slice(&p).ok())
    });
    assert_eq!(state["component"], "SH-TUBE", "{state}");
    let creep = state["alarms"].as_array().unwrap().iter().find(|r| r["index"] == "creep_life_fraction");
    assert_eq!(creep.map(|r| r["state"].clone()), Some("unacknowledged".into()), "{state}");
    let _ = second.disconnect();
    assert!(svc.sigterm().success());
}

#[test]
fn mqtt_commands_are_answered_on_the_reply_topic_and_events_are_numbered() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let svc = plant_with_an_alarm(dir.path(), &broker, "");
    let (listener, rx) = listen(broker.port, "lifeledger/#", "reply-listener");
    // Subscribed once the broker hands over a retained state.
    poll_until("the listener's subscription", || rx.try_recv().ok().filter(|(t, _)| t.contains("/alarms/state/")));
    let ack = serde_json::json!({"action": "acknowledge", "component": "SH-TUBE", "index": "creep_life_fraction",
                                 "by": "shift engineer", "token": TOKEN, "id": "c-1"});
    let unknown = serde_json::json!({"action": "acknowledge", "tag": "NO-SUCH-TAG", "by": "shift engineer",
                                     "token": TOKEN, "id": "c-2"});
    let anonymous = serde_json::json!({"action": "acknowledge", "all": true, "by": "anyone", "id": "c-3"});
    publish_messages(
        broker.port,
        vec![
            ("lifeledger/commands", ack.to_string().into_bytes()),
            ("lifeledger/commands", unknown.to_string().into_bytes()),
            ("lifeledger/commands", anonymous.to_string().into_bytes()),
        ],
        "console",
    );
    let mut replies: Vec<serde_json::Value> = vec![];
    let mut events: Vec<serde_json::Value> = vec![];
    poll_until("three replies on lifeledger/commands/replies", || {
        while let Ok((t, p)) = rx.try_recv() {
            let v: serde_json::Value = serde_json::from_slice(&p).unwrap_or_default();
            match t.as_str() {
                "lifeledger/commands/replies" => replies.push(v),
                "lifeledger/alarms/events" => events.push(v),
                _ => {}
            }
        }
        (replies.len() >= 3).then_some(())
    });
    let by_id = |id: &str| replies.iter().find(|r| r["id"] == id).cloned();
    let applied = by_id("c-1").expect("the acknowledge is answered");
    assert_eq!(applied["outcome"], "applied", "{applied}");
    let creep = applied["summary"]["alarms"].as_array().unwrap().iter().find(|r| r["index"] == "creep_life_fraction");
    assert_eq!(creep.map(|r| r["state"].clone()), Some("acknowledged".into()), "{applied}");
    let refused = by_id("c-2").expect("the unknown tag is answered");
    assert_eq!(refused["outcome"], "unknown", "{refused}");
    assert!(refused["error"].as_str().unwrap().contains("NO-SUCH-TAG"), "{refused}");
    let unauthorised = replies.iter().find(|r| r["outcome"] == "unauthorised").expect("the anonymous command");
    assert!(unauthorised.get("id").is_none(), "nothing of an unauthorised command is echoed: {unauthorised}");
    assert!(replies.iter().all(|r| !r.to_string().contains(TOKEN)), "no reply carries the token");
    // The acknowledge's event carries the sequence number after the last
    // one the service had recorded: no gap.
    let snap = svc.snapshot().unwrap();
    let seqs: Vec<u64> = snap["recent_events"].as_array().unwrap().iter().filter_map(|e| e["seq"].as_u64()).collect();
    assert!(!seqs.is_empty() && seqs.windows(2).all(|w| w[1] == w[0] + 1), "gapless: {seqs:?}");
    let _ = listener.disconnect();
    assert!(svc.sigterm().success());
}

/// The retained state of `topic` as a fresh subscriber receives it (the
/// broker hands the retained message over at subscription), if any.
fn retained_now(port: u16, topic: &str, id: &str) -> Option<serde_json::Value> {
    let (client, rx) = listen(port, topic, id);
    let got = rx.recv_timeout(Duration::from_secs(2)).ok().and_then(|(_, p)| serde_json::from_slice(&p).ok());
    let _ = client.disconnect();
    got
}

#[test]
fn an_acknowledge_made_while_the_broker_was_down_reaches_the_retained_state() {
    // Issue 11: an acknowledge made while the broker was down left the
    // retained topic at "unacknowledged" for good.
    let mut broker = Mosquitto::start_persistent();
    let dir = tempfile::tempdir().unwrap();
    let svc = plant_with_an_alarm(dir.path(), &broker, "");
    let topic = "lifeledger/alarms/state/SH-TUBE";
    let creep_state = |v: &serde_json::Value| {
        v["alarms"].as_array()?.iter().find(|r| r["index"] == "creep_life_fraction")?["state"]
            .as_str()
            .map(String::from)
    };
    poll_until("the retained unacknowledged state", || {
        retained_now(broker.port, topic, "retained-before")
            .filter(|v| creep_state(v).as_deref() == Some("unacknowledged"))
    });
    broker.stop();
    poll_until("the service to notice the broker is gone", || svc.snapshot().filter(|v| v["mqtt_connected"] == false));
    let r = http::request(
        svc.http_port,
        "POST",
        "/api/alarms/command",
        &[("Authorization", &format!("Bearer {TOKEN}"))],
        br#"{"action":"acknowledge","component":"SH-TUBE","by":"shift engineer"}"#,
    )
    .unwrap();
    assert_eq!(r.status, 200, "{}", r.text());
    // The broker comes back with its old retained message.
    broker.restart();
    svc.wait_connected();
    let state = poll_until("the retained state to show the acknowledge", || {
        retained_now(broker.port, topic, "retained-after").filter(|v| creep_state(v).as_deref() == Some("acknowledged"))
    });
    // Equal to the ledger's: the snapshot's record of the same alarm.
    let snap = svc.snapshot().unwrap();
    let tube = snap["alarms"].as_array().unwrap().iter().find(|a| a["component"] == "SH-TUBE").unwrap().clone();
    assert_eq!(creep_state(&tube), creep_state(&state));
    assert!(svc.sigterm().success());
}
