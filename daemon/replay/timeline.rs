//! When each alarm level of a component was first crossed, in event time:
//! the timeline `replay` prints beside the end state.
//!
//! The indices and levels are the component's own (`[component.thresholds]`
//! or the defaults), judged the way the alarm book judges them
//! (`alarm::AlarmBook::evaluate_component`): creep life fraction, creep
//! strain (with Norton constants), wear index, metal temperature over
//! design (monitored pieces only) and projected hours to the critical
//! life fraction (lower is worse). The damage-rate alarm has plant-wide
//! levels, not a component's, and is left out.
//!
//! Life fraction, strain and wear grow monotonically between two observed
//! instants, and at constant conditions they grow linearly, so their
//! crossing time is interpolated linearly within the step (`interpolated`);
//! the others are judged at the integrated instants (`step`), projected
//! hours at most every ten minutes of event time (their levels are
//! hundreds to thousands of hours). A level
//! already reached by the initial values (`[component.initial]`, an
//! inspection) is listed at the first instant with basis `initial`.
//! Only the first crossing is kept: a timeline, not an alarm journal.
//!
//! Pure: it reads plans and states and keeps its own small record.

use crate::alarm::AlarmIndex;
use crate::engine::component::projection;
use crate::engine::plan::{ComponentPlan, Levels};
use crate::engine::ComponentState;
use crate::physics::remaining::hours_to_threshold;
use serde::Serialize;

/// How the crossing time was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CrossingBasis {
    /// Linear interpolation between two observed instants.
    Interpolated,
    /// The first integrated instant at which the level was reached.
    Step,
    /// Already reached by the initial values, before the history.
    Initial,
}

/// One level's first crossing.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Crossing {
    /// Alarm index name (`creep_life_fraction`, …), as in alarm topics.
    pub index: &'static str,
    pub severity: &'static str,
    /// The level, in the index's unit (fractions, K, h).
    pub threshold: f64,
    /// Event time, ms since the epoch.
    pub time_ms: i64,
    pub basis: CrossingBasis,
}

const N: usize = 5;

/// Spacing of event time at which projected hours are judged.
pub const HOURS_EVERY_MS: i64 = 600_000;

/// Spacing of observations in event time (a replay's rows touch a part at
/// every sample of every tag it reads; the crossing is interpolated).
pub const OBSERVE_EVERY_MS: i64 = 600_000;
const INDICES: [AlarmIndex; N] = [
    AlarmIndex::CreepLifeFraction,
    AlarmIndex::CreepStrain,
    AlarmIndex::WearIndex,
    AlarmIndex::MetalTemperatureOverDesign,
    AlarmIndex::HoursToCritical,
];

#[derive(Debug, Clone, Default)]
struct Track {
    /// Values and instant of the last observation.
    last: Option<(i64, [f64; N])>,
    /// Which (index, severity) were crossed already.
    done: [[bool; 3]; N],
    /// When the projected hours were last worked out (at most once per
    /// [`HOURS_EVERY_MS`] of event time: the projection costs a rupture
    /// life at design conditions).
    hours_at_ms: Option<i64>,
    crossings: Vec<Crossing>,
}

/// First crossings of every component of a plan.
#[derive(Debug, Clone, Default)]
pub struct Timeline {
    tracks: Vec<Track>,
}

/// The levels of each timeline index.
fn levels(plan: &ComponentPlan) -> [Levels; N] {
    let th = &plan.thresholds;
    [th.life_fraction, th.creep_strain, th.wear_index, th.over_design_temperature_k, th.hours_to_critical]
}

/// The present value of each timeline index that is `wanted`; NaN where
/// the index does not apply, has no value now or is not wanted (every
/// level crossed already: the projection is not worked out for nothing).
fn values(plan: &ComponentPlan, st: &ComponentState, wanted: [bool; N]) -> [f64; N] {
    let th = &plan.thresholds;
    let has_creep = plan.metal_temperature.is_some();
    let nan = f64::NAN;
    let mut v = [nan; N];
    if wanted[0] && has_creep {
        v[0] = st.life_fraction;
    }
    if wanted[1] && has_creep && plan.material.norton.is_some() {
        v[1] = st.creep_strain;
    }
    if wanted[2] && plan.wear.is_some() {
        v[2] = st.wear_index(plan);
    }
    if wanted[3] && has_creep && st.integrated_to_ms.is_some() && !st.now.unmonitored {
        if let Some(d) = plan.design_temperature_k {
            v[3] = st.now.metal_temperature_k - d;
        }
    }
    if wanted[4] && has_creep {
        if let Some(critical) = th.life_fraction.top() {
            v[4] = hours_to_threshold(st.life_fraction, critical, projection(plan, st).life_fraction_rate_per_h)
                .unwrap_or(f64::INFINITY);
        }
    }
    v
}

impl Timeline {
    /// An empty timeline for `components` parts.
    pub fn new(components: usize) -> Timeline {
        Timeline { tracks: vec![Track::default(); components] }
    }

    /// Look at component `ci` after the engine advanced it.
    ///
    /// Observations are at most one per [`OBSERVE_EVERY_MS`] of event time
    /// per component (crossings are interpolated between them, exact for
    /// steady conditions), unless `force` (the end of the input).
    pub fn observe(&mut self, ci: usize, plan: &ComponentPlan, st: &ComponentState, force: bool) {
        let Some(t) = st.integrated_to_ms else { return };
        let Some(track) = self.tracks.get_mut(ci) else { return };
        if !force && track.last.is_some_and(|(t0, _)| t - t0 < OBSERVE_EVERY_MS) {
            return;
        }
        let levels = levels(plan);
        let mut wanted = [false; N];
        for (k, l) in levels.iter().enumerate() {
            let sets = [l.advisory, l.warning, l.critical];
            wanted[k] = (0..3).any(|s| sets[s].is_some() && !track.done[k][s]);
        }
        if wanted[4] {
            if track.hours_at_ms.is_some_and(|h| t - h < HOURS_EVERY_MS) {
                wanted[4] = false;
            } else {
                track.hours_at_ms = Some(t);
            }
        }
        if !wanted.iter().any(|w| *w) {
            return;
        }
        let current = values(plan, st, wanted);
        for (k, (levels, v)) in levels.iter().zip(current.iter()).enumerate() {
            if v.is_nan() {
                continue;
            }
            let index = INDICES[k];
            let lower_is_worse = index == AlarmIndex::HoursToCritical;
            // Ledger sums only grow between observations; conditions and
            // projections may move either way.
            let monotonic = !lower_is_worse && index != AlarmIndex::MetalTemperatureOverDesign;
            for (s, (sev, level)) in
                [("advisory", levels.advisory), ("warning", levels.warning), ("critical", levels.critical)]
                    .into_iter()
                    .enumerate()
            {
                let Some(level) = level else { continue };
                if track.done[k][s] {
                    continue;
                }
                let reached = if lower_is_worse { *v <= level } else { *v >= level };
                if !reached {
                    continue;
                }
                let prev = track.last.map(|(t0, vals)| (t0, vals[k])).filter(|(_, v0)| v0.is_finite());
                let (time_ms, basis) = match prev {
                    // Nothing integrated yet: the initial values reach it.
                    None if monotonic && st.integrated_h == 0.0 => (t, CrossingBasis::Initial),
                    None => (t, CrossingBasis::Step),
                    Some((t0, v0)) if monotonic => {
                        if v0 >= level {
                            // Reached before the last observation (a jump
                            // there): no earlier instant is known.
                            (t0, CrossingBasis::Step)
                        } else if *v > v0 && t > t0 {
                            let f = (level - v0) / (*v - v0);
                            (t0 + (f * (t - t0) as f64).round() as i64, CrossingBasis::Interpolated)
                        } else {
                            (t, CrossingBasis::Step)
                        }
                    }
                    Some(_) => (t, CrossingBasis::Step),
                };
                track.done[k][s] = true;
                track.crossings.push(Crossing { index: index.name(), severity: sev, threshold: level, time_ms, basis });
            }
        }
        track.last = Some((t, current));
    }

    /// The crossings of component `ci`, earliest first.
    pub fn crossings(&self, ci: usize) -> Vec<Crossing> {
        let mut v = self.tracks.get(ci).map(|t| t.crossings.clone()).unwrap_or_default();
        v.sort_by_key(|c| c.time_ms);
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn severity_order_matches_levels_iter() {
        // The severity names above are those of Levels::iter, in order.
        let l = Levels { advisory: Some(1.0), warning: Some(2.0), critical: Some(3.0) };
        let names: Vec<&str> = l.iter().map(|(n, _)| n).collect();
        assert_eq!(names, ["advisory", "warning", "critical"]);
    }
}
