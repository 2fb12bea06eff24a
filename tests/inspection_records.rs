//! Inspection records end to end: entered at the command line against a
//! stopped service's ledger, applied by the next backfill at their dates,
//! and `replay --inspections` with the listed records gives the same
//! ledger; records reported as recorded survive a writer killed with
//! SIGKILL.
//!
//! The replay comparison checks the one-path property (records are events
//! at their effective instants), not the physics: the re-basing rules are
//! checked against hand-worked closed forms in `engine::inspection::tests`.

mod common;

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use lifeledger::store::inspection::{read_inspections, NewInspection};
use lifeledger::store::Store;

const LEG_A: &str = "U2-SH3-OUTLET-LEG-A";

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_lifeledger"))
}

fn ok(args: &[&str]) -> String {
    let o = common::output_within_budget(
        {
            let mut c = bin();
            c.args(args);
            c
        },
        &format!("lifeledger {args:?}"),
    );
    assert!(
        o.status.success(),
        "lifeledger {args:?} failed:\n{}\n{}",
        String::from_utf8_lossy(&o.stderr),
        String::from_utf8_lossy(&o.stdout)
    );
    String::from_utf8_lossy(&o.stdout).into()
}

fn by_name(json: &str) -> serde_json::Map<String, serde_json::Value> {
    let v: serde_json::Value = serde_json::from_str(json).unwrap();
    v["components"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| (c["component"].as_str().unwrap().to_string(), c.clone()))
        .collect()
}

#[test]
fn records_entered_on_a_stopped_ledger_apply_at_their_dates_and_replay_repeats_them() {
    let dir = tempfile::tempdir().unwrap();
    let ledger = dir.path().join("ledger.sqlite");
    let config = dir.path().join("plant.toml");
    let demo = std::fs::read_to_string("config/demo/plant.toml").unwrap();
    std::fs::write(&config, format!("{demo}\n[store]\npath = {:?}\n", ledger.to_str().unwrap())).unwrap();
    let (cfg, l) = (config.to_str().unwrap(), ledger.to_str().unwrap());
    let first = dir.path().join("first.csv");
    std::fs::write(&first, common::demo_rows("2026-10-01", "2026-10-15")).unwrap();
    ok(&["backfill", "--config", cfg, "--ledger", l, "--input", first.to_str().unwrap()]);

    // A wall survey dated inside the history still to come, and a strain
    // measurement dated before the ledger's instant (late).
    let add = |kind: &str, date: &str, value: &str, unit: &str| {
        ok(&[
            "inspection",
            "add",
            "--config",
            cfg,
            "--ledger",
            l,
            "--component",
            LEG_A,
            "--date",
            date,
            "--by",
            "R. Tester",
            "--kind",
            kind,
            "--value",
            value,
            "--unit",
            unit,
            "--method",
            "UT",
            "--location",
            "bend 2",
        ])
    };
    let out = add("wall_thickness", "2026-10-20", "5.1", "mm");
    assert!(out.contains("recorded inspection record #1"), "{out}");
    assert!(out.contains("when it next starts"), "{out}");
    add("creep_strain", "2026-10-10", "0.30", "%");
    let listed = ok(&["inspection", "list", "--config", cfg, "--ledger", l]);
    assert!(listed.contains("pending"), "{listed}");
    // A correction of a record that does not exist is refused, naming it.
    let o = common::output_within_budget(
        {
            let mut c = bin();
            c.args([
                "inspection",
                "correct",
                "--config",
                cfg,
                "--ledger",
                l,
                "--id",
                "99",
                "--date",
                "2026-10-20",
                "--by",
                "R. Tester",
                "--kind",
                "wall_thickness",
                "--value",
                "5.0",
            ]);
            c
        },
        "inspection correct of a missing record",
    );
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("--id 99"), "{}", String::from_utf8_lossy(&o.stderr));

    let second = dir.path().join("second.csv");
    std::fs::write(&second, common::demo_rows("2026-10-15", "2026-11-01")).unwrap();
    ok(&["backfill", "--config", cfg, "--ledger", l, "--input", second.to_str().unwrap()]);
    let rows = read_inspections(&ledger, None).unwrap();
    assert!(rows.iter().all(|r| r.accepted.is_some()), "the backfill accepts pending records: {rows:?}");
    let wall: serde_json::Value = serde_json::from_str(rows[0].accepted.as_deref().unwrap()).unwrap();
    assert_eq!(wall["effective_ms"], rows[0].finding_ms, "dated ahead of the ledger: applied at its date");
    let strain: serde_json::Value = serde_json::from_str(rows[1].accepted.as_deref().unwrap()).unwrap();
    assert!(strain["effective_ms"].as_i64().unwrap() > rows[1].finding_ms, "late: applied at the ledger's instant");

    let records = dir.path().join("records.json");
    std::fs::write(&records, ok(&["inspection", "list", "--config", cfg, "--ledger", l, "--json"])).unwrap();
    let whole = dir.path().join("whole.csv");
    std::fs::write(&whole, common::demo_rows("2026-10-01", "2026-11-01")).unwrap();
    let replayed = by_name(&ok(&[
        "replay",
        "--config",
        cfg,
        "--input",
        whole.to_str().unwrap(),
        "--inspections",
        records.to_str().unwrap(),
        "--format",
        "json",
    ]));
    let plain = by_name(&ok(&["replay", "--config", cfg, "--input", whole.to_str().unwrap(), "--format", "json"]));
    let live = by_name(&ok(&["ledger", "--config", cfg, "--format", "json"]));
    for key in ["creep_life_fraction", "creep_strain"] {
        let (a, b) = (live[LEG_A][key].as_f64().unwrap(), replayed[LEG_A][key].as_f64().unwrap());
        // Two backfills against one replay: equal to rounding (the seam of
        // the two backfills, as in tests/recovery.rs).
        assert!((a - b).abs() <= 1e-12 * b.abs(), "{key}: ledger {a}, replay with records {b}");
        let c = plain[LEG_A][key].as_f64().unwrap();
        assert!((a - c).abs() > 1e-6 * c.abs(), "{key}: the records must change the ledger ({a} vs {c})");
    }
    // The thinner wall (5.1 mm against 8.0 − 2.2 = 5.8 mm configured)
    // raises the rate: more life consumed than without the record.
    assert!(live[LEG_A]["creep_life_fraction"].as_f64() > plain[LEG_A]["creep_life_fraction"].as_f64());
}

/// Set to the ledger path in the writer child.
const WRITER_ENV: &str = "LIFELEDGER_TEST_INSPECTION_WRITER";
const MARK: &str = "writer: ";

/// The writer when run as the child: appends records until killed,
/// reporting each id after `append_inspection` returned.
#[test]
fn inspection_writer_child() {
    let Some(path) = std::env::var_os(WRITER_ENV) else {
        return;
    };
    let mut store = Store::open(Path::new(&path)).expect("writer opens the ledger");
    for k in 0.. {
        let n = record(k);
        let id = store.append_inspection(&n).expect("writer appends");
        println!("{MARK}recorded {id} {k}");
    }
}

fn record(k: i64) -> NewInspection {
    NewInspection {
        component: "c".into(),
        finding_ms: 1_790_000_000_000 + k,
        entered_ms: 1_790_000_000_000,
        entered_by: format!("inspector {k}"),
        method: "UT".into(),
        location: "x".repeat(300),
        kind: "wall_thickness".into(),
        value: Some(5.0 + k as f64 * 1e-3),
        unit: "mm".into(),
        detail: "{}".into(),
        notes: String::new(),
        supersedes: None,
    }
}

#[test]
fn recorded_inspections_survive_a_writer_killed_with_sigkill() {
    let dir = tempfile::tempdir().unwrap();
    let path: PathBuf = dir.path().join("ledger.sqlite");
    drop(Store::open(&path).unwrap());
    let exe = std::env::current_exe().unwrap();
    let mut reported = vec![];
    for round in 0..3 {
        let mut child = Command::new(&exe)
            .args(["--exact", "inspection_writer_child", "--nocapture", "--test-threads=1"])
            .env(WRITER_ENV, &path)
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let mut lines = BufReader::new(child.stdout.take().unwrap()).lines();
        let mut seen = 0;
        // Bounded: the writer reports a line per record; 20 are enough.
        while seen < 20 {
            let Some(Ok(line)) = lines.next() else {
                let _ = child.kill();
                panic!("round {round}: the writer stopped after {seen} records without being killed");
            };
            if let Some(rest) = line.split(MARK).nth(1) {
                let mut it = rest.split_whitespace().skip(1);
                let id: i64 = it.next().unwrap().parse().unwrap();
                let k: i64 = it.next().unwrap().parse().unwrap();
                reported.push((id, k));
                seen += 1;
            }
        }
        child.kill().unwrap(); // SIGKILL
        child.wait().unwrap();
        let rows = read_inspections(&path, None).unwrap();
        for &(id, k) in &reported {
            let r = rows.iter().find(|r| r.id == id).unwrap_or_else(|| panic!("record {id} reported, then lost"));
            let want = record(k);
            assert_eq!((r.finding_ms, r.value, &r.entered_by), (want.finding_ms, want.value, &want.entered_by));
            assert_eq!(r.location, want.location, "a torn row");
        }
    }
}
