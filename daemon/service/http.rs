//! The HTTP side: health, readiness, Prometheus metrics and the JSON
//! snapshot. Read-only; it reads the snapshot the ledger thread publishes.

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
}

/// The router.
pub fn router(state: HttpState) -> Router {
    Router::new()
        .route("/healthz", get(healthz))
        .route("/readyz", get(readyz))
        .route("/metrics", get(metrics))
        .route("/api/components", get(components))
        .route("/", get(index))
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

async fn index(State(s): State<HttpState>) -> Response {
    let snap = s.snapshot.borrow().clone();
    let mut rows = String::new();
    for c in &snap.components {
        rows.push_str(&format!(
            "<tr><td>{}</td><td>{}</td><td>{:.4}</td><td>{:.3}</td><td>{:.3}</td><td>{}</td></tr>",
            html(&c.component),
            html(&c.material),
            c.creep_life_fraction,
            c.creep_strain * 100.0,
            c.wear_index,
            c.remaining_life_h.map_or("-".into(), |h| format!("{h:.0}"))
        ));
    }
    let body = format!(
        "<!doctype html><meta charset=utf-8><title>lifeledger: {p}</title>\
         <h1>lifeledger: {p}</h1><p><strong>Caution:</strong> {c}</p>\
         <table border=1 cellpadding=4><tr><th>component</th><th>material</th><th>life fraction</th><th>creep strain %</th><th>wear index</th><th>remaining h</th></tr>{rows}</table>\
         <p>JSON: <a href=/api/components>/api/components</a> · <a href=/metrics>/metrics</a></p>",
        p = html(&snap.plant),
        c = html(snap.caution),
    );
    ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], body).into_response()
}

fn html(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}
