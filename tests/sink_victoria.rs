//! The database sink against a real VictoriaMetrics (design invariants 4
//! and 5, the delivery half): points written through `sink::Writer` come
//! back with their values and event timestamps, a retried batch overwrites
//! itself, and an outage is reported as retryable and survived.

mod common;

use std::collections::BTreeMap;

use common::VictoriaMetrics;
use lifeledger::lineproto::Point;
use lifeledger::sink::{DatabaseSettings, SinkError, Writer};

/// 2023-11-14T22:13:20Z in nanoseconds: inside the harness's retention.
const T0_NS: i64 = 1_700_000_000_000_000_000;
const MS: i64 = 1_000_000;

fn writer_for(vm: &VictoriaMetrics) -> Writer {
    let mut s = DatabaseSettings::new(&vm.url(), "plant", "lifeledger");
    // A short per-attempt bound so the outage test gets its answer quickly;
    // a refused connection answers at once anyway.
    s.timeout_s = 30.0;
    Writer::new(&s).expect("writer")
}

/// A point as the ledger would write it, at `T0 + i ms + 456 789 ns`.
fn state_line(component: &str, i: i64, fraction: f64) -> String {
    Point::new("component_state", T0_NS + i * MS + 456_789)
        .tag("plant", "demo")
        .tag("component", component)
        .float("creep_life_fraction", fraction)
        .int("unmonitored_h", i)
        .to_line()
        .expect("point has fields")
}

/// `name{labels}` -> samples, for comparisons that read like a table.
fn by_series(vm: &VictoriaMetrics, selector: &str) -> BTreeMap<String, Vec<(i64, f64)>> {
    vm.export(selector)
        .into_iter()
        .map(|s| {
            let labels: Vec<String> =
                s.metric.iter().filter(|(k, _)| *k != "__name__").map(|(k, v)| format!("{k}={v}")).collect();
            (format!("{}{{{}}}", s.name(), labels.join(",")), s.samples())
        })
        .collect()
}

#[tokio::test]
async fn points_come_back_with_values_and_event_timestamps() {
    let vm = VictoriaMetrics::start();
    let w = writer_for(&vm);
    assert!(w.ping().await, "ping a running server");

    let lines = vec![
        state_line("SH 1", 0, 0.125),
        state_line("SH 1", 1, 0.25),
        state_line("RH,2", 0, 0.5),
        "alarm_threshold,component=SH\\ 1,index=creep_life_fraction,severity=warning value=0.6 \
         1700000000000000000"
            .to_string(),
    ];
    w.write_lines(&lines).await.expect("write");

    let got = by_series(&vm, r#"{__name__=~"component_state_.*|alarm_threshold_.*"}"#);
    let t0_ms = T0_NS / MS;
    let want: BTreeMap<String, Vec<(i64, f64)>> = [
        ("alarm_threshold_value{component=SH 1,index=creep_life_fraction,severity=warning}", vec![(t0_ms, 0.6)]),
        ("component_state_creep_life_fraction{component=RH,2,plant=demo}", vec![(t0_ms, 0.5)]),
        ("component_state_creep_life_fraction{component=SH 1,plant=demo}", vec![(t0_ms, 0.125), (t0_ms + 1, 0.25)]),
        ("component_state_unmonitored_h{component=RH,2,plant=demo}", vec![(t0_ms, 0.0)]),
        ("component_state_unmonitored_h{component=SH 1,plant=demo}", vec![(t0_ms, 0.0), (t0_ms + 1, 1.0)]),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
    .collect();
    // Names are `{measurement}_{field}`; tags become labels (unescaped);
    // no label for org or bucket; nanoseconds trimmed to milliseconds.
    assert_eq!(got, want);

    let q = vm.query(r#"component_state_creep_life_fraction{component="SH 1"}"#, (T0_NS + 500 * MS) as f64 / 1e9);
    assert_eq!(q["data"]["result"][0]["value"][1], "0.25", "{q}");
}

#[tokio::test]
async fn a_retried_batch_overwrites_itself() {
    let vm = VictoriaMetrics::start();
    let w = writer_for(&vm);
    let batch: Vec<String> = (0..50).map(|i| state_line("SH 1", i, i as f64 / 100.0)).collect();

    w.write_lines(&batch).await.expect("first write");
    let once = by_series(&vm, "component_state_creep_life_fraction");
    // At-least-once delivery: the same batch again, and an overlapping one.
    w.write_lines(&batch).await.expect("retried write");
    w.write_lines(&batch[25..]).await.expect("overlapping write");
    let thrice = by_series(&vm, "component_state_creep_life_fraction");

    assert_eq!(once.values().next().map(Vec::len), Some(50));
    assert_eq!(once, thrice, "retries must not add samples");
}

#[tokio::test]
async fn an_outage_is_retryable_and_survived() {
    let mut vm = VictoriaMetrics::start();
    let w = writer_for(&vm);
    w.write_lines(&[state_line("SH 1", 0, 0.1)]).await.expect("write before outage");

    vm.stop();
    let during = vec![state_line("SH 1", 1, 0.2)];
    let err = w.write_lines(&during).await.expect_err("server is down");
    assert!(matches!(err, SinkError::Unreachable(_)), "{err:?}");
    assert!(err.is_retryable() && !err.is_bad_data());
    assert!(!w.ping().await, "ping a stopped server");

    vm.start_again();
    assert!(w.ping().await, "ping after restart");
    // The same writer (and its connection pool) recovers; the failed batch
    // goes again, as the outbox sender would send it.
    w.write_lines(&during).await.expect("write after outage");

    let got = vm.export("component_state_creep_life_fraction");
    assert_eq!(got.len(), 1, "{got:?}");
    assert_eq!(got[0].samples(), vec![(T0_NS / MS, 0.1), (T0_NS / MS + 1, 0.2)]);
}

#[tokio::test]
async fn a_full_batch_arrives_whole() {
    let vm = VictoriaMetrics::start();
    let w = writer_for(&vm);
    let s = DatabaseSettings::new(&vm.url(), "plant", "lifeledger");
    let batch: Vec<String> = (0..s.batch_lines as i64).map(|i| state_line("SH 1", i, i as f64 * 1e-4)).collect();
    w.write_lines(&batch).await.expect("write a default-size batch");
    // Big enough that the export answer comes chunked: exercises the
    // harness's decoder too.
    let got = vm.export("component_state_creep_life_fraction");
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].values.len(), s.batch_lines);
    // VictoriaMetrics stores floats as decimals with about 15 significant
    // digits: 0.43210000000000004 comes back as 0.4321.
    let sent = 4321.0 * 1e-4;
    assert!((got[0].values[4321] - sent).abs() <= 1e-12 * sent, "{}", got[0].values[4321]);
    assert_eq!(got[0].timestamps[4321], T0_NS / MS + 4321);
}

/// Names with every character line protocol treats specially, each alone,
/// at the end of a name and before another special one.
const AWKWARD_NAMES: [&str; 12] = [
    "C4\\",
    "C6\\,z=w",
    "\\lead",
    "mid\\dle",
    "two\\\\back",
    "a b",
    "x=y",
    "co,mma",
    "quo\"te",
    "end ",
    "=",
    "\\ \\=\\,",
];

#[tokio::test]
async fn names_with_special_characters_come_back_as_they_were() {
    // The reproduction: components named `C4\` and `C6\,z=w`, or a plant
    // `LP2\`, made the database refuse every point (or swallow the next
    // tag) while the service counted them delivered.
    let vm = VictoriaMetrics::start();
    let w = writer_for(&vm);
    let mut lines = vec![];
    for (i, name) in AWKWARD_NAMES.iter().enumerate() {
        lines.push(
            Point::new("component_state", T0_NS + i as i64 * MS)
                .tag("plant", "LP2\\")
                .tag("component", name)
                .tag("unit", "U\\1")
                .float("creep_life_fraction", i as f64)
                .string("note", &format!("say \"{name}\" \\ done"))
                .to_line()
                .unwrap(),
        );
    }
    w.write_lines(&lines).await.expect("the database accepts every line");
    vm.flush();
    let series = vm.export(r#"{__name__="component_state_creep_life_fraction"}"#);
    let mut got: Vec<(String, String, String)> = series
        .iter()
        .map(|s| {
            (
                s.label("component").unwrap_or("?").to_string(),
                s.label("plant").unwrap_or("?").to_string(),
                s.label("unit").unwrap_or("?").to_string(),
            )
        })
        .collect();
    got.sort();
    let mut want: Vec<(String, String, String)> =
        AWKWARD_NAMES.iter().map(|n| (n.to_string(), "LP2\\".to_string(), "U\\1".to_string())).collect();
    want.sort();
    assert_eq!(got, want, "labels as written (line protocol escaping per the InfluxDB v2 reference)");
}
