//! The overview page and the display rules every screen shares, in a real
//! browser: a real mosquitto broker, the service fed over MQTT, headless
//! Chromium loading the pages (and a small harness page that loads the
//! served scripts) with their scripts running against the live JSON API.
//!
//! * the rows come in the API's attention ranking (`rank` 1..n), and a part
//!   with an unacknowledged sensor alarm and unmonitored hours ranks above
//!   the parts with no alarm;
//! * columns sort from the address (`#sort=...&dir=...`, what a header
//!   click writes) with the direction shown;
//! * no scientific notation anywhere, "exhausted", "> 100 years", years on
//!   dates outside the current year;
//! * the time base (UTC or local) and the units (°C/°F, MPa/bar/psi) are
//!   chosen by a click or a link and remembered;
//! * on a 390 px wide phone the overview's table fits without sideways
//!   scrolling.
//!
//! Chromium (Debian package `chromium`) is installed by `tests/run`.

mod common;

use common::service::{publish_all, Sample, Service, ServiceConfig, T0};
use common::{free_port, poll_until, Mosquitto};
use std::path::{Path, PathBuf};

use common::chromium::chromium;

/// Headless Chromium on `url` with `extra` arguments, in `profile` (kept
/// between runs where a test checks what a page remembers), with the
/// environment `env` (a time zone); stdout returned.
fn chromium_run(url: &str, extra: &[&str], profile: &Path, env: &[(&str, &str)]) -> String {
    let mut extra = extra.to_vec();
    extra.push("--allow-file-access-from-files");
    common::chromium::run(url, 5000, &extra, profile, env)
}

fn dump(url: &str, profile: &Path, extra: &[&str], env: &[(&str, &str)]) -> String {
    let mut args = vec!["--dump-dom"];
    args.extend_from_slice(extra);
    let dom = chromium_run(url, &args, profile, env);
    assert!(dom.contains("</html>"), "no DOM from chromium for {url}: {dom:?}");
    dom
}

/// Where screenshots go: `target/test-artifacts/`.
fn artifacts() -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).parent().expect("target dir").join("test-artifacts");
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// The part the ranking exists for: its metal temperature TE-3 reports only
/// every 20 minutes, so with a 10-minute hold it goes stale between
/// samples (sensor alarms nobody acknowledges) and its ledger collects
/// unmonitored hours; its life is far from its levels.
const LEG_B: &str = r#"[[component]]
name = "OUTLET-LEG-B"
unit = "U2"
kind = "pipe"
material = "P91"
design_temperature = { value = 570, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TE-3"
pressure = "PT-1"
[component.geometry]
outside_diameter = { value = 350, unit = "mm" }
wall = { value = 40, unit = "mm" }
[component.initial]
life_fraction = 0.02"#;

const LEG_B_TAG: &str = r#"[[tag]]
name = "TE-3"
unit = "degC"
valid_range = [0, 800]"#;

const MINUTES: i64 = 480;

/// The shared stream plus TE-3 every 20 minutes and at the last minute.
fn stream() -> Vec<Sample> {
    let mut v = common::service::samples(MINUTES);
    for m in (0..MINUTES).filter(|m| m % 20 == 0 || *m == MINUTES - 1) {
        let x = m as f64;
        let te = if m < 120 { 300.0 + 2.0 * x } else { 540.0 + 2.0 * (x / 41.0).sin() };
        v.push(("TE-3".into(), T0 + 60 * m, te));
    }
    v.sort_by_key(|s| s.1);
    v
}

struct Fixture {
    _broker: Mosquitto,
    _dir: tempfile::TempDir,
    svc: Service,
}

fn fixture() -> Fixture {
    chromium();
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = ServiceConfig {
        plant: "Overview Test Station",
        client_id: "lifeledger-overview-test",
        tags: LEG_B_TAG,
        tube: "[component.initial]\nlife_fraction = 0.31",
        support: "[component.initial]\nwear_depth_mm = 0.21",
        components: LEG_B,
        ..ServiceConfig::default()
    }
    .write(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let s = stream();
    let last = s.last().unwrap().1;
    let s = s.to_vec();
    // A few minutes at a time, each integrated by the tube before the next,
    // so the sensor checks see TE-3 fall behind between its samples.
    // Ten minutes of samples at a time, never splitting a minute.
    let mut chunks: Vec<Vec<Sample>> = vec![];
    for x in s {
        match chunks.last_mut() {
            Some(c) if (x.1 - c[0].1) < 10 * 60 => c.push(x),
            _ => chunks.push(vec![x]),
        }
    }
    for (i, chunk) in chunks.iter().enumerate() {
        publish_all(broker.port, chunk, &format!("publisher-overview-{i}"));
        let want = chrono::DateTime::from_timestamp(chunk.iter().map(|x| x.1).max().unwrap(), 0)
            .unwrap()
            .format("%Y-%m-%dT%H:%M:%S%.3fZ")
            .to_string();
        poll_until("SH-TUBE integrated to the chunk's last sample", || {
            svc.snapshot().filter(|s| {
                s["components"].as_array().is_some_and(|c| {
                    c.iter().any(|c| c["component"] == "SH-TUBE" && c["integrated_to"] == want.as_str())
                })
            })
        });
    }
    svc.wait_until_integrated(last);
    Fixture { _broker: broker, _dir: dir, svc }
}

fn names_in_rows(dom: &str) -> Vec<String> {
    let rows = &dom[dom.find("id=\"component-rows\"").expect("component table")..];
    let rows = &rows[..rows.find("</tbody>").expect("end of the component table")];
    rows.split("data-component=\"").skip(1).map(|s| s[..s.find('"').unwrap()].to_string()).collect()
}

fn api_order(snap: &serde_json::Value) -> Vec<String> {
    snap["components"].as_array().unwrap().iter().map(|c| c["component"].as_str().unwrap().to_string()).collect()
}

/// Text between `>` and `<` of the serialised DOM, scripts aside: what a
/// person can read on the page.
fn visible_text(dom: &str) -> String {
    let mut out = String::new();
    let mut rest = dom;
    while let Some(i) = rest.find('>') {
        rest = &rest[i + 1..];
        let j = rest.find('<').unwrap_or(rest.len());
        out.push_str(&rest[..j]);
        out.push('\n');
        rest = &rest[j..];
    }
    out
}

/// A number in exponent form: a digit, `e` or `E`, a sign or digit.
fn scientific(text: &str) -> Option<String> {
    let b = text.as_bytes();
    (1..b.len().saturating_sub(1)).find_map(|i| {
        let e = b[i] == b'e' || b[i] == b'E';
        (e && b[i - 1].is_ascii_digit() && (b[i + 1] == b'+' || b[i + 1] == b'-' || b[i + 1].is_ascii_digit()))
            .then(|| text[i.saturating_sub(12)..(i + 8).min(text.len())].to_string())
    })
}

#[test]
fn overview_rows_follow_the_attention_ranking_and_sort_by_column() {
    let f = fixture();
    let port = f.svc.http_port;
    let snap = f.svc.snapshot().unwrap();
    let comps = snap["components"].as_array().unwrap();
    assert_eq!(comps.len(), 3);
    // The API lists the components ranked: rank 1..n in order, the
    // attention score never rising down the list.
    let ranks: Vec<u64> = comps.iter().map(|c| c["rank"].as_u64().expect("rank")).collect();
    assert_eq!(ranks, [1, 2, 3]);
    let scores: Vec<f64> = comps.iter().map(|c| c["attention_score"].as_f64().expect("attention_score")).collect();
    assert!(scores.windows(2).all(|w| w[0] >= w[1]), "scores rise down the list: {scores:?}");
    // Outlet leg B: sensor alarms out of normal and unmonitored hours, above
    // every part with no alarm out of normal.
    let alarms = snap["alarms"].as_array().unwrap();
    let out_of_normal = |name: &str| {
        alarms
            .iter()
            .filter(|a| a["component"] == name)
            .flat_map(|a| a["alarms"].as_array().unwrap().iter())
            .any(|r| r["state"] != "normal")
    };
    let leg = comps.iter().find(|c| c["component"] == "OUTLET-LEG-B").unwrap();
    assert!(leg["unmonitored_h"].as_f64().unwrap() > 0.0, "leg B has no unmonitored hours: {leg}");
    let leg_alarms: Vec<&serde_json::Value> = alarms
        .iter()
        .filter(|a| a["component"] == "OUTLET-LEG-B")
        .flat_map(|a| a["alarms"].as_array().unwrap().iter())
        .filter(|r| r["index"].as_str().unwrap().starts_with("sensor_") && r["state"] != "normal")
        .collect();
    assert!(!leg_alarms.is_empty(), "TE-3 raised no sensor alarm on leg B: {alarms:?}");
    let quiet: Vec<&serde_json::Value> =
        comps.iter().filter(|c| !out_of_normal(c["component"].as_str().unwrap())).collect();
    assert!(!quiet.is_empty(), "the plant has no part without alarms");
    for q in quiet {
        assert!(
            leg["rank"].as_u64() < q["rank"].as_u64(),
            "leg B ({}) below {} ({})",
            leg["rank"],
            q["component"],
            q["rank"]
        );
    }

    // The page shows the rows in the API's order.
    let profile = tempfile::tempdir().unwrap();
    let dom = dump(&format!("http://127.0.0.1:{port}/"), profile.path(), &["--window-size=1600,1000"], &[]);
    assert_eq!(names_in_rows(&dom), api_order(&snap), "page rows not in the API's ranking");
    assert!(
        dom.contains("aria-sort=\"ascending\"") && dom.contains("data-sort=\"rank\""),
        "ranking not marked as the sort"
    );
    // No scientific notation on the overview.
    let text = visible_text(&dom);
    assert!(scientific(&text).is_none(), "scientific notation on the overview: {:?}", scientific(&text));

    // Sorted by name from the address (what a header click writes), the
    // header shows the direction; then descending.
    let dom = dump(&format!("http://127.0.0.1:{port}/#sort=component&dir=asc"), profile.path(), &[], &[]);
    let mut by_name = api_order(&snap);
    by_name.sort();
    assert_eq!(names_in_rows(&dom), by_name);
    let th = &dom[dom.find("data-sort=\"component\"").unwrap()..];
    let th = &th[..th.find("</th>").unwrap()];
    assert!(th.contains("aria-sort=\"ascending\"") && th.contains("▲"), "no ascending indicator: {th}");
    let dom = dump(&format!("http://127.0.0.1:{port}/#sort=component&dir=desc"), profile.path(), &[], &[]);
    by_name.reverse();
    assert_eq!(names_in_rows(&dom), by_name);
    assert!(dom.contains("▼"), "no descending indicator");
    // Remaining life, longest first: parts not moving go last.
    let dom = dump(&format!("http://127.0.0.1:{port}/#sort=remaining&dir=desc"), profile.path(), &[], &[]);
    let rem = |n: &str| comps.iter().find(|c| c["component"] == n).unwrap()["remaining_life_h"].as_f64();
    let shown: Vec<Option<f64>> = names_in_rows(&dom).iter().map(|n| rem(n)).collect();
    let moving: Vec<f64> = shown.iter().map_while(|x| *x).collect();
    assert!(moving.windows(2).all(|w| w[0] >= w[1]), "remaining life not descending: {shown:?}");
    assert!(shown[moving.len()..].iter().all(Option::is_none), "a part not moving before a moving one: {shown:?}");

    // A phone, 390 × 844 CSS px. Headless Chromium makes no window narrower
    // than 500 px, so the page runs in a 390 × 844 frame of a harness page
    // (web security off for the harness to look inside): the essential
    // columns show and the page fits without scrolling sideways.
    let out = in_frame(
        port,
        "/",
        (390, 844),
        r#"
  out.inner = w.innerWidth;
  out.page = d.documentElement.scrollWidth;
  const wrap = d.querySelector('.table-wrap');
  out.wrap = [wrap.scrollWidth, wrap.clientWidth];
  out.overflows = wrap.classList.contains('overflows');
  out.columns = [...d.querySelectorAll('#components thead th')].filter((th) => w.getComputedStyle(th).display !== 'none').map((th) => th.dataset.sort);
  out.clipped = [...d.querySelectorAll('#component-rows td')].filter((td) => w.getComputedStyle(td).display !== 'none' && td.scrollWidth > td.clientWidth + 1).map((td) => td.className);
"#,
    );
    assert_eq!(out["inner"], 390, "the frame is not 390 px wide: {out}");
    assert_eq!(out["columns"], serde_json::json!(["alarm", "component", "worst", "remaining"]), "{out}");
    assert!(out["page"].as_u64().unwrap() <= 390, "the page scrolls sideways at 390 px: {out}");
    assert!(
        out["wrap"][0].as_u64() <= out["wrap"][1].as_u64() && out["overflows"] == false,
        "the table scrolls: {out}"
    );
    assert_eq!(out["clipped"], serde_json::json!([]), "cells cut off at 390 px: {out}");

    // Sorting by clicks on the headers: name ascending, then descending,
    // the indicator following; a click on # returns to the ranking.
    let out = in_frame(
        port,
        "/",
        (1600, 1000),
        r#"
  const names = () => [...d.querySelectorAll('#component-rows tr[data-component]')].map((tr) => tr.dataset.component);
  const th = (k) => d.querySelector('#components th[data-sort="' + k + '"]');
  const state = (k) => [th(k).getAttribute('aria-sort'), th(k).querySelector('.sort-ind').textContent];
  out.ranked = names();
  th('component').click();
  out.asc = names(); out.asc_state = state('component'); out.hash_asc = w.location.hash;
  th('component').click();
  out.desc = names(); out.desc_state = state('component');
  th('rank').click();
  out.back = names(); out.rank_state = state('rank'); out.component_state = state('component');
"#,
    );
    let mut by_name = api_order(&snap);
    by_name.sort();
    assert_eq!(out["ranked"], serde_json::json!(api_order(&snap)), "{out}");
    assert_eq!(out["asc"], serde_json::json!(by_name), "{out}");
    assert_eq!(out["asc_state"], serde_json::json!(["ascending", "▲"]), "{out}");
    assert_eq!(out["hash_asc"], "#sort=component&dir=asc", "{out}");
    by_name.reverse();
    assert_eq!(out["desc"], serde_json::json!(by_name), "{out}");
    assert_eq!(out["desc_state"], serde_json::json!(["descending", "▼"]), "{out}");
    assert_eq!(out["back"], serde_json::json!(api_order(&snap)), "{out}");
    assert_eq!(out["rank_state"], serde_json::json!(["ascending", "▲"]), "{out}");
    assert_eq!(out["component_state"], serde_json::json!(["none", ""]), "{out}");

    let png = artifacts().join("overview-phone.png");
    let _ = std::fs::remove_file(&png);
    chromium_run(
        &format!("http://127.0.0.1:{port}/"),
        &[&format!("--screenshot={}", png.display()), "--window-size=500,2000"],
        profile.path(),
        &[],
    );
    assert!(png.exists(), "no phone screenshot");
    let png = artifacts().join("overview-ranked.png");
    chromium_run(
        &format!("http://127.0.0.1:{port}/"),
        &[&format!("--screenshot={}", png.display()), "--window-size=1600,1000"],
        profile.path(),
        &[],
    );

    // Local time from a link, in a zone without daylight saving (India,
    // UTC+05:30; IANA time zone database): the events' heading names the
    // base, and the newest event shows its time shifted by 5 h 30 min.
    let events = snap["recent_events"].as_array().unwrap();
    let newest = events.iter().max_by_key(|e| e["time_ms"].as_i64().unwrap()).expect("an alarm event");
    let t = newest["time_ms"].as_i64().unwrap();
    let local = chrono::DateTime::from_timestamp_millis(t + 330 * 60_000).unwrap();
    let utc = chrono::DateTime::from_timestamp_millis(t).unwrap();
    let tz = [("TZ", "Asia/Kolkata")];
    let dom = dump(&format!("http://127.0.0.1:{port}/?time=local"), profile.path(), &[], &tz);
    assert!(dom.contains("event time, local, UTC+05:30"), "time base not named on the events");
    assert!(dom.contains(&format!("<time>{}</time>", local.format("%Y-%m-%d %H:%M"))), "event not in local time");
    // Remembered: the next visit without the link keeps local time; back
    // to UTC by the link.
    let dom = dump(&format!("http://127.0.0.1:{port}/"), profile.path(), &[], &tz);
    assert!(dom.contains("event time, local, UTC+05:30"), "local time not remembered");
    let dom = dump(&format!("http://127.0.0.1:{port}/?time=utc"), profile.path(), &[], &tz);
    assert!(dom.contains("event time, UTC<"), "UTC not restored");
    assert!(dom.contains(&format!("<time>{}</time>", utc.format("%Y-%m-%d %H:%M"))), "event not in UTC");
}

/// The harness page: loads the served scripts (format.js + app.js) from the
/// service, clicks the display choices in a top bar of its own, and writes
/// what the formatters answer into the page as JSON.
fn harness(dir: &Path, port: u16, script: &str) -> PathBuf {
    let html = format!(
        r#"<!doctype html><html><head><meta charset="utf-8"></head><body>
<div id="display-prefs"></div><pre id="out">pending</pre>
<script src="http://127.0.0.1:{port}/page/app.js"></script>
<script>
document.addEventListener('DOMContentLoaded', () => {{
  const F = LL.F;
  const click = (pref, value) => document.querySelector('button[data-pref="' + pref + '"][data-value="' + value + '"]').click();
  const out = {{}};
  {script}
  document.getElementById('out').textContent = JSON.stringify(out);
}});
</script></body></html>"#
    );
    let p = dir.join("harness.html");
    std::fs::write(&p, html).unwrap();
    p
}

fn harness_out(dom: &str) -> serde_json::Value {
    let at = dom.find("<pre id=\"out\">").expect("harness output") + "<pre id=\"out\">".len();
    let raw = &dom[at..at + dom[at..].find("</pre>").unwrap()];
    let raw = raw.replace("&lt;", "<").replace("&gt;", ">").replace("&amp;", "&").replace("&quot;", "\"");
    serde_json::from_str(&raw).unwrap_or_else(|e| panic!("harness wrote no JSON ({e}): {raw}"))
}

/// Serves `html` to every request on a free loopback port from a thread of
/// its own (left to end with the test process); returns the port.
fn serve_once(html: String) -> u16 {
    use std::io::{Read, Write};
    let listener = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let port = listener.local_addr().unwrap().port();
    std::thread::spawn(move || {
        for stream in listener.incoming() {
            let Ok(mut s) = stream else { continue };
            let _ = s.set_read_timeout(Some(std::time::Duration::from_secs(5)));
            let mut buf = [0u8; 4096];
            let _ = s.read(&mut buf);
            let head = format!(
                "HTTP/1.1 200 OK\r\nContent-Type: text/html; charset=utf-8\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
                html.len()
            );
            let _ = s.write_all(head.as_bytes());
            let _ = s.write_all(html.as_bytes());
        }
    });
    port
}

/// Loads `path` of the service in a `width` × `height` frame of a harness
/// page (Chromium run with web security off, so the harness may look into
/// the frame), waits for the overview's rows (or 5 s), runs `script` with
/// `w` (the frame's window), `d` (its document) and `out` (an object
/// written back as JSON), and returns `out`.
fn in_frame(port: u16, path: &str, (width, height): (u32, u32), script: &str) -> serde_json::Value {
    let html = format!(
        r#"<!doctype html><html><head><meta charset="utf-8"></head><body style="margin:0">
<iframe id="f" src="http://127.0.0.1:{port}{path}" width="{width}" height="{height}" style="border:0;display:block"></iframe>
<pre id="out">pending</pre>
<script>
const wait = (ms) => new Promise((r) => setTimeout(r, ms));
document.getElementById('f').addEventListener('load', async () => {{
  const out = {{}};
  try {{
    const f = document.getElementById('f');
    const w = f.contentWindow, d = f.contentDocument;
    for (let i = 0; i < 50 && !d.querySelector('#component-rows tr[data-component]'); i++) await wait(100);
    await wait(300);
    {script}
  }} catch (e) {{ out.error = String(e); }}
  document.getElementById('out').textContent = JSON.stringify(out);
}});
</script></body></html>"#
    );
    // Chromium lets a page look into a frame of another origin (web
    // security off) only from an http page, not from a file.
    let harness_port = serve_once(html);
    let profile = tempfile::tempdir().unwrap();
    let dom = dump(
        &format!("http://127.0.0.1:{harness_port}/"),
        profile.path(),
        &["--disable-web-security", "--window-size=1700,1100"],
        &[],
    );
    let out = harness_out(&dom);
    assert!(out.get("error").is_none(), "harness script failed: {out}");
    out
}

#[test]
fn formats_times_and_units_follow_the_display_rules() {
    chromium();
    let broker = Mosquitto::start();
    let dir = tempfile::tempdir().unwrap();
    let http_port = free_port();
    let cfg = ServiceConfig { plant: "Format Test Station", client_id: "lifeledger-format-test", ..Default::default() }
        .write(dir.path(), broker.port, http_port);
    let svc = Service::start(&cfg, http_port);
    svc.wait_connected();
    let profile = tempfile::tempdir().unwrap();
    let page = harness(
        dir.path(),
        http_port,
        r#"
  const values = [4.56e7, 9.68e-6, 1.234e-9, 2.3e-24, 2.5e-4, 0.00234, 0.3125, 1, 12.345, 545.9, 87654.3, 1.5e6, 3.2e9, 6.5e21, -7.7e-8, -4.2e7];
  out.formatted = [];
  for (const v of values) {
    out.formatted.push(F.sig(v), F.sig(v, 4), F.frac(v), F.hours(v), F.years(v), F.fixed(v, 2), F.tick(v, Math.abs(v) / 4));
  }
  out.strain_percent = F.frac(9.68e-8 * 100);
  out.remaining_zero = F.remaining(0, false).text;
  out.remaining_exhausted = F.remaining(1234, true).text;
  out.remaining_long = F.remaining(4.56e7, false);
  out.hours_long = F.hours(4.56e7);
  out.years_long = F.years(4.56e7);
  out.y2062 = F.short(Date.UTC(2062, 11, 3, 2, 1));
  out.this_year = F.short(Date.now());
  out.this_year_full = F.time(Date.now());
  out.base_before = F.timeBase();
  out.prefs_before = F.prefs;
  out.c = F.showTemperature(545.9);
  click('time', 'local');
  click('temperature', 'F');
  click('pressure', 'psi');
  out.stored = JSON.parse(localStorage.getItem('lifeledger.display'));
  out.base_after = F.timeBase();
  out.local_2062 = F.short(Date.UTC(2062, 11, 3, 2, 1));
  out.f = F.temperature(545.9);
  out.f_unit = F.units.temperature();
  out.delta_f = F.temperatureDelta(10);
  out.psi = F.pressure(18);
  out.ksi = F.stress(100);
  out.stress_unit = F.units.stress();
  out.pressed = [...document.querySelectorAll('button.pref-opt.on')].map((b) => b.dataset.pref + '=' + b.dataset.value);
  click('pressure', 'bar');
  out.bar = F.pressure(18);
  out.bar_unit = F.units.pressure();
  out.bar_stress_unit = F.units.stress();
  out.chart = LL.lineChart({ id: 'trend-pressure_mpa', points: [[0, 17.5], [60000, 18]], t0: 0, t1: 60000, unit: 'MPa', fmt: (v) => LL.sig(v, 4), levels: [{ value: 18.5, label: 'design', cls: '' }] });
"#,
    );
    let url = format!("file://{}", page.display());
    let tz = [("TZ", "Asia/Kolkata")];
    let out = harness_out(&dump(&url, profile.path(), &[], &tz));

    // Engineering formats: no exponent form for any figure.
    for s in out["formatted"].as_array().unwrap() {
        let s = s.as_str().unwrap();
        assert!(scientific(s).is_none() && !s.contains("e+") && !s.contains("e-"), "exponent form: {s:?}");
    }
    // Very small fractions and percentages are capped, not written out.
    assert_eq!(out["strain_percent"], "< 0.001");
    assert_eq!(out["formatted"][2 + 7], "< 0.001", "frac of 9.68e-6");
    // Remaining life: "exhausted" at zero or for an exhausted part; a
    // remaining life of 4.56e7 h (about 5 200 years) is "> 100 years".
    assert_eq!(out["remaining_zero"], "exhausted");
    assert_eq!(out["remaining_exhausted"], "exhausted");
    assert_eq!(out["remaining_long"]["text"], "> 100");
    assert_eq!(out["remaining_long"]["unit"], "years");
    assert_eq!(out["hours_long"], "> 1\u{202f}000\u{202f}000");
    assert_eq!(out["years_long"], "> 100");
    // Dates carry the year outside the current one.
    assert_eq!(out["y2062"], "2062-12-03 02:01");
    let this_year = out["this_year_full"].as_str().unwrap();
    assert!(
        !out["this_year"].as_str().unwrap().starts_with(&this_year[..5]),
        "current year shown: {}",
        out["this_year"]
    );
    // UTC by default; °C and MPa.
    assert_eq!(out["base_before"], "UTC");
    assert_eq!(out["prefs_before"], serde_json::json!({"time": "utc", "temperature": "C", "pressure": "MPa"}));
    assert_eq!(out["c"], "545.9 °C");
    // The clicks: remembered in localStorage, the buttons pressed.
    assert_eq!(out["stored"], serde_json::json!({"time": "local", "temperature": "F", "pressure": "psi"}));
    assert_eq!(out["pressed"], serde_json::json!(["time=local", "temperature=F", "pressure=psi"]), "pressed buttons");
    // Local time in India (UTC+05:30, no daylight saving; IANA tz database).
    assert_eq!(out["base_after"], "local, UTC+05:30");
    assert_eq!(out["local_2062"], "2062-12-03 07:31");
    // Conversions, NIST SP 811 (2008) appendix B: t/°F = 1.8·t/°C + 32;
    // 1 psi = 6.894 757 E+03 Pa; 1 bar = 1.0 E+05 Pa. A temperature
    // difference of 1 K is 1.8 °F-degrees.
    let close = |v: &serde_json::Value, want: f64| {
        let v = v.as_f64().unwrap();
        assert!((v - want).abs() <= 1e-9 * want.abs().max(1.0), "{v} != {want}");
    };
    close(&out["f"], 545.9 * 1.8 + 32.0);
    assert_eq!(out["f_unit"], "°F");
    close(&out["delta_f"], 18.0);
    close(&out["psi"], 18e6 / 6.894_757e3);
    close(&out["ksi"], 100e6 / 6.894_757e3 / 1000.0);
    assert_eq!(out["stress_unit"], "ksi");
    close(&out["bar"], 180.0);
    assert_eq!(out["bar_unit"], "bar");
    assert_eq!(out["bar_stress_unit"], "MPa", "stress is not quoted in bar");
    // A pressure chart follows the unit: its label and its level in bar.
    let chart = out["chart"].as_str().unwrap();
    assert!(chart.contains(">bar</text>"), "chart unit not bar: {chart}");
    assert!(chart.contains("design 185"), "design level not in bar: {chart}");

    // Remembered across visits (the same browser profile): local time, °F, bar.
    let page = harness(
        dir.path(),
        http_port,
        "out.prefs = F.prefs; out.base = F.timeBase(); out.t = F.showTemperature(20, 0);",
    );
    let out = harness_out(&dump(&format!("file://{}", page.display()), profile.path(), &[], &tz));
    assert_eq!(out["prefs"], serde_json::json!({"time": "local", "temperature": "F", "pressure": "bar"}));
    assert_eq!(out["base"], "local, UTC+05:30");
    assert_eq!(out["t"], "68 °F");

    // The component page follows a link's choice: its charts in °F and psi.
    let s = common::service::samples(180);
    publish_all(broker.port, &s, "publisher-format");
    svc.wait_until_integrated(s.last().unwrap().1);
    let dom = dump(
        &format!("http://127.0.0.1:{http_port}/component/SH-TUBE?temperature=F&pressure=psi"),
        profile.path(),
        &["--window-size=1600,1000"],
        &[],
    );
    let at = dom.find("id=\"trend-metal_temperature_c\"").expect("temperature trend");
    let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
    assert!(svg.contains(">°F</text>"), "temperature chart not in °F");
    let at = dom.find("id=\"trend-pressure_mpa\"").expect("pressure trend");
    let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
    assert!(svg.contains(">psi</text>"), "pressure chart not in psi");
    let at = dom.find("id=\"trend-hoop_stress_mpa\"").expect("stress trend");
    let svg = &dom[at..at + dom[at..].find("</svg>").unwrap()];
    assert!(svg.contains(">ksi</text>"), "stress chart not in ksi");
    // The figures and the class table follow too; the material's data
    // stay in the units of their sources (the material panel).
    assert!(dom.contains("°F / psi</th>"), "class table not in °F and psi");
    let page = &dom[..dom.find("id=\"material\"").expect("material panel")];
    let left: Vec<&str> =
        [" °C<", " MPa<"].iter().filter_map(|u| page.find(u).map(|i| &page[i.saturating_sub(120)..i + 5])).collect();
    assert!(left.is_empty(), "°C or MPa left on the component page in °F/psi: {left:?}");
    assert!(
        scientific(&visible_text(&dom)).is_none(),
        "scientific notation on the component page: {:?}",
        scientific(&visible_text(&dom))
    );
}
