//! Recovery of a poisoned ledger, end to end through the command line.
//!
//! A service's ledger is built from the demo history by three backfills
//! (so it holds checkpoints from the 10th, 20th and 31st of October 2026),
//! then poisoned by a bad historian export: a month of outlet leg A
//! temperatures at 690 °C (inside the tag's range and at plausible times,
//! so no screen can catch it; samples stamped years ahead no longer reach
//! a ledger at all). It is rolled back (one component,
//! and in a second copy the whole ledger) to the checkpoint of the 20th,
//! the history from the 20th on is backfilled, and every component must
//! then match a plain `replay` of the unpoisoned history to 1e-12
//! relative.
//!
//! The reference is the unpoisoned replay of the same history: these tests
//! check the recovery path (checkpoints, rollback, backfill), not the
//! physics, which other tests check against outside references.
//!
//! The live service takes the checkpoints itself: a run across midnight
//! against a real mosquitto leaves one per component per UTC day, rollback
//! refuses while the service runs, and the service restarts on the
//! rolled-back ledger with the rollback in its components' alarm history.

mod common;

use common::BoundedOutput;

use std::path::{Path, PathBuf};
use std::process::Command;

use common::service::{publish_all, samples, Service, ServiceConfig, T0};
use common::{free_port, Mosquitto};

/// Outlet leg A: the poisoned component. It reads U2.SH3.TE-311A (its own)
/// and U2.SH3.PT-301, which leg B and the outlet header read too.
const LEG_A: &str = "U2-SH3-OUTLET-LEG-A";
/// The poison: a bad export, hourly leg-A temperatures of 690 °C through
/// November 2026 (plausible times, inside the tag's valid range).
fn poison_rows() -> String {
    let mut s = String::new();
    for d in 1..=30 {
        for h in 0..24 {
            s.push_str(&format!("2026-11-{d:02}T{h:02}:00:00Z,U2.SH3.TE-311A,690.0,good\n"));
        }
    }
    s
}

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_lifeledger"))
}

/// Runs the command line with `args` (and `env` for the child only):
/// (exit code, stdout, stderr).
fn run_env(args: &[&str], env: &[(&str, &str)]) -> (i32, String, String) {
    let o = bin().args(args).envs(env.iter().copied()).bounded_output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into(),
        String::from_utf8_lossy(&o.stderr).into(),
    )
}

fn run(args: &[&str]) -> (i32, String, String) {
    run_env(args, &[])
}

/// Runs and requires success; returns stdout.
fn ok(args: &[&str]) -> String {
    let (code, out, err) = run(args);
    assert_eq!(code, 0, "lifeledger {args:?} failed:\n{err}\n{out}");
    out
}

/// A working directory with the demo configuration pointed at its own
/// ledger file.
struct Plant {
    dir: tempfile::TempDir,
    config: PathBuf,
    ledger: PathBuf,
}

impl Plant {
    fn new() -> Plant {
        let dir = tempfile::tempdir().unwrap();
        let ledger = dir.path().join("ledger.sqlite");
        let config = dir.path().join("plant.toml");
        let demo = std::fs::read_to_string("config/demo/plant.toml").unwrap();
        std::fs::write(&config, format!("{demo}\n[store]\npath = {:?}\n", ledger.to_str().unwrap())).unwrap();
        Plant { dir, config, ledger }
    }

    fn file(&self, name: &str, text: &str) -> PathBuf {
        let p = self.dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    fn config(&self) -> &str {
        self.config.to_str().unwrap()
    }

    fn backfill(&self, ledger: &Path, csv: &Path) -> String {
        ok(&[
            "backfill",
            "--config",
            self.config(),
            "--ledger",
            ledger.to_str().unwrap(),
            "--input",
            csv.to_str().unwrap(),
        ])
    }

    /// The poison rows backfilled as a bad historian export delivers them.
    fn poison(&self, ledger: &Path) {
        let csv = self.file("poison.csv", &poison_rows());
        ok(&[
            "backfill",
            "--config",
            self.config(),
            "--ledger",
            ledger.to_str().unwrap(),
            "--input",
            csv.to_str().unwrap(),
        ]);
    }

    /// `lifeledger ledger --format json` of `ledger`: its components by name.
    fn components(&self, ledger: &Path) -> serde_json::Map<String, serde_json::Value> {
        let config = self.file(
            "view.toml",
            &format!(
                "{}\n[store]\npath = {:?}\n",
                std::fs::read_to_string("config/demo/plant.toml").unwrap(),
                ledger.to_str().unwrap()
            ),
        );
        by_name(&ok(&["ledger", "--config", config.to_str().unwrap(), "--format", "json"]))
    }
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

fn num(c: &serde_json::Value, key: &str) -> f64 {
    c[key].as_f64().unwrap_or_else(|| panic!("{} has no number {key}: {}", c["component"], c[key]))
}

/// Every component of `got` against `want`: life fraction, creep strain
/// and wear depth equal to 1e-12 relative, integrated to the same time.
fn assert_matches(got: &serde_json::Map<String, serde_json::Value>, want: &serde_json::Map<String, serde_json::Value>) {
    assert_eq!(got.keys().collect::<Vec<_>>(), want.keys().collect::<Vec<_>>());
    for (name, w) in want {
        let g = &got[name];
        for key in ["creep_life_fraction", "creep_strain", "wear_depth_mm", "integrated_h", "unmonitored_h"] {
            let (a, b) = (num(g, key), num(w, key));
            let tol = 1e-12 * b.abs();
            assert!((a - b).abs() <= tol, "{name} {key}: {a} after recovery, {b} unpoisoned");
        }
        assert_eq!(g["integrated_to"], w["integrated_to"], "{name}");
    }
}

/// The rollback entries of `component` in the ledger's alarm journal.
fn rollbacks(ledger: &Path, component: &str) -> Vec<serde_json::Value> {
    lifeledger::store::JournalReader::new(ledger)
        .component(component, 100)
        .unwrap()
        .into_iter()
        .filter(|(_, e)| e.index == "ledger_rollback")
        .map(|(_, e)| serde_json::from_str(&e.event).unwrap())
        .collect()
}

#[test]
fn a_poisoned_ledger_rolled_back_and_backfilled_equals_an_unpoisoned_replay() {
    let plant = Plant::new();
    let whole = common::demo_rows("2026-10-01", "2026-11");
    let history = plant.file("history.csv", &whole);
    let clean =
        by_name(&ok(&["replay", "--config", plant.config(), "--input", history.to_str().unwrap(), "--format", "json"]));

    // The service's ledger, kept by three backfills: a checkpoint at the
    // end of each.
    for (i, (from, to)) in
        [("2026-10-01", "2026-10-11"), ("2026-10-11", "2026-10-21"), ("2026-10-21", "2026-11")].into_iter().enumerate()
    {
        let part = plant.file(&format!("part{i}.csv"), &common::demo_rows(from, to));
        plant.backfill(&plant.ledger, &part);
    }
    assert_matches(&plant.components(&plant.ledger), &clean);
    // The backfills left a daily history (issue 13's years of history for
    // a new installation): a point for every day of October, in order,
    // life fraction never falling.
    let days = lifeledger::store::inspection::read_history(&plant.ledger, LEG_A).unwrap();
    assert!(days.len() >= 30, "one history point a day of the backfilled month, got {}", days.len());
    for w in days.windows(2) {
        assert!(
            w[1].t_ms > w[0].t_ms && w[1].life_fraction >= w[0].life_fraction,
            "{:?} then {:?}",
            w[0].t_ms,
            w[1].t_ms
        );
    }

    plant.poison(&plant.ledger);
    let poisoned = plant.components(&plant.ledger);
    let leg_a = &poisoned[LEG_A];
    assert!(
        leg_a["integrated_to"].as_str().unwrap().starts_with("2026-11-30"),
        "the poison must take for this test to mean anything: {}",
        leg_a["integrated_to"]
    );
    // Reports cap a life fraction past exhaustion at 10 (the part is flagged
    // exhausted); a month at 690 °C takes leg A far past that.
    assert!(num(leg_a, "creep_life_fraction") > 10.0 * num(&clean[LEG_A], "creep_life_fraction"));
    let copy = plant.dir.path().join("whole.sqlite");
    std::fs::copy(&plant.ledger, &copy).unwrap();
    let since_20th = plant.file("since-20th.csv", &common::demo_rows("2026-10-20", "2026-11"));

    // One component: leg A, with its own tag and the pressure tag it
    // shares with leg B and the header, which must count nothing twice.
    let out = ok(&[
        "rollback",
        "--config",
        plant.config(),
        "--component",
        LEG_A,
        "--to",
        "2026-10-25T00:00:00Z",
        "--by",
        "A. Engineer",
        "--reason",
        "historian export in the wrong unit",
        "--format",
        "json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["written"], true);
    assert_eq!(v["components"][0]["component"], LEG_A);
    let pt = v["tags"].as_array().unwrap().iter().find(|t| t["tag"] == "U2.SH3.PT-301").expect("shared tag rewound");
    assert_eq!(pt["also_read_by"], serde_json::json!(["U2-SH3-OUTLET-LEG-B", "U2-SH3-OUTLET-HEADER"]));
    let rolled = plant.components(&plant.ledger);
    assert_eq!(rolled[LEG_A]["integrated_to"], "2026-10-20T23:59:00.000Z", "the checkpoint of the 20th");
    for (name, c) in &poisoned {
        if name != LEG_A {
            assert_eq!(&rolled[name], c, "{name} is not rolled back");
        }
    }
    let journal = rollbacks(&plant.ledger, LEG_A);
    assert_eq!(journal.len(), 1, "{journal:?}");
    let j = &journal[0];
    assert_eq!(
        (j["by"].as_str(), j["reason"].as_str()),
        (Some("A. Engineer"), Some("historian export in the wrong unit"))
    );
    assert_eq!(j["integrated_to_before"], "2026-11-30T23:00:00.000Z");
    assert_eq!(j["checkpoint"], "2026-10-20T23:59:00.000Z");
    assert_eq!(j["transition"], "rolled_back");
    assert!(j["message"].as_str().unwrap().contains("A. Engineer"), "{j}");

    plant.backfill(&plant.ledger, &since_20th);
    assert_matches(&plant.components(&plant.ledger), &clean);

    // The whole ledger, in the copy.
    ok(&[
        "rollback",
        "--config",
        plant.config(),
        "--ledger",
        copy.to_str().unwrap(),
        "--all",
        "--to",
        "2026-10-25T00:00:00Z",
        "--by",
        "A. Engineer",
        "--reason",
        "bad historian export",
    ]);
    let rolled = plant.components(&copy);
    assert!(rolled.values().all(|c| c["integrated_to"] == "2026-10-20T23:59:00.000Z"), "every component at the 20th");
    for name in clean.keys() {
        assert_eq!(rollbacks(&copy, name).len(), 1, "{name} has its journal entry");
    }
    plant.backfill(&copy, &since_20th);
    assert_matches(&plant.components(&copy), &clean);
}

#[test]
fn rollback_refuses_without_who_and_why_before_the_oldest_checkpoint_and_while_in_use() {
    let plant = Plant::new();
    // Two days, kept by two backfills: checkpoints at the end of each day.
    for (i, (from, to)) in [("2026-10-01", "2026-10-02"), ("2026-10-02", "2026-10-03")].into_iter().enumerate() {
        let part = plant.file(&format!("day{i}.csv"), &common::demo_rows(from, to));
        plant.backfill(&plant.ledger, &part);
    }
    let before = plant.components(&plant.ledger);
    let base = ["rollback", "--config", plant.config(), "--component", LEG_A, "--to", "2026-10-02T06:00:00Z"];
    let with = |extra: &[&'static str]| -> Vec<&str> { base.iter().copied().chain(extra.iter().copied()).collect() };

    // Who and why are required, and must say something.
    let (code, _, err) = run(&with(&["--reason", "test"]));
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--by <NAME>"), "{err}");
    let (code, _, err) = run(&with(&["--by", "A. Engineer"]));
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--reason <TEXT>"), "{err}");
    let (code, _, err) = run(&with(&["--by", "  ", "--reason", "test"]));
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("must not be blank"), "{err}");
    // One component or all, said explicitly.
    let (code, _, err) =
        run(&["rollback", "--config", plant.config(), "--to", "2026-10-02T06:00:00Z", "--by", "A", "--reason", "B"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--component <NAME>") && err.contains("--all"), "{err}");

    // A time before the oldest checkpoint is refused, naming the component
    // and the oldest checkpoint.
    let (code, _, err) = run(&[
        "rollback",
        "--config",
        plant.config(),
        "--component",
        LEG_A,
        "--to",
        "2026-10-01T12:00:00Z",
        "--by",
        "A. Engineer",
        "--reason",
        "test",
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("refused, nothing was changed"), "{err}");
    assert!(err.contains(&format!("component {LEG_A}: no checkpoint at or before 2026-10-01T12:00:00.000Z")), "{err}");
    assert!(err.contains("its oldest is at 2026-10-01T23:59:00.000Z"), "{err}");

    // While another program has the ledger open (here the store, as the
    // running service holds it), rollback and backfill refuse.
    let held = lifeledger::store::Store::open(&plant.ledger).unwrap();
    let (code, _, err) = run(&with(&["--by", "A. Engineer", "--reason", "test"]));
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("in use") && err.contains("Stop the service"), "{err}");
    let day = plant.file("day3.csv", &common::demo_rows("2026-10-03", "2026-10-04"));
    let (code, _, err) = run(&["backfill", "--config", plant.config(), "--input", day.to_str().unwrap()]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("in use"), "{err}");
    drop(held);

    // Nothing of the above changed the ledger or the journal.
    assert_eq!(plant.components(&plant.ledger), before);
    assert!(rollbacks(&plant.ledger, LEG_A).is_empty());

    // A dry run says what it would do and changes nothing either.
    let out = ok(&with(&["--by", "A. Engineer", "--reason", "test", "--dry-run"]));
    assert!(out.contains("dry run: nothing was changed") && out.contains("2026-10-01T23:59:00.000Z"), "{out}");
    assert_eq!(plant.components(&plant.ledger), before);
}

#[test]
fn the_live_service_keeps_a_checkpoint_a_day_and_restarts_on_a_rolled_back_ledger() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = ServiceConfig { plant: "Test Station", client_id: "lifeledger-recovery", ..ServiceConfig::default() }
        .write(dir.path(), broker.port, http_port);
    let ledger = dir.path().join("ledger.sqlite");
    // Three hours from 2026-09-30T23:00Z: one before midnight, two after.
    // The hour before midnight is published, and integrated, first, so the
    // first commits fall on the 30th whatever the group commits do.
    let s: Vec<_> = samples(180).into_iter().map(|(tag, ts, v)| (tag, ts - 3600, v)).collect();
    let midnight = s.iter().position(|(_, ts, _)| *ts >= T0).unwrap();
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    publish_all(broker.port, &s[..midnight], "recovery-publisher-1");
    svc.wait_until_integrated(s[midnight - 1].1);
    publish_all(broker.port, &s[midnight..], "recovery-publisher-2");
    svc.wait_until_integrated(s.last().unwrap().1);

    let rollback = |by: &str| {
        run(&[
            "rollback",
            "--config",
            cfg.to_str().unwrap(),
            "--component",
            "SH-TUBE",
            "--to",
            "2026-09-30T23:59:59Z",
            "--by",
            by,
            "--reason",
            "test of the way back",
        ])
    };
    let (code, _, err) = rollback("A. Engineer");
    assert_eq!(code, 2, "a running service's ledger must be refused: {err}");
    assert!(err.contains("in use") && err.contains("Stop the service"), "{err}");
    assert!(svc.sigterm().success());

    // One checkpoint per component per UTC day: the 30th, then the 1st.
    let day = |ms: i64| ms.div_euclid(86_400_000);
    let store = lifeledger::store::Store::open(&ledger).unwrap();
    let mut first_tube = 0;
    for c in ["SH-TUBE", "SUPPORT"] {
        let times: Vec<i64> = store.checkpoint_times(c).unwrap().into_iter().map(|(t, _)| t).collect();
        assert_eq!(times.len(), 2, "{c}: {times:?}");
        assert_eq!(day(times[0]), day(T0 * 1000) - 1, "{c}: {times:?}");
        assert_eq!(day(times[1]), day(T0 * 1000), "{c}: {times:?}");
        if c == "SH-TUBE" {
            first_tube = times[0];
        }
    }
    drop(store);

    let (code, out, err) = rollback("A. Engineer");
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("tag TE-1 rewound") && out.contains("tag PT-1 rewound"), "{out}");

    // The service starts on the rolled-back ledger; the rollback is in the
    // tube's alarm history, and the support is as it was.
    let svc = Service::start(&cfg, http_port);
    let snap = svc.snapshot().unwrap();
    let comp =
        |name: &str| snap["components"].as_array().unwrap().iter().find(|c| c["component"] == name).unwrap().clone();
    let at = chrono::DateTime::from_timestamp_millis(first_tube).unwrap().format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string();
    assert_eq!(comp("SH-TUBE")["integrated_to"], at.as_str());
    assert_eq!(comp("SUPPORT")["integrated_to"], "2026-10-01T01:59:00.000Z");
    let history = svc.get_json("/api/components/SH-TUBE/alarms").unwrap();
    let events = history["events"].as_array().unwrap();
    let rolled = events.iter().find(|e| e["transition"] == "rolled_back").unwrap_or_else(|| panic!("{history}"));
    assert_eq!(rolled["by"], "A. Engineer");
    assert_eq!(rolled["reason"], "test of the way back");
    assert_eq!(rolled["checkpoint"], at.as_str());
    // The rollback record is no alarm event: the start-up reads past it.
    let (status, log) = svc.sigterm_with_log();
    assert!(status.success());
    assert!(!log.contains("ERROR") && !log.contains("unreadable"), "{log}");
}
