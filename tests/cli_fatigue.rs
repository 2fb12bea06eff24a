//! Fatigue through the command line: `check-config` shows the allowable
//! cycles of a design start-stop, `replay --format json` carries the
//! fatigue figures, a replay cut in two with the ledger carried over (the
//! second run starting from the first's `--state`) is not supported here,
//! so the check is that two identical replays agree and that every start-stop
//! of the history is counted.

use std::path::Path;
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_lifeledger"))
}

const PLANT: &str = r#"
[plant]
name = "Fatigue Test Plant"

[[tag]]
name = "TE"
unit = "degC"
valid_range = [0.0, 700.0]
[[tag]]
name = "PT"
unit = "MPa"
valid_range = [-0.1, 30.0]
[[tag]]
name = "TF"
unit = "degC"
valid_range = [0.0, 700.0]

[[component]]
name = "OUTLET-HEADER"
unit = "U1"
kind = "header"
material = "2.25Cr-1Mo"
design_temperature = { value = 545.0, unit = "degC" }
design_pressure = { value = 18.0, unit = "MPa" }
metal_temperature = "TE"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 457.0, unit = "mm" }
wall = { value = 70.0, unit = "mm" }
[component.fatigue]
location = "bore of nozzle N1"
pressure_stress_factor = 2.5
thermal_stress_factor = 1.3
fluid_temperature = "TF"
design_ramp_k_per_min = 5
"#;

/// Daily start-stops: 8 h at 540 °C / 17 MPa, ramps at 5 K/min, one
/// sample a minute.
fn history(days: usize) -> String {
    let mut s = String::from("timestamp,tag,value,quality\n");
    let t0 = 1_790_000_000i64; // 2026-09-21
    for minute in 0..(days * 24 * 60) {
        let m = minute % (24 * 60);
        // 06:00 start: 250 → 540 °C in 58 min; 15:00 stop: 540 → 250 °C.
        let tf = if m < 360 {
            250.0
        } else if m < 418 {
            250.0 + 5.0 * (m - 360) as f64
        } else if m < 900 {
            540.0
        } else if m < 958 {
            540.0 - 5.0 * (m - 900) as f64
        } else {
            250.0
        };
        let p = 17.0 * ((tf - 250.0) / 290.0).clamp(0.0, 1.0);
        let ts = chrono::DateTime::from_timestamp(t0 + minute as i64 * 60, 0).unwrap().to_rfc3339();
        for (tag, v) in [("TE", tf), ("TF", tf), ("PT", p)] {
            s.push_str(&format!("{ts},{tag},{v:.3},good\n"));
        }
    }
    s
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p.display().to_string()
}

#[test]
fn check_config_shows_allowable_cycles_of_a_design_start_stop() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "plant.toml", PLANT);
    let o = bin().args(["check-config", &cfg, "--format", "json"]).output().unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let f = &v["components"][0]["fatigue"];
    let n = f["allowable_cycles"].as_f64().expect("allowable cycles in check-config");
    assert!(n > 100.0 && n.is_finite(), "{f}");
    assert_eq!(f["design_curve"], "asme_carbon_low_alloy");
    // The design temperature is above the curve's 371 °C limit: said so.
    assert!(f["warnings"].to_string().contains("above the curve's limit"), "{f}");
    let o = bin().args(["check-config", &cfg]).output().unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("allowable cycles"), "{text}");
}

#[test]
fn replay_json_carries_fatigue_and_counts_every_start_stop() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "plant.toml", PLANT);
    let days = 6;
    let csv = write(dir.path(), "history.csv", &history(days));
    let run = || {
        let o = bin().args(["replay", "--config", &cfg, "--input", &csv, "--format", "json"]).output().unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        serde_json::from_slice::<serde_json::Value>(&o.stdout).unwrap()
    };
    let v = run();
    let comp = v["components"]
        .as_array()
        .and_then(|a| a.iter().find(|c| c["component"] == "OUTLET-HEADER"))
        .unwrap_or_else(|| panic!("no OUTLET-HEADER in {v}"));
    let f = &comp["fatigue"];
    assert_eq!(f["location"], "bore of nozzle N1");
    // Each day heats at no pressure (compressive thermal stress) and cools
    // at full pressure (tensile): one stress cycle a day. All but the open
    // residue are closed; the residue counts as half cycles in the usage.
    let cycles = f["cycles"].as_f64().unwrap();
    let half = f["residue_half_cycles"].as_f64().unwrap();
    assert!((cycles + half - days as f64).abs() <= 1.0, "cycles {cycles}, residue {half}");
    assert!(f["fatigue_usage"].as_f64().unwrap() > 0.0);
    assert!(f["fatigue_usage"].as_f64().unwrap() >= f["closed_usage"].as_f64().unwrap());
    assert!(f["cycles_last_day"].as_f64().unwrap() >= 1.0);
    assert!(!f["cycle_table"].as_array().unwrap().is_empty());
    assert!(f["caution"].as_str().unwrap().contains("governing code"));
    assert!(comp["hours_to_threshold"].get("fatigue_usage.critical").is_some());
    assert_eq!(run()["components"], v["components"], "two replays of the same history differ");
}

#[test]
fn a_grade_without_elastic_data_is_refused_with_the_fix() {
    // HP-Nb (cast reformer tube alloy) ships without [elastic] data.
    let dir = tempfile::tempdir().unwrap();
    let text = PLANT.replace("material = \"2.25Cr-1Mo\"", "material = \"HP-Nb\"");
    let cfg = write(dir.path(), "plant.toml", &text);
    let o = bin().args(["check-config", &cfg]).output().unwrap();
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr).to_string() + &String::from_utf8_lossy(&o.stdout);
    assert!(err.contains("OUTLET-HEADER") && err.contains("[elastic]"), "{err}");
    // A constant fluid temperature has no rate: refused, with the reason.
    let text = PLANT.replace("fluid_temperature = \"TF\"", "fluid_temperature = { value = 500, unit = \"degC\" }");
    let cfg = write(dir.path(), "plant2.toml", &text);
    let o = bin().args(["check-config", &cfg]).output().unwrap();
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr).to_string() + &String::from_utf8_lossy(&o.stdout);
    assert!(err.contains("fatigue.fluid_temperature") && err.contains("rate of change"), "{err}");
}
