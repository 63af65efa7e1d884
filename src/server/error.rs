//! The one HTTP error type: the library's error kinds mapped to statuses, sent as JSON
//! `{kind, message, hint}`; internal detail goes to the log with the request's id, never to
//! the client.

use axum::Json;
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

/// An error answered to a client.
#[derive(Debug)]
pub struct ApiError {
    /// The HTTP status.
    pub status: StatusCode,
    /// A short machine-readable kind: `input`, `not-found`, `unauthorized`, `forbidden`,
    /// `backoff`, `locked`, `busy`, `internal`.
    pub kind: &'static str,
    /// One sentence for the client.
    pub message: String,
    /// What the client can do about it.
    pub hint: String,
    /// Seconds to wait before trying again (429).
    pub retry_after: Option<u64>,
    /// Detail for the log only.
    internal: Option<String>,
}

#[derive(Serialize)]
struct Body<'a> {
    kind: &'a str,
    message: &'a str,
    hint: &'a str,
}

impl ApiError {
    /// An error with a status, kind, message and hint.
    pub fn new(
        status: StatusCode,
        kind: &'static str,
        message: impl Into<String>,
        hint: impl Into<String>,
    ) -> ApiError {
        ApiError {
            status,
            kind,
            message: message.into(),
            hint: hint.into(),
            retry_after: None,
            internal: None,
        }
    }

    /// 400: the request itself is wrong.
    pub fn input(message: impl Into<String>, hint: impl Into<String>) -> ApiError {
        ApiError::new(StatusCode::BAD_REQUEST, "input", message, hint)
    }

    /// 408: the request took longer than `--request-timeout` before any write of it began
    /// (a write that has begun is answered with its outcome), so nothing was written.
    pub fn timed_out() -> ApiError {
        ApiError::new(
            StatusCode::REQUEST_TIMEOUT,
            "timeout",
            "the request took longer than this server allows; nothing it asked for was written",
            "send less per request, or ask the administrator about --request-timeout",
        )
    }

    /// 401: no valid session or token.
    pub fn unauthorized() -> ApiError {
        ApiError::new(
            StatusCode::UNAUTHORIZED,
            "unauthorized",
            "sign in first",
            "POST /api/v1/session with your name and password, or send a bearer token (whorl token create)",
        )
    }

    /// 403: signed in, but the role does not allow this.
    pub fn forbidden(message: impl Into<String>) -> ApiError {
        ApiError::new(
            StatusCode::FORBIDDEN,
            "forbidden",
            message,
            "ask an administrator for a role that allows it (whorl account list shows the roles)",
        )
    }

    /// 500 with detail kept for the log.
    pub fn internal(detail: impl Into<String>) -> ApiError {
        let mut e = ApiError::new(
            StatusCode::INTERNAL_SERVER_ERROR,
            "internal",
            "the server failed to answer this request",
            "try again; if it persists, give the administrator the request id (x-request-id)",
        );
        e.internal = Some(detail.into());
        e
    }
}

impl From<whorl::Error> for ApiError {
    fn from(e: whorl::Error) -> ApiError {
        let hint = e.hint().unwrap_or_default().to_string();
        match &e {
            whorl::Error::NotFound { .. } => {
                ApiError::new(StatusCode::NOT_FOUND, "not-found", e.to_string(), hint)
            }
            e if e.is_input() => ApiError::input(e.to_string(), hint),
            e if e.is_busy() => {
                let mut a = ApiError::new(
                    StatusCode::SERVICE_UNAVAILABLE,
                    "busy",
                    "another writer kept the library busy",
                    "try again in a moment",
                );
                a.retry_after = Some(1);
                a
            }
            _ => ApiError::internal(format!("{e:#}")),
        }
    }
}

impl From<tokio::task::JoinError> for ApiError {
    fn from(e: tokio::task::JoinError) -> ApiError {
        ApiError::internal(format!("a blocking task failed: {e}"))
    }
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        // Logged inside the request's span, which carries its id.
        match &self.internal {
            Some(detail) => {
                tracing::error!(status = %self.status, detail = %detail, "request failed")
            }
            None => {
                tracing::info!(status = %self.status, kind = self.kind, message = %self.message, "request refused")
            }
        }
        let mut response = (
            self.status,
            Json(Body {
                kind: self.kind,
                message: &self.message,
                hint: &self.hint,
            }),
        )
            .into_response();
        if let Some(s) = self.retry_after {
            response
                .headers_mut()
                .insert(header::RETRY_AFTER, HeaderValue::from(s));
        }
        response
    }
}

/// Turns the bare answers of the tower layers (the body limit's 413, the timeout's 408) into
/// the JSON every other error has; any other answer passes unchanged.
pub async fn plain_to_json<B>(response: axum::http::Response<B>) -> Response
where
    B: axum::body::HttpBody<Data = axum::body::Bytes> + Send + 'static,
    B::Error: Into<axum::BoxError>,
{
    let response = response.map(axum::body::Body::new);
    let is_json = response
        .headers()
        .get(header::CONTENT_TYPE)
        .is_some_and(|v| v.as_bytes().starts_with(b"application/json"));
    match response.status() {
        StatusCode::PAYLOAD_TOO_LARGE if !is_json => ApiError::new(
            StatusCode::PAYLOAD_TOO_LARGE,
            "too-large",
            "the request body is larger than this server takes",
            "send less per request (the server's --max-body), e.g. a manifest split in parts",
        )
        .into_response(),
        StatusCode::REQUEST_TIMEOUT if !is_json => ApiError::timed_out().into_response(),
        _ => response,
    }
}

/// Rejections of axum's own extractors, answered in the same JSON shape as every error.
macro_rules! from_rejection {
    ($($t:ty => $what:literal, $hint:literal;)*) => {$(
        impl From<$t> for ApiError {
            fn from(r: $t) -> ApiError {
                ApiError::new(r.status(), "input", format!(concat!($what, ": {}"), r.body_text()), $hint)
            }
        }
    )*};
}

from_rejection! {
    axum::extract::rejection::JsonRejection => "the JSON body was not accepted",
        "send Content-Type: application/json with the fields /api/v1/openapi.json names";
    axum::extract::multipart::MultipartRejection => "the multipart form was not accepted",
        "send multipart/form-data with a 'file' part and the fields /api/v1/openapi.json names";
    axum::extract::rejection::PathRejection => "the path was not accepted",
        "ids are whole numbers, e.g. /api/v1/spectra/12";
    axum::extract::rejection::QueryRejection => "the query string was not accepted",
        "see /api/v1/openapi.json for the parameters";
}
