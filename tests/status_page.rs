//! The status page in a real browser: a real mosquitto broker, the service
//! fed over MQTT, and headless Chromium loading `/` and `/component/{name}`
//! with their scripts running against the live JSON API. The DOM Chromium
//! builds is checked for the ledger's numbers, the trend and histogram SVG,
//! the material sources and the caution; screenshots are kept under
//! `target/test-artifacts/` for people to look at.
//!
//! Chromium (Debian package `chromium`) is installed
//! by `tests/run`; without it these tests fail and say so.

mod common;

use common::service::{publish_all, samples_with_header, Service, ServiceConfig};
use common::{free_port, Mosquitto};
use std::path::{Path, PathBuf};

use common::chromium::chromium;
const CAUTION: &str = "Screening estimate only: limits, material data and acceptance must come from the plant's governing code and a responsible engineer.";

/// The header's metal temperature, TE-2.
const HEADER_TAG: &str = r#"[[tag]]
name = "TE-2"
unit = "degC"
valid_range = [0, 800]"#;

/// A third component, a header on TE-2 in another unit, for the unit filter
/// and the order of the rows.
const HEADER: &str = r#"[[component]]
name = "RH-HEADER"
unit = "U2"
kind = "header"
material = "P91"
design_temperature = { value = 570, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TE-2"
pressure = "PT-1"
[component.geometry]
outside_diameter = { value = 350, unit = "mm" }
wall = { value = 40, unit = "mm" }
[component.initial]
life_fraction = 0.12"#;

/// The shared test plant with the header, and every component carrying a
/// life already used when the service starts.
fn config(dir: &Path, mqtt_port: u16, http_port: u16) -> PathBuf {
    ServiceConfig {
        plant: "Status Page Test Station",
        client_id: "lifeledger-status-page-test",
        tags: HEADER_TAG,
        tube: "[component.initial]\nlife_fraction = 0.31",
        support: "[component.initial]\nwear_depth_mm = 0.21",
        components: HEADER,
        ..ServiceConfig::default()
    }
    .write(dir, mqtt_port, http_port)
}

/// Headless Chromium on `url` with `extra` arguments (`--dump-dom` or
/// `--screenshot=...`); its own throw-away profile; stdout returned.
fn chromium_run(url: &str, extra: &[&str]) -> String {
    let profile = tempfile::tempdir().unwrap();
    common::chromium::run(url, 5000, extra, profile.path(), &[])
}

fn dump_dom(port: u16, path: &str) -> String {
    let dom = chromium_run(&format!("http://127.0.0.1:{port}{path}"), &["--dump-dom"]);
    assert!(dom.contains("</html>"), "no DOM from chromium for {path}: {dom:?}");
    dom
}

/// Where screenshots go: `target/test-artifacts/`.
fn artifacts() -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).parent().expect("target dir").join("test-artifacts");
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn screenshot(port: u16, path: &str, file: &str, size: &str) -> PathBuf {
    let png = artifacts().join(file);
    let _ = std::fs::remove_file(&png);
    chromium_run(
        &format!("http://127.0.0.1:{port}{path}"),
        &[&format!("--screenshot={}", png.display()), &format!("--window-size={size}")],
    );
    let bytes = std::fs::read(&png).unwrap_or_else(|e| panic!("no screenshot {}: {e}", png.display()));
    assert!(
        bytes.starts_with(b"\x89PNG\r\n\x1a\n") && bytes.len() > 10_000,
        "{} is not a real screenshot",
        png.display()
    );
    png
}

/// The page's number format for life fraction and wear index (format.js
/// `frac`): three decimals from 0.01 up, four down to 0.001, then "< 0.001".
fn frac(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if v.abs() >= 0.01 {
        format!("{v:.3}")
    } else if v.abs() >= 0.001 {
        format!("{v:.4}")
    } else {
        "&lt; 0.001".into()
    }
}

/// Whole numbers as the page groups them (narrow no-break space between thousands).
fn group(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i) % 3 == 0 {
            out.push('\u{202f}');
        }
        out.push(ch);
    }
    out
}

/// Text as it appears in a serialised DOM's text nodes.
fn text_node(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('\u{a0}', "&nbsp;")
}

/// The overview's order: the API's, which lists the components in the
/// attention ranking with their `rank` (tests/page_overview.rs checks it).
fn worst_first(snap: &serde_json::Value) -> Vec<String> {
    let comps = snap["components"].as_array().unwrap();
    let ranks: Vec<u64> = comps.iter().map(|c| c["rank"].as_u64().expect("rank in /api/components")).collect();
    assert_eq!(ranks, (1..=comps.len() as u64).collect::<Vec<_>>(), "ranks 1..n in order");
    comps.iter().map(|c| c["component"].as_str().unwrap().to_string()).collect()
}

struct Fixture {
    _broker: Mosquitto,
    _dir: tempfile::TempDir,
    svc: Service,
    snap: serde_json::Value,
}

fn fixture() -> Fixture {
    chromium();
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = config(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    // As a plant sends them after an outage of its link: an hour at a
    // time, each integrated before the next (the trend keeps one point per
    // ledger commit; each batch waits about 2 s for the reorder window to
    // release its last samples).
    let s = samples_with_header(600);
    let mut snap = serde_json::Value::Null;
    for (i, chunk) in s.chunks(5 * 60).enumerate() {
        publish_all(broker.port, chunk, &format!("publisher-status-page-{i}"));
        snap = svc.wait_until_integrated(chunk.last().unwrap().1);
    }
    Fixture { _broker: broker, _dir: dir, svc, snap }
}

#[test]
fn overview_shows_every_component_worst_first_with_the_caution() {
    let f = fixture();
    let port = f.svc.http_port;
    // A component the plant does not have is a 404 that says so, not a
    // page of empty panels; a configured one answers 200.
    let missing = common::http::get(port, "/component/NO-SUCH-PART").unwrap();
    assert_eq!(missing.status, 404, "{}", missing.text());
    assert!(missing.text().contains("NO-SUCH-PART") && missing.text().contains("no component"), "{}", missing.text());
    let first = f.snap["components"][0]["component"].as_str().unwrap().to_string();
    let found = common::http::get(port, &format!("/component/{}", common::http::encode(&first))).unwrap();
    assert_eq!(found.status, 200, "{first}");
    let dom = dump_dom(port, "/");
    assert!(dom.contains(&text_node(CAUTION)), "caution missing from the overview");
    assert!(dom.contains("Status Page Test Station"), "plant name missing");
    // Every component with its life fraction (creep parts) or wear index.
    let comps = f.snap["components"].as_array().unwrap();
    assert_eq!(comps.len(), 3);
    for c in comps {
        let name = c["component"].as_str().unwrap();
        assert!(dom.contains(&format!("data-component=\"{name}\"")), "{name} has no row");
        let lf = c["creep_life_fraction"].as_f64().unwrap();
        let wi = c["wear_index"].as_f64().unwrap();
        let wear = c["hours_to_threshold"].as_object().unwrap().keys().any(|k| k.starts_with("wear_index."));
        let shown = if wear { frac(wi) } else { frac(lf) };
        assert!(dom.contains(&format!(">{shown}<")), "{name}: {shown} not on the page");
        assert!(if wear { wi > 0.0 } else { lf > 0.0 }, "{name} did not move: {c}");
    }
    // Strain of grades whose Norton constants are derived from the rupture
    // curve is marked, and the footnote under the table says why.
    let strain_note =
        comps.iter().find_map(|c| c["creep_strain_note"].as_str()).expect("a creep part with a strain note");
    assert!(dom.contains("id=\"strain-note\">† Creep strain ("), "strain footnote missing from the overview");
    assert!(dom.contains(&format!("): {strain_note}.</p>")), "strain footnote does not carry the note");
    // Worst first.
    let order = worst_first(&f.snap);
    let rows = &dom[dom.find("id=\"component-rows\"").expect("component table")..];
    let pos: Vec<usize> = order.iter().map(|n| rows.find(&format!("data-component=\"{n}\"")).unwrap()).collect();
    assert!(pos.windows(2).all(|w| w[0] < w[1]), "rows not worst first: expected {order:?}");
    // The unit filter is built from the data.
    assert!(dom.contains("<option value=\"U1\">U1</option>") && dom.contains("<option value=\"U2\">U2</option>"));
    // Header: MQTT state, samples, and the server's read-only answer.
    assert!(dom.contains("MQTT <b>connected</b>"), "MQTT state missing");
    let accepted = f.snap["engine"]["accepted"].as_u64().unwrap();
    assert!(accepted > 0);
    assert!(dom.contains(&format!("{} accepted", group(accepted))), "accepted count missing");
    assert!(dom.contains("read-only"));
    // Alarm state: SH-TUBE carried 0.31 in, past the default advisory 0.3.
    let sh = f.snap["alarms"].as_array().unwrap().iter().find(|a| a["component"] == "SH-TUBE").unwrap();
    assert!(sh["worst_severity"].is_string(), "{sh}");
    assert!(dom.contains("unack</span>"));
    // Recent alarm events are listed.
    let events = f.snap["recent_events"].as_array().unwrap();
    assert!(!events.is_empty());
    let newest = events.last().unwrap()["message"].as_str().unwrap();
    assert!(dom.contains(&text_node(newest)), "newest event {newest:?} not listed");

    let png = screenshot(port, "/", "status-overview.png", "1600,1000");
    eprintln!("overview screenshot: {}", png.display());
    // A laptop screen, filtered to one unit.
    screenshot(port, "/#unit=U1", "status-overview-laptop.png", "1280,800");
}

#[test]
fn component_page_shows_trends_histogram_alarms_and_material_sources() {
    let f = fixture();
    let port = f.svc.http_port;
    let trend = f.svc.get_json("/api/components/SH-TUBE/trend").unwrap();
    assert!(trend["points"].as_array().unwrap().len() > 10);
    let mat = f.svc.get_json("/api/materials/2.25Cr-1Mo").unwrap();

    let dom = dump_dom(port, "/component/SH-TUBE");
    assert!(dom.contains(&text_node(CAUTION)), "caution missing from the component page");
    assert!(dom.contains("<h1 id=\"component-name\">SH-TUBE</h1>"));
    // Trend SVG with a drawn line for each quantity.
    for key in ["metal_temperature_c", "pressure_mpa", "hoop_stress_mpa", "creep_life_fraction"] {
        let at = dom
            .find(&format!("<svg class=\"chart\" id=\"trend-{key}\""))
            .unwrap_or_else(|| panic!("no trend chart for {key}"));
        let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
        assert!(svg.contains("<path class=\"line") && svg.contains("d=\"M"), "trend {key} has no line");
    }
    // Life-fraction level lines (advisory, warning, critical).
    let at = dom.find("id=\"trend-creep_life_fraction\"").unwrap();
    let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
    assert!(svg.contains("advisory") && svg.contains("warning") && svg.contains("critical"));
    // Time-at-temperature histogram with bars.
    let at = dom.find("id=\"hist-temperature\"").expect("temperature histogram");
    let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
    assert!(svg.matches("<rect class=\"bar").count() >= 3, "histogram has too few bars");
    // The life fraction as the overview shows it.
    let c = f.snap["components"].as_array().unwrap().iter().find(|c| c["component"] == "SH-TUBE").unwrap();
    // The temperature × pressure class table: a header row, at least one
    // temperature class with hours, and the total of the ledger's hours.
    let at = dom.find("<table class=\"classes\" id=\"class-table\">").expect("temperature x pressure class table");
    let table = &dom[at..at + dom[at..].find("</table>").unwrap()];
    assert!(table.matches("<tr>").count() >= 3, "class table has no class with hours: {table}");
    let total: f64 = c["histograms"]["temperature_pressure"]["hours"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|r| r.as_array().unwrap().iter().map(|h| h.as_f64().unwrap()))
        .sum();
    assert!(total > 0.0 && (total - c["integrated_h"].as_f64().unwrap()).abs() < 1e-6 * total);
    // The remaining-life tile says whether the projection is still settling.
    let settling = c["projection"]["settling"].as_bool().unwrap();
    assert_eq!(dom.contains("settling: larger of recent and design rate"), settling, "settling {settling}");
    assert!(dom.contains(&frac(c["creep_life_fraction"].as_f64().unwrap())));
    // Creep strain from Norton constants derived from the rupture curve is
    // no independent evidence: the API carries the basis and the page says so.
    assert_eq!(mat["material"]["norton"]["basis"], "derived_from_rupture");
    assert_eq!(c["creep_strain_basis"], "derived_from_rupture");
    let note = c["creep_strain_note"].as_str().expect("creep_strain_note in /api/components");
    assert!(note.contains("not independent evidence"), "{note}");
    assert!(
        dom.contains(&format!("<p class=\"warnnote small\" id=\"strain-note\">Creep strain: {note}.</p>")),
        "strain note not shown on the component page"
    );
    // Material data with their sources.
    let m = &mat["material"];
    for src in [&m["larson_miller"]["source"], &m["melting_point_k"]["source"]] {
        let src = src.as_str().unwrap();
        assert!(dom.contains(&text_node(src)), "material source {src:?} not shown");
    }
    // The alarm history from the journal: the tube's newest event is listed.
    let history = f.svc.get_json("/api/components/SH-TUBE/alarms?limit=20").unwrap();
    let newest = history["events"][0]["message"].as_str().expect("the tube has alarm events");
    assert!(dom.contains(&text_node(newest)), "newest journal event {newest:?} not listed");
    assert!(dom.contains("<a id=\"history-link\" href=\"/api/components/SH-TUBE/alarms\">"));
    // The component's alarms; read-only: no command buttons.
    assert!(dom.contains("Creep life fraction"));
    assert!(!dom.contains("data-act=\"acknowledge\""), "command buttons shown without a token");

    // A wear part shows its wear-index trend and no creep charts.
    let dom = dump_dom(port, "/component/SUPPORT");
    assert!(dom.contains("id=\"trend-wear_index\""));
    assert!(!dom.contains("id=\"trend-creep_life_fraction\""));
    assert!(dom.contains(&text_node(CAUTION)));

    let png = screenshot(port, "/component/SH-TUBE", "status-component.png", "1600,1000");
    eprintln!("component screenshot: {}", png.display());
    // The whole page, for people reviewing the layout.
    screenshot(port, "/component/SH-TUBE", "status-component-full.png", "1600,3600");
}
