//! `replay` tells when each alarm level was first crossed (event time), in
//! its text and JSON outputs, and exports the component series as CSV with
//! the same fields as the database's `component_state` points.
//!
//! The history is built by hand so the answer has a closed form: a casing
//! on a fixed stress at a constant metal temperature. Its rupture life on
//! a Larson-Miller master curve is `t_r = 10^(P(σ)/T − C)` (Larson & Miller,
//! Trans. ASME 74, 1952), so Robinson's life fraction grows as `t / t_r`
//! and level `L` is crossed `L · t_r` hours after the first sample; its
//! Norton strain rate is `A σ^n exp(−Q/(R T))` (Norton 1929 with an
//! Arrhenius term; R = 8.314 462 618 J/(mol K), CODATA 2018), so strain level
//! `L` is crossed after `L / rate` hours. Both are computed here from the
//! test grade's constants, not by the program.

mod common;

use common::BoundedOutput;
use std::path::{Path, PathBuf};
use std::process::Command;

const C: f64 = 20.0;
const A0: f64 = 25_000.0;
const A1: f64 = -3_000.0;
const STRESS_MPA: f64 = 100.0;
const T_C: f64 = 600.0;
const NORTON_A: f64 = 1.0e5;
const NORTON_N: f64 = 5.0;
const NORTON_Q: f64 = 300_000.0;
/// 2026-06-01T00:00:00Z in epoch ms (Python:
/// `datetime(2026,6,1,tzinfo=timezone.utc).timestamp()` = 1780272000).
const T0_MS: i64 = 1_780_272_000_000;
const STEP_MIN: i64 = 10;
const HOURS: i64 = 60;

fn config() -> String {
    format!(
        r#"
[plant]
name = "Timeline Test Plant"

[[tag]]
name = "TE"
unit = "degC"
valid_range = [0.0, 700.0]

[[material]]
grade = "TIMELINE-TEST"
melting_point_k = {{ value = 1780.0, source = "test grade" }}
[material.larson_miller]
constant_c = {C}
coefficients = [{A0}, {A1}]
stress_range_mpa = [50.0, 300.0]
temperature_range_k = [800.0, 900.0]
minimum = {{ rule = "stress_factor", factor = 0.8 }}
source = "test grade"
[material.norton]
basis = "measured"
a_per_h = {NORTON_A}
n = {NORTON_N}
q_j_per_mol = {NORTON_Q}
source = "test grade"

[[component]]
name = "CASING"
unit = "U1"
kind = "casing"
material = "TIMELINE-TEST"
curve_basis = "mean"
design_temperature = {{ value = 590.0, unit = "degC" }}
metal_temperature = "TE"
fixed_stress = {{ value = {STRESS_MPA}, unit = "MPa" }}
[component.thresholds]
life_fraction = {{ advisory = 0.2, warning = 0.5, critical = 0.8 }}
creep_strain = {{ advisory = 0.01, warning = 0.02 }}
over_design_temperature_k = {{ advisory = 5.0 }}
hours_to_critical = {{ advisory = 20.0, warning = 10.0 }}
"#
    )
}

/// Rupture life, h, on the test grade's mean curve (closed form above).
fn rupture_h() -> f64 {
    let t_k = T_C + 273.15;
    let p = A0 + A1 * STRESS_MPA.log10();
    10f64.powf(p / t_k - C)
}

/// Norton strain rate, 1/h (closed form above).
fn strain_rate_per_h() -> f64 {
    let t_k = T_C + 273.15;
    NORTON_A * STRESS_MPA.powf(NORTON_N) * (-NORTON_Q / (8.314_462_618 * t_k)).exp()
}

fn history() -> String {
    let mut s = String::from("timestamp,tag,value\n");
    for i in 0..=(HOURS * 60 / STEP_MIN) {
        s.push_str(&format!("{},TE,{T_C}\n", (T0_MS + i * STEP_MIN * 60_000) / 1000));
    }
    s
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run(args: &[&str]) -> (String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger")).args(args).bounded_output().unwrap();
    let out = String::from_utf8_lossy(&o.stdout).to_string();
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    assert_eq!(o.status.code(), Some(0), "{args:?}\n{out}\n{err}");
    (out, err)
}

fn ms(rfc3339: &str) -> i64 {
    chrono::DateTime::parse_from_rfc3339(rfc3339).unwrap_or_else(|e| panic!("{rfc3339}: {e}")).timestamp_millis()
}

fn hours_after_start(rfc3339: &str) -> f64 {
    (ms(rfc3339) - T0_MS) as f64 / 3_600_000.0
}

#[test]
fn replay_json_lists_when_each_level_was_first_crossed() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "plant.toml", &config());
    let csv = write(dir.path(), "h.csv", &history());
    let (out, _) =
        run(&["replay", "--config", cfg.to_str().unwrap(), "--input", csv.to_str().unwrap(), "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap_or_else(|e| panic!("{e}\n{out}"));
    let comp = v["components"].as_array().unwrap().iter().find(|c| c["component"] == "CASING").unwrap();
    let timeline = comp["timeline"].as_array().unwrap_or_else(|| panic!("no timeline list:\n{comp:#}"));
    let find = |index: &str, severity: &str| {
        timeline
            .iter()
            .find(|e| e["index"] == index && e["severity"] == severity)
            .unwrap_or_else(|| panic!("no {index} {severity} in the timeline:\n{timeline:#?}"))
    };
    let tr = rupture_h();
    // Sanity of the closed form: about 57.6 h, so every level lies in the 60 h history.
    assert!((50.0..60.0).contains(&tr), "t_r = {tr}");
    // Life fraction: crossed at L · t_r after the first sample (linear
    // growth, the crossing is interpolated within the 10-minute step: 1 s).
    for (sev, l) in [("advisory", 0.2), ("warning", 0.5), ("critical", 0.8)] {
        let e = find("creep_life_fraction", sev);
        assert_eq!(e["threshold"].as_f64(), Some(l));
        let h = hours_after_start(e["time"].as_str().unwrap());
        assert!((h - l * tr).abs() < 1.0 / 3600.0, "{sev}: crossed after {h} h, closed form {} h", l * tr);
    }
    // Creep strain: crossed at L / rate.
    let rate = strain_rate_per_h();
    for (sev, l) in [("advisory", 0.01), ("warning", 0.02)] {
        let e = find("creep_strain", sev);
        let h = hours_after_start(e["time"].as_str().unwrap());
        assert!((h - l / rate).abs() < 1.0 / 3600.0, "strain {sev}: {h} h, closed form {} h", l / rate);
    }
    // Hours to the critical life fraction (0.8): (0.8 t_r − t) falls to
    // 20 h and 10 h; judged at the integrated instants (10-minute steps).
    for (sev, l) in [("advisory", 20.0), ("warning", 10.0)] {
        let e = find("hours_to_critical", sev);
        let h = hours_after_start(e["time"].as_str().unwrap());
        let expect = 0.8 * tr - l;
        assert!(
            h >= expect - 1e-6 && h <= expect + STEP_MIN as f64 / 60.0 + 1e-6,
            "{sev}: {h} h, closed form {expect} h"
        );
    }
    // 10 K over the 590 °C design temperature from the first step on.
    let e = find("metal_temperature_over_design", "advisory");
    assert!(hours_after_start(e["time"].as_str().unwrap()) <= STEP_MIN as f64 / 60.0 + 1e-9);
    // Levels not reached (strain critical unset, hours critical unset) are absent.
    assert!(timeline.iter().all(|e| !(e["index"] == "hours_to_critical" && e["severity"] == "critical")));
    // In event-time order.
    let times: Vec<i64> = timeline.iter().map(|e| ms(e["time"].as_str().unwrap())).collect();
    assert!(times.windows(2).all(|w| w[0] <= w[1]), "{times:?}");
}

#[test]
fn replay_text_prints_the_timeline() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "plant.toml", &config());
    let csv = write(dir.path(), "h.csv", &history());
    let (out, _) = run(&["replay", "--config", cfg.to_str().unwrap(), "--input", csv.to_str().unwrap()]);
    assert!(out.contains("Levels first crossed (event time)"), "{out}");
    let line = out
        .lines()
        .find(|l| l.contains("CASING") && l.contains("creep_life_fraction") && l.contains("critical"))
        .unwrap_or_else(|| panic!("no life-fraction critical line:\n{out}"));
    // 0.8 t_r after 2026-06-01T00:00Z, to the minute.
    let at = T0_MS + (0.8 * rupture_h() * 3_600_000.0).round() as i64;
    let minute = chrono::DateTime::from_timestamp_millis(at).unwrap().format("%Y-%m-%dT%H:%M").to_string();
    assert!(line.contains(&minute), "expected {minute} in {line:?}");
}

#[test]
fn replay_writes_the_component_series_as_csv_with_the_database_fields() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = write(dir.path(), "plant.toml", &config());
    let csv = write(dir.path(), "h.csv", &history());
    let out_csv = dir.path().join("series.csv");
    let out_lp = dir.path().join("series.lp");
    let (text, _) = run(&[
        "replay",
        "--config",
        cfg.to_str().unwrap(),
        "--input",
        csv.to_str().unwrap(),
        "--write-csv",
        out_csv.to_str().unwrap(),
        "--write-lp",
        out_lp.to_str().unwrap(),
        "--lp-interval-s",
        "3600",
    ]);
    assert!(text.contains(&format!("to {}", out_csv.display())), "{text}");
    let body = std::fs::read_to_string(&out_csv).unwrap();
    let mut lines = body.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    for col in
        ["time", "plant", "unit", "component", "material", "creep_life_fraction", "creep_strain", "metal_temperature_k"]
    {
        assert!(header.contains(&col), "no column {col} in {header:?}");
    }
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    // One row per hour of event time (the first at the first hour boundary
    // with known conditions, the last at the end of the history).
    assert!((HOURS as usize - 1..=HOURS as usize + 1).contains(&rows.len()), "{} rows", rows.len());
    let tr = rupture_h();
    for r in &rows {
        assert_eq!(r.len(), header.len(), "{r:?}");
        assert_eq!(r[col("component")], "CASING");
        let h = hours_after_start(r[col("time")]);
        let lf: f64 = r[col("creep_life_fraction")].parse().unwrap();
        // Robinson: t / t_r at constant conditions (relative 1e-9).
        assert!((lf - h / tr).abs() <= 1e-9 * (h / tr).max(1e-12), "at {h} h: {lf} vs {}", h / tr);
        let t_k: f64 = r[col("metal_temperature_k")].parse().unwrap();
        assert!((t_k - (T_C + 273.15)).abs() < 1e-9);
    }
    // The same points as the line-protocol file: one series path.
    let lp = std::fs::read_to_string(&out_lp).unwrap();
    let lp_states = lp.lines().filter(|l| l.starts_with("component_state,")).count();
    assert_eq!(lp_states, rows.len());
}

#[test]
fn a_level_the_initial_value_reaches_is_listed_at_the_start() {
    let dir = tempfile::tempdir().unwrap();
    // From the last inspection: a quarter of the life used already.
    let text =
        config().replace("[component.thresholds]", "[component.initial]\nlife_fraction = 0.25\n[component.thresholds]");
    let cfg = write(dir.path(), "plant.toml", &text);
    let csv = write(dir.path(), "h.csv", &history());
    let (out, _) =
        run(&["replay", "--config", cfg.to_str().unwrap(), "--input", csv.to_str().unwrap(), "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let timeline = v["components"][0]["timeline"].as_array().unwrap().clone();
    let find = |sev: &str| {
        timeline
            .iter()
            .find(|e| e["index"] == "creep_life_fraction" && e["severity"] == sev)
            .unwrap_or_else(|| panic!("no {sev}: {timeline:#?}"))
            .clone()
    };
    let adv = find("advisory");
    assert_eq!(adv["basis"], "initial");
    assert_eq!(ms(adv["time"].as_str().unwrap()), T0_MS);
    // Warning 0.5: (0.5 − 0.25) · t_r after the start (Robinson, linear sum).
    let warn = find("warning");
    assert_eq!(warn["basis"], "interpolated");
    let h = hours_after_start(warn["time"].as_str().unwrap());
    assert!((h - 0.25 * rupture_h()).abs() < 1.0 / 3600.0, "{h} h vs {} h", 0.25 * rupture_h());
}
