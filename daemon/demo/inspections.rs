//! The demo's inspection findings, invented for the demo: during the
//! shutdown of day [`super::sim::SHUTDOWN_DAY`] the outage team surveys
//! outlet leg A. A wall thickness (ultrasonic, 5.50 mm where the
//! configuration carries 8.0 − 2.2 = 5.8 mm) and a steam-side oxide
//! thickness (0.30 mm after 62 000 service hours, at a heat flux of 120 kW/m²) are entered into the
//! running service's ledger the way the command line does it, so the
//! status page and `lifeledger report` show them.

use std::path::Path;

use crate::store::inspection::{read_inspections, NewInspection};
use crate::store::Store;

/// The component the demo's findings are for.
pub const COMPONENT: &str = "U2-SH3-OUTLET-LEG-A";

/// The findings, dated `finding_ms` (the shutdown), entered at `now_ms`.
pub fn findings(finding_ms: i64, now_ms: i64) -> Vec<NewInspection> {
    let base = |kind: &str, value: f64, detail: &str, method: &str, notes: &str| NewInspection {
        component: COMPONENT.into(),
        finding_ms,
        entered_ms: now_ms,
        entered_by: "demo outage team (invented)".into(),
        method: method.into(),
        location: "bend 4, extrados, 12 o'clock".into(),
        kind: kind.into(),
        value: Some(value),
        unit: "mm".into(),
        detail: detail.into(),
        notes: notes.into(),
        supersedes: None,
    };
    vec![
        base(
            "wall_thickness",
            5.50,
            "{}",
            "ultrasonic thickness, 5 MHz dual element",
            "wall survey of the shutdown; minimum of a 9-point grid (demo data)",
        ),
        base(
            "oxide_thickness",
            0.30,
            "{\"service_h\":62000,\"heat_flux_kw_m2\":120}",
            "ultrasonic oxide measurement",
            "internal steam-side scale (demo data)",
        ),
    ]
}

/// Enters the findings into the ledger at `path` once (not again when a
/// named demo state directory already holds records for the component).
pub fn enter(path: &Path, finding_ms: i64, now_ms: i64) -> anyhow::Result<usize> {
    if !read_inspections(path, Some(COMPONENT))?.is_empty() {
        return Ok(0);
    }
    let mut store = Store::attach(path)?;
    let list = findings(finding_ms, now_ms);
    for f in &list {
        store.append_inspection(f)?;
    }
    Ok(list.len())
}
