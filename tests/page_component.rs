//! The component page in a real browser: colour only for a current
//! exceedance, one figure per card, wear contacts showing wear panels and
//! charting their own inputs, printing (A4 and US letter, to PDF), operator
//! actions (a name, a shelve duration within the configured maximum, a
//! wrong token told at once, buttons that fit their labels) and the
//! snapshot's warnings.
//!
//! Real components throughout: mosquitto, `lifeledger run` fed over MQTT
//! and headless Chromium (Debian package `chromium`; `pdfinfo` and
//! `pdftotext` from `poppler-utils`), all installed by `tests/run`.
//!
//! Interaction (typing a token, clicking Acknowledge) needs a script on the
//! page's own origin: [`Proxy`] serves a small harness page beside the
//! service's pages on one loopback port and passes everything else through
//! to the service, and the harness drives the page in a same-origin frame
//! and writes what it saw into its own DOM, which Chromium dumps.

mod common;

use common::service::{publish_all, samples, Sample, Service, ServiceConfig, T0};
use common::{free_port, BoundedOutput, Mosquitto};
use std::io::{Read, Write};
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::Command;

use common::chromium::chromium;
const CAUTION: &str = "Screening estimate only: limits, material data and acceptance must come from the plant's governing code and a responsible engineer.";
const PLANT: &str = "Component Page Test Station";
/// The operator token of the fixtures that take commands.
const TOKEN: &str = "page-test-token-7f3a";
/// The longest shelve those fixtures configure, hours.
const MAX_SHELVE_H: f64 = 12.0;

struct Fixture {
    _broker: Mosquitto,
    _dir: tempfile::TempDir,
    svc: Service,
    snap: serde_json::Value,
}

/// The shared test plant, SH-TUBE carrying 0.31 of its life in (past the
/// default advisory 0.3, so it has an unacknowledged alarm), fed ten hours
/// in one-hour batches (the trend keeps a point per commit; each batch
/// waits about 2 s for the reorder window to release its last samples). With
/// `commands`, an operator token and `[alarms] max_shelve_h`.
fn fixture(commands: bool) -> Fixture {
    chromium();
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let tail = if commands {
        format!("token_env = \"LIFELEDGER_PAGE_TEST_TOKEN\"\n[alarms]\nmax_shelve_h = {MAX_SHELVE_H}\n")
    } else {
        String::new()
    };
    let cfg = ServiceConfig {
        plant: PLANT,
        client_id: "lifeledger-page-component-test",
        tube: "[component.initial]\nlife_fraction = 0.31",
        tail: &tail,
        ..ServiceConfig::default()
    }
    .write(dir.path(), broker.port, http_port);
    let svc = if commands {
        Service::start_with_env(&cfg, http_port, &[("LIFELEDGER_PAGE_TEST_TOKEN", TOKEN)])
    } else {
        Service::start(&cfg, http_port)
    };
    svc.wait_connected();
    let snap = feed(&broker, &svc, &samples(600), "base");
    Fixture { _broker: broker, _dir: dir, svc, snap }
}

/// Publishes `s` an hour at a time, each integrated before the next; the
/// last snapshot.
fn feed(broker: &Mosquitto, svc: &Service, s: &[Sample], id: &str) -> serde_json::Value {
    let mut snap = serde_json::Value::Null;
    for (i, chunk) in s.chunks(4 * 60).enumerate() {
        publish_all(broker.port, chunk, &format!("publisher-page-{id}-{i}"));
        snap = svc.wait_until_integrated(chunk.last().unwrap().1);
    }
    snap
}

fn component<'a>(snap: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    snap["components"].as_array().unwrap().iter().find(|c| c["component"] == name).unwrap()
}

/// Headless Chromium on `url` with `extra` arguments; its own throw-away
/// profile; stdout returned.
fn chromium_run(url: &str, budget_ms: u32, extra: &[&str]) -> String {
    let profile = tempfile::tempdir().unwrap();
    common::chromium::run(url, budget_ms, extra, profile.path(), &[])
}

fn dump_dom(port: u16, path: &str) -> String {
    let dom = chromium_run(&format!("http://127.0.0.1:{port}{path}"), 5000, &["--dump-dom"]);
    assert!(dom.contains("</html>"), "no DOM from chromium for {path}: {dom:?}");
    dom
}

/// Where PDFs go for people to look at: `target/test-artifacts/`.
fn artifacts() -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).parent().expect("target dir").join("test-artifacts");
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Text as it appears in a serialised DOM's text nodes.
fn text_node(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('\u{a0}', "&nbsp;")
}

fn unescape(s: &str) -> String {
    s.replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", "\"").replace("&#39;", "'").replace("&amp;", "&")
}

/// The figure cards of a dumped component page: (class, label, value, sub).
fn tiles(dom: &str) -> Vec<(String, String, String, String)> {
    let at = dom.find("id=\"figures\"").expect("figures section");
    let end = at + dom[at..].find("</section>").unwrap();
    let mut out = vec![];
    for part in dom[at..end].split("<div class=\"tile").skip(1) {
        let cls = part[..part.find('"').unwrap()].trim().to_string();
        let grab = |key: &str| {
            part.find(&format!("<span class=\"{key}\">"))
                .map(|i| {
                    let s = &part[i + key.len() + 15..];
                    let t = &s[..s.find("</span>").unwrap()];
                    // Drop inner tags (the unit's <small>).
                    let mut plain = String::new();
                    let mut inside = false;
                    for ch in t.chars() {
                        match ch {
                            '<' => inside = true,
                            '>' => inside = false,
                            c if !inside => plain.push(c),
                            _ => {}
                        }
                    }
                    unescape(&plain)
                })
                .unwrap_or_default()
        };
        out.push((cls, grab("tile-label"), grab("tile-value"), grab("tile-sub")));
    }
    out
}

fn tile<'a>(t: &'a [(String, String, String, String)], label: &str) -> &'a (String, String, String, String) {
    t.iter().find(|x| x.1 == label).unwrap_or_else(|| panic!("no card {label:?} among {t:?}"))
}

// ---------------------------------------------------------------------
// A same-origin harness: a loopback proxy in front of the service.
// ---------------------------------------------------------------------

/// Listens on a free loopback port: `/__harness` answers `harness`; every
/// other request goes to the service on `upstream` (one request per
/// connection). A page asked for with `__paper=A4` in its query gets
/// `@page { size: A4 }` added for the test (the page itself names no
/// paper: the printer's is used).
struct Proxy {
    port: u16,
}

impl Proxy {
    fn start(upstream: u16, harness: String) -> Proxy {
        let listener = TcpListener::bind("127.0.0.1:0").unwrap();
        let port = listener.local_addr().unwrap().port();
        let harness = std::sync::Arc::new(harness);
        std::thread::spawn(move || {
            for conn in listener.incoming() {
                let Ok(conn) = conn else { continue };
                let harness = harness.clone();
                std::thread::spawn(move || {
                    let _ = serve(conn, upstream, &harness);
                });
            }
        });
        Proxy { port }
    }
}

fn serve(mut conn: TcpStream, upstream: u16, harness: &str) -> std::io::Result<()> {
    conn.set_read_timeout(Some(std::time::Duration::from_secs(60)))?;
    let mut buf = Vec::new();
    let mut chunk = [0u8; 8192];
    let head_end = loop {
        if let Some(i) = buf.windows(4).position(|w| w == b"\r\n\r\n") {
            break i;
        }
        let n = conn.read(&mut chunk)?;
        if n == 0 {
            return Ok(());
        }
        buf.extend_from_slice(&chunk[..n]);
    };
    let head = String::from_utf8_lossy(&buf[..head_end]).into_owned();
    let mut lines = head.split("\r\n");
    let mut first = lines.next().unwrap_or("").split(' ');
    let (method, target) = (first.next().unwrap_or("GET").to_string(), first.next().unwrap_or("/").to_string());
    let mut headers = vec![];
    let mut length = 0usize;
    for l in lines {
        if let Some((k, v)) = l.split_once(':') {
            let (k, v) = (k.trim(), v.trim());
            match k.to_ascii_lowercase().as_str() {
                "content-length" => length = v.parse().unwrap_or(0),
                "authorization" | "content-type" | "accept" => headers.push((k.to_string(), v.to_string())),
                _ => {}
            }
        }
    }
    let mut body = buf[head_end + 4..].to_vec();
    while body.len() < length {
        let n = conn.read(&mut chunk)?;
        if n == 0 {
            break;
        }
        body.extend_from_slice(&chunk[..n]);
    }
    let (status, ctype, mut answer) = if target.starts_with("/__harness") {
        (200, "text/html; charset=utf-8", harness.as_bytes().to_vec())
    } else {
        let a4 = target.contains("__paper=A4");
        let path = target.split('?').next().unwrap().to_string();
        let forward = if a4 { path.clone() } else { target.clone() };
        let h: Vec<(&str, &str)> = headers.iter().map(|(k, v)| (k.as_str(), v.as_str())).collect();
        let r = common::http::request(upstream, &method, &forward, &h, &body)?;
        let ctype = if path.ends_with(".css") {
            "text/css; charset=utf-8"
        } else if path.ends_with(".js") {
            "text/javascript; charset=utf-8"
        } else if path.ends_with(".svg") {
            "image/svg+xml"
        } else if path.starts_with("/api/") {
            "application/json"
        } else {
            "text/html; charset=utf-8"
        };
        let mut b = r.body;
        if a4 {
            b = String::from_utf8_lossy(&b)
                .replace("</head>", "<style>@page { size: A4; }</style></head>")
                .into_bytes();
        }
        (r.status, ctype, b)
    };
    let mut out = format!(
        "HTTP/1.1 {status} X\r\nContent-Type: {ctype}\r\nContent-Length: {}\r\nCache-Control: no-store\r\nConnection: close\r\n\r\n",
        answer.len()
    )
    .into_bytes();
    out.append(&mut answer);
    conn.write_all(&out)?;
    conn.flush()
}

/// A harness page that runs `body` (an async JavaScript block with
/// `frame`, `doc()`, `load(path)`, `sleep(ms)`, `until(what, fn)` and
/// `log(text)`) and writes the log into `<pre id="out">`.
fn harness(body: &str) -> String {
    format!(
        r#"<!doctype html><html><head><meta charset="utf-8"><title>harness</title></head><body>
<iframe id="frame" style="width:1920px;height:1400px;border:0"></iframe>
<pre id="out"></pre>
<script>
const frame = document.getElementById('frame');
const out = document.getElementById('out');
const doc = () => frame.contentDocument;
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));
function log(s) {{ out.textContent += s + '\n'; }}
async function until(what, fn) {{
  for (let i = 0; i < 200; i++) {{ const v = await fn(); if (v) return v; await sleep(100); }}
  throw new Error('gave up waiting for ' + what);
}}
function load(path) {{ return new Promise((r) => {{ frame.onload = r; frame.src = path; }}); }}
(async () => {{
  try {{
{body}
    log('HARNESS-DONE');
  }} catch (e) {{ log('HARNESS-ERROR ' + e.message); }}
}})();
</script></body></html>"#
    )
}

/// Runs `body` in the harness in front of the service; the log lines.
fn drive(svc: &Service, body: &str) -> Vec<String> {
    let proxy = Proxy::start(svc.http_port, harness(body));
    let dom = chromium_run(&format!("http://127.0.0.1:{}/__harness", proxy.port), 60_000, &["--dump-dom"]);
    let at = dom.find("<pre id=\"out\">").unwrap_or_else(|| panic!("no harness output in {dom}")) + 14;
    let text = unescape(&dom[at..at + dom[at..].find("</pre>").unwrap()]);
    let lines: Vec<String> = text.lines().map(String::from).collect();
    assert!(lines.iter().any(|l| l == "HARNESS-DONE"), "the harness did not finish: {lines:#?}");
    lines
}

fn logged<'a>(lines: &'a [String], key: &str) -> &'a str {
    lines
        .iter()
        .find_map(|l| l.strip_prefix(&format!("{key} ")))
        .unwrap_or_else(|| panic!("no {key} in the harness log {lines:#?}"))
}

fn alarm<'a>(snap: &'a serde_json::Value, component: &str, index: &str) -> &'a serde_json::Value {
    snap["alarms"]
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["component"] == component)
        .and_then(|a| a["alarms"].as_array().unwrap().iter().find(|r| r["index"] == index))
        .unwrap_or_else(|| panic!("no alarm {component}/{index} in {}", snap["alarms"]))
}

// ---------------------------------------------------------------------
// 1. Amber only for a current exceedance.
// ---------------------------------------------------------------------

#[test]
fn metal_temperature_is_amber_only_while_above_design() {
    let f = fixture(false);
    let port = f.svc.http_port;
    // The stream's over-temperature hour (593 °C against 570 °C design,
    // minutes 300-360) is past: the ledger keeps it as hours over design
    // and a sticky flag; the newest temperature is below design.
    let c = component(&f.snap, "SH-TUBE");
    let (now, design) = (c["metal_temperature_c"].as_f64().unwrap(), c["design_temperature_c"].as_f64().unwrap());
    assert!(now < design, "the fixture should end below design: {now} vs {design}");
    assert!(c["over_design_h"].as_f64().unwrap() > 0.5, "{c}");
    assert!(c["flags"].as_array().unwrap().iter().any(|f| f == "over_design_temperature"), "{c}");
    let t = tiles(&dump_dom(port, "/component/SH-TUBE"));
    let temp = tile(&t, "Metal temperature");
    assert!(!temp.0.contains("warning"), "metal temperature {now} °C below design {design} °C is amber: {temp:?}");
    // The past exceedance is history: hours over design, not a colour.
    let over = tile(&t, "Over design");
    assert!(!over.0.contains("warning"), "past hours over design are coloured: {over:?}");
    assert!(over.2.chars().any(|ch| ch.is_ascii_digit()), "{over:?}");

    // Now above design: amber.
    let hot: Vec<Sample> = (600..620)
        .flat_map(|m| {
            let ts = T0 + 60 * m;
            [
                ("TE-1".to_string(), ts, 590.0),
                ("PT-1".to_string(), ts, 150.0),
                ("LOAD-1".to_string(), ts, 80.0),
                ("SLIP-1".to_string(), ts, 40.0),
            ]
        })
        .collect();
    let snap = feed(&f._broker, &f.svc, &hot, "hot");
    assert!(component(&snap, "SH-TUBE")["metal_temperature_c"].as_f64().unwrap() > design);
    let t = tiles(&dump_dom(port, "/component/SH-TUBE"));
    let temp = tile(&t, "Metal temperature");
    assert!(temp.0.contains("warning"), "590 °C against {design} °C design is not amber: {temp:?}");
}

// ---------------------------------------------------------------------
// 2. Each figure on its own card.
// ---------------------------------------------------------------------

#[test]
fn each_figure_has_its_own_card() {
    let f = fixture(false);
    let t = tiles(&dump_dom(f.svc.http_port, "/component/SH-TUBE"));
    // Hours over design, extrapolated hours, hours in the creep range and
    // hours integrated are four figures: four cards, none carrying another
    // figure in its small print.
    for label in ["Over design", "Extrapolated", "In creep range", "Integrated", "Peak metal temperature"] {
        let card = tile(&t, label);
        assert!(card.2.chars().any(|ch| ch.is_ascii_digit()), "card {label} has no figure: {card:?}");
    }
    for label in ["Over design", "Extrapolated", "In creep range", "Metal temperature"] {
        let card = tile(&t, label);
        assert!(!card.3.contains("extrapolated"), "card {label} carries the extrapolated hours: {card:?}");
        assert!(
            !card.3.contains("integrated") && !card.3.contains("peak"),
            "card {label} carries another figure: {card:?}"
        );
    }
}

// ---------------------------------------------------------------------
// 3. A wear contact's page shows what it is tracked for.
// ---------------------------------------------------------------------

#[test]
fn wear_contact_page_shows_wear_and_charts_its_own_inputs() {
    let f = fixture(false);
    let port = f.svc.http_port;
    // The trend carries the contact's inputs: the load and the slip
    // amplitude published (LOAD-1 = 80 ± 10 N, SLIP-1 = 40 ± 5 µm, so
    // 0.035-0.045 mm: 1 µm = 0.001 mm, SI) and the configured 25 Hz.
    let trend = f.svc.get_json("/api/components/SUPPORT/trend").unwrap();
    let pts = trend["points"].as_array().unwrap();
    assert!(pts.len() > 10, "{trend}");
    for p in pts {
        let load = p["wear_load_n"].as_f64().unwrap_or_else(|| panic!("no wear_load_n in {p}"));
        let slip = p["wear_slip_mm"].as_f64().unwrap_or_else(|| panic!("no wear_slip_mm in {p}"));
        assert!((70.0 - 1e-9..=90.0 + 1e-9).contains(&load), "load {load} N outside what was published");
        assert!((0.035 - 1e-12..=0.045 + 1e-12).contains(&slip), "slip {slip} mm outside what was published");
        assert_eq!(p["wear_frequency_hz"].as_f64(), Some(25.0), "{p}");
    }
    // A creep part has no wear inputs.
    let tube = f.svc.get_json("/api/components/SH-TUBE/trend").unwrap();
    assert!(tube["points"][0]["wear_load_n"].is_null(), "{}", tube["points"][0]);

    let dom = dump_dom(port, "/component/SUPPORT");
    assert!(dom.contains(&text_node(CAUTION)));
    for key in ["wear_index", "wear_load_n", "wear_slip_mm"] {
        let at = dom
            .find(&format!("<svg class=\"chart\" id=\"trend-{key}\""))
            .unwrap_or_else(|| panic!("the wear contact has no chart of {key}"));
        let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
        assert!(svg.contains("<path class=\"line") && svg.contains("d=\"M"), "chart {key} has no line");
    }
    // No creep panels: no rupture curve, no time at temperature or
    // pressure, no temperature × pressure classes, no creep material rows.
    for creep in [
        "rupture curve",
        "Time at temperature",
        "Time at pressure",
        "id=\"class-table",
        "Larson-Miller",
        "Reference rupture strengths",
        "Norton creep",
        "Creep threshold",
    ] {
        assert!(!dom.contains(creep), "the wear contact's page shows {creep:?}");
    }
    // The creep part keeps its creep panels.
    let dom = dump_dom(port, "/component/SH-TUBE");
    for creep in ["rupture curve", "Time at temperature", "id=\"hist-temperature\"", "Larson-Miller"] {
        assert!(dom.contains(creep), "the creep part's page lost {creep:?}");
    }
    assert!(!dom.contains("id=\"trend-wear_load_n\""), "the creep part charts wear inputs");
    // For people reviewing the layout.
    let png = artifacts().join("component-SUPPORT.png");
    chromium_run(
        &format!("http://127.0.0.1:{port}/component/SUPPORT"),
        5000,
        &[&format!("--screenshot={}", png.display()), "--window-size=1600,2200"],
    );
    eprintln!("wear contact screenshot: {}", png.display());
}

// ---------------------------------------------------------------------
// 4. Printing.
// ---------------------------------------------------------------------

/// `pdfinfo` of `pdf`: (pages, page size line).
fn pdfinfo(pdf: &Path) -> (u32, String) {
    let out = Command::new("pdfinfo").arg(pdf).bounded_output().expect("pdfinfo (poppler-utils; run tests/run)");
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(out.status.success(), "pdfinfo {}: {}", pdf.display(), String::from_utf8_lossy(&out.stderr));
    let field = |k: &str| {
        text.lines()
            .find_map(|l| l.strip_prefix(k).map(|v| v.trim().to_string()))
            .unwrap_or_else(|| panic!("no {k} in {text}"))
    };
    (field("Pages:").parse().unwrap(), field("Page size:"))
}

fn pdftext(pdf: &Path) -> String {
    let out = Command::new("pdftotext").args([pdf.to_str().unwrap(), "-"]).bounded_output().expect("pdftotext");
    assert!(out.status.success());
    String::from_utf8_lossy(&out.stdout).into_owned()
}

#[test]
fn component_page_prints_legibly_on_a4_and_letter() {
    let f = fixture(false);
    let proxy = Proxy::start(f.svc.http_port, String::new());
    // Paper sizes in PostScript points: A4 210 × 297 mm (ISO 216) is
    // 595.28 × 841.89 pt, US letter 8.5 × 11 in is 612 × 792 pt
    // (1 pt = 1/72 in; common practice).
    for (paper, query, w, h) in [("A4", "?__paper=A4", 595.0, 842.0), ("letter", "", 612.0, 792.0)] {
        let pdf = artifacts().join(format!("component-SH-TUBE-{paper}.pdf"));
        let _ = std::fs::remove_file(&pdf);
        chromium_run(
            &format!("http://127.0.0.1:{}/component/SH-TUBE{query}", proxy.port),
            5000,
            &[&format!("--print-to-pdf={}", pdf.display()), "--no-pdf-header-footer"],
        );
        let (pages, size) = pdfinfo(&pdf);
        let dims: Vec<f64> = size.split_whitespace().filter_map(|s| s.parse().ok()).collect();
        assert!(dims.len() >= 2 && (dims[0] - w).abs() < 1.5 && (dims[1] - h).abs() < 1.5, "{paper}: page size {size}");
        // Today's screen layout printed as 7 A4 pages; the print layout
        // keeps the page to at most 6.
        assert!((1..=6).contains(&pages), "{paper}: {pages} pages ({})", pdf.display());
        let text = pdftext(&pdf);
        let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
        for want in ["SH-TUBE", PLANT, "Printed", CAUTION] {
            assert!(flat.contains(want), "{paper}: {want:?} not printed ({})", pdf.display());
        }
        for gone in ["operator token", "Enable commands", "Fit data", "Show levels", "1 week", "Enter a finding"] {
            assert!(!flat.contains(gone), "{paper}: {gone:?} printed ({})", pdf.display());
        }
        // Legible: no word smaller than about 6 pt (a word's box is about
        // 1.2 times its font size; 6 pt as the smallest print people read
        // without effort is common practice). Charts drawn for the screen
        // and shrunk onto paper would put their labels far below it.
        let small = small_words(&pdf, 7.0);
        assert!(small.is_empty(), "{paper}: words printed below 6 pt: {small:?} ({})", pdf.display());
        eprintln!("{paper}: {pages} pages, {}", pdf.display());
    }
    // The overview prints by the same rules.
    let pdf = artifacts().join("overview-letter.pdf");
    let _ = std::fs::remove_file(&pdf);
    chromium_run(
        &format!("http://127.0.0.1:{}/", proxy.port),
        5000,
        &[&format!("--print-to-pdf={}", pdf.display()), "--no-pdf-header-footer"],
    );
    let (pages, _) = pdfinfo(&pdf);
    assert!((1..=4).contains(&pages), "overview: {pages} pages ({})", pdf.display());
    let flat = pdftext(&pdf).split_whitespace().collect::<Vec<_>>().join(" ");
    for want in [PLANT, "plant overview", "Printed", CAUTION, "SH-TUBE", "SUPPORT"] {
        assert!(flat.contains(want), "overview: {want:?} not printed ({})", pdf.display());
    }
    for gone in ["operator token", "Enable commands"] {
        assert!(!flat.contains(gone), "overview: {gone:?} printed ({})", pdf.display());
    }
}

/// Words of `pdf` whose box (`pdftotext -bbox`) is lower than `min_pt`.
fn small_words(pdf: &Path, min_pt: f64) -> Vec<(String, f64)> {
    let out =
        Command::new("pdftotext").args(["-bbox", pdf.to_str().unwrap(), "-"]).bounded_output().expect("pdftotext");
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    let attr = |w: &str, k: &str| -> f64 {
        let at = w.find(&format!("{k}=\"")).unwrap() + k.len() + 2;
        w[at..at + w[at..].find('"').unwrap()].parse().unwrap()
    };
    text.split("<word ")
        .skip(1)
        .filter_map(|w| {
            let h = attr(w, "yMax") - attr(w, "yMin");
            let word = w[w.find('>').unwrap() + 1..w.find("</word>").unwrap()].to_string();
            (h < min_pt).then_some((word, h))
        })
        .collect()
}

// ---------------------------------------------------------------------
// 5. Operator actions.
// ---------------------------------------------------------------------

const TOKEN_KEY: &str = "lifeledger.operator-token";
const NAME_KEY: &str = "lifeledger.operator-name";

#[test]
fn acknowledge_asks_for_the_operators_name_and_records_it() {
    let f = fixture(true);
    assert_eq!(alarm(&f.snap, "SH-TUBE", "creep_life_fraction")["state"], "unacknowledged");
    let lines = drive(
        &f.svc,
        &format!(
            r#"
    sessionStorage.setItem('{TOKEN_KEY}', '{TOKEN}');
    localStorage.removeItem('{NAME_KEY}');
    await load('/component/SH-TUBE');
    const ack = () => doc().querySelector('button[data-act="acknowledge"][data-index="creep_life_fraction"]');
    (await until('an Acknowledge button', ack)).click();
    await sleep(1500);
    log('NOTICE-EMPTY ' + doc().getElementById('notice').textContent);
    const st = await (await fetch('/api/components')).json();
    const rec = st.alarms.find((a) => a.component === 'SH-TUBE').alarms.find((r) => r.index === 'creep_life_fraction');
    log('STATE-EMPTY ' + rec.state);
    const nameBox = await until('a name field', () => doc().getElementById('op-name'));
    nameBox.value = 'R. Okafor';
    nameBox.dispatchEvent(new Event('input', {{ bubbles: true }}));
    nameBox.dispatchEvent(new Event('change', {{ bubbles: true }}));
    (await until('the Acknowledge button again', ack)).click();
    await until('the acknowledgement', async () => {{
      const s = await (await fetch('/api/components')).json();
      return s.alarms.find((a) => a.component === 'SH-TUBE').alarms.find((r) => r.index === 'creep_life_fraction').state !== 'unacknowledged';
    }});
    log('STORED-NAME ' + localStorage.getItem('{NAME_KEY}'));
    await load('/component/SH-TUBE');
    log('NAME-AFTER-RELOAD ' + (await until('the name field after a reload', () => doc().getElementById('op-name'))).value);
"#
        ),
    );
    // An empty name is refused before anything is sent.
    assert_eq!(logged(&lines, "STATE-EMPTY"), "unacknowledged", "{lines:#?}");
    assert!(logged(&lines, "NOTICE-EMPTY").contains("name"), "{lines:#?}");
    // The name given is the one recorded, kept for the next visit.
    let snap = f.svc.snapshot().unwrap();
    let rec = alarm(&snap, "SH-TUBE", "creep_life_fraction");
    assert_eq!(rec["acknowledged_by"], "R. Okafor", "{rec}");
    assert_eq!(logged(&lines, "STORED-NAME"), "R. Okafor");
    assert_eq!(logged(&lines, "NAME-AFTER-RELOAD"), "R. Okafor");
}

#[test]
fn shelve_duration_is_chosen_within_the_configured_maximum() {
    let f = fixture(true);
    // The page learns the maximum from the snapshot.
    assert_eq!(f.snap["max_shelve_h"].as_f64(), Some(MAX_SHELVE_H), "max_shelve_h not in the snapshot");
    let lines = drive(
        &f.svc,
        &format!(
            r#"
    sessionStorage.setItem('{TOKEN_KEY}', '{TOKEN}');
    localStorage.setItem('{NAME_KEY}', 'J. Lindqvist');
    await load('/component/SH-TUBE');
    (await until('a Shelve button', () => doc().querySelector('button[data-act="shelve-open"][data-index="creep_life_fraction"]'))).click();
    const form = await until('the shelve form', () => doc().querySelector('form.shelve-form'));
    const sel = form.querySelector('select[name="duration_h"]');
    log('CHOICES ' + (sel ? [...sel.options].map((o) => o.value).join(',') : 'none'));
    sel.value = '2';
    form.reason.value = 'thermocouple replacement';
    form.requestSubmit();
    await until('the shelve', async () => {{
      const s = await (await fetch('/api/components')).json();
      return s.alarms.find((a) => a.component === 'SH-TUBE').alarms.find((r) => r.index === 'creep_life_fraction').state === 'shelved';
    }});
"#
        ),
    );
    let choices: Vec<f64> = logged(&lines, "CHOICES").split(',').map(|v| v.parse().unwrap()).collect();
    assert!(choices.len() >= 3, "{choices:?}");
    assert!(choices.iter().all(|&h| h > 0.0 && h <= MAX_SHELVE_H), "choices beyond the maximum: {choices:?}");
    assert!(choices.contains(&MAX_SHELVE_H), "the maximum itself is not offered: {choices:?}");
    let snap = f.svc.snapshot().unwrap();
    let rec = alarm(&snap, "SH-TUBE", "creep_life_fraction");
    let s = &rec["shelve"];
    let hours = (s["until_ms"].as_i64().unwrap() - s["since_ms"].as_i64().unwrap()) as f64 / 3.6e6;
    assert!((hours - 2.0).abs() < 1e-9, "shelved for {hours} h, chose 2 h: {rec}");
    assert_eq!(s["by"], "J. Lindqvist");
}

#[test]
fn a_wrong_token_is_told_when_it_is_entered() {
    let f = fixture(true);
    let port = f.svc.http_port;
    // The check: 204 for the right token, 401 for a wrong or missing one,
    // and nothing changes.
    let check = |auth: Option<&str>| {
        let h: Vec<(&str, &str)> = auth.map(|a| vec![("Authorization", a)]).unwrap_or_default();
        common::http::request(port, "GET", "/api/operator/check", &h, b"").unwrap().status
    };
    assert_eq!(check(Some(&format!("Bearer {TOKEN}"))), 204);
    assert_eq!(check(Some("Bearer not-the-token")), 401);
    assert_eq!(check(None), 401);
    let lines = drive(
        &f.svc,
        &format!(
            r#"
    sessionStorage.removeItem('{TOKEN_KEY}');
    await load('/component/SH-TUBE');
    let box = await until('the token field', () => doc().getElementById('op-token'));
    box.value = 'not-the-token';
    doc().getElementById('op-form').requestSubmit();
    await until('an answer to the wrong token', () => /not accepted/.test(doc().getElementById('notice').textContent));
    log('WRONG-NOTICE ' + doc().getElementById('notice').textContent);
    log('WRONG-STORED ' + sessionStorage.getItem('{TOKEN_KEY}'));
    log('WRONG-BUTTONS ' + doc().querySelectorAll('button[data-act="acknowledge"]').length);
    box = await until('the token field again', () => doc().getElementById('op-token'));
    box.value = '{TOKEN}';
    doc().getElementById('op-form').requestSubmit();
    await until('the operator mode', () => doc().querySelector('button[data-act="acknowledge"]'));
    log('RIGHT-STORED ' + sessionStorage.getItem('{TOKEN_KEY}'));
"#
        ),
    );
    assert!(logged(&lines, "WRONG-NOTICE").contains("not accepted"), "{lines:#?}");
    assert_eq!(logged(&lines, "WRONG-STORED"), "null", "a wrong token was kept");
    assert_eq!(logged(&lines, "WRONG-BUTTONS"), "0", "command buttons shown for a wrong token");
    assert_eq!(logged(&lines, "RIGHT-STORED"), TOKEN);
    // Checking changed nothing: the alarm is still unacknowledged.
    assert_eq!(alarm(&f.svc.snapshot().unwrap(), "SH-TUBE", "creep_life_fraction")["state"], "unacknowledged");
}

#[test]
fn operator_buttons_fit_their_labels_at_1920_px() {
    let f = fixture(true);
    let lines = drive(
        &f.svc,
        &format!(
            r#"
    sessionStorage.setItem('{TOKEN_KEY}', '{TOKEN}');
    localStorage.setItem('{NAME_KEY}', 'A. Moreau');
    await load('/component/SH-TUBE');
    (await until('a Shelve button', () => doc().querySelector('button[data-act="shelve-open"]'))).click();
    await until('the shelve form', () => doc().querySelector('form.shelve-form'));
    const buttons = [...doc().querySelectorAll('button')].filter((b) => b.offsetParent !== null);
    log('BUTTONS ' + buttons.map((b) => b.textContent.trim()).join('|'));
    // A label fits when its text is no wider than the button's content box
    // (a button clips what does not fit).
    for (const b of buttons) {{
      const cs = frame.contentWindow.getComputedStyle(b);
      const inner = b.clientWidth - parseFloat(cs.paddingLeft) - parseFloat(cs.paddingRight);
      const r = doc().createRange();
      r.selectNodeContents(b);
      const text = r.getBoundingClientRect().width;
      if (text > inner + 0.5 || b.scrollWidth > b.clientWidth + 0.5) log('CLIPPED ' + b.textContent.trim() + ' ' + text.toFixed(1) + '>' + inner.toFixed(1));
      // ... and when no scrolling or clipping box around it cuts it off.
      const br = b.getBoundingClientRect();
      for (let a = b.parentElement; a; a = a.parentElement) {{
        if (frame.contentWindow.getComputedStyle(a).overflowX === 'visible') continue;
        const ar = a.getBoundingClientRect();
        if (br.right > ar.right + 0.5 || br.left < ar.left - 0.5) log('CLIPPED ' + b.textContent.trim() + ' by ' + a.tagName + '#' + a.id + ' ' + br.right.toFixed(1) + '>' + ar.right.toFixed(1));
      }}
    }}
"#
        ),
    );
    let buttons = logged(&lines, "BUTTONS");
    for want in ["Acknowledge", "Cancel"] {
        assert!(buttons.split('|').any(|b| b.starts_with(want)), "no {want} button among {buttons}");
    }
    let clipped: Vec<&String> = lines.iter().filter(|l| l.starts_with("CLIPPED")).collect();
    assert!(clipped.is_empty(), "buttons narrower than their labels at 1920 px: {clipped:#?}");
}

// ---------------------------------------------------------------------
// 6. The snapshot's warnings.
// ---------------------------------------------------------------------

#[test]
fn the_snapshots_warnings_are_shown() {
    let f = fixture(false);
    // The test plant's PT-1, LOAD-1 and SLIP-1 have no valid_range: the
    // configuration warns, and the snapshot carries the warning.
    let warnings: Vec<String> =
        f.snap["warnings"].as_array().unwrap().iter().map(|w| w.as_str().unwrap().to_string()).collect();
    assert!(
        warnings.iter().any(|w| w.contains("PT-1") && w.contains("valid_range")),
        "no configuration warning in the snapshot: {warnings:?}"
    );
    for path in ["/component/SH-TUBE", "/"] {
        let dom = dump_dom(f.svc.http_port, path);
        for w in &warnings {
            assert!(dom.contains(&text_node(w)), "{path}: warning {w:?} not shown");
        }
    }
}
