//! Exactness of the per-piece rules against closed forms computed here:
//! recent rates of steady histories, wear of ramping load × slip and
//! load × speed products, and hours booked by class, over design and in the
//! creep range on linear temperature pieces.
//!
//! Every reference value is worked out in the test from the formula (the
//! material below is synthetic, so its closed form is the definition), never
//! by calling the engine's own physics.

use super::projection;
use crate::engine::{ComponentState, Engine, Quality, Sample};
use crate::settings::validate::plan_settings;

/// One tube, one fretting contact and one sliding contact; tags hold for
/// 11 h so that a 10 h ramp sampled only at its ends is one straight line.
pub(crate) const CONFIG: &str = r#"
[plant]
name = "Exactness Works"

[engine]
max_hold_s = 40000
curve_basis = "mean"

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
# Below the default plausibility floor (-0.2 MPa): one test ramps through zero.
valid_range = [-50.0, 300.0]
[[tag]]
name = "LOAD"
unit = "N"
[[tag]]
name = "SLIP"
unit = "um"
[[tag]]
name = "FREQ"
unit = "Hz"
[[tag]]
name = "FORCE"
unit = "N"
[[tag]]
name = "SPEED"
unit = "mm/s"

[[component]]
name = "TUBE"
unit = "U1"
kind = "tube"
material = "TESTSTEEL"
design_temperature = { value = 560, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TT"
pressure = "PT"
initial = { life_fraction = 0.2 }
[component.geometry]
outside_diameter = { value = 50.8, unit = "mm" }
wall = { value = 6.0, unit = "mm" }

[[component]]
name = "FRET"
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

[[component]]
name = "FRET3"
unit = "U1"
kind = "wear_contact"
material = "TESTSTEEL"
[component.wear]
model = "fretting"
normal_load = "LOAD"
slip_amplitude = "SLIP"
frequency = "FREQ"
wear_coefficient = 1.0e-8
contact_area_mm2 = 40.0
allowable_depth = { value = 1.0, unit = "mm" }

[[component]]
name = "SLIDE"
unit = "U1"
kind = "wear_contact"
material = "TESTSTEEL"
[component.wear]
model = "archard"
normal_load = "FORCE"
sliding_speed = "SPEED"
wear_coefficient = 1.0e-4
hardness_hv = 200.0
contact_area_mm2 = 40.0
allowable_depth = { value = 1.0, unit = "mm" }
"#;

pub(crate) fn engine() -> Engine {
    Engine::new(plan_settings("test", toml::from_str(CONFIG).unwrap()).unwrap().plan)
}

fn feed(e: &mut Engine, tag: &str, t_s: f64, v: f64) {
    let id = e.tag_id(tag).unwrap();
    let s = Sample { tag: id, time_ms: (t_s * 1000.0).round() as i64, value: v, quality: Quality::Good };
    e.ingest(&s).unwrap_or_else(|r| panic!("{tag} at {t_s} s rejected: {r:?}"));
}

pub(crate) fn component<'a>(e: &'a Engine, name: &str) -> &'a ComponentState {
    let i = e.plan().components.iter().position(|c| c.name == name).unwrap();
    &e.components()[i]
}

fn rel(got: f64, want: f64) -> f64 {
    (got / want - 1.0).abs()
}

/// Rupture life (h) of the synthetic steel on its mean curve, worked out
/// here from the definitions: hoop stress on the mean diameter
/// σ = p·(Do − t)/(2t) (p in MPa = bar/10; Do = 50.8 mm, t = 6 mm) and the
/// Larson-Miller relation T·(C + log10 t_r) = P(log10 σ) with the
/// material's C = 20 and P(x) = 28000 − 1500x − 800x².
pub(crate) fn closed_form_life_h(t_c: f64, p_bar: f64) -> f64 {
    let sigma = p_bar / 10.0 * (50.8 - 6.0) / (2.0 * 6.0);
    let x = sigma.log10();
    let p = 28000.0 - 1500.0 * x - 800.0 * x * x;
    10f64.powf(p / (t_c + 273.15) - 20.0)
}

/// A steady history of `hours` at `t_c` / `p_bar`, one sample of each tag
/// every 10 minutes.
pub(crate) fn steady(hours: f64, t_c: f64, p_bar: f64) -> Engine {
    let mut e = engine();
    let n = (hours * 6.0).round() as i64;
    for i in 0..=n {
        feed(&mut e, "TT", i as f64 * 600.0, t_c);
        feed(&mut e, "PT", i as f64 * 600.0, p_bar);
    }
    e
}

// ---- recent rates ----------------------------------------------------------

#[test]
fn steady_recent_rate_is_the_true_rate_from_the_first_hours() {
    for hours in [10.0, 200.0, 2000.0] {
        let e = steady(hours, 580.0, 180.0);
        let c = component(&e, "TUBE");
        assert!((c.integrated_h - hours).abs() < 1e-9);
        let want = 1.0 / closed_form_life_h(580.0, 180.0);
        let got = c.recent_life_fraction_rate_per_h;
        assert!(rel(got, want) < 1e-9, "{hours} h: recent rate {got} /h, true {want} /h");
        // Creep strain rate: Norton ε̇ = A·σⁿ·exp(−Q/RT) with the grade's
        // synthetic constants, R = 8.314 462 618 J/(mol·K) (CODATA 2018).
        let sigma: f64 = 18.0 * 44.8 / 12.0;
        let strain = 1.0e10 * sigma.powi(5) * (-300_000.0f64 / (8.314_462_618 * (580.0 + 273.15))).exp();
        assert!(rel(c.recent_creep_strain_rate_per_h, strain) < 1e-9, "{hours} h strain");
    }
}

#[test]
fn projection_rates_settle_and_until_then_take_the_larger_rate() {
    let plan = |e: &Engine| e.plan().components[0].clone();
    // Above design (580 °C at 180 bar): the recent rate is the larger, so
    // it is used throughout; the projection is settling below 168 h.
    for hours in [10.0, 200.0, 2000.0] {
        let e = steady(hours, 580.0, 180.0);
        let pr = projection(&plan(&e), component(&e, "TUBE"));
        assert_eq!(pr.settling, hours < 168.0, "{hours} h");
        assert!((pr.window_h - hours).abs() < 1e-9);
        let want = 1.0 / closed_form_life_h(580.0, 180.0);
        assert!(rel(pr.life_fraction_rate_per_h, want) < 1e-9, "{hours} h");
        assert!(rel(pr.design.life_fraction_rate_per_h, 1.0 / closed_form_life_h(560.0, 180.0)) < 1e-9);
    }
    // Below design (540 °C at 150 bar): the design rate (560 °C, 180 bar)
    // while settling, the recent rate after.
    let e = steady(10.0, 540.0, 150.0);
    let pr = projection(&plan(&e), component(&e, "TUBE"));
    assert!(pr.settling);
    assert!(rel(pr.life_fraction_rate_per_h, 1.0 / closed_form_life_h(560.0, 180.0)) < 1e-9);
    assert!(rel(component(&e, "TUBE").recent_life_fraction_rate_per_h, 1.0 / closed_form_life_h(540.0, 150.0)) < 1e-9);
    let e = steady(200.0, 540.0, 150.0);
    let pr = projection(&plan(&e), component(&e, "TUBE"));
    assert!(!pr.settling);
    assert!(rel(pr.life_fraction_rate_per_h, 1.0 / closed_form_life_h(540.0, 150.0)) < 1e-9);
}

#[test]
fn a_ledger_stored_before_the_weight_existed_settles_again() {
    // Today's JSON without the two new fields, holding a biased-low recent
    // rate: it loads, counts as settling (design rate), and the first new
    // piece replaces the old recent rate outright.
    let e = steady(2000.0, 580.0, 180.0);
    let mut v = serde_json::to_value(component(&e, "TUBE")).unwrap();
    let o = v.as_object_mut().unwrap();
    o.remove("recent_weight").unwrap();
    o.remove("recent_window_h").unwrap();
    o.insert("recent_life_fraction_rate_per_h".into(), serde_json::json!(1e-12));
    let old: ComponentState = serde_json::from_value(v).unwrap();
    assert_eq!((old.recent_weight, old.recent_window_h), (0.0, 0.0));
    let pr = projection(&e.plan().components[0], &old);
    assert!(pr.settling);
    // No recent rate is known yet: the design rate (560 °C, 180 bar).
    assert!(rel(pr.life_fraction_rate_per_h, 1.0 / closed_form_life_h(560.0, 180.0)) < 1e-9);
    let mut state = e.export_state();
    state.components[0].1 = old;
    let mut e2 = engine();
    e2.import_state(state);
    feed(&mut e2, "TT", 2000.0 * 3600.0 + 600.0, 580.0);
    feed(&mut e2, "PT", 2000.0 * 3600.0 + 600.0, 180.0);
    let c = component(&e2, "TUBE");
    assert!(rel(c.recent_life_fraction_rate_per_h, 1.0 / closed_form_life_h(580.0, 180.0)) < 1e-9);
    assert!(c.recent_window_h > 0.0 && c.recent_window_h < 1.0);
}

// ---- wear with two ramping inputs ------------------------------------------

/// ∫₀¹ (a0 + (a1 − a0)s)·(b0 + (b1 − b0)s) ds, by hand:
/// a0·b0 + (a0·Δb + b0·Δa)/2 + Δa·Δb/3.
fn mean_product(a0: f64, a1: f64, b0: f64, b1: f64) -> f64 {
    let (da, db) = (a1 - a0, b1 - b0);
    a0 * b0 + 0.5 * (a0 * db + b0 * da) + da * db / 3.0
}

/// Fretting depth (mm) over `hours` of linear load (N) and slip (µm) ramps:
/// work-rate model V̇ = K_w·F·4δf (Frick et al., NUREG/CR-3480, from
/// memory), depth = V / A; K_w = 1e-8 mm²/N, f = 20 Hz, A = 40 mm².
fn fretting_depth(hours: f64, load: (f64, f64), slip_um: (f64, f64)) -> f64 {
    let fs = mean_product(load.0, load.1, slip_um.0 / 1000.0, slip_um.1 / 1000.0);
    1.0e-8 * 4.0 * 20.0 * fs / 40.0 * hours * 3600.0
}

fn fretting_ramp(hours: f64, load: (f64, f64), slip_um: (f64, f64)) -> f64 {
    let mut e = engine();
    feed(&mut e, "LOAD", 0.0, load.0);
    feed(&mut e, "SLIP", 0.0, slip_um.0);
    feed(&mut e, "LOAD", hours * 3600.0, load.1);
    feed(&mut e, "SLIP", hours * 3600.0, slip_um.1);
    let c = component(&e, "FRET");
    assert!((c.integrated_h - hours).abs() < 1e-12);
    c.wear_depth_mm
}

#[test]
fn fretting_wear_is_exact_for_ramping_load_and_slip() {
    // Anti-correlated (the trapezoid rule's worst case: both ends give zero
    // wear rate), anti-correlated with an offset, and correlated.
    for (load, slip) in [((0.0, 100.0), (100.0, 0.0)), ((200.0, 100.0), (20.0, 80.0)), ((50.0, 150.0), (10.0, 90.0))] {
        let want = fretting_depth(1.0, load, slip);
        let got = fretting_ramp(1.0, load, slip);
        assert!(rel(got, want) < 1e-12, "load {load:?} slip {slip:?}: {got} mm, closed form {want} mm");
    }
}

#[test]
fn sliding_wear_is_exact_for_ramping_load_and_speed() {
    // Archard V = K·F·s/H (Archard 1953), H = HV·g with g = 9.80665 m/s²
    // (HV in kgf/mm², definition of the kilogram-force); K = 1e-4,
    // HV 200, A = 40 mm².
    let h_mpa = 200.0 * 9.806_65;
    for (load, speed) in [((300.0, 0.0), (0.0, 2.0)), ((100.0, 300.0), (0.5, 2.5))] {
        let mut e = engine();
        feed(&mut e, "FORCE", 0.0, load.0);
        feed(&mut e, "SPEED", 0.0, speed.0);
        feed(&mut e, "FORCE", 7200.0, load.1);
        feed(&mut e, "SPEED", 7200.0, speed.1);
        let want = 1.0e-4 / h_mpa * mean_product(load.0, load.1, speed.0, speed.1) / 40.0 * 7200.0;
        let got = component(&e, "SLIDE").wear_depth_mm;
        assert!(rel(got, want) < 1e-12, "load {load:?} speed {speed:?}: {got} mm, closed form {want} mm");
    }
}

#[test]
fn fretting_wear_is_exact_with_three_ramping_inputs() {
    // Load, slip and frequency all ramp: the rate is cubic in time.
    // ∫₀¹ (a0 + a·s)(b0 + b·s)(c0 + c·s) ds, expanded by hand:
    // a0b0c0 + (a0b0c + a0bc0 + ab0c0)/2 + (a0bc + ab0c + abc0)/3 + abc/4.
    let (load, slip_um, freq) = ((120.0, 40.0), (30.0, 90.0), (10.0, 35.0));
    let (a0, a) = (load.0, load.1 - load.0);
    let (b0, b) = (slip_um.0 / 1000.0, (slip_um.1 - slip_um.0) / 1000.0);
    let (c0, c) = (freq.0, freq.1 - freq.0);
    let mean = a0 * b0 * c0
        + (a0 * b0 * c + a0 * b * c0 + a * b0 * c0) / 2.0
        + (a0 * b * c + a * b0 * c + a * b * c0) / 3.0
        + a * b * c / 4.0;
    let want = 1.0e-8 * 4.0 * mean / 40.0 * 2.0 * 3600.0;
    let mut e = engine();
    for (t, i) in [(0.0, 0), (7200.0, 1)] {
        let pick = |v: (f64, f64)| if i == 0 { v.0 } else { v.1 };
        feed(&mut e, "LOAD", t, pick(load));
        feed(&mut e, "SLIP", t, pick(slip_um));
        feed(&mut e, "FREQ", t, pick(freq));
    }
    let got = component(&e, "FRET3").wear_depth_mm;
    assert!(rel(got, want) < 1e-12, "{got} mm, closed form {want} mm");
}

#[test]
fn sliding_wear_is_exact_through_a_reversal() {
    // Speed −1 → +2 mm/s at a steady 150 N over 3 h: sliding distance is
    // ∫|v| = 3 h·(1/3·1/2 + 2/3·2/2) mm/s = 3 h·5/6 mm/s (two triangles).
    let mut e = engine();
    feed(&mut e, "FORCE", 0.0, 150.0);
    feed(&mut e, "SPEED", 0.0, -1.0);
    feed(&mut e, "FORCE", 10800.0, 150.0);
    feed(&mut e, "SPEED", 10800.0, 2.0);
    let want = 1.0e-4 / (200.0 * 9.806_65) * 150.0 * (5.0 / 6.0) / 40.0 * 10800.0;
    let got = component(&e, "SLIDE").wear_depth_mm;
    assert!(rel(got, want) < 1e-12, "{got} mm, closed form {want} mm");
}

// ---- hours by class, over design, in the creep range -----------------------

/// A ramp of the tube's temperature from `t0` to `t1` °C and its pressure
/// from `p0` to `p1` bar over `hours`, sampled only at its ends.
fn tube_ramp(hours: f64, (t0, t1): (f64, f64), (p0, p1): (f64, f64)) -> Engine {
    let mut e = engine();
    feed(&mut e, "TT", 0.0, t0);
    feed(&mut e, "PT", 0.0, p0);
    feed(&mut e, "TT", hours * 3600.0, t1);
    feed(&mut e, "PT", hours * 3600.0, p1);
    assert!((component(&e, "TUBE").integrated_h - hours).abs() < 1e-12);
    e
}

/// Hours a linear ramp from `v0` to `v1` over `hours` spends in [lo, hi).
fn ramp_hours_in(hours: f64, v0: f64, v1: f64, lo: f64, hi: f64) -> f64 {
    let at = |v: f64| ((v - v0) / (v1 - v0)).clamp(0.0, 1.0);
    let (a, b) = (at(lo), at(hi));
    hours * (b - a).abs()
}

#[test]
fn temperature_classes_are_exact_on_a_ramp_sampled_at_its_ends() {
    // 500 → 560 °C over 10 h: every 10 K class from 500 °C to 560 °C holds
    // 10·10/60 h; the classes sit on round degrees Celsius by default.
    let e = tube_ramp(10.0, (500.0, 560.0), (180.0, 180.0));
    let c = component(&e, "TUBE");
    let h = &c.histogram;
    let edges_c: Vec<f64> = h.temperature_edges_k.iter().map(|k| k - 273.15).collect();
    let hours = h.temperature_hours();
    let mut checked = 0;
    for (i, e) in edges_c.windows(2).enumerate() {
        let want = ramp_hours_in(10.0, 500.0, 560.0, e[0], e[1]);
        assert!(
            (hours[i + 1] - want).abs() < 1e-9,
            "class [{}, {}) °C: {} h, closed form {want} h",
            e[0],
            e[1],
            hours[i + 1]
        );
        if (e[0] - 510.0).abs() < 1e-9 {
            assert!((hours[i + 1] - 10.0 * 10.0 / 60.0).abs() < 1e-9);
            checked += 1;
        }
    }
    assert_eq!(checked, 1, "no class [510, 520) °C in {edges_c:?}");
    assert!((h.total_h() - 10.0).abs() < 1e-9);
}

#[test]
fn hours_over_design_and_in_the_creep_range_are_exact_on_ramps() {
    // Over design (560 °C): a 10 h ramp 540 → 600 °C is above it for
    // 10·40/60 h.
    let e = tube_ramp(10.0, (540.0, 600.0), (180.0, 180.0));
    let c = component(&e, "TUBE");
    assert!((c.over_design_h - 10.0 * 40.0 / 60.0).abs() < 1e-9, "{}", c.over_design_h);
    // Falling the other way gives the same hours.
    let e = tube_ramp(10.0, (600.0, 540.0), (180.0, 180.0));
    assert!((component(&e, "TUBE").over_design_h - 10.0 * 40.0 / 60.0).abs() < 1e-9);
    // Creep range: at or above the grade's 700 K = 426.85 °C; a 10 h ramp
    // 400 → 460 °C is in it for 10·(460 − 426.85)/60 h.
    let e = tube_ramp(10.0, (400.0, 460.0), (180.0, 180.0));
    let want = 10.0 * (460.0 - 426.85) / 60.0;
    let got = component(&e, "TUBE").hours_in_creep_range;
    assert!((got - want).abs() < 1e-9, "{got} h in the creep range, closed form {want} h");
}

#[test]
fn temperature_by_pressure_table_is_exact_on_a_joint_ramp() {
    // 500 → 560 °C and 100 → 220 bar together over 10 h: each cell holds
    // the overlap of the times the two lines spend in its classes.
    let e = tube_ramp(10.0, (500.0, 560.0), (100.0, 220.0));
    let h = &component(&e, "TUBE").histogram;
    let inf = f64::INFINITY;
    let with_ends = |edges: Vec<f64>| {
        let mut v = vec![-inf];
        v.extend(edges);
        v.push(inf);
        v
    };
    let te = with_ends(h.temperature_edges_k.iter().map(|k| k - 273.15).collect());
    let pe = with_ends(h.pressure_edges_mpa.iter().map(|p| p * 10.0).collect());
    let span = |v0: f64, v1: f64, lo: f64, hi: f64| {
        let at = |v: f64| ((v - v0) / (v1 - v0)).clamp(0.0, 1.0);
        let (a, b) = (at(lo), at(hi));
        (a.min(b), a.max(b))
    };
    let w = pe.len() - 1;
    let mut total = 0.0;
    for ti in 0..te.len() - 1 {
        for pi in 0..w {
            let (a0, a1) = span(500.0, 560.0, te[ti], te[ti + 1]);
            let (b0, b1) = span(100.0, 220.0, pe[pi], pe[pi + 1]);
            let want = 10.0 * (a1.min(b1) - a0.max(b0)).max(0.0);
            let got = h.hours[ti * w + pi];
            assert!((got - want).abs() < 1e-9, "cell ({ti}, {pi}): {got} h, closed form {want} h");
            total += want;
        }
    }
    assert!((total - 10.0).abs() < 1e-9);
}

#[test]
fn extrapolated_hours_are_exact_on_a_ramp_into_the_data_range() {
    // The grade's data start at 723 K = 449.85 °C; a 10 h ramp 440 → 460 °C
    // (all in the creep range) is below them for 10·9.85/20 h.
    let e = tube_ramp(10.0, (440.0, 460.0), (180.0, 180.0));
    let c = component(&e, "TUBE");
    assert!((c.hours_in_creep_range - 10.0).abs() < 1e-9);
    let want = 10.0 * (449.85 - 440.0) / 20.0;
    assert!((c.extrapolated_h - want).abs() < 1e-9, "{} h extrapolated, closed form {want} h", c.extrapolated_h);
    assert!(c.flags.extrapolated.temperature_below && !c.flags.extrapolated.temperature_above);
    assert!(!c.flags.extrapolated.stress_below && !c.flags.extrapolated.stress_above);
}

#[test]
fn creep_hours_where_temperature_and_pressure_cross_in_opposite_directions() {
    // Temperature rises through the 426.85 °C threshold at 10·26.85/60 h
    // while pressure falls from 180 to −20 bar through zero at 9 h: both
    // ends are outside the creep range, the middle is inside it.
    let e = tube_ramp(10.0, (400.0, 460.0), (180.0, -20.0));
    let want = 9.0 - 10.0 * 26.85 / 60.0;
    let got = component(&e, "TUBE").hours_in_creep_range;
    assert!((got - want).abs() < 1e-9, "{got} h, closed form {want} h");
}

#[test]
fn class_origin_is_configurable_and_engine_numbers_are_checked() {
    let with = |extra: &str| CONFIG.replace("curve_basis = \"mean\"", &format!("curve_basis = \"mean\"\n{extra}"));
    let plan = plan_settings("test", toml::from_str(&with("temperature_class_origin_c = 5")).unwrap()).unwrap().plan;
    let edges: Vec<f64> = plan.components[0].temperature_edges_k.iter().map(|k| k - 273.15).collect();
    assert!((edges[0] - 495.0).abs() < 1e-9, "{edges:?}");
    assert!(edges.windows(2).all(|w| (w[1] - w[0] - 10.0).abs() < 1e-9));
    for (bad, key) in [
        ("recent_rate_settling_h = -1", "recent_rate_settling_h"),
        ("recent_rate_window_h = 0", "recent_rate_window_h"),
        ("temperature_class_k = 0", "temperature_class_k"),
    ] {
        let Err(err) = plan_settings("test", toml::from_str(&with(bad)).unwrap()) else { panic!("{bad} accepted") };
        let p = err.problems.iter().find(|p| p.key == key).unwrap_or_else(|| panic!("{bad}: {err}"));
        assert_eq!(p.place, "[engine]");
    }
}
