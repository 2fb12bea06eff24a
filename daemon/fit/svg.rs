//! Hand-written SVG plots of fits (`--plot FILE.svg`): the test points and
//! the fitted curves, so an engineer can see at a glance whether the curve
//! follows the data. Plain SVG 1.1 text, no dependencies.
//!
//! * Larson-Miller: stress (log axis) against P = T·(C + log10 t_r), with
//!   the mean master curve and the minimum curve at the lowest and highest
//!   test temperature (in P the minimum curve is P − T·k·SEE, so it depends
//!   on T). Curves are drawn only over the stress range of the data.
//! * Norton: minimum creep rate against stress, both log axes, with the
//!   fitted law at each test temperature.
//!
//! Outliers (by the fit's threshold) get a red ring.

use super::larson_miller::{poly, LmFit};
use super::norton::NortonFit;
use super::units::{kelvin_to_fahrenheit, InputUnits};
use std::fmt::Write as _;

const WIDTH: f64 = 860.0;
const HEIGHT: f64 = 560.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 230.0;
const TOP: f64 = 56.0;
const BOTTOM: f64 = 64.0;
const PALETTE: [&str; 8] = ["#1f77b4", "#d62728", "#2ca02c", "#9467bd", "#ff7f0e", "#8c564b", "#e377c2", "#17becf"];

fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

struct Axis {
    lo: f64,
    hi: f64,
    log: bool,
    label: String,
    /// Tick labels show value / divisor.
    divisor: f64,
    /// The same axis in the input file's unit: its label, the factor
    /// (value in that unit = SI value × factor) and its tick divisor.
    alt: Option<(String, f64, f64)>,
}

impl Axis {
    fn new(values: impl Iterator<Item = f64>, log: bool, label: &str, divisor: f64) -> Axis {
        let (mut lo, mut hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
        if !lo.is_finite() || !hi.is_finite() {
            (lo, hi) = if log { (1.0, 10.0) } else { (0.0, 1.0) };
        }
        if log {
            let (l, h) = (lo.log10(), hi.log10());
            let pad = ((h - l) * 0.08).max(0.1);
            lo = 10f64.powf(l - pad);
            hi = 10f64.powf(h + pad);
        } else {
            let pad = ((hi - lo) * 0.06).max(hi.abs() * 0.01).max(1e-9);
            lo -= pad;
            hi += pad;
        }
        Axis { lo, hi, log, label: label.to_string(), divisor, alt: None }
    }

    /// Also label the axis in another unit (`factor`: value there per SI value).
    fn with_alt(mut self, label: String, factor: f64, divisor: f64) -> Axis {
        self.alt = Some((label, factor, divisor));
        self
    }

    /// The axis in its other unit, with its own round ticks; a value `v`
    /// there sits where `v / factor` sits on this axis.
    fn alt_axis(&self) -> Option<Axis> {
        self.alt.as_ref().map(|(label, f, d)| Axis {
            lo: self.lo * f,
            hi: self.hi * f,
            log: self.log,
            label: label.clone(),
            divisor: *d,
            alt: None,
        })
    }

    /// Position 0…1 along the axis.
    fn frac(&self, v: f64) -> f64 {
        if self.log {
            (v.log10() - self.lo.log10()) / (self.hi.log10() - self.lo.log10())
        } else {
            (v - self.lo) / (self.hi - self.lo)
        }
    }

    fn ticks(&self) -> Vec<(f64, bool)> {
        let mut t = Vec::new();
        if self.log {
            let (l, h) = (self.lo.log10().floor() as i32, self.hi.log10().ceil() as i32);
            let span = (self.hi / self.lo).log10();
            let steps: &[f64] = if span < 1.2 {
                &[1.0, 1.5, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0]
            } else if span < 2.5 {
                &[1.0, 2.0, 3.0, 5.0]
            } else {
                &[1.0]
            };
            for e in l..=h {
                let base = 10f64.powi(e);
                for &m in steps {
                    let v = m * base;
                    if v >= self.lo && v <= self.hi {
                        t.push((v, m == 1.0));
                    }
                }
            }
        } else {
            let span = (self.hi - self.lo) / self.divisor;
            let raw = span / 8.0;
            let mag = 10f64.powf(raw.log10().floor());
            let step = [1.0, 2.0, 5.0, 10.0].iter().map(|m| m * mag).find(|s| *s >= raw).unwrap_or(10.0 * mag);
            let mut v = (self.lo / self.divisor / step).ceil() * step;
            while v <= self.hi / self.divisor + 1e-12 {
                t.push((v * self.divisor, true));
                v += step;
            }
        }
        t
    }

    fn tick_label(&self, v: f64) -> String {
        let v = v / self.divisor;
        if self.log && !(1e-3..1e5).contains(&v) {
            let e = v.log10().round() as i32;
            let m = v / 10f64.powi(e);
            if (m - 1.0).abs() < 1e-9 {
                format!("1e{e}")
            } else {
                format!("{m:.0}e{e}")
            }
        } else {
            let s = format!("{v:.3}");
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        }
    }
}

struct Chart {
    /// Right margin: room for the legend, and for the second stress axis.
    right: f64,
    x: Axis,
    y: Axis,
    body: String,
    legend: Vec<(String, String, bool, bool)>, // label, colour, is_line, dashed
}

impl Chart {
    fn px(&self, x: f64) -> f64 {
        LEFT + self.x.frac(x) * (WIDTH - LEFT - self.right)
    }
    fn py(&self, y: f64) -> f64 {
        HEIGHT - BOTTOM - self.y.frac(y) * (HEIGHT - TOP - BOTTOM)
    }

    fn points(&mut self, pts: &[(f64, f64, bool)], colour: &str, label: &str) {
        for &(x, y, outlier) in pts {
            let (cx, cy) = (self.px(x), self.py(y));
            let _ = writeln!(
                self.body,
                r#"<circle cx="{cx:.1}" cy="{cy:.1}" r="3.5" fill="{colour}" fill-opacity="0.8" stroke="{colour}"/>"#
            );
            if outlier {
                let _ = writeln!(
                    self.body,
                    r##"<circle cx="{cx:.1}" cy="{cy:.1}" r="7" fill="none" stroke="#e00000" stroke-width="1.5"/>"##
                );
            }
        }
        self.legend.push((label.to_string(), colour.to_string(), false, false));
    }

    fn line(&mut self, pts: &[(f64, f64)], colour: &str, dashed: bool, label: Option<&str>) {
        let d: Vec<String> = pts
            .iter()
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .map(|&(x, y)| format!("{:.1},{:.1}", self.px(x), self.py(y)))
            .collect();
        let dash = if dashed { r#" stroke-dasharray="7,4""# } else { "" };
        let _ = writeln!(
            self.body,
            r#"<polyline points="{}" fill="none" stroke="{colour}" stroke-width="1.8"{dash} clip-path="url(#plot)"/>"#,
            d.join(" ")
        );
        if let Some(l) = label {
            self.legend.push((l.to_string(), colour.to_string(), true, dashed));
        }
    }

    fn finish(self, title: &str, subtitle: &str) -> String {
        let (x0, x1, y0, y1) = (LEFT, WIDTH - self.right, TOP, HEIGHT - BOTTOM);
        let mut s = String::new();
        let _ = writeln!(
            s,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="12">"#
        );
        let _ = writeln!(s, r#"<rect width="100%" height="100%" fill="white"/>"#);
        let _ = writeln!(
            s,
            r#"<defs><clipPath id="plot"><rect x="{x0}" y="{y0}" width="{}" height="{}"/></clipPath></defs>"#,
            x1 - x0,
            y1 - y0
        );
        let _ = writeln!(s, r#"<text x="{x0}" y="22" font-size="15" font-weight="bold">{}</text>"#, esc(title));
        let _ = writeln!(s, r##"<text x="{x0}" y="40" font-size="11" fill="#555">{}</text>"##, esc(subtitle));
        // Grid and ticks.
        for (v, major) in self.x.ticks() {
            let px = self.px(v);
            let stroke = if major { "#ccc" } else { "#eee" };
            let _ = writeln!(s, r#"<line x1="{px:.1}" y1="{y0}" x2="{px:.1}" y2="{y1}" stroke="{stroke}"/>"#);
            let _ = writeln!(
                s,
                r#"<text x="{px:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
                y1 + 16.0,
                esc(&self.x.tick_label(v))
            );
        }
        for (v, major) in self.y.ticks() {
            let py = self.py(v);
            let stroke = if major { "#ccc" } else { "#eee" };
            let _ = writeln!(s, r#"<line x1="{x0}" y1="{py:.1}" x2="{x1}" y2="{py:.1}" stroke="{stroke}"/>"#);
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
                x0 - 6.0,
                py + 4.0,
                esc(&self.y.tick_label(v))
            );
        }
        let _ = writeln!(
            s,
            r##"<rect x="{x0}" y="{y0}" width="{}" height="{}" fill="none" stroke="#333"/>"##,
            x1 - x0,
            y1 - y0
        );
        // With a second row of x labels (grey), the axis title names both.
        let x_title = match self.x.alt_axis() {
            Some(ax) => format!("{}; grey: {}", self.x.label, ax.label),
            None => self.x.label.clone(),
        };
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            (x0 + x1) / 2.0,
            if self.x.alt.is_some() { HEIGHT - 8.0 } else { HEIGHT - 18.0 },
            esc(&x_title)
        );
        let _ = writeln!(
            s,
            r#"<text transform="translate(20,{:.1}) rotate(-90)" text-anchor="middle">{}</text>"#,
            (y0 + y1) / 2.0,
            esc(&self.y.label)
        );
        // The axes again in the input file's units: x as a second row of
        // labels under the first, y on the right-hand side.
        if let Some(ax) = self.x.alt_axis() {
            for (v, major) in ax.ticks() {
                if major {
                    let _ = writeln!(
                        s,
                        r##"<text x="{:.1}" y="{:.1}" text-anchor="middle" fill="#666">{}</text>"##,
                        LEFT + ax.frac(v) * (x1 - x0),
                        y1 + 31.0,
                        esc(&ax.tick_label(v))
                    );
                }
            }
        }
        if let Some(ay) = self.y.alt_axis() {
            for (v, _) in ay.ticks() {
                let py = HEIGHT - BOTTOM - ay.frac(v) * (y1 - y0);
                let _ =
                    writeln!(s, r##"<line x1="{x1}" y1="{py:.1}" x2="{:.1}" y2="{py:.1}" stroke="#333"/>"##, x1 + 4.0);
                let _ = writeln!(
                    s,
                    r##"<text x="{:.1}" y="{:.1}" fill="#555">{}</text>"##,
                    x1 + 6.0,
                    py + 4.0,
                    esc(&ay.tick_label(v))
                );
            }
            let _ = writeln!(
                s,
                r##"<text transform="translate({:.1},{:.1}) rotate(90)" text-anchor="middle" fill="#555">{}</text>"##,
                x1 + 44.0,
                (y0 + y1) / 2.0,
                esc(&ay.label)
            );
        }
        s.push_str(&self.body);
        // Legend.
        let lx = x1 + if self.y.alt.is_some() { 56.0 } else { 16.0 };
        for (i, (label, colour, is_line, dashed)) in self.legend.iter().enumerate() {
            let ly = y0 + 14.0 + 20.0 * i as f64;
            if *is_line {
                let dash = if *dashed { r#" stroke-dasharray="7,4""# } else { "" };
                let _ = writeln!(
                    s,
                    r#"<line x1="{lx}" y1="{ly}" x2="{}" y2="{ly}" stroke="{colour}" stroke-width="1.8"{dash}/>"#,
                    lx + 24.0
                );
            } else {
                let _ = writeln!(s, r#"<circle cx="{}" cy="{ly}" r="3.5" fill="{colour}"/>"#, lx + 12.0);
            }
            let _ = writeln!(s, r#"<text x="{}" y="{}">{}</text>"#, lx + 30.0, ly + 4.0, esc(label));
        }
        s.push_str("</svg>\n");
        s
    }
}

fn temperature_label(t_k: f64, units: InputUnits) -> String {
    if units.fahrenheit() {
        format!("{:.0} K ({:.0} °C, {:.0} °F)", t_k, t_k - 273.15, kelvin_to_fahrenheit(t_k))
    } else {
        format!("{:.0} K ({:.0} °C)", t_k, t_k - 273.15)
    }
}

/// A stress axis, with its second unit when the input was not in MPa.
fn stress_axis(values: impl Iterator<Item = f64>, units: InputUnits) -> Axis {
    let a = Axis::new(values, true, "stress, MPa", 1.0);
    match units.stress_alt() {
        Some((u, mpa_per_unit)) => a.with_alt(format!("stress, {u}"), 1.0 / mpa_per_unit, 1.0),
        None => a,
    }
}

fn colour_of(temperatures: &[f64], t: f64) -> &'static str {
    let i = temperatures.iter().position(|v| (v - t).abs() <= 1e-9 * t.abs()).unwrap_or(0);
    PALETTE[i % PALETTE.len()]
}

/// Larson-Miller plot: stress (log) against P, with mean and minimum curves.
/// Data in °F gets a second P axis with T in °R, data in ksi or psi a
/// second stress axis.
pub fn larson_miller_svg(fit: &LmFit, input_name: &str, units: InputUnits) -> String {
    let (x0, x1) = (fit.stress_range_mpa[0].log10(), fit.stress_range_mpa[1].log10());
    let xs: Vec<f64> = (0..=120).map(|i| x0 + (x1 - x0) * i as f64 / 120.0).collect();
    let mean: Vec<(f64, f64)> = xs.iter().map(|&x| (poly(&fit.coefficients, x), 10f64.powf(x))).collect();
    let [t_lo, t_hi] = fit.temperature_range_k;
    let minimum =
        |t: f64| -> Vec<(f64, f64)> { mean.iter().map(|&(p, s)| (p - t * fit.minimum_offset_log10_h, s)).collect() };
    let (min_lo, min_hi) = (minimum(t_lo), minimum(t_hi));
    let all_p =
        fit.residuals.iter().map(|r| r.parameter).chain(mean.iter().map(|m| m.0)).chain(min_hi.iter().map(|m| m.0));
    let x = Axis::new(
        all_p,
        false,
        &format!("P = T·(C + log10 t_r) / 1000, T in K, t_r in h, C = {:.3}", fit.constant_c),
        1000.0,
    );
    let x =
        if units.fahrenheit() { x.with_alt("P with T in °R (1.8 × P) / 1000".to_string(), 1.8, 1000.0) } else { x };
    let y = stress_axis(fit.residuals.iter().map(|r| r.stress_mpa), units);
    let right = if y.alt.is_some() { RIGHT + 40.0 } else { RIGHT };
    let mut chart = Chart { right, x, y, body: String::new(), legend: Vec::new() };
    for &t in &fit.temperatures_k {
        let pts: Vec<(f64, f64, bool)> = fit
            .residuals
            .iter()
            .filter(|r| (r.temperature_k - t).abs() <= 1e-9 * t)
            .map(|r| (r.parameter, r.stress_mpa, r.outlier))
            .collect();
        chart.points(&pts, colour_of(&fit.temperatures_k, t), &temperature_label(t, units));
    }
    chart.line(&mean, "#000", false, Some("mean curve"));
    let k = fit.k;
    chart.line(&min_lo, "#555", true, Some(&format!("min. −{k}·SEE, {t_lo:.0} K")));
    if (t_hi - t_lo).abs() > 1e-9 * t_hi {
        chart.line(&min_hi, "#999", true, Some(&format!("min. −{k}·SEE, {t_hi:.0} K")));
    }
    if fit.residuals.iter().any(|r| r.outlier) {
        chart.legend.push((format!("|std. residual| > {}", fit.outlier_threshold), "#e00000".into(), false, false));
    }
    chart.finish(
        &format!("Larson-Miller fit of {input_name}: order {}, SEE {:.3} log10 h", fit.order, fit.see_log10_h),
        "Screening fit: acceptance of material data is for a responsible engineer.",
    )
}

/// Norton plot: creep rate against stress (log-log) at each temperature;
/// stress also in ksi or psi, temperatures also in °F, as the input was.
pub fn norton_svg(fit: &NortonFit, input_name: &str, units: InputUnits) -> String {
    let [s0, s1] = fit.stress_range_mpa;
    let ss: Vec<f64> = (0..=60).map(|i| s0 * (s1 / s0).powf(i as f64 / 60.0)).collect();
    let x = stress_axis(fit.residuals.iter().map(|r| r.stress_mpa), units);
    let y = Axis::new(fit.residuals.iter().map(|r| r.rate_per_h), true, "minimum creep rate, 1/h", 1.0);
    let mut chart = Chart { right: RIGHT, x, y, body: String::new(), legend: Vec::new() };
    for &t in &fit.temperatures_k {
        let colour = colour_of(&fit.temperatures_k, t);
        let pts: Vec<(f64, f64, bool)> = fit
            .residuals
            .iter()
            .filter(|r| (r.temperature_k - t).abs() <= 1e-9 * t)
            .map(|r| (r.stress_mpa, r.rate_per_h, r.outlier))
            .collect();
        chart.points(&pts, colour, &temperature_label(t, units));
        let curve: Vec<(f64, f64)> = ss.iter().map(|&s| (s, fit.rate_per_h(s, t))).collect();
        chart.line(&curve, colour, false, None);
    }
    chart.legend.push(("lines: fitted law".into(), "#000".into(), true, false));
    if fit.residuals.iter().any(|r| r.outlier) {
        chart.legend.push((format!("|std. residual| > {}", fit.outlier_threshold), "#e00000".into(), false, false));
    }
    chart.finish(
        &format!("Norton fit of {input_name}: n = {:.3}, Q = {:.1} kJ/mol", fit.n, fit.q_j_per_mol / 1000.0),
        "Screening fit: acceptance of material data is for a responsible engineer.",
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_ticks_are_decades_and_labels_trim() {
        let a = Axis::new([30.0, 300.0].into_iter(), true, "s", 1.0);
        let t: Vec<f64> = a.ticks().iter().map(|t| t.0).collect();
        assert!(t.contains(&100.0) && t.contains(&50.0) && t.contains(&200.0), "{t:?}");
        assert_eq!(a.tick_label(100.0), "100");
        let b = Axis::new([18_000.0, 24_000.0].into_iter(), false, "p", 1000.0);
        assert!(b.ticks().iter().any(|t| (t.0 - 20_000.0).abs() < 1e-6));
        assert_eq!(b.tick_label(20_000.0), "20");
        assert_eq!(esc("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
