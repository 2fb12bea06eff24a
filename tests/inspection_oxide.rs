//! The oxide-to-temperature rule against the growth law evaluated
//! independently with numpy: numpy grows the steam-side oxide on
//! 2.25Cr-1Mo by the Rehn–Apblett law (log10 x[mils] = 0.00022·T[°R]·
//! (20 + log10 t[h]) − 7.25; constants from memory) at known metal
//! temperatures; the ledger, given that thickness and those hours, must
//! find the same temperature, and the correction against its measured
//! temperature must be the difference.

use std::process::Command;

use lifeledger::engine::inspection::{Finding, NewFinding};
use lifeledger::engine::{Engine, Quality, Sample};
use lifeledger::settings::validate::plan_settings;

const CONFIG: &str = r#"
[plant]
name = "Oxide Works"
[[tag]]
name = "TT"
unit = "degC"
[[tag]]
name = "PT"
unit = "bar"
[[component]]
name = "TUBE"
unit = "U1"
kind = "tube"
material = "2.25Cr-1Mo"
design_temperature = { value = 540, unit = "degC" }
design_pressure = { value = 100, unit = "bar" }
metal_temperature = "TT"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 50.8, unit = "mm" }
wall = { value = 6.0, unit = "mm" }
"#;

#[test]
fn oxide_thickness_gives_back_the_temperature_numpy_grew_it_at() {
    let script = r#"
import json, numpy as np
T_c = np.array([500.0, 540.0, 560.0, 590.0])
hours = np.array([2.0e4, 6.0e4, 1.0e5, 1.5e5])
T_R = (T_c + 273.15) * 9.0 / 5.0
x_mils = 10.0 ** (0.00022 * T_R[:, None] * (20.0 + np.log10(hours)[None, :]) - 7.25)
print(json.dumps({"t_c": T_c.tolist(), "hours": hours.tolist(), "x_mm": (x_mils * 0.0254).tolist()}))
"#;
    let out = Command::new("python3")
        .arg("-c")
        .arg(script)
        .output()
        .expect("python3 is needed for this reference test (tests/run installs numpy)");
    assert!(out.status.success(), "python failed: {}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let t_c: Vec<f64> = serde_json::from_value(v["t_c"].clone()).unwrap();
    let hours: Vec<f64> = serde_json::from_value(v["hours"].clone()).unwrap();
    let x_mm: Vec<Vec<f64>> = serde_json::from_value(v["x_mm"].clone()).unwrap();

    let mut id = 0;
    for (i, &t) in t_c.iter().enumerate() {
        for (j, &h) in hours.iter().enumerate() {
            // A ledger that measured a steady 540 °C for 20 h: its mean in
            // the creep range is the 540–550 °C class mid-point, 545 °C.
            let mut e = Engine::new(plan_settings("test", toml::from_str(CONFIG).unwrap()).unwrap().plan);
            let (tt, pt) = (e.tag_id("TT").unwrap(), e.tag_id("PT").unwrap());
            for k in 0..=120 {
                let time_ms = k * 600_000;
                e.ingest(&Sample { tag: tt, time_ms, value: 540.0, quality: Quality::Good }).unwrap();
                e.ingest(&Sample { tag: pt, time_ms, value: 100.0, quality: Quality::Good }).unwrap();
            }
            id += 1;
            let f = Finding::OxideThickness { oxide_mm: x_mm[i][j], service_h: h };
            let ev = e.accept_inspection(
                0,
                NewFinding { id, finding_ms: 20 * 3_600_000, supersedes: None, finding: f },
                None,
            );
            let got = ev.effect.oxide_temperature_k.unwrap() - 273.15;
            assert!((got - t).abs() < 1e-6, "{t} °C, {h} h, {} mm: ledger says {got} °C", x_mm[i][j]);
            let corr = ev.effect.temperature_correction_k.unwrap();
            assert!((corr - (t - 545.0)).abs() < 1e-6, "correction {corr} K for {t} °C");
        }
    }
}

/// The scale-growth projection: without heat flux the metal temperature
/// stays put, so the hours to a level are the straight line
/// (level − D)/rate; with heat flux the scale insulates, the metal heats
/// and every level comes sooner.
#[test]
fn scale_growth_brings_the_levels_forward_and_without_heat_flux_is_the_straight_line() {
    let mut e = Engine::new(plan_settings("test", toml::from_str(CONFIG).unwrap()).unwrap().plan);
    let (tt, pt) = (e.tag_id("TT").unwrap(), e.tag_id("PT").unwrap());
    for k in 0..=120 {
        let time_ms = k * 600_000;
        e.ingest(&Sample { tag: tt, time_ms, value: 590.0, quality: Quality::Good }).unwrap();
        e.ingest(&Sample { tag: pt, time_ms, value: 180.0, quality: Quality::Good }).unwrap();
    }
    let plan = &e.plan().components[0];
    let st = &e.components()[0];
    let flat = lifeledger::assessment::scale_growth_projection(plan, st, 0.3, 0.0).unwrap();
    let hot = lifeledger::assessment::scale_growth_projection(plan, st, 0.3, 150.0).unwrap();
    for (f, h) in flat.hours_to.iter().zip(&hot.hours_to) {
        let want = (f.1 - st.life_fraction) / flat.life_fraction_rate_per_h;
        let got = f.2.unwrap();
        assert!((got / want - 1.0).abs() < 1e-9, "{}: {got} h, straight line {want} h", f.0);
        assert!(h.2.unwrap() < got, "{}: with scale growth {:?} h, without {got} h", f.0, h.2);
    }
}
