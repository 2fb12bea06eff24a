//! The service side of the attention ranking (`alarm::attention`): gathers
//! each part's inputs from the published snapshot (its report, the alarms
//! concerning it, the data age of its inputs) and writes the score and the
//! rank into the snapshot's component reports. `/api/components` lists the
//! components in that order; the live `component_state` points carry the
//! score.

use super::snapshot::Snapshot;
use crate::alarm::attention::{self, AttentionInput};
use crate::alarm::ComponentAlarmSummary;
use crate::engine::plan::Levels;
use crate::report::ComponentReport;
use std::collections::HashMap;

/// The ranking's inputs for one part.
pub fn input_of(
    c: &ComponentReport,
    alarms: Option<&ComponentAlarmSummary>,
    data_age_s: Option<f64>,
) -> AttentionInput {
    let (action, severity, sensor_faults) = attention::from_alarms(alarms.into_iter().flat_map(|a| &a.alarms));
    let tracked =
        |key: &str| c.hours_to_threshold.keys().any(|k| k.strip_prefix(key).is_some_and(|r| r.starts_with('.')));
    let th = &c.thresholds;
    let mut indices: Vec<(f64, Levels)> = vec![];
    for (key, value, levels) in [
        ("life_fraction", c.creep_life_fraction, &th.life_fraction),
        ("creep_strain", c.creep_strain, &th.creep_strain),
        ("wear_index", c.wear_index, &th.wear_index),
    ] {
        if tracked(key) {
            indices.push((value, *levels));
        }
    }
    if let Some(f) = &c.fatigue {
        let g = &f.figures;
        for (value, hours) in [(g.fatigue_usage, &g.hours_to_usage), (g.creep_fatigue_index, &g.hours_to_combined)] {
            let level = |sev: &str| hours.iter().find(|(s, _, _)| *s == sev).map(|(_, l, _)| *l);
            indices.push((
                value,
                Levels { advisory: level("advisory"), warning: level("warning"), critical: level("critical") },
            ));
        }
    }
    AttentionInput {
        action,
        severity,
        next_level_fraction: attention::next_level_fraction(indices.iter().map(|(v, l)| (*v, l))),
        sensor_faults,
        unmonitored_h: c.unmonitored_h,
        data_age_s,
    }
}

/// Score and rank (1 = needs attention first) every component of `snap`.
/// A part whose input never reported counts as data of unbounded age; a
/// part on the plant clock has no data age.
pub fn annotate(snap: &mut Snapshot) {
    let alarms: HashMap<&str, &ComponentAlarmSummary> = snap.alarms.iter().map(|a| (a.component.as_str(), a)).collect();
    let ages: HashMap<&str, Option<f64>> = snap
        .freshness
        .components
        .iter()
        .map(|f| {
            let age = if f.on_plant_clock { None } else { Some(f.data_age_s.unwrap_or(f64::INFINITY)) };
            (f.component.as_str(), age)
        })
        .collect();
    let inputs: Vec<(&str, AttentionInput)> = snap
        .components
        .iter()
        .map(|c| {
            let name = c.component.as_str();
            (name, input_of(c, alarms.get(name).copied(), ages.get(name).copied().flatten()))
        })
        .collect();
    let order = attention::rank(&inputs);
    let scores: Vec<f64> = inputs.iter().map(|(_, a)| attention::attention_score(a)).collect();
    for (rank, i) in order.into_iter().enumerate() {
        let c = &mut snap.components[i];
        c.attention_score = Some(scores[i]);
        c.rank = Some(rank + 1);
    }
}

/// The snapshot as `/api/components` answers it: components in ranking
/// order (the snapshot itself keeps the configuration's order).
pub fn ranked(snap: &Snapshot) -> Snapshot {
    let mut s = snap.clone();
    if s.components.iter().any(|c| c.rank.is_none()) {
        annotate(&mut s);
    }
    s.components.sort_by_key(|c| c.rank.unwrap_or(usize::MAX));
    s
}
