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

/// The demo runs on its own settings only: the production environment
/// (`LIFELEDGER__STORE__PATH`, `LIFELEDGER__DATABASE__URL`, as the shipped
/// container and compose files set them) must not send invented plant data
/// into the production ledger or queue it for the production database.
#[test]
fn demo_ignores_the_production_environment() {
    let dir = tempfile::tempdir().unwrap();
    let production_ledger = dir.path().join("production.ledger");
    // A "production database": a listener that records whether anyone
    // connected while the demo ran.
    let db = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    db.set_nonblocking(true).unwrap();
    let db_url = format!("http://{}", db.local_addr().unwrap());
    let state = dir.path().join("demo-state");
    let port = free_port();
    let mut child = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["demo", "--duration", "3", "--http", &format!("127.0.0.1:{port}")])
        .arg("--state-dir")
        .arg(&state)
        .env("LIFELEDGER__STORE__PATH", &production_ledger)
        .env("LIFELEDGER__DATABASE__URL", &db_url)
        .env("LIFELEDGER__DATABASE__ORG", "plant")
        .env("LIFELEDGER__DATABASE__BUCKET", "production")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // A three-second demo stops by itself; the wait is bounded by count.
    let mut exited = false;
    for _ in 0..common::POLL_TRIES {
        if child.try_wait().unwrap().is_some() {
            exited = true;
            break;
        }
        std::thread::sleep(common::POLL_PAUSE);
    }
    if !exited {
        let _ = child.kill();
    }
    let out = child.wait_with_output().unwrap();
    assert!(exited, "the demo with --duration 3 did not stop by itself");
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "demo failed:\n{stdout}\n{stderr}");
    assert!(!production_ledger.exists(), "the demo wrote into the production ledger:\n{stdout}");
    assert!(db.accept().is_err(), "the demo connected to the production database");
    // Its own ledger is where it says, with nothing queued for a database.
    let ledger = state.join("ledger.sqlite");
    assert!(ledger.exists(), "no demo ledger in {}:\n{stdout}", state.display());
    let conn = rusqlite::Connection::open_with_flags(&ledger, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY).unwrap();
    let queued: i64 = conn.query_row("SELECT COUNT(*) FROM outbox", [], |r| r.get(0)).unwrap();
    assert_eq!(queued, 0, "points queued for a database the demo was not given");
    // And it says so.
    assert!(stdout.contains("LIFELEDGER__") && stdout.contains("ignored"), "{stdout}");
}
