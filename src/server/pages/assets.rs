//! The pages' style sheet, plot script and icon, compiled into the binary (no build step, nothing
//! fetched from elsewhere).

use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};
use axum::routing::get;

use super::super::routes::{Access, Routes};

const CSS: &str = include_str!("../../../assets/whorl.css");
const PLOT_JS: &str = include_str!("../../../assets/plot.js");
/// Our own icon (a small spiral), so browsers find one instead of a 404.
const ICON: &str = include_str!("../../../assets/favicon.svg");

/// The asset routes (public: the sign-in page needs them).
pub fn router() -> Routes {
    Routes::new()
        .add("GET", "/static/whorl.css", Access::Public, get(css))
        .add("GET", "/static/plot.js", Access::Public, get(script))
        .add("GET", "/static/favicon.svg", Access::Public, get(icon))
        .add("GET", "/favicon.ico", Access::Public, get(icon))
}

fn asset(content_type: &'static str, body: &'static str) -> Response {
    let mut r = body.into_response();
    let h = r.headers_mut();
    h.insert(header::CONTENT_TYPE, HeaderValue::from_static(content_type));
    h.insert(
        header::CACHE_CONTROL,
        HeaderValue::from_static("public, max-age=3600"),
    );
    r
}

async fn css() -> Response {
    asset("text/css; charset=utf-8", CSS)
}

async fn script() -> Response {
    asset("text/javascript; charset=utf-8", PLOT_JS)
}

async fn icon() -> Response {
    asset("image/svg+xml", ICON)
}
