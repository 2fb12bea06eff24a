//! Fatigue in the live service against a real mosquitto broker: the
//! service killed with `kill -9` again and again while a stream runs ends
//! with the same fatigue ledger as a replay of the same samples (no
//! reversal lost, none counted twice: the rainflow residue is in the
//! committed component state), and the figures reach `/api/components`.

mod common;

use common::service::{publish_all, samples_with_header, Sample, Service, ServiceConfig};
use common::{free_port, poll_until, Mosquitto};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

const TE2: &str = r#"[[tag]]
name = "TE-2"
unit = "degC"
valid_range = [0, 800]"#;

/// A thick header whose nozzle bore sees the pressure of PT-1 and the
/// thermal stress of the measured difference between TE-1 (the steam) and
/// TE-2 (mid-wall); a small gate so the test stream makes many cycles.
const HEADER: &str = r#"[[component]]
name = "FATIGUE-HEADER"
unit = "U1"
kind = "header"
material = "2.25Cr-1Mo"
design_temperature = { value = 570, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TE-2"
pressure = "PT-1"
[component.geometry]
outside_diameter = { value = 400, unit = "mm" }
wall = { value = 60, unit = "mm" }
[component.fatigue]
location = "nozzle bore"
pressure_stress_factor = 2.5
thermal_stress_factor = 1.2
fluid_temperature = "TE-1"
wall_temperature = "TE-2"
hysteresis_gate_mpa = 2"#;

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
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

fn fatigue_of(v: &serde_json::Value) -> serde_json::Value {
    v["components"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["component"] == "FATIGUE-HEADER")
        .unwrap_or_else(|| panic!("no FATIGUE-HEADER in {v}"))["fatigue"]
        .clone()
}

#[test]
fn kill_9_neither_loses_nor_double_counts_a_reversal() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = ServiceConfig {
        plant: "Fatigue Station",
        client_id: "lifeledger-fatigue-test",
        tags: TE2,
        components: HEADER,
        ..ServiceConfig::default()
    }
    .write(dir.path(), broker.port, http_port);
    let s = samples_with_header(2400);
    let mut svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let publisher = {
        let s = s.clone();
        let port = broker.port;
        std::thread::spawn(move || {
            for (i, chunk) in s.chunks(500).enumerate() {
                publish_all(port, chunk, &format!("publisher-fatigue-{i}"));
                std::thread::sleep(Duration::from_millis(100));
            }
        })
    };
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
    assert!(kills >= 1, "the stream ended before a kill");
    publisher.join().unwrap();
    let live = svc.wait_until_integrated(s.last().unwrap().1);
    let replay = replay_json(&cfg, &csv(dir.path(), &s));
    let (lf, rf) = (fatigue_of(&live), fatigue_of(&replay));
    assert!(rf["cycles"].as_f64().unwrap() >= 5.0, "the stream makes cycles: {rf}");
    assert!(rf["fatigue_usage"].as_f64().unwrap() > 0.0);
    assert_eq!(lf, rf, "live fatigue ledger after {kills} kills differs from the replay");
    // The component's trend carries the stress at the location and the
    // usage for the status page; the other parts carry null.
    let trend = svc.get_json("/api/components/FATIGUE-HEADER/trend").expect("trend of the fatigue header");
    let points = trend["points"].as_array().unwrap();
    assert!(points.iter().any(|p| p["fatigue_stress_mpa"].is_number() && p["fatigue_usage"].is_number()), "{trend}");
    let tube = svc.get_json("/api/components/SH-TUBE/trend").unwrap();
    assert!(tube["points"].as_array().unwrap().iter().all(|p| p["fatigue_usage"].is_null()));
    drop(svc);
}
