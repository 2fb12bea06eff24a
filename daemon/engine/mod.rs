//! The engine: turns timestamped tag samples into per-component ledger
//! increments. Pure and deterministic (no I/O, no clocks): the live service
//! and `replay` feed it the same way and get bit-identical ledgers.
//!
//! Rules it keeps (each has a test):
//! * each tag has a cursor; a sample at or before it is a duplicate or a
//!   late arrival and is dropped and counted, never integrated;
//! * non-finite, out-of-range and bad-quality samples are rejected and
//!   counted; nothing already accepted changes;
//! * a component integrates up to the newest instant all its live inputs
//!   have reached (its watermark), so samples of several tags stamped at the
//!   same instant give the same ledger whatever order they arrive in;
//! * before a tag forgets a sample, its components are integrated past it;
//! * intervals without trustworthy data are integrated by the gap policy and
//!   counted as unmonitored hours.

pub mod component;
pub mod plan;
pub mod signal;

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
        }
    }

    pub const ALL: [Rejection; 6] = [
        Rejection::NotFinite,
        Rejection::OutOfRange,
        Rejection::BadQuality,
        Rejection::Duplicate,
        Rejection::Late,
        Rejection::UnknownTag,
    ];
}

/// Counts of what the engine did with its samples.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counters {
    pub accepted: u64,
    pub uncertain: u64,
    pub not_finite: u64,
    pub out_of_range: u64,
    pub bad_quality: u64,
    pub duplicate: u64,
    pub late: u64,
    pub unknown_tag: u64,
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
}

impl Engine {
    /// A fresh engine for a plan.
    pub fn new(plan: Plan) -> Engine {
        let mut consumers = vec![Vec::new(); plan.tags.len()];
        let mut inputs = Vec::with_capacity(plan.components.len());
        for (ci, c) in plan.components.iter().enumerate() {
            let ts = c.tags();
            for &t in &ts {
                consumers[t as usize].push(ci as u32);
            }
            inputs.push(ts);
        }
        let (consumers, inputs) = (Adjacency::new(&consumers), Adjacency::new(&inputs));
        Engine {
            tags: vec![TagState::default(); plan.tags.len()],
            components: plan.components.iter().map(ComponentState::new).collect(),
            changed: vec![false; plan.components.len()],
            scratch: plan.components.iter().map(component::Scratch::new).collect(),
            consumers,
            inputs,
            hold_ms: plan.tags.iter().map(|t| t.max_hold_ms).collect(),
            counters: Counters::default(),
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

    /// Check a sample without changing anything.
    #[inline]
    pub fn screen(&self, s: &Sample) -> Result<f64, Rejection> {
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
        match self.tags[s.tag as usize].cursor_ms {
            Some(c) if s.time_ms == c => Err(Rejection::Duplicate),
            Some(c) if s.time_ms < c => Err(Rejection::Late),
            _ => Ok(internal),
        }
    }

    /// Feed one sample. Returns the rejection reason if it was not taken.
    pub fn ingest(&mut self, s: &Sample) -> Result<(), Rejection> {
        let value = match self.screen(s) {
            Ok(v) => v,
            Err(r) => {
                self.counters.count(r);
                return Err(r);
            }
        };
        self.counters.accepted += 1;
        if s.quality == Quality::Uncertain {
            self.counters.uncertain += 1;
        }
        let tid = s.tag as usize;
        let t = s.time_ms;
        let policy = self.plan.gap_policy;
        let tau = self.plan.recent_rate_window_h;
        // Integrate past the sample this tag is about to forget.
        if let Some((last_t, _)) = self.tags[tid].last {
            for &ci in self.consumers.of(tid) {
                let ci = ci as usize;
                if self.components[ci].integrated_to_ms.is_some_and(|x| x < last_t) {
                    component::advance(
                        &self.plan.components[ci],
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
                component::advance(
                    &self.plan.components[ci],
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
            }
        }
        Ok(())
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
        }
    }

    /// Restore state exported earlier. Tags and components are matched by
    /// name; ones no longer in the plan are returned so the caller can keep
    /// their ledgers; new ones start fresh.
    pub fn import_state(&mut self, state: EngineState) -> EngineState {
        let mut left = EngineState { tags: vec![], components: vec![], counters: Counters::default() };
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
        left
    }
}

#[cfg(test)]
pub(crate) mod tests;
