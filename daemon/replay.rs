//! Historian backfill: stream a long-format CSV (`timestamp,tag,value[,quality]`)
//! through the same engine the live service runs.
//!
//! Timestamps are RFC 3339 (`2026-10-01T00:00:00Z`, fractions and offsets
//! allowed) or epoch seconds. Files may be gzip-compressed (detected by
//! their magic bytes). A malformed row is counted and reported with its
//! line number; it never stops the replay. Rows for tags that are not in
//! the configuration are counted per tag.
//!
//! Beside the end state a replay can give the component series (line
//! protocol, and CSV through [`series_csv`]) at a fixed spacing of event
//! time, and the [`timeline`] of when each alarm level was first crossed.

pub mod series_csv;
pub mod timeline;

use crate::engine::tags::{parse_quality, tag_index};
use crate::engine::{Engine, Quality, Sample};
use crate::event_time::parse_timestamp_ms;
use crate::report::component_point;
use std::collections::BTreeMap;
use std::io::{self, BufRead, BufReader, Read, Write};

/// How many malformed rows are kept as examples in the outcome.
pub const MALFORMED_EXAMPLES: usize = 20;

/// A row that could not be read.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MalformedRow {
    pub line: u64,
    pub problem: String,
}

/// What a replay did.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct ReplayOutcome {
    pub rows: u64,
    pub malformed: u64,
    pub malformed_examples: Vec<MalformedRow>,
    pub unknown_tags: BTreeMap<String, u64>,
    pub first_time_ms: Option<i64>,
    pub last_time_ms: Option<i64>,
    pub points_written: u64,
    /// Rows written to the CSV series.
    pub csv_rows: u64,
    /// The first rows rejected for an implausible event time.
    pub implausible_examples: Vec<MalformedRow>,
}

/// Options of a replay.
#[derive(Debug, Clone)]
pub struct ReplayOptions {
    /// Event-time spacing of the component series written as line protocol.
    pub lp_interval_ms: i64,
    /// Wall-clock time of the replay, ms: rows stamped further ahead of it
    /// than the plan's margin are rejected as implausible, as live.
    pub now_ms: i64,
}

impl Default for ReplayOptions {
    fn default() -> Self {
        ReplayOptions { lp_interval_ms: 600_000, now_ms: chrono::Utc::now().timestamp_millis() }
    }
}

/// One parsed CSV row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Row<'a> {
    pub time_ms: i64,
    pub tag: &'a str,
    pub value: f64,
    pub quality: Quality,
}

/// Trim ASCII blanks only when there are any (the common row has none).
#[inline]
fn trim(s: &str) -> &str {
    let b = s.as_bytes();
    if b.first().is_some_and(|c| c.is_ascii_whitespace()) || b.last().is_some_and(|c| c.is_ascii_whitespace()) {
        s.trim()
    } else {
        s
    }
}

/// Parse one data row (without the line ending).
pub fn parse_row(line: &str) -> Result<Row<'_>, String> {
    // One pass over the bytes for the (at most three) commas.
    let b = line.as_bytes();
    let mut cut = [b.len(); 3];
    let mut n = 0;
    for (i, &c) in b.iter().enumerate() {
        if c == b',' {
            if n == 3 {
                return Err("more than four fields".into());
            }
            cut[n] = i;
            n += 1;
        }
    }
    if n == 0 {
        return Err("missing tag and value fields".into());
    }
    if n == 1 {
        return Err("missing value field".into());
    }
    let ts = &line[..cut[0]];
    let tag = &line[cut[0] + 1..cut[1]];
    let value = &line[cut[1] + 1..cut[2]];
    let quality = if n == 3 { &line[cut[2] + 1..] } else { "" };
    let time_ms = parse_timestamp_ms(trim(ts))
        .ok_or_else(|| format!("timestamp {ts:?} is neither RFC 3339 nor epoch seconds or milliseconds"))?;
    let tag = trim(tag);
    if tag.is_empty() {
        return Err("empty tag".into());
    }
    let v = trim(value);
    let value: f64 = v.parse().map_err(|_| format!("value {v:?} is not a number"))?;
    let quality = parse_quality(quality).ok_or_else(|| format!("quality {quality:?} is not good, uncertain or bad"))?;
    Ok(Row { time_ms, tag, value, quality })
}

/// Open a file, or standard input for `-`, decompressing gzip.
pub fn open_input(
    path: &str,
    counter: Option<std::sync::Arc<std::sync::atomic::AtomicU64>>,
) -> io::Result<Box<dyn BufRead>> {
    let raw: Box<dyn Read> = if path == "-" { Box::new(io::stdin()) } else { Box::new(std::fs::File::open(path)?) };
    let raw: Box<dyn Read> = match counter {
        Some(c) => Box::new(CountingReader { inner: raw, count: c }),
        None => raw,
    };
    let mut br = BufReader::with_capacity(1 << 16, raw);
    let gz = br.fill_buf()?.starts_with(&[0x1f, 0x8b]);
    if gz {
        Ok(Box::new(BufReader::with_capacity(1 << 16, flate2::bufread::MultiGzDecoder::new(br))))
    } else {
        Ok(Box::new(br))
    }
}

struct CountingReader {
    inner: Box<dyn Read>,
    count: std::sync::Arc<std::sync::atomic::AtomicU64>,
}

impl Read for CountingReader {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.count.fetch_add(n as u64, std::sync::atomic::Ordering::Relaxed);
        Ok(n)
    }
}

/// Stream rows from `input` through `engine`. Component series are written
/// to `lp` (line protocol) every `lp_interval_ms` of event time.
/// `tick` is called every 65 536 rows (for progress display).
pub fn replay(
    engine: &mut Engine,
    input: impl BufRead,
    lp: Option<&mut dyn Write>,
    opts: &ReplayOptions,
    tick: impl FnMut(u64),
) -> io::Result<ReplayOutcome> {
    replay_to(engine, input, Outputs { lp, ..Outputs::default() }, opts, tick)
}

/// What a replay writes besides its outcome.
#[derive(Default)]
pub struct Outputs<'a> {
    /// Component series as line protocol.
    pub lp: Option<&'a mut dyn Write>,
    /// The same series as CSV ([`series_csv`]).
    pub csv: Option<&'a mut dyn Write>,
    /// First level crossings, observed after every step of the engine.
    pub timeline: Option<&'a mut timeline::Timeline>,
    /// Daily history points (`history_day`): one for each part at the
    /// first step of each UTC day of event time it reaches (a backfill's
    /// years of history); the caller adds the final state.
    pub history: Option<&'a mut Vec<(String, crate::store::inspection::HistoryPoint)>>,
}

/// [`replay`] with every output: line protocol, CSV and the timeline.
pub fn replay_to(
    engine: &mut Engine,
    mut input: impl BufRead,
    outputs: Outputs<'_>,
    opts: &ReplayOptions,
    mut tick: impl FnMut(u64),
) -> io::Result<ReplayOutcome> {
    let Outputs { lp, csv, timeline, history } = outputs;
    let mut csv = csv.map(series_csv::CsvSeries::new);
    let history_day = engine.components().iter().map(|s| s.integrated_to_ms.map(crate::event_time::utc_day)).collect();
    let mut series = Series { lp, csv: csv.as_mut(), timeline, history, history_day };
    let index = tag_index(engine);
    let mut out = ReplayOutcome::default();
    let mut line = String::with_capacity(128);
    let mut lineno = 0u64;
    let ncomp = engine.components().len();
    let mut next_lp: Vec<i64> = vec![i64::MIN; ncomp];
    let plant = engine.plan().plant.clone();
    let interval = opts.lp_interval_ms.max(1);
    let mut touched = Vec::new();
    loop {
        line.clear();
        let n = match input.read_line(&mut line) {
            Ok(n) => n,
            Err(e) if e.kind() == io::ErrorKind::InvalidData => {
                // Not UTF-8: count it and skip to the next line.
                lineno += 1;
                out.malformed += 1;
                if out.malformed_examples.len() < MALFORMED_EXAMPLES {
                    out.malformed_examples.push(MalformedRow { line: lineno, problem: "not valid UTF-8".into() });
                }
                let mut skip = Vec::new();
                input.read_until(b'\n', &mut skip)?;
                continue;
            }
            Err(e) => return Err(e),
        };
        if n == 0 {
            break;
        }
        lineno += 1;
        let mut l = line.as_str();
        while let Some(stripped) = l.strip_suffix('\n').or_else(|| l.strip_suffix('\r')) {
            l = stripped;
        }
        if l.is_empty() || l.starts_with('#') || (lineno == 1 && l.starts_with("timestamp")) {
            continue;
        }
        out.rows += 1;
        if out.rows & 0xFFFF == 0 {
            tick(out.rows);
        }
        let row = match parse_row(l) {
            Ok(r) => r,
            Err(problem) => {
                out.malformed += 1;
                if out.malformed_examples.len() < MALFORMED_EXAMPLES {
                    out.malformed_examples.push(MalformedRow { line: lineno, problem });
                }
                continue;
            }
        };
        let Some(&tag) = index.get(row.tag) else {
            engine.count_unknown_tag();
            *out.unknown_tags.entry(row.tag.to_string()).or_insert(0) += 1;
            continue;
        };
        let r =
            engine.offer(&Sample { tag, time_ms: row.time_ms, value: row.value, quality: row.quality }, opts.now_ms);
        if r != Err(crate::engine::Rejection::ImplausibleTime) {
            out.first_time_ms = Some(out.first_time_ms.map_or(row.time_ms, |t| t.min(row.time_ms)));
            out.last_time_ms = Some(out.last_time_ms.map_or(row.time_ms, |t| t.max(row.time_ms)));
        } else if out.implausible_examples.len() < MALFORMED_EXAMPLES {
            out.implausible_examples.push(MalformedRow {
                line: lineno,
                problem: format!(
                    "{} stamped {}: outside the plausible event times (earliest {}, at most {} s ahead of the clock)",
                    row.tag,
                    crate::event_time::rfc3339_ms(row.time_ms),
                    crate::event_time::rfc3339_ms(engine.plan().earliest_plausible_ms),
                    engine.plan().future_margin_ms / 1000
                ),
            });
        }
        if series.wanted() {
            series.write(engine, &plant, &mut next_lp, interval, &mut touched, &mut out)?;
        }
    }
    // The end of the input: integrate what the reorder window still holds.
    engine.flush();
    if series.wanted() {
        series.write(engine, &plant, &mut next_lp, interval, &mut touched, &mut out)?;
    }
    // The timeline sees every part's final state (observations in between
    // are spaced in event time).
    if let Some(tl) = series.timeline.as_deref_mut() {
        for (ci, (plan, st)) in engine.plan().components.iter().zip(engine.components()).enumerate() {
            tl.observe(ci, plan, st, true);
        }
    }
    if let Some(c) = series.csv.as_mut() {
        c.finish()?;
    }
    tick(out.rows);
    Ok(out)
}

/// The per-step outputs of a replay.
struct Series<'a, 'b> {
    lp: Option<&'a mut dyn Write>,
    csv: Option<&'b mut series_csv::CsvSeries<'a>>,
    timeline: Option<&'a mut timeline::Timeline>,
    history: Option<&'a mut Vec<(String, crate::store::inspection::HistoryPoint)>>,
    /// UTC day of each part's last history point.
    history_day: Vec<Option<i64>>,
}

impl Series<'_, '_> {
    fn wanted(&self) -> bool {
        self.lp.is_some() || self.csv.is_some() || self.timeline.is_some() || self.history.is_some()
    }

    /// Write a `component_state` point (line protocol with its threshold
    /// lines, and a CSV row) for every component advanced since the last
    /// call whose integration passed its next series instant, and show
    /// each advanced component to the timeline.
    fn write(
        &mut self,
        engine: &mut Engine,
        plant: &str,
        next_lp: &mut [i64],
        interval: i64,
        touched: &mut Vec<u32>,
        out: &mut ReplayOutcome,
    ) -> io::Result<()> {
        engine.drain_touched(touched);
        for &ci in touched.iter() {
            let ci = ci as usize;
            let st = &engine.components()[ci];
            let plan = &engine.plan().components[ci];
            if let Some(tl) = self.timeline.as_deref_mut() {
                tl.observe(ci, plan, st, false);
            }
            if let (Some(h), Some(t)) = (self.history.as_deref_mut(), st.integrated_to_ms) {
                let day = crate::event_time::utc_day(t);
                if self.history_day[ci] != Some(day) {
                    self.history_day[ci] = Some(day);
                    h.extend(crate::inspection::history_points(engine, &[ci]));
                }
            }
            if self.lp.is_none() && self.csv.is_none() {
                continue;
            }
            let next = &mut next_lp[ci];
            let Some(t) = st.integrated_to_ms else { continue };
            // No point before anything is known (the first sample alone gives
            // no conditions: 0 K, 0 MPa); the live service keeps the same rule.
            if t >= *next && crate::report::conditions_known(plan, st) {
                let p = component_point(plant, plan, st, t);
                if let Some(w) = self.lp.as_deref_mut() {
                    if let Some(line) = p.to_line() {
                        writeln!(w, "{line}")?;
                        out.points_written += 1;
                    }
                    // Threshold lines beside the series, as the live service writes them.
                    for tp in crate::report::threshold_points(plant, plan, t) {
                        if let Some(line) = tp.to_line() {
                            writeln!(w, "{line}")?;
                        }
                    }
                }
                if let Some(c) = self.csv.as_deref_mut() {
                    if !p.fields.is_empty() {
                        c.write(&p)?;
                        out.csv_rows += 1;
                    }
                }
                *next = (t.div_euclid(interval) + 1) * interval;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows() {
        let r = parse_row("2026-10-01T00:00:00Z,U2.TE-1,540.5,good").unwrap();
        assert_eq!((r.tag, r.value, r.quality), ("U2.TE-1", 540.5, Quality::Good));
        assert_eq!(parse_row("1790812800,T,1").unwrap().quality, Quality::Good);
        assert!(parse_row("2026-10-01T00:00:00Z,T,abc").unwrap_err().contains("not a number"));
        assert!(parse_row("2026-10-01T00:00:00Z,T").unwrap_err().contains("missing value"));
        assert!(parse_row("nonsense,T,1").unwrap_err().contains("timestamp"));
        assert!(parse_row("1,T,1,maybe").unwrap_err().contains("quality"));
    }
}
