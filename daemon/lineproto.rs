//! InfluxDB line protocol encoding, shared by `replay --write-lp` and the
//! database sink so both write exactly the same points.
//!
//! `measurement,tag=value field=1.5,other="text" 1700000000000000000`
//! Escaping follows the InfluxDB v2 line protocol reference: measurement
//! names escape commas and spaces; tag keys, tag values and field keys
//! escape commas, equals signs and spaces; string field values escape
//! double quotes and backslashes. Backslashes are escaped everywhere: the
//! reference reads two contiguous backslashes as one, and an unescaped
//! backslash at the end of a name would escape the comma or space after
//! it (a component `C4\` would swallow the next tag). Names cannot carry
//! control characters (configuration validation refuses them); a newline
//! is written as `\n` as a last guard. Non-finite floats cannot be
//! written and are left out of the point.

use std::fmt::Write;

/// A field value.
#[derive(Debug, Clone, PartialEq)]
pub enum FieldValue {
    Float(f64),
    Int(i64),
    Bool(bool),
    Str(String),
}

/// One point.
#[derive(Debug, Clone, PartialEq)]
pub struct Point {
    pub measurement: String,
    pub tags: Vec<(String, String)>,
    pub fields: Vec<(String, FieldValue)>,
    /// Event time, nanoseconds since the Unix epoch.
    pub time_ns: i64,
}

fn escape(out: &mut String, s: &str, specials: &[char]) {
    for c in s.chars() {
        if c == '\\' || specials.contains(&c) {
            out.push('\\');
        }
        match c {
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            _ => out.push(c),
        }
    }
}

impl Point {
    /// A point with no tags or fields yet.
    pub fn new(measurement: &str, time_ns: i64) -> Point {
        Point { measurement: measurement.into(), tags: vec![], fields: vec![], time_ns }
    }

    /// Add a tag (empty values are skipped: line protocol forbids them).
    pub fn tag(mut self, k: &str, v: &str) -> Point {
        if !v.is_empty() {
            self.tags.push((k.into(), v.into()));
        }
        self
    }

    /// Add a float field (non-finite values are skipped).
    pub fn float(mut self, k: &str, v: f64) -> Point {
        if v.is_finite() {
            self.fields.push((k.into(), FieldValue::Float(v)));
        }
        self
    }

    /// Add an integer field.
    pub fn int(mut self, k: &str, v: i64) -> Point {
        self.fields.push((k.into(), FieldValue::Int(v)));
        self
    }

    /// Add a boolean field.
    pub fn boolean(mut self, k: &str, v: bool) -> Point {
        self.fields.push((k.into(), FieldValue::Bool(v)));
        self
    }

    /// Add a string field.
    pub fn string(mut self, k: &str, v: &str) -> Point {
        self.fields.push((k.into(), FieldValue::Str(v.into())));
        self
    }

    /// Encode as one line (no trailing newline). `None` if it has no field.
    pub fn to_line(&self) -> Option<String> {
        if self.fields.is_empty() {
            return None;
        }
        let mut out = String::with_capacity(160);
        escape(&mut out, &self.measurement, &[',', ' ']);
        let mut tags: Vec<&(String, String)> = self.tags.iter().collect();
        // Sorted tags are what the database prefers (and are deterministic).
        tags.sort_by(|a, b| a.0.cmp(&b.0));
        for (k, v) in tags {
            out.push(',');
            escape(&mut out, k, &[',', '=', ' ']);
            out.push('=');
            escape(&mut out, v, &[',', '=', ' ']);
        }
        out.push(' ');
        for (i, (k, v)) in self.fields.iter().enumerate() {
            if i > 0 {
                out.push(',');
            }
            escape(&mut out, k, &[',', '=', ' ']);
            out.push('=');
            match v {
                FieldValue::Float(x) => {
                    let _ = write!(out, "{x:?}");
                }
                FieldValue::Int(x) => {
                    let _ = write!(out, "{x}i");
                }
                FieldValue::Bool(b) => out.push_str(if *b { "true" } else { "false" }),
                FieldValue::Str(s) => {
                    out.push('"');
                    for c in s.chars() {
                        if c == '"' || c == '\\' {
                            out.push('\\');
                        }
                        out.push(c);
                    }
                    out.push('"');
                }
            }
        }
        let _ = write!(out, " {}", self.time_ns);
        Some(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Examples after the InfluxDB v2 line protocol reference ("Special
    // characters" section).
    #[test]
    fn escaping() {
        let p = Point::new("my measurement", 1)
            .tag("tag key", "tag,value=x")
            .string("msg", "say \"hi\" \\ bye")
            .float("x", 1.5)
            .int("n", 3)
            .boolean("ok", true);
        assert_eq!(
            p.to_line().unwrap(),
            r#"my\ measurement,tag\ key=tag\,value\=x msg="say \"hi\" \\ bye",x=1.5,n=3i,ok=true 1"#
        );
    }

    #[test]
    fn backslashes_are_escaped_in_names() {
        // Two contiguous backslashes read as one (InfluxDB v2 line protocol
        // reference, "Special characters"); checked against a real
        // database in tests/sink_victoria.rs.
        let p = Point::new("m", 1).tag("component", "C4\\").tag("plant", "P").float("v", 1.0);
        assert_eq!(p.to_line().unwrap(), r"m,component=C4\\,plant=P v=1.0 1");
    }

    #[test]
    fn floats_round_trip_and_non_finite_are_dropped() {
        let p = Point::new("m", 0).float("a", 1e-7).float("b", f64::NAN).float("c", 123456789.125);
        let l = p.to_line().unwrap();
        assert_eq!(l, "m a=1e-7,c=123456789.125 0");
        assert!(Point::new("m", 0).float("x", f64::INFINITY).to_line().is_none());
    }
}
