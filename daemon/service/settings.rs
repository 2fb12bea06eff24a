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
}

fn default_path() -> PathBuf {
    PathBuf::from("lifeledger.ledger")
}
fn default_batch() -> usize {
    2000
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

impl Default for StoreSettings {
    fn default() -> Self {
        StoreSettings {
            path: default_path(),
            commit_max_samples: default_batch(),
            series_interval_s: default_series(),
            health_interval_s: default_health(),
            alarm_journal_max_events: default_journal(),
            trend_points_per_component: default_trend(),
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
    /// Environment variable holding a token that allows acknowledge and
    /// shelve through HTTP; without it the HTTP side is read-only.
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
    match t {
        None => Ok(None),
        Some(t) => T::deserialize(toml::Value::Table(t.clone())).map(Some).map_err(|e| format!("[{name}]: {e}")),
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
        let store = section::<StoreSettings>("store", &s.store).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        if store.as_ref().is_some_and(|s| s.alarm_journal_max_events == 0) {
            errors.push(
                "[store]: alarm_journal_max_events = 0 would keep no alarm history; set at least 1 \
                 (200 or more fills the status page's event list after a restart)"
                    .into(),
            );
        }
        if store.as_ref().is_some_and(|s| s.trend_points_per_component == 0) {
            errors.push(format!(
                "[store]: trend_points_per_component = 0 would keep no trend for the status page; set at least 1 \
                 (the default {} is one week of points at series_interval_s = 60)",
                default_trend()
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
        let http = section::<HttpSettings>("http", &s.http).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        let alarms = section::<AlarmConfig>("alarms", &s.alarms).unwrap_or_else(|e| {
            errors.push(e);
            None
        });
        if let Some(a) = &alarms {
            for (key, v, fix) in [
                ("stale_grace_s", a.stale_grace_s, "for example 60"),
                ("no_data_alarm_s", a.no_data_alarm_s, "for example 300"),
            ] {
                if !(v.is_finite() && (0.0..=86_400.0).contains(&v)) {
                    errors.push(format!("[alarms] {key}: {v} is not a number of seconds from 0 to 86400; {fix}"));
                }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn store_section(text: &str) -> Result<ServiceSettings, Vec<String>> {
        let s: Settings = toml::from_str(&format!("[store]\n{text}")).unwrap();
        ServiceSettings::from_settings(&s)
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
        assert!(errors[0].contains("[store]") && errors[0].contains("set at least 1"), "{}", errors[0]);
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
    fn a_trend_of_nothing_is_refused_with_the_fix() {
        let errors = store_section("trend_points_per_component = 0\nalarm_journal_max_events = 0").unwrap_err();
        assert_eq!(errors.len(), 2, "both problems at once: {errors:?}");
        let trend = errors.iter().find(|e| e.contains("trend_points_per_component")).unwrap();
        assert!(trend.contains("[store]") && trend.contains("set at least 1"), "{trend}");
    }
}
