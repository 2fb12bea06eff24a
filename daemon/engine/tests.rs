//! Engine invariants: exactness, splitting, ramps, duplicates, gaps, order.

use super::*;
use crate::physics::larson_miller::rupture_life_h;
use crate::settings::validate::plan_settings;
use proptest::prelude::*;

pub(crate) const TEST_CONFIG: &str = r#"
[plant]
name = "Test Works"

[engine]
max_hold_s = 900

[[material]]
grade = "TESTSTEEL"
melting_point_k = { value = 1780.0, source = "synthetic" }
creep_threshold_k = { value = 700.0, source = "synthetic" }
hardness_hv = { value = 200.0, source = "synthetic" }
[material.larson_miller]
constant_c = 20.0
coefficients = [28000.0, -1500.0, -800.0]
stress_range_mpa = [20.0, 300.0]
temperature_range_k = [723.0, 923.0]
minimum = { rule = "stress_factor", factor = 0.8 }
source = "synthetic"
[material.norton]
a_per_h = 1.0e10
n = 5.0
q_j_per_mol = 300000.0
source = "synthetic"

[[tag]]
name = "TT"
unit = "degC"
valid_range = [-50, 900]
[[tag]]
name = "PT"
unit = "bar"
[[tag]]
name = "LOAD"
unit = "N"
[[tag]]
name = "SLIP"
unit = "um"

[[component]]
name = "TUBE"
unit = "U1"
kind = "tube"
material = "TESTSTEEL"
design_temperature = { value = 560, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TT"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 50.8, unit = "mm" }
wall = { value = 6.0, unit = "mm" }

[[component]]
name = "SUPPORT"
unit = "U1"
kind = "wear_contact"
material = "TESTSTEEL"
[component.wear]
model = "fretting"
normal_load = "LOAD"
slip_amplitude = "SLIP"
frequency = { value = 20, unit = "Hz" }
wear_coefficient = 1.0e-8
contact_area_mm2 = 40.0
allowable_depth = { value = 1.0, unit = "mm" }
"#;

pub(crate) fn engine() -> Engine {
    let s = toml::from_str(TEST_CONFIG).unwrap();
    Engine::new(plan_settings("test", s).unwrap().plan)
}

fn feed(e: &mut Engine, tag: &str, t_s: i64, v: f64) -> Result<(), Rejection> {
    let id = e.tag_id(tag).unwrap();
    e.ingest(&Sample { tag: id, time_ms: t_s * 1000, value: v, quality: Quality::Good })
}

fn tube(e: &Engine) -> &ComponentState {
    &e.components()[0]
}

/// Rupture life (h) of the test tube at a temperature (°C) and pressure (bar).
fn tube_life(e: &Engine, t_c: f64, p_bar: f64) -> f64 {
    let c = &e.plan().components[0];
    let sigma = crate::physics::stress::hoop_stress_mpa(
        crate::physics::stress::StressBasis::MeanDiameter,
        p_bar / 10.0,
        50.8,
        6.0,
    );
    rupture_life_h(&c.material.larson_miller, sigma, t_c + 273.15, c.curve_basis).0
}

#[test]
fn piecewise_constant_is_exact() {
    let mut e = engine();
    // 10 h at 560 °C / 180 bar, then 10 h at 580 °C / 170 bar; samples every
    // minute, each step reported at the instant it happens (step tags would
    // be the same; with linear tags the step costs one minute of ramp, so
    // use step interpolation here).
    let mut e_step = {
        let mut s: crate::settings::Settings = toml::from_str(TEST_CONFIG).unwrap();
        for t in &mut s.tags {
            t.interpolation = super::plan::Interpolation::Step;
        }
        Engine::new(plan_settings("test", s).unwrap().plan)
    };
    for e in [&mut e, &mut e_step] {
        for i in 0..=1200 {
            let (t, p) = if i < 600 { (560.0, 180.0) } else { (580.0, 170.0) };
            feed(e, "TT", i * 60, t).unwrap();
            feed(e, "PT", i * 60, p).unwrap();
        }
    }
    let expect = 10.0 / tube_life(&e, 560.0, 180.0) + 10.0 / tube_life(&e, 580.0, 170.0);
    let got = tube(&e_step).life_fraction;
    assert!((got / expect - 1.0).abs() < 1e-12, "{got} {expect}");
    assert!((tube(&e_step).integrated_h - 20.0).abs() < 1e-12);
    assert_eq!(tube(&e_step).unmonitored_h, 0.0);
}

#[test]
fn linear_ramp_matches_fine_quadrature() {
    let mut e = engine();
    // 520 → 600 °C over 4 h, sampled every 5 min, at 180 bar.
    let n = 48;
    for i in 0..=n {
        let t = 520.0 + 80.0 * i as f64 / n as f64;
        feed(&mut e, "TT", i * 300, t).unwrap();
        feed(&mut e, "PT", i * 300, 180.0).unwrap();
    }
    // Reference: midpoint rule with 400 000 steps.
    let m = 400_000;
    let mut reference = 0.0;
    for k in 0..m {
        let t = 520.0 + 80.0 * (k as f64 + 0.5) / m as f64;
        reference += (4.0 / m as f64) / tube_life(&e, t, 180.0);
    }
    let got = tube(&e).life_fraction;
    assert!((got / reference - 1.0).abs() < 1e-3, "{got} {reference}");
}

#[test]
fn duplicates_and_late_samples_are_counted_not_integrated() {
    let mut e = engine();
    for i in 0..=60 {
        feed(&mut e, "TT", i * 60, 570.0).unwrap();
        feed(&mut e, "PT", i * 60, 180.0).unwrap();
    }
    let before = tube(&e).clone();
    assert_eq!(feed(&mut e, "TT", 3600, 570.0), Err(Rejection::Duplicate));
    assert_eq!(feed(&mut e, "TT", 1800, 700.0), Err(Rejection::Late));
    assert_eq!(tube(&e), &before);
    assert_eq!(e.counters().duplicate, 1);
    assert_eq!(e.counters().late, 1);
}

#[test]
fn bad_input_is_rejected_and_changes_nothing() {
    let mut e = engine();
    feed(&mut e, "TT", 0, 570.0).unwrap();
    feed(&mut e, "PT", 0, 180.0).unwrap();
    let before = e.export_state();
    assert_eq!(feed(&mut e, "TT", 60, f64::NAN), Err(Rejection::NotFinite));
    assert_eq!(feed(&mut e, "TT", 60, f64::INFINITY), Err(Rejection::NotFinite));
    assert_eq!(feed(&mut e, "TT", 60, 5000.0), Err(Rejection::OutOfRange));
    let id = e.tag_id("TT").unwrap();
    let bad = Sample { tag: id, time_ms: 60_000, value: 570.0, quality: Quality::Bad };
    assert_eq!(e.ingest(&bad), Err(Rejection::BadQuality));
    assert_eq!(e.ingest(&Sample { tag: 999, ..bad }), Err(Rejection::UnknownTag));
    let after = e.export_state();
    assert_eq!(before.tags, after.tags);
    assert_eq!(before.components, after.components);
    assert_eq!(e.counters().rejected(), 5);
}

#[test]
fn same_instant_order_does_not_matter() {
    let mut a = engine();
    let mut b = engine();
    for i in 0..=200 {
        let t = 540.0 + 30.0 * ((i as f64) / 17.0).sin();
        let p = 170.0 + 10.0 * ((i as f64) / 23.0).cos();
        feed(&mut a, "TT", i * 60, t).unwrap();
        feed(&mut a, "PT", i * 60, p).unwrap();
        feed(&mut b, "PT", i * 60, p).unwrap();
        feed(&mut b, "TT", i * 60, t).unwrap();
    }
    assert_eq!(tube(&a), tube(&b));
}

#[test]
fn gaps_count_unmonitored_and_use_design_conservatively() {
    let mut e = engine();
    feed(&mut e, "TT", 0, 500.0).unwrap();
    feed(&mut e, "PT", 0, 150.0).unwrap();
    // Two hours of silence, then data again: beyond the 900 s hold.
    feed(&mut e, "TT", 7200, 500.0).unwrap();
    feed(&mut e, "PT", 7200, 150.0).unwrap();
    let c = tube(&e);
    assert!((c.integrated_h - 2.0).abs() < 1e-12);
    // The first 900 s hold the last value, the rest is a gap.
    assert!((c.unmonitored_h - 1.75).abs() < 1e-12, "{}", c.unmonitored_h);
    // Conservative: the gap is integrated at design (560 °C, 180 bar).
    let expect = 0.25 / tube_life(&e, 500.0, 150.0) + 1.75 / tube_life(&e, 560.0, 180.0);
    assert!((c.life_fraction / expect - 1.0).abs() < 1e-12);
    assert!(c.flags.unmonitored);
}

#[test]
fn a_silent_tag_goes_stale_while_others_report() {
    let mut e = engine();
    feed(&mut e, "PT", 0, 180.0).unwrap();
    for i in 0..=120 {
        feed(&mut e, "TT", i * 60, 560.0).unwrap();
    }
    let c = tube(&e);
    // Pressure is held for 900 s, then the component is unmonitored; the
    // engine keeps integrating (one sample behind the newest).
    assert!(c.integrated_h >= 1.9, "{}", c.integrated_h);
    assert!((c.unmonitored_h - (c.integrated_h - 0.25)).abs() < 1e-9);
}

#[test]
fn fretting_wear_work_rate() {
    let mut e = engine();
    // 100 N, 50 µm slip at 20 Hz for 10 h: v = 4·0.05·20 = 4 mm/s;
    // depth = 1e-8 · 100 · 4 / 40 · 36 000 s = 3.6e-3 mm.
    for i in 0..=600 {
        feed(&mut e, "LOAD", i * 60, 100.0).unwrap();
        feed(&mut e, "SLIP", i * 60, 50.0).unwrap();
    }
    let c = &e.components()[1];
    assert!((c.wear_depth_mm - 3.6e-3).abs() < 1e-15, "{}", c.wear_depth_mm);
    assert_eq!(c.now.fretting_regime, Some(crate::physics::wear::FrettingRegime::GrossSlip));
}

#[test]
fn state_round_trips() {
    let mut a = engine();
    for i in 0..=30 {
        feed(&mut a, "TT", i * 60, 555.0 + i as f64).unwrap();
        feed(&mut a, "PT", i * 60, 180.0).unwrap();
    }
    let json = serde_json::to_string(&a.export_state()).unwrap();
    let mut b = engine();
    b.import_state(serde_json::from_str(&json).unwrap());
    for i in 31..=60 {
        for e in [&mut a, &mut b] {
            feed(e, "TT", i * 60, 555.0 + i as f64).unwrap();
            feed(e, "PT", i * 60, 180.0).unwrap();
        }
    }
    assert_eq!(a.export_state(), b.export_state());
}

/// The integrator keeps a hint to the histogram cell of the last piece
/// (in its working block, not in the ledger). A ledger imported with other
/// class edges (a stored ledger from before a change of
/// `temperature_class_k`) must not be booked through a hint into the old
/// edges: the hours land in the imported histogram's own cells, as in an
/// engine that imports the same ledger fresh.
#[test]
fn an_imported_ledger_is_booked_in_its_own_classes() {
    let fine = TEST_CONFIG.replace("max_hold_s = 900", "max_hold_s = 900\ntemperature_class_k = 2.5");
    let mut a = Engine::new(plan_settings("test", toml::from_str(&fine).unwrap()).unwrap().plan);
    for i in 0..=10 {
        feed(&mut a, "TT", i * 60, 575.0).unwrap();
        feed(&mut a, "PT", i * 60, 180.0).unwrap();
    }
    let stored = a.export_state();
    // Engine b has booked steadily into a cell of its own (10 K) classes,
    // at the temperature the imported ledger goes on at.
    let mut b = engine();
    for i in 0..=10 {
        feed(&mut b, "TT", i * 60, 575.0).unwrap();
        feed(&mut b, "PT", i * 60, 180.0).unwrap();
    }
    b.import_state(stored.clone());
    let mut c = engine();
    c.import_state(stored);
    for i in 11..=40 {
        for e in [&mut b, &mut c] {
            feed(e, "TT", i * 60, 575.0).unwrap();
            feed(e, "PT", i * 60, 180.0).unwrap();
        }
    }
    assert_eq!(b.export_state(), c.export_state());
    // 575 °C is in the 2.5 K class [575, 577.5) °C of the imported edges.
    let h = &tube(&b).histogram;
    let ti = crate::physics::histogram::class_index(&h.temperature_edges_k, 575.0 + 273.15);
    assert!((h.temperature_edges_k[ti - 1] - (575.0 + 273.15)).abs() < 1e-9, "{:?}", h.temperature_edges_k);
    assert!((h.temperature_hours()[ti] - 40.0 / 60.0).abs() < 1e-12, "40 min at 575 °C: {:?}", h.temperature_hours());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// Splitting an interval changes nothing for constant inputs.
    #[test]
    fn splitting_constant_intervals(k in 1i64..30, t in 450.0f64..650.0, p in 50.0f64..250.0) {
        let mut coarse = engine();
        let mut fine = engine();
        for i in 0..=4 {
            feed(&mut coarse, "TT", i * 600, t).unwrap();
            feed(&mut coarse, "PT", i * 600, p).unwrap();
        }
        for i in 0..=(4 * k) {
            feed(&mut fine, "TT", i * 600 / k, t).unwrap();
            feed(&mut fine, "PT", i * 600 / k, p).unwrap();
        }
        let (a, b) = (tube(&coarse).life_fraction, tube(&fine).life_fraction);
        prop_assert!((a - b).abs() <= 1e-12 * a.abs().max(1e-300), "{} {}", a, b);
    }

    /// Damage, strain and wear never decrease, whatever arrives.
    #[test]
    fn ledger_never_decreases(ops in proptest::collection::vec((0usize..4, 0i64..100_000, -100.0f64..1000.0), 1..200)) {
        let mut e = engine();
        let names = ["TT", "PT", "LOAD", "SLIP"];
        let mut prev: Vec<(f64, f64, f64)> = e.components().iter().map(|c| (c.life_fraction, c.creep_strain, c.wear_depth_mm)).collect();
        for (tag, t, v) in ops {
            let _ = feed(&mut e, names[tag], t, v);
            for (c, p) in e.components().iter().zip(prev.iter_mut()) {
                prop_assert!(c.life_fraction >= p.0 && c.creep_strain >= p.1 && c.wear_depth_mm >= p.2);
                prop_assert!(c.life_fraction.is_finite() && c.creep_strain.is_finite() && c.wear_depth_mm.is_finite());
                *p = (c.life_fraction, c.creep_strain, c.wear_depth_mm);
            }
        }
    }
}
