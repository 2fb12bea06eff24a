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
    // By name: the API lists the components in its attention ranking,
    // which may change as the demo runs.
    let lf0: Vec<(String, f64)> = first["components"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| (c["component"].as_str().unwrap().to_string(), c["creep_life_fraction"].as_f64().unwrap()))
        .collect();
    let active = |s: &serde_json::Value, index: &str, severity: Option<&str>| {
        s["recent_events"].as_array().is_some_and(|ev| {
            ev.iter().any(|e| {
                e["index"] == index && e["transition"] == "activated" && severity.is_none_or(|sev| e["severity"] == sev)
            })
        })
    };
    // Bounded by count (the harness's poll); the scenario reaches both
    // alarms by simulated day 6, about six seconds at the default speed.
    // Exactly what the banner promises: day 3, over-temperature on outlet
    // leg A at warning; day 4 to 6, leg B's thermocouple out of range,
    // then stale.
    let names_leg_b = |e: &serde_json::Value| {
        let text = format!("{} {} {}", e["component"], e["message"], e["detail"]);
        text.contains("TE-311B") || text.contains("OUTLET-LEG-B")
    };
    let s = poll_until("the promised warning, out-of-range and stale-tag alarms", || {
        snapshot().filter(|s| {
            let ev = s["recent_events"].as_array().cloned().unwrap_or_default();
            ev.iter().any(|e| {
                e["index"] == "metal_temperature_over_design"
                    && e["severity"] == "warning"
                    && e["transition"] == "activated"
                    && e["component"] == "U2-SH3-OUTLET-LEG-A"
            }) && ev
                .iter()
                .any(|e| e["index"] == "sensor_out_of_range" && e["transition"] == "activated" && names_leg_b(e))
                && ev.iter().any(|e| e["index"] == "sensor_stale" && e["transition"] == "activated" && names_leg_b(e))
        })
    });
    assert!(active(&s, "sensor_stale", None));
    let moved = s["components"].as_array().unwrap().iter().any(|c| {
        lf0.iter().any(|(n, a)| c["component"] == n.as_str() && c["creep_life_fraction"].as_f64().unwrap() > *a)
    });
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

/// Ctrl-C (SIGINT) stops the demo cleanly; alarm events are printed on the
/// terminal as they happen; without `--state-dir` the temporary state
/// directory is removed on the way out.
#[test]
fn demo_prints_alarms_stops_on_ctrl_c_and_cleans_up() {
    let port = free_port();
    let dir = tempfile::tempdir().unwrap();
    let out_path = dir.path().join("stdout");
    let mut child = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["demo", "--http", &format!("127.0.0.1:{port}")])
        .stdout(std::fs::File::create(&out_path).unwrap())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let stdout = || std::fs::read_to_string(&out_path).unwrap_or_default();
    // The scenario's thermocouple failure (day 4 to 6 at a day a second).
    let text = poll_until("an alarm line on the terminal", || {
        let t = stdout();
        t.lines().any(|l| l.trim_start().starts_with("alarm ")).then_some(t)
    });
    let state = text
        .lines()
        .find_map(|l| l.trim_start().strip_prefix("ledger").map(|p| std::path::PathBuf::from(p.trim())))
        .and_then(|p| p.parent().map(|d| d.to_path_buf()))
        .unwrap_or_else(|| panic!("the banner names the ledger:\n{text}"));
    assert!(state.exists(), "the temporary state directory exists while the demo runs");
    Command::new("kill").args(["-INT", &child.id().to_string()]).status().unwrap();
    let status = poll_until("the demo to stop after SIGINT", || child.try_wait().unwrap());
    assert!(status.success(), "Ctrl-C is a clean stop: {status}\n{}", stdout());
    assert!(!state.exists(), "the temporary state directory {} is removed on exit", state.display());
    assert!(stdout().contains("removed"), "{}", stdout());
}

/// An HTTP port that is taken is reported before the banner promises a
/// status page there.
#[test]
fn demo_refuses_a_taken_http_port_before_its_banner() {
    let taken = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = taken.local_addr().unwrap().to_string();
    let o = common::output_within_budget(
        {
            let mut c = Command::new(env!("CARGO_BIN_EXE_lifeledger"));
            c.args(["demo", "--duration", "30", "--http", &addr]);
            c
        },
        "lifeledger demo on a taken port",
    );
    let out = String::from_utf8_lossy(&o.stdout);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success(), "{out}{err}");
    assert!(err.contains(&addr), "the error names the address: {err}");
    assert!(!out.contains("status page"), "no banner for a page that cannot be served:\n{out}");
}

/// A terminal that goes away (the reader of the demo's output closes its
/// end, as `lifeledger demo | head` does) must not stop the demo: alarm
/// lines are then dropped quietly, no task panics, and the simulated plant
/// keeps feeding the service.
#[test]
fn demo_keeps_running_when_its_output_is_closed() {
    use std::io::{BufRead, BufReader};
    let port = free_port();
    let dir = tempfile::tempdir().unwrap();
    let err_path = dir.path().join("stderr");
    let mut child = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["demo", "--duration", "120", "--http", &format!("127.0.0.1:{port}")])
        .arg("--state-dir")
        .arg(dir.path().join("state"))
        .stdout(Stdio::piped())
        .stderr(std::fs::File::create(&err_path).unwrap())
        .spawn()
        .unwrap();
    // Read the banner up to its last line, then close our end of the pipe
    // (the reader thread drops it). Bounded: a demo that prints nothing
    // fails the test instead of blocking the read for ever.
    let stdout = child.stdout.take().unwrap();
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let mut out = BufReader::new(stdout);
        let mut line = String::new();
        for _ in 0..40 {
            line.clear();
            if out.read_line(&mut line).unwrap_or(0) == 0 || line.contains("Ctrl-C stops") {
                break;
            }
        }
        let _ = tx.send(line);
    });
    let Ok(line) = rx.recv_timeout(common::POLL_PAUSE * common::POLL_TRIES) else {
        let _ = child.kill();
        panic!("the demo printed no banner within {:?}", common::POLL_PAUSE * common::POLL_TRIES);
    };
    assert!(line.contains("Ctrl-C stops"), "the banner did not end as expected: {line:?}");
    let snapshot =
        || -> Option<serde_json::Value> { serde_json::from_str(&http::get(port, "/api/components").ok()?.text()).ok() };
    // An alarm event, which the demo prints as it happens: into the closed pipe.
    let s = poll_until("an alarm event in the demo's status API", || {
        snapshot().filter(|s| s["recent_events"].as_array().is_some_and(|e| !e.is_empty()))
    });
    let accepted = s["engine"]["accepted"].as_u64().unwrap_or(0);
    // The simulator must go on publishing after that print (a dead printer
    // task used to stop the simulator's MQTT loop, so intake stalled).
    poll_until("the demo to keep accepting samples after printing into a closed pipe", || {
        snapshot().filter(|s| s["engine"]["accepted"].as_u64().unwrap_or(0) > accepted + 20_000)
    });
    let _ = child.kill();
    let _ = child.wait();
    let stderr = std::fs::read_to_string(&err_path).unwrap_or_default();
    assert!(!stderr.contains("panicked"), "a demo task panicked:\n{stderr}");
}
