//! Sign in and out in a browser, through the API's own sign-in (the same back-off, lock-out
//! and session cookie); the start page sends people where they can begin.

use std::net::SocketAddr;

use askama::Template;
use axum::Json;
use axum::extract::rejection::FormRejection;
use axum::extract::{ConnectInfo, Form, State};
use axum::http::request::Parts;
use axum::http::{HeaderMap, HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Redirect, Response};
use axum::routing::{get, post};
use serde::Deserialize;
use whorl::library::{Capability, random_bytes};

use super::super::auth::{Caller, ToView, cookie};
use super::super::error::ApiError;
use super::super::routes::{Access, Routes};
use super::super::session::{SignIn, sign_in, sign_out};
use super::super::state::AppState;
use super::{Browser, Layout, render, same_secret};

/// The cookie that ties the sign-in form to the browser that loaded it (a double-submitted
/// token: a page on another site cannot sign a visitor in to an account of its choosing).
const FORM_COOKIE: &str = "whorl_signin";

/// The sign-in and sign-out routes, and the start page.
pub fn router() -> Routes {
    Routes::new()
        .add("GET", "/", Access::Public, get(home))
        .add("GET", "/sign-in", Access::Public, get(form))
        .add("POST", "/sign-in", Access::Public, post(submit))
        .add(
            "POST",
            "/sign-out",
            Access::Needs(Capability::View),
            post(leave),
        )
}

/// The start page: the search page when signed in, else the sign-in page.
async fn home(caller: Result<Caller, ApiError>) -> Redirect {
    match caller {
        Ok(_) => Redirect::to("/search"),
        Err(_) => Redirect::to("/sign-in"),
    }
}

#[derive(Template)]
#[template(path = "sign_in.html")]
struct SignInPage {
    layout: Layout,
    token: String,
    name: String,
    problem: String,
    hint: String,
}

/// The sign-in page with a fresh form token (and its cookie).
fn page(status: StatusCode, name: String, problem: String, hint: String) -> Response {
    let token = match random_bytes(16) {
        Ok(b) => hex::encode(b),
        Err(e) => return ApiError::from(e).into_response(),
    };
    let mut r = render(&SignInPage {
        layout: Layout::anonymous("Sign in"),
        token: token.clone(),
        name,
        problem,
        hint,
    });
    *r.status_mut() = status;
    if let Ok(v) = HeaderValue::from_str(&format!(
        "{FORM_COOKIE}={token}; HttpOnly; SameSite=Strict; Path=/sign-in; Max-Age=3600"
    )) {
        r.headers_mut().append(header::SET_COOKIE, v);
    }
    r
}

async fn form() -> Response {
    page(StatusCode::OK, String::new(), String::new(), String::new())
}

#[derive(Deserialize)]
struct SignInForm {
    csrf: String,
    name: String,
    password: String,
}

async fn submit(
    State(state): State<AppState>,
    ConnectInfo(peer): ConnectInfo<SocketAddr>,
    headers: HeaderMap,
    body: Result<Form<SignInForm>, FormRejection>,
) -> Response {
    let Ok(Form(body)) = body else {
        return page(
            StatusCode::BAD_REQUEST,
            String::new(),
            "The sign-in form was incomplete.".into(),
            "Give your account name and password.".into(),
        );
    };
    let (mut parts, ()) = axum::http::Request::new(()).into_parts();
    parts.headers = headers.clone();
    if !form_cookie_matches(&parts, &body.csrf) {
        return page(
            StatusCode::FORBIDDEN,
            body.name,
            "This sign-in form was not loaded by this browser, or it expired; nothing was done."
                .into(),
            "Sign in with the form on this page.".into(),
        );
    }
    let name = body.name.clone();
    let answer = sign_in(
        State(state),
        ConnectInfo(peer),
        headers,
        Ok(Json(SignIn {
            name: body.name,
            password: body.password,
        })),
    )
    .await;
    match answer {
        Ok(signed_in) => {
            let mut r = Redirect::to("/search").into_response();
            for c in signed_in.headers().get_all(header::SET_COOKIE) {
                r.headers_mut().append(header::SET_COOKIE, c.clone());
            }
            r.headers_mut().append(
                header::SET_COOKIE,
                HeaderValue::from_static(
                    "whorl_signin=; HttpOnly; SameSite=Strict; Path=/sign-in; Max-Age=0",
                ),
            );
            r
        }
        Err(e) => page(e.status, name, e.message, e.hint),
    }
}

fn form_cookie_matches(parts: &Parts, given: &str) -> bool {
    cookie(parts, FORM_COOKIE).is_some_and(|c| !c.is_empty() && same_secret(c, given))
}

#[derive(Deserialize)]
struct SignOutForm {
    csrf: Option<String>,
}

async fn leave(
    State(state): State<AppState>,
    b: Browser<ToView>,
    body: Result<Form<SignOutForm>, FormRejection>,
) -> Response {
    let given = body.ok().and_then(|Form(f)| f.csrf);
    if let Some(r) = b.csrf_refused(given.as_deref()) {
        return r;
    }
    match sign_out(State(state), b.caller.clone()).await {
        Ok(done) => {
            let done = done.into_response();
            let mut r = Redirect::to("/sign-in").into_response();
            for c in done.headers().get_all(header::SET_COOKIE) {
                r.headers_mut().append(header::SET_COOKIE, c.clone());
            }
            r
        }
        Err(e) => b.fail("Sign-out failed", e),
    }
}
