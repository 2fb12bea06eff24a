//! `lifeledger rollback`: put one component, or the whole ledger, back to
//! the newest checkpoint at or before a given time.
//!
//! What is restored is decided by [`plan_rollback`], a pure function of the
//! engine (plan and current states), the scope, the time and the
//! checkpoints found:
//!
//! * A component integrated to a time at or before `--to` (or not at all)
//!   has nothing to roll back and stays as it is.
//! * Any other component in scope takes its newest checkpoint at or before
//!   `--to`; without one the whole rollback is refused, naming the
//!   component and its oldest checkpoint.
//! * Every tag a restored component reads takes its state from that
//!   checkpoint (when several restored components read a tag, the oldest
//!   of their copies, so that none of them misses a sample). Without this
//!   the component would continue from the tag's present samples, which
//!   lie after its checkpoint, and integrate the hours between as if they
//!   had been measured.
//! * Rewinding a tag that *other* components read does not make them count
//!   time twice: the engine integrates a component only past its own
//!   `integrated_to_ms`, so samples delivered again (by a backfill) before
//!   that time move its watermark but integrate nothing, and from that
//!   time on they are the samples it would have read anyway. What the
//!   engine does need is that a component never reads a tag before the
//!   oldest sample the tag holds (it integrates past a sample before it
//!   lets the tag forget it). A rewind that would break that for any
//!   component reading the tag is refused, naming the tag and the
//!   component; it cannot happen to a ledger the engine wrote, only to one
//!   changed by hand or by earlier partial rollbacks.
//!
//! [`rollback`] carries the plan out on a stopped service's ledger in one
//! transaction ([`crate::store::Store::restore`]): states replaced, the
//! rolled-back components' later checkpoints and trend points deleted, one
//! alarm-journal entry per restored component saying who, why, from what
//! and to what. Alarm records are left to the service, which re-evaluates
//! a component with its next data (an alarm raised by the poisoned numbers
//! then returns to normal and waits for acknowledgement, as ISA-18.2 has it).
//! Points already sent to the time-series database stay there.

use std::collections::BTreeMap;
use std::path::PathBuf;

use anyhow::Context;
use serde::Serialize;

use crate::engine::{ComponentState, Engine, TagState};
use crate::event_time::rfc3339_ms;
use crate::ledger_file::Checkpoint;
use crate::ledger_file::StoredLedger;
use crate::service::ServiceSettings;
use crate::settings::LoadedConfig;
use crate::store::{JournalEntry, Restore, Store};

/// The alarm-journal index under which rollbacks are recorded; not an
/// alarm index, so the service's alarm history at start-up passes over it.
pub const JOURNAL_INDEX: &str = crate::store::journal::ROLLBACK_INDEX;

/// What to roll back.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Scope {
    /// One component, by name.
    Component(String),
    /// Every component of the configuration.
    Whole,
}

/// What was found in the ledger for one component in scope.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Found {
    /// Its newest checkpoint at or before the time asked for.
    pub checkpoint: Option<Checkpoint>,
    /// The event time of its oldest checkpoint, if it has any.
    pub oldest_ms: Option<i64>,
}

/// The accumulated figures of a ledger, for saying what a rollback or a
/// backfill changed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Figures {
    pub life_fraction: f64,
    pub creep_strain: f64,
    pub wear_depth_mm: f64,
    pub integrated_h: f64,
    pub unmonitored_h: f64,
}

impl Figures {
    /// The figures of one component's ledger.
    pub fn of(s: &ComponentState) -> Figures {
        Figures {
            life_fraction: s.life_fraction,
            creep_strain: s.creep_strain,
            wear_depth_mm: s.wear_depth_mm,
            integrated_h: s.integrated_h,
            unmonitored_h: s.unmonitored_h,
        }
    }
}

/// One component put back.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RestoredComponent {
    pub component: String,
    /// Where its ledger was integrated to before, ms.
    pub integrated_to_ms_before: Option<i64>,
    /// Its figures before.
    pub before: Figures,
    /// Its figures now (the checkpoint's).
    pub after: Figures,
    /// The checkpoint's event time: where it is integrated to now.
    pub checkpoint_ms: i64,
    /// When the checkpoint was written (wall clock), ms.
    pub checkpoint_written_ms: i64,
    /// Its ledger from the checkpoint.
    #[serde(skip)]
    pub state: ComponentState,
}

/// One tag put back.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RestoredTag {
    pub tag: String,
    pub cursor_ms_before: Option<i64>,
    pub cursor_ms_after: Option<i64>,
    /// Components not rolled back that read the tag too.
    pub also_read_by: Vec<String>,
    #[serde(skip)]
    pub state: TagState,
}

/// What a rollback restores.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RollbackPlan {
    /// The time asked for, ms.
    pub to_ms: i64,
    pub components: Vec<RestoredComponent>,
    pub tags: Vec<RestoredTag>,
    /// Components in scope already integrated only to `to_ms` or earlier
    /// (or not at all): left as they are. (name, integrated to ms)
    pub unchanged: Vec<(String, Option<i64>)>,
}

/// Indices of the components in `scope`, or why there are none.
pub fn targets(engine: &Engine, scope: &Scope) -> Result<Vec<usize>, String> {
    let comps = &engine.plan().components;
    match scope {
        Scope::Whole => Ok((0..comps.len()).collect()),
        Scope::Component(name) => match comps.iter().position(|c| &c.name == name) {
            Some(i) => Ok(vec![i]),
            None => Err(format!(
                "component {name:?} is not in the configuration; its components are: {}",
                comps.iter().map(|c| c.name.as_str()).collect::<Vec<_>>().join(", ")
            )),
        },
    }
}

/// Decides what a rollback of `scope` to `to_ms` restores, from the engine
/// (holding the ledger's present states) and what was found per component
/// in scope (`found`, by name; a missing entry means no checkpoint). Every
/// problem is listed at once, each naming the component or tag and the way
/// out.
pub fn plan_rollback(
    engine: &Engine,
    scope: &Scope,
    to_ms: i64,
    found: &BTreeMap<String, Found>,
) -> Result<RollbackPlan, Vec<String>> {
    let plan = engine.plan();
    let mut problems = vec![];
    let mut restored: BTreeMap<usize, &Checkpoint> = BTreeMap::new();
    let mut out = RollbackPlan { to_ms, components: vec![], tags: vec![], unchanged: vec![] };
    for ci in targets(engine, scope).map_err(|e| vec![e])? {
        let name = &plan.components[ci].name;
        let st = &engine.components()[ci];
        match st.integrated_to_ms {
            Some(t) if t > to_ms => {}
            other => {
                out.unchanged.push((name.clone(), other));
                continue;
            }
        }
        let f = found.get(name);
        match f.and_then(|f| f.checkpoint.as_ref()) {
            Some(cp) => {
                restored.insert(ci, cp);
                out.components.push(RestoredComponent {
                    component: name.clone(),
                    integrated_to_ms_before: st.integrated_to_ms,
                    before: Figures::of(st),
                    after: Figures::of(&cp.state),
                    checkpoint_ms: cp.at_ms,
                    checkpoint_written_ms: cp.written_ms,
                    state: cp.state.clone(),
                });
            }
            None => problems.push(match f.and_then(|f| f.oldest_ms) {
                Some(oldest) => format!(
                    "component {name}: no checkpoint at or before {}; its oldest is at {} (checkpoints are kept for \
                     [store] checkpoint_days). Give --to at or after {}",
                    rfc3339_ms(to_ms),
                    rfc3339_ms(oldest),
                    rfc3339_ms(oldest)
                ),
                None => format!(
                    "component {name}: the ledger holds no checkpoint of it (checkpoints are taken once a UTC day \
                     of event time by the service, and at the end of a backfill); it cannot be rolled back"
                ),
            }),
        }
    }

    // Tag states from the checkpoints: the oldest copy where several
    // restored components read the same tag.
    let mut tags: BTreeMap<usize, &TagState> = BTreeMap::new();
    for (&ci, cp) in &restored {
        for &ti in engine.inputs(ci) {
            let ti = ti as usize;
            let tag = &plan.tags[ti].name;
            let Some(ts) = cp.tags.get(tag) else {
                problems.push(format!(
                    "component {}: its checkpoint at {} holds no state of tag {tag}, which it reads now (the \
                     configuration changed after the checkpoint); roll back to a time after the change",
                    plan.components[ci].name,
                    rfc3339_ms(cp.at_ms)
                ));
                continue;
            };
            let older = tags.get(&ti).is_none_or(|have| ts.cursor_ms < have.cursor_ms);
            if older {
                tags.insert(ti, ts);
            }
        }
    }

    // Who reads each tag, and where each reader will be integrated to.
    let mut readers: Vec<Vec<usize>> = vec![vec![]; plan.tags.len()];
    for ci in 0..plan.components.len() {
        for &ti in engine.inputs(ci) {
            readers[ti as usize].push(ci);
        }
    }
    let integrated_to =
        |ci: usize| restored.get(&ci).map_or(engine.components()[ci].integrated_to_ms, |cp| cp.state.integrated_to_ms);

    for (&ti, &ts) in &tags {
        let tag = &plan.tags[ti].name;
        let current = &engine.tags()[ti];
        // The oldest sample the tag will hold: no reader may be integrated
        // to less, or it would read the tag before its samples.
        if let Some((oldest, _)) = ts.prev.or(ts.last) {
            for &ci in &readers[ti] {
                if let Some(y) = integrated_to(ci).filter(|&y| y < oldest) {
                    let who = &plan.components[ci].name;
                    problems.push(format!(
                        "tag {tag}: its checkpoint state holds samples from {} on, but component {who}, which reads \
                         it, is integrated only to {}; restoring the tag would make {who} read it before its \
                         samples. Roll back {who} as well (--component {who}), or the whole ledger (--all)",
                        rfc3339_ms(oldest),
                        rfc3339_ms(y)
                    ));
                }
            }
        }
        if ts == current {
            continue;
        }
        out.tags.push(RestoredTag {
            tag: tag.clone(),
            cursor_ms_before: current.cursor_ms,
            cursor_ms_after: ts.cursor_ms,
            also_read_by: readers[ti]
                .iter()
                .filter(|ci| !restored.contains_key(ci))
                .map(|&ci| plan.components[ci].name.clone())
                .collect(),
            state: ts.clone(),
        });
    }
    if problems.is_empty() {
        Ok(out)
    } else {
        Err(problems)
    }
}

/// A rollback as the operator asks for it.
#[derive(Debug, Clone)]
pub struct RollbackRequest {
    /// The ledger file; `None`: the configuration's `[store] path`.
    pub ledger: Option<PathBuf>,
    pub scope: Scope,
    /// The time to roll back to, ms.
    pub to_ms: i64,
    /// Who asks (a person's name).
    pub by: String,
    /// Why.
    pub reason: String,
    /// Only say what would be done.
    pub dry_run: bool,
}

/// What a rollback did.
#[derive(Debug, Clone, Serialize)]
pub struct RollbackOutcome {
    pub ledger: PathBuf,
    pub plan: RollbackPlan,
    /// Components not rolled back that are integrated past the wall clock:
    /// most likely poisoned too.
    pub integrated_past_now: Vec<(String, i64)>,
    /// Whether the ledger was changed (false for a dry run).
    pub written: bool,
}

/// Carries out `req` on the ledger of a stopped service configured by
/// `cfg` and `service`: the file must not be open anywhere else.
pub fn rollback(
    cfg: &LoadedConfig,
    service: &ServiceSettings,
    req: &RollbackRequest,
) -> anyhow::Result<RollbackOutcome> {
    let by = req.by.trim();
    let reason = req.reason.trim();
    if by.is_empty() || reason.is_empty() {
        anyhow::bail!(
            "rollback: --by (your name) and --reason (why the ledger is rolled back) must not be blank; \
             both go into the alarm journal"
        );
    }
    let path = req.ledger.clone().unwrap_or_else(|| service.store.path.clone());
    let mut store = Store::open_exclusive(&path, false)?;
    store.set_alarm_journal_max_events(service.store.alarm_journal_max_events);
    store.set_checkpoint_days(service.store.checkpoint_days);
    let stored = StoredLedger::parse(&store.load()?, &path)?;
    let mut engine = Engine::new(cfg.plan.clone());
    engine.import_state(stored.engine);

    let targets = targets(&engine, &req.scope).map_err(|e| anyhow::anyhow!("rollback of {}: {e}", path.display()))?;
    let mut found = BTreeMap::new();
    for ci in targets {
        let name = &engine.plan().components[ci].name;
        let checkpoint = match store.checkpoint_at_or_before(name, req.to_ms)? {
            Some(s) => Some(Checkpoint::parse(&s, &path)?),
            None => None,
        };
        let oldest_ms = store.checkpoint_times(name)?.first().map(|(t, _)| *t);
        found.insert(name.clone(), Found { checkpoint, oldest_ms });
    }
    let plan = plan_rollback(&engine, &req.scope, req.to_ms, &found).map_err(|problems| {
        anyhow::anyhow!(
            "rollback of {} to {} refused, nothing was changed:\n  - {}",
            path.display(),
            rfc3339_ms(req.to_ms),
            problems.join("\n  - ")
        )
    })?;

    let now = crate::ingest::now_ms();
    let rolled: Vec<&str> = plan.components.iter().map(|c| c.component.as_str()).collect();
    let integrated_past_now = engine
        .plan()
        .components
        .iter()
        .zip(engine.components())
        .filter(|(c, _)| !rolled.contains(&c.name.as_str()))
        .filter_map(|(c, s)| s.integrated_to_ms.filter(|&t| t > now).map(|t| (c.name.clone(), t)))
        .collect();

    let written = !req.dry_run && !plan.components.is_empty();
    if written {
        let journal = journal_entries(engine.plan(), &plan, &req.scope, by, reason, now);
        let components: Vec<(String, String, i64)> = plan
            .components
            .iter()
            .map(|c| Ok((c.component.clone(), serde_json::to_string(&c.state)?, c.checkpoint_ms)))
            .collect::<serde_json::Result<_>>()?;
        let tags: Vec<(String, String)> = plan
            .tags
            .iter()
            .map(|t| Ok((t.tag.clone(), serde_json::to_string(&t.state)?)))
            .collect::<serde_json::Result<_>>()?;
        store
            .restore(&Restore { components: &components, tags: &tags, journal: &journal })
            .with_context(|| format!("rollback of {}", path.display()))?;
    }
    Ok(RollbackOutcome { ledger: path, plan, integrated_past_now, written })
}

/// One journal entry per restored component: who, why, from what to what.
/// Shaped like an alarm event where it can be (component, unit, time,
/// transition, message), so the status page's history lists it.
fn journal_entries(
    plan: &crate::engine::Plan,
    rb: &RollbackPlan,
    scope: &Scope,
    by: &str,
    reason: &str,
    now_ms: i64,
) -> Vec<JournalEntry> {
    let scope_name = match scope {
        Scope::Component(_) => "component",
        Scope::Whole => "whole_ledger",
    };
    let tags: Vec<&str> = rb.tags.iter().map(|t| t.tag.as_str()).collect();
    rb.components
        .iter()
        .map(|c| {
            let unit = plan.components.iter().find(|p| p.name == c.component).map_or("", |p| p.unit.as_str());
            let before = c.integrated_to_ms_before.map_or("-".to_string(), rfc3339_ms);
            let message = format!(
                "ledger rolled back by {by} ({reason}): integrated to {before} with life fraction {} before, now \
                 the checkpoint at {} with life fraction {}",
                crate::alarm::index::short(c.before.life_fraction),
                rfc3339_ms(c.checkpoint_ms),
                crate::alarm::index::short(c.state.life_fraction)
            );
            let event = serde_json::json!({
                "component": c.component,
                "unit": unit,
                "index": JOURNAL_INDEX,
                "transition": "rolled_back",
                "scope": scope_name,
                "time": rfc3339_ms(now_ms),
                "time_ms": now_ms,
                "to": rfc3339_ms(rb.to_ms),
                "integrated_to_before": c.integrated_to_ms_before.map(rfc3339_ms),
                "before": c.before,
                "checkpoint": rfc3339_ms(c.checkpoint_ms),
                "checkpoint_written": rfc3339_ms(c.checkpoint_written_ms),
                "after": c.after,
                "tags_restored": tags,
                "by": by,
                "reason": reason,
                "message": message,
                "caution": crate::CAUTION,
            });
            JournalEntry {
                time_ms: now_ms,
                component: c.component.clone(),
                index: JOURNAL_INDEX.to_string(),
                event: event.to_string(),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Quality, Sample};

    /// Two tubes that share the pressure tag: what the plan below reads.
    const SHARED: &str = r#"
[plant]
name = "Test Works"
[engine]
max_hold_s = 900
[[material]]
grade = "TESTSTEEL"
melting_point_k = { value = 1780.0, source = "synthetic" }
creep_threshold_k = { value = 700.0, source = "synthetic" }
[material.larson_miller]
constant_c = 20.0
coefficients = [28000.0, -1500.0, -800.0]
stress_range_mpa = [20.0, 300.0]
temperature_range_k = [723.0, 923.0]
minimum = { rule = "stress_factor", factor = 0.8 }
source = "synthetic"
[[tag]]
name = "TA"
unit = "degC"
[[tag]]
name = "TB"
unit = "degC"
[[tag]]
name = "PT"
unit = "bar"
[[component]]
name = "A"
unit = "U1"
kind = "tube"
material = "TESTSTEEL"
design_temperature = { value = 560, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TA"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 50.8, unit = "mm" }
wall = { value = 6.0, unit = "mm" }
[[component]]
name = "B"
unit = "U1"
kind = "tube"
material = "TESTSTEEL"
design_temperature = { value = 560, unit = "degC" }
design_pressure = { value = 180, unit = "bar" }
metal_temperature = "TB"
pressure = "PT"
[component.geometry]
outside_diameter = { value = 50.8, unit = "mm" }
wall = { value = 6.0, unit = "mm" }
"#;

    const T0: i64 = 1_790_812_800_000; // 2026-10-01T00:00:00Z
    const MIN: i64 = 60_000;

    fn engine() -> Engine {
        let s = toml::from_str(SHARED).unwrap();
        Engine::new(crate::settings::validate::plan_settings("test", s).unwrap().plan)
    }

    /// Minute `k` of a steady, slowly varying history: (tag, time, value),
    /// the three tags each minute in the order TA, PT, TB.
    fn minute(k: i64) -> [(&'static str, i64, f64); 3] {
        let t = T0 + k * MIN;
        let wobble = ((k % 37) as f64 - 18.0) * 0.5;
        [("TA", t, 560.0 + wobble), ("PT", t, 175.0 - 0.1 * wobble), ("TB", t, 550.0 - wobble)]
    }

    fn feed(e: &mut Engine, minutes: std::ops::Range<i64>) {
        for k in minutes {
            for (tag, t, v) in minute(k) {
                let _ = e.ingest(&Sample { tag: e.tag_id(tag).unwrap(), time_ms: t, value: v, quality: Quality::Good });
            }
        }
    }

    /// The checkpoint of component `name` as the ledger thread would take
    /// it from `e` now.
    fn checkpoint_of(e: &Engine, name: &str) -> Checkpoint {
        let ci = e.plan().components.iter().position(|c| c.name == name).unwrap();
        let tags = e
            .inputs(ci)
            .iter()
            .map(|&ti| (e.plan().tags[ti as usize].name.clone(), e.tags()[ti as usize].clone()))
            .collect();
        let state = e.components()[ci].clone();
        Checkpoint { at_ms: state.integrated_to_ms.unwrap(), written_ms: 0, state, tags }
    }

    fn state(e: &Engine, name: &str) -> ComponentState {
        e.components()[e.plan().components.iter().position(|c| c.name == name).unwrap()].clone()
    }

    /// Applies a plan to an engine the way the store and a restart do:
    /// export, replace, import.
    fn apply(e: &Engine, plan: &RollbackPlan) -> Engine {
        let mut st = e.export_state();
        for c in &plan.components {
            st.components.iter_mut().find(|(n, _)| n == &c.component).unwrap().1 = c.state.clone();
        }
        for t in &plan.tags {
            st.tags.iter_mut().find(|(n, _)| n == &t.tag).unwrap().1 = t.state.clone();
        }
        let mut fresh = Engine::new(e.plan().clone());
        fresh.import_state(st);
        fresh
    }

    fn found(cp: Option<Checkpoint>) -> Found {
        Found { oldest_ms: cp.as_ref().map(|c| c.at_ms), checkpoint: cp }
    }

    /// The claim the component rollback rests on, checked on the engine:
    /// rewinding a tag that another component reads, then delivering the
    /// samples again, leaves that other component exactly as it was, and
    /// brings the rolled-back one to exactly where an unpoisoned run ends.
    #[test]
    fn rewinding_a_shared_tag_counts_nothing_twice_for_the_other_reader() {
        // The unpoisoned run: two days of minutes.
        let mut clean = engine();
        feed(&mut clean, 0..2 * 1440);

        // The same run with a checkpoint of A after the first day, then one
        // TA sample stamped ten years ahead.
        let mut e = engine();
        feed(&mut e, 0..1440);
        let cp = checkpoint_of(&e, "A");
        feed(&mut e, 1440..2 * 1440);
        let far = T0 + 10 * 365 * 1440 * MIN;
        e.ingest(&Sample { tag: e.tag_id("TA").unwrap(), time_ms: far, value: 560.0, quality: Quality::Good }).unwrap();
        assert_eq!(state(&e, "A").integrated_to_ms, Some(far), "the poison took");
        assert!(state(&e, "A").life_fraction > 10.0 * state(&clean, "A").life_fraction);
        assert_eq!(state(&e, "B"), state(&clean, "B"), "B never read TA");

        let scope = Scope::Component("A".into());
        let plan =
            plan_rollback(&e, &scope, T0 + 1500 * MIN, &BTreeMap::from([("A".into(), found(Some(cp)))])).unwrap();
        let names: Vec<&str> = plan.tags.iter().map(|t| t.tag.as_str()).collect();
        assert_eq!(names, ["TA", "PT"], "both inputs of A are rewound, the shared PT too");
        assert_eq!(plan.tags[1].also_read_by, ["B"]);

        let mut back = apply(&e, &plan);
        let b_before = state(&back, "B");
        // Backfill: the second day again (every tag, as a historian export has it).
        feed(&mut back, 1440..2 * 1440);
        assert_eq!(state(&back, "B"), b_before, "B re-integrated nothing");
        assert_eq!(state(&back, "B"), state(&clean, "B"));
        assert_eq!(state(&back, "A"), state(&clean, "A"), "A is where the unpoisoned run is, bit for bit");
        assert_eq!(back.tags(), clean.tags(), "and every tag too");
    }

    /// Without a backfill, the hours from the checkpoint to the next
    /// sample are a gap: past the hold time they are integrated by the gap
    /// policy and counted as unmonitored (the rule of the engine, README
    /// "Integration over time").
    #[test]
    fn without_a_backfill_the_hours_since_the_checkpoint_are_unmonitored() {
        let mut e = engine();
        feed(&mut e, 0..1440);
        let cp = checkpoint_of(&e, "A");
        feed(&mut e, 1440..2 * 1440);
        let plan = plan_rollback(
            &e,
            &Scope::Component("A".into()),
            cp.at_ms,
            &BTreeMap::from([("A".into(), found(Some(cp)))]),
        )
        .unwrap();
        let mut back = apply(&e, &plan);
        let before = state(&back, "A").unmonitored_h;
        // The next data: minute 2880, a day and a minute after the checkpoint.
        feed(&mut back, 2 * 1440..2 * 1440 + 1);
        let a = state(&back, "A");
        assert_eq!(a.integrated_to_ms, Some(T0 + 2880 * MIN));
        // 1441 minutes without samples, the first 900 s held (max_hold_s).
        let want = 1441.0 / 60.0 - 900.0 / 3600.0;
        assert!(
            (a.unmonitored_h - before - want).abs() < 1e-9,
            "{} h unmonitored, want {want}",
            a.unmonitored_h - before
        );
    }

    #[test]
    fn components_at_or_before_the_time_are_left_and_tags_take_the_oldest_copy() {
        let mut e = engine();
        feed(&mut e, 0..100);
        let early_b = checkpoint_of(&e, "B");
        feed(&mut e, 100..200);
        let a = checkpoint_of(&e, "A");
        feed(&mut e, 200..300);
        let found =
            BTreeMap::from([("A".to_string(), found(Some(a.clone()))), ("B".to_string(), found(Some(early_b)))]);
        let plan = plan_rollback(&e, &Scope::Whole, a.at_ms, &found).unwrap();
        assert_eq!(plan.components.len(), 2);
        let pt = plan.tags.iter().find(|t| t.tag == "PT").unwrap();
        assert_eq!(pt.cursor_ms_after, Some(T0 + 99 * MIN), "B's older copy of PT wins");
        assert!(pt.also_read_by.is_empty());

        // Rolled back to a time the ledger has not yet passed: nothing to do.
        let plan = plan_rollback(&e, &Scope::Whole, T0 + 400 * MIN, &found).unwrap();
        assert!(plan.components.is_empty() && plan.tags.is_empty());
        assert_eq!(plan.unchanged.len(), 2);
    }

    #[test]
    fn refusals_name_the_component_the_time_and_the_way_out() {
        let mut e = engine();
        feed(&mut e, 0..100);
        let cp = checkpoint_of(&e, "A");
        feed(&mut e, 100..200);
        let to = T0 + 50 * MIN;
        // Too early: the oldest checkpoint is later than the time asked for.
        let f = BTreeMap::from([("A".to_string(), Found { checkpoint: None, oldest_ms: Some(cp.at_ms) })]);
        let err = plan_rollback(&e, &Scope::Component("A".into()), to, &f).unwrap_err();
        assert_eq!(err.len(), 1, "{err:?}");
        assert!(err[0].contains("component A: no checkpoint at or before 2026-10-01T00:50:00.000Z"), "{}", err[0]);
        assert!(err[0].contains("oldest is at 2026-10-01T01:39:00.000Z"), "{}", err[0]);
        // No checkpoint at all, for both components of a whole rollback.
        let err = plan_rollback(&e, &Scope::Whole, to, &BTreeMap::new()).unwrap_err();
        assert_eq!(err.len(), 2, "{err:?}");
        assert!(err.iter().all(|p| p.contains("holds no checkpoint")), "{err:?}");
        // Not configured.
        let err = plan_rollback(&e, &Scope::Component("C".into()), to, &f).unwrap_err();
        assert!(err[0].contains("\"C\" is not in the configuration") && err[0].contains("A, B"), "{err:?}");
    }

    #[test]
    fn a_rewind_that_would_make_another_reader_read_before_the_samples_is_refused() {
        let mut e = engine();
        feed(&mut e, 0..100);
        let mut cp = checkpoint_of(&e, "A");
        feed(&mut e, 100..200);
        // A hand-made ledger: B integrated to less than the oldest PT
        // sample of A's checkpoint (the engine itself never leaves this).
        let mut st = e.export_state();
        st.components.iter_mut().find(|(n, _)| n == "B").unwrap().1.integrated_to_ms = Some(T0 + 10 * MIN);
        let mut e = Engine::new(e.plan().clone());
        e.import_state(st);
        cp.tags.get_mut("TA").unwrap().prev = None;
        let f = BTreeMap::from([("A".to_string(), found(Some(cp)))]);
        let err = plan_rollback(&e, &Scope::Component("A".into()), T0 + 150 * MIN, &f).unwrap_err();
        assert_eq!(err.len(), 1, "{err:?}");
        assert!(err[0].starts_with("tag PT:") && err[0].contains("component B"), "{}", err[0]);
        assert!(err[0].contains("--component B") && err[0].contains("--all"), "{}", err[0]);
    }
}
