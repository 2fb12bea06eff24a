//! Inspection records over HTTP: `GET /api/components/{name}/inspections`
//! lists a component's records (read-only connection), `POST` to the same
//! path appends one (bearer token of `[http] token_env`, and the person's
//! name in `entered_by`), and `GET /api/components/{name}/history` gives the
//! daily history.
//!
//! A POST answers 201 only once the record is on disk (its own SQLite
//! transaction, beside the ledger thread's connection); the ledger thread
//! accepts it into the engine at its next idle moment (within about a
//! second) and writes the acceptance with the component's new state.

use super::http::HttpState;
use crate::store::inspection::{read_history, read_inspections, NewInspection};
use axum::extract::{Path, State};
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use axum::{Json, Router};

/// The routes, merged into the service router.
pub fn routes() -> Router<HttpState> {
    Router::new()
        .route("/api/components/:name/inspections", get(list).post(add))
        .route("/api/components/:name/history", get(history))
        .route("/report/:name", get(report))
}

/// Query of `/report/{name}`.
#[derive(Debug, serde::Deserialize)]
struct ReportQuery {
    /// `html` (default), `csv` or `json`.
    format: Option<String>,
    /// Temperature shift of the what-if profiles, K (default 10).
    shift_k: Option<f64>,
}

/// The assessment report of one component (`lifeledger report`), built
/// from the ledger file and the configuration the service started with.
async fn report(
    State(s): State<HttpState>,
    Path(name): Path<String>,
    axum::extract::Query(q): axum::extract::Query<ReportQuery>,
) -> Response {
    let Some(cfg) = s.config.clone() else {
        return (StatusCode::NOT_FOUND, "no configuration to build a report from\n").into_response();
    };
    if !known(&s, name.as_str()) {
        return (StatusCode::NOT_FOUND, format!("no component {name:?}\n")).into_response();
    }
    let path = s.trend.path().to_path_buf();
    let shift = q.shift_k.filter(|k| k.is_finite()).unwrap_or(10.0);
    let scope = crate::assessment::Scope::Component(name);
    let built = tokio::task::spawn_blocking(move || {
        crate::assessment::build(&cfg, &path, &scope, shift, crate::store::wall_clock_ms(), true)
    })
    .await;
    let a = match built {
        Ok(Ok(a)) => a,
        Ok(Err(e)) => return (StatusCode::INTERNAL_SERVER_ERROR, format!("{e:#}\n")).into_response(),
        Err(e) => {
            return (StatusCode::INTERNAL_SERVER_ERROR, format!("building the report failed: {e}\n")).into_response()
        }
    };
    match q.format.as_deref().unwrap_or("html") {
        "csv" => ([(header::CONTENT_TYPE, "text/csv; charset=utf-8")], crate::assessment::csv(&a)).into_response(),
        "json" => Json(a).into_response(),
        "html" => {
            ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], crate::assessment::html::render(&a)).into_response()
        }
        other => (StatusCode::BAD_REQUEST, format!("format {other:?}: use html, csv or json\n")).into_response(),
    }
}

/// The body of a POST.
#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct AddBody {
    /// Date of the finding: 2026-04-15 or RFC 3339.
    date: String,
    entered_by: String,
    kind: String,
    #[serde(default)]
    value: Option<f64>,
    #[serde(default = "mm")]
    unit: String,
    #[serde(default)]
    method: String,
    #[serde(default)]
    location: String,
    #[serde(default)]
    notes: String,
    #[serde(default)]
    class: Option<String>,
    #[serde(default)]
    rebase: bool,
    #[serde(default)]
    service_h: Option<f64>,
    #[serde(default)]
    heat_flux_kw_m2: Option<f64>,
    #[serde(default)]
    supersedes: Option<i64>,
}

fn mm() -> String {
    "mm".into()
}

fn known(s: &HttpState, name: &str) -> bool {
    s.snapshot.borrow().components.iter().any(|c| c.component == name)
}

async fn list(State(s): State<HttpState>, Path(name): Path<String>) -> Response {
    if !known(&s, name.as_str()) {
        return (StatusCode::NOT_FOUND, format!("no component {name:?}\n")).into_response();
    }
    let path = s.trend.path().to_path_buf();
    let c = name.clone();
    let read = move || -> Result<_, crate::store::StoreError> {
        let rows = read_inspections(&path, Some(&c))?;
        // The records as the ledger applied them live in the component's state.
        let events: Vec<crate::engine::inspection::Event> = crate::store::read_ledger_beside(&path)?
            .components
            .into_iter()
            .find(|(n, _)| *n == c)
            .and_then(|(_, json)| serde_json::from_str::<crate::engine::ComponentState>(&json).ok())
            .map(|st| st.inspection.events)
            .unwrap_or_default();
        Ok((rows, events))
    };
    match tokio::task::spawn_blocking(read).await {
        Ok(Ok((rows, events))) => {
            let records: Vec<serde_json::Value> = rows
                .iter()
                .map(|r| {
                    let mut v = serde_json::to_value(r).unwrap_or_default();
                    if let Some(o) = v.as_object_mut() {
                        let accepted = r.accepted.as_deref().and_then(|a| serde_json::from_str(a).ok());
                        o.insert("accepted".into(), accepted.unwrap_or(serde_json::Value::Null));
                        o.insert("detail".into(), serde_json::from_str(&r.detail).unwrap_or_default());
                        let by = rows.iter().find(|o| o.supersedes == Some(r.id)).map(|o| o.id);
                        o.insert("superseded_by".into(), by.into());
                        o.insert("finding_date".into(), crate::event_time::rfc3339_ms(r.finding_ms).into());
                        let ledger = events.iter().find(|e| e.id == r.id).and_then(|e| serde_json::to_value(e).ok());
                        o.insert("ledger".into(), ledger.unwrap_or(serde_json::Value::Null));
                    }
                    v
                })
                .collect();
            Json(serde_json::json!({"component": name, "records": records, "caution": crate::CAUTION})).into_response()
        }
        Ok(Err(e)) => (StatusCode::INTERNAL_SERVER_ERROR, format!("{e}\n")).into_response(),
        Err(e) => {
            (StatusCode::INTERNAL_SERVER_ERROR, format!("reading inspection records failed: {e}\n")).into_response()
        }
    }
}

async fn history(State(s): State<HttpState>, Path(name): Path<String>) -> Response {
    if !known(&s, name.as_str()) {
        return (StatusCode::NOT_FOUND, format!("no component {name:?}\n")).into_response();
    }
    let path = s.trend.path().to_path_buf();
    let c = name.clone();
    match tokio::task::spawn_blocking(move || read_history(&path, &c)).await {
        Ok(Ok(points)) => Json(serde_json::json!({"component": name, "points": points})).into_response(),
        Ok(Err(e)) => (StatusCode::INTERNAL_SERVER_ERROR, format!("{e}\n")).into_response(),
        Err(e) => (StatusCode::INTERNAL_SERVER_ERROR, format!("reading the history failed: {e}\n")).into_response(),
    }
}

/// Appends a record: 201 `{"id", ...}` once durable; 400 a record that
/// does not check (the problem named); 401/403 as for alarm commands; 404
/// an unknown component.
async fn add(
    State(s): State<HttpState>,
    Path(name): Path<String>,
    headers: axum::http::HeaderMap,
    body: axum::body::Bytes,
) -> Response {
    let Some(token) = &s.token else {
        return (StatusCode::FORBIDDEN, "read-only: no [http] token_env configured\n").into_response();
    };
    let given =
        headers.get(header::AUTHORIZATION).and_then(|v| v.to_str().ok()).and_then(|v| v.strip_prefix("Bearer "));
    if !given.is_some_and(|g| crate::alarm::tokens_match(g.as_bytes(), token.as_bytes())) {
        return (StatusCode::UNAUTHORIZED, "missing or wrong bearer token\n").into_response();
    }
    if !known(&s, name.as_str()) {
        return (StatusCode::NOT_FOUND, format!("no component {name:?}\n")).into_response();
    }
    let b: AddBody = match serde_json::from_slice(&body) {
        Ok(b) => b,
        Err(e) => return (StatusCode::BAD_REQUEST, format!("inspection record: {e}\n")).into_response(),
    };
    let Some(finding_ms) = crate::settings::validate::parse_date_ms(b.date.trim()) else {
        return (StatusCode::BAD_REQUEST, format!("date {:?}: give 2026-04-15 or RFC 3339\n", b.date)).into_response();
    };
    let detail = crate::inspection::Detail {
        class: b.class,
        rebase: b.rebase,
        service_h: b.service_h,
        heat_flux_kw_m2: b.heat_flux_kw_m2,
    };
    let n = NewInspection {
        component: name.clone(),
        finding_ms,
        entered_ms: crate::store::wall_clock_ms(),
        entered_by: b.entered_by.trim().to_string(),
        method: b.method,
        location: b.location,
        kind: b.kind,
        value: b.value,
        unit: b.unit,
        detail: serde_json::to_string(&detail).unwrap_or_else(|_| "{}".into()),
        notes: b.notes,
        supersedes: b.supersedes,
    };
    if let Err(e) = crate::inspection::check_new(&n, &[name.as_str()]) {
        return (StatusCode::BAD_REQUEST, format!("{e}\n")).into_response();
    }
    let path = s.trend.path().to_path_buf();
    let result = tokio::task::spawn_blocking(move || {
        let mut store = crate::store::Store::attach(&path)?;
        store.append_inspection(&n)
    })
    .await;
    match result {
        Ok(Ok(id)) => (
            StatusCode::CREATED,
            Json(serde_json::json!({
                "id": id,
                "component": name,
                "status": "recorded; the ledger applies it within a second or two",
            })),
        )
            .into_response(),
        Ok(Err(e)) => (StatusCode::BAD_REQUEST, format!("{e}\n")).into_response(),
        Err(e) => (StatusCode::INTERNAL_SERVER_ERROR, format!("appending failed: {e}\n")).into_response(),
    }
}
