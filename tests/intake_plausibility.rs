//! Event times that cannot be true never reach a ledger: `replay` of the
//! demo history with a row stamped decades ahead gives exactly the ledger
//! of the clean history, and a row in epoch milliseconds is read as
//! milliseconds (the reproduction of a poisoned outlet leg).

mod common;

use common::BoundedOutput;
use std::io::{Read, Write};
use std::process::Command;

fn replay_json(input: &std::path::Path) -> serde_json::Value {
    let o = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .args(["replay", "--config", "config/demo/plant.toml", "--format", "json", "--input"])
        .arg(input)
        .bounded_output()
        .expect("lifeledger replay runs");
    assert!(o.status.success(), "replay failed: {}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).expect("replay prints JSON")
}

/// The demo history, decompressed, with `extra` rows appended.
fn history_with(dir: &std::path::Path, name: &str, extra: &str) -> std::path::PathBuf {
    let mut text = String::new();
    flate2::read::GzDecoder::new(std::fs::File::open("config/demo/history.csv.gz").unwrap())
        .read_to_string(&mut text)
        .unwrap();
    let path = dir.join(name);
    let mut f = std::fs::File::create(&path).unwrap();
    f.write_all(text.as_bytes()).unwrap();
    f.write_all(extra.as_bytes()).unwrap();
    path
}

fn component<'a>(v: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    v["components"].as_array().unwrap().iter().find(|c| c["component"] == name).unwrap_or_else(|| panic!("{name}"))
}

#[test]
fn a_row_stamped_decades_ahead_changes_no_ledger() {
    let dir = tempfile::tempdir().unwrap();
    let clean = replay_json(&history_with(dir.path(), "clean.csv", ""));
    let poisoned =
        replay_json(&history_with(dir.path(), "poisoned.csv", "2062-03-01T00:00:00Z,U2.SH3.TE-311A,540.0,good\n"));
    assert_eq!(poisoned["counters"]["implausible_time"], 1, "the row is counted by its own reason");
    let ex = &poisoned["implausible_time_examples"][0];
    assert!(ex["problem"].as_str().unwrap().contains("2062-03-01"), "{ex}");
    assert!(ex["line"].as_u64().unwrap() > 500_000);
    assert_eq!(poisoned["last_sample"], clean["last_sample"], "the event-time span ignores the row");
    // Every component's figures as in the clean replay.
    assert_eq!(poisoned["components"], clean["components"]);
}

#[test]
fn epoch_milliseconds_in_a_csv_are_read_as_milliseconds() {
    let dir = tempfile::tempdir().unwrap();
    // 1793577540000 ms is 2026-11-01T23:59:00Z (1 793 577 540 s after the
    // epoch: 2026-10-01 is 1 790 812 800 s, plus 31 days and 86 340 s).
    let v = replay_json(&history_with(dir.path(), "ms.csv", "1793577540000,U2.SH3.TE-311A,540.0,good\n"));
    assert_eq!(v["malformed_rows"], 3, "the shipped history's three malformed rows only");
    assert_eq!(v["counters"]["implausible_time"], 0);
    assert_eq!(v["last_sample"], "2026-11-01T23:59:00.000Z");
    let leg = component(&v, "U2-SH3-OUTLET-LEG-A");
    let f = leg["creep_life_fraction"].as_f64().unwrap();
    assert!(f.is_finite() && f < 1.0, "outlet leg A life fraction {f}");
}
