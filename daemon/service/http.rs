//! The HTTP side: health, readiness, Prometheus metrics, the JSON snapshot,
//! a component's trend and its alarm history. Read-only (alarm commands
//! aside, which go to the ledger thread): it reads the snapshot the ledger
//! thread publishes, and the trends and the alarm journal from the ledger
//! file on read-only connections of its own.

use super::snapshot::{metrics_text, Snapshot};
use crate::store::{StoreError, TrendWindow};
use axum::extract::State;
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use axum::{Json, Router};
use std::sync::Arc;
use tokio::sync::watch;

/// Shared state of the handlers: the latest snapshot.
#[derive(Clone)]
pub struct HttpState {
    pub snapshot: watch::Receiver<Arc<Snapshot>>,
    /// Token allowing acknowledge/shelve over HTTP; `None`: read-only.
    pub token: Option<String>,
    /// Where HTTP alarm commands go (the ledger thread).
    pub commands: tokio::sync::mpsc::Sender<crate::ingest::Inbound>,
    /// The material library in use.
    pub library: Arc<crate::settings::library::MaterialLibrary>,
    /// The ledger's alarm journal, for `/api/components/{name}/alarms`.
    pub journal: crate::store::JournalReader,
    /// The ledger's component trends, for `/api/components/{name}/trend`.
    pub trend: crate::store::TrendReader,
    /// The configuration the service started with, for `/report/{name}`.
    pub config: Option<Arc<crate::settings::LoadedConfig>>,
}

/// Events `/api/components/{name}/alarms` returns without `limit`.
const DEFAULT_HISTORY_LIMIT: usize = 100;
/// Most events one `/api/components/{name}/alarms` answer carries.
const MAX_HISTORY_LIMIT: usize = 10_000;

/// The router.
pub fn router(state: HttpState) -> Router {
    Router::new()
        .route("/healthz", get(healthz))
        .route("/readyz", get(readyz))
        .route("/metrics", get(metrics))
        .route("/api/components", get(components))
        .route("/api/components/:name/trend", get(trend))
        .route("/api/components/:name/alarms", get(alarm_history))
        .route("/api/materials/:grade", get(material))
        .route("/api/alarms/command", axum::routing::post(alarm_command))
        .route("/api/operator/check", get(operator_check))
        .merge(super::http_inspection::routes())
        .merge(super::page::routes())
        .with_state(state)
}

async fn healthz() -> &'static str {
    "ok\n"
}

async fn readyz(State(s): State<HttpState>) -> Response {
    let snap = s.snapshot.borrow().clone();
    match snap.not_ready() {
        None => {
            let stale: Vec<&str> = snap.freshness.tags.iter().filter(|t| t.stale).map(|t| t.tag.as_str()).collect();
            let mut body = if stale.is_empty() {
                "ready".to_string()
            } else {
                format!("ready, degraded: stale tags {}", stale.join(", "))
            };
            // Reloaded settings waiting for a restart, and a refused reload.
            if !snap.restart_required.is_empty() {
                body.push_str(&format!("; restart required for {}", snap.restart_required.join(", ")));
            }
            if let Some(why) = &snap.reload_refused {
                body.push_str(&format!("; last reload refused: {why}"));
            }
            (StatusCode::OK, format!("{body}\n")).into_response()
        }
        Some(why) => (StatusCode::SERVICE_UNAVAILABLE, format!("not ready: {why}\n")).into_response(),
    }
}

async fn metrics(State(s): State<HttpState>) -> Response {
    let snap = s.snapshot.borrow().clone();
    ([(header::CONTENT_TYPE, "text/plain; version=0.0.4")], metrics_text(&snap)).into_response()
}

async fn components(State(s): State<HttpState>) -> Json<Snapshot> {
    let snap = s.snapshot.borrow().clone();
    // Components in the attention ranking's order, each with its rank.
    Json(super::attention::ranked(&snap))
}

/// Reads the rows of component `name` from the ledger file with `read`,
/// off the async runtime's workers. A failure is a 500 answer; no rows for
/// a name that is not a component (configured or retired) is a 404 saying
/// "no component NAME and no `what` for it".
async fn component_rows<T: Send + 'static>(
    s: &HttpState,
    name: &str,
    what: &str,
    read: impl FnOnce(&str) -> Result<Vec<T>, StoreError> + Send + 'static,
) -> Result<Vec<T>, Response> {
    let component = name.to_string();
    let rows = match tokio::task::spawn_blocking(move || read(&component)).await {
        Ok(Ok(rows)) => rows,
        Ok(Err(e)) => return Err((StatusCode::INTERNAL_SERVER_ERROR, format!("{e}\n")).into_response()),
        Err(e) => {
            return Err((StatusCode::INTERNAL_SERVER_ERROR, format!("reading the {what} failed: {e}\n")).into_response())
        }
    };
    if rows.is_empty() {
        let snap = s.snapshot.borrow().clone();
        let known =
            snap.components.iter().any(|c| c.component == name) || snap.retired_components.iter().any(|r| r == name);
        if !known {
            return Err(
                (StatusCode::NOT_FOUND, format!("no component {name:?} and no {what} for it\n")).into_response()
            );
        }
    }
    Ok(rows)
}

/// Query of `/api/components/{name}/trend`; without either, every point
/// the store keeps for the component.
#[derive(serde::Deserialize)]
struct TrendQuery {
    /// Only points at or after this event time, ms since the epoch.
    since_ms: Option<i64>,
    /// Only the newest this many (of those since `since_ms`).
    limit: Option<usize>,
}

/// A component's trend from the store, newest last:
/// `{"component", "points": [{"t", "metal_temperature_c", "pressure_mpa",
/// "hoop_stress_mpa", "creep_life_fraction", "creep_strain", "wear_index",
/// "fatigue_stress_mpa", "fatigue_usage", "wear_load_n",
/// "wear_sliding_speed_mm_s", "wear_slip_mm", "wear_frequency_hz"}]}`.
/// A known component without points has an empty list; 404 for a name that
/// is neither a component (configured or retired) nor in the trend table.
async fn trend(
    State(s): State<HttpState>,
    axum::extract::Path(name): axum::extract::Path<String>,
    axum::extract::Query(q): axum::extract::Query<TrendQuery>,
) -> Response {
    let (reader, window) = (s.trend.clone(), TrendWindow { since_ms: q.since_ms, limit: q.limit });
    let points = match component_rows(&s, &name, "trend", move |c| reader.component(c, window)).await {
        Ok(points) => points,
        Err(answer) => return answer,
    };
    Json(serde_json::json!({"component": name, "points": points})).into_response()
}

/// Query of `/api/components/{name}/alarms`.
#[derive(serde::Deserialize)]
struct HistoryQuery {
    /// How many events, newest first; [`DEFAULT_HISTORY_LIMIT`] if absent,
    /// at most [`MAX_HISTORY_LIMIT`].
    limit: Option<usize>,
}

/// A component's alarm history from the durable journal, newest first:
/// `{"component", "events": [event JSON with its journal "id"], "caution"}`.
/// 404 for a name that is neither a component (configured or retired) nor
/// in the journal.
async fn alarm_history(
    State(s): State<HttpState>,
    axum::extract::Path(name): axum::extract::Path<String>,
    axum::extract::Query(q): axum::extract::Query<HistoryQuery>,
) -> Response {
    let limit = q.limit.unwrap_or(DEFAULT_HISTORY_LIMIT).min(MAX_HISTORY_LIMIT);
    let reader = s.journal.clone();
    let rows = match component_rows(&s, &name, "alarm events", move |c| reader.component(c, limit)).await {
        Ok(rows) => rows,
        Err(answer) => return answer,
    };
    let events: Vec<serde_json::Value> = rows
        .into_iter()
        .filter_map(|(id, row)| match serde_json::from_str::<serde_json::Value>(&row.event) {
            Ok(serde_json::Value::Object(mut event)) => {
                event.insert("id".into(), id.into());
                Some(serde_json::Value::Object(event))
            }
            _ => {
                tracing::warn!("alarm journal entry {id} of {name} is not a JSON object; left out");
                None
            }
        })
        .collect();
    Json(serde_json::json!({"component": name, "events": events, "caution": crate::CAUTION})).into_response()
}

async fn material(State(s): State<HttpState>, axum::extract::Path(grade): axum::extract::Path<String>) -> Response {
    match s.library.get(&grade) {
        Some(m) => Json(serde_json::json!({"material": m, "caution": crate::CAUTION})).into_response(),
        None => (StatusCode::NOT_FOUND, format!("unknown grade {grade:?}\n")).into_response(),
    }
}

/// Whether a bearer token would be taken for alarm commands, without
/// doing anything: 204 it would, 401 missing or wrong, 403 no token
/// configured (read-only). The page asks when a token is entered, so a
/// wrong one is told at once rather than at the first command.
async fn operator_check(State(s): State<HttpState>, headers: axum::http::HeaderMap) -> Response {
    let Some(token) = &s.token else {
        return (StatusCode::FORBIDDEN, "read-only: no [http] token_env configured\n").into_response();
    };
    let given =
        headers.get(header::AUTHORIZATION).and_then(|v| v.to_str().ok()).and_then(|v| v.strip_prefix("Bearer "));
    if given.is_some_and(|g| crate::alarm::tokens_match(g.as_bytes(), token.as_bytes())) {
        StatusCode::NO_CONTENT.into_response()
    } else {
        (StatusCode::UNAUTHORIZED, "missing or wrong bearer token\n").into_response()
    }
}

/// How long an HTTP alarm command waits for the ledger thread's outcome.
const COMMAND_ANSWER: std::time::Duration = std::time::Duration::from_secs(10);

/// Acknowledge, shelve or unshelve over HTTP: the same JSON as the MQTT
/// command topic (without `token`), allowed only with `Authorization:
/// Bearer <token>` when a token is configured. The ledger thread carries
/// the command out and commits it before the answer, which is the real
/// outcome: 200 with the component's alarms as they now are (JSON), 400 an
/// invalid command, 404 an unknown component or alarm, 401 a missing or
/// wrong token, 403 no token configured (read-only), 503 no outcome in
/// time (intake paused or commits failing: see `/readyz`).
async fn alarm_command(
    State(s): State<HttpState>,
    headers: axum::http::HeaderMap,
    body: axum::body::Bytes,
) -> Response {
    use crate::ingest::{CommandOutcome, Inbound};
    let Some(token) = &s.token else {
        return (StatusCode::FORBIDDEN, "read-only: no [http] token_env configured\n").into_response();
    };
    let given =
        headers.get(header::AUTHORIZATION).and_then(|v| v.to_str().ok()).and_then(|v| v.strip_prefix("Bearer "));
    if !given.is_some_and(|g| crate::alarm::tokens_match(g.as_bytes(), token.as_bytes())) {
        return (StatusCode::UNAUTHORIZED, "missing or wrong bearer token\n").into_response();
    }
    if let Err(e) = crate::alarm::parse_command(&body) {
        return (StatusCode::BAD_REQUEST, format!("{e}\n")).into_response();
    }
    let (reply, outcome) = tokio::sync::oneshot::channel();
    if s.commands.send(Inbound::HttpCommand { payload: body.to_vec(), reply }).await.is_err() {
        return (StatusCode::SERVICE_UNAVAILABLE, "ledger is stopping; the command was not carried out\n")
            .into_response();
    }
    match tokio::time::timeout(COMMAND_ANSWER, outcome).await {
        Ok(Ok(CommandOutcome::Applied(state))) => {
            ([(header::CONTENT_TYPE, "application/json")], format!("{state}\n")).into_response()
        }
        Ok(Ok(CommandOutcome::Invalid(e))) => (StatusCode::BAD_REQUEST, format!("{e}\n")).into_response(),
        Ok(Ok(CommandOutcome::Unknown(e))) => (StatusCode::NOT_FOUND, format!("{e}\n")).into_response(),
        Ok(Err(_)) => (
            StatusCode::SERVICE_UNAVAILABLE,
            "the ledger stopped before the command was written; it did not take effect durably\n",
        )
            .into_response(),
        Err(_) => (
            StatusCode::SERVICE_UNAVAILABLE,
            format!(
                "no outcome within {} s: intake is paused or ledger commits fail (see /readyz); the command is \
                 queued, or carried out but not yet written, and takes effect when the ledger resumes\n",
                COMMAND_ANSWER.as_secs()
            ),
        )
            .into_response(),
    }
}
