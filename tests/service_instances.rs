//! Two instances on one broker with the same `[mqtt] topic_prefix` would
//! overwrite each other's retained status (and share alarm and command
//! topics): the second to start warns, in its log and in the snapshot's
//! `warnings`, naming the other instance; the first warns too when the
//! second announces itself. A restart of the same instance is no conflict.
//! Real mosquitto, real `lifeledger run` processes.

mod common;

use common::service::{Service, ServiceConfig};
use common::{free_port, poll_until, Mosquitto};
use std::path::{Path, PathBuf};

fn config(dir: &Path, plant: &str, client_id: &str, mqtt_port: u16, http_port: u16) -> PathBuf {
    ServiceConfig { plant, client_id, ..ServiceConfig::default() }.write(dir, mqtt_port, http_port)
}

fn warnings(svc: &Service) -> Vec<String> {
    svc.snapshot()
        .and_then(|s| s["warnings"].as_array().cloned())
        .unwrap_or_default()
        .iter()
        .filter_map(|w| w.as_str().map(String::from))
        .collect()
}

#[test]
fn a_second_instance_on_the_same_topic_prefix_is_warned_about() {
    let broker = Mosquitto::start();
    let (dir_a, dir_b) = (tempfile::tempdir().unwrap(), tempfile::tempdir().unwrap());
    let http_a = free_port();
    let cfg_a = config(dir_a.path(), "North Station", "ll-north", broker.port, http_a);
    let a = Service::start(&cfg_a, http_a);
    a.wait_connected();
    let http_b = free_port();
    let cfg_b = config(dir_b.path(), "South Station", "ll-south", broker.port, http_b);
    let b = Service::start(&cfg_b, http_b);
    b.wait_connected();
    // B found A's retained status under the shared prefix.
    let w = poll_until("a warning about the other instance in B's snapshot", || {
        let w = warnings(&b);
        w.iter().any(|w| w.contains("North Station")).then_some(w)
    });
    let text = w.join("\n");
    assert!(text.contains("ll-north") && text.contains("topic_prefix") && text.contains("lifeledger/status"), "{text}");
    // A hears B's status announce itself and warns too.
    poll_until("a warning about B in A's snapshot", || {
        warnings(&a).iter().any(|w| w.contains("South Station")).then_some(())
    });
    let (_, log_b) = b.sigterm_with_log();
    assert!(log_b.contains("WARN") && log_b.contains("North Station"), "B's log lacks the warning:\n{log_b}");
    drop(a);
}

#[test]
fn a_restart_of_the_same_instance_is_no_conflict() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http = free_port();
    let cfg = config(dir.path(), "North Station", "ll-north", broker.port, http);
    let a = Service::start(&cfg, http);
    a.wait_connected();
    a.sigterm();
    let a = Service::start(&cfg, http);
    a.wait_connected();
    // Its own retained status (offline, then online) came back to it by now:
    // wait for a snapshot that has the field, then for a while longer.
    poll_until("the snapshot", || a.snapshot().filter(|s| s["warnings"].is_array()));
    // (The configuration's own warnings, "configuration: ...", are no
    // instance conflict.)
    for _ in 0..20 {
        let w = warnings(&a);
        assert!(w.iter().all(|w| w.starts_with("configuration: ")), "{w:?}");
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
}

#[test]
fn check_config_says_each_instance_needs_its_own_prefix() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = config(dir.path(), "North Station", "ll-north", 1883, 8470);
    let mut cmd = std::process::Command::new(common::workspace_bin());
    cmd.args(["check-config", cfg.to_str().unwrap()]);
    let o = common::output_within_budget(cmd, "check-config");
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{out}");
    let line = out.lines().find(|l| l.contains("topic_prefix")).unwrap_or_else(|| panic!("{out}"));
    assert!(line.contains("\"lifeledger/\"") && line.contains("own"), "{line}");
}
