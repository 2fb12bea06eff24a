//! The time-series data model: every measurement lifeledger writes to the
//! database (InfluxDB v2 line protocol), with its tags and fields, in one
//! place. The point builders (`report::component_point`,
//! `report::threshold_points`, `alarm::AlarmEvent::to_point`, the ledger's
//! health point, `recovery::resend`) write these names; README's "Data
//! model" table and the dashboards are checked against this module by
//! tests (`series_model::tests`, tests/dashboards.rs).
//!
//! Pure vocabulary: names only, no I/O.

/// One measurement as the product writes it.
#[derive(Debug, Clone, Copy)]
pub struct Measurement {
    pub name: &'static str,
    pub tags: &'static [&'static str],
    /// Fields every writer may give (each only when it applies: fatigue
    /// fields on parts with fatigue, and so on).
    pub fields: &'static [&'static str],
    /// Fields only the live service writes (replay, backfill and resend
    /// have no alarm state to give them).
    pub live_only: &'static [&'static str],
    /// Field families named by a pattern: `<index>_level`, `rejected_<reason>`.
    pub patterns: &'static [&'static str],
}

/// Alarm indices with levels a `component_state` point reports against
/// (`<index>_level`); the same indices as `alarm_threshold` points.
pub const LEVEL_INDICES: [&str; 5] =
    ["creep_life_fraction", "creep_strain", "wear_index", "fatigue_usage", "creep_fatigue_index"];

/// Per-component state at a fixed spacing of event time.
pub const COMPONENT_STATE: Measurement = Measurement {
    name: "component_state",
    tags: &["plant", "unit", "component", "material"],
    // In the column order of `replay --format series-csv` (which takes its
    // columns from here).
    fields: &[
        "metal_temperature_k",
        "pressure_mpa",
        "hoop_stress_mpa",
        "creep_life_fraction",
        "damage_rate_per_h",
        "creep_rate_per_h",
        "creep_strain",
        "hours_in_creep_range",
        "fatigue_stress_mpa",
        "fatigue_thermal_stress_mpa",
        "fatigue_usage",
        "creep_fatigue_index",
        "fatigue_cycles",
        "fatigue_cycles_last_day",
        "fatigue_cycles_last_month",
        "wear_depth_mm",
        "wear_index",
        // The part's own level reached per index (report::levels).
        "creep_life_fraction_level",
        "creep_strain_level",
        "wear_index_level",
        "fatigue_usage_level",
        "creep_fatigue_index_level",
        "exhausted",
        "remaining_life_h",
        "unmonitored_h",
    ],
    live_only: &["attention_score"],
    patterns: &["<index>_level"],
};

/// Each component's own alarm levels, one point per index and severity.
pub const ALARM_THRESHOLD: Measurement = Measurement {
    name: "alarm_threshold",
    tags: &["plant", "unit", "component", "material", "index", "severity"],
    fields: &["value"],
    live_only: &[],
    patterns: &[],
};

/// Alarm state transitions (ISA-18.2 states), as the alarm journal holds them.
pub const ALARM_EVENT: Measurement = Measurement {
    name: "alarm_event",
    tags: &["plant", "unit", "component", "index", "severity", "state", "class", "priority"],
    fields: &[
        "value",
        "threshold",
        "message",
        "transition",
        "seq",
        "consequence",
        "corrective_action",
        "time_to_respond_min",
        "affects",
    ],
    live_only: &[],
    patterns: &[],
};

/// The service's own health, from the live service only.
pub const SERVICE_HEALTH: Measurement = Measurement {
    name: "service_health",
    tags: &["plant"],
    fields: &["samples_accepted", "duplicates", "outbox_lines", "outbox_bytes", "commit_latency_ms", "mqtt_connected"],
    live_only: &[],
    patterns: &["rejected_<reason>"],
};

/// Every measurement.
pub const MEASUREMENTS: [Measurement; 4] = [COMPONENT_STATE, ALARM_THRESHOLD, ALARM_EVENT, SERVICE_HEALTH];

/// The measurement of a name.
pub fn measurement(name: &str) -> Option<&'static Measurement> {
    MEASUREMENTS.iter().find(|m| m.name == name)
}

impl Measurement {
    /// Whether `field` belongs to this measurement (patterns included:
    /// `rejected_` followed by a reason name).
    pub fn has_field(&self, field: &str) -> bool {
        self.fields.contains(&field)
            || self.live_only.contains(&field)
            || (self.patterns.contains(&"rejected_<reason>")
                && field.strip_prefix("rejected_").is_some_and(|r| !r.is_empty()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeSet;

    /// The backticked names in a piece of a Markdown table cell.
    fn ticked(cell: &str) -> BTreeSet<String> {
        cell.split('`').skip(1).step_by(2).map(str::to_string).collect()
    }

    /// README's "Data model" table lists exactly these measurements, tags and fields.
    #[test]
    fn readme_table_matches_the_model() {
        let readme = include_str!("../README.md");
        let start = readme.find("## Data model").expect("README has a Data model section");
        let rows: Vec<&str> = readme[start..]
            .lines()
            .skip_while(|l| !l.starts_with("| measurement"))
            .skip(2)
            .take_while(|l| l.starts_with('|'))
            .collect();
        let mut seen = BTreeSet::new();
        for row in rows {
            let cells: Vec<&str> = row.split(" | ").collect();
            assert!(cells.len() >= 3, "README data-model row {row:?}");
            let name = ticked(cells[0]).into_iter().next().expect("a measurement name");
            let m =
                measurement(&name).unwrap_or_else(|| panic!("README lists {name}, the model has no such measurement"));
            seen.insert(name.clone());
            let mut want_tags: BTreeSet<String> = m.tags.iter().map(|s| s.to_string()).collect();
            let tags = ticked(cells[1]);
            if cells[1].contains("same plus") {
                // "same plus `index`, `severity`": the component tags and these.
                want_tags.retain(|t| !COMPONENT_STATE.tags.contains(&t.as_str()));
            }
            assert_eq!(tags, want_tags, "README's tags of {name}");
            // README names the level fields by their pattern, `<index>_level`.
            let want: BTreeSet<String> = m
                .fields
                .iter()
                .filter(|f| !f.strip_suffix("_level").is_some_and(|i| LEVEL_INDICES.contains(&i)))
                .chain(m.live_only)
                .chain(m.patterns)
                .map(|s| s.to_string())
                .collect();
            let fields = ticked(cells[2]);
            assert_eq!(fields, want, "README's fields of {name}");
        }
        let all: BTreeSet<String> = MEASUREMENTS.iter().map(|m| m.name.to_string()).collect();
        assert_eq!(seen, all, "README's data-model table lists every measurement");
    }

    #[test]
    fn level_fields_follow_the_level_indices() {
        for i in LEVEL_INDICES {
            assert!(COMPONENT_STATE.has_field(&format!("{i}_level")), "{i}_level");
        }
        assert!(SERVICE_HEALTH.has_field("rejected_late"));
        assert!(!SERVICE_HEALTH.has_field("rejected_"));
        assert!(!ALARM_THRESHOLD.has_field("threshold"));
    }
}
