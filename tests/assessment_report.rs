//! The assessment report of the demo plant, printed: a ledger built from
//! the demo history one day at a time (so the daily history has a point a
//! day) with a wall survey and an oxide measurement recorded, then
//! `lifeledger report --unit U2`, printed to PDF by headless Chromium on A4
//! and on US letter (poppler's `pdfinfo` and `pdftotext` read the PDFs).
//!
//! Checks: a sensible number of pages of the right size, the text holds
//! the key figures of the JSON written beside it (life fraction of each
//! component, the inspection records, the temperature correction), the
//! caution, the software version; the HTML is self-contained (no scripts,
//! nothing loaded from elsewhere); the CSV has the same life fractions.

mod common;

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::Command;

use flate2::read::GzDecoder;
use lifeledger::store::inspection::NewInspection;
use lifeledger::store::Store;

const LEG_A: &str = "U2-SH3-OUTLET-LEG-A";

fn record(kind: &str, date: &str, value: f64, detail: &str, method: &str, location: &str) -> NewInspection {
    NewInspection {
        component: LEG_A.into(),
        finding_ms: lifeledger::settings::validate::parse_date_ms(date).unwrap(),
        entered_ms: 0,
        entered_by: "P. Surveyor".into(),
        method: method.into(),
        location: location.into(),
        kind: kind.into(),
        value: Some(value),
        unit: "mm".into(),
        detail: detail.into(),
        notes: String::new(),
        supersedes: None,
    }
}

/// The demo plant's ledger, backfilled a day at a time, with records.
fn demo_ledger(dir: &Path) -> (PathBuf, PathBuf) {
    let ledger = dir.join("ledger.sqlite");
    let config = dir.join("plant.toml");
    let demo = std::fs::read_to_string("config/demo/plant.toml").unwrap();
    std::fs::write(&config, format!("{demo}\n[store]\npath = {:?}\n", ledger.to_str().unwrap())).unwrap();
    let (cfg, service) = lifeledger::service::load_service(&config).unwrap();
    let mut text = String::new();
    GzDecoder::new(std::fs::File::open("config/demo/history.csv.gz").unwrap()).read_to_string(&mut text).unwrap();
    for day in 1..=31 {
        let prefix = format!("2026-10-{day:02}");
        let mut csv = String::from("timestamp,tag,value,quality\n");
        for line in text.lines().filter(|l| l.starts_with(&prefix)) {
            csv.push_str(line);
            csv.push('\n');
        }
        let input = dir.join("day.csv");
        std::fs::write(&input, csv).unwrap();
        lifeledger::recovery::backfill(&cfg, &service, Some(ledger.clone()), input.to_str().unwrap()).unwrap();
        if day == 9 {
            let mut s = Store::open_exclusive(&ledger, false).unwrap();
            s.append_inspection(&record("wall_thickness", "2026-10-12", 5.6, "{}", "UT", "bend 4")).unwrap();
            s.append_inspection(&record(
                "oxide_thickness",
                "2026-10-12",
                0.28,
                "{\"service_h\":60000,\"heat_flux_kw_m2\":120}",
                "UT oxide",
                "bend 4",
            ))
            .unwrap();
        }
    }
    (config, ledger)
}

/// Prints `html` to `pdf` with the tests' one headless Chromium runner
/// (bounded; a failed run fails the test with Chromium's stderr).
fn print_pdf(html: &Path, pdf: &Path) {
    let profile = tempfile::tempdir().unwrap();
    let print = format!("--print-to-pdf={}", pdf.display());
    common::chromium::run(
        &format!("file://{}", html.display()),
        2_000,
        &["--no-pdf-header-footer", &print],
        profile.path(),
        &[],
    );
    assert!(pdf.exists(), "chromium ended without writing {}", pdf.display());
}

fn poppler(tool: &str, args: &[&str]) -> String {
    let mut c = Command::new(tool);
    c.args(args);
    let o = common::output_within_budget(c, tool);
    assert!(
        o.status.success(),
        "{tool} {args:?}: {} (install poppler-utils; tests/run does)",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

#[test]
fn the_demo_plants_report_prints_on_a4_and_letter_with_its_key_figures() {
    let dir = tempfile::tempdir().unwrap();
    let (config, _ledger) = demo_ledger(dir.path());
    let out = dir.path().join("report");
    let mut c = Command::new(env!("CARGO_BIN_EXE_lifeledger"));
    c.args(["report", "--config", config.to_str().unwrap(), "--unit", "U2", "--out", out.to_str().unwrap()]);
    let o = common::output_within_budget(c, "lifeledger report");
    assert!(o.status.success(), "report failed: {}", String::from_utf8_lossy(&o.stderr));

    let html = std::fs::read_to_string(out.join("report.html")).unwrap();
    assert!(!html.contains("<script"), "the report carries no script");
    let outside = html.replace("http://www.w3.org/2000/svg", "");
    assert!(!outside.contains("http://") && !outside.contains("https://"), "nothing may load from elsewhere");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    let comps = json["components"].as_array().unwrap();
    // Alarm-system performance of the scope (issue 11's figures), by the
    // definitions checked in assessment::alarm_performance's unit tests.
    let perf = &json["alarm_performance"];
    assert!(perf["annunciations"].as_u64().is_some(), "alarm performance in the JSON: {perf}");
    assert!(perf["time_in_flood_percent"].as_f64().is_some(), "{perf}");
    assert!(comps.len() >= 5, "unit U2 of the demo has its components");
    let csv = std::fs::read_to_string(out.join("report.csv")).unwrap();

    for (size, css, name) in [("a4", "A4", "(A4)"), ("letter", "letter", "(letter)")] {
        // The page size the printer would get from a print dialogue.
        let sized = dir.path().join(format!("report-{size}.html"));
        std::fs::write(&sized, html.replace("</style>", &format!("@page {{ size: {css}; }}</style>"))).unwrap();
        let pdf = dir.path().join(format!("report-{size}.pdf"));
        print_pdf(&sized, &pdf);
        let info = poppler("pdfinfo", &[pdf.to_str().unwrap()]);
        let pages: usize = info
            .lines()
            .find_map(|l| l.strip_prefix("Pages:"))
            .and_then(|v| v.trim().parse().ok())
            .unwrap_or_else(|| panic!("no page count in pdfinfo: {info}"));
        assert!(info.lines().any(|l| l.starts_with("Page size:") && l.ends_with(name)), "{size}: {info}");
        // Each component starts a page and takes a few.
        assert!(
            pages >= comps.len() && pages <= 6 * comps.len(),
            "{size}: {pages} pages for {} components",
            comps.len()
        );
        let text = poppler("pdftotext", &[pdf.to_str().unwrap(), "-"]);
        let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
        assert!(flat.contains("Caution."), "{size}: the caution is printed");
        assert!(flat.contains(&format!("lifeledger {}", env!("CARGO_PKG_VERSION"))), "{size}: the version is printed");
        for c in comps {
            let name = c["figures"]["component"].as_str().unwrap();
            assert!(flat.contains(name), "{size}: {name} is printed");
            // The life fraction as the figure tile shows it (4 decimals).
            let lf = c["figures"]["creep_life_fraction"].as_f64().unwrap();
            assert!(flat.contains(&format!("{lf:.4}")), "{size}: {name} life fraction {lf:.4} is printed");
            assert!(csv.contains(&format!("{name},life,creep life fraction,{lf:.6}")), "CSV holds {name} {lf:.6}");
        }
        let leg_a = comps.iter().find(|c| c["figures"]["component"] == LEG_A).unwrap();
        let corr = leg_a["temperature_correction_k"].as_f64().unwrap();
        assert!(corr != 0.0, "the oxide record sets a correction");
        assert!(
            flat.contains(&format!("temperature correction {corr:+.1} K")),
            "{size}: the correction {corr:+.1} K is printed"
        );
        assert!(flat.contains("wall re-based to 5.60 mm"), "{size}: the wall survey is printed");
        assert!(flat.contains("P. Surveyor"), "{size}: who entered the records is printed");
        assert!(flat.contains("design conditions +10 K"), "{size}: the what-if profile is printed");
        assert!(flat.contains("with scale growth (120 kW/m²)"), "{size}: the scale-growth projection is printed");
        assert!(flat.contains("Alarm-system performance"), "{size}: the alarm-system figures are printed");
    }
}
