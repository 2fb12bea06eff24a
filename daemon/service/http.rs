//! The HTTP side: health, readiness, Prometheus metrics, the JSON snapshot
//! and a component's alarm history. Read-only (alarm commands aside, which
//! go to the ledger thread): it reads the snapshot the ledger thread
//! publishes, and the alarm journal on a read-only connection of its own.

use super::snapshot::{metrics_text, Snapshot};
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
    pub trends: watch::Receiver<Arc<super::snapshot::Trends>>,
    /// Token allowing acknowledge/shelve over HTTP; `None`: read-only.
    pub token: Option<String>,
    /// Where HTTP alarm commands go (the ledger thread).
    pub commands: tokio::sync::mpsc::Sender<crate::ingest::Inbound>,
    /// The material library in use.
    pub library: Arc<crate::settings::library::MaterialLibrary>,
    /// The ledger's alarm journal, for `/api/components/{name}/alarms`.
    pub journal: crate::store::JournalReader,
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
        .merge(super::page::routes())
        .with_state(state)
}

async fn healthz() -> &'static str {
    "ok\n"
}

async fn readyz(State(s): State<HttpState>) -> Response {
    let snap = s.snapshot.borrow().clone();
    if snap.mqtt_connected && !snap.holding {
        (StatusCode::OK, "ready\n").into_response()
    } else {
        let why = if snap.holding { "outbox over quota, intake paused" } else { "not connected to the MQTT broker" };
        (StatusCode::SERVICE_UNAVAILABLE, format!("not ready: {why}\n")).into_response()
    }
}

async fn metrics(State(s): State<HttpState>) -> Response {
    let snap = s.snapshot.borrow().clone();
    ([(header::CONTENT_TYPE, "text/plain; version=0.0.4")], metrics_text(&snap)).into_response()
}

async fn components(State(s): State<HttpState>) -> Json<Snapshot> {
    let snap = s.snapshot.borrow().clone();
    Json((*snap).clone())
}

async fn trend(State(s): State<HttpState>, axum::extract::Path(name): axum::extract::Path<String>) -> Response {
    let t = s.trends.borrow().clone();
    match t.components.get(&name) {
        Some(points) => Json(serde_json::json!({"component": name, "points": points})).into_response(),
        None => (StatusCode::NOT_FOUND, format!("no trend for component {name:?}\n")).into_response(),
    }
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
    let (reader, component) = (s.journal.clone(), name.clone());
    let rows = match tokio::task::spawn_blocking(move || reader.component(&component, limit)).await {
        Ok(Ok(rows)) => rows,
        Ok(Err(e)) => return (StatusCode::INTERNAL_SERVER_ERROR, format!("{e}\n")).into_response(),
        Err(e) => {
            return (StatusCode::INTERNAL_SERVER_ERROR, format!("alarm journal read failed: {e}\n")).into_response()
        }
    };
    if rows.is_empty() {
        let snap = s.snapshot.borrow().clone();
        let known = snap.components.iter().any(|c| c.component == name) || snap.retired_components.contains(&name);
        if !known {
            return (StatusCode::NOT_FOUND, format!("no component {name:?} and no alarm events for it\n"))
                .into_response();
        }
    }
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

/// Acknowledge, shelve or unshelve over HTTP: the same JSON as the MQTT
/// command topic, allowed only with `Authorization: Bearer <token>` when a
/// token is configured. The command is applied by the ledger thread like an
/// MQTT command, so it is durable before it takes effect.
async fn alarm_command(
    State(s): State<HttpState>,
    headers: axum::http::HeaderMap,
    body: axum::body::Bytes,
) -> Response {
    let Some(token) = &s.token else {
        return (StatusCode::FORBIDDEN, "read-only: no [http] token_env configured\n").into_response();
    };
    let given =
        headers.get(header::AUTHORIZATION).and_then(|v| v.to_str().ok()).and_then(|v| v.strip_prefix("Bearer "));
    if given != Some(token.as_str()) {
        return (StatusCode::UNAUTHORIZED, "missing or wrong bearer token\n").into_response();
    }
    if let Err(e) = crate::alarm::parse_command(&body) {
        return (StatusCode::BAD_REQUEST, format!("{e}\n")).into_response();
    }
    match s.commands.send(crate::ingest::Inbound::HttpCommand { payload: body.to_vec() }).await {
        Ok(()) => (StatusCode::ACCEPTED, "accepted\n").into_response(),
        Err(_) => (StatusCode::SERVICE_UNAVAILABLE, "ledger is stopping\n").into_response(),
    }
}
