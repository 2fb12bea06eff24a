//! What a SIGHUP reload may change, decided without I/O.
//!
//! [`plan`] compares the running configuration with the newly read one and
//! either refuses the reload (it would retire every configured component,
//! or more than half of them, and the new file does not say
//! `[plant] allow_retiring_most = true`) or returns what to apply:
//! the new service settings with every setting that only takes effect at
//! start-up kept at its running value (the names of those that changed go
//! to the log and the snapshot as `restart_required`), and the broker
//! subscriptions to add and to drop.
//!
//! The ledger thread applies the plan; the MQTT intake task re-subscribes
//! from the shared [`SharedFilters`] on every new connection, so a changed
//! topic template survives a broker that lost the session.

use super::settings::ServiceSettings;
use crate::settings::LoadedConfig;
use std::sync::{Arc, Mutex};

/// The subscription filters in force, shared by the ledger thread (which
/// changes them on reload) and the intake task (which subscribes to them on
/// every connection).
pub type SharedFilters = Arc<Mutex<Vec<String>>>;

/// A reload the ledger may apply.
#[derive(Debug)]
pub struct ReloadPlan {
    /// The new service settings, with start-up-only settings kept as running.
    pub service: ServiceSettings,
    /// Settings that changed but need a restart, by name (`[http] listen`).
    pub restart_required: Vec<String>,
    /// Filters to subscribe to (new) and to drop (no longer configured).
    pub subscribe: Vec<String>,
    pub unsubscribe: Vec<String>,
}

/// Refuses a reload that would retire every running component or more than
/// half of them, unless `allow` (`[plant] allow_retiring_most` of the new
/// file). A mistaken or truncated file must not stop the plant's ledgers:
/// their samples would be acknowledged and thrown away.
pub fn retire_check(running: &[&str], new: &[&str], allow: bool) -> Result<(), String> {
    let retiring: Vec<&str> = running.iter().copied().filter(|n| !new.contains(n)).collect();
    if running.is_empty() || retiring.is_empty() || allow {
        return Ok(());
    }
    let all = retiring.len() == running.len();
    if all || 2 * retiring.len() > running.len() {
        let shown: Vec<&str> = retiring.iter().copied().take(10).collect();
        let more = if retiring.len() > shown.len() {
            format!(" and {} more", retiring.len() - shown.len())
        } else {
            String::new()
        };
        return Err(format!(
            "it would retire {} of the {} running components ({}{more}){}; the running configuration stays. \
             If that is intended, set [plant] allow_retiring_most = true in the new file and reload again",
            retiring.len(),
            running.len(),
            shown.join(", "),
            if all { ", every one" } else { ", more than half" },
        ));
    }
    Ok(())
}

/// Names of the settings that differ between `old` and `new` but are only
/// read at start-up.
pub fn restart_required(old: &ServiceSettings, new: &ServiceSettings) -> Vec<String> {
    let mut r = vec![];
    let mut check = |changed: bool, name: &str| {
        if changed {
            r.push(name.to_string());
        }
    };
    let (a, b) = (&old.mqtt, &new.mqtt);
    check(a.host != b.host, "[mqtt] host");
    check(a.port != b.port, "[mqtt] port");
    check(a.client_id != b.client_id, "[mqtt] client_id");
    check(a.keep_alive_s != b.keep_alive_s, "[mqtt] keep_alive_s");
    check(a.username != b.username, "[mqtt] username");
    check(a.password_env != b.password_env, "[mqtt] password_env");
    check(a.password_file != b.password_file, "[mqtt] password_file");
    check(a.tls != b.tls, "[mqtt.tls]");
    check(a.topic_prefix != b.topic_prefix, "[mqtt] topic_prefix");
    check(a.reconnect_min_s != b.reconnect_min_s, "[mqtt] reconnect_min_s");
    check(a.reconnect_max_s != b.reconnect_max_s, "[mqtt] reconnect_max_s");
    check(a.max_message_bytes != b.max_message_bytes, "[mqtt] max_message_bytes");
    check(old.store.path != new.store.path, "[store] path");
    check(old.http.listen != new.http.listen, "[http] listen");
    check(old.http.token_env != new.http.token_env, "[http] token_env");
    check(old.database != new.database, "[database]");
    r
}

/// The plan for reloading from (`old_cfg`, `old`) to (`new_cfg`, `new`), or
/// the reason it is refused.
pub fn plan(
    old_cfg: &LoadedConfig,
    old: &ServiceSettings,
    new_cfg: &LoadedConfig,
    new: ServiceSettings,
) -> Result<ReloadPlan, String> {
    let running: Vec<&str> = old_cfg.plan.components.iter().map(|c| c.name.as_str()).collect();
    let next: Vec<&str> = new_cfg.plan.components.iter().map(|c| c.name.as_str()).collect();
    retire_check(&running, &next, new_cfg.settings.plant.allow_retiring_most)?;
    let restart_required = restart_required(old, &new);
    // Keep what only start-up reads; take the subscriptions and everything
    // the ledger reads as it goes.
    let mut service = new;
    let subscriptions = std::mem::take(&mut service.mqtt.subscriptions);
    service.mqtt = old.mqtt.clone();
    service.mqtt.subscriptions = subscriptions;
    service.store.path = old.store.path.clone();
    service.http = old.http.clone();
    service.database = old.database.clone();
    let before = super::ledger::Ledger::filters(old);
    let after = super::ledger::Ledger::filters(&service);
    let subscribe = after.iter().filter(|f| !before.contains(f)).cloned().collect();
    let unsubscribe = before.iter().filter(|f| !after.contains(f)).cloned().collect();
    Ok(ReloadPlan { service, restart_required, subscribe, unsubscribe })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn service(text: &str) -> ServiceSettings {
        ServiceSettings::from_settings(&toml::from_str(text).unwrap()).unwrap()
    }

    #[test]
    fn retiring_every_component_or_most_is_refused_unless_allowed() {
        let running = ["A", "B", "C", "D"];
        let e = retire_check(&running, &[], false).unwrap_err();
        assert!(e.contains("retire 4 of the 4") && e.contains("every one") && e.contains("allow_retiring_most"), "{e}");
        let e = retire_check(&running, &["A"], false).unwrap_err();
        assert!(e.contains("retire 3 of the 4") && e.contains("more than half"), "{e}");
        // Half is allowed; so is renaming nothing or adding.
        assert!(retire_check(&running, &["A", "B"], false).is_ok());
        assert!(retire_check(&running, &["A", "B", "C", "D", "E"], false).is_ok());
        assert!(retire_check(&["A"], &["A"], false).is_ok());
        // The one component of a one-component plant is every one.
        assert!(retire_check(&["A"], &["Z"], false).is_err());
        assert!(retire_check(&running, &[], true).is_ok());
        assert!(retire_check(&[], &[], false).is_ok());
    }

    #[test]
    fn a_plan_moves_the_subscription_and_keeps_start_up_settings() {
        let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
        let old = service("[[mqtt.subscription]]\ntopic = \"p/{tag}\"\n[http]\nlisten = \"127.0.0.1:1\"");
        let new = service("[[mqtt.subscription]]\ntopic = \"q/{tag}\"\n[http]\nlisten = \"127.0.0.1:2\"");
        let p = plan(&cfg, &old, &cfg, new).unwrap();
        assert_eq!((p.subscribe, p.unsubscribe), (vec!["q/+".to_string()], vec!["p/+".to_string()]));
        assert_eq!(p.restart_required, ["[http] listen"]);
        assert_eq!(p.service.http.listen, "127.0.0.1:1", "the running address stays");
        assert_eq!(p.service.mqtt.subscriptions[0].topic, "q/{tag}");
        // A plant emptied by mistake is refused; with the permission, taken.
        let mut empty = cfg.clone();
        empty.plan.components.clear();
        let e = plan(&cfg, &old, &empty, old.clone()).unwrap_err();
        assert!(e.contains("every one"), "{e}");
        empty.settings.plant.allow_retiring_most = true;
        assert!(plan(&cfg, &old, &empty, old.clone()).is_ok());
    }

    #[test]
    fn start_up_settings_are_named_and_kept_while_the_rest_is_taken() {
        let old = service(
            "[mqtt]\nhost = \"a\"\n[[mqtt.subscription]]\ntopic = \"p/{tag}\"\n[store]\npath = \"x.ledger\"\n\
             commit_max_samples = 10\n[http]\nlisten = \"127.0.0.1:1\"",
        );
        let new = service(
            "[mqtt]\nhost = \"b\"\n[[mqtt.subscription]]\ntopic = \"q/{tag}\"\n[store]\npath = \"y.ledger\"\n\
             commit_max_samples = 20\n[http]\nlisten = \"127.0.0.1:2\"\n\
             [database]\nurl = \"http://127.0.0.1:9\"\norg = \"o\"\nbucket = \"b\"",
        );
        assert_eq!(restart_required(&old, &new), ["[mqtt] host", "[store] path", "[http] listen", "[database]"]);
        assert!(restart_required(&old, &old.clone()).is_empty());
    }
}
