//! Inspection re-basing rules against hand-worked closed forms, on the
//! synthetic steel of `component::tests` (its closed forms are the
//! definitions: Larson-Miller P(x) = 28000 − 1500x − 800x², C = 20; Norton
//! ε̇ = 1e10·σ⁵·exp(−300 000/RT); mean-diameter hoop stress
//! σ = p·(Do − t)/(2t), Do = 50.8 mm). Reference values are computed here,
//! never by the engine's own physics.

use super::*;
use crate::engine::component::tests::{component, CONFIG};
use crate::engine::{Engine, Quality, Sample};
use crate::settings::validate::plan_settings;

const H: i64 = 3_600_000;
const R: f64 = 8.314_462_618; // CODATA 2018

fn engine_with(config: &str) -> Engine {
    Engine::new(plan_settings("test", toml::from_str(config).unwrap()).unwrap().plan)
}

/// Feeds one sample; one at an instant the tag already has (the end of
/// one run is the start of the next) is a duplicate and changes nothing.
fn feed(e: &mut Engine, tag: &str, t_ms: i64, v: f64) {
    let id = e.tag_id(tag).unwrap();
    match e.ingest(&Sample { tag: id, time_ms: t_ms, value: v, quality: Quality::Good }) {
        Ok(()) | Err(crate::engine::Rejection::Duplicate) => {}
        Err(r) => panic!("{tag} at {t_ms} ms rejected: {r:?}"),
    }
}

/// Steady 580 °C, 180 bar, every 10 min over [from_h, to_h] (both sampled).
fn run(e: &mut Engine, from_h: i64, to_h: i64) {
    let mut t = from_h * H;
    while t <= to_h * H {
        feed(e, "TT", t, 580.0);
        feed(e, "PT", t, 180.0);
        t += 600_000;
    }
}

fn life_rate(t_c: f64, p_bar: f64, wall_mm: f64) -> f64 {
    let sigma = p_bar / 10.0 * (50.8 - wall_mm) / (2.0 * wall_mm);
    let x = sigma.log10();
    let p = 28000.0 - 1500.0 * x - 800.0 * x * x;
    1.0 / 10f64.powf(p / (t_c + 273.15) - 20.0)
}

fn strain_rate(t_c: f64, p_bar: f64, wall_mm: f64) -> f64 {
    let sigma = p_bar / 10.0 * (50.8 - wall_mm) / (2.0 * wall_mm);
    1.0e10 * sigma.powi(5) * (-300_000.0 / (R * (t_c + 273.15))).exp()
}

fn rel(got: f64, want: f64) -> f64 {
    (got / want - 1.0).abs()
}

fn tube(e: &Engine) -> usize {
    e.component_index("TUBE").unwrap()
}

fn finding(id: i64, at_h: i64, f: Finding) -> NewFinding {
    NewFinding { id, finding_ms: at_h * H, supersedes: None, finding: f }
}

/// Creep strain measured 0.5 % at 10 h of a 20 h steady run, entered
/// before the run reaches it: ε(20 h) = 0.005 + ε̇·10 h.
#[test]
fn a_strain_finding_re_bases_strain_at_its_date() {
    let mut e = engine_with(CONFIG);
    run(&mut e, 0, 0);
    e.accept_inspection(tube(&e), finding(1, 10, Finding::CreepStrain { strain: 0.005 }), None);
    run(&mut e, 0, 20);
    let c = component(&e, "TUBE");
    let want = 0.005 + strain_rate(580.0, 180.0, 6.0) * 10.0;
    assert!(rel(c.creep_strain, want) < 1e-9, "{} vs {want}", c.creep_strain);
    // Life fraction is untouched: initial 0.2 + rate·20 h.
    assert!(rel(c.life_fraction, 0.2 + life_rate(580.0, 180.0, 6.0) * 20.0) < 1e-9);
}

/// The same finding entered after the ledger reached 20 h, with the
/// ledger's strain at 10 h as its reference (from the history): the
/// increment since the finding is kept, ε = 0.005 + ε̇·10 h.
#[test]
fn a_late_strain_finding_keeps_the_increment_since_its_date() {
    let mut e = engine_with(CONFIG);
    run(&mut e, 0, 20);
    let at_10 =
        Reference { life_fraction: 0.0, creep_strain: strain_rate(580.0, 180.0, 6.0) * 10.0, wear_depth_mm: 0.0 };
    let ev = e.accept_inspection(tube(&e), finding(1, 10, Finding::CreepStrain { strain: 0.005 }), Some(at_10));
    assert_eq!(ev.effective_ms, 20 * H, "late: effective at the ledger's instant");
    assert!(ev.applied);
    let want = 0.005 + strain_rate(580.0, 180.0, 6.0) * 10.0;
    assert!(rel(component(&e, "TUBE").creep_strain, want) < 1e-9);
}

/// Wall 5.0 mm measured at 10 h (6.0 mm as built): D(20 h) = 0.2 +
/// r(σ at 6 mm)·10 h + r(σ at 5 mm)·10 h; hoop stress follows from then.
#[test]
fn a_wall_finding_re_bases_the_wall_and_the_stress_from_its_date() {
    let mut e = engine_with(CONFIG);
    run(&mut e, 0, 0);
    e.accept_inspection(tube(&e), finding(1, 10, Finding::WallThickness { wall_mm: 5.0 }), None);
    run(&mut e, 0, 20);
    let c = component(&e, "TUBE");
    let want = 0.2 + life_rate(580.0, 180.0, 6.0) * 10.0 + life_rate(580.0, 180.0, 5.0) * 10.0;
    assert!(rel(c.life_fraction, want) < 1e-9, "{} vs {want}", c.life_fraction);
    let sigma = 18.0 * (50.8 - 5.0) / 10.0;
    assert!(rel(c.now.hoop_stress_mpa, sigma) < 1e-12);
}

/// Three walls 6.0, 5.8, 5.5 mm one year apart: the thinning rate is the
/// least-squares slope 0.25 mm/year (hand-worked in physics::inspection),
/// counted from the newest measurement: at 1000 h after it the wall is
/// 5.5 − 0.25·1000/8766 mm and σ = p·(Do − w)/(2w).
#[test]
fn walls_of_three_dates_re_fit_the_thinning_rate() {
    let y = 8766; // hours in 365.25 days
    let mut e = engine_with(CONFIG);
    let ci = tube(&e);
    run(&mut e, 0, 0);
    for (i, w) in [6.0, 5.8, 5.5].into_iter().enumerate() {
        e.accept_inspection(ci, finding(i as i64 + 1, (i as i64) * y, Finding::WallThickness { wall_mm: w }), None);
    }
    // Steady inputs, one sample per 2 h (inside the 11 h hold).
    let mut t = 0;
    while t <= (2 * y + 1000) * H {
        feed(&mut e, "TT", t, 580.0);
        feed(&mut e, "PT", t, 180.0);
        t += 2 * H;
    }
    let c = component(&e, "TUBE");
    let wall = c.inspection.wall.unwrap();
    assert!((wall.thinning_rate_mm_per_year - 0.25).abs() < 1e-12, "{wall:?}");
    assert_eq!(wall.at_ms, 2 * y * H);
    let w = 5.5 - 0.25 * 1000.0 / 8766.0;
    let sigma = 18.0 * (50.8 - w) / (2.0 * w);
    assert!(rel(c.now.hoop_stress_mpa, sigma) < 1e-9, "{} vs {sigma}", c.now.hoop_stress_mpa);
}

/// Replica class A (isolated cavities) bounds the life fraction to
/// [0.27, 0.46]; the ledger's 0.2 + r·10 h lies below: flagged, not
/// re-based unless asked; asked, D(20 h) = 0.27 + r·10 h.
#[test]
fn a_replica_class_bounds_the_life_fraction_and_re_bases_only_when_asked() {
    let r = life_rate(580.0, 180.0, 6.0);
    for rebase in [false, true] {
        let mut e = engine_with(CONFIG);
        run(&mut e, 0, 0);
        let class = ReplicaClass::Isolated;
        e.accept_inspection(tube(&e), finding(1, 10, Finding::Replica { class, rebase }), None);
        run(&mut e, 0, 20);
        let c = component(&e, "TUBE");
        assert!(0.2 + r * 10.0 < 0.27, "the case needs the ledger below the class");
        assert_eq!(c.inspection.replica_bounds, Some([0.27, 0.46]));
        assert!(c.inspection.replica_outside);
        let want = if rebase { 0.27 + r * 10.0 } else { 0.2 + r * 20.0 };
        assert!(rel(c.life_fraction, want) < 1e-9, "rebase {rebase}: {} vs {want}", c.life_fraction);
        // The disagreement is an alarm (an engineering alert) until the
        // engineer re-bases to the class.
        let plan = &e.plan().components[tube(&e)];
        let events = crate::alarm::AlarmBook::new().evaluate_component(plan, c, 20 * H);
        let replica = events.iter().find(|ev| ev.index == crate::alarm::AlarmIndex::ReplicaBounds);
        if rebase {
            assert!(replica.is_none(), "re-based: the ledger agrees with the class: {replica:?}");
        } else {
            let ev = replica.expect("the ledger outside the replica class bounds raises an alarm");
            assert_eq!(ev.state, crate::alarm::AlarmState::Alert, "an engineering alert");
        }
    }
}

/// Archard wear on SLIDE: depth rate = (K/H)·F·v/A·3600 mm/h with
/// K = 1e-4, H = 200 HV = 200·9.80665 MPa, F = 100 N, v = 10 mm/s,
/// A = 40 mm². Wear 0.05 mm measured at 10 h: depth(20 h) = 0.05 + rate·10 h.
#[test]
fn a_wear_finding_re_bases_wear_depth() {
    let mut e = engine_with(CONFIG);
    let ci = e.component_index("SLIDE").unwrap();
    feed(&mut e, "FORCE", 0, 100.0);
    feed(&mut e, "SPEED", 0, 10.0);
    e.accept_inspection(ci, finding(1, 10, Finding::WearDepth { depth_mm: 0.05 }), None);
    let mut t = 600_000;
    while t <= 20 * H {
        feed(&mut e, "FORCE", t, 100.0);
        feed(&mut e, "SPEED", t, 10.0);
        t += 600_000;
    }
    let rate = 1.0e-4 / (200.0 * 9.806_65) * 100.0 * 10.0 / 40.0 * 3600.0;
    let got = component(&e, "SLIDE").wear_depth_mm;
    assert!(rel(got, 0.05 + rate * 10.0) < 1e-9, "{got}");
}

/// `[component.initial] as_of` at 10 h of a history starting at 0 h: the
/// initial life fraction is where the ledger stands at 10 h, so
/// D(20 h) = 0.2 + r·10 h, not 0.2 + r·20 h (no double count).
#[test]
fn initial_values_as_of_a_date_inside_the_history_are_not_counted_twice() {
    let cfg = CONFIG.replace(
        "initial = { life_fraction = 0.2 }",
        "initial = { life_fraction = 0.2, as_of = \"1970-01-01T10:00:00Z (spring outage)\" }",
    );
    let mut e = engine_with(&cfg);
    run(&mut e, 0, 20);
    let got = component(&e, "TUBE").life_fraction;
    let want = 0.2 + life_rate(580.0, 180.0, 6.0) * 10.0;
    assert!(rel(got, want) < 1e-9, "{got} vs {want}");
    // Started after as_of: the initial values apply from the start.
    let mut e = engine_with(&cfg);
    run(&mut e, 12, 20);
    let got = component(&e, "TUBE").life_fraction;
    assert!(rel(got, 0.2 + life_rate(580.0, 180.0, 6.0) * 8.0) < 1e-9, "{got}");
}

/// A correction supersedes: wall 5.0 at 10 h corrected to 5.5 at 10 h
/// (entered at 15 h, applied then). From 15 h the stress is that of 5.5 mm.
#[test]
fn a_correction_supersedes_the_record_it_corrects() {
    let mut e = engine_with(CONFIG);
    let ci = tube(&e);
    run(&mut e, 0, 0);
    e.accept_inspection(ci, finding(1, 10, Finding::WallThickness { wall_mm: 5.0 }), None);
    run(&mut e, 0, 15);
    let mut corr = finding(2, 10, Finding::WallThickness { wall_mm: 5.5 });
    corr.supersedes = Some(1);
    let ev = e.accept_inspection(ci, corr, None);
    assert_eq!(ev.effective_ms, 15 * H);
    run(&mut e, 15, 20);
    let c = component(&e, "TUBE");
    let want = 0.2
        + life_rate(580.0, 180.0, 6.0) * 10.0
        + life_rate(580.0, 180.0, 5.0) * 5.0
        + life_rate(580.0, 180.0, 5.5) * 5.0;
    assert!(rel(c.life_fraction, want) < 1e-9, "{} vs {want}", c.life_fraction);
    assert_eq!(c.inspection.wall.unwrap().wall_mm, 5.5);
    assert_eq!(c.inspection.events.len(), 2, "nothing is deleted");
}

/// The live path and the replay path are one: an engine fed the samples
/// with the records offered as accepted (their stored effective instants
/// and references) ends bit-identical to the one that accepted them late.
#[test]
fn replaying_accepted_records_gives_the_live_ledger_bit_for_bit() {
    let mut live = engine_with(CONFIG);
    let ci = tube(&live);
    run(&mut live, 0, 12);
    let r = Reference { life_fraction: 0.21, creep_strain: 0.001, wear_depth_mm: 0.0 };
    let a = live.accept_inspection(ci, finding(1, 10, Finding::CreepStrain { strain: 0.004 }), Some(r));
    let b = live.accept_inspection(ci, finding(2, 11, Finding::WallThickness { wall_mm: 5.2 }), None);
    run(&mut live, 12, 30);
    let mut replay = engine_with(CONFIG);
    replay.offer_event(ci, serde_json::from_str(&serde_json::to_string(&a).unwrap()).unwrap());
    replay.offer_event(ci, serde_json::from_str(&serde_json::to_string(&b).unwrap()).unwrap());
    run(&mut replay, 0, 30);
    let (x, y) = (&live.components()[ci], &replay.components()[ci]);
    assert_eq!(serde_json::to_string(x).unwrap(), serde_json::to_string(y).unwrap());
}

/// Oxide on 2.25Cr-1Mo at a steady 540 °C: 0.30 mm in 50 000 h gives
/// T_ox = (log10(0.30/0.0254) + 7.25)/(0.00022·(20 + log10 50 000))/1.8 K
/// (the law inverted by hand); the measured mean is the mid-point of the
/// 540–550 °C class of the time-at-temperature table (545 °C); the
/// correction T_ox − 818.15 K is added to the tag from the finding on.
#[test]
fn an_oxide_finding_sets_a_temperature_correction() {
    let cfg = r#"
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
    let mut e = engine_with(cfg);
    let ci = 0;
    let mut t = 0;
    while t <= 20 * H {
        feed(&mut e, "TT", t, 540.0);
        feed(&mut e, "PT", t, 100.0);
        t += 600_000;
    }
    let ev =
        e.accept_inspection(ci, finding(1, 20, Finding::OxideThickness { oxide_mm: 0.30, service_h: 50_000.0 }), None);
    let t_ox = ((0.30f64 / 0.0254).log10() + 7.25) / (0.00022 * (20.0 + 50_000f64.log10())) / 1.8;
    let corr = t_ox - (545.0 + 273.15);
    assert!((ev.effect.oxide_temperature_k.unwrap() - t_ox).abs() < 1e-9);
    assert!((ev.effect.temperature_correction_k.unwrap() - corr).abs() < 1e-9, "{:?}", ev.effect);
    feed(&mut e, "TT", 21 * H, 540.0);
    feed(&mut e, "PT", 21 * H, 100.0);
    let c = &e.components()[ci];
    assert!((c.now.metal_temperature_k - (540.0 + 273.15 + corr)).abs() < 1e-9);
    assert!((c.inspection.temperature_correction_k - corr).abs() < 1e-12);
}
