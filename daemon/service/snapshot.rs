//! The published snapshot of the service: what the HTTP side reads. The
//! ledger thread owns all state and publishes an immutable snapshot through
//! a `tokio::sync::watch` channel; readers never lock anything.

use crate::alarm::ComponentAlarmSummary;
use crate::engine::Counters;
use crate::report::ComponentReport;
use serde::Serialize;
use std::collections::BTreeMap;

/// Service counters beyond the engine's.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ServiceCounters {
    /// Messages rejected before the engine, by reason.
    pub decode_rejected: BTreeMap<String, u64>,
    /// Samples that carried no timestamp (receive time used).
    pub receive_time_used: u64,
    /// Alarm commands (MQTT and HTTP) the alarm book carried out.
    pub commands_applied: u64,
    /// Alarm commands refused, by reason: `unauthorised` (MQTT without the
    /// operator token), `retained` (a retained MQTT message), `invalid`
    /// (not a valid command), `refused` (the alarm book refused it, for
    /// example an unknown component).
    pub commands_rejected: BTreeMap<String, u64>,
    pub commits: u64,
    pub commit_failures: u64,
    pub last_commit_ms: f64,
    pub max_commit_ms: f64,
    /// Sum of commit latencies, for the mean.
    pub total_commit_ms: f64,
    pub acked: u64,
    /// `component_state` points queued for the database since start.
    pub series_points: u64,
}

/// What `/api/components`, `/metrics`, `/healthz` and `/readyz` show.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Snapshot {
    pub plant: String,
    pub started: String,
    pub mqtt_connected: bool,
    pub store_path: String,
    pub outbox_lines: u64,
    pub outbox_bytes: u64,
    /// Lines the database refused as malformed, parked in the ledger's
    /// `parked_line` table (not delivered, not waiting).
    pub outbox_parked_lines: u64,
    pub outbox_quota_bytes: u64,
    /// Intake is paused because the outbox is over its quota.
    pub holding: bool,
    /// While ledger commits fail: the last error (intake waits, nothing is
    /// acknowledged, readiness answers not ready).
    pub commit_failing: Option<String>,
    pub database_configured: bool,
    pub database_reachable: Option<bool>,
    /// While the database refuses the service (wrong token, organisation
    /// or bucket): its answer; the `lifeledger:database` service-health
    /// alarm is active meanwhile.
    pub database_refusal: Option<String>,
    pub engine: Counters,
    pub service: ServiceCounters,
    pub components: Vec<ComponentReport>,
    pub alarms: Vec<ComponentAlarmSummary>,
    /// The most recent alarm events (newest last, at most 200); at start-up
    /// read back from the store's alarm journal, so they span restarts.
    pub recent_events: Vec<crate::alarm::AlarmEvent>,
    /// Alarm-system performance (see `service::alarm_kpi`).
    pub alarm_kpi: super::alarm_kpi::AlarmKpiReport,
    /// Components kept in the ledger but no longer configured.
    pub retired_components: Vec<String>,
    /// No accepted sample from any tag for `[alarms] no_data_alarm_s`:
    /// the ledgers are not moving, and `/readyz` says so.
    pub no_plant_data: bool,
    /// How old each tag's and component's data is, by the wall clock.
    pub freshness: Freshness,
    /// Samples accepted and waiting in the reorder window.
    pub held_samples: u64,
    /// Settings changed in the file and reloaded with SIGHUP that take
    /// effect only at the next start (`[http] listen`, `[store] path`,
    /// `[database]`, the `[mqtt]` connection); they run at their old values.
    pub restart_required: Vec<String>,
    /// Why the last SIGHUP reload was refused (the running configuration
    /// stays); `None` once a reload is applied.
    pub reload_refused: Option<String>,
    /// Things an operator should know that are no alarm: the
    /// configuration's warnings (each starting "configuration: ") and
    /// another instance found on this instance's MQTT status topic
    /// (`ingest::status`).
    pub warnings: Vec<String>,
    /// The longest shelve the alarm commands take, hours (`[alarms]
    /// max_shelve_h`, at most `alarm::MAX_SHELVE_H`), for the page's
    /// choice of durations.
    pub max_shelve_h: f64,
    pub caution: &'static str,
}

/// Data age by the wall clock: seconds since the newest accepted sample.
#[derive(Debug, Clone, Default, Serialize)]
pub struct Freshness {
    pub tags: Vec<TagFreshness>,
    pub components: Vec<ComponentFreshness>,
}

/// One tag's data age.
#[derive(Debug, Clone, Default, Serialize)]
pub struct TagFreshness {
    pub tag: String,
    /// Seconds since its newest accepted sample arrived; none yet: `None`.
    pub data_age_s: Option<f64>,
    /// Past its hold time plus the stale grace (never reported: counted
    /// from the service's start).
    pub stale: bool,
}

/// One component's data age and lag.
#[derive(Debug, Clone, Default, Serialize)]
pub struct ComponentFreshness {
    pub component: String,
    /// Age of its stalest input tag, seconds (`None`: an input never
    /// reported, or a part on the plant clock).
    pub data_age_s: Option<f64>,
    /// Wall clock minus the event time it is integrated to, seconds.
    pub lag_s: Option<f64>,
    /// Every input is a constant: the part advances with the plant clock.
    pub on_plant_clock: bool,
}

impl Snapshot {
    /// Why the service is not ready, if it is not: what `/readyz` says.
    pub fn not_ready(&self) -> Option<String> {
        if let Some(e) = &self.commit_failing {
            return Some(format!("ledger commits failing, intake paused: {e}"));
        }
        if !self.mqtt_connected {
            return Some("not connected to the MQTT broker".into());
        }
        if self.holding {
            return Some("outbox over quota, intake paused".into());
        }
        if self.no_plant_data {
            return Some("no plant data: no sample accepted from any tag within [alarms] no_data_alarm_s".into());
        }
        None
    }
}

/// Prometheus text exposition of a snapshot.
pub fn metrics_text(s: &Snapshot) -> String {
    use std::fmt::Write;
    let mut o = String::new();
    let mut metric = |name: &str, help: &str, kind: &str, rows: Vec<(String, f64)>| {
        let _ = writeln!(o, "# HELP {name} {help}\n# TYPE {name} {kind}");
        for (labels, v) in rows {
            let _ = writeln!(o, "{name}{labels} {v}");
        }
    };
    let e = &s.engine;
    metric(
        "lifeledger_samples_accepted_total",
        "Samples integrated.",
        "counter",
        vec![(String::new(), e.accepted as f64)],
    );
    let mut rej: Vec<(String, f64)> = crate::engine::Rejection::ALL
        .iter()
        .map(|r| (format!("{{reason=\"{}\"}}", r.name()), e.get(*r) as f64))
        .collect();
    for (k, v) in &s.service.decode_rejected {
        rej.push((format!("{{reason=\"{k}\"}}"), *v as f64));
    }
    metric("lifeledger_samples_rejected_total", "Samples or messages not integrated, by reason.", "counter", rej);
    metric(
        "lifeledger_build_info",
        "The running build: its version (the value is always 1).",
        "gauge",
        vec![(format!("{{version=\"{}\"}}", env!("CARGO_PKG_VERSION")), 1.0)],
    );
    // Alarm records not in the normal state, by state and severity.
    let mut by_state: std::collections::BTreeMap<(String, String), u64> = Default::default();
    for r in s.alarms.iter().flat_map(|c| &c.alarms) {
        let state = serde_json::to_value(r.state).ok().and_then(|v| v.as_str().map(str::to_string));
        let state = state.unwrap_or_else(|| format!("{:?}", r.state));
        if state == "normal" {
            continue;
        }
        let severity = r.severity.map_or("none".to_string(), |v| {
            serde_json::to_value(v).ok().and_then(|v| v.as_str().map(str::to_string)).unwrap_or_default()
        });
        *by_state.entry((state, severity)).or_default() += 1;
    }
    metric(
        "lifeledger_alarms",
        "Alarms not in the normal state, by ISA-18.2 state and severity (none: conditions without a level).",
        "gauge",
        by_state
            .into_iter()
            .map(|((state, severity), n)| (format!("{{state=\"{state}\",severity=\"{severity}\"}}"), n as f64))
            .collect(),
    );
    metric(
        "lifeledger_restart_required",
        "1 while settings reloaded with SIGHUP wait for a restart (see /readyz), else 0.",
        "gauge",
        vec![(String::new(), if s.restart_required.is_empty() { 0.0 } else { 1.0 })],
    );
    metric(
        "lifeledger_reload_refused",
        "1 when the last SIGHUP reload was refused (see /readyz), else 0.",
        "gauge",
        vec![(String::new(), if s.reload_refused.is_some() { 1.0 } else { 0.0 })],
    );
    let label = |k: &str, v: &str| format!("{{{k}=\"{}\"}}", esc(v));
    metric(
        "lifeledger_tag_data_age_seconds",
        "Seconds since the tag's newest accepted sample arrived (absent: none yet).",
        "gauge",
        s.freshness.tags.iter().filter_map(|t| t.data_age_s.map(|a| (label("tag", &t.tag), a))).collect(),
    );
    metric(
        "lifeledger_tag_stale",
        "1 while the tag has sent nothing for its hold time plus the stale grace.",
        "gauge",
        s.freshness.tags.iter().map(|t| (label("tag", &t.tag), if t.stale { 1.0 } else { 0.0 })).collect(),
    );
    metric(
        "lifeledger_component_data_age_seconds",
        "Age of the component's stalest input, seconds.",
        "gauge",
        s.freshness
            .components
            .iter()
            .filter_map(|c| c.data_age_s.map(|a| (label("component", &c.component), a)))
            .collect(),
    );
    metric(
        "lifeledger_component_lag_seconds",
        "Wall clock minus the event time the component is integrated to.",
        "gauge",
        s.freshness.components.iter().filter_map(|c| c.lag_s.map(|a| (label("component", &c.component), a))).collect(),
    );
    metric(
        "lifeledger_plant_data_missing",
        "1 while no tag has delivered a sample within [alarms] no_data_alarm_s.",
        "gauge",
        vec![(String::new(), if s.no_plant_data { 1.0 } else { 0.0 })],
    );
    metric(
        "lifeledger_held_samples",
        "Samples accepted and waiting in the reorder window.",
        "gauge",
        vec![(String::new(), s.held_samples as f64)],
    );
    metric(
        "lifeledger_duplicates_total",
        "Samples at or before their tag's cursor.",
        "counter",
        vec![(String::new(), (e.duplicate + e.late) as f64)],
    );
    metric(
        "lifeledger_outbox_lines",
        "Points waiting for the database.",
        "gauge",
        vec![(String::new(), s.outbox_lines as f64)],
    );
    metric(
        "lifeledger_outbox_bytes",
        "Bytes waiting for the database.",
        "gauge",
        vec![(String::new(), s.outbox_bytes as f64)],
    );
    metric(
        "lifeledger_outbox_parked_lines",
        "Points the database refused as malformed, parked in the ledger (table parked_line), not delivered.",
        "gauge",
        vec![(String::new(), s.outbox_parked_lines as f64)],
    );
    metric(
        "lifeledger_commits_total",
        "Ledger transactions committed.",
        "counter",
        vec![(String::new(), s.service.commits as f64)],
    );
    metric(
        "lifeledger_commit_failures_total",
        "Ledger transactions that failed (nothing of them acknowledged; retried with a growing wait).",
        "counter",
        vec![(String::new(), s.service.commit_failures as f64)],
    );
    metric(
        "lifeledger_commit_failing",
        "1 while ledger commits fail.",
        "gauge",
        vec![(String::new(), s.commit_failing.is_some() as u8 as f64)],
    );
    metric(
        "lifeledger_commit_latency_ms",
        "Latency of the last ledger commit.",
        "gauge",
        vec![(String::new(), s.service.last_commit_ms)],
    );
    metric(
        "lifeledger_commit_latency_max_ms",
        "Largest ledger commit latency.",
        "gauge",
        vec![(String::new(), s.service.max_commit_ms)],
    );
    metric(
        "lifeledger_commands_applied_total",
        "Alarm commands (MQTT and HTTP) carried out.",
        "counter",
        vec![(String::new(), s.service.commands_applied as f64)],
    );
    metric(
        "lifeledger_commands_rejected_total",
        "Alarm commands refused, by reason (unauthorised, retained, invalid, refused).",
        "counter",
        ["unauthorised", "retained", "invalid", "refused"]
            .iter()
            .map(|r| (format!("{{reason=\"{r}\"}}"), s.service.commands_rejected.get(*r).copied().unwrap_or(0) as f64))
            .collect(),
    );
    metric(
        "lifeledger_database_reachable",
        "1 when the last write to the database succeeded, 0 when it failed (absent: no database, or no write yet).",
        "gauge",
        s.database_reachable.map(|r| (String::new(), r as u8 as f64)).into_iter().collect(),
    );
    metric(
        "lifeledger_database_refusing",
        "1 while the database refuses the service's writes (wrong token, organisation or bucket; points stay in the outbox), else 0 (absent: no database).",
        "gauge",
        if s.database_configured {
            vec![(String::new(), s.database_refusal.is_some() as u8 as f64)]
        } else {
            vec![]
        },
    );
    metric(
        "lifeledger_mqtt_connected",
        "1 when connected to the broker.",
        "gauge",
        vec![(String::new(), s.mqtt_connected as u8 as f64)],
    );
    metric(
        "lifeledger_intake_holding",
        "1 when intake is paused (outbox over quota).",
        "gauge",
        vec![(String::new(), s.holding as u8 as f64)],
    );
    let k = &s.alarm_kpi;
    for (name, help, v) in [
        (
            "lifeledger_alarms_last_10_min",
            "Alarms annunciated in the last 10 minutes of alarm time (target: about 1 per operator).",
            k.alarms_last_10_min as f64,
        ),
        (
            "lifeledger_alarms_last_hour",
            "Alarms annunciated in the last hour of alarm time.",
            k.alarms_last_hour as f64,
        ),
        ("lifeledger_alarms_last_24h", "Alarms annunciated in the last 24 h of alarm time.", k.alarms_last_24_h as f64),
        (
            "lifeledger_alarms_peak_per_10_min_24h",
            "Most alarms in one 10-minute period of the last 24 h.",
            k.peak_per_10_min_24_h as f64,
        ),
        (
            "lifeledger_alarm_floods_24h",
            "10-minute periods of the last 24 h with more than 10 alarms.",
            k.floods_24_h as f64,
        ),
        (
            "lifeledger_alarm_time_in_flood_percent_24h",
            "Share of the last 24 h in flood, percent (target under 1).",
            k.time_in_flood_percent_24_h,
        ),
        (
            "lifeledger_alarms_standing",
            "Operator alarms active for more than 24 h (target under 5).",
            k.standing as f64,
        ),
        (
            "lifeledger_alarms_chattering",
            "Alarms with 3 or more activations within 60 s in the last hour (target 0).",
            k.chattering.len() as f64,
        ),
        (
            "lifeledger_alarms_active",
            "Operator alarms active, not shelved, out of service or suppressed.",
            k.active as f64,
        ),
        ("lifeledger_alarms_unacknowledged", "Alarms waiting for an acknowledge.", k.unacknowledged as f64),
        ("lifeledger_alarms_shelved", "Alarms shelved.", k.shelved as f64),
        ("lifeledger_alarms_out_of_service", "Alarms out of service.", k.out_of_service as f64),
        ("lifeledger_alarms_suppressed", "Alarms suppressed by a plant state.", k.suppressed as f64),
        (
            "lifeledger_engineering_alerts_active",
            "Engineering alerts active (not operator alarms).",
            k.engineering_alerts as f64,
        ),
    ] {
        metric(name, help, "gauge", vec![(String::new(), v)]);
    }
    metric(
        "lifeledger_alarm_most_frequent_24h",
        "Annunciations of the ten most frequent alarms in the last 24 h.",
        "gauge",
        k.most_frequent_24_h.iter().map(|(a, n)| (label("alarm", a), *n as f64)).collect(),
    );
    let lf: Vec<(String, f64)> = s
        .components
        .iter()
        .map(|c| (format!("{{component=\"{}\",unit=\"{}\"}}", esc(&c.component), esc(&c.unit)), c.creep_life_fraction))
        .collect();
    metric("lifeledger_creep_life_fraction", "Robinson life fraction per component.", "gauge", lf);
    let wi: Vec<(String, f64)> = s
        .components
        .iter()
        .map(|c| (format!("{{component=\"{}\",unit=\"{}\"}}", esc(&c.component), esc(&c.unit)), c.wear_index))
        .collect();
    metric("lifeledger_wear_index", "Wear depth over allowable depth per component.", "gauge", wi);
    o
}

fn esc(s: &str) -> String {
    s.replace('\\', "\\\\").replace('"', "\\\"").replace('\n', "\\n")
}
