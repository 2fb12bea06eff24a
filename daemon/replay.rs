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

use crate::engine::tags::{parse_quality, tag_bytes_index};
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

/// One parsed CSV row (the tag as text, or as bytes inside the reader).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Row<'a, Tag: ?Sized = str> {
    pub time_ms: i64,
    pub tag: &'a Tag,
    pub value: f64,
    pub quality: Quality,
}

/// Trim ASCII blanks only when there are any (the common row has none).
#[inline]
fn trim(s: &[u8]) -> &[u8] {
    if s.first().is_some_and(|c| c.is_ascii_whitespace()) || s.last().is_some_and(|c| c.is_ascii_whitespace()) {
        s.trim_ascii()
    } else {
        s
    }
}

/// Powers of ten exactly representable as `f64` (10^0 … 10^22).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
    1e21, 1e22,
];

/// A plain decimal (`-12.50`, `540`, `0.001`) read exactly as
/// `str::parse::<f64>` reads it, without its general machinery: with at
/// most 15 significant digits the digits form an integer m < 2^53 and the
/// scale 10^k (k ≤ 22) is exact, so m / 10^k is one correctly rounded IEEE
/// division, the correctly rounded value of the text (W. D. Clinger, "How
/// to read floating point numbers accurately", PLDI 1990: the fast path).
/// Anything else (exponents, more digits, `inf`, blanks) is `None` and goes
/// to `str::parse`.
#[inline]
fn plain_decimal(b: &[u8]) -> Option<f64> {
    let (neg, digits) = match b.first()? {
        b'-' => (true, &b[1..]),
        b'+' => (false, &b[1..]),
        _ => (false, b),
    };
    let mut m: u64 = 0;
    let mut n = 0usize;
    let mut frac: Option<usize> = None;
    for (i, &c) in digits.iter().enumerate() {
        match c {
            b'0'..=b'9' => {
                m = m * 10 + (c - b'0') as u64;
                n += 1;
            }
            b'.' if frac.is_none() => frac = Some(i),
            _ => return None,
        }
    }
    if n == 0 || n > 15 {
        return None;
    }
    let k = frac.map_or(0, |f| digits.len() - f - 1);
    let v = m as f64 / POW10[k];
    Some(if neg { -v } else { v })
}

/// A field as text, or the row's problem if it is not UTF-8.
#[inline]
fn text(b: &[u8]) -> Result<&str, String> {
    std::str::from_utf8(b).map_err(|_| "not valid UTF-8".to_string())
}

/// Parses data rows, remembering the last timestamp text: a historian
/// export writes every tag of a scan with the same timestamp, so most rows
/// repeat the previous row's.
#[derive(Debug, Default)]
pub struct RowParser {
    last_ts: Vec<u8>,
    last_ms: i64,
}

impl RowParser {
    /// Parse one data row (without the line ending).
    pub fn parse<'a>(&mut self, line: &'a [u8]) -> Result<Row<'a>, String> {
        // One pass over the bytes for the (at most three) commas.
        let mut cut = [line.len(); 3];
        let mut n = 0;
        for (i, &c) in line.iter().enumerate() {
            if c == b',' {
                if n == 3 {
                    return Err("more than four fields".into());
                }
                cut[n] = i;
                n += 1;
            }
        }
        self.fields(line, cut, n)
    }

    /// [`RowParser::parse`] with the commas already found (`cut`, `n` of them).
    #[inline]
    fn fields<'a>(&mut self, b: &'a [u8], cut: [usize; 3], n: usize) -> Result<Row<'a>, String> {
        let r = self.raw_fields(b, cut, n)?;
        Ok(Row { time_ms: r.time_ms, tag: text(r.tag)?, value: r.value, quality: r.quality })
    }

    /// [`RowParser::fields`] with the tag left as bytes.
    #[inline]
    fn raw_fields<'a>(&mut self, b: &'a [u8], cut: [usize; 3], n: usize) -> Result<Row<'a, [u8]>, String> {
        if n == 0 {
            return Err("missing tag and value fields".into());
        }
        if n == 1 {
            return Err("missing value field".into());
        }
        let ts = trim(&b[..cut[0]]);
        let tag = trim(&b[cut[0] + 1..cut[1]]);
        let value = trim(&b[cut[1] + 1..cut[2]]);
        let quality = if n == 3 { &b[cut[2] + 1..] } else { &[][..] };
        let time_ms = if !ts.is_empty() && ts == self.last_ts.as_slice() {
            self.last_ms
        } else {
            let t = text(ts)?;
            let ms = parse_timestamp_ms(t)
                .ok_or_else(|| format!("timestamp {t:?} is neither RFC 3339 nor epoch seconds or milliseconds"))?;
            self.last_ts.clear();
            self.last_ts.extend_from_slice(ts);
            self.last_ms = ms;
            ms
        };
        if tag.is_empty() {
            return Err("empty tag".into());
        }
        let value = match plain_decimal(value) {
            Some(v) => v,
            None => {
                let v = text(value)?;
                v.parse().map_err(|_| format!("value {v:?} is not a number"))?
            }
        };
        let quality = match quality {
            b"" | b"good" => Quality::Good,
            q => {
                let q = text(q)?;
                parse_quality(q).ok_or_else(|| format!("quality {q:?} is not good, uncertain or bad"))?
            }
        };
        Ok(Row { time_ms, tag, value, quality })
    }
}

/// Parse one data row (without the line ending).
pub fn parse_row(line: &str) -> Result<Row<'_>, String> {
    RowParser::default().parse(line.as_bytes())
}

/// Calls `f` with each line of `input` (without its `\n`) and the
/// positions of its first three commas, in one pass over the bytes. A line
/// that lies whole in the reader's buffer is not copied; one split across
/// two fills is gathered first. `f` answers whether to go on.
fn for_each_line<R: BufRead + ?Sized>(
    input: &mut R,
    mut f: impl FnMut(&[u8], [usize; 3], usize) -> io::Result<()>,
) -> io::Result<()> {
    let mut carry: Vec<u8> = Vec::new();
    loop {
        let buf = input.fill_buf()?;
        if buf.is_empty() {
            if !carry.is_empty() {
                let (cut, n) = commas(&carry);
                f(&carry, cut, n)?;
            }
            return Ok(());
        }
        // The commas and the end of the line in one pass; commas and line
        // feeds are both below b'-', so most bytes cost one comparison.
        let mut cut = [usize::MAX; 3];
        let mut n = 0usize;
        let mut end = None;
        for (i, &c) in buf.iter().enumerate() {
            if c <= b',' {
                if c == b'\n' {
                    end = Some(i);
                    break;
                }
                if c == b',' {
                    if n < 3 {
                        cut[n] = i;
                    }
                    n += 1;
                }
            }
        }
        match end {
            Some(i) if carry.is_empty() => {
                let line = &buf[..i];
                for c in cut.iter_mut().skip(n.min(3)) {
                    *c = line.len();
                }
                f(line, cut, n)?;
                input.consume(i + 1);
            }
            Some(i) => {
                carry.extend_from_slice(&buf[..i]);
                input.consume(i + 1);
                let (cut, n) = commas(&carry);
                f(&carry, cut, n)?;
                carry.clear();
            }
            None => {
                let k = buf.len();
                carry.extend_from_slice(buf);
                input.consume(k);
            }
        }
    }
}

/// The first three commas of a line (unset ones at its end) and how many
/// commas it has.
fn commas(line: &[u8]) -> ([usize; 3], usize) {
    let mut cut = [line.len(); 3];
    let mut n = 0;
    for (i, &c) in line.iter().enumerate() {
        if c == b',' {
            if n < 3 {
                cut[n] = i;
            }
            n += 1;
        }
    }
    (cut, n)
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
    let index = tag_bytes_index(engine);
    let mut out = ReplayOutcome::default();
    let mut lineno = 0u64;
    let ncomp = engine.components().len();
    let mut next_lp: Vec<i64> = vec![i64::MIN; ncomp];
    let plant = engine.plan().plant.clone();
    let interval = opts.lp_interval_ms.max(1);
    let mut touched = Vec::new();
    let mut rows = RowParser::default();
    for_each_line(&mut input, |mut l, cut, n| {
        lineno += 1;
        while let Some((b'\r', rest)) = l.split_last() {
            l = rest;
        }
        if l.is_empty() || l[0] == b'#' || (lineno == 1 && l.starts_with(b"timestamp")) {
            return Ok(());
        }
        out.rows += 1;
        if out.rows & 0xFFFF == 0 {
            tick(out.rows);
        }
        let parsed = if n > 3 {
            Err("more than four fields".to_string())
        } else {
            // A stripped `\r` may have been the end of the last field.
            rows.raw_fields(l, cut.map(|c| c.min(l.len())), n)
        };
        let row = match parsed {
            Ok(r) => r,
            Err(problem) => {
                out.malformed += 1;
                if out.malformed_examples.len() < MALFORMED_EXAMPLES {
                    out.malformed_examples.push(MalformedRow { line: lineno, problem });
                }
                return Ok(());
            }
        };
        let Some(&tag) = index.get(row.tag) else {
            let Ok(name) = text(row.tag) else {
                out.malformed += 1;
                if out.malformed_examples.len() < MALFORMED_EXAMPLES {
                    out.malformed_examples.push(MalformedRow { line: lineno, problem: "not valid UTF-8".into() });
                }
                return Ok(());
            };
            engine.count_unknown_tag();
            *out.unknown_tags.entry(name.to_string()).or_insert(0) += 1;
            return Ok(());
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
                    String::from_utf8_lossy(row.tag),
                    crate::event_time::rfc3339_ms(row.time_ms),
                    crate::event_time::rfc3339_ms(engine.plan().earliest_plausible_ms),
                    engine.plan().future_margin_ms / 1000
                ),
            });
        }
        if series.wanted() {
            series.write(engine, &plant, &mut next_lp, interval, &mut touched, &mut out)?;
        }
        Ok(())
    })?;
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
    fn plain_decimals_read_as_the_standard_library_reads_them() {
        // Reference: Rust's own `str::parse::<f64>` (correctly rounded,
        // the general algorithm); the fast path must agree bit for bit.
        let mut x: u64 = 0x2545_f491_4f6c_dd1d;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x
        };
        let mut checked = 0;
        for _ in 0..200_000 {
            let r = next();
            let digits = 1 + (r % 17) as usize;
            let mut s = String::new();
            if r & (1 << 20) != 0 {
                s.push('-');
            }
            let dot = (r >> 24) as usize % (digits + 2);
            for k in 0..digits {
                if k == dot {
                    s.push('.');
                }
                s.push(char::from(b'0' + (next() % 10) as u8));
            }
            let want: f64 = s.parse().unwrap();
            if let Some(got) = plain_decimal(s.as_bytes()) {
                assert_eq!(got.to_bits(), want.to_bits(), "{s}");
                checked += 1;
            }
        }
        assert!(checked > 100_000, "the fast path took only {checked} of 200 000");
        for odd in ["1e3", "inf", "NaN", ".", "-", "", "1.2.3", " 1", "0x10", "1234567890123456"] {
            assert_eq!(plain_decimal(odd.as_bytes()), None, "{odd}");
        }
    }

    #[test]
    fn lines_are_split_alike_whatever_the_buffer() {
        let text = "timestamp,tag,value\r\na,b,c,d,e\n\n2026-10-01T00:00:00Z,T,1\r\r\n#x,y\nlast,line,1";
        let want: Vec<&str> = text.split('\n').collect();
        for cap in [1, 2, 3, 7, 64] {
            let mut r = BufReader::with_capacity(cap, text.as_bytes());
            let mut got = Vec::new();
            for_each_line(&mut r, |l, cut, n| {
                let s = std::str::from_utf8(l).unwrap().to_string();
                let c = commas(l);
                assert_eq!((cut.map(|x| x.min(l.len())), n), c, "commas of {s:?} with a buffer of {cap}");
                got.push(s);
                Ok(())
            })
            .unwrap();
            assert_eq!(got, want, "buffer of {cap} bytes");
        }
    }

    #[test]
    fn a_repeated_timestamp_is_read_once_and_alike() {
        let mut p = RowParser::default();
        let a = p.parse(b"2026-10-01T00:00:00Z,A,1").unwrap().time_ms;
        let b = p.parse(b"2026-10-01T00:00:00Z,B,2").unwrap().time_ms;
        let c = p.parse(b"2026-10-01T00:10:00Z,C,3").unwrap().time_ms;
        assert_eq!((a, b, c - a), (1_790_812_800_000, 1_790_812_800_000, 600_000));
        assert!(p.parse(b"2026-10-01T00:10:00Z,\xff,3").unwrap_err().contains("UTF-8"));
        assert!(p.parse(b"2026-10-01T00:10:00Z,T,\xff").unwrap_err().contains("UTF-8"));
    }

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
