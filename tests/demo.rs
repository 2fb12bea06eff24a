//! `lifeledger demo` as a new user meets it: one command, no external
//! servers; within a simulated month the ledgers move, a warning fires and a
//! stale-tag alarm fires, all visible through the status API.

mod common;

use common::{free_port, http, poll_until};
use std::process::{Command, Stdio};

#[test]
fn demo_moves_ledgers_and_raises_a_warning_and_a_stale_tag_alarm() {
    let port = free_port();
    let dir = tempfile::tempdir().unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["demo", "--duration", "120", "--http", &format!("127.0.0.1:{port}")])
        .arg("--state-dir")
        .arg(dir.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let snapshot =
        || -> Option<serde_json::Value> { serde_json::from_str(&http::get(port, "/api/components").ok()?.text()).ok() };
    let first = poll_until("the demo's status API", || {
        snapshot().filter(|s| s["engine"]["accepted"].as_u64().unwrap_or(0) > 0)
    });
    let lf0: Vec<f64> =
        first["components"].as_array().unwrap().iter().map(|c| c["creep_life_fraction"].as_f64().unwrap()).collect();
    let active = |s: &serde_json::Value, index: &str, severity: Option<&str>| {
        s["recent_events"].as_array().is_some_and(|ev| {
            ev.iter().any(|e| {
                e["index"] == index && e["transition"] == "activated" && severity.is_none_or(|sev| e["severity"] == sev)
            })
        })
    };
    // Bounded by count (the harness's poll); the scenario reaches both
    // alarms by simulated day 6, about six seconds at the default speed.
    let s = poll_until("a warning and a stale-tag alarm", || {
        snapshot().filter(|s| {
            s["recent_events"]
                .as_array()
                .is_some_and(|ev| ev.iter().any(|e| e["severity"] == "warning" && e["index"] != "sensor_stale"))
                && active(s, "sensor_stale", None)
        })
    });
    let moved = s["components"]
        .as_array()
        .unwrap()
        .iter()
        .zip(&lf0)
        .any(|(c, a)| c["creep_life_fraction"].as_f64().unwrap() > *a);
    assert!(moved, "life fractions moved");
    assert!(s["caution"].as_str().unwrap().contains("governing code"));
    let page = http::get(port, "/").unwrap();
    assert_eq!(page.status, 200);
    let _ = child.kill();
    let out = child.wait_with_output().unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("status page"), "{text}");
    assert!(text.contains("what to watch"), "{text}");
}
