//! The component series as CSV (`replay --write-csv`): one row per
//! `component_state` point, the same points the line-protocol file and the
//! live service's database writes carry (`report::component_point`), so a
//! spreadsheet sees exactly what the database would.
//!
//! Columns: `time` (RFC 3339, UTC, ms), the point's tags (`plant`, `unit`,
//! `component`, `material`), then every field a `component_state` point can
//! have, in [`FIELDS`] order. A field the point leaves out (a wear contact
//! has no metal temperature; conditions not yet known; no projection) is an
//! empty cell. Booleans are `true`/`false`; text is quoted as RFC 4180
//! says (a quote, comma or line break puts the cell in double quotes, and
//! a quote inside is doubled).

use crate::lineproto::{FieldValue, Point};
use std::io::{self, Write};

/// Tag columns, after `time`: the data model's tags of `component_state`.
pub const TAGS: &[&str] = crate::series_model::COMPONENT_STATE.tags;

/// Field columns: the data model's `component_state` fields every writer
/// gives (the live-only attention score is not a replay column).
pub const FIELDS: &[&str] = crate::series_model::COMPONENT_STATE.fields;

/// The header line (no line ending).
pub fn header() -> String {
    let mut cols = vec!["time"];
    cols.extend(TAGS);
    cols.extend(FIELDS);
    cols.join(",")
}

fn cell(out: &mut String, s: &str) {
    if s.contains([',', '"', '\n', '\r']) {
        out.push('"');
        out.push_str(&s.replace('"', "\"\""));
        out.push('"');
    } else {
        out.push_str(s);
    }
}

/// One row for a point (no line ending). A field of the point without a
/// column is an error: the column list must follow `component_point`.
pub fn row(p: &Point) -> io::Result<String> {
    if let Some((k, _)) = p.fields.iter().find(|(k, _)| !FIELDS.contains(&k.as_str())) {
        return Err(io::Error::new(
            io::ErrorKind::InvalidData,
            format!("component_state field {k:?} has no CSV column (series_csv::FIELDS)"),
        ));
    }
    let mut out = crate::event_time::rfc3339_ms(p.time_ns.div_euclid(1_000_000));
    for t in TAGS {
        out.push(',');
        if let Some((_, v)) = p.tags.iter().find(|(k, _)| k == t) {
            cell(&mut out, v);
        }
    }
    for f in FIELDS {
        out.push(',');
        match p.fields.iter().find(|(k, _)| k == f).map(|(_, v)| v) {
            Some(FieldValue::Float(x)) => out.push_str(&format!("{x:?}")),
            Some(FieldValue::Int(x)) => out.push_str(&x.to_string()),
            Some(FieldValue::Bool(b)) => out.push_str(if *b { "true" } else { "false" }),
            Some(FieldValue::Str(s)) => cell(&mut out, s),
            None => {}
        }
    }
    Ok(out)
}

/// Writes the header before the first row.
pub struct CsvSeries<'a> {
    w: &'a mut dyn Write,
    started: bool,
}

impl<'a> CsvSeries<'a> {
    /// A writer over `w`; the header goes out with the first row (or at
    /// [`CsvSeries::finish`] when there is none).
    pub fn new(w: &'a mut dyn Write) -> CsvSeries<'a> {
        CsvSeries { w, started: false }
    }

    /// Write one point as a row.
    pub fn write(&mut self, p: &Point) -> io::Result<()> {
        let r = row(p)?;
        if !self.started {
            writeln!(self.w, "{}", header())?;
            self.started = true;
        }
        writeln!(self.w, "{r}")
    }

    /// Make sure the header is there, even for an empty series.
    pub fn finish(&mut self) -> io::Result<()> {
        if !self.started {
            writeln!(self.w, "{}", header())?;
            self.started = true;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_component_state_field_has_a_column() {
        // The demo plant has creep parts with and without pressure and wear
        // contacts: together every field component_point can write.
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config/demo/plant.toml");
        let cfg = crate::settings::validate::load_plan(&path).unwrap();
        let engine = crate::engine::Engine::new(cfg.plan.clone());
        let mut seen = std::collections::BTreeSet::new();
        for (ci, plan) in engine.plan().components.iter().enumerate() {
            let mut st = engine.components()[ci].clone();
            st.integrated_h = 1.0;
            st.integrated_to_ms = Some(0);
            st.now.metal_temperature_k = 800.0;
            st.now.pressure_mpa = 10.0;
            st.recent_life_fraction_rate_per_h = 1e-6;
            let p = crate::report::component_point("P", plan, &st, 0);
            for (k, _) in &p.fields {
                seen.insert(k.clone());
            }
            assert!(row(&p).is_ok(), "{p:?}");
        }
        for f in FIELDS {
            assert!(seen.contains(*f), "column {f} is never written by component_point");
        }
    }

    #[test]
    fn cells_are_quoted_as_rfc_4180_says() {
        // RFC 4180 section 2, rules 6 and 7.
        let p = Point::new("component_state", 1_000_000).tag("plant", "North, \"B\"").float("unmonitored_h", 0.5);
        let r = row(&p).unwrap();
        assert!(r.starts_with("1970-01-01T00:00:00.001Z,\"North, \"\"B\"\"\",,,,"), "{r}");
        assert!(r.ends_with(",0.5"), "{r}");
        assert_eq!(r.split(',').count(), header().split(',').count() + 1, "one comma inside the quoted plant");
    }
}
