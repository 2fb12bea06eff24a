//! `lifeledger resend`: re-sends `component_state` points of one component,
//! or of every component of the plant, for a range of event time, from the
//! ledger's own records to the configured time-series database.
//!
//! For a database that lost points it had accepted (a crash of the
//! database, a restored database backup, a new database): the ledger keeps
//! each component's trend (`crate::store::trend`), one row per
//! `component_state` point the service wrote, keyed by event time. Each row
//! becomes the point again, with the same measurement, tags and event time,
//! so sending it twice, or over a point the database still holds, changes
//! nothing (the database keeps one value per series and time; with
//! VictoriaMetrics, run it with `-dedup.minScrapeInterval=1ms`).
//!
//! What the trend keeps is what can be re-sent: the fields
//! `metal_temperature_k`, `pressure_mpa`, `hoop_stress_mpa`,
//! `creep_life_fraction`, `creep_strain` (parts with a metal temperature
//! input) and `wear_index` (parts with a wear model). The other fields of
//! the original point (damage and creep rates, hours in the creep range,
//! wear depth, remaining life, unmonitored hours, `exhausted`) are not kept
//! per point and are not re-sent; nor are points older than the trend's
//! bound (`[store] trend_points_per_component`, a week by default).
//!
//! It only reads the ledger (a read-only connection per component, which
//! WAL allows beside a running service), so it may run while the service
//! runs.

use std::path::Path;

use crate::engine::ComponentPlan;
use crate::lineproto::Point;
use crate::physics::units::celsius_to_kelvin;
use crate::settings::LoadedConfig;
use crate::store::{TrendPoint, TrendReader, TrendWindow};

use super::rollback::Scope;

/// The points to re-send: per component in scope, its line-protocol lines
/// for the trend points with event time in `from_ms..=to_ms`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Resend {
    /// (component name, lines), in the configuration's order.
    pub components: Vec<(String, Vec<String>)>,
}

impl Resend {
    /// Every line, component after component, oldest first.
    pub fn lines(&self) -> impl Iterator<Item = &String> {
        self.components.iter().flat_map(|(_, l)| l)
    }
}

/// Reads the points of `scope` with event time in `from_ms..=to_ms` from
/// the ledger at `ledger` and turns them into `component_state` lines.
///
/// A component named in `scope` that the configuration does not have is
/// refused (its unit and material, which tag the points, are known only
/// from the configuration).
pub fn collect(cfg: &LoadedConfig, ledger: &Path, scope: &Scope, from_ms: i64, to_ms: i64) -> anyhow::Result<Resend> {
    if from_ms > to_ms {
        anyhow::bail!("resend: --from is after --to; give the earlier time first");
    }
    let plans: Vec<&ComponentPlan> = match scope {
        Scope::Whole => cfg.plan.components.iter().collect(),
        Scope::Component(name) => match cfg.plan.components.iter().find(|c| &c.name == name) {
            Some(p) => vec![p],
            None => anyhow::bail!(
                "resend: component {name:?} is not in the configuration {}; give one of: {}",
                cfg.file,
                cfg.plan.components.iter().map(|c| c.name.as_str()).collect::<Vec<_>>().join(", ")
            ),
        },
    };
    if !ledger.exists() {
        anyhow::bail!("resend: no ledger at {}; check `--ledger` or the [store] path", ledger.display());
    }
    let reader = TrendReader::new(ledger);
    let mut out = Resend::default();
    for plan in plans {
        let points = reader.component(&plan.name, TrendWindow { since_ms: Some(from_ms), limit: None })?;
        let lines =
            points.iter().filter(|p| p.t <= to_ms).filter_map(|p| point(&cfg.plan.plant, plan, p).to_line()).collect();
        out.components.push((plan.name.clone(), lines));
    }
    Ok(out)
}

/// The `component_state` point of one trend point: the tags and the fields
/// `crate::report::component_point` gives the same figures (a field the
/// trend holds as not a number is left out).
pub fn point(plant: &str, plan: &ComponentPlan, p: &TrendPoint) -> Point {
    let mut point = Point::new(crate::series_model::COMPONENT_STATE.name, p.t * 1_000_000)
        .tag("plant", plant)
        .tag("unit", &plan.unit)
        .tag("component", &plan.name)
        .tag("material", &plan.material.grade);
    if plan.metal_temperature.is_some() {
        point = point
            .float("metal_temperature_k", celsius_to_kelvin(p.metal_temperature_c))
            .float("pressure_mpa", p.pressure_mpa)
            .float("hoop_stress_mpa", p.hoop_stress_mpa)
            .float("creep_life_fraction", p.creep_life_fraction)
            .float("creep_strain", p.creep_strain);
    }
    if plan.wear.is_some() {
        point = point.float("wear_index", p.wear_index);
    }
    if plan.fatigue.is_some() && p.fatigue_usage.is_finite() {
        point = point.float("fatigue_stress_mpa", p.fatigue_stress_mpa).float("fatigue_usage", p.fatigue_usage);
    }
    point
}
