//! Fatigue in the engine: stress at the location, cycles booked through
//! the one integration path, restarts, properties (usage never decreases,
//! splitting a history changes nothing, a constant history makes no cycles).

use super::*;
use crate::settings::validate::plan_settings;
use proptest::prelude::*;

pub(crate) const FATIGUE_CONFIG: &str = r#"
[plant]
name = "Fatigue Works"

[engine]
max_hold_s = 3600

[[tag]]
name = "TT"
unit = "degC"
[[tag]]
name = "PT"
unit = "MPa"
[[tag]]
name = "TF"
unit = "degC"
[[tag]]
name = "TW"
unit = "degC"

[[component]]
name = "HDR"
kind = "header"
material = "2.25Cr-1Mo"
design_temperature = { value = 545, unit = "degC" }
design_pressure = { value = 18, unit = "MPa" }
metal_temperature = "TT"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 406.4, unit = "mm" }
wall = { value = 60, unit = "mm" }
[component.fatigue]
location = "nozzle bore"
pressure_stress_factor = 2.5
thermal_stress_factor = 1.2
fluid_temperature = "TF"
wall_temperature = "TW"
hysteresis_gate_mpa = 5
"#;

pub(crate) fn engine() -> Engine {
    let cfg = plan_settings("fatigue-test", toml::from_str(FATIGUE_CONFIG).unwrap()).unwrap();
    Engine::new(cfg.plan)
}

/// One sample of all four tags at `minute`: pressure MPa, metal, fluid and
/// wall temperatures °C.
pub(crate) fn feed(e: &mut Engine, minute: i64, p: f64, tm: f64, tf: f64, tw: f64) {
    let ms = 1_700_000_000_000 + minute * 60_000;
    for (name, v) in [("PT", p), ("TT", tm), ("TF", tf), ("TW", tw)] {
        let tag = e.tag_id(name).unwrap();
        e.ingest(&Sample { tag, time_ms: ms, value: v, quality: Quality::Good }).unwrap();
    }
}

fn fatigue_of(e: &Engine) -> &crate::engine::fatigue::FatigueState {
    e.components()[0].fatigue.as_ref().expect("a fatigue ledger")
}

/// Start-stop: pressure 0 → 17 MPa; the metal and the wall follow the
/// fluid with a lag on the way up and down.
fn start_stop(e: &mut Engine, start_minute: i64) -> i64 {
    let mut m = start_minute;
    for (p, tf, tw) in [
        (0.5, 250.0, 250.0),
        (5.0, 400.0, 360.0),
        (17.0, 540.0, 530.0),
        (17.0, 540.0, 540.0),
        (17.0, 540.0, 540.0),
        (10.0, 420.0, 460.0),
        (0.5, 250.0, 260.0),
    ] {
        feed(e, m, p, tw, tf, tw);
        m += 30;
    }
    m
}

#[test]
fn each_start_stop_closes_one_cycle_and_usage_grows() {
    let mut e = engine();
    let mut m = 0;
    let mut last_usage = 0.0;
    for k in 0..5 {
        m = start_stop(&mut e, m);
        let f = fatigue_of(&e);
        if k >= 1 {
            assert!(f.cycles >= k as f64, "after {} start-stops {} cycles", k + 1, f.cycles);
        }
        assert!(f.usage >= last_usage);
        last_usage = f.usage;
    }
    let f = fatigue_of(&e);
    assert!(f.usage > 0.0);
    // The largest range: cooling at full pressure (tensile thermal plus
    // pressure) against heating at low pressure (compressive thermal).
    assert!(f.largest_range_mpa > 100.0, "{}", f.largest_range_mpa);
    let fig = crate::engine::fatigue::figures(&e.plan().components[0], &e.components()[0]).unwrap();
    assert!(fig.fatigue_usage >= f.usage);
    assert!(fig.cycles_last_day > 0.0);
}

#[test]
fn constant_history_makes_no_cycles() {
    let mut e = engine();
    for m in 0..500 {
        feed(&mut e, m, 17.0, 540.0, 540.0, 540.0);
    }
    let f = fatigue_of(&e);
    assert_eq!(f.cycles, 0.0);
    assert_eq!(f.usage, 0.0);
    assert!(f.counter.held() <= 1);
}

#[test]
fn restart_from_stored_state_continues_bit_identically() {
    let mut whole = engine();
    let mut m = 0;
    for _ in 0..4 {
        m = start_stop(&mut whole, m);
    }
    for cut in [3, 10, 17, 25] {
        let mut a = engine();
        let mut m = 0;
        let mut n = 0;
        let mut restarted = false;
        for _ in 0..4 {
            for (p, tf, tw) in [
                (0.5, 250.0, 250.0),
                (5.0, 400.0, 360.0),
                (17.0, 540.0, 530.0),
                (17.0, 540.0, 540.0),
                (17.0, 540.0, 540.0),
                (10.0, 420.0, 460.0),
                (0.5, 250.0, 260.0),
            ] {
                if n == cut && !restarted {
                    let json = serde_json::to_string(&a.export_state()).unwrap();
                    let mut b = engine();
                    b.import_state(serde_json::from_str(&json).unwrap());
                    a = b;
                    restarted = true;
                }
                feed(&mut a, m, p, tw, tf, tw);
                m += 30;
                n += 1;
            }
        }
        assert_eq!(
            serde_json::to_string(&a.components()[0]).unwrap(),
            serde_json::to_string(&whole.components()[0]).unwrap(),
            "restart after {cut} samples"
        );
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    /// Fatigue usage never decreases, and a restart at any sample gives the
    /// same ledger as the uninterrupted history.
    #[test]
    fn usage_monotone_and_restart_anywhere(
        steps in prop::collection::vec((0.0f64..18.0, 200.0f64..560.0, -40.0f64..40.0), 4..60),
        cut in 0usize..60,
    ) {
        let mut whole = engine();
        let mut split = engine();
        let mut last = 0.0;
        for (i, (p, tf, d)) in steps.iter().enumerate() {
            let tw = tf + d;
            feed(&mut whole, i as i64 * 10, *p, tw, *tf, tw);
            let u = fatigue_of(&whole).usage;
            let fig = crate::engine::fatigue::figures(&whole.plan().components[0], &whole.components()[0]).unwrap();
            prop_assert!(u >= last);
            prop_assert!(fig.fatigue_usage >= u);
            last = u;
            if i == cut {
                let json = serde_json::to_string(&split.export_state()).unwrap();
                let mut b = engine();
                b.import_state(serde_json::from_str(&json).unwrap());
                split = b;
            }
            feed(&mut split, i as i64 * 10, *p, tw, *tf, tw);
        }
        prop_assert_eq!(
            serde_json::to_string(&split.components()[0]).unwrap(),
            serde_json::to_string(&whole.components()[0]).unwrap()
        );
    }
}

#[test]
fn plasticity_limit_raises_usage_of_large_ranges_only() {
    // The same history with S_PS configured: ranges above it cost more,
    // never less (K_e ≥ 1).
    let with = FATIGUE_CONFIG.replace("hysteresis_gate_mpa = 5", "hysteresis_gate_mpa = 5\nplasticity_limit_mpa = 150");
    let cfg = plan_settings("fatigue-test", toml::from_str(&with).unwrap()).unwrap();
    let mut a = Engine::new(cfg.plan);
    let mut b = engine();
    let (mut ma, mut mb) = (0, 0);
    for _ in 0..3 {
        ma = start_stop(&mut a, ma);
        mb = start_stop(&mut b, mb);
    }
    let (ua, ub) = (fatigue_of(&a).usage, fatigue_of(&b).usage);
    assert!(fatigue_of(&b).largest_range_mpa > 150.0);
    assert!(ua > ub, "K_e raised nothing: {ua} vs {ub}");
}

#[test]
fn fretting_knockdown_raises_usage_while_the_contact_slips() {
    // The header also has a fretting contact (constant load, slip 50 µm:
    // gross slip by the default bounds). With a knock-down of 2 the same
    // history costs more fatigue usage; a knock-down without a fretting
    // contact is refused.
    let wear = "[component.wear]\nmodel = \"fretting\"\nnormal_load = { value = 100, unit = \"N\" }\n\
                slip_amplitude = { value = 50, unit = \"um\" }\nfrequency = { value = 10, unit = \"Hz\" }\n\
                wear_coefficient = 1.0e-9\ncontact_area_mm2 = 30.0\nallowable_depth = { value = 0.5, unit = \"mm\" }\n\
                [component.fatigue]";
    let base = FATIGUE_CONFIG.replace("[component.fatigue]", wear);
    let with = base.replace("hysteresis_gate_mpa = 5", "hysteresis_gate_mpa = 5\nfretting_knockdown = 2.0");
    let mut a = Engine::new(plan_settings("f", toml::from_str(&with).unwrap()).unwrap().plan);
    let mut b = Engine::new(plan_settings("f", toml::from_str(&base).unwrap()).unwrap().plan);
    let (mut ma, mut mb) = (0, 0);
    for _ in 0..3 {
        ma = start_stop(&mut a, ma);
        mb = start_stop(&mut b, mb);
    }
    assert_eq!(a.components()[0].now.fretting_regime, Some(crate::physics::wear::FrettingRegime::GrossSlip));
    assert!(fatigue_of(&a).usage > 1.5 * fatigue_of(&b).usage, "{} vs {}", fatigue_of(&a).usage, fatigue_of(&b).usage);
    let refused =
        FATIGUE_CONFIG.replace("hysteresis_gate_mpa = 5", "hysteresis_gate_mpa = 5\nfretting_knockdown = 2.0");
    let err = plan_settings("f", toml::from_str(&refused).unwrap()).unwrap_err();
    assert!(err.to_string().contains("fatigue.fretting_knockdown"), "{err}");
}
