//! The shipped Grafana dashboards (`dashboards/`) and deployment recipes
//! (`deploy/`) against the product.
//!
//! * Prometheus dashboards: a real VictoriaMetrics is fed the line protocol
//!   of `lifeledger replay --write-lp` on the demo plant, plus the points the
//!   live service writes beside it (alarm thresholds from
//!   `report::threshold_points`, alarm events from `AlarmEvent::to_point`,
//!   `service_health` points). Every panel query, with the dashboard
//!   variables replaced by demo values, must return at least one series.
//! * InfluxDB 2 dashboards: every Flux query is tokenised and every
//!   measurement, field, tag and column it names must exist in the schema
//!   below, which is itself checked against the points the product writes.
//! * Every dashboard shows the caution in a text panel.
//! * `deploy/lifeledger.production.toml` passes `check-config` and the
//!   service settings (`lifeledger::service::load_service`).

mod common;

use common::BoundedOutput;

use common::http::{self, encode};
use common::VictoriaMetrics;
use lifeledger::alarm::{AlarmEvent, AlarmIndex, AlarmState, Severity, Transition};
use lifeledger::engine::Rejection;
use lifeledger::ingest::decode::DecodeError;
use lifeledger::lineproto::Point;
use lifeledger::series_model::{self, MEASUREMENTS};
use lifeledger::settings::Overrides;
use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;
use std::process::Command;
use std::sync::OnceLock;

const DEMO_PLANT: &str = "Brackenmoor Demo Station";
const DEMO_UNIT: &str = "U2";
/// A creep component that crosses an alarm level in the demo month, and a
/// wear contact: between them every component-detail panel has data.
const DEMO_COMPONENTS: [&str; 3] = ["U2-SH3-OUTLET-LEG-A", "U2-SH1-SUPPORT-R07", "U2-SH2-OUTLET-HEADER"];
/// Lines per InfluxDB v2 write request.
const CHUNK_LINES: usize = 5000;
/// A series only the live service writes (`series_model`'s `live_only`,
/// such as `component_state_attention_score`): a query of it may answer
/// empty on replayed demo data; nothing else is excused.
fn live_only_metric(name: &str) -> bool {
    MEASUREMENTS.iter().any(|m| m.live_only.iter().any(|f| name == format!("{}_{f}", m.name)))
}

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

// ------------------------------------------------------------------ schema

/// One measurement as the product writes it.
struct Measurement {
    name: &'static str,
    tags: &'static [&'static str],
    fields: Vec<String>,
}

/// The database schema the dashboards may use: the product's data model
/// (`lifeledger::series_model`), with the `rejected_<reason>` family of
/// `service_health` spelt out. The point builders are checked against it
/// with real points in `schema_matches_the_points_the_product_writes`.
fn schema() -> Vec<Measurement> {
    MEASUREMENTS
        .iter()
        .map(|m| {
            let mut fields: Vec<String> = m.fields.iter().chain(m.live_only).map(|s| s.to_string()).collect();
            if m.name == "service_health" {
                fields.extend(health_rejection_fields());
            }
            Measurement { name: m.name, tags: m.tags, fields }
        })
        .collect()
}

/// `rejected_*` fields of `service_health`: one per engine rejection reason
/// and one per MQTT decode reason.
fn health_rejection_fields() -> Vec<String> {
    let mut v: Vec<String> = Rejection::ALL.iter().map(|r| format!("rejected_{}", r.name())).collect();
    for e in [
        DecodeError::UnknownTopic(String::new()),
        DecodeError::NotUtf8,
        DecodeError::BadTimestamp(String::new()),
        DecodeError::BadQuality(String::new()),
    ] {
        let name = format!("rejected_{}", e.reason());
        if !v.contains(&name) {
            v.push(name);
        }
    }
    v
}

// ----------------------------------------------------------- line protocol

/// Splits `s` at `sep` where it is neither escaped nor inside a quoted string.
fn split_unescaped(s: &str, sep: char) -> Vec<String> {
    let mut out = vec![String::new()];
    let (mut escaped, mut quoted) = (false, false);
    for c in s.chars() {
        if escaped {
            out.last_mut().unwrap().push(c);
            escaped = false;
            continue;
        }
        match c {
            '\\' => {
                escaped = true;
                out.last_mut().unwrap().push(c);
            }
            '"' => {
                quoted = !quoted;
                out.last_mut().unwrap().push(c);
            }
            c if c == sep && !quoted => out.push(String::new()),
            c => out.last_mut().unwrap().push(c),
        }
    }
    out
}

fn unescape(s: &str) -> String {
    let mut out = String::new();
    let mut it = s.chars();
    while let Some(c) = it.next() {
        if c == '\\' {
            if let Some(n) = it.next() {
                out.push(n);
            }
        } else {
            out.push(c);
        }
    }
    out
}

/// A parsed line: measurement, tags, field names, time in ns.
struct Line {
    measurement: String,
    tags: BTreeMap<String, String>,
    fields: Vec<String>,
    time_ns: i64,
}

fn parse_line(line: &str) -> Line {
    let parts = split_unescaped(line, ' ');
    assert_eq!(parts.len(), 3, "line protocol with measurement, fields and time: {line}");
    let series = split_unescaped(&parts[0], ',');
    let tags = series[1..]
        .iter()
        .map(|t| {
            let kv = split_unescaped(t, '=');
            (unescape(&kv[0]), unescape(&kv[1]))
        })
        .collect();
    let fields = split_unescaped(&parts[1], ',').iter().map(|f| unescape(&split_unescaped(f, '=')[0])).collect();
    Line {
        measurement: unescape(&series[0]),
        tags,
        fields,
        time_ns: parts[2].trim().parse().unwrap_or_else(|e| panic!("time of {line}: {e}")),
    }
}

/// The demo replay's line protocol, written once per test binary.
fn demo_lp() -> &'static str {
    static LP: OnceLock<String> = OnceLock::new();
    LP.get_or_init(|| {
        let dir = tempfile::tempdir().expect("temp dir");
        let lp = dir.path().join("demo.lp");
        let out = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
            .current_dir(repo())
            .args([
                "replay",
                "--config",
                "config/demo/plant.toml",
                "--input",
                "config/demo/history.csv.gz",
                "--no-progress",
                "--write-lp",
            ])
            .arg(&lp)
            .bounded_output()
            .expect("run lifeledger replay");
        assert!(
            out.status.success(),
            "lifeledger replay failed: {}\n{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
        std::fs::read_to_string(&lp).expect("read the replay's line protocol")
    })
}

fn demo_config() -> lifeledger::settings::LoadedConfig {
    lifeledger::settings::load_plan(&repo().join("config/demo/plant.toml")).expect("demo configuration loads")
}

fn alarm_event(component: &str, index: AlarmIndex, value: f64, threshold: f64, time_ms: i64) -> AlarmEvent {
    AlarmEvent {
        component: component.into(),
        unit: DEMO_UNIT.into(),
        index,
        transition: Transition::Activated,
        severity: Some(Severity::Advisory),
        state: AlarmState::Unacknowledged,
        value: Some(value),
        threshold: Some(threshold),
        time: lifeledger::event_time::rfc3339_ms(time_ms),
        time_ms,
        message: format!("{component}: {} reached the advisory level {threshold}", index.name()),
        by: None,
        reason: None,
        shelved_until: None,
        detail: None,
        seq: Some(1),
        affects: vec![],
        rationale: Some(lifeledger::alarm::Rationale::default_for(index)),
        caution: lifeledger::CAUTION,
    }
}

/// What the live service would have written beside the component series
/// of the demo month: alarm thresholds with every component point, two
/// alarm events (the ones the demo history raises), and a health point
/// every ten minutes. Returns the lines and the first and last event time
/// of the component series, ms.
fn demo_points() -> (Vec<String>, i64, i64) {
    let cfg = demo_config();
    let plant = cfg.plan.plant.clone();
    let mut lines: Vec<String> = demo_lp().lines().filter(|l| !l.trim().is_empty()).map(String::from).collect();
    let times: BTreeSet<i64> = lines.iter().map(|l| parse_line(l).time_ns / 1_000_000).collect();
    let (first, last) = (*times.first().expect("replay wrote points"), *times.last().unwrap());
    for &t in &times {
        for c in &cfg.plan.components {
            lines.extend(lifeledger::report::threshold_points(&plant, c, t).iter().filter_map(Point::to_line));
        }
    }
    let mid = first + (last - first) * 3 / 4;
    lines.extend(
        alarm_event(DEMO_COMPONENTS[0], AlarmIndex::CreepLifeFraction, 0.2451, 0.245, mid).to_point(&plant).to_line(),
    );
    lines.extend(
        alarm_event(DEMO_COMPONENTS[1], AlarmIndex::WearIndex, 0.3502, 0.35, mid + 60_000).to_point(&plant).to_line(),
    );
    for (i, &t) in times.iter().enumerate() {
        let i = i as i64;
        let mut p = Point::new("service_health", t * 1_000_000)
            .tag("plant", &plant)
            .int("samples_accepted", 7_200 * i)
            .int("duplicates", 0)
            .int("outbox_lines", i % 7)
            .int("outbox_bytes", 180 * (i % 7))
            .float("commit_latency_ms", 2.0 + (i % 5) as f64)
            .boolean("mqtt_connected", i % 97 != 0);
        for (k, f) in health_rejection_fields().iter().enumerate() {
            p = p.int(f, i * k as i64 / 3);
        }
        lines.extend(p.to_line());
    }
    (lines, first, last)
}

fn write_lines(vm: &VictoriaMetrics, lines: &[String]) {
    for chunk in lines.chunks(CHUNK_LINES) {
        let body = chunk.join("\n") + "\n";
        let target = "/api/v2/write?org=demo&bucket=lifeledger&precision=ns";
        let resp = http::post(vm.port, target, body.as_bytes()).unwrap_or_else(|e| panic!("POST {target}: {e}"));
        assert_eq!(resp.status, 204, "write to victoria-metrics: {}", resp.text());
    }
    vm.flush();
}

// --------------------------------------------------------------- dashboards

fn dashboards(kind: &str) -> Vec<(String, Value)> {
    let dir = repo().join("dashboards").join(kind);
    let mut out = vec![];
    for e in std::fs::read_dir(&dir).unwrap_or_else(|e| panic!("{}: {e}", dir.display())) {
        let p = e.unwrap().path();
        if p.extension().and_then(|x| x.to_str()) == Some("json") {
            let text = std::fs::read_to_string(&p).unwrap();
            let v: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: not JSON: {e}", p.display()));
            out.push((format!("{kind}/{}", p.file_name().unwrap().to_string_lossy()), v));
        }
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    assert!(out.len() >= 2, "expected the plant-overview and component-detail dashboards in {}", dir.display());
    out
}

/// Every panel, rows' nested panels included.
fn panels(d: &Value) -> Vec<&Value> {
    fn walk<'a>(ps: &'a Value, out: &mut Vec<&'a Value>) {
        for p in ps.as_array().into_iter().flatten() {
            out.push(p);
            if let Some(inner) = p.get("panels") {
                walk(inner, out);
            }
        }
    }
    let mut out = vec![];
    walk(&d["panels"], &mut out);
    out
}

fn title(p: &Value) -> String {
    p["title"].as_str().unwrap_or("(untitled)").to_string()
}

/// `(panel title, refId, query text, instant)` of every panel target.
fn queries<'a>(d: &'a Value, key: &str) -> Vec<(String, String, &'a str, bool)> {
    let mut out = vec![];
    for p in panels(d) {
        for t in p["targets"].as_array().into_iter().flatten() {
            let q = t[key].as_str().unwrap_or_else(|| panic!("panel {:?} target has no {key}", title(p)));
            let instant = t["instant"].as_bool().unwrap_or(false) && !t["range"].as_bool().unwrap_or(false);
            out.push((title(p), t["refId"].as_str().unwrap_or("?").to_string(), q, instant));
        }
    }
    out
}

/// Dashboard variable names.
fn variables(d: &Value) -> BTreeSet<String> {
    d["templating"]["list"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|v| v["name"].as_str().map(String::from))
        .collect()
}

/// Every `$name` / `${name}` / `${name:format}` used in `q`.
fn used_variables(q: &str) -> Vec<String> {
    let b = q.as_bytes();
    let mut out = vec![];
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'$' {
            let (start, braced) = if b.get(i + 1) == Some(&b'{') { (i + 2, true) } else { (i + 1, false) };
            let mut j = start;
            while j < b.len() && (b[j].is_ascii_alphanumeric() || b[j] == b'_') {
                j += 1;
            }
            out.push(q[start..j].to_string());
            if braced {
                while j < b.len() && b[j] != b'}' {
                    j += 1;
                }
            }
            i = j;
        } else {
            i += 1;
        }
    }
    out
}

const BUILTIN_VARIABLES: [&str; 4] = ["__range", "__rate_interval", "__interval", "__range_s"];

/// Replaces the dashboard variables by `values` (longest names first, so
/// `$__range_s` is not read as `$__range`).
fn substitute(q: &str, values: &BTreeMap<&str, String>) -> String {
    let mut keys: Vec<&&str> = values.keys().collect();
    keys.sort_by_key(|k| std::cmp::Reverse(k.len()));
    let mut s = q.to_string();
    for k in keys {
        s = s.replace(&format!("${{{k}}}"), &values[*k]).replace(&format!("${k}"), &values[*k]);
    }
    s
}

#[test]
fn every_dashboard_shows_the_caution_and_is_provisioning_ready() {
    let mut uids = BTreeSet::new();
    for kind in ["prometheus", "influxdb2"] {
        let ds_type = if kind == "prometheus" { "prometheus" } else { "influxdb" };
        for (file, d) in dashboards(kind) {
            let caution = panels(&d).into_iter().any(|p| {
                p["type"] == "text" && p["options"]["content"].as_str().is_some_and(|c| c.contains(lifeledger::CAUTION))
            });
            assert!(caution, "{file}: no text panel shows the caution {:?}", lifeledger::CAUTION);
            let uid = d["uid"].as_str().unwrap_or_else(|| panic!("{file}: no uid"));
            assert!(uids.insert(uid.to_string()), "{file}: uid {uid} used twice");
            assert!(d["title"].as_str().is_some_and(|t| !t.is_empty()), "{file}: no title");
            assert!(d.get("__inputs").is_none(), "{file}: __inputs placeholders do not work with file provisioning");
            let vars = variables(&d);
            for v in ["datasource", "plant", "unit", "component"] {
                assert!(vars.contains(v), "{file}: no {v} variable");
            }
            if kind == "influxdb2" {
                assert!(vars.contains("bucket"), "{file}: no bucket variable");
            }
            let mut ids = BTreeSet::new();
            for p in panels(&d) {
                let id = p["id"].as_i64().unwrap_or_else(|| panic!("{file}: panel {:?} has no id", title(p)));
                assert!(ids.insert(id), "{file}: panel id {id} used twice");
                assert!(p["gridPos"]["w"].as_i64().is_some(), "{file}: panel {:?} has no gridPos", title(p));
                let mut sources = vec![&p["datasource"]];
                sources.extend(p["targets"].as_array().into_iter().flatten().map(|t| &t["datasource"]));
                for ds in sources.into_iter().filter(|ds| !ds.is_null()) {
                    assert_eq!(
                        ds["uid"],
                        "${datasource}",
                        "{file}: panel {:?} must use the datasource variable",
                        title(p)
                    );
                    assert_eq!(ds["type"], ds_type, "{file}: panel {:?} datasource type", title(p));
                }
            }
            let key = if kind == "prometheus" { "expr" } else { "query" };
            for (panel, _, q, _) in queries(&d, key) {
                for v in used_variables(q) {
                    assert!(
                        vars.contains(&v) || BUILTIN_VARIABLES.contains(&v.as_str()),
                        "{file}: panel {panel:?} uses ${v}, which is no variable of the dashboard"
                    );
                }
            }
        }
    }
}

#[test]
fn schema_matches_the_points_the_product_writes() {
    let schema = schema();
    let by_name: BTreeMap<&str, &Measurement> = schema.iter().map(|m| (m.name, m)).collect();
    let mut seen: BTreeMap<String, (BTreeSet<String>, BTreeSet<String>)> = BTreeMap::new();
    let (lines, _, _) = demo_points();
    for l in &lines {
        let l = parse_line(l);
        let e = seen.entry(l.measurement).or_default();
        e.0.extend(l.tags.into_keys());
        e.1.extend(l.fields);
    }
    // component_state comes from the replay, alarm_threshold and
    // alarm_event from the product's own point builders; service_health is
    // synthesised by this test, so it only has to be there.
    for name in ["component_state", "alarm_threshold", "alarm_event"] {
        let m = by_name[name];
        let (tags, fields) = seen.get(name).unwrap_or_else(|| panic!("no {name} points"));
        let want_tags: BTreeSet<String> = m.tags.iter().map(|s| s.to_string()).collect();
        // Every field written is in the model; every field of the model is
        // written here, except those only the live service writes and
        // `affects` (sensor alarms only, none in these points).
        let model = series_model::measurement(name).unwrap();
        let want_fields: BTreeSet<String> = m.fields.iter().cloned().collect();
        let must: BTreeSet<String> = want_fields
            .iter()
            .filter(|f| !model.live_only.contains(&f.as_str()) && f.as_str() != "affects")
            .cloned()
            .collect();
        assert_eq!(tags, &want_tags, "tags of {name}: update daemon/series_model.rs and the dashboards");
        assert!(
            fields.is_subset(&want_fields) && must.is_subset(fields),
            "fields of {name}: written {fields:?}, model {want_fields:?}: update daemon/series_model.rs and the dashboards"
        );
    }
    assert!(seen.contains_key("service_health"));
}

// ---------------------------------------------------------------- PromQL

/// Identifiers in a PromQL expression that name one of our series
/// (`{measurement}_{field}`), outside strings.
fn promql_metrics(expr: &str) -> Vec<String> {
    let mut out = vec![];
    let mut cur = String::new();
    let mut quoted = false;
    for c in expr.chars().chain(std::iter::once(' ')) {
        if c == '"' {
            quoted = !quoted;
        }
        if !quoted && (c.is_ascii_alphanumeric() || c == '_' || c == ':') {
            cur.push(c);
        } else {
            if ["component_state_", "alarm_threshold_", "alarm_event_", "service_health_"]
                .iter()
                .any(|p| cur.starts_with(p))
            {
                out.push(cur.clone());
            }
            cur.clear();
        }
    }
    out
}

#[test]
fn prometheus_dashboard_metrics_are_in_the_schema() {
    let names: BTreeSet<String> =
        schema().iter().flat_map(|m| m.fields.iter().map(move |f| format!("{}_{f}", m.name))).collect();
    for (file, d) in dashboards("prometheus") {
        let mut exprs: Vec<(String, String)> =
            queries(&d, "expr").into_iter().map(|(p, _, q, _)| (p, q.to_string())).collect();
        for v in d["templating"]["list"].as_array().into_iter().flatten() {
            if let Some(q) = v["definition"].as_str() {
                exprs.push((format!("variable {}", v["name"]), q.to_string()));
            }
        }
        for (panel, expr) in exprs {
            for m in promql_metrics(&expr) {
                assert!(
                    names.contains(&m) || live_only_metric(&m),
                    "{file}: panel {panel:?} uses {m}, which lifeledger does not write"
                );
            }
        }
    }
}

/// `label_values(selector, label)` of a Grafana Prometheus variable.
fn label_values_query(q: &str) -> (String, String) {
    let inner = q
        .trim()
        .strip_prefix("label_values(")
        .and_then(|s| s.strip_suffix(')'))
        .unwrap_or_else(|| panic!("variable query {q:?}"));
    let (sel, label) = inner.rsplit_once(',').unwrap();
    (sel.trim().to_string(), label.trim().to_string())
}

#[test]
fn prometheus_dashboards_answer_on_the_demo_data() {
    let (lines, first_ms, last_ms) = demo_points();
    let vm = VictoriaMetrics::start();
    write_lines(&vm, &lines);
    check_prometheus_dashboards(&vm, first_ms / 1000, last_ms / 1000);
    demo_parts_are_coloured_by_their_own_levels(&vm, first_ms, last_ms);
}

/// The issue's own check: a short `lifeledger demo` run writes to the real
/// database through its outbox, and every PromQL panel answers on what it
/// wrote.
#[test]
fn prometheus_dashboards_answer_after_a_short_demo_run() {
    let vm = VictoriaMetrics::start();
    let port = common::free_port();
    let dir = tempfile::tempdir().unwrap();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        // The duration only bounds a demo the test fails to stop: SIGTERM
        // below stops it once its points are in (25 s was too short on a
        // loaded 2-core machine, where the service fell behind the
        // simulated clock, and 60 s of waiting was once too short too).
        .args(["demo", "--duration", "300", "--http", &format!("127.0.0.1:{port}"), "--database-url", &vm.url()])
        .arg("--state-dir")
        .arg(dir.path())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let snapshot = || -> Option<Value> { serde_json::from_str(&http::get(port, "/api/components").ok()?.text()).ok() };
    // Wait until the scenario is past its alarms, then stop the demo with
    // SIGTERM: the service flushes its outbox to the database on the way out.
    // The scenario runs on the demo's own clock, which falls behind on a
    // loaded machine: wait up to EXIT_TRIES polls, and fail at once if the
    // demo ends first.
    let snap = common::poll_until_tries("the demo to write its points", common::EXIT_TRIES, || {
        if let Some(status) = child.try_wait().unwrap() {
            panic!("the demo ended ({status}) before it wrote its points and raised its stale-tag alarm");
        }
        snapshot().filter(|s| {
            s["service"]["series_points"].as_u64().unwrap_or(0) > 200
                && s["recent_events"].as_array().is_some_and(|e| e.iter().any(|e| e["index"] == "sensor_stale"))
        })
    });
    std::process::Command::new("kill").args(["-TERM", &child.id().to_string()]).status().unwrap();
    let status = common::poll_until("the demo to stop after SIGTERM", || child.try_wait().unwrap());
    assert!(status.success(), "the demo stops cleanly on SIGTERM");
    vm.flush();
    let ts: Vec<i64> = vm
        .export("{__name__=\"component_state_unmonitored_h\"}")
        .iter()
        .flat_map(|e| e.samples().into_iter().map(|(t, _)| t))
        .collect();
    assert!(!ts.is_empty(), "the demo wrote component_state points: {snap}");
    // Component points carry simulated event time (the recent past);
    // service-health points carry wall time: query up to now.
    let first = *ts.iter().min().unwrap();
    let now_s = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap().as_secs() as i64;
    // Range queries step by an hour from the start: align the range so the
    // last step falls on `end`, just after the newest health point.
    let end = now_s + 30;
    let start = end - 3600 * ((end - first / 1000) / 3600 + 1);
    check_prometheus_dashboards(&vm, start, end);
}

fn check_prometheus_dashboards(vm: &VictoriaMetrics, start: i64, end: i64) {
    let range_s = end - start + 1;
    let range_query = |expr: &str| -> Value {
        let target = format!("/api/v1/query_range?query={}&start={start}&end={end}&step=3600", encode(expr));
        let resp = http::get(vm.port, &target).unwrap_or_else(|e| panic!("GET {target}: {e}"));
        assert_eq!(resp.status, 200, "query_range {expr}: {}", resp.text());
        serde_json::from_slice(&resp.body).expect("query_range answer is JSON")
    };
    let series_count = |answer: &Value| -> usize {
        answer["data"]["result"]
            .as_array()
            .map(|r| r.iter().filter(|s| !matches!(s["values"].as_array(), Some(v) if v.is_empty())).count())
            .unwrap_or(0)
    };
    let mut checked = 0;
    for (file, d) in dashboards("prometheus") {
        // Variables first: each must offer the demo value.
        for v in d["templating"]["list"].as_array().into_iter().flatten() {
            let Some(q) = v["definition"].as_str() else {
                continue;
            };
            let (sel, label) = label_values_query(q);
            let sel =
                substitute(&sel, &BTreeMap::from([("plant", DEMO_PLANT.to_string()), ("unit", DEMO_UNIT.to_string())]));
            let target = format!("/api/v1/label/{label}/values?match[]={}&start={start}&end={end}", encode(&sel));
            let resp = http::get(vm.port, &target).unwrap();
            let ans: Value = serde_json::from_slice(&resp.body).unwrap();
            let want = match label.as_str() {
                "plant" => DEMO_PLANT,
                "unit" => DEMO_UNIT,
                _ => DEMO_COMPONENTS[0],
            };
            assert!(
                ans["data"].as_array().is_some_and(|a| a.iter().any(|x| x == want)),
                "{file}: variable {} ({q}) does not offer {want:?}: {ans}",
                v["name"]
            );
        }
        let multi = d["templating"]["list"]
            .as_array()
            .unwrap()
            .iter()
            .any(|v| v["name"] == "component" && v["multi"].as_bool() == Some(true));
        // A multi-value component variable is tried with All (".*"); a
        // single one with each demo component, and a panel needs data for
        // at least one of them (creep panels have none for a wear contact).
        let candidates: Vec<String> =
            if multi { vec![".*".to_string()] } else { DEMO_COMPONENTS.iter().map(|s| s.to_string()).collect() };
        for (panel, ref_id, expr, instant) in queries(&d, "expr") {
            let mut answers = vec![];
            let found = candidates.iter().any(|c| {
                let values = BTreeMap::from([
                    ("plant", DEMO_PLANT.to_string()),
                    ("unit", DEMO_UNIT.to_string()),
                    ("component", c.clone()),
                    ("__range", format!("{range_s}s")),
                    ("__range_s", range_s.to_string()),
                    ("__rate_interval", "40m".to_string()),
                    ("__interval", "1h".to_string()),
                ]);
                let q = substitute(expr, &values);
                assert!(
                    !q.contains('$'),
                    "{file}: panel {panel:?} query {ref_id} keeps a variable after substitution: {q}"
                );
                let ans = if instant { vm.query(&q, end as f64) } else { range_query(&q) };
                assert_eq!(ans["status"], "success", "{file}: panel {panel:?} query {ref_id}: {ans}");
                let n = series_count(&ans);
                answers.push(format!("component={c}: {q}"));
                n > 0
            });
            assert!(
                found || promql_metrics(expr).iter().any(|m| live_only_metric(m)),
                "{file}: panel {panel:?} query {ref_id} returns no series on the demo data:\n  {}",
                answers.join("\n  ")
            );
            checked += 1;
        }
    }
    assert!(checked >= 20, "only {checked} PromQL queries found");
}

// ------------------------------------------------------------------- Flux

#[derive(Debug, Clone, PartialEq)]
enum Tok {
    Ident(String),
    Str(String),
    Var(String),
    Punct(String),
}

/// A small Flux tokeniser: identifiers (dotted, e.g. `r._field`), strings,
/// Grafana variables outside strings, operators and punctuation.
fn flux_tokens(q: &str) -> Result<Vec<Tok>, String> {
    let c: Vec<char> = q.chars().collect();
    let mut out = vec![];
    let mut i = 0;
    while i < c.len() {
        let ch = c[i];
        if ch.is_whitespace() {
            i += 1;
        } else if ch == '"' {
            let mut s = String::new();
            i += 1;
            loop {
                match c.get(i) {
                    None => return Err("unterminated string".into()),
                    Some('\\') => {
                        s.push(*c.get(i + 1).ok_or("dangling escape")?);
                        i += 2;
                    }
                    Some('"') => {
                        i += 1;
                        break;
                    }
                    Some(&x) => {
                        s.push(x);
                        i += 1;
                    }
                }
            }
            out.push(Tok::Str(s));
        } else if ch == '$' && c.get(i + 1) == Some(&'{') {
            let end = (i..c.len()).find(|&j| c[j] == '}').ok_or("unclosed ${")?;
            out.push(Tok::Var(c[i + 2..end].iter().collect()));
            i = end + 1;
        } else if ch.is_ascii_alphabetic() || ch == '_' {
            let start = i;
            while i < c.len() && (c[i].is_ascii_alphanumeric() || c[i] == '_' || c[i] == '.') {
                i += 1;
            }
            out.push(Tok::Ident(c[start..i].iter().collect()));
        } else if ch.is_ascii_digit() {
            while i < c.len() && (c[i].is_ascii_alphanumeric() || c[i] == '.') {
                i += 1;
            }
            out.push(Tok::Punct("number".into()));
        } else {
            let two: String = c[i..(i + 2).min(c.len())].iter().collect();
            if ["==", "!=", "=>", "|>", "<=", ">="].contains(&two.as_str()) {
                out.push(Tok::Punct(two));
                i += 2;
            } else {
                out.push(Tok::Punct(ch.to_string()));
                i += 1;
            }
        }
    }
    let mut depth = vec![];
    for t in &out {
        if let Tok::Punct(p) = t {
            match p.as_str() {
                "(" | "[" | "{" => depth.push(p.clone()),
                ")" | "]" | "}" => {
                    let open = depth.pop().ok_or(format!("unbalanced {p}"))?;
                    let want = match p.as_str() {
                        ")" => "(",
                        "]" => "[",
                        _ => "{",
                    };
                    if open != want {
                        return Err(format!("{open} closed by {p}"));
                    }
                }
                _ => {}
            }
        }
    }
    if let Some(open) = depth.pop() {
        return Err(format!("unclosed {open}"));
    }
    Ok(out)
}

/// Names a Flux query uses, by role.
#[derive(Default, Debug)]
struct FluxNames {
    measurements: Vec<String>,
    fields: Vec<String>,
    field_prefixes: Vec<String>,
    /// `r.name` references, `columns: [...]`-style lists and `tag: "..."`.
    columns: Vec<String>,
}

fn flux_names(toks: &[Tok]) -> FluxNames {
    let mut n = FluxNames::default();
    let ident = |i: usize| match toks.get(i) {
        Some(Tok::Ident(s)) => Some(s.as_str()),
        _ => None,
    };
    let punct = |i: usize, p: &str| matches!(toks.get(i), Some(Tok::Punct(x)) if x == p);
    let string = |i: usize| match toks.get(i) {
        Some(Tok::Str(s)) => Some(s.clone()),
        _ => None,
    };
    for i in 0..toks.len() {
        match ident(i) {
            Some("r._measurement") if punct(i + 1, "==") => n.measurements.extend(string(i + 2)),
            Some("r._field") if punct(i + 1, "==") => n.fields.extend(string(i + 2)),
            Some("prefix") if punct(i + 1, ":") => n.field_prefixes.extend(string(i + 2)),
            Some("tag") if punct(i + 1, ":") => n.columns.extend(string(i + 2)),
            Some("columns" | "rowKey" | "columnKey" | "on") if punct(i + 1, ":") && punct(i + 2, "[") => {
                let mut j = i + 3;
                while let Some(s) = string(j) {
                    n.columns.push(s);
                    j += if punct(j + 1, ",") { 2 } else { 1 };
                }
            }
            Some(s) if s.starts_with("r.") => n.columns.push(s[2..].to_string()),
            _ => {}
        }
    }
    n.columns.retain(|c| !c.starts_with('_'));
    n
}

#[test]
fn influxdb_dashboards_use_only_names_the_product_writes() {
    let schema = schema();
    let mut checked = 0;
    for (file, d) in dashboards("influxdb2") {
        let mut qs: Vec<(String, String)> = queries(&d, "query")
            .into_iter()
            .map(|(p, r, q, _)| (format!("panel {p:?} query {r}"), q.to_string()))
            .collect();
        for v in d["templating"]["list"].as_array().into_iter().flatten() {
            if v["type"] == "query" {
                let q =
                    v["query"].as_str().unwrap_or_else(|| panic!("{file}: variable {} has no Flux query", v["name"]));
                qs.push((format!("variable {}", v["name"]), q.to_string()));
            }
        }
        for (what, q) in qs {
            let toks = flux_tokens(&q).unwrap_or_else(|e| panic!("{file}: {what}: Flux does not tokenise ({e}):\n{q}"));
            assert!(
                toks.iter().any(|t| *t == Tok::Ident("v.timeRangeStart".into())) || q.contains("schema.tagValues"),
                "{file}: {what}: not bounded by the dashboard time range"
            );
            assert!(q.contains("bucket: \"${bucket}\""), "{file}: {what}: does not read bucket ${{bucket}}");
            let names = flux_names(&toks);
            assert!(!names.measurements.is_empty(), "{file}: {what}: names no measurement");
            let mut used = vec![];
            for m in &names.measurements {
                let s = schema
                    .iter()
                    .find(|s| s.name == m)
                    .unwrap_or_else(|| panic!("{file}: {what}: unknown measurement {m:?}"));
                used.push(s);
            }
            let fields: BTreeSet<&str> = used.iter().flat_map(|m| m.fields.iter().map(String::as_str)).collect();
            let tags: BTreeSet<&str> = used.iter().flat_map(|m| m.tags.iter().copied()).collect();
            for f in &names.fields {
                assert!(fields.contains(f.as_str()), "{file}: {what}: unknown field {f:?} of {:?}", names.measurements);
            }
            for p in &names.field_prefixes {
                assert!(fields.iter().any(|f| f.starts_with(p.as_str())), "{file}: {what}: no field starts with {p:?}");
            }
            for c in &names.columns {
                // After a pivot, fields are columns too.
                assert!(
                    tags.contains(c.as_str()) || fields.contains(c.as_str()),
                    "{file}: {what}: unknown tag or column {c:?} of {:?}",
                    names.measurements
                );
            }
            checked += 1;
        }
    }
    assert!(checked >= 20, "only {checked} Flux queries found");
}

#[test]
fn the_flux_checker_catches_unknown_names() {
    let toks = flux_tokens(
        r#"from(bucket: "${bucket}") |> range(start: v.timeRangeStart) |> filter(fn: (r) => r._measurement == "component_state" and r._field == "life" and r.area == "x") |> keep(columns: ["_time", "zone"])"#,
    )
    .unwrap();
    let n = flux_names(&toks);
    assert_eq!(n.measurements, ["component_state"]);
    assert_eq!(n.fields, ["life"]);
    assert_eq!(n.columns, ["area", "zone"]);
    assert!(flux_tokens("filter(fn: (r) => (r._value > 0)").is_err());
    assert!(flux_tokens(r#"x == "open"#).is_err());
}

// ------------------------------------------------------------- deployment

const PRODUCTION: &str = "deploy/lifeledger.production.toml";

#[test]
fn production_config_passes_check_config() {
    let out = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .current_dir(repo())
        .args(["check-config", "--file-only", PRODUCTION])
        .env_remove("LIFELEDGER_DB_TOKEN")
        .bounded_output()
        .expect("run lifeledger check-config");
    assert!(
        out.status.success(),
        "check-config {PRODUCTION} failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    // Without --file-only, on a machine without the secrets and the
    // certificates, it says what `run` would miss.
    let out = Command::new(env!("CARGO_BIN_EXE_lifeledger"))
        .current_dir(repo())
        .args(["check-config", PRODUCTION])
        .env_remove("LIFELEDGER_DB_TOKEN")
        .env_remove("LIFELEDGER_MQTT_PASSWORD")
        .bounded_output()
        .expect("run lifeledger check-config");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(err.contains("LIFELEDGER_DB_TOKEN") && err.contains("LIFELEDGER_MQTT_PASSWORD"), "{err}");
}

#[test]
fn production_config_service_sections_are_valid_and_complete() {
    let path = repo().join(PRODUCTION);
    let (cfg, svc) = lifeledger::service::load_service(&path).unwrap_or_else(|e| panic!("{PRODUCTION}: {e:#}"));
    assert!(cfg.plan.components.len() >= 4);
    assert!(svc.mqtt.tls.is_some(), "the example uses TLS to the broker");
    assert_eq!(svc.mqtt.port, 8883);
    assert!(!svc.mqtt.subscriptions.is_empty());
    let db = svc.database.as_ref().expect("[database] section");
    assert!(db.token_env.is_some(), "database token from the environment");
    assert!(svc.http.token_env.is_some(), "http token from the environment");

    // Every section the configuration knows appears in the example.
    let text = std::fs::read_to_string(&path).unwrap();
    let doc: toml::Table = toml::from_str(&text).unwrap();
    for s in ["plant", "engine", "tag", "component", "material", "mqtt", "store", "database", "http", "alarms"] {
        assert!(doc.contains_key(s), "{PRODUCTION}: no [{s}] section");
    }
    let comps = doc["component"].as_array().unwrap();
    for sub in ["geometry", "wear", "initial", "thresholds"] {
        assert!(comps.iter().any(|c| c.get(sub).is_some()), "{PRODUCTION}: no [component.{sub}]");
    }
    let mqtt = doc["mqtt"].as_table().unwrap();
    assert!(mqtt.contains_key("tls"), "{PRODUCTION}: no [mqtt.tls]");
    let subs = mqtt["subscription"].as_array().unwrap();
    assert!(subs.iter().any(|s| s.get("payload").is_some()), "{PRODUCTION}: no [mqtt.subscription.payload]");

    // The environment overrides deploy/Containerfile and deploy/compose.yaml
    // set, read from those files, reach the service sections. They are
    // handed to the loader as given variables: the process environment,
    // which parallel tests and their children share, is left alone.
    let overrides = container_overrides();
    let names: Vec<&str> = overrides.iter().map(|(k, _)| k.as_str()).collect();
    for k in ["MQTT__HOST", "MQTT__PORT", "DATABASE__URL", "HTTP__LISTEN", "STORE__PATH"] {
        assert!(names.contains(&format!("LIFELEDGER__{k}").as_str()), "no LIFELEDGER__{k} in the container files");
    }
    let loaded = lifeledger::service::load_service_with(&path, &Overrides::Given(overrides.clone()));
    let (_, o) = loaded.unwrap_or_else(|e| panic!("{PRODUCTION} with the container's environment overrides: {e:#}"));
    assert_eq!(o.mqtt.host, "mosquitto");
    assert_eq!(o.mqtt.port, 8883);
    assert_eq!(o.database.as_ref().unwrap().url, "http://influxdb:8086");
    assert_eq!(o.http.listen, "0.0.0.0:8470");
    assert_eq!(o.store.path, PathBuf::from("/var/lib/lifeledger/lifeledger.ledger"));
    assert_eq!(o.mqtt.subscriptions.len(), svc.mqtt.subscriptions.len(), "overrides keep the rest");

    // Every key carries a comment: on its line or on the line above.
    let mut prev = "";
    for (n, line) in text.lines().enumerate() {
        let l = line.trim();
        let is_key = !l.is_empty() && !l.starts_with('#') && !l.starts_with('[') && l.contains('=');
        if is_key {
            assert!(l.contains(" # ") || prev.starts_with('#'), "{PRODUCTION}:{}: key without a comment: {l}", n + 1);
        }
        if !l.is_empty() {
            prev = l;
        }
    }
}

/// `LIFELEDGER__…` settings of deploy/Containerfile (`ENV K=V`, with
/// continuation lines) and of the lifeledger service in deploy/compose.yaml
/// (`K: V`, a `${VAR:-default}` taken at its default), compose last.
fn container_overrides() -> Vec<(String, String)> {
    let mut out = vec![];
    let containerfile = std::fs::read_to_string(repo().join("deploy/Containerfile")).unwrap();
    for word in containerfile.split_whitespace() {
        if let Some((k, v)) = word.split_once('=').filter(|(k, _)| k.starts_with("LIFELEDGER__")) {
            out.push((k.to_string(), v.to_string()));
        }
    }
    let compose = std::fs::read_to_string(repo().join("deploy/compose.yaml")).unwrap();
    for line in compose.lines() {
        if let Some((k, v)) = line.trim().split_once(": ").filter(|(k, _)| k.starts_with("LIFELEDGER__")) {
            let v = v.trim().trim_matches('"');
            let v = match v.strip_prefix("${").and_then(|x| x.strip_suffix('}')).and_then(|x| x.split_once(":-")) {
                Some((_, default)) => default.to_string(),
                None => v.to_string(),
            };
            out.retain(|(o, _)| o != k);
            out.push((k.to_string(), v));
        }
    }
    out
}

// Common practice for container recipes (no source): build in one stage and
// ship only the binary in a slim one, run as a dedicated non-root user, and
// mount only files that exist or that the deployment guide says to create.
#[test]
fn container_recipe_and_compose_file_hold_together() {
    let text = std::fs::read_to_string(repo().join("deploy/Containerfile")).unwrap();
    let froms = text.lines().filter(|l| l.starts_with("FROM ")).count();
    assert!(froms >= 2, "deploy/Containerfile: not multi-stage ({froms} FROM)");
    assert!(text.contains("cargo build --release --locked"), "deploy/Containerfile: build must be locked");
    assert!(repo().join("Cargo.lock").exists(), "--locked needs Cargo.lock in the repository");
    let user = text.lines().find_map(|l| l.strip_prefix("USER ")).expect("deploy/Containerfile: no USER");
    assert!(!user.starts_with("root") && !user.starts_with('0'), "deploy/Containerfile runs as {user}");
    // Everything it copies from the build context exists.
    for line in text.lines().filter(|l| l.starts_with("COPY ") && !l.contains("--from=")) {
        let parts: Vec<&str> = line.split_whitespace().skip(1).collect();
        for src in &parts[..parts.len() - 1] {
            assert!(repo().join(src).exists(), "deploy/Containerfile: COPY {src}: no such path");
        }
    }
    // The configuration it runs with is the one it copies.
    assert!(text.contains("COPY deploy/lifeledger.production.toml /etc/lifeledger/lifeledger.toml"));
    assert!(text.contains(r#""run", "--config", "/etc/lifeledger/lifeledger.toml""#));

    let compose = std::fs::read_to_string(repo().join("deploy/compose.yaml")).unwrap();
    for service in ["mosquitto", "influxdb", "grafana", "lifeledger"] {
        assert!(compose.contains(&format!("\n  {service}:\n")), "deploy/compose.yaml: no service {service}");
    }
    assert!(compose.contains("../dashboards:/var/lib/grafana/dashboards"), "Grafana must get the dashboards");
    let guide = std::fs::read_to_string(repo().join("deploy/README.md")).unwrap();
    for line in compose.lines() {
        let Some(mount) = line.trim().strip_prefix("- ") else { continue };
        let host = mount.split(':').next().unwrap();
        if !(host.starts_with("./") || host.starts_with("../")) {
            continue;
        }
        let p = repo().join("deploy").join(host);
        // Credentials are made by the operator, never committed.
        let made_by_operator = host.contains("/certs") || host.ends_with("/passwd");
        if made_by_operator {
            let name = if host.ends_with("/passwd") { "passwd" } else { "make-dev-certs.sh" };
            assert!(guide.contains(name), "deploy/README.md must say how to create {host}");
        } else {
            assert!(p.exists(), "deploy/compose.yaml mounts {host}, which does not exist");
        }
    }
}

/// deploy/mosquitto/make-dev-certs.sh writes certificates the broker can
/// load: mosquitto 2, started as root, drops to its own user before it
/// reads the certificate files, so the server key must be readable by that
/// user (the Debian broker here, started as the tests' user; the failure
/// showed as "Unable to load server key file ... Permission denied").
#[test]
fn dev_certificates_load_in_mosquitto() {
    let dir = tempfile::tempdir().unwrap();
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o755)).unwrap();
    let m = dir.path().join("mosquitto");
    std::fs::create_dir(&m).unwrap();
    std::fs::copy(repo().join("deploy/mosquitto/make-dev-certs.sh"), m.join("make-dev-certs.sh")).unwrap();
    let out = Command::new("bash").arg(m.join("make-dev-certs.sh")).bounded_output().unwrap();
    assert!(out.status.success(), "make-dev-certs.sh failed: {}", String::from_utf8_lossy(&out.stderr));
    let certs = m.join("certs");
    let port = common::free_port();
    let conf = dir.path().join("mosquitto.conf");
    std::fs::write(
        &conf,
        format!(
            "listener {port} 127.0.0.1\nallow_anonymous true\nlog_dest stderr\n\
             cafile {c}/ca.crt\ncertfile {c}/server.crt\nkeyfile {c}/server.key\n",
            c = certs.display()
        ),
    )
    .unwrap();
    let log = dir.path().join("mosquitto.log");
    let mut child = Command::new(if std::path::Path::new("/usr/sbin/mosquitto").exists() {
        "/usr/sbin/mosquitto"
    } else {
        "mosquitto"
    })
    .arg("-c")
    .arg(&conf)
    .stdout(std::process::Stdio::null())
    .stderr(std::fs::File::create(&log).unwrap())
    .spawn()
    .expect("mosquitto is installed (tests/run)");
    let listening = common::poll_until("mosquitto to listen with the dev certificates, or to exit", || {
        if let Some(status) = child.try_wait().unwrap() {
            return Some(Err(status));
        }
        std::net::TcpStream::connect(("127.0.0.1", port)).ok().map(|_| Ok(()))
    });
    let _ = child.kill();
    let _ = child.wait();
    let text = std::fs::read_to_string(&log).unwrap_or_default();
    assert!(listening.is_ok(), "mosquitto exited with the dev certificates ({listening:?}):\n{text}");
    assert!(!text.contains("Unable to load"), "mosquitto could not load a certificate file:\n{text}");
}

/// The container build's context leaves out the build outputs and the
/// history (Docker reads .dockerignore, Podman .containerignore), and the
/// shipped release binary carries no debug information.
#[test]
fn container_context_and_release_binary_are_lean() {
    for f in [".dockerignore", ".containerignore"] {
        let text = std::fs::read_to_string(repo().join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        let entries: BTreeSet<&str> = text.lines().map(str::trim).filter(|l| !l.starts_with('#')).collect();
        for want in ["target/", ".git/"] {
            assert!(entries.contains(want), "{f} must leave out {want}");
        }
    }
    let manifest: toml::Value = toml::from_str(&std::fs::read_to_string(repo().join("Cargo.toml")).unwrap()).unwrap();
    let strip = manifest["profile"]["release"].get("strip").and_then(|v| v.as_str());
    assert!(
        matches!(strip, Some("debuginfo" | "symbols")),
        "Cargo.toml [profile.release] must strip the shipped binary, has strip = {strip:?}"
    );
}

#[test]
fn systemd_unit_is_hardened() {
    let unit = std::fs::read_to_string(repo().join("deploy/lifeledger.service")).unwrap();
    let lines: BTreeSet<&str> = unit.lines().map(str::trim).collect();
    for want in [
        "ProtectSystem=strict",
        "ProtectHome=yes",
        "PrivateTmp=yes",
        "NoNewPrivileges=yes",
        "StateDirectory=lifeledger",
        "ConfigurationDirectory=lifeledger",
        "Restart=on-failure",
        "ExecReload=/bin/kill -HUP $MAINPID",
        "KillSignal=SIGTERM",
        "CapabilityBoundingSet=",
        // Readiness and the watchdog (sd_notify; see daemon/service/systemd.rs).
        "Type=notify",
        "NotifyAccess=main",
    ] {
        assert!(lines.contains(want), "deploy/lifeledger.service lacks {want}");
    }
    assert!(lines.iter().any(|l| l.starts_with("WatchdogSec=")), "deploy/lifeledger.service lacks WatchdogSec=");
    // Every Documentation= file is one the documented install steps put there.
    let guide = std::fs::read_to_string(repo().join("deploy/README.md")).unwrap();
    for doc in lines.iter().filter_map(|l| l.strip_prefix("Documentation=file://")) {
        assert!(
            guide.lines().any(|g| g.contains("install") && g.trim_end().ends_with(doc)),
            "deploy/README.md's install steps do not install {doc}, which the unit's Documentation= names"
        );
    }
    for prefix in ["User=", "RestartSec=", "TimeoutStopSec=", "MemoryMax=", "EnvironmentFile=", "ExecStart="] {
        assert!(lines.iter().any(|l| l.starts_with(prefix)), "deploy/lifeledger.service lacks {prefix}");
    }
}

#[test]
fn readmes_carry_the_caution() {
    for f in ["dashboards/README.md", "deploy/README.md"] {
        let text = std::fs::read_to_string(repo().join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        assert!(text.contains(lifeledger::CAUTION), "{f} lacks the caution");
    }
    let d = std::fs::read_to_string(repo().join("dashboards/README.md")).unwrap();
    assert!(d.contains("-dedup.minScrapeInterval=1ms"), "dashboards/README.md must name the dedup flag");
}

// ------------------------------------------------- colours, links, units

/// The alarm indices with levels per part (`alarm_threshold` `index` tag).
const INDICES: [&str; 5] =
    ["creep_life_fraction", "creep_strain", "wear_index", "fatigue_usage", "creep_fatigue_index"];

/// Whether `q` names `word` as a whole name (not as the start of a longer
/// one such as `creep_life_fraction_level`).
fn names_word(q: &str, word: &str) -> bool {
    q.match_indices(word).any(|(i, _)| {
        let next = q[i + word.len()..].chars().next();
        !next.is_some_and(|c| c.is_ascii_alphanumeric() || c == '_')
    })
}

/// Query text of a target, PromQL or Flux.
fn target_query(t: &Value) -> &str {
    t["expr"].as_str().or(t["query"].as_str()).unwrap_or("")
}

/// The indices a panel shows as raw values (a target naming the index
/// field without dividing it by the part's own `alarm_threshold`).
fn raw_indices(p: &Value) -> Vec<&'static str> {
    let mut out = vec![];
    for t in p["targets"].as_array().into_iter().flatten() {
        let q = target_query(t);
        if q.contains("alarm_threshold") {
            continue;
        }
        out.extend(INDICES.iter().filter(|i| names_word(q, i)));
    }
    out.sort();
    out.dedup();
    out
}

/// Every value-mapping list of a panel (defaults and overrides).
fn mapping_lists(p: &Value) -> Vec<&Value> {
    let fc = &p["fieldConfig"];
    let mut out: Vec<&Value> = fc["defaults"]["mappings"].as_array().into_iter().flatten().collect();
    for o in fc["overrides"].as_array().into_iter().flatten() {
        for prop in o["properties"].as_array().into_iter().flatten() {
            if prop["id"] == "mappings" {
                out.extend(prop["value"].as_array().into_iter().flatten());
            }
        }
    }
    out
}

/// The colour and text a panel's value mappings give a level number.
fn level_colour(p: &Value, level: i64) -> Option<(String, String)> {
    mapping_lists(p).into_iter().filter(|m| m["type"] == "value").find_map(|m| {
        let o = &m["options"][level.to_string()];
        Some((o["color"].as_str()?.to_string(), o["text"].as_str()?.to_string()))
    })
}

/// Whether a Grafana colour name is a green (the colour of "no level
/// reached" on every dashboard).
fn is_green(c: &str) -> bool {
    c.contains("green")
}

/// Single-value panels (stat, gauge, bar gauge, table) never colour a damage
/// index by one fixed scale for all parts: each part has its own levels
/// (`alarm_threshold`). A stat or table showing an index also shows the
/// part's `<index>_level` with value mappings: 0 green, advisory, warning
/// and critical each in its own colour, none green.
#[test]
fn single_value_panels_colour_by_each_parts_own_levels() {
    for kind in ["prometheus", "influxdb2"] {
        for (file, d) in dashboards(kind) {
            for p in panels(&d) {
                let ty = p["type"].as_str().unwrap_or("");
                if !["stat", "gauge", "bargauge", "table"].contains(&ty) {
                    continue;
                }
                let raw = raw_indices(p);
                let relative = p["targets"].as_array().into_iter().flatten().any(|t| {
                    let q = target_query(t);
                    q.contains("alarm_threshold") && INDICES.iter().any(|i| names_word(q, i))
                });
                if relative {
                    // A share of one of the part's levels cannot say which
                    // of its other levels is reached: below the level it is
                    // not "all clear" (green).
                    let base = &p["fieldConfig"]["defaults"]["thresholds"]["steps"][0]["color"];
                    assert!(
                        !base.as_str().is_some_and(is_green),
                        "{file}: panel {:?} shows green below the part's level, where its advisory may be reached",
                        title(p)
                    );
                }
                if raw.is_empty() {
                    continue;
                }
                let defaults = &p["fieldConfig"]["defaults"];
                let steps = defaults["thresholds"]["steps"].as_array().map_or(0, Vec::len);
                let by_thresholds = defaults["color"]["mode"] == "thresholds" || defaults["color"].is_null();
                assert!(
                    !(by_thresholds && steps > 1),
                    "{file}: panel {:?} colours {raw:?} by one fixed scale for every part ({} steps)",
                    title(p),
                    steps
                );
                if ty == "bargauge" {
                    continue;
                }
                let queries: Vec<&str> = p["targets"].as_array().into_iter().flatten().map(target_query).collect();
                for i in &raw {
                    let level = format!("{i}_level");
                    assert!(
                        queries.iter().any(|q| names_word(q, &level)),
                        "{file}: panel {:?} shows {i} without the part's own level ({level})",
                        title(p)
                    );
                }
                let colours: Vec<(String, String)> = (0..4)
                    .map(|l| {
                        level_colour(p, l)
                            .unwrap_or_else(|| panic!("{file}: panel {:?}: no value mapping for level {l}", title(p)))
                    })
                    .collect();
                assert!(is_green(&colours[0].0), "{file}: panel {:?}: level 0 is {:?}", title(p), colours[0]);
                for (l, want) in [(1, "advisory"), (2, "warning"), (3, "critical")] {
                    let (c, text) = &colours[l];
                    assert!(!is_green(c), "{file}: panel {:?}: level {l} is green", title(p));
                    assert!(
                        text.to_lowercase().contains(want),
                        "{file}: panel {:?}: level {l} reads {text:?}",
                        title(p)
                    );
                }
                let distinct: BTreeSet<&str> = colours.iter().map(|(c, _)| c.as_str()).collect();
                assert_eq!(distinct.len(), 4, "{file}: panel {:?}: level colours {colours:?}", title(p));
            }
        }
    }
}

/// On the demo month, outlet leg A ends at a life fraction of about 0.249,
/// above its own advisory level (0.245 in config/demo/plant.toml) and below
/// the old fixed yellow at 0.3: the component-detail stat must colour it as
/// an advisory, and a part below its levels green. The level the product
/// writes equals the count of the part's own published levels
/// (`alarm_threshold`) that its value has reached, for every component and
/// index (value >= level: the rule of the alarm book without its deadband).
/// (Run by `prometheus_dashboards_answer_on_the_demo_data`, on its
/// database: loading the demo month once saves CI a minute.)
fn demo_parts_are_coloured_by_their_own_levels(vm: &VictoriaMetrics, first_ms: i64, last_ms: i64) {
    let (start, end) = (first_ms / 1000, last_ms / 1000);
    let range = format!("{}s", end - start + 1);
    let instant = |q: &str| -> Vec<(String, f64)> {
        let ans = vm.query(q, end as f64);
        assert_eq!(ans["status"], "success", "{q}: {ans}");
        ans["data"]["result"]
            .as_array()
            .into_iter()
            .flatten()
            .map(|r| {
                let c = r["metric"]["component"].as_str().unwrap_or("").to_string();
                (c, r["value"][1].as_str().unwrap().parse::<f64>().unwrap())
            })
            .collect()
    };
    // The product's level against the published levels, every part and index.
    let mut compared = 0;
    for index in INDICES {
        let values = instant(&format!("max by (component) (last_over_time(component_state_{index}[{range}]))"));
        let levels: BTreeMap<String, f64> =
            instant(&format!("max by (component) (last_over_time(component_state_{index}_level[{range}]))"))
                .into_iter()
                .collect();
        for (component, v) in values {
            let published = instant(&format!(
                "max by (component, severity) (last_over_time(alarm_threshold_value{{component=\"{component}\",index=\"{index}\"}}[{range}]))"
            ));
            let want = published.iter().filter(|(_, l)| v >= *l).count() as f64;
            let got = levels.get(&component).unwrap_or_else(|| panic!("no {index}_level for {component}"));
            assert_eq!(*got, want, "{component}: {index} = {v}, levels {published:?}");
            compared += 1;
        }
    }
    assert!(compared >= 10, "only {compared} component indices compared");

    let leg_a = instant(&format!(
        "last_over_time(component_state_creep_life_fraction{{component=\"{}\"}}[{range}])",
        DEMO_COMPONENTS[0]
    ));
    let lf = leg_a[0].1;
    assert!((0.245..0.3).contains(&lf), "the demo's leg A ends between its advisory level and 0.3: {lf}");

    let (file, d) =
        dashboards("prometheus").into_iter().find(|(f, _)| f.ends_with("component-detail.json")).expect("detail");
    let stat = panels(&d)
        .into_iter()
        .find(|p| p["type"] == "stat" && raw_indices(p) == ["creep_life_fraction"])
        .unwrap_or_else(|| panic!("{file}: no stat of the creep life fraction"));
    let level_expr = stat["targets"]
        .as_array()
        .unwrap()
        .iter()
        .map(target_query)
        .find(|q| names_word(q, "creep_life_fraction_level"))
        .expect("the stat queries the level");
    let colour_of = |component: &str| {
        let values = BTreeMap::from([
            ("plant", DEMO_PLANT.to_string()),
            ("unit", DEMO_UNIT.to_string()),
            ("component", component.to_string()),
            ("__range", range.clone()),
        ]);
        let got = instant(&substitute(level_expr, &values));
        assert_eq!(got.len(), 1, "{file}: the level query answers one value for {component}: {got:?}");
        level_colour(stat, got[0].1 as i64).expect("a mapping for the level")
    };
    let (colour, text) = colour_of(DEMO_COMPONENTS[0]);
    assert!(!is_green(&colour) && text.contains("advisory"), "{file}: leg A at {lf} shows {text:?} in {colour}");
    let (colour, _) = colour_of("U2-SH1-PRIMARY-BANK");
    assert!(is_green(&colour), "{file}: a part below its levels shows {colour}");
}

/// Every dashboard-level link, panel link and data link of a dashboard.
fn all_links(d: &Value) -> Vec<(String, &Value)> {
    let mut out: Vec<(String, &Value)> =
        d["links"].as_array().into_iter().flatten().map(|l| ("dashboard".to_string(), l)).collect();
    for p in panels(d) {
        let mut lists = vec![&p["links"], &p["fieldConfig"]["defaults"]["links"]];
        for o in p["fieldConfig"]["overrides"].as_array().into_iter().flatten() {
            for prop in o["properties"].as_array().into_iter().flatten() {
                if prop["id"] == "links" {
                    lists.push(&prop["value"]);
                }
            }
        }
        for l in lists.into_iter().filter_map(Value::as_array).flatten() {
            out.push((format!("panel {:?}", title(p)), l));
        }
    }
    out
}

/// Grafana's own variables a link may use (data links and dashboard links).
const LINK_BUILTINS: [&str; 5] = ["__value", "__field", "__data", "__url_time_range", "__series"];

/// The overview links each part to its component-detail dashboard (same
/// data source kind, the component in the variable) and to its page on the
/// status page; the detail links back to the overview and to the part's
/// status page; the status page's address is one variable per dashboard.
/// The status page serves `/component/NAME` (daemon/service/page).
#[test]
fn dashboards_link_to_each_other_and_to_the_status_page() {
    let page_routes = std::fs::read_to_string(repo().join("daemon/service/page/mod.rs")).unwrap();
    assert!(page_routes.contains(".route(\"/component/"), "the status page serves /component/NAME");
    for kind in ["prometheus", "influxdb2"] {
        let all = dashboards(kind);
        let uid_of = |suffix: &str| {
            all.iter().find(|(f, _)| f.ends_with(suffix)).map(|(_, d)| d["uid"].as_str().unwrap().to_string()).unwrap()
        };
        let (overview, detail) = (uid_of("plant-overview.json"), uid_of("component-detail.json"));
        for (file, d) in &all {
            let page_var = d["templating"]["list"]
                .as_array()
                .unwrap()
                .iter()
                .find(|v| v["name"] == "status_page")
                .unwrap_or_else(|| panic!("{file}: no status_page variable (the status page's base address)"));
            let default = page_var["query"].as_str().unwrap_or("");
            assert!(
                default.starts_with("http://") || default.starts_with("https://"),
                "{file}: status_page {page_var}"
            );
            let links = all_links(d);
            let vars = variables(d);
            for (place, l) in &links {
                let url = l["url"].as_str().unwrap_or("");
                for v in used_variables(url) {
                    assert!(
                        vars.contains(&v) || LINK_BUILTINS.contains(&v.as_str()),
                        "{file}: {place}: link {url:?} uses ${v}, no variable of the dashboard"
                    );
                }
            }
            let urls: Vec<&str> = links.iter().filter_map(|(_, l)| l["url"].as_str()).collect();
            let is_overview = file.ends_with("plant-overview.json");
            let (to_uid, to_page) =
                if is_overview { (&detail, "${status_page}/component/") } else { (&overview, "${status_page}") };
            let target = format!("/d/{to_uid}");
            let cross = urls.iter().find(|u| u.starts_with(&target)).unwrap_or_else(|| {
                panic!("{file}: no link to {target} (the other dashboard of the same data source): {urls:?}")
            });
            for keep in ["${plant:queryparam}", "${unit:queryparam}", "${datasource:queryparam}"] {
                assert!(cross.contains(keep), "{file}: the link {cross:?} does not carry {keep}");
            }
            if kind == "influxdb2" {
                assert!(cross.contains("${bucket:queryparam}"), "{file}: the link {cross:?} does not carry the bucket");
            }
            if is_overview {
                assert!(cross.contains("var-component="), "{file}: the link to the detail names no component: {cross}");
                assert!(cross.contains("${__url_time_range}"), "{file}: the link to the detail keeps no time range");
            }
            assert!(
                urls.iter().any(|u| u.starts_with(to_page)),
                "{file}: no link to the status page ({to_page}...): {urls:?}"
            );
            if !is_overview {
                assert!(
                    urls.contains(&"${status_page}/component/${component}"),
                    "{file}: no link to the part's own status page: {urls:?}"
                );
            }
        }
    }
}

/// Grafana's unit ids for counts per second (Throughput category; from
/// memory of Grafana's unit list).
const PER_SECOND_UNITS: [&str; 10] = ["cps", "ops", "reqps", "rps", "wps", "iops", "eps", "mps", "recps", "rowsps"];

/// Counters of `service_health` (counts since start).
const COUNTERS: [&str; 3] = ["samples_accepted", "duplicates", "rejected_"];

/// A panel whose queries are per-second rates of counted things (PromQL
/// `rate`, Flux `derivative(unit: 1s)` of a `service_health` counter)
/// carries a per-second unit, and the sample-rate panel counts samples
/// ("cps", counts per second), not requests. (A rate of hours per hour,
/// such as the share of time unmonitored, is a ratio, not a rate.)
#[test]
fn rate_panels_carry_a_per_second_unit() {
    let mut samples = 0;
    for kind in ["prometheus", "influxdb2"] {
        for (file, d) in dashboards(kind) {
            for p in panels(&d) {
                let qs: Vec<&str> = p["targets"].as_array().into_iter().flatten().map(target_query).collect();
                let per_second = !qs.is_empty()
                    && qs.iter().all(|q| {
                        (q.contains("rate(") || q.contains("derivative(unit: 1s"))
                            && COUNTERS.iter().any(|c| q.contains(c))
                    });
                let unit = p["fieldConfig"]["defaults"]["unit"].as_str().unwrap_or("");
                if per_second {
                    assert!(PER_SECOND_UNITS.contains(&unit), "{file}: panel {:?}: unit {unit:?} for a rate", title(p));
                }
                if title(p).to_lowercase().contains("samples per second") {
                    assert!(per_second, "{file}: panel {:?} is not a per-second rate", title(p));
                    assert_eq!(unit, "cps", "{file}: panel {:?} counts samples", title(p));
                    samples += 1;
                }
            }
        }
    }
    assert_eq!(samples, 2, "one samples-per-second panel per overview");
}

/// The overview's component table lists the parts most needing attention
/// first: sorted by `attention_score` (higher first), a column the ranking
/// adds to `component_state` (live service only: `series_model::COMPONENT_STATE.live_only`).
#[test]
fn overview_table_sorts_by_attention_score() {
    for kind in ["prometheus", "influxdb2"] {
        let (file, d) =
            dashboards(kind).into_iter().find(|(f, _)| f.ends_with("plant-overview.json")).expect("overview");
        let table = panels(&d)
            .into_iter()
            .find(|p| p["type"] == "table" && !raw_indices(p).is_empty())
            .unwrap_or_else(|| panic!("{file}: no component table"));
        let queries: Vec<&str> = table["targets"].as_array().unwrap().iter().map(target_query).collect();
        assert!(queries.iter().any(|q| names_word(q, "attention_score")), "{file}: the table has no attention_score");
        let sort = &table["options"]["sortBy"][0];
        assert_eq!(sort["desc"], true, "{file}: the table sorts descending: {sort}");
        let column = sort["displayName"].as_str().unwrap_or("");
        assert!(column.to_lowercase().contains("attention"), "{file}: the table sorts by {column:?}");
        // The column it sorts by is the attention_score one, by its display name.
        let renamed = table["transformations"]
            .as_array()
            .into_iter()
            .flatten()
            .any(|t| t["options"]["renameByName"].as_object().is_some_and(|m| m.values().any(|v| v == column)));
        assert!(renamed || column == "attention_score", "{file}: no column is shown as {column:?}");
    }
}
