//! Intake rules of the engine: time plausibility, the reorder window and
//! parts that advance with the plant clock. References are closed forms
//! computed here, never the engine's own output under another name.

use super::tests::{engine, TEST_CONFIG};
use super::*;
use crate::settings::validate::plan_settings;
use proptest::prelude::*;

/// 2026-10-01T00:00:00Z in ms (checked against chrono in `replay`'s tests).
const T0: i64 = 1_790_812_800_000;
/// A wall clock a day after `T0`.
const NOW: i64 = T0 + 86_400_000;

fn engine_with(engine_toml: &str) -> Engine {
    let text = TEST_CONFIG.replace("[engine]\nmax_hold_s = 900", &format!("[engine]\nmax_hold_s = 900\n{engine_toml}"));
    let s = toml::from_str(&text).unwrap();
    Engine::new(plan_settings("test", s).unwrap().plan)
}

fn sample(e: &Engine, tag: &str, t_ms: i64, v: f64) -> Sample {
    Sample { tag: e.tag_id(tag).unwrap(), time_ms: t_ms, value: v, quality: Quality::Good }
}

fn offer(e: &mut Engine, tag: &str, t_ms: i64, v: f64) -> Result<(), Rejection> {
    let s = sample(e, tag, t_ms, v);
    e.offer(&s, NOW)
}

/// Temperature and pressure of the test tube at minute `i` (a slow wave:
/// pieces are ramps, so the order of integration matters if anything does).
fn tt(i: i64) -> f64 {
    545.0 + 20.0 * (i as f64 / 37.0).sin()
}
fn pt(i: i64) -> f64 {
    175.0 + 8.0 * (i as f64 / 53.0).cos()
}

#[test]
fn a_sample_from_the_future_or_the_distant_past_moves_nothing() {
    // The reproduction: one sample stamped decades ahead (a gateway clock,
    // or epoch milliseconds read as seconds) used to be integrated to that
    // instant and to reject every later good sample as late.
    let mut e = engine_with("");
    for i in 0..=60 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
        offer(&mut e, "PT", T0 + i * 60_000, 180.0).unwrap();
    }
    let before = e.export_state();
    let year_2062 = T0 + 36 * 365 * 86_400_000;
    assert_eq!(offer(&mut e, "TT", year_2062, 560.0), Err(Rejection::ImplausibleTime));
    // Just past the default 300 s margin ahead of the wall clock.
    assert_eq!(offer(&mut e, "TT", NOW + 300_001, 560.0), Err(Rejection::ImplausibleTime));
    // 1970 (a clock reset), before the default earliest time 2000-01-01.
    assert_eq!(offer(&mut e, "TT", 5_000, 560.0), Err(Rejection::ImplausibleTime));
    let after = e.export_state();
    assert_eq!(before.tags, after.tags, "no cursor moved");
    assert_eq!(before.components, after.components, "no ledger moved");
    assert_eq!(before.held, after.held, "the window did not move");
    assert_eq!(e.frontier_ms(), Some(T0 + 3_600_000), "the frontier did not move");
    assert_eq!(e.counters().implausible_time, 3);
    // Later good samples are still taken.
    offer(&mut e, "TT", T0 + 61 * 60_000, 560.0).unwrap();
    offer(&mut e, "PT", T0 + 61 * 60_000, 180.0).unwrap();
    // Inside the margin is accepted.
    offer(&mut e, "TT", NOW + 299_000, 560.0).unwrap();
}

#[test]
fn the_plausibility_bounds_are_configurable() {
    let mut e = engine_with("future_margin_s = 0\nearliest_plausible = \"2026-10-01T00:00:00Z\"");
    assert_eq!(offer(&mut e, "TT", T0 - 1, 560.0), Err(Rejection::ImplausibleTime));
    offer(&mut e, "TT", T0, 560.0).unwrap();
    assert_eq!(offer(&mut e, "TT", NOW + 1, 560.0), Err(Rejection::ImplausibleTime));
    offer(&mut e, "TT", NOW, 560.0).unwrap();
}

/// Offer every (tag, minute) of `order` and flush; return the tube's state.
fn run(e: &mut Engine, order: &[(usize, i64)]) -> ComponentState {
    for &(tag, i) in order {
        let (name, v) = if tag == 0 { ("TT", tt(i)) } else { ("PT", pt(i)) };
        offer(e, name, T0 + i * 60_000, v).unwrap();
    }
    e.flush();
    e.components()[0].clone()
}

fn ordered(n: i64) -> Vec<(usize, i64)> {
    (0..n).flat_map(|i| [(0, i), (1, i)]).collect()
}

#[test]
fn data_reordered_within_the_window_gives_the_ordered_ledger() {
    // A gateway resends its buffer: pressure arrives four minutes behind
    // temperature, inside a 300 s window.
    let n = 600;
    let mut reordered = vec![];
    for i in 0..n {
        reordered.push((0usize, i));
        if i >= 4 {
            reordered.push((1usize, i - 4));
        }
    }
    for i in n - 4..n {
        reordered.push((1, i));
    }
    let a = run(&mut engine_with("reorder_window_s = 300"), &ordered(n));
    let b = run(&mut engine_with("reorder_window_s = 300"), &reordered);
    assert_eq!(a, b, "reordered within the window must give the ordered ledger, bit for bit");
    assert_eq!(b.unmonitored_h, 0.0);
    // The window changes nothing for ordered data: the direct path gives
    // the same ledger.
    let mut direct = engine();
    for (tag, i) in ordered(n) {
        let (name, v) = if tag == 0 { ("TT", tt(i)) } else { ("PT", pt(i)) };
        let s = sample(&direct, name, T0 + i * 60_000, v);
        direct.ingest(&s).unwrap();
    }
    assert_eq!(direct.components()[0], a);
}

#[test]
fn beyond_the_window_late_samples_are_counted_not_integrated() {
    let mut e = engine_with("reorder_window_s = 120");
    for i in 0..=30 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
        offer(&mut e, "PT", T0 + i * 60_000, 180.0).unwrap();
    }
    // Minute 10 of temperature again: released long ago, so late.
    assert_eq!(offer(&mut e, "TT", T0 + 10 * 60_000 + 1, 700.0), Err(Rejection::Late));
    // Minute 30 again, still held: a duplicate.
    assert_eq!(offer(&mut e, "TT", T0 + 30 * 60_000, 700.0), Err(Rejection::Duplicate));
    assert_eq!(e.counters().late, 1);
    assert_eq!(e.counters().duplicate, 1);
}

#[test]
fn a_redelivered_old_sample_is_late_whatever_its_value() {
    // Issue 11: range screening ran before the late check, so a broker
    // redelivering an old out-of-range or bad-quality sample was counted
    // (and alarmed) as a sensor fault again. A sample at or before the
    // tag's cursor is late or a duplicate first of all: it says nothing
    // new about the sensor.
    let mut e = engine_with("reorder_window_s = 0");
    for i in 0..=10 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
    }
    // 2000 degC is outside TT's valid range [-50, 900].
    assert_eq!(offer(&mut e, "TT", T0 + 5 * 60_000 + 1, 2000.0), Err(Rejection::Late));
    assert_eq!(offer(&mut e, "TT", T0 + 10 * 60_000, 2000.0), Err(Rejection::Duplicate));
    assert_eq!(offer(&mut e, "TT", T0 + 3 * 60_000, f64::NAN), Err(Rejection::Late));
    let bad = Sample { quality: Quality::Bad, ..sample(&e, "TT", T0 + 4 * 60_000, 560.0) };
    assert_eq!(e.offer(&bad, NOW), Err(Rejection::Late));
    assert_eq!(e.ingest(&Sample { value: 2000.0, ..sample(&e, "TT", T0, 0.0) }), Err(Rejection::Late));
    assert_eq!((e.counters().out_of_range, e.counters().not_finite, e.counters().bad_quality), (0, 0, 0));
    // A new out-of-range sample is still out of range.
    assert_eq!(offer(&mut e, "TT", T0 + 11 * 60_000, 2000.0), Err(Rejection::OutOfRange));
    // A clock reset to 1970 is still an implausible time, not a late sample.
    assert_eq!(offer(&mut e, "TT", 5_000, 560.0), Err(Rejection::ImplausibleTime));
}

#[test]
fn held_samples_survive_export_and_import() {
    // What the ledger store does across a crash: the window is state.
    let n = 300;
    let order = ordered(n);
    let mut a = engine_with("reorder_window_s = 300");
    let whole = run(&mut a, &order);
    let mut b = engine_with("reorder_window_s = 300");
    for &(tag, i) in &order[..301] {
        let (name, v) = if tag == 0 { ("TT", tt(i)) } else { ("PT", pt(i)) };
        offer(&mut b, name, T0 + i * 60_000, v).unwrap();
    }
    let state = b.export_state();
    assert!(!state.held.is_empty(), "the window holds samples");
    let json = serde_json::to_string(&state).unwrap();
    let mut c = engine_with("reorder_window_s = 300");
    c.import_state(serde_json::from_str(&json).unwrap());
    assert_eq!(run(&mut c, &order[301..]), whole);
}

#[test]
fn without_tracking_a_replay_keeps_no_list_of_window_changes() {
    let mut e = engine_with("reorder_window_s = 120");
    for i in 0..=10 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
    }
    assert_eq!(e.take_held_changes(), HeldChanges::default());
    assert_eq!(e.held_len(), 2);
}

#[test]
fn a_feed_that_stops_is_released_after_a_window_of_wall_time() {
    let mut e = engine_with("reorder_window_s = 120");
    for i in 0..=10 {
        let s = sample(&e, "TT", T0 + i * 60_000, 560.0);
        e.offer(&s, NOW).unwrap();
        let s = sample(&e, "PT", T0 + i * 60_000, 180.0);
        e.offer(&s, NOW).unwrap();
    }
    assert!(e.held_len() > 0);
    assert_eq!(e.release_due(NOW + 119_999), 0, "not yet a window of wall time");
    assert!(e.release_due(NOW + 120_000) > 0);
    assert_eq!(e.held_len(), 0);
    assert_eq!(e.components()[0].integrated_to_ms, Some(T0 + 600_000));
}

#[test]
fn the_store_sees_each_held_sample_enter_and_leave() {
    let mut e = engine_with("reorder_window_s = 120");
    e.track_held_changes(true);
    for i in 0..=10 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
    }
    let c = e.take_held_changes();
    // Held and released between two calls: never reaches the store.
    assert_eq!(c.added.len(), 2, "minutes 9 and 10 are less than a window behind minute 10");
    assert!(c.released.is_empty());
    offer(&mut e, "TT", T0 + 11 * 60_000, 560.0).unwrap();
    let c = e.take_held_changes();
    assert_eq!(c.added.len(), 1);
    assert_eq!(c.released.len(), 1);
}

/// A plan with a fretting contact whose inputs are all constants (a
/// vibration survey) beside the test tube.
const SURVEYED: &str = r#"
[[component]]
name = "SURVEYED"
unit = "U1"
kind = "wear_contact"
material = "TESTSTEEL"
[component.wear]
model = "fretting"
normal_load = { value = 100, unit = "N" }
slip_amplitude = { value = 50, unit = "um" }
frequency = { value = 20, unit = "Hz" }
wear_coefficient = 1.0e-8
contact_area_mm2 = 40.0
allowable_depth = { value = 1.0, unit = "mm" }
"#;

#[test]
fn a_part_with_only_constant_inputs_advances_with_the_plant_clock() {
    let s = toml::from_str(&format!("{TEST_CONFIG}{SURVEYED}")).unwrap();
    let mut e = Engine::new(plan_settings("test", s).unwrap().plan);
    let ci = e.plan().components.iter().position(|c| c.name == "SURVEYED").unwrap();
    assert_eq!(e.clockless(), &[ci as u32]);
    for i in 0..=600 {
        offer(&mut e, "TT", T0 + i * 60_000, 560.0).unwrap();
        offer(&mut e, "PT", T0 + i * 60_000, 180.0).unwrap();
    }
    e.flush();
    // Closed form (fretting work-rate model): sliding speed 4·δ·f =
    // 4 · 0.05 mm · 20 Hz = 4 mm/s; depth rate = K·F·v/A =
    // 1e-8 · 100 · 4 / 40 mm/s; over the 10 h the plant's data cover:
    let c = &e.components()[ci];
    let want = 1e-8 * 100.0 * 4.0 / 40.0 * 36_000.0;
    assert!((c.integrated_h - 10.0).abs() < 1e-12, "{}", c.integrated_h);
    assert!((c.wear_depth_mm / want - 1.0).abs() < 1e-12, "{} {want}", c.wear_depth_mm);
    // The service moves it on with the wall clock, never backwards.
    e.advance_clock(T0 + 20 * 3_600_000);
    e.advance_clock(T0);
    let c = &e.components()[ci];
    assert!((c.integrated_h - 20.0).abs() < 1e-12);
    assert!((c.wear_depth_mm / (2.0 * want) - 1.0).abs() < 1e-12);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(32))]
    /// Any shuffle that keeps each sample within the window of its place
    /// gives the ordered ledger.
    #[test]
    fn any_reordering_within_the_window_is_harmless(keys in proptest::collection::vec(0i64..4, 240)) {
        // Delay each (tag, minute) by 0–3 minutes of arrival (window 5 min).
        let n = 120;
        let mut order: Vec<(i64, usize, i64)> = vec![];
        for i in 0..n {
            for tag in 0..2usize {
                let k = keys[(i as usize) * 2 + tag];
                order.push((i + k, tag, i));
            }
        }
        order.sort_by_key(|(arrive, _, _)| *arrive);
        let order: Vec<(usize, i64)> = order.into_iter().map(|(_, t, i)| (t, i)).collect();
        let a = run(&mut engine_with("reorder_window_s = 300"), &ordered(n));
        let b = run(&mut engine_with("reorder_window_s = 300"), &order);
        prop_assert_eq!(a, b);
    }
}
