//! Inspection records against a running service (real mosquitto): the
//! HTTP API refuses a record without the token or without the person's
//! name and answers 201 once the record is on disk; the command line
//! appends beside the running service; the ledger thread applies both;
//! after SIGKILL and a restart they are still there and applied; and
//! `replay --inspections` of the same samples with the listed records
//! gives the service's ledger.
//!
//! This checks the one-path property of the live service (records are
//! events of the engine at their stored effective instants), not the
//! physics; `engine::inspection::tests` checks the rules against closed
//! forms.

mod common;

use std::path::Path;
use std::process::Command;

use common::service::{publish_all, samples, Service, ServiceConfig};
use common::{free_port, http, poll_until, Mosquitto};

const TOKEN_VAR: &str = "LIFELEDGER_TEST_ENGINEER_TOKEN";
const TOKEN: &str = "eng-token-7a3c11d0";

fn config(dir: &Path, mqtt_port: u16, http_port: u16) -> std::path::PathBuf {
    let tail = format!("token_env = \"{TOKEN_VAR}\"\n");
    ServiceConfig {
        plant: "Inspection Station",
        client_id: "lifeledger-inspections",
        tail: &tail,
        ..ServiceConfig::default()
    }
    .write(dir, mqtt_port, http_port)
}

fn ok(args: &[&str]) -> String {
    let mut c = Command::new(env!("CARGO_BIN_EXE_lifeledger"));
    c.args(args);
    let o = common::output_within_budget(c, &format!("lifeledger {args:?}"));
    assert!(o.status.success(), "lifeledger {args:?}: {}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into()
}

/// The records of SH-TUBE once every one is applied by the ledger.
fn applied(svc: &Service, n: usize) -> serde_json::Value {
    poll_until("the ledger to apply the inspection records", || {
        svc.get_json("/api/components/SH-TUBE/inspections").filter(|v| {
            let r = v["records"].as_array().unwrap();
            r.len() == n && r.iter().all(|r| r["ledger"]["applied"] == true)
        })
    })
}

fn tube(ledger_json: &str) -> serde_json::Value {
    let v: serde_json::Value = serde_json::from_str(ledger_json).unwrap();
    v["components"].as_array().unwrap().iter().find(|c| c["component"] == "SH-TUBE").unwrap().clone()
}

#[test]
fn records_over_http_and_the_command_line_apply_survive_a_crash_and_replay_repeats_them() {
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let cfg_s = cfg.to_str().unwrap();
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    svc.wait_connected();
    let s = samples(400);
    publish_all(broker.port, &s, "publisher-inspections");
    svc.wait_until_integrated(s.last().unwrap().1);

    let post = |auth: &str, body: &str| {
        http::request(
            http_port,
            "POST",
            "/api/components/SH-TUBE/inspections",
            &[("Authorization", auth)],
            body.as_bytes(),
        )
        .unwrap()
    };
    let bearer = format!("Bearer {TOKEN}");
    let strain = r#"{"date":"2026-10-01T03:00:00Z","entered_by":"K. Metallurgist","kind":"creep_strain","value":0.25,"unit":"%","method":"diameter gauge","location":"stub 2"}"#;
    assert_eq!(post("Bearer wrong", strain).status, 401);
    let r = post(&bearer, &strain.replace("K. Metallurgist", " "));
    assert_eq!(r.status, 400, "{}", r.text());
    assert!(r.text().contains("entered_by"), "{}", r.text());
    let r = post(&bearer, &strain.replace("creep_strain", "hardness"));
    assert_eq!(r.status, 400, "{}", r.text());
    let r = post(&bearer, strain);
    assert_eq!(r.status, 201, "{}", r.text());
    // The command line beside the running service.
    let out = ok(&[
        "inspection",
        "add",
        "--config",
        cfg_s,
        "--component",
        "SH-TUBE",
        "--date",
        "2026-10-01T05:00:00Z",
        "--by",
        "K. Metallurgist",
        "--kind",
        "wall_thickness",
        "--value",
        "5.2",
        "--method",
        "UT",
    ]);
    assert!(out.contains("running service"), "{out}");
    let listed = applied(&svc, 2);
    let strain_rec = &listed["records"][0];
    assert!(strain_rec["ledger"]["effective_ms"].as_i64() > strain_rec["finding_ms"].as_i64(), "entered late");
    let snap = svc.snapshot().unwrap();
    let c = snap["components"].as_array().unwrap().iter().find(|c| c["component"] == "SH-TUBE").unwrap();
    assert!(c["creep_strain"].as_f64().unwrap() >= 0.0025, "re-based strain: {}", c["creep_strain"]);

    // The component's assessment report, linked from its page.
    let r = http::get(http_port, "/report/SH-TUBE").unwrap();
    assert_eq!(r.status, 200);
    let html = r.text();
    assert!(html.contains("SH-TUBE") && html.contains("Caution.") && html.contains("K. Metallurgist"), "{html}");
    let r = http::get(http_port, "/report/SH-TUBE?format=csv").unwrap();
    assert!(r.text().starts_with("component,section,item,value,unit,source"), "{}", r.text());
    assert_eq!(http::get(http_port, "/report/NO-SUCH").unwrap().status, 404);

    // A crash, then a restart: the records and their effect are still there.
    let before = tube(&ok(&["ledger", "--config", cfg_s, "--format", "json"]));
    svc.kill9();
    let svc = Service::start_with_env(&cfg, http_port, &[(TOKEN_VAR, TOKEN)]);
    applied(&svc, 2);
    assert!(svc.sigterm().success());
    let after = tube(&ok(&["ledger", "--config", cfg_s, "--format", "json"]));
    assert_eq!(before["creep_strain"], after["creep_strain"]);
    assert_eq!(before["creep_life_fraction"], after["creep_life_fraction"]);

    // Replay of the same samples with the listed records.
    let records = dir.path().join("records.json");
    std::fs::write(&records, ok(&["inspection", "list", "--config", cfg_s, "--json"])).unwrap();
    let mut csv = String::from("timestamp,tag,value,quality\n");
    for (tag, ts, v) in &s {
        csv.push_str(&format!("{ts},{tag},{v:?},good\n"));
    }
    let input = dir.path().join("samples.csv");
    std::fs::write(&input, csv).unwrap();
    let replayed = tube(&ok(&[
        "replay",
        "--config",
        cfg_s,
        "--input",
        input.to_str().unwrap(),
        "--inspections",
        records.to_str().unwrap(),
        "--format",
        "json",
    ]));
    for key in ["creep_life_fraction", "creep_strain", "integrated_h"] {
        let (a, b) = (after[key].as_f64().unwrap(), replayed[key].as_f64().unwrap());
        assert!((a - b).abs() <= 1e-12 * b.abs(), "{key}: service {a}, replay with the records {b}");
    }
}
