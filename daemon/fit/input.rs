//! Reading creep test files for `lifeledger fit`: a CSV with a header line
//! whose column names carry the units, converted here, once, to the
//! internal units (K, MPa, hours, 1/h).
//!
//! # File format
//!
//! * Lines that are blank or start with `#` are skipped (comments). The
//!   first other line is the header. Fields are separated by commas (a
//!   header without commas but with `;` or tabs switches to that
//!   separator); a field may be wrapped in double quotes.
//! * Column names are case-insensitive; the order of columns is free:
//!
//! | column | meaning |
//! |---|---|
//! | `temperature_c`, `temperature_k`, `temperature_f` | test temperature in °C, K or °F (exactly one) |
//! | `stress_mpa`, `stress_ksi`, `stress_psi` | engineering stress (exactly one) |
//! | `rupture_h` | rupture time in hours (rupture files) |
//! | `rate_per_h`, `rate_per_s`, `rate_percent_per_h` | minimum creep rate (rate files) |
//! | `heat`, `specimen` | optional identifiers, reported with residuals |
//!
//! Any other column is ignored and listed in the notes. A column whose
//! name starts with `temperature`, `stress`, `rupture` or `rate` but has
//! an unknown unit is an error, so `stress_bar` is never read as MPa.
//!
//! Conversions (NIST Special Publication 811, 2008, Appendix B, the same
//! factors as `physics::units`): T/K = t/°C + 273.15; T/K = (t/°F +
//! 459.67)/1.8; 1 psi = 6.894 757 kPa, 1 ksi = 6.894 757 MPa;
//! 1/s = 3600/h; 1 %/h = 0.01/h.

use super::error::FitError;
use crate::physics::units::{CELSIUS_OFFSET_K, PSI_TO_PA};
use serde::Serialize;

/// NIST SP 811 B.8: 1 psi = 6.894 757 E+03 Pa.
const PSI_TO_MPA: f64 = PSI_TO_PA * 1e-6;

/// One creep-rupture test, in internal units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RuptureTest {
    /// 1-based line of the input file (0 when built in code).
    pub line: usize,
    pub temperature_k: f64,
    pub stress_mpa: f64,
    pub rupture_h: f64,
    pub heat: Option<String>,
    pub specimen: Option<String>,
}

/// One minimum-creep-rate test, in internal units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RateTest {
    /// 1-based line of the input file (0 when built in code).
    pub line: usize,
    pub temperature_k: f64,
    pub stress_mpa: f64,
    /// Minimum (secondary) creep rate, 1/h.
    pub rate_per_h: f64,
    pub heat: Option<String>,
    pub specimen: Option<String>,
}

/// The parsed content of a test file.
#[derive(Debug, Clone, PartialEq)]
pub struct TestFile<T> {
    pub tests: Vec<T>,
    /// The header columns as written, with the unit each was read in.
    pub columns: Vec<String>,
    /// Things worth telling the user that are not errors (ignored columns).
    pub notes: Vec<String>,
    /// The temperature and stress units of the columns.
    pub units: super::units::InputUnits,
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum TemperatureUnit {
    Celsius,
    Kelvin,
    Fahrenheit,
}

impl TemperatureUnit {
    fn to_kelvin(self, v: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => v + CELSIUS_OFFSET_K,
            TemperatureUnit::Kelvin => v,
            TemperatureUnit::Fahrenheit => (v + 459.67) / 1.8,
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
enum Column {
    Temperature(TemperatureUnit),
    /// Factor to MPa.
    Stress(f64),
    RuptureH,
    /// Factor to 1/h.
    Rate(f64),
    Heat,
    Specimen,
    Ignored,
}

/// Which kind of test file is being read.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
    Rupture,
    Rate,
}

fn classify(name: &str) -> Result<Column, String> {
    use TemperatureUnit::*;
    let col = match name {
        "temperature_c" => Column::Temperature(Celsius),
        "temperature_k" => Column::Temperature(Kelvin),
        "temperature_f" => Column::Temperature(Fahrenheit),
        "stress_mpa" => Column::Stress(1.0),
        "stress_ksi" => Column::Stress(PSI_TO_MPA * 1e3),
        "stress_psi" => Column::Stress(PSI_TO_MPA),
        "rupture_h" => Column::RuptureH,
        "rate_per_h" => Column::Rate(1.0),
        "rate_per_s" => Column::Rate(3600.0),
        "rate_percent_per_h" => Column::Rate(0.01),
        "heat" => Column::Heat,
        "specimen" => Column::Specimen,
        n if n.starts_with("temperature") => {
            return Err(format!(
                "column {n:?}: unknown temperature unit; use temperature_c, temperature_k or temperature_f"
            ))
        }
        n if n.starts_with("stress") => {
            return Err(format!("column {n:?}: unknown stress unit; use stress_mpa, stress_ksi or stress_psi"))
        }
        n if n.starts_with("rupture") => {
            return Err(format!("column {n:?}: unknown rupture-time unit; give hours as rupture_h"))
        }
        n if n.starts_with("rate") => {
            return Err(format!(
                "column {n:?}: unknown creep-rate unit; use rate_per_h, rate_per_s or rate_percent_per_h"
            ))
        }
        _ => Column::Ignored,
    };
    Ok(col)
}

/// Split one line into fields; double quotes protect separators and `""`
/// is a literal quote inside a quoted field.
fn split_fields(line: &str, sep: char) -> Result<Vec<String>, String> {
    let mut fields = Vec::new();
    let mut cur = String::new();
    let mut chars = line.chars().peekable();
    let mut quoted = false;
    while let Some(c) = chars.next() {
        if quoted {
            if c == '"' {
                if chars.peek() == Some(&'"') {
                    cur.push('"');
                    chars.next();
                } else {
                    quoted = false;
                }
            } else {
                cur.push(c);
            }
        } else if c == '"' && cur.trim().is_empty() {
            cur.clear();
            quoted = true;
        } else if c == sep {
            fields.push(cur.trim().to_string());
            cur.clear();
        } else {
            cur.push(c);
        }
    }
    if quoted {
        return Err("a quoted field is not closed (missing '\"')".into());
    }
    fields.push(cur.trim().to_string());
    Ok(fields)
}

struct Layout {
    sep: char,
    columns: Vec<Column>,
    names: Vec<String>,
    temperature: usize,
    stress: usize,
    value: usize,
    heat: Option<usize>,
    specimen: Option<usize>,
}

fn parse_header(file: &str, line_no: usize, line: &str, kind: Kind) -> Result<(Layout, Vec<String>), FitError> {
    let line = line.trim_start_matches('\u{feff}');
    let sep = if !line.contains(',') && line.contains(';') {
        ';'
    } else if !line.contains(',') && line.contains('\t') {
        '\t'
    } else {
        ','
    };
    let names = split_fields(line, sep).map_err(|m| FitError::input(file, line_no, format!("header: {m}")))?;
    let mut columns = Vec::with_capacity(names.len());
    let mut notes = Vec::new();
    let (mut temperature, mut stress, mut rupture, mut rate, mut heat, mut specimen) =
        (None, None, None, None, None, None);
    for (i, raw) in names.iter().enumerate() {
        let name = raw.to_ascii_lowercase();
        if name.is_empty() {
            return Err(FitError::input(file, line_no, format!("header: column {} has no name", i + 1)));
        }
        let col = classify(&name).map_err(|m| FitError::input(file, line_no, format!("header: {m}")))?;
        let slot = match col {
            Column::Temperature(_) => Some((&mut temperature, "temperature")),
            Column::Stress(_) => Some((&mut stress, "stress")),
            Column::RuptureH => Some((&mut rupture, "rupture time")),
            Column::Rate(_) => Some((&mut rate, "creep rate")),
            Column::Heat => Some((&mut heat, "heat")),
            Column::Specimen => Some((&mut specimen, "specimen")),
            Column::Ignored => None,
        };
        match slot {
            Some((slot, what)) => {
                if let Some(j) = *slot {
                    return Err(FitError::input(
                        file,
                        line_no,
                        format!("header: two {what} columns ({:?} and {:?}); keep one", names[j], raw),
                    ));
                }
                *slot = Some(i);
            }
            None => notes.push(format!("column {raw:?} (header line {line_no}) is not used by the fit")),
        }
        columns.push(col);
    }
    let missing = |what: &str, choices: &str| {
        FitError::input(file, line_no, format!("header has no {what} column; add one of {choices}"))
    };
    let temperature =
        temperature.ok_or_else(|| missing("temperature", "temperature_c, temperature_k, temperature_f"))?;
    let stress = stress.ok_or_else(|| missing("stress", "stress_mpa, stress_ksi, stress_psi"))?;
    let value = match kind {
        Kind::Rupture => {
            if let Some(j) = rate {
                notes.push(format!("column {:?} (creep rate) is not used by the Larson-Miller fit", names[j]));
            }
            rupture.ok_or_else(|| {
                let hint = if rate.is_some() {
                    " (this looks like a creep-rate file: use `lifeledger fit norton`)"
                } else {
                    ""
                };
                FitError::input(
                    file,
                    line_no,
                    format!("header has no rupture-time column; add rupture_h (hours){hint}"),
                )
            })?
        }
        Kind::Rate => {
            if let Some(j) = rupture {
                notes.push(format!("column {:?} (rupture time) is not used by the Norton fit", names[j]));
            }
            rate.ok_or_else(|| {
                let hint = if rupture.is_some() {
                    " (this looks like a rupture file: use `lifeledger fit larson-miller`)"
                } else {
                    ""
                };
                FitError::input(
                    file,
                    line_no,
                    format!(
                        "header has no creep-rate column; add one of rate_per_h, rate_per_s, rate_percent_per_h{hint}"
                    ),
                )
            })?
        }
    };
    Ok((Layout { sep, columns, names, temperature, stress, value, heat, specimen }, notes))
}

struct Row {
    line: usize,
    temperature_k: f64,
    stress_mpa: f64,
    value: f64,
    heat: Option<String>,
    specimen: Option<String>,
}

fn parse_number(file: &str, line: usize, name: &str, field: &str) -> Result<f64, FitError> {
    if field.is_empty() {
        return Err(FitError::input(file, line, format!("{name} is empty")));
    }
    match field.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(FitError::input(file, line, format!("{name} = {field:?} is not a finite number"))),
        Err(_) => Err(FitError::input(file, line, format!("{name} = {field:?} is not a number"))),
    }
}

/// Rows, column names as written, notes.
type Parsed = (Vec<Row>, Vec<String>, Vec<String>);

fn parse_rows(text: &str, file: &str, kind: Kind) -> Result<Parsed, FitError> {
    let mut lines = text.lines().enumerate().map(|(i, l)| (i + 1, l));
    let is_skip = |l: &str| {
        let t = l.trim();
        t.is_empty() || t.starts_with('#')
    };
    let (header_line, header) = loop {
        match lines.next() {
            Some((_, l)) if is_skip(l) => continue,
            Some((n, l)) => break (n, l),
            None => {
                return Err(FitError::input(
                    file,
                    1,
                    "the file is empty; expected a header line such as `temperature_c,stress_mpa,rupture_h,heat`",
                ))
            }
        }
    };
    let (layout, mut notes) = parse_header(file, header_line, header, kind)?;
    let value_name = layout.names[layout.value].clone();
    let mut rows = Vec::new();
    let mut low_kelvin_lines = Vec::new();
    for (n, l) in lines {
        if is_skip(l) {
            continue;
        }
        let fields = split_fields(l, layout.sep).map_err(|m| FitError::input(file, n, m))?;
        if fields.len() != layout.columns.len() {
            return Err(FitError::input(
                file,
                n,
                format!(
                    "{} fields, but the header (line {header_line}) has {} columns",
                    fields.len(),
                    layout.columns.len()
                ),
            ));
        }
        let t_name = &layout.names[layout.temperature];
        let t_raw = parse_number(file, n, t_name, &fields[layout.temperature])?;
        let Column::Temperature(t_unit) = layout.columns[layout.temperature] else {
            unreachable!("temperature index points at a temperature column")
        };
        let temperature_k = t_unit.to_kelvin(t_raw);
        if temperature_k <= 0.0 {
            return Err(FitError::input(
                file,
                n,
                format!("{t_name} = {t_raw} is at or below absolute zero ({temperature_k:.2} K)"),
            ));
        }
        if t_unit == TemperatureUnit::Kelvin && temperature_k < 250.0 {
            low_kelvin_lines.push(n);
        }
        let s_name = &layout.names[layout.stress];
        let s_raw = parse_number(file, n, s_name, &fields[layout.stress])?;
        if s_raw <= 0.0 {
            return Err(FitError::input(file, n, format!("{s_name} = {s_raw} must be positive")));
        }
        let Column::Stress(s_factor) = layout.columns[layout.stress] else {
            unreachable!("stress index points at a stress column")
        };
        let v_raw = parse_number(file, n, &value_name, &fields[layout.value])?;
        if v_raw <= 0.0 {
            let why = match kind {
                Kind::Rupture => "rupture times must be positive (a log10 of time is fitted)",
                Kind::Rate => "creep rates must be positive (a log of the rate is fitted)",
            };
            return Err(FitError::input(file, n, format!("{value_name} = {v_raw}: {why}")));
        }
        let v_factor = match layout.columns[layout.value] {
            Column::Rate(f) => f,
            _ => 1.0,
        };
        let text_field = |i: Option<usize>| i.map(|i| fields[i].clone()).filter(|s| !s.is_empty());
        rows.push(Row {
            line: n,
            temperature_k,
            stress_mpa: s_raw * s_factor,
            value: v_raw * v_factor,
            heat: text_field(layout.heat),
            specimen: text_field(layout.specimen),
        });
    }
    if rows.is_empty() {
        return Err(FitError::NoData { file: file.to_string(), header_line });
    }
    if !low_kelvin_lines.is_empty() {
        notes.push(format!(
            "temperatures below 250 K on line(s) {}: is the column really in kelvin (temperature_k)?",
            super::error::line_list(&low_kelvin_lines)
        ));
    }
    Ok((rows, layout.names, notes))
}

/// Read a creep-rupture test file (`temperature_*`, `stress_*`,
/// `rupture_h`, optional `heat`, `specimen`). `file` names the input in
/// error messages.
pub fn parse_rupture_tests(text: &str, file: &str) -> Result<TestFile<RuptureTest>, FitError> {
    let (rows, columns, notes) = parse_rows(text, file, Kind::Rupture)?;
    let tests = rows
        .into_iter()
        .map(|r| RuptureTest {
            line: r.line,
            temperature_k: r.temperature_k,
            stress_mpa: r.stress_mpa,
            rupture_h: r.value,
            heat: r.heat,
            specimen: r.specimen,
        })
        .collect();
    let units = super::units::InputUnits::from_columns(&columns);
    Ok(TestFile { tests, columns, notes, units })
}

/// Read a minimum-creep-rate test file (`temperature_*`, `stress_*`,
/// `rate_per_h` / `rate_per_s` / `rate_percent_per_h`, optional `heat`,
/// `specimen`). `file` names the input in error messages.
pub fn parse_rate_tests(text: &str, file: &str) -> Result<TestFile<RateTest>, FitError> {
    let (rows, columns, notes) = parse_rows(text, file, Kind::Rate)?;
    let tests = rows
        .into_iter()
        .map(|r| RateTest {
            line: r.line,
            temperature_k: r.temperature_k,
            stress_mpa: r.stress_mpa,
            rate_per_h: r.value,
            heat: r.heat,
            specimen: r.specimen,
        })
        .collect();
    let units = super::units::InputUnits::from_columns(&columns);
    Ok(TestFile { tests, columns, notes, units })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn err(text: &str) -> String {
        parse_rupture_tests(text, "t.csv").unwrap_err().to_string()
    }

    #[test]
    fn reads_units_and_comments() {
        let text = "# comment\n\nTemperature_F,stress_ksi,rupture_h,heat,notes\n1022,10,1000,\"A, 1\",x\n";
        let f = parse_rupture_tests(text, "t.csv").unwrap();
        let t = &f.tests[0];
        assert_eq!(t.line, 4);
        // 1022 °F = 550 °C = 823.15 K (exact by the definitions).
        assert!((t.temperature_k - 823.15).abs() < 1e-9);
        assert!((t.stress_mpa - 68.94757).abs() < 1e-9);
        assert_eq!(t.heat.as_deref(), Some("A, 1"));
        assert_eq!(f.notes.len(), 1);
    }

    #[test]
    fn rate_units() {
        let f = parse_rate_tests("temperature_k;stress_mpa;rate_per_s\n900;100;1e-8\n", "r.csv").unwrap();
        assert!((f.tests[0].rate_per_h - 3.6e-5).abs() < 1e-18);
        let f = parse_rate_tests("temperature_c,stress_mpa,rate_percent_per_h\n600,100,0.002\n", "r.csv").unwrap();
        assert!((f.tests[0].rate_per_h - 2e-5).abs() < 1e-18);
    }

    #[test]
    fn errors_name_lines() {
        assert!(err("temperature_c,stress_bar,rupture_h\n")
            .contains("line 1: header: column \"stress_bar\": unknown stress unit"));
        assert!(err("temperature_c,stress_mpa\n600,100\n").contains("line 1: header has no rupture-time column"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n600,100,10\n600,-1,10\n")
            .contains("line 3: stress_mpa = -1 must be positive"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n600,100,0\n").contains("line 2: rupture_h = 0"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n600,abc,10\n")
            .contains("line 2: stress_mpa = \"abc\" is not a number"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n600,100\n")
            .contains("line 2: 2 fields, but the header (line 1) has 3 columns"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n-300,100,10\n").contains("below absolute zero"));
        assert!(err("temperature_c,temperature_k,stress_mpa,rupture_h\n").contains("two temperature columns"));
        assert!(err("temperature_c,stress_mpa,rupture_h\n# only a comment\n").contains("no test data"));
        assert!(err("").contains("line 1: the file is empty"));
        assert!(err("temperature_c,stress_mpa,rate_per_h\n").contains("fit norton"));
    }
}
