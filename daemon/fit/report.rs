//! Renderings of a fit: the terminal report and the TOML block in the
//! project's material format (`physics::material`), which loads back as a
//! user grade (Larson-Miller) or as a `[norton]` table.

use super::larson_miller::{LmFit, OrderChoice};
use super::norton::NortonFit;
use super::units::{kelvin_to_fahrenheit, trimmed, InputUnits};
use crate::physics::material::{LarsonMillerCurve, Material, NortonLaw, Sourced};
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;

/// A complete grade file needs a melting point; the fit cannot supply it.
#[derive(Debug, Clone, PartialEq)]
pub struct GradeInfo {
    pub grade: String,
    pub melting_point_k: f64,
    pub melting_point_source: String,
}

/// A `[larson_miller]` table on its own, for pasting into a grade file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LarsonMillerBlock {
    pub larson_miller: LarsonMillerCurve,
}

/// A `[norton]` table on its own.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NortonBlock {
    pub norton: NortonLaw,
}

fn toml_header(command: &str, input_name: &str, what: &str) -> String {
    format!(
        "# Written by `lifeledger fit {command}` from {input_name}.\n\
         # Screening fit: acceptance of material data is for a responsible engineer.\n\
         # {what}\n"
    )
}

/// The TOML text for a Larson-Miller fit: a complete grade file when
/// `grade` is given, else a `[larson_miller]` fragment.
pub fn larson_miller_toml(
    fit: &LmFit,
    input_name: &str,
    grade: Option<&GradeInfo>,
) -> Result<String, toml::ser::Error> {
    let curve = fit.curve(input_name);
    match grade {
        Some(g) => {
            let material = Material {
                grade: g.grade.clone(),
                aliases: Vec::new(),
                description: format!("Fitted from creep-rupture tests in {input_name} (screening fit)."),
                melting_point_k: Sourced { value: g.melting_point_k, source: g.melting_point_source.clone() },
                creep_threshold_k: None,
                larson_miller: curve,
                norton: None,
                hardness_hv: None,
                unchecked_curve: None,
                reference_rupture_strengths: Vec::new(),
                elastic: None,
                fatigue: None,
            };
            Ok(toml_header(
                "larson-miller",
                input_name,
                "A complete grade file of the material library (creep threshold defaults to 0.4·Tm);\n\
                 # use it from a configuration with [[material_file]] path = \"THIS FILE\".",
            ) + &toml::to_string(&material)?)
        }
        None => Ok(toml_header(
            "larson-miller",
            input_name,
            "Paste this table into a grade file, or re-run with --melting-point-k for a complete grade.",
        ) + &toml::to_string(&LarsonMillerBlock { larson_miller: curve })?),
    }
}

/// The TOML text for a Norton fit: a `[norton]` table.
pub fn norton_toml(fit: &NortonFit, input_name: &str) -> Result<String, toml::ser::Error> {
    Ok(toml_header("norton", input_name, "Paste this table into a grade file of the material library.")
        + &toml::to_string(&NortonBlock { norton: fit.law(input_name) })?)
}

/// A stress in MPa with about four significant digits.
fn mpa(v: f64) -> String {
    match v.abs() {
        a if a >= 100.0 => format!("{v:.1}"),
        a if a >= 10.0 => format!("{v:.2}"),
        _ => format!("{v:.3}"),
    }
}

/// The "Data" line: the stress and temperature range the fit rests on,
/// also in the input file's units when they are not SI.
fn data_range(o: &mut String, [s0, s1]: [f64; 2], [t0, t1]: [f64; 2], temperatures: usize, units: InputUnits) {
    let stress_alt = units
        .stress_alt()
        .map(|(u, f)| format!(" ({}–{} {u})", trimmed(s0 / f, 2), trimmed(s1 / f, 2)))
        .unwrap_or_default();
    let fahrenheit = if units.fahrenheit() {
        format!("; {}–{} °F", trimmed(kelvin_to_fahrenheit(t0), 1), trimmed(kelvin_to_fahrenheit(t1), 1))
    } else {
        String::new()
    };
    let _ = writeln!(
        o,
        "Data      stress {}–{} MPa{stress_alt}; temperature {t0:.2}–{t1:.2} K ({:.2}–{:.2} °C{fahrenheit}), {}",
        mpa(s0),
        mpa(s1),
        t0 - 273.15,
        t1 - 273.15,
        plural(temperatures, "temperature", "temperatures")
    );
    if units.fahrenheit() || units.stress_alt().is_some() {
        let mut also = vec![];
        if units.fahrenheit() {
            also.push("°F");
        }
        if let Some((u, _)) = units.stress_alt() {
            also.push(u);
        }
        let _ = writeln!(
            o,
            "Units     fitted in K and MPa; also shown in {} (NIST SP 811 conversions)",
            also.join(" and ")
        );
    }
}

/// Extra residual-table columns in the input units (temperature in °F,
/// stress in ksi or psi): header cells and the cells of one test.
fn alt_columns(units: InputUnits) -> String {
    let mut h = String::new();
    if units.fahrenheit() {
        h.push_str(&format!(" {:>8}", "T, °F"));
    }
    if let Some((u, _)) = units.stress_alt() {
        h.push_str(&format!(" {:>8}", format!("σ, {u}")));
    }
    h
}

fn alt_cells(units: InputUnits, temperature_k: f64, stress_mpa: f64) -> String {
    let mut c = String::new();
    if units.fahrenheit() {
        c.push_str(&format!(" {:>8.1}", kelvin_to_fahrenheit(temperature_k)));
    }
    if let Some((u, f)) = units.stress_alt() {
        let v = stress_mpa / f;
        if u == "psi" {
            c.push_str(&format!(" {v:>8.0}"));
        } else {
            c.push_str(&format!(" {v:>8.2}"));
        }
    }
    c
}

fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

fn opt(v: Option<f64>, prec: usize) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v:+.prec$}"),
        _ => "n/a".into(),
    }
}

fn id(heat: &Option<String>, specimen: &Option<String>) -> String {
    match (heat, specimen) {
        (Some(h), Some(s)) => format!("{h}/{s}"),
        (Some(h), None) => h.clone(),
        (None, Some(s)) => s.clone(),
        (None, None) => "-".into(),
    }
}

fn caution(out: &mut String) {
    let _ = writeln!(out, "{}", crate::CAUTION);
    let _ = writeln!(out, "These are screening fits; acceptance of material data is for a responsible engineer.");
}

/// The terminal report of a Larson-Miller fit.
/// Temperatures and stresses are also shown in the input's `units`.
pub fn larson_miller_text(fit: &LmFit, input_name: &str, notes: &[String], units: InputUnits) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "lifeledger fit larson-miller: {input_name}, {} tests", fit.n_tests);
    caution(&mut o);
    let _ = writeln!(o);
    let terms: Vec<String> = (0..=fit.order)
        .map(|j| match j {
            0 => "a0".to_string(),
            1 => "a1·x".to_string(),
            j => format!("a{j}·x^{j}"),
        })
        .collect();
    let _ = writeln!(
        o,
        "Model     log10 t_r = P(x)/T − C,  P(x) = {},  x = log10(σ/MPa), T in K, t_r in h",
        terms.join(" + ")
    );
    let how_c = if fit.constant_fixed { "given (--constant)" } else { "fitted by linear least squares in log10 t_r" };
    let _ = writeln!(o, "Constant  C {how_c}");
    match &fit.order_choice {
        OrderChoice::User => {
            let _ = writeln!(o, "Order     {} (given, --order)", fit.order);
        }
        OrderChoice::Criterion { criterion, scores, not_tried } => {
            let name = match criterion {
                super::Criterion::Bic => "BIC = n·ln(RSS/n) + p·ln n",
                super::Criterion::Aic => "AIC = n·ln(RSS/n) + 2p",
            };
            let s: Vec<String> = scores
                .iter()
                .map(|s| format!("order {}: {:.2}{}", s.order, s.score, if s.order == fit.order { " *" } else { "" }))
                .collect();
            let _ = writeln!(o, "Order     {} chosen by {name} (lower is better): {}", fit.order, s.join(", "));
            for n in not_tried {
                let _ = writeln!(o, "          not tried: {n}");
            }
        }
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "  {:<10} {:>16} {:>14}", "unknown", "value", "std. error");
    for (j, (a, se)) in fit.coefficients.iter().zip(&fit.coefficient_se).enumerate() {
        let _ = writeln!(o, "  {:<10} {:>16.6e} {:>14.4e}", format!("a{j}"), a, se);
    }
    match fit.constant_c_se {
        Some(se) => {
            let _ = writeln!(o, "  {:<10} {:>16.6} {:>14.4e}", "C", fit.constant_c, se);
        }
        None => {
            let _ = writeln!(o, "  {:<10} {:>16.6} {:>14}", "C", fit.constant_c, "(given)");
        }
    }
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "SEE       {:.4} log10 h (scatter factor {:.2} on life), {}",
        fit.see_log10_h,
        10f64.powf(fit.see_log10_h),
        plural(fit.dof, "degree of freedom", "degrees of freedom")
    );
    let _ = writeln!(o, "R²        {:.5} (of log10 t_r)", fit.r_squared);
    let _ = writeln!(
        o,
        "Minimum   log10 t_min = log10 t_mean − k·SEE, k = {} → offset {:.4} log10 h (mean life ÷ {:.2})",
        fit.k,
        fit.minimum_offset_log10_h,
        10f64.powf(fit.minimum_offset_log10_h)
    );
    data_range(&mut o, fit.stress_range_mpa, fit.temperature_range_k, fit.temperatures_k.len(), units);
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "Residuals by test (log10 h; standardized = e/(SEE·√(1−h)); * marks |standardized| > {})",
        fit.outlier_threshold
    );
    let _ = writeln!(
        o,
        "  {:>5} {:<14} {:>8} {:>10}{} {:>11} {:>10} {:>8} {:>8} {:>8} {:>8}",
        "line",
        "heat/specimen",
        "T, K",
        "σ, MPa",
        alt_columns(units),
        "t_r, h",
        "P",
        "obs",
        "fit",
        "resid",
        "std"
    );
    for r in &fit.residuals {
        let _ = writeln!(
            o,
            "  {:>5} {:<14} {:>8.2} {:>10.3}{} {:>11.4e} {:>10.1} {:>8.4} {:>8.4} {:>+8.4} {:>8}{}",
            r.line,
            id(&r.heat, &r.specimen),
            r.temperature_k,
            r.stress_mpa,
            alt_cells(units, r.temperature_k, r.stress_mpa),
            r.rupture_h,
            r.parameter,
            r.log10_observed_h,
            r.log10_fitted_h,
            r.residual,
            opt(r.standardized, 2),
            if r.outlier { " *" } else { "" }
        );
    }
    warnings_and_notes(&mut o, &fit.warnings, notes);
    o
}

fn warnings_and_notes(o: &mut String, warnings: &[String], notes: &[String]) {
    if !warnings.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "Warnings");
        for w in warnings {
            let _ = writeln!(o, "  - {w}");
        }
    }
    if !notes.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "Notes on the input");
        for n in notes {
            let _ = writeln!(o, "  - {n}");
        }
    }
}

/// The terminal report of a Norton fit.
/// Temperatures and stresses are also shown in the input's `units`.
pub fn norton_text(fit: &NortonFit, input_name: &str, notes: &[String], units: InputUnits) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "lifeledger fit norton: {input_name}, {} tests", fit.n_tests);
    caution(&mut o);
    let _ = writeln!(o);
    let _ =
        writeln!(o, "Model     ln ε̇ = ln A + n·ln σ − Q/(R·T), ε̇ in 1/h, σ in MPa, T in K, R = 8.314462618 J/(mol·K)");
    let _ = writeln!(
        o,
        "Method    {}",
        if fit.exact { "exact solution of the 3×3 system (three tests)" } else { "linear least squares in ln ε̇" }
    );
    let _ = writeln!(o);
    let se = |v: Option<f64>| v.map_or("n/a".to_string(), |v| format!("{v:.4e}"));
    let _ = writeln!(o, "  {:<14} {:>16} {:>14}", "unknown", "value", "std. error");
    let _ = writeln!(o, "  {:<14} {:>16.6} {:>14}", "ln A", fit.ln_a, se(fit.ln_a_se));
    let _ = writeln!(o, "  {:<14} {:>16.6e} {:>14}", "A, 1/h/MPa^n", fit.a_per_h, "(from ln A)");
    let _ = writeln!(o, "  {:<14} {:>16.6} {:>14}", "n", fit.n, se(fit.n_se));
    let _ = writeln!(o, "  {:<14} {:>16.1} {:>14}", "Q, J/mol", fit.q_j_per_mol, se(fit.q_se_j_per_mol));
    let _ = writeln!(o);
    match fit.see_ln {
        Some(s) => {
            let _ = writeln!(
                o,
                "SEE       {s:.4} in ln ε̇ (scatter factor {:.2} on rate), {}",
                s.exp(),
                plural(fit.dof, "degree of freedom", "degrees of freedom")
            );
        }
        None => {
            let _ = writeln!(o, "SEE       n/a (exact solution, no degrees of freedom)");
        }
    }
    if let Some(r2) = fit.r_squared {
        let _ = writeln!(o, "R²        {r2:.5} (of ln ε̇)");
    }
    data_range(&mut o, fit.stress_range_mpa, fit.temperature_range_k, fit.temperatures_k.len(), units);
    let _ = writeln!(o);
    let _ = writeln!(o, "Residuals by test (ln 1/h; * marks |standardized| > {})", fit.outlier_threshold);
    let _ = writeln!(
        o,
        "  {:>5} {:<14} {:>8} {:>10}{} {:>11} {:>9} {:>9} {:>8} {:>8}",
        "line",
        "heat/specimen",
        "T, K",
        "σ, MPa",
        alt_columns(units),
        "rate, 1/h",
        "obs",
        "fit",
        "resid",
        "std"
    );
    for r in &fit.residuals {
        let _ = writeln!(
            o,
            "  {:>5} {:<14} {:>8.2} {:>10.3}{} {:>11.4e} {:>9.4} {:>9.4} {:>+8.4} {:>8}{}",
            r.line,
            id(&r.heat, &r.specimen),
            r.temperature_k,
            r.stress_mpa,
            alt_cells(units, r.temperature_k, r.stress_mpa),
            r.rate_per_h,
            r.ln_observed,
            r.ln_fitted,
            r.residual,
            opt(r.standardized, 2),
            if r.outlier { " *" } else { "" }
        );
    }
    warnings_and_notes(&mut o, &fit.warnings, notes);
    o
}
