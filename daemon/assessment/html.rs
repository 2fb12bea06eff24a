//! The assessment report as one self-contained HTML document: inline CSS
//! for screen and print (A4 and US letter: the layout flows with the page
//! width, each component starts on a new page, table rows never split),
//! inline SVG for the life-consumed chart, no scripts and no external
//! assets.

use super::{Assessment, ComponentAssessment};
use crate::event_time::rfc3339_ms;

const CSS: &str = r#"
@page { margin: 14mm 12mm 16mm 12mm; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 9.5pt; color: #111; margin: 0 auto; max-width: 190mm; line-height: 1.35; }
h1 { font-size: 16pt; margin: 0 0 2mm 0; }
h2 { font-size: 13pt; margin: 0 0 2mm 0; border-bottom: 1.5pt solid #222; padding-bottom: 1mm; }
h3 { font-size: 10.5pt; margin: 4mm 0 1.5mm 0; break-after: avoid; page-break-after: avoid; }
table { border-collapse: collapse; width: 100%; margin: 0 0 2mm 0; }
th, td { border: 0.5pt solid #999; padding: 0.8mm 1.5mm; text-align: left; vertical-align: top; }
th { background: #eee; font-weight: 600; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr { break-inside: avoid; page-break-inside: avoid; }
.meta td { border: none; padding: 0.3mm 2mm 0.3mm 0; }
.caution { border: 1pt solid #a33; background: #fdf1f1; padding: 2mm 3mm; margin: 3mm 0; }
.figures { display: flex; flex-wrap: wrap; gap: 2mm; margin: 2mm 0; }
.fig { border: 0.5pt solid #999; padding: 1.5mm 2.5mm; min-width: 36mm; flex: 1; }
.fig .v { font-size: 13pt; font-weight: 600; }
.fig .l { font-size: 8pt; color: #444; }
.component { break-before: page; page-break-before: always; }
.component.first { break-before: auto; page-break-before: auto; }
.muted { color: #555; }
.small { font-size: 8pt; }
svg { width: 100%; height: auto; display: block; break-inside: avoid; }
ul { margin: 0 0 2mm 0; padding-left: 5mm; }
.superseded td { color: #777; text-decoration: line-through; }
footer { margin-top: 6mm; border-top: 0.5pt solid #999; padding-top: 1.5mm; font-size: 8pt; color: #444; }
"#;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

fn hours(h: Option<f64>) -> String {
    match h {
        None => "not reached".into(),
        Some(0.0) => "reached".into(),
        Some(h) if h > 1.0e7 => "> 10 000 000".into(),
        Some(h) => format!("{} ({:.1} y)", group(h), h / 8766.0),
    }
}

fn group(v: f64) -> String {
    let s = format!("{:.0}", v);
    let (sign, digits) = s.strip_prefix('-').map_or(("", s.as_str()), |d| ("-", d));
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(' ');
        }
        out.push(c);
    }
    format!("{sign}{out}")
}

/// Life fraction against time from the daily history, the levels as
/// dashed lines, inspection findings as marks on the time axis.
fn chart(c: &ComponentAssessment) -> String {
    let pts: Vec<(f64, f64)> = c.history.iter().map(|p| (p.t_ms as f64, p.life_fraction)).collect();
    if pts.len() < 2 {
        return "<p class=\"muted small\">The daily history holds fewer than two days; no chart yet.</p>".into();
    }
    let (w, h, l, r, t, b) = (680.0, 220.0, 52.0, 10.0, 10.0, 28.0);
    let x0 = pts[0].0;
    let x1 = pts[pts.len() - 1].0.max(x0 + 1.0);
    let levels: Vec<(&str, f64)> = c.figures.thresholds.life_fraction.iter().collect();
    let ymax_data = pts.iter().map(|p| p.1).fold(0.0, f64::max);
    let ymin_data = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
    let mut y0 = ymin_data;
    let mut y1 = ymax_data;
    for &(_, v) in &levels {
        if v <= ymax_data * 1.5 {
            y1 = y1.max(v);
        }
    }
    if y1 - y0 < 1e-9 {
        y0 -= 0.01;
        y1 += 0.01;
    }
    let pad = (y1 - y0) * 0.08;
    let (y0, y1) = ((y0 - pad).max(0.0), y1 + pad);
    let sx = |x: f64| l + (x - x0) / (x1 - x0) * (w - l - r);
    let sy = |y: f64| t + (1.0 - (y - y0) / (y1 - y0)) * (h - t - b);
    let mut s = format!("<svg viewBox=\"0 0 {w} {h}\" xmlns=\"http://www.w3.org/2000/svg\" role=\"img\" aria-label=\"life fraction against time\" font-size=\"9\">");
    s.push_str(&format!(
        "<rect x=\"{l}\" y=\"{t}\" width=\"{}\" height=\"{}\" fill=\"none\" stroke=\"#999\" stroke-width=\"0.6\"/>",
        w - l - r,
        h - t - b
    ));
    for i in 0..=4 {
        let y = y0 + (y1 - y0) * i as f64 / 4.0;
        s.push_str(&format!(
            "<line x1=\"{l}\" x2=\"{}\" y1=\"{:.1}\" y2=\"{:.1}\" stroke=\"#ddd\" stroke-width=\"0.5\"/><text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\">{:.4}</text>",
            w - r, sy(y), sy(y), l - 3.0, sy(y) + 3.0, y
        ));
    }
    for i in 0..=4 {
        let x = x0 + (x1 - x0) * i as f64 / 4.0;
        let label = rfc3339_ms(x as i64).get(..10).unwrap_or("").to_string();
        let anchor = match i {
            0 => "start",
            4 => "end",
            _ => "middle",
        };
        s.push_str(&format!("<text x=\"{:.1}\" y=\"{}\" text-anchor=\"{anchor}\">{label}</text>", sx(x), h - b + 12.0));
    }
    for (name, v) in &levels {
        if *v >= y0 && *v <= y1 {
            s.push_str(&format!(
                "<line x1=\"{l}\" x2=\"{}\" y1=\"{:.1}\" y2=\"{:.1}\" stroke=\"#b33\" stroke-dasharray=\"4 3\" stroke-width=\"0.8\"/><text x=\"{}\" y=\"{:.1}\" text-anchor=\"end\" fill=\"#b33\">{name} {v}</text>",
                w - r, sy(*v), sy(*v), w - r - 2.0, sy(*v) - 2.0
            ));
        }
    }
    let path: Vec<String> = pts.iter().map(|&(x, y)| format!("{:.1},{:.1}", sx(x), sy(y))).collect();
    s.push_str(&format!(
        "<polyline fill=\"none\" stroke=\"#1f4e99\" stroke-width=\"1.4\" points=\"{}\"/>",
        path.join(" ")
    ));
    for r in &c.inspections {
        let x = r.finding_ms as f64;
        if x >= x0 && x <= x1 {
            s.push_str(&format!(
                "<line x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"{t}\" y2=\"{1}\" stroke=\"#2a7a2a\" stroke-width=\"0.8\"/><text x=\"{0:.1}\" y=\"{2}\" fill=\"#2a7a2a\" text-anchor=\"middle\">#{3}</text>",
                sx(x), h - b, t + 8.0, r.id
            ));
        }
    }
    s.push_str("</svg><p class=\"muted small\">Blue: life fraction, one point a day (the ledger's figure at the day's last instant). Red dashed: alarm levels. Green: inspection findings (record number) at their dates.</p>");
    s
}

fn component(c: &ComponentAssessment, first: bool) -> String {
    let f = &c.figures;
    let mut s = format!("<section class=\"component{}\">", if first { " first" } else { "" });
    s.push_str(&format!("<h2>{}</h2>", esc(&f.component)));
    s.push_str(&format!(
        "<table class=\"meta\"><tr><td>Unit</td><td>{}</td><td>Kind</td><td>{}</td><td>Material</td><td>{}</td></tr><tr><td>Ledger integrated to</td><td colspan=\"5\">{} ({} h integrated)</td></tr></table>",
        esc(&f.unit),
        esc(&format!("{:?}", f.kind).to_lowercase()),
        esc(&f.material),
        esc(f.integrated_to.as_deref().unwrap_or("nothing integrated yet")),
        group(f.integrated_h)
    ));
    s.push_str("<h3>Life consumed</h3><div class=\"figures\">");
    let figs = [
        ("creep life fraction", format!("{:.4}", f.creep_life_fraction)),
        ("creep strain", format!("{:.3} %", f.creep_strain * 100.0)),
        ("wear index", format!("{:.3}", f.wear_index)),
        ("hours to exhaustion at the projection rate", hours(f.remaining_life_h)),
    ];
    for (l, v) in figs {
        s.push_str(&format!(
            "<div class=\"fig\"><div class=\"v\">{}</div><div class=\"l\">{}</div></div>",
            esc(&v),
            esc(l)
        ));
    }
    s.push_str("</div>");
    s.push_str(&chart(c));
    if !c.projections.is_empty() {
        s.push_str("<h3>Rates and hours to each level, by operating profile</h3><table><tr><th>Profile</th><th>Life fraction rate, 1/h</th>");
        for (lvl, v, _) in &c.projections[0].hours_to {
            s.push_str(&format!("<th>to {} ({v})</th>", esc(lvl)));
        }
        s.push_str("</tr>");
        for p in &c.projections {
            s.push_str(&format!(
                "<tr><td>{}<div class=\"small muted\">{}</div></td><td class=\"n\">{:.3e}</td>",
                esc(&p.profile),
                esc(&p.basis),
                p.life_fraction_rate_per_h
            ));
            for (_, _, h) in &p.hours_to {
                s.push_str(&format!("<td class=\"n\">{}</td>", esc(&hours(*h))));
            }
            s.push_str("</tr>");
        }
        s.push_str("</table>");
    }
    let g = &c.geometry;
    s.push_str("<h3>Geometry in force</h3><table>");
    let mut geo = |k: &str, v: String| s.push_str(&format!("<tr><th>{}</th><td>{}</td></tr>", esc(k), esc(&v)));
    if let Some(d) = g.outside_diameter_mm {
        geo("outside diameter", format!("{d:.2} mm"));
    }
    if let Some(w) = g.wall_now_mm {
        geo("wall at the ledger's instant", format!("{w:.3} mm"));
    }
    if let Some(r) = g.thinning_rate_mm_per_year {
        let u = g
            .thinning_rate_uncertainty_mm_per_year
            .map(|u| format!(" ± {u:.3} (standard uncertainty)"))
            .unwrap_or_default();
        geo("thinning rate", format!("{r:.3} mm/year{u}"));
    }
    if let Some(fs) = g.fixed_stress_mpa {
        geo("fixed stress", format!("{fs} MPa"));
    }
    if let Some(sig) = f.hoop_stress_mpa {
        geo("hoop stress now", format!("{sig:.1} MPa ({})", g.basis.clone().unwrap_or_default()));
    }
    geo("stress factor", format!("{}", g.stress_factor));
    geo("how obtained", g.obtained.clone());
    s.push_str("</table>");
    s.push_str(&format!("<h3>Material: {}</h3><p class=\"small muted\">{}</p><table><tr><th>Value</th><th>Figure</th><th>Source</th></tr>", esc(&f.material), esc(&c.material_description)));
    for m in &c.material {
        s.push_str(&format!(
            "<tr><td>{}</td><td>{} {}</td><td class=\"small\">{}</td></tr>",
            esc(&m.item),
            esc(&m.value),
            esc(&m.unit),
            esc(&m.source)
        ));
    }
    s.push_str("</table>");
    s.push_str("<h3>Hours</h3><table><tr><th>integrated</th><th>in creep range</th><th>over design temperature</th><th>unmonitored</th><th>extrapolated</th><th>peak metal temperature</th></tr>");
    s.push_str(&format!(
        "<tr><td class=\"n\">{:.1}</td><td class=\"n\">{:.1}</td><td class=\"n\">{:.1}</td><td class=\"n\">{:.1}</td><td class=\"n\">{:.1}</td><td class=\"n\">{}</td></tr></table>",
        f.integrated_h,
        f.hours_in_creep_range,
        f.over_design_h,
        f.unmonitored_h,
        f.extrapolated_h,
        f.peak_metal_temperature_c.map_or("–".into(), |t| format!("{t:.1} °C"))
    ));
    let classes: Vec<_> = f.histograms.temperature_c.iter().filter(|c| c.hours > 0.0).collect();
    if !classes.is_empty() {
        s.push_str(
            "<h3>Time at temperature</h3><table><tr><th>Metal temperature class</th><th>Hours</th><th>Share</th></tr>",
        );
        let total: f64 = classes.iter().map(|c| c.hours).sum();
        for cl in classes {
            s.push_str(&format!(
                "<tr><td>{} to {} °C</td><td class=\"n\">{:.1}</td><td class=\"n\">{:.1} %</td></tr>",
                cl.from.map_or("below".into(), |v| format!("{v:.0}")),
                cl.to.map_or("above".into(), |v| format!("{v:.0}")),
                cl.hours,
                100.0 * cl.hours / total
            ));
        }
        s.push_str("</table>");
    }
    let pclasses: Vec<_> = f.histograms.pressure_mpa.iter().filter(|c| c.hours > 0.0).collect();
    if !pclasses.is_empty() {
        s.push_str("<h3>Time at pressure</h3><table><tr><th>Pressure class</th><th>Hours</th></tr>");
        for cl in pclasses {
            s.push_str(&format!(
                "<tr><td>{} to {} MPa</td><td class=\"n\">{:.1}</td></tr>",
                cl.from.map_or("below".into(), |v| format!("{v:.2}")),
                cl.to.map_or("above".into(), |v| format!("{v:.2}")),
                cl.hours
            ));
        }
        s.push_str("</table>");
    }
    // Hours by temperature and pressure class together (rows with hours).
    let tp = &f.histograms.temperature_pressure;
    if tp.hours.iter().flatten().any(|&h| h > 0.0) {
        let label = |edges: &[f64], i: usize, d: usize| {
            let lo = i.checked_sub(1).and_then(|j| edges.get(j));
            match (lo, edges.get(i)) {
                (Some(a), Some(b)) => format!("{a:.d$}–{b:.d$}"),
                (None, Some(b)) => format!("< {b:.d$}"),
                (Some(a), None) => format!("≥ {a:.d$}"),
                (None, None) => "all".into(),
            }
        };
        let cols: Vec<usize> = (0..=tp.pressure_edges_mpa.len())
            .filter(|&j| tp.hours.iter().any(|r| r.get(j).is_some_and(|&h| h > 0.0)))
            .collect();
        s.push_str("<h3>Hours by temperature and pressure class</h3><table class=\"small\"><tr><th>°C \\ MPa</th>");
        for &j in &cols {
            s.push_str(&format!("<th>{}</th>", esc(&label(&tp.pressure_edges_mpa, j, 1))));
        }
        s.push_str("</tr>");
        for (i, row) in tp.hours.iter().enumerate() {
            if !row.iter().any(|&h| h > 0.0) {
                continue;
            }
            s.push_str(&format!("<tr><td>{}</td>", esc(&label(&tp.temperature_edges_c, i, 0))));
            for &j in &cols {
                let h = row.get(j).copied().unwrap_or(0.0);
                s.push_str(&format!("<td class=\"n\">{}</td>", if h > 0.0 { format!("{h:.1}") } else { "·".into() }));
            }
            s.push_str("</tr>");
        }
        s.push_str("</table>");
    }
    s.push_str("<h3>Inspection records</h3>");
    if c.inspections.is_empty() {
        s.push_str("<p class=\"muted\">None recorded.</p>");
    } else {
        s.push_str("<table><tr><th>#</th><th>Date of finding</th><th>Kind</th><th>Value</th><th>Method, location</th><th>Entered by</th><th>Status</th></tr>");
        for r in &c.inspections {
            let sup = c.inspections.iter().find(|o| o.supersedes == Some(r.id));
            let ev = c.events.iter().find(|e| e.id == r.id);
            let status = match (sup, ev) {
                (Some(o), _) => format!("superseded by #{}", o.id),
                (None, Some(e)) if !e.applied => format!("accepted; applies at {}", rfc3339_ms(e.effective_ms)),
                (None, Some(e)) => {
                    let x = &e.effect;
                    let mut t = String::from("applied");
                    if let Some(n) = &x.not_applied {
                        t = format!("not applied: {n}");
                    } else if let crate::engine::inspection::Finding::WallThickness { wall_mm } = e.finding {
                        t = format!("wall re-based to {wall_mm:.2} mm; hoop stress follows from this date");
                    } else if let Some(c) = x.temperature_correction_k {
                        t = format!("temperature correction {c:+.1} K");
                    } else if let Some(b) = x.bounds {
                        t = format!(
                            "life fraction bounds {}–{}{}",
                            b[0],
                            b[1],
                            if x.outside == Some(true) { ", the ledger lay outside" } else { "" }
                        );
                    } else if let (Some(a), Some(b)) = (x.before, x.after) {
                        if a != b {
                            t = format!(
                                "re-based: life {:.4}→{:.4}, strain {:.5}→{:.5}, wear {:.4}→{:.4} mm",
                                a.life_fraction,
                                b.life_fraction,
                                a.creep_strain,
                                b.creep_strain,
                                a.wear_depth_mm,
                                b.wear_depth_mm
                            );
                        }
                    }
                    if e.effective_ms != r.finding_ms {
                        t.push_str(&format!(" (entered late, applied {})", rfc3339_ms(e.effective_ms)));
                    }
                    t
                }
                (None, None) if r.accepted.is_some() => "accepted".into(),
                (None, None) => "pending".into(),
            };
            let value = match r.value {
                Some(v) => format!("{v} {}", r.unit),
                None => r.detail.clone(),
            };
            s.push_str(&format!(
                "<tr{}><td>{}{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td>{}</td><td>{}</td><td class=\"small\">{}</td></tr>",
                if sup.is_some() { " class=\"superseded\"" } else { "" },
                r.id,
                r.supersedes.map(|x| format!(" (corrects #{x})")).unwrap_or_default(),
                esc(rfc3339_ms(r.finding_ms).get(..10).unwrap_or("")),
                esc(&r.kind.replace('_', " ")),
                esc(&value),
                esc(&[r.method.as_str(), r.location.as_str()].iter().filter(|x| !x.is_empty()).copied().collect::<Vec<_>>().join(", ")),
                esc(&r.entered_by),
                esc(&status)
            ));
        }
        s.push_str("</table>");
    }
    s.push_str("<h3>Alarm events of the period</h3>");
    if c.alarms.is_empty() {
        s.push_str("<p class=\"muted\">None recorded.</p>");
    } else {
        s.push_str("<table><tr><th>Time (UTC)</th><th>Index</th><th>Event</th></tr>");
        for a in c.alarms.iter().take(40) {
            s.push_str(&format!(
                "<tr><td>{}</td><td>{}</td><td class=\"small\">{}</td></tr>",
                esc(&a.time),
                esc(&a.index),
                esc(&a.summary)
            ));
        }
        s.push_str("</table>");
        if c.alarms.len() > 40 {
            s.push_str(&format!(
                "<p class=\"small muted\">{} more in report.csv and report.json.</p>",
                c.alarms.len() - 40
            ));
        }
    }
    s.push_str("<h3>What lowers confidence</h3><ul>");
    for x in &c.confidence {
        s.push_str(&format!("<li>{}</li>", esc(x)));
    }
    s.push_str("</ul><h3>Assumptions</h3><ul>");
    for x in &c.assumptions {
        s.push_str(&format!("<li>{}</li>", esc(x)));
    }
    s.push_str("</ul></section>");
    s
}

/// The whole document.
pub fn render(a: &Assessment) -> String {
    let mut s = String::from("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">");
    s.push_str(&format!(
        "<title>Life assessment · {} · {}</title><style>{CSS}</style></head><body>",
        esc(&a.plant),
        esc(&a.scope)
    ));
    s.push_str(&format!("<h1>Life assessment: {}</h1>", esc(&a.plant)));
    s.push_str(&format!(
        "<table class=\"meta\"><tr><td>Scope</td><td>{}</td></tr><tr><td>Generated</td><td>{}</td></tr><tr><td>Software</td><td>{}</td></tr><tr><td>Ledger</td><td>{}</td></tr><tr><td>Components</td><td>{}</td></tr></table>",
        esc(&a.scope),
        esc(&a.generated),
        esc(&a.software),
        esc(&a.ledger),
        a.components.iter().map(|c| esc(&c.figures.component)).collect::<Vec<_>>().join(", ")
    ));
    s.push_str(&format!(
        "<div class=\"caution\"><strong>Caution.</strong> {} The built-in correlations (oxide growth, replica classes, material curves) are screening values, not authoritative; defer to the governing local code and licensed engineering practice.</div>",
        esc(&a.caution)
    ));
    for (i, c) in a.components.iter().enumerate() {
        s.push_str(&component(c, i == 0));
    }
    s.push_str(&alarm_performance(&a.alarm_performance));
    s.push_str(&format!(
        "<footer>{} · {} · generated {} · {}</footer></body></html>",
        esc(&a.plant),
        esc(&a.software),
        esc(&a.generated),
        esc(&a.caution)
    ));
    s
}

/// The alarm-system performance section (see `alarm_performance`).
fn alarm_performance(p: &super::alarm_performance::AlarmPerformance) -> String {
    let mut s = String::from("<h2>Alarm-system performance of this scope</h2>");
    let (Some(from), Some(to)) = (&p.from, &p.to) else {
        s.push_str("<p class=\"muted\">No alarm events recorded for this scope.</p>");
        return s;
    };
    s.push_str(&format!(
        "<p class=\"small\">Operator alarms annunciated between {} and {} (event time), by the definitions of \
         alarm-management practice (ISA-18.2 / IEC 62682): a flood is more than 10 in a 10-minute period; \
         chattering is 3 or more activations of one alarm within 60 s. Usual targets (common practice, from \
         memory): about 1 alarm per 10 minutes per operator, under 1 % of the time in flood, no chattering.</p>",
        esc(from),
        esc(to)
    ));
    s.push_str(&format!(
        "<table><tr><th>Annunciations</th><th>Mean per 10 min</th><th>Peak per 10 min</th><th>Flood periods</th>\
         <th>Time in flood</th><th>Chattering alarms</th></tr><tr><td>{}</td><td>{:.2}</td><td>{}</td><td>{}</td>\
         <td>{:.1} %</td><td>{}</td></tr></table>",
        p.annunciations,
        p.mean_per_10_min,
        p.peak_per_10_min,
        p.flood_periods,
        p.time_in_flood_percent,
        p.chattering.len()
    ));
    if !p.most_frequent.is_empty() {
        s.push_str("<table><tr><th>Most frequent alarm</th><th>Annunciations</th></tr>");
        for (k, n) in &p.most_frequent {
            s.push_str(&format!("<tr><td>{}</td><td>{n}</td></tr>", esc(k)));
        }
        s.push_str("</table>");
    }
    s
}
