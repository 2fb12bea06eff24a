//! The ledger's series, pure: which `component_state` points, trend points
//! and threshold lines an engine step produces, at `series_interval_s`
//! spacing of event time whatever the commit pattern, exactly as `replay`
//! spaces them. No I/O and no clock: event times come from the engine.
//!
//! [`SeriesClock::collect`] is called after every step of the engine (each
//! sample, each release of the reorder window, each clock advance); what it
//! makes goes into the [`Pending`] rows of the next commit.

use super::rows::Pending;
use super::wear_inputs;
use crate::engine::Engine;
use crate::report::{capped, component_point, threshold_points, CREEP_STRAIN_CEILING, DISPLAY_CEILING};
use crate::store::TrendPoint;

/// Threshold lines go out with a component's series at most this often in
/// event time (1 h), besides start-up and reloads: they change only with
/// the configuration.
pub const THRESHOLD_REFRESH_MS: i64 = 3_600_000;

/// Per component: when the next series point and the next threshold lines
/// are due, in event time.
#[derive(Debug, Clone)]
pub struct SeriesClock {
    next_series_ms: Vec<i64>,
    next_threshold_ms: Vec<i64>,
    /// Scratch list of the components the engine advanced.
    touched: Vec<u32>,
}

impl SeriesClock {
    /// Every one of `components` due at once.
    pub fn new(components: usize) -> SeriesClock {
        SeriesClock {
            next_series_ms: vec![i64::MIN; components],
            next_threshold_ms: vec![i64::MIN; components],
            touched: vec![],
        }
    }

    /// The points the engine's last steps made due: for each component it
    /// advanced past its next due time (and whose conditions are known),
    /// one `component_state` line and one trend point at the component's
    /// integration frontier, and its threshold lines if an hour of event
    /// time has passed since the last. `attention` gives a component's
    /// attention score by index and name, if one is known (the live
    /// service's latest snapshot; none in tests and replay).
    pub fn collect(
        &mut self,
        engine: &mut Engine,
        interval_s: i64,
        attention: impl Fn(usize, &str) -> Option<f64>,
        pending: &mut Pending,
    ) {
        let mut touched = std::mem::take(&mut self.touched);
        engine.drain_touched(&mut touched);
        let interval = interval_s.max(1).saturating_mul(1000);
        let plant = &engine.plan().plant;
        for &ci in &touched {
            let ci = ci as usize;
            let plan = &engine.plan().components[ci];
            let st = &engine.components()[ci];
            let Some(t) = st.integrated_to_ms else { continue };
            // No point before the conditions are known (only the first
            // sample seen): the rule replay keeps too.
            if t < self.next_series_ms[ci] || !crate::report::conditions_known(plan, st) {
                continue;
            }
            let mut point = component_point(plant, plan, st, t);
            if let Some(a) = attention(ci, &plan.name) {
                point = point.float("attention_score", a);
            }
            if let Some(l) = point.to_line() {
                pending.lines.push(l);
                pending.series_points += 1;
            }
            pending.trend_points.push((
                plan.name.clone(),
                TrendPoint {
                    t,
                    metal_temperature_c: crate::physics::units::kelvin_to_celsius(st.now.metal_temperature_k),
                    pressure_mpa: st.now.pressure_mpa,
                    hoop_stress_mpa: st.now.hoop_stress_mpa,
                    // As reports show them: capped past exhaustion.
                    creep_life_fraction: capped(st.life_fraction, DISPLAY_CEILING),
                    creep_strain: capped(st.creep_strain, CREEP_STRAIN_CEILING),
                    wear_index: capped(st.wear_index(plan), DISPLAY_CEILING),
                    fatigue_stress_mpa: st
                        .fatigue
                        .as_ref()
                        .filter(|_| plan.fatigue.is_some())
                        .map_or(f64::NAN, |f| f.stress_mpa),
                    fatigue_usage: crate::engine::fatigue::figures(plan, st).map_or(f64::NAN, |f| f.fatigue_usage),
                    wear: wear_inputs::at(plan, engine.tags(), t),
                },
            ));
            if t >= self.next_threshold_ms[ci] {
                pending.lines.extend(threshold_points(plant, plan, t).into_iter().filter_map(|p| p.to_line()));
                self.next_threshold_ms[ci] = (t.div_euclid(THRESHOLD_REFRESH_MS) + 1) * THRESHOLD_REFRESH_MS;
            }
            self.next_series_ms[ci] = (t.div_euclid(interval) + 1) * interval;
        }
        self.touched = touched;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::Sample;

    /// Feeds one scan (both tags) a minute for `minutes` from t0, collecting
    /// after every scan as the ledger thread does, and returns the component
    /// points' times and the number of threshold lines.
    fn point_times(minutes: i64) -> (Vec<i64>, usize) {
        // The engine tests' plant: TUBE (tags TT and PT) and a wear contact
        // whose tags never report, so only TUBE is advanced.
        let mut e = crate::engine::tests::engine();
        let mut clock = SeriesClock::new(e.plan().components.len());
        let mut pending = Pending::default();
        let t0 = 1_790_000_000_000_i64;
        for m in 0..minutes {
            let t = t0 + m * 60_000;
            for (tag, v) in [("TT", 540.0), ("PT", 170.0 + (m % 7) as f64)] {
                let tag = e.tag_id(tag).unwrap();
                e.ingest(&Sample { tag, time_ms: t, value: v, quality: crate::engine::Quality::Good }).unwrap();
            }
            clock.collect(&mut e, 600, |_, _| None, &mut pending);
        }
        let thresholds = pending.lines.iter().filter(|l| l.starts_with("alarm_threshold,")).count();
        (pending.trend_points.iter().filter(|(c, _)| c == "TUBE").map(|(_, p)| p.t).collect(), thresholds)
    }

    /// Issue 10, defect 8: points follow event time, not commits. The
    /// ledger thread collects after every engine step, whatever batch the
    /// step's message arrived in, so 84 one-minute scans give exactly one
    /// point in every 10-minute interval of event time from the first
    /// point on (`series_interval_s = 600`): none skipped, never two.
    #[test]
    fn one_point_per_interval_of_event_time_none_skipped() {
        let (times, thresholds) = point_times(84);
        let interval = 600_000;
        let first = times[0].div_euclid(interval);
        let last = times[times.len() - 1].div_euclid(interval);
        assert_eq!(times.len() as i64, last - first + 1, "{times:?}");
        for w in times.windows(2) {
            assert_eq!(w[1].div_euclid(interval), w[0].div_euclid(interval) + 1, "{times:?}");
        }
        // The last scan (minute 83) lies in the last point's interval.
        let t0 = 1_790_000_000_000_i64;
        assert_eq!(last, (t0 + 83 * 60_000).div_euclid(interval));
        assert!(thresholds > 0, "threshold lines at the first point");
    }

    /// Threshold lines go out at the first point and then at most once an
    /// hour of event time, not with every series point.
    #[test]
    fn thresholds_are_refreshed_hourly_not_with_every_point() {
        let (points, thresholds_3h) = point_times(180);
        let (_, thresholds_1m) = point_times(2);
        assert!(thresholds_1m > 0);
        let per_refresh = thresholds_1m;
        // Three hours of points (about 18) but threshold lines for at most
        // four refreshes (the start and each hour turned).
        assert!(points.len() >= 17, "{}", points.len());
        assert!(thresholds_3h <= 4 * per_refresh, "{thresholds_3h} threshold lines for {per_refresh} per refresh");
    }
}
