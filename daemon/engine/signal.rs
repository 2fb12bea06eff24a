//! What the engine knows about one tag: its cursor and its last two good
//! samples, and how its values over a piece of an interval are read from
//! them.
//!
//! Between two samples closer than the tag's hold time the value is a
//! straight line (or a step, for report-on-change tags). Past the newest
//! sample the newest value holds for up to the hold time. Anywhere else the
//! tag is in a *gap*: its value is unknown and the gap policy decides.

use super::plan::Interpolation;
use super::plan::TagPlan;
use serde::{Deserialize, Serialize};

/// Cursor and recent samples of one tag, internal units.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct TagState {
    /// Event time (ms) of the newest accepted sample: samples at or before
    /// it are duplicates or late arrivals and are never integrated.
    pub cursor_ms: Option<i64>,
    /// The sample before the newest (time ms, internal value).
    pub prev: Option<(i64, f64)>,
    /// The newest sample.
    pub last: Option<(i64, f64)>,
}

impl TagState {
    /// Accept a new sample (caller has checked it is newer than the cursor).
    #[inline]
    pub fn push(&mut self, time_ms: i64, value: f64) {
        self.prev = self.last;
        self.last = Some((time_ms, value));
        self.cursor_ms = Some(time_ms);
    }

    /// The reading over a piece `[a, b]` with no breakpoint inside (see
    /// [`TagState::breakpoints`]), found with one look-up and at most one
    /// division. Ends that fall on a sample instant carry the sample value
    /// exactly, so one piece's end is bit-identical to the next one's start.
    #[inline(always)]
    pub fn segment(&self, plan: &TagPlan, a: f64, b: f64) -> Segment {
        let Some((t1, v1)) = self.last else { return Segment::Missing };
        let hold = plan.max_hold_ms as f64;
        let t1f = t1 as f64;
        let mid = 0.5 * (a + b);
        if mid >= t1f {
            return if mid - t1f <= hold { Segment::constant(v1) } else { Segment::Gap(v1) };
        }
        match self.prev {
            Some((t0, v0)) if mid >= t0 as f64 => {
                let t0f = t0 as f64;
                if t1f - t0f > hold {
                    // The samples are too far apart to join: hold the older
                    // one for the hold time, then it is a gap.
                    if mid - t0f <= hold {
                        Segment::constant(v0)
                    } else {
                        Segment::Gap(v0)
                    }
                } else {
                    match plan.interpolation {
                        Interpolation::Step => Segment::constant(v0),
                        Interpolation::Linear => {
                            let k = (v1 - v0) / (t1f - t0f);
                            let at = |tau: f64| {
                                if tau == t0f {
                                    v0
                                } else if tau == t1f {
                                    v1
                                } else {
                                    v0 + k * (tau - t0f)
                                }
                            };
                            Segment::Value { va: at(a), vb: at(b), k }
                        }
                    }
                }
            }
            // Before anything we still hold: the engine never asks for this
            // (it integrates before it forgets a sample), but answer safely.
            Some((_, v0)) => Segment::constant(v0),
            None => Segment::constant(v1),
        }
    }

    /// Instants inside (a, b) where the reading changes its formula.
    #[inline]
    pub fn breakpoints(&self, plan: &TagPlan, out: &mut Breaks) {
        let h = plan.max_hold_ms;
        if let Some((t0, _)) = self.prev {
            out.push(t0);
            out.push(t0.saturating_add(h));
        }
        if let Some((t1, _)) = self.last {
            out.push(t1);
            out.push(t1.saturating_add(h));
        }
    }
}

/// A tag's reading over one piece of an interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Segment {
    /// Trusted values: `va` at the start, `vb` at the end, slope `k` per ms
    /// (zero for a held or stepped value).
    Value { va: f64, vb: f64, k: f64 },
    /// In a gap; the last good value before it.
    Gap(f64),
    /// No sample yet.
    Missing,
}

impl Segment {
    #[inline]
    fn constant(v: f64) -> Segment {
        Segment::Value { va: v, vb: v, k: 0.0 }
    }
}

/// A small fixed-capacity set of breakpoints (no allocation on the hot path).
#[derive(Debug)]
pub struct Breaks {
    buf: [i64; 36],
    len: usize,
}

impl Breaks {
    pub fn new() -> Self {
        Breaks { buf: [0; 36], len: 0 }
    }

    #[inline]
    pub fn push(&mut self, t: i64) {
        if self.len < 32 {
            self.buf[self.len] = t;
            self.len += 1;
        }
    }

    /// The sorted, de-duplicated points strictly inside (a, b), framed by a
    /// and b.
    #[inline]
    pub fn segments(&mut self, a: i64, b: i64) -> &[i64] {
        let mut v = [0i64; 34];
        let mut n = 0;
        v[n] = a;
        n += 1;
        for &t in &self.buf[..self.len] {
            if t > a && t < b {
                v[n] = t;
                n += 1;
            }
        }
        v[n] = b;
        n += 1;
        v[..n].sort_unstable();
        let mut m = 0;
        for &x in &v[..n] {
            if m == 0 || x != self.buf[m - 1] {
                self.buf[m] = x;
                m += 1;
            }
        }
        self.len = m;
        &self.buf[..m]
    }
}

impl Default for Breaks {
    fn default() -> Self {
        Self::new()
    }
}
