//! The status page: a plant overview at `/` and one page per component at
//! `/component/{name}`, both static HTML filled in by a small script that
//! polls the JSON API (`/api/components`, `/api/components/{name}/trend`,
//! `/api/components/{name}/alarms`, `/api/materials/{grade}`). Charts are inline SVG drawn by that script.
//!
//! `print.css` (loaded with `media="print"`) lays the pages out for A4 and
//! US letter paper. Operator actions ask `/api/operator/check` whether a
//! token is right when it is entered.
//!
//! Every asset is compiled into the binary (`include_str!`): the page works
//! on an isolated plant network with no internet access. The caution is put
//! into the HTML on the server as well, so it shows even before (or
//! without) the script; the script then shows the text the API returns.

use super::http::HttpState;
use axum::extract::{Path, State};
use axum::http::{header, HeaderValue, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use axum::Router;

/// The head, top bar and caution every page shares.
const FRAME_HTML: &str = include_str!("frame.html");
const INDEX_HTML: &str = include_str!("index.html");
const COMPONENT_HTML: &str = include_str!("component.html");
/// The shared stylesheet, followed by the overview's and the display
/// choices' rules (`overview.css`).
const APP_CSS: &str = concat!(include_str!("app.css"), "\n", include_str!("overview.css"));
const PRINT_CSS: &str = include_str!("print.css");
/// The shared helpers, preceded by the number, time and unit formats they
/// hand out (`format.js`): one script for every page.
const APP_JS: &str = concat!(include_str!("format.js"), "\n", include_str!("app.js"));
const OVERVIEW_JS: &str = include_str!("overview.js");
const COMPONENT_JS: &str = include_str!("component.js");
const FATIGUE_JS: &str = include_str!("fatigue.js");
const ICON_SVG: &str = include_str!("icon.svg");
const INSPECTION_JS: &str = include_str!("inspection.js");

/// The page routes, merged into the service router.
pub fn routes() -> Router<HttpState> {
    Router::new()
        .route("/", get(index))
        .route("/component/*name", get(component))
        .route("/page/app.css", get(|| async { asset("text/css; charset=utf-8", APP_CSS) }))
        .route("/page/print.css", get(|| async { asset("text/css; charset=utf-8", PRINT_CSS) }))
        .route("/page/app.js", get(|| async { asset("text/javascript; charset=utf-8", APP_JS) }))
        .route("/page/overview.js", get(|| async { asset("text/javascript; charset=utf-8", OVERVIEW_JS) }))
        .route("/page/component.js", get(|| async { asset("text/javascript; charset=utf-8", COMPONENT_JS) }))
        .route("/page/inspection.js", get(|| async { asset("text/javascript; charset=utf-8", INSPECTION_JS) }))
        .route("/page/fatigue.js", get(|| async { asset("text/javascript; charset=utf-8", FATIGUE_JS) }))
        .route("/page/icon.svg", get(|| async { asset("image/svg+xml", ICON_SVG) }))
}

async fn index(State(s): State<HttpState>) -> Response {
    page(&s, "", "overview", INDEX_HTML)
}

async fn component(State(s): State<HttpState>, Path(name): Path<String>) -> Response {
    let name = name.trim_start_matches('/').to_string();
    let known = {
        let snap = s.snapshot.borrow();
        // Before the ledger's first snapshot (no plant yet) every name is
        // let through; after it, only configured or retired components.
        snap.plant.is_empty()
            || snap.components.iter().any(|c| c.component == name)
            || snap.retired_components.contains(&name)
    };
    if !known {
        let body = format!(
            "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>Not found</title></head><body>\
             <h1>Not found</h1><p>This plant has no component named <code>{}</code>.</p>\
             <p><a href=\"/\">All components</a></p><p>{}</p></body></html>",
            html(&name),
            html(crate::CAUTION)
        );
        return (StatusCode::NOT_FOUND, [(header::CONTENT_TYPE, "text/html; charset=utf-8")], body).into_response();
    }
    page(&s, "Component · ", "component", COMPONENT_HTML)
}

/// A page in the shared frame, with its title prefix, page id, the plant
/// name and the caution filled in.
fn page(s: &HttpState, title: &str, id: &str, template: &str) -> Response {
    let plant = s.snapshot.borrow().plant.clone();
    let frame = FRAME_HTML.replace("{{TITLE}}", title).replace("{{PAGE}}", id);
    let body = template
        .replace("{{FRAME}}", &frame)
        .replace("{{CAUTION}}", &html(crate::CAUTION))
        .replace("{{PLANT}}", &html(&plant));
    let mut r = ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], body).into_response();
    r.headers_mut().insert(header::CACHE_CONTROL, HeaderValue::from_static("no-cache"));
    r
}

fn asset(content_type: &'static str, body: &'static str) -> Response {
    let mut r = ([(header::CONTENT_TYPE, content_type)], body).into_response();
    // Assets change only with the binary; revalidate so an upgrade shows.
    r.headers_mut().insert(header::CACHE_CONTROL, HeaderValue::from_static("no-cache"));
    r
}

fn html(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pages_have_their_placeholders_and_assets() {
        assert!(FRAME_HTML.contains("{{CAUTION}}") && FRAME_HTML.contains("{{PLANT}}"));
        assert!(FRAME_HTML.contains("{{TITLE}}") && FRAME_HTML.contains("{{PAGE}}"));
        assert!(FRAME_HTML.contains("/page/app.css") && FRAME_HTML.contains("/page/print.css"));
        // No asset may come from elsewhere: the plant network is closed.
        for t in [FRAME_HTML, INDEX_HTML, COMPONENT_HTML] {
            assert!(!t.contains("http://") && !t.contains("https://"));
        }
        for t in [INDEX_HTML, COMPONENT_HTML] {
            assert!(t.starts_with("{{FRAME}}"));
            assert!(t.contains("/page/app.js"));
        }
        for a in [APP_CSS, PRINT_CSS, APP_JS, OVERVIEW_JS, COMPONENT_JS, ICON_SVG, INSPECTION_JS] {
            // The SVG namespace is a name, not a download.
            let a = a.replace("http://www.w3.org/2000/svg", "");
            assert!(!a.contains("http://") && !a.contains("https://"), "assets must not load from the internet");
        }
    }

    #[test]
    fn html_escapes() {
        assert_eq!(html("<a & \"b\">"), "&lt;a &amp; &quot;b&quot;&gt;");
    }
}
