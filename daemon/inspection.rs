//! Inspection records between the people who enter them and the engine
//! that applies them: checking a record as entered (command line, HTTP
//! API), turning a stored row into an engine [`Finding`], and the one
//! acceptance rule the live service, `replay` and the tools share.
//!
//! How a record reaches the ledger: it is appended to the ledger file
//! ([`Store::append_inspection`], durable when it returns; only then is the
//! person told it is recorded). A running service picks up rows not yet
//! accepted at its next idle moment ([`accept_pending`]), gives each its
//! effective instant and reference values (`engine::inspection`), and marks
//! it accepted in the same transaction as the component's new state. A
//! stopped service does so when it starts. `replay --inspections FILE`
//! feeds the accepted records of `lifeledger inspection list --json` to the
//! engine at their effective instants, so it gives the live ledger.
//!
//! CAUTION: what a finding does to the ledger rests on built-in screening
//! correlations (see `physics::inspection`); they are not authoritative.

use serde::{Deserialize, Serialize};

use crate::engine::inspection::{Event, Finding, NewFinding, Reference};
use crate::engine::Engine;
use crate::physics::inspection::ReplicaClass;
use crate::store::inspection::{HistoryPoint, InspectionRow, NewInspection};
use crate::store::Store;

/// The kinds of finding, as stored and typed.
pub const KINDS: &[&str] = &["wall_thickness", "creep_strain", "wear_depth", "replica", "oxide_thickness"];

/// Kind-specific fields of a record (its `detail` JSON).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Detail {
    /// Replica: the class (`0`, `A`, `B`, `C`, `D`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub class: Option<String>,
    /// Replica: re-base the life fraction into the class's bounds.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub rebase: bool,
    /// Oxide: hours of service the scale grew in.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub service_h: Option<f64>,
    /// Oxide: heat flux through the tube wall, kW/m², for the report's
    /// projection of scale growth and its insulating effect.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub heat_flux_kw_m2: Option<f64>,
}

/// A length in `unit` as mm.
fn length_mm(v: f64, unit: &str) -> Result<f64, String> {
    match unit {
        "mm" => Ok(v),
        "um" | "µm" => Ok(v / 1000.0),
        "in" => Ok(v * 25.4),
        other => Err(format!("unit \"{other}\" is not a length; use mm, um or in")),
    }
}

/// The finding a stored (or entered) record states, or what is wrong
/// with it.
pub fn finding_of(kind: &str, value: Option<f64>, unit: &str, detail: &str) -> Result<Finding, String> {
    let d: Detail = if detail.trim().is_empty() {
        Detail::default()
    } else {
        serde_json::from_str(detail).map_err(|e| format!("detail {detail}: {e}"))?
    };
    let need = |what: &str| -> Result<f64, String> {
        match value {
            Some(v) if v.is_finite() && v >= 0.0 => Ok(v),
            Some(v) => Err(format!("{what} {v} must be a finite number ≥ 0")),
            None => Err(format!("a {kind} record needs a value ({what})")),
        }
    };
    match kind {
        "wall_thickness" => {
            let w = length_mm(need("wall thickness")?, unit)?;
            if !(w > 0.0) {
                return Err("a wall thickness must be above 0".into());
            }
            Ok(Finding::WallThickness { wall_mm: w })
        }
        "creep_strain" => {
            let v = need("creep strain")?;
            let strain = match unit {
                "%" | "percent" => v / 100.0,
                "fraction" | "" => v,
                other => return Err(format!("unit \"{other}\" is not a strain; use % or fraction")),
            };
            if !(strain < 1.0) {
                return Err(format!("creep strain {strain} (as a fraction) is not plausible; give % or fraction"));
            }
            Ok(Finding::CreepStrain { strain })
        }
        "wear_depth" => Ok(Finding::WearDepth { depth_mm: length_mm(need("wear depth")?, unit)? }),
        "replica" => {
            let c = d.class.as_deref().ok_or("a replica record needs a class (0, A, B, C or D)")?;
            let class = ReplicaClass::parse(c)
                .ok_or_else(|| format!("replica class \"{c}\" is not one of 0, A, B, C, D (Neubauer classes)"))?;
            Ok(Finding::Replica { class, rebase: d.rebase })
        }
        "oxide_thickness" => {
            let oxide_mm = length_mm(need("oxide thickness")?, unit)?;
            let service_h = d.service_h.ok_or("an oxide record needs the service hours the scale grew in")?;
            if !(service_h > 1.0 && service_h.is_finite()) {
                return Err(format!("service hours {service_h} must be above 1"));
            }
            if !(oxide_mm > 0.0) {
                return Err("an oxide thickness must be above 0".into());
            }
            if let Some(q) = d.heat_flux_kw_m2 {
                if !(0.0..2000.0).contains(&q) {
                    return Err(format!("heat flux {q} kW/m² is not plausible (0 to 2000)"));
                }
            }
            Ok(Finding::OxideThickness { oxide_mm, service_h })
        }
        other => Err(format!("kind \"{other}\" is not one of {}", KINDS.join(", "))),
    }
}

/// Checks a record as entered against the plan: known component, a
/// person's name, a finding that parses. Returns it unchanged or the
/// problem, naming the field.
pub fn check_new(n: &NewInspection, components: &[&str]) -> Result<(), String> {
    if !components.contains(&n.component.as_str()) {
        return Err(format!("component \"{}\": no such component in the configuration", n.component));
    }
    if n.entered_by.trim().is_empty() {
        return Err("entered_by: give the name of the person entering the record".into());
    }
    finding_of(&n.kind, n.value, &n.unit, &n.detail).map(|_| ()).map_err(|e| format!("{}: {e}", n.kind))
}

/// The reference values of a history point.
fn reference_of(p: &HistoryPoint) -> Reference {
    Reference { life_fraction: p.life_fraction, creep_strain: p.creep_strain, wear_depth_mm: p.wear_depth_mm }
}

/// Accepts the store's pending records into the engine: each gets its
/// effective instant and, when late, the ledger's values at the newest
/// daily history point at or before its date. Returns (id, accepted JSON)
/// for the caller's next commit. A record whose component is not in the
/// plan, or that does not parse, stays pending and is reported in `skipped`.
/// Ids in `in_flight` (accepted, commit not yet done) are passed over.
pub fn accept_pending(
    engine: &mut Engine,
    store: &Store,
    in_flight: &[(i64, String)],
    skipped: &mut Vec<(i64, String)>,
) -> Result<Vec<(i64, String)>, crate::store::StoreError> {
    let mut out = vec![];
    for row in store.pending_inspections()? {
        if in_flight.iter().any(|(id, _)| *id == row.id) {
            continue;
        }
        let Some(ci) = engine.component_index(&row.component) else {
            skipped.push((row.id, format!("component {} is not in the configuration", row.component)));
            continue;
        };
        let finding = match finding_of(&row.kind, row.value, &row.unit, &row.detail) {
            Ok(f) => f,
            Err(e) => {
                skipped.push((row.id, e));
                continue;
            }
        };
        let (_, late) = engine.inspection_instant(ci, row.finding_ms);
        let reference = if late {
            store.history_at_or_before(&row.component, row.finding_ms)?.map(|p| reference_of(&p))
        } else {
            None
        };
        let ev = engine.accept_inspection(
            ci,
            NewFinding { id: row.id, finding_ms: row.finding_ms, supersedes: row.supersedes, finding },
            reference,
        );
        out.push((row.id, serde_json::to_string(&ev).unwrap_or_default()));
    }
    Ok(out)
}

/// Offers the engine every accepted record its state does not hold (after
/// a rollback, or a state older than the record): at its stored effective
/// instant.
pub fn offer_accepted(engine: &mut Engine, rows: &[InspectionRow]) {
    for row in rows {
        let (Some(json), Some(ci)) = (&row.accepted, engine.component_index(&row.component)) else { continue };
        if let Ok(ev) = serde_json::from_str::<Event>(json) {
            engine.offer_event(ci, ev);
        }
    }
}

/// The daily history points of the components in `changed`.
pub fn history_points(engine: &Engine, changed: &[usize]) -> Vec<(String, HistoryPoint)> {
    let mut out = Vec::with_capacity(changed.len());
    for &ci in changed {
        let plan = &engine.plan().components[ci];
        let st = &engine.components()[ci];
        let Some(t_ms) = st.integrated_to_ms else { continue };
        let pr = crate::engine::component::projection(plan, st);
        out.push((
            plan.name.clone(),
            HistoryPoint {
                t_ms,
                life_fraction: st.life_fraction,
                creep_strain: st.creep_strain,
                wear_depth_mm: st.wear_depth_mm,
                wear_index: st.wear_index(plan),
                integrated_h: st.integrated_h,
                unmonitored_h: st.unmonitored_h,
                extrapolated_h: st.extrapolated_h,
                life_fraction_rate_per_h: pr.life_fraction_rate_per_h,
                creep_strain_rate_per_h: pr.creep_strain_rate_per_h,
                wear_rate_mm_per_h: pr.wear_rate_mm_per_h,
                hoop_stress_mpa: st.now.hoop_stress_mpa,
                metal_temperature_k: st.now.metal_temperature_k,
            },
        ));
    }
    out
}

/// A records file for `replay --inspections`: the JSON array that
/// `lifeledger inspection list --json` writes. Accepted records go in at
/// their stored effective instants; records not yet accepted are accepted
/// as the replay reaches them (at their date, the replay starting before).
pub fn load_records_file(path: &std::path::Path) -> anyhow::Result<Vec<InspectionRow>> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| anyhow::anyhow!("inspection records {}: cannot read: {e}", path.display()))?;
    serde_json::from_str(&text).map_err(|e| {
        anyhow::anyhow!(
            "inspection records {}: {e}; expected the JSON array of `lifeledger inspection list --json`",
            path.display()
        )
    })
}

/// Offers a records file's rows to an engine before a replay: accepted
/// ones as stored, the others accepted now (at their date, or the ledger's
/// instant if later; no history: reference = initial values).
pub fn offer_rows_for_replay(engine: &mut Engine, rows: &[InspectionRow]) -> Result<(), String> {
    offer_accepted(engine, rows);
    for row in rows.iter().filter(|r| r.accepted.is_none()) {
        let ci = engine.component_index(&row.component).ok_or_else(|| {
            format!("inspection record {}: component {} is not in the configuration", row.id, row.component)
        })?;
        let finding = finding_of(&row.kind, row.value, &row.unit, &row.detail)
            .map_err(|e| format!("inspection record {}: {e}", row.id))?;
        engine.accept_inspection(
            ci,
            NewFinding { id: row.id, finding_ms: row.finding_ms, supersedes: row.supersedes, finding },
            None,
        );
    }
    Ok(())
}
