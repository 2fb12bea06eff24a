//! Typed settings of the live service: the `[mqtt]`, `[store]`,
//! `[database]`, `[http]` and `[alarms]` sections of the configuration.

use crate::alarm::AlarmConfig;
use crate::ingest::MqttSettings;
use crate::settings::Settings;
use crate::sink::DatabaseSettings;
use serde::de::DeserializeOwned;
use serde::Deserialize;
use std::path::PathBuf;

/// The `[store]` section.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StoreSettings {
    /// Ledger file (SQLite). Default `lifeledger.ledger` in the working directory.
    #[serde(default = "default_path")]
    pub path: PathBuf,
    /// Largest number of samples in one group commit.
    #[serde(default = "default_batch")]
    pub commit_max_samples: usize,
    /// Group-commit interval, ms: an open batch is committed once it is this
    /// old (or `commit_max_samples` is reached), so a steady stream costs
    /// about one fsync per interval instead of one per message. 0 commits
    /// whenever the queue runs dry. 0 to 5000.
    #[serde(default = "default_commit_interval")]
    pub commit_interval_ms: u64,
    /// Event-time spacing of `component_state` points, seconds.
    #[serde(default = "default_series")]
    pub series_interval_s: i64,
    /// Wall-clock spacing of `service_health` points, seconds.
    #[serde(default = "default_health")]
    pub health_interval_s: u64,
    /// Alarm events the ledger's alarm journal keeps (the newest; older
    /// ones are deleted in the commit that adds new ones). At least 1.
    #[serde(default = "default_journal")]
    pub alarm_journal_max_events: u64,
    /// Trend points kept per component for the status page (the newest;
    /// a component may hold a tenth more before it is pruned back). At
    /// least 1.
    #[serde(default = "default_trend")]
    pub trend_points_per_component: u64,
    /// Days (wall clock) the daily checkpoints of each component's ledger
    /// are kept, for `lifeledger rollback`; a component's newest is always
    /// kept. At least 1.
    #[serde(default = "default_checkpoint_days")]
    pub checkpoint_days: u64,
    /// Seconds commits may fail without a break before the service gives
    /// up and exits with an error (for the service manager to restart it).
    /// Until then failed commits are retried with a growing wait, nothing
    /// is acknowledged and `/readyz` answers not ready.
    #[serde(default = "default_commit_failure_limit")]
    pub commit_failure_limit_s: f64,
    /// Whether the service may create a new ledger in place of a missing or
    /// empty file. Not a configuration key: only `lifeledger run
    /// --init-ledger` (and the demo, on its own state directory) sets it, so
    /// a data volume that failed to mount is refused instead of silently
    /// starting every component afresh.
    #[serde(skip)]
    pub create_if_missing: bool,
}

fn default_path() -> PathBuf {
    PathBuf::from("lifeledger.ledger")
}
fn default_batch() -> usize {
    2000
}
fn default_commit_interval() -> u64 {
    150
}
fn default_series() -> i64 {
    60
}
fn default_health() -> u64 {
    10
}
fn default_journal() -> u64 {
    crate::store::journal::DEFAULT_MAX_EVENTS
}
fn default_trend() -> u64 {
    crate::store::trend::DEFAULT_POINTS_PER_COMPONENT
}
fn default_checkpoint_days() -> u64 {
    crate::store::checkpoint::DEFAULT_DAYS
}
fn default_commit_failure_limit() -> f64 {
    300.0
}

impl Default for StoreSettings {
    fn default() -> Self {
        StoreSettings {
            path: default_path(),
            commit_max_samples: default_batch(),
            commit_interval_ms: default_commit_interval(),
            series_interval_s: default_series(),
            health_interval_s: default_health(),
            alarm_journal_max_events: default_journal(),
            trend_points_per_component: default_trend(),
            checkpoint_days: default_checkpoint_days(),
            commit_failure_limit_s: default_commit_failure_limit(),
            create_if_missing: false,
        }
    }
}

/// The `[http]` section.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HttpSettings {
    /// Listen address; loopback by default.
    #[serde(default = "default_listen")]
    pub listen: String,
    /// Environment variable holding the operator token, which allows
    /// acknowledge, shelve and unshelve over HTTP (bearer token) and over
    /// MQTT (the command's `token` field); without it both are refused.
    #[serde(default)]
    pub token_env: Option<String>,
}

fn default_listen() -> String {
    "127.0.0.1:8470".into()
}

impl Default for HttpSettings {
    fn default() -> Self {
        HttpSettings { listen: default_listen(), token_env: None }
    }
}

/// Everything the service needs beyond the engine plan.
#[derive(Debug, Clone)]
pub struct ServiceSettings {
    pub mqtt: MqttSettings,
    pub store: StoreSettings,
    pub database: Option<DatabaseSettings>,
    pub http: HttpSettings,
    pub alarms: AlarmConfig,
}

fn section<T: DeserializeOwned>(name: &str, t: &Option<toml::Table>) -> Result<Option<T>, String> {
    let Some(t) = t else { return Ok(None) };
    match T::deserialize(toml::Value::Table(t.clone())) {
        Ok(v) => Ok(Some(v)),
        Err(first) => {
            // Environment overrides arrive as text ("8883" for a port):
            // read the section again through the configuration reader,
            // which takes text for numbers and booleans where the setting
            // is one, and keeps text as text where it is a string.
            let lenient = toml::to_string(&toml::Value::Table(t.clone())).ok().and_then(|text| {
                config::Config::builder()
                    .add_source(config::File::from_str(&text, config::FileFormat::Toml))
                    .build()
                    .ok()?
                    .try_deserialize::<T>()
                    .ok()
            });
            lenient.map(Some).ok_or_else(|| format!("[{name}]: {first}"))
        }
    }
}

impl ServiceSettings {
    /// Type the free-form service sections of a configuration.
    pub fn from_settings(s: &Settings) -> Result<ServiceSettings, Vec<String>> {
        let mut errors = vec![];
        let mqtt = section::<MqttSettings>("mqtt", &s.mqtt).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        let mqtt = match mqtt {
            Some(m) => m,
            None => match toml::from_str::<MqttSettings>("") {
                Ok(m) => m,
                Err(e) => {
                    errors.push(e.to_string());
                    return Err(errors);
                }
            },
        };
        if let Err(e) = mqtt.templates() {
            errors.push(e);
        }
        errors.extend(mqtt_problems(&mqtt));
        let store = section::<StoreSettings>("store", &s.store).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        if let Some(st) = &store {
            errors.extend(store_problems(st));
        }
        if store.as_ref().is_some_and(|s| s.checkpoint_days == 0) {
            errors.push(format!(
                "[store]: checkpoint_days = 0 would keep no checkpoint to roll a poisoned ledger back to; set at \
                 least 1 (the default {} keeps about a quarter of a year)",
                default_checkpoint_days()
            ));
        }
        let database = section::<DatabaseSettings>("database", &s.database).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        if let Some(d) = &database {
            if let Err(e) = d.validate() {
                errors.push(format!("[database]: {e}"));
            }
        }
        errors.extend(secret_source_problems(&mqtt, database.as_ref()));
        let http = section::<HttpSettings>("http", &s.http).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        let alarms = section::<AlarmConfig>("alarms", &s.alarms).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        if let Some(h) = &http {
            errors.extend(http_problems(h));
        }
        if let Some(a) = &alarms {
            errors.extend(alarm_problems(a));
        }
        if let Some(a) = &alarms {
            for (key, v, fix) in [
                ("stale_grace_s", a.stale_grace_s, "for example 60"),
                ("no_data_alarm_s", a.no_data_alarm_s, "for example 300"),
            ] {
                if !(v.is_finite() && (0.0..=86_400.0).contains(&v)) {
                    errors.push(format!("[alarms] {key}: {v} is not a number of seconds from 0 to 86400; {fix}"));
                }
            }
            let max = crate::alarm::MAX_SHELVE_H;
            if !(a.max_shelve_h > 0.0 && a.max_shelve_h <= max) {
                errors.push(format!(
                    "[alarms] max_shelve_h: {} is not a number of hours above 0 and at most {max} (30 days); \
                     for example 168 for a week",
                    a.max_shelve_h
                ));
            }
        }
        if !errors.is_empty() {
            return Err(errors);
        }
        Ok(ServiceSettings {
            mqtt,
            store: store.unwrap_or_default(),
            database,
            http: http.unwrap_or_default(),
            alarms: alarms.unwrap_or_default(),
        })
    }
}

impl ServiceSettings {
    /// Everything `run` needs from outside the file, checked as `run`
    /// would meet it: secret variables set (through `env`), secret, CA,
    /// certificate and key files present, readable and of the right kind.
    /// Every problem at once, each naming its section and key; never a
    /// secret's value. (Whether the sources themselves make sense is
    /// checked with the file, by [`ServiceSettings::from_settings`].)
    pub fn startup_problems(&self, env: impl Fn(&str) -> Option<String>) -> Vec<String> {
        let mut p = vec![];
        let m = &self.mqtt;
        if let (Some(var), None) = (&m.password_env, &m.password_file) {
            p.extend(variable_problem("[mqtt] password_env", var, &env));
        }
        if let (None, Some(f)) = (&m.password_env, &m.password_file) {
            p.extend(secret_file_problem("[mqtt] password_file", f));
        }
        if let Some(t) = &m.tls {
            p.extend(pem_file_problem("[mqtt.tls] ca_file", &t.ca_file, "CERTIFICATE"));
            if let (Some(c), Some(k)) = (&t.client_cert_file, &t.client_key_file) {
                p.extend(pem_file_problem("[mqtt.tls] client_cert_file", c, "CERTIFICATE"));
                p.extend(pem_file_problem("[mqtt.tls] client_key_file", k, "PRIVATE KEY"));
            }
        }
        if let Some(var) = &self.http.token_env {
            p.extend(variable_problem("[http] token_env", var, &env));
        }
        if let Some(d) = &self.database {
            if let Err(e) = d.token_with(&env) {
                p.push(format!("[database]: {e}"));
            }
            if let Some(ca) = &d.ca_file {
                if let Err(e) = crate::sink::read_ca_file(ca) {
                    p.push(format!("[database]: {e}"));
                }
            }
        }
        p
    }
}

/// Secret sources that cannot work whatever the environment: two sources
/// for one secret, a password without a username, a client certificate
/// without its key (or a key without its certificate).
fn secret_source_problems(m: &MqttSettings, database: Option<&DatabaseSettings>) -> Vec<String> {
    let mut p = vec![];
    if m.password_env.is_some() && m.password_file.is_some() {
        p.push("[mqtt] password_env and password_file are both set; keep exactly one".into());
    }
    if (m.password_env.is_some() || m.password_file.is_some()) && m.username.is_none() {
        p.push(
            "[mqtt] a password is configured but no username: the broker would get no credentials; \
             set [mqtt] username"
                .into(),
        );
    }
    if let Some(t) = &m.tls {
        match (&t.client_cert_file, &t.client_key_file) {
            (Some(_), None) => p.push(
                "[mqtt.tls] client_cert_file is set without client_key_file: a client certificate needs \
                 its private key; set both or neither"
                    .into(),
            ),
            (None, Some(_)) => {
                p.push("[mqtt.tls] client_key_file is set without client_cert_file: set both or neither".into())
            }
            _ => {}
        }
    }
    if let Some(d) = database {
        if d.token_env.is_some() && d.token_file.is_some() {
            p.push("[database]: database.token_env and database.token_file are both set; keep exactly one".into());
        }
    }
    p
}

/// A problem unless environment variable `var` is set and not empty.
fn variable_problem(key: &str, var: &str, env: &impl Fn(&str) -> Option<String>) -> Option<String> {
    match env(var) {
        Some(v) if !v.trim().is_empty() => None,
        Some(_) => Some(format!("{key}: environment variable {var} is empty")),
        None => Some(format!(
            "{key}: environment variable {var} is not set (or not valid UTF-8); set it in the service's \
             environment (for example the unit's EnvironmentFile)"
        )),
    }
}

/// A problem unless `path` can be read and holds something.
fn secret_file_problem(key: &str, path: &std::path::Path) -> Option<String> {
    match std::fs::read(path) {
        Ok(b) if b.iter().all(|c| c.is_ascii_whitespace()) => {
            Some(format!("{key} {}: the file is empty", path.display()))
        }
        Ok(_) => None,
        Err(e) => Some(format!("{key} {}: cannot read: {e}", path.display())),
    }
}

/// A problem unless `path` can be read and holds a PEM block whose label
/// ends with `label` (`CERTIFICATE`, `PRIVATE KEY`).
fn pem_file_problem(key: &str, path: &std::path::Path, label: &str) -> Option<String> {
    match std::fs::read(path) {
        Err(e) => Some(format!("{key} {}: cannot read: {e}", path.display())),
        Ok(b) => {
            let text = String::from_utf8_lossy(&b);
            let found = text
                .lines()
                .filter_map(|l| l.trim().strip_prefix("-----BEGIN ").and_then(|r| r.strip_suffix("-----")))
                .any(|l| l.ends_with(label));
            (!found).then(|| format!("{key} {}: no PEM {label} block in the file", path.display()))
        }
    }
}

/// Longest time any setting in seconds may give: a day. Longer waits are
/// surely mistakes, and the bound keeps every conversion to a `Duration`
/// or to milliseconds far from overflow.
const MAX_SECONDS: f64 = 86_400.0;

/// A problem unless `v` is a positive, finite number of seconds of at most
/// [`MAX_SECONDS`]. Written `[section] key = value: what; use what`.
fn seconds_problem(section: &str, key: &str, v: f64, default: f64) -> Option<String> {
    (!(v.is_finite() && v > 0.0 && v <= MAX_SECONDS)).then(|| {
        format!(
            "[{section}] {key} = {v:?}: not a usable number of seconds; use a positive number \
             up to {MAX_SECONDS} (default {default})"
        )
    })
}

/// A problem unless the whole number `v` lies in `lo..=hi`.
fn count_problem<T>(section: &str, key: &str, v: T, lo: T, hi: T, fix: &str) -> Option<String>
where
    T: PartialOrd + std::fmt::Display,
{
    (v < lo || v > hi).then(|| format!("[{section}] {key} = {v}: out of range; use {fix}"))
}

/// Every number of the `[mqtt]` section, checked so that no value can make
/// the intake task panic or spin (`Duration::from_secs_f64` panics on a
/// negative or NaN delay).
fn mqtt_problems(m: &MqttSettings) -> Vec<String> {
    let mut p = vec![];
    p.extend(count_problem("mqtt", "port", m.port, 1, u16::MAX, "the broker's TCP port, 1 to 65535 (default 1883)"));
    // MQTT carries the keep-alive in 16 bits; rumqttc wants at least 5 s.
    p.extend(count_problem("mqtt", "keep_alive_s", m.keep_alive_s, 5, 65_535, "5 to 65535 seconds (default 30)"));
    let min = seconds_problem("mqtt", "reconnect_min_s", m.reconnect_min_s, 0.5);
    let max = seconds_problem("mqtt", "reconnect_max_s", m.reconnect_max_s, 30.0);
    let both_usable = min.is_none() && max.is_none();
    p.extend(min.into_iter().chain(max));
    if both_usable && m.reconnect_max_s < m.reconnect_min_s {
        p.push(format!(
            "[mqtt] reconnect_max_s = {:?} is below reconnect_min_s = {:?}; use a maximum at least the minimum",
            m.reconnect_max_s, m.reconnect_min_s
        ));
    }
    p.extend(count_problem(
        "mqtt",
        "max_message_bytes",
        m.max_message_bytes,
        1024,
        crate::ingest::MQTT_MAX_PACKET_BYTES,
        "1024 to 268435455 bytes, at least the broker's largest packet (default 268435455)",
    ));
    for (i, sub) in m.subscriptions.iter().enumerate() {
        let limit = sub.payload.max_bytes;
        if limit == 0 || limit > m.max_message_bytes {
            p.push(format!(
                "[[mqtt.subscription]] #{} payload.max_bytes = {limit}: out of range; use 1 to \
                 max_message_bytes ({}) (default {})",
                i + 1,
                m.max_message_bytes,
                crate::ingest::decode::DEFAULT_MAX_PAYLOAD_BYTES
            ));
        }
    }
    p
}

/// Every number of the `[store]` section.
fn store_problems(s: &StoreSettings) -> Vec<String> {
    let mut p = vec![];
    p.extend(count_problem(
        "store",
        "commit_max_samples",
        s.commit_max_samples,
        1,
        10_000_000,
        "at least 1 sample per commit (default 2000)",
    ));
    p.extend(count_problem(
        "store",
        "commit_interval_ms",
        s.commit_interval_ms,
        0,
        5000,
        "0 to 5000 ms between group commits (default 150; 0 commits whenever the queue runs dry)",
    ));
    p.extend(count_problem(
        "store",
        "series_interval_s",
        s.series_interval_s,
        1,
        MAX_SECONDS as i64,
        "1 to 86400 seconds of event time between component_state points (default 60)",
    ));
    p.extend(count_problem(
        "store",
        "health_interval_s",
        s.health_interval_s,
        1,
        MAX_SECONDS as u64,
        "1 to 86400 seconds between service_health points (default 10)",
    ));
    p.extend(seconds_problem("store", "commit_failure_limit_s", s.commit_failure_limit_s, 300.0));
    if s.alarm_journal_max_events == 0 {
        p.push(
            "[store] alarm_journal_max_events = 0 would keep no alarm history; use at least 1 \
             (200 or more fills the status page's event list after a restart)"
                .into(),
        );
    }
    if s.trend_points_per_component == 0 {
        p.push(format!(
            "[store] trend_points_per_component = 0 would keep no trend for the status page; use at least 1 \
             (the default {} is one week of points at series_interval_s = 60)",
            default_trend()
        ));
    }
    p
}

/// The `[http]` listen address: `HOST:PORT` with a port of 1 to 65535.
fn http_problems(h: &HttpSettings) -> Vec<String> {
    let port = h.listen.rsplit_once(':').map(|(_, port)| port.parse::<u16>());
    match port {
        Some(Ok(p)) if p > 0 => vec![],
        _ => vec![format!(
            "[http] listen = {:?}: not HOST:PORT with a port of 1 to 65535; use for example \"127.0.0.1:8470\"",
            h.listen
        )],
    }
}

/// Deadbands (finite, not negative, a fraction below 1) and damage-rate
/// levels (finite, not negative, rising).
fn alarm_problems(a: &AlarmConfig) -> Vec<String> {
    let mut p = vec![];
    for (index, d) in &a.deadbands {
        let name = index.name();
        if !(d.fraction.is_finite() && (0.0..1.0).contains(&d.fraction)) {
            p.push(format!(
                "[alarms] deadbands.{name}.fraction = {:?}: not a usable fraction; use 0 to below 1 \
                 (default 0.02, 2 % of the level)",
                d.fraction
            ));
        }
        if !(d.minimum.is_finite() && d.minimum >= 0.0) {
            p.push(format!(
                "[alarms] deadbands.{name}.minimum = {:?}: use a finite number ≥ 0 in the index's unit",
                d.minimum
            ));
        }
    }
    let per_component = a.component_rationale.iter().flat_map(|(c, m)| m.iter().map(move |(i, r)| (Some(c), i, r)));
    for (component, index, r) in a.rationale.iter().map(|(i, r)| (None, i, r)).chain(per_component) {
        let at = match component {
            None => format!("[alarms] rationale.{}", index.name()),
            Some(c) => format!("[alarms] component_rationale.\"{c}\".{}", index.name()),
        };
        if let Some(m) = r.time_to_respond_min {
            if !(m.is_finite() && m > 0.0) {
                p.push(format!("{at}.time_to_respond_min = {m:?}: use minutes above 0"));
            }
        }
        if let Some(t) = &r.corrective_action {
            if t.trim().is_empty() || t.chars().any(|c| c.is_control()) {
                p.push(format!("{at}.corrective_action: give the action in words, without control characters"));
            }
        }
    }
    for (i, ps) in a.plant_states.iter().enumerate() {
        let at = format!("[[alarms.plant_state]] #{} ({:?})", i + 1, ps.name);
        if ps.name.trim().is_empty() || ps.name.chars().any(|c| c.is_control()) {
            p.push(format!("{at}: give the state a name in words, e.g. \"unit U2 offline\""));
        }
        if ps.units.is_empty() || ps.units.iter().any(|u| u.trim().is_empty()) {
            p.push(format!("{at}: units: list the plant units whose alarms it suppresses"));
        }
        let finite = |v: Option<f64>| v.is_none_or(f64::is_finite);
        if (ps.below.is_none() && ps.above.is_none()) || !finite(ps.below) || !finite(ps.above) {
            p.push(format!("{at}: give a finite `below` or `above` level in the tag's own unit"));
        }
    }
    for (index, d) in &a.delays {
        for (key, v) in [("on_delay_s", d.on_delay_s), ("off_delay_s", d.off_delay_s)] {
            if !(v.is_finite() && (0.0..=86_400.0).contains(&v)) {
                p.push(format!(
                    "[alarms] delays.{}.{key} = {v:?}: use seconds of event time from 0 to 86400",
                    index.name()
                ));
            }
        }
    }
    let levels: Vec<(&str, f64)> = a.damage_rate.iter().collect();
    if levels.iter().any(|(_, v)| !(v.is_finite() && *v >= 0.0)) || levels.windows(2).any(|w| w[0].1 >= w[1].1) {
        let given: Vec<String> = levels.iter().map(|(n, v)| format!("{n} = {v:?}")).collect();
        p.push(format!(
            "[alarms] damage_rate {{ {} }}: levels must be finite, not negative and rising; \
             give advisory < warning < critical in 1/h",
            given.join(", ")
        ));
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Environment overrides reach the service sections as text: a port
    /// given as "8883" is read as the number, a client id "007" stays
    /// "007" (common practice: MQTT client ids are strings).
    #[test]
    fn overrides_given_as_text_are_read_by_the_setting_s_type() {
        let s: Settings = toml::from_str("[mqtt]\nport = \"8883\"\nclient_id = \"007\"\n").unwrap();
        let svc = ServiceSettings::from_settings(&s).unwrap();
        assert_eq!(svc.mqtt.port, 8883);
        assert_eq!(svc.mqtt.client_id, "007");
        let s: Settings = toml::from_str("[mqtt]\nport = \"soon\"\n").unwrap();
        let e = ServiceSettings::from_settings(&s).unwrap_err();
        assert!(e[0].contains("[mqtt]") && e[0].contains("port"), "{e:?}");
    }

    fn store_section(text: &str) -> Result<ServiceSettings, Vec<String>> {
        let s: Settings = toml::from_str(&format!("[store]\n{text}")).unwrap();
        ServiceSettings::from_settings(&s)
    }

    fn service(text: &str) -> Result<ServiceSettings, Vec<String>> {
        ServiceSettings::from_settings(&toml::from_str(text).unwrap())
    }

    #[test]
    fn the_defaults_pass_every_check() {
        let s = service("").unwrap();
        assert_eq!((s.mqtt.reconnect_min_s, s.mqtt.reconnect_max_s), (0.5, 30.0));
    }

    #[test]
    fn numbers_the_service_cannot_use_are_refused_each_with_its_key() {
        for (text, key) in [
            ("[mqtt]\nreconnect_min_s = 0", "reconnect_min_s"),
            ("[mqtt]\nreconnect_min_s = inf", "reconnect_min_s"),
            ("[mqtt]\nreconnect_min_s = 5.0\nreconnect_max_s = 1.0", "reconnect_max_s = 1.0 is below"),
            ("[mqtt]\nkeep_alive_s = 70000", "keep_alive_s"),
            ("[mqtt]\nmax_message_bytes = 10", "max_message_bytes"),
            ("[mqtt]\n[[mqtt.subscription]]\ntopic = \"p/{tag}\"\npayload = { max_bytes = 0 }", "payload.max_bytes"),
            ("[store]\nseries_interval_s = 0", "series_interval_s"),
            ("[store]\nhealth_interval_s = 86401", "health_interval_s"),
            ("[store]\ncommit_failure_limit_s = nan", "commit_failure_limit_s"),
            ("[store]\ncommit_interval_ms = 5001", "commit_interval_ms"),
            ("[store]\ncommit_interval_ms = -1", "commit_interval_ms"),
            ("[store]\ncommit_failure_limit_s = -5", "commit_failure_limit_s"),
            ("[http]\nlisten = \"127.0.0.1\"", "listen"),
            ("[http]\nlisten = \"[::1]:0\"", "listen"),
            ("[alarms.deadbands.wear_index]\nfraction = nan", "deadbands.wear_index.fraction"),
            ("[alarms.deadbands.wear_index]\nfraction = 0.1\nminimum = -1", "deadbands.wear_index.minimum"),
            ("[alarms.damage_rate]\nwarning = 1e-5\ncritical = 1e-6", "damage_rate"),
            ("[alarms]\nmax_shelve_h = 0", "max_shelve_h"),
            ("[alarms.delays.wear_index]\non_delay_s = -1", "delays.wear_index.on_delay_s"),
            ("[[alarms.plant_state]]\nname = \"off\"\nunits = [\"U2\"]\ntag = \"PT\"", "below` or `above"),
            ("[[alarms.plant_state]]\nname = \"off\"\nunits = []\ntag = \"PT\"\nbelow = 5", "units"),
            ("[alarms.rationale.wear_index]\ntime_to_respond_min = 0", "rationale.wear_index.time_to_respond_min"),
            ("[alarms.rationale.wear_index]\nclass = \"sometimes\"", "class"),
            ("[alarms.component_rationale.\"A\".wear_index]\ncorrective_action = \"\"", "component_rationale"),
            ("[alarms.delays.damage_rate]\noff_delay_s = 1e9", "delays.damage_rate.off_delay_s"),
            ("[alarms]\nmax_shelve_h = 721", "max_shelve_h"),
            ("[alarms]\nmax_shelve_h = nan", "max_shelve_h"),
        ] {
            let errors = service(text).expect_err(text);
            assert_eq!(errors.len(), 1, "{text}: {errors:?}");
            assert!(errors[0].contains(key), "{text}: {}", errors[0]);
        }
        assert!(service("[http]\nlisten = \"[::1]:8470\"").is_ok());
    }

    #[test]
    fn the_alarm_journal_keeps_ten_thousand_events_unless_told() {
        assert_eq!(store_section("").unwrap().store.alarm_journal_max_events, 10_000);
        assert_eq!(StoreSettings::default().alarm_journal_max_events, 10_000);
        assert_eq!(store_section("alarm_journal_max_events = 500").unwrap().store.alarm_journal_max_events, 500);
    }

    #[test]
    fn an_alarm_journal_of_nothing_is_refused_with_the_fix() {
        let errors = store_section("alarm_journal_max_events = 0").unwrap_err();
        assert_eq!(errors.len(), 1, "{errors:?}");
        assert!(errors[0].contains("[store]") && errors[0].contains("use at least 1"), "{}", errors[0]);
        let typo = store_section("alarm_journal_max = 5").unwrap_err();
        assert!(typo[0].contains("unknown field"), "{typo:?}");
    }

    #[test]
    fn the_trend_keeps_a_week_of_minutes_per_component_unless_told() {
        assert_eq!(store_section("").unwrap().store.trend_points_per_component, 10_080);
        assert_eq!(StoreSettings::default().trend_points_per_component, 10_080);
        let s = store_section("trend_points_per_component = 500").unwrap();
        assert_eq!(s.store.trend_points_per_component, 500);
    }

    #[test]
    fn group_commits_wait_150_ms_unless_told() {
        assert_eq!(store_section("").unwrap().store.commit_interval_ms, 150);
        assert_eq!(StoreSettings::default().commit_interval_ms, 150);
        assert_eq!(store_section("commit_interval_ms = 0").unwrap().store.commit_interval_ms, 0);
        assert_eq!(store_section("commit_interval_ms = 5000").unwrap().store.commit_interval_ms, 5000);
    }

    #[test]
    fn checkpoints_are_kept_ninety_days_unless_told() {
        assert_eq!(store_section("").unwrap().store.checkpoint_days, 90);
        assert_eq!(StoreSettings::default().checkpoint_days, 90);
        assert_eq!(store_section("checkpoint_days = 400").unwrap().store.checkpoint_days, 400);
        let errors = store_section("checkpoint_days = 0").unwrap_err();
        assert_eq!(errors.len(), 1, "{errors:?}");
        assert!(
            errors[0].contains("[store]: checkpoint_days = 0") && errors[0].contains("set at least 1"),
            "{}",
            errors[0]
        );
    }

    #[test]
    fn a_trend_of_nothing_is_refused_with_the_fix() {
        let errors = store_section("trend_points_per_component = 0\nalarm_journal_max_events = 0").unwrap_err();
        assert_eq!(errors.len(), 2, "both problems at once: {errors:?}");
        let trend = errors.iter().find(|e| e.contains("trend_points_per_component")).unwrap();
        assert!(trend.contains("[store]") && trend.contains("use at least 1"), "{trend}");
    }
}
