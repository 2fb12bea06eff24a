//! `lifeledger inspection add | correct | list`: inspection records at the
//! command line, against the ledger of a stopped or a running service.
//!
//! The record is appended to the ledger file in its own transaction. With
//! the service stopped, the file is taken with the exclusive lock
//! (`Store::open_exclusive`, as rollback and backfill do); while the service
//! runs (the lock is refused), it is appended through an SQLite connection
//! beside the service's (WAL lets both write, one transaction at a time),
//! and the service accepts it at its next idle moment. Either way the
//! command says "recorded" only once the row is on disk.

use std::path::PathBuf;

use anyhow::{Context, Result};

use crate::store::inspection::{read_inspections, InspectionRow, NewInspection};
use crate::store::{Store, StoreError};

/// The fields of a finding, shared by `add` and `correct`.
#[derive(Debug, Clone, PartialEq, clap::Args)]
pub struct FindingArgs {
    /// Configuration file (TOML) of the service.
    #[arg(long, short)]
    pub config: PathBuf,
    /// Ledger file [default: the [store] path of the configuration].
    #[arg(long)]
    pub ledger: Option<PathBuf>,
    /// Date of the finding (2026-04-15 or RFC 3339).
    #[arg(long, value_name = "DATE")]
    pub date: String,
    /// Who enters the record.
    #[arg(long, value_name = "NAME")]
    pub by: String,
    /// wall_thickness, creep_strain, wear_depth, replica, oxide_thickness.
    #[arg(long)]
    pub kind: String,
    /// The measured value (not for replica).
    #[arg(long)]
    pub value: Option<f64>,
    /// Unit of the value: mm, um, in; % or fraction for strain.
    #[arg(long, default_value = "mm")]
    pub unit: String,
    /// Replica class: 0, A, B, C, D.
    #[arg(long)]
    pub class: Option<String>,
    /// Replica: re-base the life fraction into the class's bounds.
    #[arg(long)]
    pub rebase: bool,
    /// Oxide: service hours the scale grew in.
    #[arg(long, value_name = "HOURS")]
    pub service_hours: Option<f64>,
    /// Oxide: heat flux through the tube wall, kW/m² (the report then
    /// projects the scale's growth and its insulating effect).
    #[arg(long, value_name = "KW_PER_M2")]
    pub heat_flux_kw_m2: Option<f64>,
    /// Method (for example "UT, 5 MHz dual element").
    #[arg(long, default_value = "")]
    pub method: String,
    /// Location on the part.
    #[arg(long, default_value = "")]
    pub location: String,
    #[arg(long, default_value = "")]
    pub notes: String,
}

/// The `inspection` subcommands.
#[derive(Debug, Clone, PartialEq, clap::Subcommand)]
pub enum InspectionCommand {
    /// Record an inspection finding for a component.
    Add {
        /// The component.
        #[arg(long, value_name = "NAME")]
        component: String,
        #[command(flatten)]
        finding: FindingArgs,
    },
    /// Record a correction: a new record that supersedes record ID (nothing is deleted).
    Correct {
        /// The record corrected.
        #[arg(long)]
        id: i64,
        #[command(flatten)]
        finding: FindingArgs,
    },
    /// List the inspection records of the ledger (read-only, safe while the service runs).
    List {
        #[arg(long, short)]
        config: PathBuf,
        #[arg(long)]
        ledger: Option<PathBuf>,
        #[arg(long, value_name = "NAME")]
        component: Option<String>,
        /// JSON (the records file `replay --inspections` reads).
        #[arg(long)]
        json: bool,
    },
}

/// The detail JSON of the arguments.
fn detail_of(a: &FindingArgs) -> String {
    let d = crate::inspection::Detail {
        class: a.class.clone(),
        rebase: a.rebase,
        service_h: a.service_hours,
        heat_flux_kw_m2: a.heat_flux_kw_m2,
    };
    serde_json::to_string(&d).unwrap_or_else(|_| "{}".into())
}

/// Runs an `inspection` subcommand.
pub fn run(cmd: &InspectionCommand) -> Result<i32> {
    match cmd {
        InspectionCommand::Add { component, finding } => append(component.clone(), None, finding),
        InspectionCommand::Correct { id, finding } => {
            let (_, service) = crate::service::load_service(&finding.config)?;
            let path = finding.ledger.clone().unwrap_or(service.store.path);
            let rows = read_inspections(&path, None)?;
            let old = rows.iter().find(|r| r.id == *id).with_context(|| format!("--id {id}: no such record"))?;
            append(old.component.clone(), Some(*id), finding)
        }
        InspectionCommand::List { config, ledger, component, json } => {
            let (_, service) = crate::service::load_service(config)?;
            let path = ledger.clone().unwrap_or(service.store.path);
            let rows = read_inspections(&path, component.as_deref())?;
            let mut out = String::new();
            if *json {
                out = serde_json::to_string_pretty(&rows)?;
            } else {
                for r in &rows {
                    out.push_str(&line(r, &rows));
                    out.push('\n');
                }
                if rows.is_empty() {
                    out.push_str("no inspection records\n");
                }
            }
            println!("{}", out.trim_end());
            Ok(0)
        }
    }
}

/// One record as a line for people.
pub fn line(r: &InspectionRow, all: &[InspectionRow]) -> String {
    let value = match (r.value, r.kind.as_str()) {
        (_, "replica") => format!(
            "class {}",
            serde_json::from_str::<crate::inspection::Detail>(&r.detail).ok().and_then(|d| d.class).unwrap_or_default()
        ),
        (Some(v), _) => format!("{v} {}", r.unit),
        (None, _) => String::new(),
    };
    let state = if let Some(by) = all.iter().find(|o| o.supersedes == Some(r.id)) {
        format!("superseded by #{}", by.id)
    } else if r.accepted.is_some() {
        "applied".into()
    } else {
        "pending (applied when the service next runs)".into()
    };
    let corr = r.supersedes.map(|s| format!(" corrects #{s};")).unwrap_or_default();
    format!(
        "#{} {} {} {} = {} by {}; {} {};{} {}",
        r.id,
        crate::event_time::rfc3339_ms(r.finding_ms),
        r.component,
        r.kind,
        value,
        r.entered_by,
        r.method,
        r.location,
        corr,
        state
    )
}

fn append(component: String, supersedes: Option<i64>, a: &FindingArgs) -> Result<i32> {
    let (cfg, service) = crate::service::load_service(&a.config)?;
    let path = a.ledger.clone().unwrap_or(service.store.path);
    let finding_ms = crate::settings::validate::parse_date_ms(a.date.trim())
        .with_context(|| format!("--date {:?} is not a date; give 2026-04-15 or RFC 3339", a.date))?;
    let n = NewInspection {
        component,
        finding_ms,
        entered_ms: crate::store::wall_clock_ms(),
        entered_by: a.by.trim().to_string(),
        method: a.method.clone(),
        location: a.location.clone(),
        kind: a.kind.clone(),
        value: a.value,
        unit: a.unit.clone(),
        detail: detail_of(a),
        notes: a.notes.clone(),
        supersedes,
    };
    let names: Vec<&str> = cfg.plan.components.iter().map(|c| c.name.as_str()).collect();
    crate::inspection::check_new(&n, &names).map_err(|e| anyhow::anyhow!("{e}"))?;
    let (id, running) = match Store::open_exclusive(&path, false) {
        Ok(mut s) => (s.append_inspection(&n)?, false),
        Err(StoreError::InUse { .. }) => (Store::attach(&path)?.append_inspection(&n)?, true),
        Err(e) => return Err(e.into()),
    };
    let when = if running {
        "the running service applies it within a second or two"
    } else {
        "the service applies it when it next starts (or the next backfill does)"
    };
    println!("recorded inspection record #{id} for {} in {}; {when}", n.component, path.display());
    Ok(0)
}
