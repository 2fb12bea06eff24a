//! Every tag has a plausibility range: its own `valid_range`, or else the
//! physical default for its unit's quantity. An absurd value on a tag
//! without a configured range is rejected as out of range and changes
//! nothing, through the same settings validation and engine the service
//! and `replay` run.

use lifeledger::engine::{Engine, Quality, Rejection, Sample};
use lifeledger::settings::schema::Settings;
use lifeledger::settings::validate::plan_settings;

/// An Archard wear contact whose load tag (N) has no `valid_range`;
/// the sliding speed is constant.
const CONTACT: &str = r#"
[plant]
name = "Plausibility Test"

[[tag]]
name = "LOAD"
unit = "N"

[[tag]]
name = "TE"
unit = "degF"

[[component]]
name = "STEM"
kind = "wear_contact"
material = "9Cr-1Mo-V"
[component.wear]
model = "archard"
normal_load = "LOAD"
sliding_speed = { value = 2.0, unit = "mm/s" }
wear_coefficient = 2.0e-6
hardness_hv = 300.0
contact_area_mm2 = 25.0
allowable_depth = { value = 0.2, unit = "mm" }
"#;

fn engine() -> Engine {
    let settings: Settings = toml::from_str(CONTACT).unwrap();
    let cfg = plan_settings("contact.toml", settings).unwrap_or_else(|e| panic!("{e}"));
    Engine::new(cfg.plan)
}

const T0: i64 = 1_790_812_800_000; // 2026-10-01T00:00:00Z

#[test]
fn absurd_loads_without_a_configured_range_are_rejected_and_change_nothing() {
    let mut e = engine();
    let load = e.tag_id("LOAD").unwrap();
    let s = |t_min: i64, v: f64| Sample { tag: load, time_ms: T0 + t_min * 60_000, value: v, quality: Quality::Good };
    for m in 0..=10 {
        e.ingest(&s(m, 1800.0)).unwrap();
    }
    let before = e.export_state();
    // 1e308 N is finite but no plant load; nor is its negative.
    assert_eq!(e.ingest(&s(11, 1e308)), Err(Rejection::OutOfRange));
    assert_eq!(e.ingest(&s(12, -1e308)), Err(Rejection::OutOfRange));
    let after = e.export_state();
    assert_eq!(after.components, before.components, "the ledger moved");
    assert_eq!(after.tags, before.tags, "a cursor moved");
    assert_eq!(after.counters.out_of_range, before.counters.out_of_range + 2);
    // An ordinary value is still taken after them.
    e.ingest(&s(13, 1800.0)).unwrap();
    let wear = e.components()[0].wear_depth_mm;
    // Archard (J. F. Archard, 1953): depth = K·F·v·t / (H·A), H = HV·g
    // (ISO 6507-1): 2e-6 · 1800 N · 2 mm/s · 780 s / (300·9.80665 MPa · 25 mm²).
    let expect = 2e-6 * 1800.0 * 2.0 * 780.0 / (300.0 * 9.806_65 * 25.0);
    assert!((wear - expect).abs() <= 1e-12 * expect, "{wear} vs {expect}");
}

#[test]
fn the_default_range_is_in_the_tags_own_unit_and_allows_ordinary_values() {
    let settings: Settings = toml::from_str(CONTACT).unwrap();
    let cfg = plan_settings("contact.toml", settings).unwrap();
    let te = cfg.plan.tags.iter().find(|t| t.name == "TE").unwrap();
    let [lo, hi] = te.valid_range.expect("a default range");
    // Absolute zero is −459.67 °F (T/K = (t/°F + 459.67)/1.8, NIST SP 811).
    assert!((lo + 459.67).abs() < 1e-9, "{lo}");
    assert!(hi > 3000.0, "{hi}");
    let load = cfg.plan.tags.iter().find(|t| t.name == "LOAD").unwrap();
    let [lo, hi] = load.valid_range.expect("a default range");
    assert!(lo < 0.0 && (1000.0..1e300).contains(&hi), "{lo} {hi}");
    // One warning per defaulted tag, naming it.
    for t in ["LOAD", "TE"] {
        assert!(
            cfg.warnings.iter().any(|w| w.place == format!("tag \"{t}\"") && w.key == "valid_range"),
            "{:?}",
            cfg.warnings
        );
    }
}

#[test]
fn an_absurd_constant_input_is_a_configuration_error() {
    let text = CONTACT.replace(
        "sliding_speed = { value = 2.0, unit = \"mm/s\" }",
        "sliding_speed = { value = 1e308, unit = \"m/s\" }",
    );
    let settings: Settings = toml::from_str(&text).unwrap();
    let e = plan_settings("contact.toml", settings).unwrap_err();
    let p = e.problems.iter().find(|p| p.key == "wear.sliding_speed").unwrap_or_else(|| panic!("{e}"));
    assert_eq!(p.place, "component \"STEM\"");
    assert!(p.problem.contains("outside the physical range of speed"), "{p}");
    assert!(p.problem.contains("100 m/s"), "{p}");
}
