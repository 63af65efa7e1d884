//! The lab server (`whorl serve`): one process serving one library folder over HTTP, a face
//! beside `cli/` over the same `search` and `library` layers. One file per resource, each
//! with a `router()`; `state` holds what handlers share, `auth` the extractors that say who
//! may call a route, `error` the one error type.

mod accounts;
mod admin;
mod audit;
mod auth;
mod compounds;
mod error;
mod health;
mod identify;
mod import;
mod inbox;
mod openapi;
mod pages;
mod routes;
mod search;
mod session;
mod spectra;
mod state;
mod upload;

use std::net::SocketAddr;

use anyhow::Context as _;
use axum::Router;
use axum::extract::DefaultBodyLimit;
use axum::http::{HeaderValue, Request, StatusCode, header};
use tower::ServiceBuilder;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::request_id::{MakeRequestUuid, PropagateRequestIdLayer, SetRequestIdLayer};
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::trace::{DefaultOnResponse, TraceLayer};
use tracing::Level;

pub use inbox::Inbox;
pub use routes::RouteInfo;
use state::AppState;
pub use state::Options;

/// Every route of the server, as the router holds them.
pub fn routes() -> routes::Routes {
    health::router()
        .merge(session::router())
        .merge(search::router())
        .merge(spectra::router())
        .merge(compounds::router())
        .merge(audit::router())
        .merge(accounts::router())
        .merge(openapi::router())
        // The API routes added with identify, find, import and check.
        .merge(identify::router())
        .merge(import::router())
        .merge(admin::router())
        .merge(pages::router())
}

/// The routes' list, for `whorl serve --print-routes` (the integration tests walk it).
pub fn route_list() -> Vec<RouteInfo> {
    routes().list().to_vec()
}

/// The application: routes, limits, timeouts, request ids, request logs and security headers
/// (no sniffing, no referrer, a Content-Security-Policy that allows nothing but the pages'
/// own style sheet and script to load and no framing, no caching of answers). Logs carry the method, path, status, latency and request
/// id, never headers (so never cookies, tokens or passwords) nor bodies.
fn app(state: AppState) -> Router {
    let options = state.options.clone();
    let layers = ServiceBuilder::new()
        .layer(SetRequestIdLayer::x_request_id(MakeRequestUuid))
        .layer(
            TraceLayer::new_for_http()
                .make_span_with(|req: &Request<_>| {
                    let id = req
                        .headers()
                        .get("x-request-id")
                        .and_then(|v| v.to_str().ok())
                        .unwrap_or("-");
                    tracing::info_span!("request", id = %id, method = %req.method(), path = %req.uri().path())
                })
                .on_response(DefaultOnResponse::new().level(Level::INFO)),
        )
        .layer(PropagateRequestIdLayer::x_request_id())
        .layer(SetResponseHeaderLayer::overriding(
            header::X_CONTENT_TYPE_OPTIONS,
            HeaderValue::from_static("nosniff"),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            header::REFERRER_POLICY,
            HeaderValue::from_static("no-referrer"),
        ))
        .layer(SetResponseHeaderLayer::overriding(
            header::CONTENT_SECURITY_POLICY,
            // The web pages load their own style sheet and plot script from this origin, nothing
            // else: no inline script, no inline style, no other origin (OWASP CSP Cheat Sheet).
            HeaderValue::from_static(
                "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; form-action 'self'; base-uri 'none'; frame-ancestors 'none'",
            ),
        ))
        .layer(SetResponseHeaderLayer::if_not_present(
            header::CACHE_CONTROL,
            HeaderValue::from_static("no-store"),
        ))
        // The body limit's 413 and the timeout's 408 come as JSON like every error.
        .layer(axum::middleware::map_response(error::plain_to_json))
        .layer(RequestBodyLimitLayer::new(options.max_body));
    routes()
        .into_router()
        .fallback(not_found)
        .method_not_allowed_fallback(method_not_allowed)
        // The request timeout, inside the body limit as a tower timeout layer was: 408 only
        // while no write of the request has begun.
        .layer(axum::middleware::from_fn_with_state(
            options.request_timeout,
            state::timeout_unless_writing,
        ))
        .layer(DefaultBodyLimit::max(options.max_body))
        .layer(layers)
        .with_state(state)
}

/// A path no route holds, answered as JSON like every error.
async fn not_found() -> error::ApiError {
    error::ApiError::new(
        StatusCode::NOT_FOUND,
        "not-found",
        "no route has this path",
        "see /api/v1/openapi.json for the routes",
    )
}

/// A path held by a route, with a method it does not take.
async fn method_not_allowed() -> error::ApiError {
    error::ApiError::new(
        StatusCode::METHOD_NOT_ALLOWED,
        "method-not-allowed",
        "this route does not take this method",
        "see /api/v1/openapi.json for the methods of each route",
    )
}

/// Refuses a non-loopback address unless the server terminates TLS itself (`--tls-cert`,
/// `--tls-key`) or a TLS proxy is declared in front.
pub fn check_address(options: &Options) -> anyhow::Result<()> {
    if !options.address.ip().is_loopback() && !options.behind_tls_proxy && options.tls.is_none() {
        return Err(whorl::Error::invalid(
            format!(
                "{} is not a loopback address: passwords and session cookies would cross the network unencrypted",
                options.address
            ),
            "serve on 127.0.0.1 (the default), give --tls-cert and --tls-key, or put a TLS-terminating reverse proxy in front and pass --behind-tls-proxy",
        )
        .into());
    }
    Ok(())
}

/// The server's TLS settings from PEM files: rustls with the ring provider, TLS 1.2 and 1.3
/// with rustls's default cipher suites, HTTP/1.1 and HTTP/2 offered by ALPN (RFC 7301).
async fn tls_config(
    cert: &std::path::Path,
    key: &std::path::Path,
) -> anyhow::Result<axum_server::tls_rustls::RustlsConfig> {
    let _ = rustls::crypto::ring::default_provider().install_default();
    for (file, what) in [(cert, "certificate"), (key, "private key")] {
        if !file.is_file() {
            return Err(whorl::Error::input(
                whorl::error::Location::file(file),
                format!("the TLS {what} file cannot be read"),
                "give PEM files: --tls-cert the certificate chain, --tls-key its private key",
            )
            .into());
        }
    }
    axum_server::tls_rustls::RustlsConfig::from_pem_file(cert, key)
        .await
        .map_err(|e| {
            whorl::Error::input(
                whorl::error::Location::file(cert),
                format!("the TLS certificate and key were not accepted: {e}"),
                "give a PEM certificate chain (--tls-cert) and the PEM private key that belongs to it (--tls-key)",
            )
            .into()
        })
}

/// Serves the library until SIGTERM or SIGINT; requests in flight (writes among them) finish
/// before the process ends.
pub fn run(options: Options) -> anyhow::Result<()> {
    let filter = tracing_subscriber::EnvFilter::try_from_env("WHORL_LOG")
        .unwrap_or_else(|_| tracing_subscriber::EnvFilter::new("info"));
    let _ = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_ansi(false)
        .try_init();
    // Fail now, not at the first request, when the folder is not a library (this also
    // migrates it to the current schema).
    whorl::library::Library::open(&options.library)?;
    let mut options = options;
    if let Some(inbox) = &mut options.inbox {
        inbox.account = inbox.prepare(&options.library)?;
    }
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .context("starting the async runtime")?;
    runtime.block_on(serve(options))
}

async fn serve(options: Options) -> anyhow::Result<()> {
    let tls = match &options.tls {
        Some((cert, key)) => Some(tls_config(cert, key).await?),
        None => None,
    };
    let listener = tokio::net::TcpListener::bind(options.address)
        .await
        .map_err(|e| whorl::Error::io(format!("listening on {}", options.address), e))?;
    let bound = listener.local_addr()?;
    // The first line on stdout names the address (a port of 0 picks a free one).
    let scheme = if tls.is_some() { "https" } else { "http" };
    println!("listening on {scheme}://{bound}");
    tracing::info!(address = %bound, library = %options.library.display(), tls = tls.is_some(), "serving");
    let request_timeout = options.request_timeout;
    if let Some(inbox) = options.inbox.clone() {
        tracing::info!(inbox = %inbox.dir.display(), account = %inbox.account, "watching the drop folder");
        tokio::spawn(inbox::watch(inbox, options.library.clone()));
    }
    let state = AppState::new(options);
    let app = app(state).into_make_service_with_connect_info::<SocketAddr>();
    match tls {
        None => {
            axum::serve(listener, app)
                .with_graceful_shutdown(shutdown_signal())
                .await?
        }
        Some(config) => {
            let handle = axum_server::Handle::new();
            let stopper = handle.clone();
            tokio::spawn(async move {
                shutdown_signal().await;
                // Requests in flight finish (within the request timeout); no new ones start.
                stopper.graceful_shutdown(Some(request_timeout));
            });
            axum_server::from_tcp_rustls(listener.into_std()?, config)
                .handle(handle)
                .serve(app)
                .await?
        }
    }
    tracing::info!("stopped: every request in flight has finished");
    Ok(())
}

async fn shutdown_signal() {
    let ctrl_c = async {
        let _ = tokio::signal::ctrl_c().await;
    };
    #[cfg(unix)]
    let term = async {
        match tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate()) {
            Ok(mut s) => {
                s.recv().await;
            }
            Err(_) => std::future::pending::<()>().await,
        }
    };
    #[cfg(not(unix))]
    let term = std::future::pending::<()>();
    tokio::select! {
        _ = ctrl_c => {},
        _ = term => {},
    }
    tracing::info!("shutting down: finishing the requests in flight");
}
