//! The engine: turns timestamped tag samples into per-component ledger
//! increments. Pure and deterministic (no I/O, no clocks): the live service
//! and `replay` feed it the same way and get bit-identical ledgers.
//!
//! Rules it keeps (each has a test):
//! * each tag has a cursor; a sample at or before it is a duplicate or a
//!   late arrival and is dropped and counted, never integrated, and is
//!   judged so before its value or quality (a redelivered old out-of-range
//!   sample is late, not a new sensor fault);
//! * non-finite, out-of-range and bad-quality samples are rejected and
//!   counted; nothing already accepted changes;
//! * a sample stamped further ahead of the wall clock than the plan's
//!   margin, or before its earliest plausible time, is rejected as an
//!   implausible time: it never moves a cursor, a watermark or the window;
//! * samples are held for the plan's reorder window of event time and
//!   integrated in event-time order, so data reordered within the window
//!   gives the same ledger as ordered data ([`Engine::offer`]);
//! * a component with no tag input advances with the plant's clock (the
//!   newest integrated event time, or a clock the caller gives);
//! * a component integrates up to the newest instant all its live inputs
//!   have reached (its watermark), so samples of several tags stamped at the
//!   same instant give the same ledger whatever order they arrive in;
//! * before a tag forgets a sample, its components are integrated past it;
//! * intervals without trustworthy data are integrated by the gap policy and
//!   counted as unmonitored hours.

pub mod component;
pub mod fatigue;
pub mod inspection;
pub mod plan;
pub mod signal;
pub mod tags;

/// Serde for floats that may be infinite (JSON has no infinity): finite
/// values as numbers (shortest exact form), others as "inf", "-inf", "nan".
pub(crate) mod serde_inf {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(v: &f64, s: S) -> Result<S::Ok, S::Error> {
        if v.is_finite() {
            s.serialize_f64(*v)
        } else if v.is_nan() {
            s.serialize_str("nan")
        } else if *v > 0.0 {
            s.serialize_str("inf")
        } else {
            s.serialize_str("-inf")
        }
    }

    #[derive(Deserialize)]
    #[serde(untagged)]
    enum F {
        N(f64),
        S(String),
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        match F::deserialize(d)? {
            F::N(v) => Ok(v),
            F::S(s) => match s.as_str() {
                "inf" => Ok(f64::INFINITY),
                "-inf" => Ok(f64::NEG_INFINITY),
                "nan" => Ok(f64::NAN),
                _ => Err(serde::de::Error::custom(format!("not a number: {s}"))),
            },
        }
    }
}

pub use component::{ComponentState, Conditions, LedgerFlags};
pub use plan::{ComponentPlan, Input, Plan, TagId, TagPlan};
pub use signal::TagState;

use serde::{Deserialize, Serialize};

/// Quality of a sample as the source reports it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Quality {
    #[default]
    Good,
    /// Accepted (and counted) but not trusted by the source.
    Uncertain,
    /// Rejected.
    Bad,
}

/// One timestamped value of one tag, in the tag's engineering unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    pub tag: TagId,
    /// Event time, milliseconds since the Unix epoch.
    pub time_ms: i64,
    pub value: f64,
    pub quality: Quality,
}

/// Why a sample was not integrated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Rejection {
    NotFinite,
    OutOfRange,
    BadQuality,
    Duplicate,
    Late,
    UnknownTag,
    /// Event time ahead of the wall clock by more than the margin, or
    /// before the earliest plausible time.
    ImplausibleTime,
}

impl Rejection {
    /// Stable name used in counters and metrics.
    pub fn name(&self) -> &'static str {
        match self {
            Rejection::NotFinite => "not_finite",
            Rejection::OutOfRange => "out_of_range",
            Rejection::BadQuality => "bad_quality",
            Rejection::Duplicate => "duplicate",
            Rejection::Late => "late",
            Rejection::UnknownTag => "unknown_tag",
            Rejection::ImplausibleTime => "implausible_time",
        }
    }

    pub const ALL: [Rejection; 7] = [
        Rejection::NotFinite,
        Rejection::OutOfRange,
        Rejection::BadQuality,
        Rejection::Duplicate,
        Rejection::Late,
        Rejection::UnknownTag,
        Rejection::ImplausibleTime,
    ];
}

/// Counts of what the engine did with its samples.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct Counters {
    pub accepted: u64,
    pub uncertain: u64,
    pub not_finite: u64,
    pub out_of_range: u64,
    pub bad_quality: u64,
    pub duplicate: u64,
    pub late: u64,
    pub unknown_tag: u64,
    pub implausible_time: u64,
}

impl Counters {
    fn count(&mut self, r: Rejection) {
        match r {
            Rejection::NotFinite => self.not_finite += 1,
            Rejection::OutOfRange => self.out_of_range += 1,
            Rejection::BadQuality => self.bad_quality += 1,
            Rejection::Duplicate => self.duplicate += 1,
            Rejection::Late => self.late += 1,
            Rejection::UnknownTag => self.unknown_tag += 1,
            Rejection::ImplausibleTime => self.implausible_time += 1,
        }
    }

    /// Count for a rejection reason.
    pub fn get(&self, r: Rejection) -> u64 {
        match r {
            Rejection::NotFinite => self.not_finite,
            Rejection::OutOfRange => self.out_of_range,
            Rejection::BadQuality => self.bad_quality,
            Rejection::Duplicate => self.duplicate,
            Rejection::Late => self.late,
            Rejection::UnknownTag => self.unknown_tag,
            Rejection::ImplausibleTime => self.implausible_time,
        }
    }

    /// All rejected samples.
    pub fn rejected(&self) -> u64 {
        Rejection::ALL.iter().map(|r| self.get(*r)).sum()
    }
}

/// The complete mutable state of an engine: what the ledger store persists.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EngineState {
    /// Per tag, by name.
    pub tags: Vec<(String, TagState)>,
    /// Per component, by name.
    pub components: Vec<(String, ComponentState)>,
    pub counters: Counters,
    /// Samples accepted but still inside the reorder window, by tag name,
    /// in event-time order.
    #[serde(default)]
    pub held: Vec<(String, HeldSample)>,
}

/// An accepted sample waiting in the reorder window (value already in
/// internal units). What the ledger store keeps so that an acknowledged
/// sample survives a crash before it is integrated.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HeldSample {
    /// Arrival order, unique within a ledger.
    pub seq: u64,
    pub time_ms: i64,
    pub value: f64,
    /// Wall-clock time of arrival, ms (releases a sample that waited a
    /// whole window of wall time although event time stood still).
    pub arrival_ms: i64,
}

/// What changed in the reorder window since the last
/// [`Engine::take_held_changes`]: samples to store, sequence numbers to
/// delete.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct HeldChanges {
    pub added: Vec<(TagId, HeldSample)>,
    pub released: Vec<u64>,
}

/// Note component `ci` in the touched list (once).
#[inline]
fn touch(list: &mut Vec<u32>, flags: &mut [bool], ci: usize) {
    if !flags[ci] {
        flags[ci] = true;
        list.push(ci as u32);
    }
}

/// A one-to-many relation (tag → components, component → tags) in two flat
/// arrays, so the hot path follows no pointers.
#[derive(Debug, Clone)]
struct Adjacency {
    /// `items[offsets[i]..offsets[i + 1]]` belong to `i`.
    offsets: Vec<u32>,
    items: Vec<u32>,
}

impl Adjacency {
    fn new(lists: &[Vec<u32>]) -> Adjacency {
        let mut offsets = Vec::with_capacity(lists.len() + 1);
        let mut items = Vec::new();
        offsets.push(0);
        for l in lists {
            items.extend_from_slice(l);
            offsets.push(items.len() as u32);
        }
        Adjacency { offsets, items }
    }

    #[inline]
    fn of(&self, i: usize) -> &[u32] {
        &self.items[self.offsets[i] as usize..self.offsets[i + 1] as usize]
    }
}

/// The engine. Owns the tag cursors and the component ledgers.
#[derive(Debug, Clone)]
pub struct Engine {
    plan: Plan,
    tags: Vec<TagState>,
    components: Vec<ComponentState>,
    /// Components that read each tag.
    consumers: Adjacency,
    /// Tags each component reads.
    inputs: Adjacency,
    /// Hold time of each tag, ms (a compact copy of the plan's, read for
    /// every sample).
    hold_ms: Vec<i64>,
    /// Per-component rate memo (not state: results do not depend on it).
    scratch: Vec<component::Scratch>,
    counters: Counters,
    /// Components changed since the last [`Engine::take_changed`].
    changed: Vec<bool>,
    /// Tags whose cursor moved since the last [`Engine::take_changed_tags`].
    changed_tags: Vec<bool>,
    /// Components advanced since the last [`Engine::drain_touched`], in
    /// the order they were first advanced, and the flags that keep the
    /// list free of repeats.
    touched: Vec<u32>,
    touched_flag: Vec<bool>,
    /// The reorder window: accepted samples not yet integrated, in
    /// event-time order (arrival order among equal times).
    held: std::collections::VecDeque<(TagId, HeldSample)>,
    /// Newest event time accepted (integrated or held).
    frontier_ms: Option<i64>,
    next_seq: u64,
    held_changes: HeldChanges,
    /// Whether [`Engine::take_held_changes`] is used (the service's store
    /// mirrors the window); off, nothing is recorded, so a replay of any
    /// length keeps no list.
    track_held: bool,
    /// Per tag: the newest event time it has in the window (a hint for
    /// the duplicate check; may outlive the sample, never misses one).
    newest_held_ms: Vec<Option<i64>>,
    /// Components without a tag input: they advance with the plant clock.
    clockless: Vec<u32>,
    /// Newest plant-clock instant the clockless components reached.
    clock_ms: Option<i64>,
}

impl Engine {
    /// A fresh engine for a plan.
    pub fn new(plan: Plan) -> Engine {
        let mut consumers = vec![Vec::new(); plan.tags.len()];
        let mut inputs = Vec::with_capacity(plan.components.len());
        let mut clockless = vec![];
        for (ci, c) in plan.components.iter().enumerate() {
            let ts = c.tags();
            for &t in &ts {
                consumers[t as usize].push(ci as u32);
            }
            if ts.is_empty() {
                clockless.push(ci as u32);
            }
            inputs.push(ts);
        }
        let (consumers, inputs) = (Adjacency::new(&consumers), Adjacency::new(&inputs));
        Engine {
            tags: vec![TagState::default(); plan.tags.len()],
            components: plan.components.iter().map(ComponentState::new).collect(),
            changed: vec![false; plan.components.len()],
            changed_tags: vec![false; plan.tags.len()],
            touched: vec![],
            touched_flag: vec![false; plan.components.len()],
            scratch: plan.components.iter().map(component::Scratch::new).collect(),
            consumers,
            inputs,
            hold_ms: plan.tags.iter().map(|t| t.max_hold_ms).collect(),
            counters: Counters::default(),
            held: Default::default(),
            frontier_ms: None,
            next_seq: 0,
            held_changes: HeldChanges::default(),
            track_held: false,
            newest_held_ms: vec![None; plan.tags.len()],
            clockless,
            clock_ms: None,
            plan,
        }
    }

    /// The plan the engine runs.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The plant name of the plan.
    pub fn plant_name(&self) -> &str {
        &self.plan.plant
    }

    /// Look a tag up by name.
    pub fn tag_id(&self, name: &str) -> Option<TagId> {
        self.plan.tags.iter().position(|t| t.name == name).map(|i| i as TagId)
    }

    /// Component ledgers, in plan order.
    pub fn components(&self) -> &[ComponentState] {
        &self.components
    }

    /// Tags a component reads (computed once, when the engine is built).
    pub fn inputs(&self, ci: usize) -> &[TagId] {
        self.inputs.of(ci)
    }

    /// Components that read a tag (computed once, when the engine is built).
    pub fn consumers(&self, ti: usize) -> &[u32] {
        self.consumers.of(ti)
    }

    /// Tag states, in plan order.
    pub fn tags(&self) -> &[TagState] {
        &self.tags
    }

    /// Sample counters.
    pub fn counters(&self) -> &Counters {
        &self.counters
    }

    /// Count a sample whose tag is not configured.
    pub fn count_unknown_tag(&mut self) {
        self.counters.count(Rejection::UnknownTag);
    }

    /// Samples waiting in the reorder window.
    pub fn held_len(&self) -> usize {
        self.held.len()
    }

    /// Newest event time accepted (integrated or held).
    pub fn frontier_ms(&self) -> Option<i64> {
        self.frontier_ms
    }

    /// Components that advance with the plant clock (no tag input).
    pub fn clockless(&self) -> &[u32] {
        &self.clockless
    }

    /// Check a sample's value without changing anything; the value in
    /// internal units.
    #[inline]
    pub fn screen_value(&self, s: &Sample) -> Result<f64, Rejection> {
        let Some(tp) = self.plan.tags.get(s.tag as usize) else {
            return Err(Rejection::UnknownTag);
        };
        if !s.value.is_finite() {
            return Err(Rejection::NotFinite);
        }
        if s.quality == Quality::Bad {
            return Err(Rejection::BadQuality);
        }
        let eng = s.value * tp.scale + tp.offset;
        if let Some([lo, hi]) = tp.valid_range {
            if !(eng >= lo && eng <= hi) {
                return Err(Rejection::OutOfRange);
            }
        }
        let internal = tp.unit.to_internal(eng);
        if !internal.is_finite() {
            return Err(Rejection::NotFinite);
        }
        if tp.unit.quantity == crate::physics::units::Quantity::Temperature && internal <= 0.0 {
            return Err(Rejection::OutOfRange);
        }
        Ok(internal)
    }

    /// Check a sample against its tag's cursor (duplicate or late).
    #[inline]
    fn screen_cursor(&self, s: &Sample) -> Result<(), Rejection> {
        let Some(tag) = self.tags.get(s.tag as usize) else {
            return Err(Rejection::UnknownTag);
        };
        match tag.cursor_ms {
            Some(c) if s.time_ms == c => Err(Rejection::Duplicate),
            Some(c) if s.time_ms < c => Err(Rejection::Late),
            _ => Ok(()),
        }
    }

    /// Check a sample without changing anything (value and cursor; not the
    /// clock or the reorder window).
    #[inline]
    pub fn screen(&self, s: &Sample) -> Result<f64, Rejection> {
        // Late or duplicate first: an old sample says nothing new about
        // the sensor, whatever its value or quality.
        self.screen_cursor(s)?;
        self.screen_value(s)
    }

    /// Whether an event time is plausible at wall-clock time `now_ms`.
    #[inline]
    pub fn plausible_time(&self, time_ms: i64, now_ms: i64) -> bool {
        time_ms >= self.plan.earliest_plausible_ms && time_ms <= now_ms.saturating_add(self.plan.future_margin_ms)
    }

    /// Feed one sample directly: screened for value and cursor, integrated
    /// at once, without the clock check or the reorder window. For tests
    /// and the engine benchmark; the service and `replay` use
    /// [`Engine::offer`].
    pub fn ingest(&mut self, s: &Sample) -> Result<(), Rejection> {
        let value = match self.screen(s) {
            Ok(v) => v,
            Err(r) => {
                self.counters.count(r);
                return Err(r);
            }
        };
        self.count_accepted(s.quality);
        self.apply(s.tag, s.time_ms, value);
        Ok(())
    }

    /// Feed one sample arriving at wall-clock time `now_ms`: the one path
    /// of live ingest and replay. The sample is screened (value, time
    /// plausibility, cursor, duplicates in the window) and, when accepted,
    /// held in the reorder window until event time has moved a window past
    /// it; then it is integrated in event-time order. Returns the rejection
    /// reason if it was not taken.
    pub fn offer(&mut self, s: &Sample, now_ms: i64) -> Result<(), Rejection> {
        // Order matters: an implausible time is a clock fault whatever the
        // cursor says; a late or duplicate sample (a redelivery) is only
        // that, so it is checked before the value and quality, which would
        // otherwise report an old sensor fault as a new one.
        if s.tag as usize >= self.tags.len() {
            self.counters.count(Rejection::UnknownTag);
            return Err(Rejection::UnknownTag);
        }
        if !self.plausible_time(s.time_ms, now_ms) {
            self.counters.count(Rejection::ImplausibleTime);
            return Err(Rejection::ImplausibleTime);
        }
        let value = match self.screen_cursor(s).and_then(|()| self.screen_held(s)).and_then(|()| self.screen_value(s)) {
            Ok(v) => v,
            Err(r) => {
                self.counters.count(r);
                return Err(r);
            }
        };
        self.count_accepted(s.quality);
        let window = self.plan.reorder_window_ms;
        let frontier = self.frontier_ms.map_or(s.time_ms, |f| f.max(s.time_ms));
        self.frontier_ms = Some(frontier);
        let horizon = frontier - window;
        if window <= 0 || (self.held.is_empty() && s.time_ms <= horizon) {
            self.apply(s.tag, s.time_ms, value);
            return Ok(());
        }
        let h = HeldSample { seq: self.next_seq, time_ms: s.time_ms, value, arrival_ms: now_ms };
        self.next_seq += 1;
        if self.track_held {
            self.held_changes.added.push((s.tag, h));
        }
        // In order (the common case): at the back; else after every held
        // sample of the same or an earlier time.
        let newest = &mut self.newest_held_ms[s.tag as usize];
        *newest = Some(newest.map_or(s.time_ms, |n| n.max(s.time_ms)));
        if self.held.back().is_none_or(|(_, b)| b.time_ms <= s.time_ms) {
            self.held.push_back((s.tag, h));
        } else {
            let pos = self.held.partition_point(|(_, x)| x.time_ms <= s.time_ms);
            self.held.insert(pos, (s.tag, h));
        }
        self.release_through(horizon);
        Ok(())
    }

    /// A sample of the same tag and time already held is a duplicate.
    #[inline]
    fn screen_held(&self, s: &Sample) -> Result<(), Rejection> {
        match self.held.back() {
            None => return Ok(()),
            Some((_, b)) if b.time_ms < s.time_ms => return Ok(()),
            Some((_, b)) if b.time_ms == s.time_ms => {
                // In-order arrival of simultaneous samples (the common case):
                // a duplicate is the tag's newest held sample.
                return if self.newest_held_ms[s.tag as usize] == Some(s.time_ms) {
                    Err(Rejection::Duplicate)
                } else {
                    Ok(())
                };
            }
            _ => {}
        }
        let from = self.held.partition_point(|(_, x)| x.time_ms < s.time_ms);
        for (tag, h) in self.held.range(from..) {
            if h.time_ms != s.time_ms {
                break;
            }
            if *tag == s.tag {
                return Err(Rejection::Duplicate);
            }
        }
        Ok(())
    }

    #[inline]
    fn count_accepted(&mut self, q: Quality) {
        self.counters.accepted += 1;
        if q == Quality::Uncertain {
            self.counters.uncertain += 1;
        }
    }

    /// Integrate held samples stamped at or before `horizon_ms`, in order.
    fn release_through(&mut self, horizon_ms: i64) {
        while let Some(&(tag, h)) = self.held.front() {
            if h.time_ms > horizon_ms {
                break;
            }
            self.held.pop_front();
            if self.track_held {
                self.held_changes.released.push(h.seq);
            }
            self.apply(tag, h.time_ms, h.value);
        }
    }

    /// Integrate every held sample that arrived a whole window of wall
    /// time before `now_ms` (and every sample stamped before it), so a feed
    /// that stops does not leave its last samples waiting. Returns how many
    /// were integrated.
    pub fn release_due(&mut self, now_ms: i64) -> usize {
        let window = self.plan.reorder_window_ms;
        let Some(last) = self.held.iter().rposition(|(_, h)| h.arrival_ms.saturating_add(window) <= now_ms) else {
            return 0;
        };
        let horizon = self.held[last].1.time_ms;
        let before = self.held.len();
        self.release_through(horizon);
        before - self.held.len()
    }

    /// Integrate every held sample (end of a replay or a backfill).
    pub fn flush(&mut self) {
        self.release_through(i64::MAX);
    }

    /// Record what enters and leaves the reorder window, for
    /// [`Engine::take_held_changes`] (the service turns it on).
    pub fn track_held_changes(&mut self, on: bool) {
        self.track_held = on;
    }

    /// The sequence numbers of the samples held now.
    pub fn held_seqs(&self) -> Vec<u64> {
        self.held.iter().map(|(_, h)| h.seq).collect()
    }

    /// What entered and left the reorder window since the last call (the
    /// ledger store mirrors the window with it); empty unless
    /// [`Engine::track_held_changes`] is on.
    pub fn take_held_changes(&mut self) -> HeldChanges {
        let mut c = std::mem::take(&mut self.held_changes);
        // A sample held and released between two calls never reaches the
        // store.
        if !c.added.is_empty() && !c.released.is_empty() {
            let first_added = c.added[0].1.seq;
            let gone: std::collections::HashSet<u64> =
                c.released.iter().copied().filter(|&q| q >= first_added).collect();
            c.added.retain(|(_, h)| !gone.contains(&h.seq));
            c.released.retain(|q| *q < first_added);
        }
        c
    }

    /// Advance the components that have no tag input to the plant-clock
    /// instant `to_ms` (the service gives the wall clock; integration of
    /// data moves it to the newest event time). Never moves backwards.
    pub fn advance_clock(&mut self, to_ms: i64) {
        if self.clockless.is_empty() || self.clock_ms.is_some_and(|c| c >= to_ms) {
            return;
        }
        self.clock_ms = Some(to_ms);
        let policy = self.plan.gap_policy;
        let tau = self.plan.recent_rate_window_h;
        for &ci in &self.clockless {
            let ci = ci as usize;
            let st = &mut self.components[ci];
            match st.integrated_to_ms {
                None => {
                    st.integrated_to_ms = Some(to_ms);
                    st.first_sample_ms = Some(to_ms);
                }
                Some(x) if x < to_ms => inspection::advance(
                    &mut self.plan.components[ci],
                    &[],
                    &mut self.scratch[ci],
                    st,
                    &self.tags,
                    &self.plan.tags,
                    to_ms,
                    policy,
                    tau,
                ),
                Some(_) => continue,
            }
            self.changed[ci] = true;
            touch(&mut self.touched, &mut self.touched_flag, ci);
        }
    }

    /// Integrate one screened sample (value in internal units).
    #[inline(always)]
    fn apply(&mut self, tag: TagId, t: i64, value: f64) {
        let tid = tag as usize;
        let policy = self.plan.gap_policy;
        let tau = self.plan.recent_rate_window_h;
        self.changed_tags[tid] = true;
        // Integrate past the sample this tag is about to forget.
        if let Some((last_t, _)) = self.tags[tid].last {
            for &ci in self.consumers.of(tid) {
                let ci = ci as usize;
                if self.components[ci].integrated_to_ms.is_some_and(|x| x < last_t) {
                    inspection::advance(
                        &mut self.plan.components[ci],
                        self.inputs.of(ci),
                        &mut self.scratch[ci],
                        &mut self.components[ci],
                        &self.tags,
                        &self.plan.tags,
                        last_t,
                        policy,
                        tau,
                    );
                    self.changed[ci] = true;
                    touch(&mut self.touched, &mut self.touched_flag, ci);
                }
            }
        }
        self.tags[tid].push(t, value);
        for &ci in self.consumers.of(tid) {
            let ci = ci as usize;
            let st = &mut self.components[ci];
            if st.integrated_to_ms.is_none() {
                st.integrated_to_ms = Some(t);
                st.first_sample_ms = Some(t);
                self.changed[ci] = true;
                touch(&mut self.touched, &mut self.touched_flag, ci);
                continue;
            }
            // Watermark: the newest instant every live input has reached.
            let mut w = i64::MAX;
            for &ti in self.inputs.of(ci) {
                if let Some((lt, _)) = self.tags[ti as usize].last {
                    let hold = self.hold_ms[ti as usize];
                    if lt.saturating_add(hold) >= t {
                        w = w.min(lt);
                    }
                }
            }
            if w == i64::MAX {
                w = t;
            }
            if st.integrated_to_ms.is_some_and(|x| x < w) {
                inspection::advance(
                    &mut self.plan.components[ci],
                    self.inputs.of(ci),
                    &mut self.scratch[ci],
                    st,
                    &self.tags,
                    &self.plan.tags,
                    w,
                    policy,
                    tau,
                );
                self.changed[ci] = true;
                touch(&mut self.touched, &mut self.touched_flag, ci);
            }
        }
        if !self.clockless.is_empty() {
            self.advance_clock(t);
        }
    }

    /// Components advanced since the last call (each once), for writers of
    /// series points that must see every step of event time, not only the
    /// state at a commit. Costs nothing per untouched component.
    pub fn drain_touched(&mut self, out: &mut Vec<u32>) {
        out.clear();
        for &ci in &self.touched {
            self.touched_flag[ci as usize] = false;
        }
        std::mem::swap(out, &mut self.touched);
    }

    /// Indices of tags whose cursor moved since the last call.
    pub fn take_changed_tags(&mut self) -> Vec<usize> {
        let mut v = Vec::new();
        for (i, c) in self.changed_tags.iter_mut().enumerate() {
            if *c {
                v.push(i);
                *c = false;
            }
        }
        v
    }

    /// Mark a component changed (so the next [`Engine::take_changed`] lists it).
    pub fn mark_changed(&mut self, ci: usize) {
        if let Some(c) = self.changed.get_mut(ci) {
            *c = true;
        }
    }

    /// Indices of components changed since the last call.
    pub fn take_changed(&mut self) -> Vec<usize> {
        let mut v = Vec::new();
        for (i, c) in self.changed.iter_mut().enumerate() {
            if *c {
                v.push(i);
                *c = false;
            }
        }
        v
    }

    /// Export the full mutable state (for the ledger store).
    pub fn export_state(&self) -> EngineState {
        EngineState {
            tags: self.plan.tags.iter().map(|t| t.name.clone()).zip(self.tags.iter().cloned()).collect(),
            components: self
                .plan
                .components
                .iter()
                .map(|c| c.name.clone())
                .zip(self.components.iter().cloned())
                .collect(),
            counters: self.counters.clone(),
            held: self.held.iter().map(|(t, h)| (self.plan.tags[*t as usize].name.clone(), *h)).collect(),
        }
    }

    /// Restore state exported earlier. Tags and components are matched by
    /// name; ones no longer in the plan are returned so the caller can keep
    /// their ledgers; new ones start fresh.
    pub fn import_state(&mut self, state: EngineState) -> EngineState {
        let mut left = EngineState { tags: vec![], components: vec![], counters: Counters::default(), held: vec![] };
        for (name, ts) in state.tags {
            match self.plan.tags.iter().position(|t| t.name == name) {
                Some(i) => self.tags[i] = ts,
                None => left.tags.push((name, ts)),
            }
        }
        for (name, cs) in state.components {
            match self.plan.components.iter().position(|c| c.name == name) {
                Some(i) => self.components[i] = cs,
                None => left.components.push((name, cs)),
            }
        }
        self.counters = state.counters;
        // The reorder window: held samples of tags still in the plan, in
        // event-time order; those of retired tags are returned.
        let mut held: Vec<(TagId, HeldSample)> = vec![];
        for (name, h) in state.held {
            match self.tag_id(&name) {
                Some(t) => held.push((t, h)),
                None => left.held.push((name, h)),
            }
        }
        held.sort_by_key(|(_, h)| (h.time_ms, h.seq));
        self.next_seq = held.iter().map(|(_, h)| h.seq + 1).max().unwrap_or(0).max(self.next_seq);
        for (t, h) in &held {
            let n = &mut self.newest_held_ms[*t as usize];
            *n = Some(n.map_or(h.time_ms, |x| x.max(h.time_ms)));
        }
        self.held = held.into();
        let newest_cursor = self.tags.iter().filter_map(|t| t.cursor_ms).max();
        let newest_held = self.held.back().map(|(_, h)| h.time_ms);
        self.frontier_ms = newest_cursor.max(newest_held);
        self.clock_ms = self.clockless.iter().filter_map(|&ci| self.components[ci as usize].integrated_to_ms).max();
        // New ledgers: new working blocks (their histogram hints belong to
        // the ledgers they replace).
        self.scratch = self.plan.components.iter().map(component::Scratch::new).collect();
        self.derive_inspections();
        left
    }
}

#[cfg(test)]
pub(crate) mod tests;
#[cfg(test)]
mod tests_fatigue;
#[cfg(test)]
mod tests_intake;
