//! `whorl serve`, `whorl account`, `whorl token`: the real server started on a free loopback
//! port over a temporary on-disk library, driven over HTTP.

use std::io::{BufRead, BufReader, Write};
use std::process::{Child, Stdio};
use std::time::{Duration, Instant};

use serde_json::{Value, json};

use crate::util::{Lab, hint, seed};

pub(crate) const PASSWORDS: [(&str, &str, &str); 5] = [
    ("v.viewer", "reader", "viewer passphrase one"),
    ("s.submitter", "submitter", "submitter passphrase two"),
    ("g.signer", "signer", "signer passphrase three"),
    ("c.curator", "curator", "curator passphrase four"),
    ("a.admin", "admin", "admin passphrase five"),
];

/// Sets an account's password through stdin (not a terminal), as scripts do.
pub(crate) fn set_password(lab: &Lab, name: &str, password: &str) -> std::process::Output {
    let mut child = lab
        .command(&["account", "password", name])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    writeln!(child.stdin.take().unwrap(), "{password}").unwrap();
    child.wait_with_output().unwrap()
}

/// A lab with the seed library (all verified) and one account per role, each with a password.
pub(crate) fn lab_with_accounts() -> Lab {
    let lab = Lab::seeded();
    for (name, role, password) in PASSWORDS {
        lab.ok(&["account", "add", name, "--role", role]);
        let out = set_password(&lab, name, password);
        assert!(out.status.success(), "{out:?}");
    }
    lab
}

/// The real server on a free loopback port; killed when dropped if the test did not stop it.
pub(crate) struct Server {
    pub(crate) child: Child,
    pub(crate) base: String,
    log: std::path::PathBuf,
}

impl Server {
    pub(crate) fn start(lab: &Lab) -> Server {
        Server::start_with(lab, &[])
    }

    /// The server with more options of `whorl serve`.
    pub(crate) fn start_with(lab: &Lab, more: &[&str]) -> Server {
        let log = lab.path("server.log");
        let mut args = vec!["serve", "--address", "127.0.0.1:0"];
        args.extend_from_slice(more);
        let mut child = lab
            .command(&args)
            .stdout(Stdio::piped())
            .stderr(std::fs::File::create(&log).unwrap())
            .spawn()
            .unwrap();
        let mut line = String::new();
        BufReader::new(child.stdout.take().unwrap())
            .read_line(&mut line)
            .unwrap();
        let base = line
            .trim()
            .strip_prefix("listening on ")
            .unwrap_or_else(|| {
                panic!(
                    "serve printed {line:?}; log:\n{}",
                    std::fs::read_to_string(&log).unwrap_or_default()
                )
            })
            .to_string();
        Server { child, base, log }
    }

    pub(crate) fn url(&self, path: &str) -> String {
        format!("{}{path}", self.base)
    }

    pub(crate) fn log(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap()
    }

    /// Sends SIGTERM and waits for the process to end.
    pub(crate) fn terminate(&mut self) -> std::process::ExitStatus {
        let pid = self.child.id().to_string();
        let status = std::process::Command::new("kill")
            .args(["-TERM", &pid])
            .status()
            .unwrap();
        assert!(status.success());
        self.wait_exit()
    }

    /// Waits (at most 20 s) for the process to end.
    pub(crate) fn wait_exit(&mut self) -> std::process::ExitStatus {
        let started = Instant::now();
        loop {
            if let Some(s) = self.child.try_wait().unwrap() {
                return s;
            }
            assert!(
                started.elapsed() < Duration::from_secs(20),
                "the server did not stop within 20 s of SIGTERM"
            );
            std::thread::sleep(Duration::from_millis(50));
        }
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

pub(crate) fn agent() -> ureq::Agent {
    ureq::Agent::config_builder()
        .http_status_as_error(false)
        .build()
        .into()
}

/// An answer: status, headers, body as JSON (Null when empty).
pub(crate) struct Answer {
    pub(crate) status: u16,
    pub(crate) headers: ureq::http::HeaderMap,
    pub(crate) body: Value,
}

pub(crate) fn answer(r: Result<ureq::http::Response<ureq::Body>, ureq::Error>) -> Answer {
    let mut r = r.expect("an HTTP answer");
    let status = r.status().as_u16();
    let headers = r.headers().clone();
    let text = r.body_mut().read_to_string().unwrap();
    let body = if text.is_empty() {
        Value::Null
    } else {
        serde_json::from_str(&text).unwrap_or_else(|_| panic!("not JSON: {text}"))
    };
    Answer {
        status,
        headers,
        body,
    }
}

/// How a request proves who sends it.
#[derive(Clone, Copy)]
pub(crate) enum Auth<'a> {
    None,
    Cookie(&'a str),
    Bearer(&'a str),
}

pub(crate) fn call(
    server: &Server,
    method: &str,
    path: &str,
    auth: Auth,
    body: Option<Value>,
) -> Answer {
    let a = agent();
    let url = server.url(path);
    let auth_header = match auth {
        Auth::None => None,
        Auth::Cookie(c) => Some(("Cookie", c.to_string())),
        Auth::Bearer(t) => Some(("Authorization", format!("Bearer {t}"))),
    };
    macro_rules! with_auth {
        ($req:expr) => {{
            let req = $req;
            match &auth_header {
                Some((k, v)) => req.header(*k, v),
                None => req,
            }
        }};
    }
    let r = match method {
        "GET" => with_auth!(a.get(&url)).call(),
        "DELETE" => with_auth!(a.delete(&url)).call(),
        "POST" => {
            let req = with_auth!(a.post(&url)).header("Content-Type", "application/json");
            req.send(body.unwrap_or(json!({})).to_string())
        }
        other => panic!("method {other} not handled by the test client"),
    };
    answer(r)
}

/// Signs in; returns the answer and the `name=value` of the session cookie, if one was set.
pub(crate) fn sign_in(server: &Server, name: &str, password: &str) -> (Answer, Option<String>) {
    let a = call(
        server,
        "POST",
        "/api/v1/session",
        Auth::None,
        Some(json!({ "name": name, "password": password })),
    );
    let cookie = a
        .headers
        .get("set-cookie")
        .map(|v| v.to_str().unwrap().split(';').next().unwrap().to_string());
    (a, cookie)
}

/// A multipart/form-data body (RFC 7578) with text fields and one file part.
pub(crate) fn multipart(
    fields: &[(&str, &str)],
    file_name: &str,
    file: &[u8],
) -> (String, Vec<u8>) {
    let boundary = "whorl-test-boundary-7f3a9c";
    let mut body = Vec::new();
    for (k, v) in fields {
        write!(
            body,
            "--{boundary}\r\nContent-Disposition: form-data; name=\"{k}\"\r\n\r\n{v}\r\n"
        )
        .unwrap();
    }
    write!(
        body,
        "--{boundary}\r\nContent-Disposition: form-data; name=\"file\"; filename=\"{file_name}\"\r\nContent-Type: application/octet-stream\r\n\r\n"
    )
    .unwrap();
    body.extend_from_slice(file);
    write!(body, "\r\n--{boundary}--\r\n").unwrap();
    (format!("multipart/form-data; boundary={boundary}"), body)
}

/// The routes the router holds, from `whorl serve --print-routes`.
pub(crate) fn routes(lab: &Lab) -> Vec<Value> {
    serde_json::from_str::<Value>(&lab.ok(&["serve", "--print-routes"]))
        .unwrap()
        .as_array()
        .unwrap()
        .clone()
}

/// A path with its parameters filled by an id no spectrum has.
pub(crate) fn concrete(path: &str) -> String {
    path.replace("{id}", "999999").replace("{name}", "nobody")
}

/// What each role may do, as the README's table of roles says (our own documented policy).
pub(crate) fn documented_allows(role: &str, capability: &str) -> bool {
    match role {
        "reader" => capability == "view",
        "submitter" => matches!(capability, "view" | "submit"),
        "signer" => matches!(capability, "view" | "sign-off"),
        "curator" => matches!(capability, "view" | "submit" | "sign-off" | "curate"),
        "admin" => true,
        other => panic!("unknown role {other}"),
    }
}

#[test]
fn accounts_refuse_look_alikes_short_passwords_and_keep_an_audit_trail() {
    let lab = Lab::new();
    lab.ok(&["account", "add", "Dana", "--role", "signer", "--by", "boss"]);
    // A case variant and a Cyrillic look-alike (U+0430) are the same person (UTS #39).
    for twin in ["DANA", "d\u{0430}na"] {
        let text = lab.refuses(&["account", "add", twin, "--role", "reader"], 3);
        assert!(text.contains("already exists"), "{text}");
        assert!(!hint(&text).is_empty());
    }
    let text = lab.fails(&["account", "add", "erin", "--role", "owner"], 2);
    assert!(text.contains("not a role"), "{text}");
    let short = set_password(&lab, "dana", "too short");
    assert_eq!(short.status.code(), Some(3), "{short:?}");
    assert!(String::from_utf8_lossy(&short.stderr).contains("at least 12"));
    let ok = set_password(&lab, "dana", "a long enough phrase");
    assert!(ok.status.success(), "{ok:?}");
    lab.ok(&["account", "disable", "dana", "--reason", "left the lab"]);
    let accounts = lab.json(&["account", "list"]);
    assert_eq!(accounts.as_array().unwrap().len(), 1);
    assert_eq!(accounts[0]["name"], "Dana");
    assert_eq!(accounts[0]["has_password"], true);
    assert_eq!(accounts[0]["disabled_reason"], "left the lab");
    let log = lab.json(&["log"]);
    let actions: Vec<&str> = log
        .as_array()
        .unwrap()
        .iter()
        .map(|e| e["action"].as_str().unwrap())
        .filter(|a| a.starts_with("account"))
        .collect();
    assert_eq!(
        actions,
        ["account-add", "account-password", "account-disable"]
    );
    assert!(!lab.ok(&["log", "--json"]).contains("a long enough phrase"));
    // The chain still checks with the new events in it.
    lab.ok(&["check"]);
}

#[test]
fn the_last_active_administrator_can_be_neither_disabled_nor_demoted() {
    let lab = Lab::new();
    lab.ok(&["account", "add", "q.manager", "--role", "admin"]);
    lab.ok(&["account", "add", "r.deputy", "--role", "curator"]);
    let before = lab.json(&["account", "list"]);
    for args in [
        &[
            "account",
            "disable",
            "q.manager",
            "--reason",
            "left the lab",
        ][..],
        &[
            "account",
            "role",
            "q.manager",
            "curator",
            "--reason",
            "steps back",
        ][..],
    ] {
        let text = lab.refuses(args, 3);
        assert!(
            text.contains("'q.manager' is the only active administrator"),
            "{args:?}: {text}"
        );
        assert!(
            hint(&text).contains("give another account the admin role first"),
            "{text}"
        );
    }
    // Nothing was written, not even an event.
    assert_eq!(lab.json(&["account", "list"]), before);
    // With a second administrator, the first may go; then the second is the last one.
    lab.ok(&[
        "account",
        "role",
        "r.deputy",
        "admin",
        "--reason",
        "takes over",
    ]);
    lab.ok(&[
        "account",
        "disable",
        "q.manager",
        "--reason",
        "left the lab",
    ]);
    let text = lab.refuses(&["account", "disable", "r.deputy", "--reason", "x"], 3);
    assert!(
        text.contains("'r.deputy' is the only active administrator"),
        "{text}"
    );
    lab.ok(&["check"]);
}

#[test]
fn a_non_loopback_address_is_refused_without_a_tls_proxy() {
    let lab = Lab::new();
    let text = lab.fails(&["serve", "--address", "0.0.0.0:0"], 3);
    assert!(text.contains("not a loopback address"), "{text}");
    assert!(hint(&text).contains("--behind-tls-proxy"), "{text}");
}

#[test]
fn the_server_signs_in_refuses_backs_off_searches_and_stops_on_sigterm() {
    let lab = lab_with_accounts();
    // A pending spectrum for the signed sign-off below (submitted as t.tester).
    let pending_file = seed().join("unknowns").join("u01.ir.csv");
    let pending: i64 = lab
        .ok(&[
            "add",
            pending_file.to_str().unwrap(),
            "--technique",
            "ir",
            "--name",
            "pending sample",
        ])
        .trim()
        .parse()
        .unwrap();
    let mut server = Server::start(&lab);

    let health = call(&server, "GET", "/health", Auth::None, None);
    assert_eq!(health.status, 200);
    assert!(health.headers.get("x-request-id").is_some());
    // Security headers on every answer (OWASP HTTP Headers Cheat Sheet: nosniff, no
    // referrer, a CSP that loads nothing and forbids framing).
    assert_eq!(health.headers["x-content-type-options"], "nosniff");
    assert_eq!(health.headers["referrer-policy"], "no-referrer");
    let csp = health.headers["content-security-policy"].to_str().unwrap();
    assert!(csp.contains("default-src 'none'") && csp.contains("frame-ancestors 'none'"));
    // Unknown paths and methods are JSON errors too.
    let nowhere = call(&server, "GET", "/api/v1/nowhere", Auth::None, None);
    assert_eq!(
        (nowhere.status, nowhere.body["kind"].as_str()),
        (404, Some("not-found"))
    );
    let wrong_method = call(&server, "DELETE", "/health", Auth::None, None);
    assert_eq!(wrong_method.status, 405);
    assert!(wrong_method.body["hint"].as_str().is_some());

    // Every route that is not public refuses a caller without a session or token.
    let routes = routes(&lab);
    assert!(routes.len() >= 10);
    for r in &routes {
        let (method, path) = (r["method"].as_str().unwrap(), r["path"].as_str().unwrap());
        if r["access"] == "public" {
            continue;
        }
        let a = call(&server, method, &concrete(path), Auth::None, None);
        assert_eq!(a.status, 401, "{method} {path} without credentials");
        assert_eq!(a.body["kind"], "unauthorized");
        assert!(a.body["hint"].as_str().is_some_and(|h| !h.is_empty()));
    }

    // Sign-in: the cookie is HttpOnly and SameSite=Strict (not Secure on plain loopback).
    let (viewer, cookie) = sign_in(&server, "V.Viewer", PASSWORDS[0].2);
    assert_eq!(viewer.status, 200, "{}", viewer.body);
    assert_eq!(viewer.body["account"], "v.viewer");
    let set_cookie = viewer.headers.get("set-cookie").unwrap().to_str().unwrap();
    assert!(set_cookie.contains("HttpOnly") && set_cookie.contains("SameSite=Strict"));
    assert!(!set_cookie.contains("Secure"));
    let cookie = cookie.unwrap();
    let who = call(
        &server,
        "GET",
        "/api/v1/session",
        Auth::Cookie(&cookie),
        None,
    );
    assert_eq!(who.status, 200);
    assert_eq!(who.body["role"], "reader");

    // A view-only account is refused a write with 403, and nothing changes.
    let before = lab.state();
    let refused = call(
        &server,
        "POST",
        "/api/v1/spectra/1/withdraw",
        Auth::Cookie(&cookie),
        Some(json!({ "reason": "should not happen" })),
    );
    assert_eq!(refused.status, 403, "{}", refused.body);
    assert_eq!(refused.body["kind"], "forbidden");
    assert_eq!(lab.state(), before);

    // A search by upload gives the hits `whorl search --json` gives on the same file.
    let unknown = seed().join("unknowns").join("u03.ir.csv");
    let cli = lab.json(&["search", unknown.to_str().unwrap(), "--technique", "ir"]);
    let (content_type, body) = multipart(
        &[("technique", "ir")],
        "u03.ir.csv",
        &std::fs::read(&unknown).unwrap(),
    );
    let api = answer(
        agent()
            .post(server.url("/api/v1/search"))
            .header("Cookie", &cookie)
            .header("Content-Type", &content_type)
            .send(&body[..]),
    );
    assert_eq!(api.status, 200, "{}", api.body);
    let hits = |v: &Value| -> Vec<(i64, f64)> {
        v["hits"]
            .as_array()
            .unwrap()
            .iter()
            .map(|h| {
                (
                    h["spectrum_id"].as_i64().unwrap(),
                    h["score"].as_f64().unwrap(),
                )
            })
            .collect()
    };
    assert!(!hits(&cli).is_empty());
    assert_eq!(hits(&api.body), hits(&cli));
    assert_eq!(api.body["library"], cli["library"]);
    assert_eq!(api.body["parameters"], cli["parameters"]);
    // A bad field is a 400 with a hint naming the fix.
    let (content_type, body) = multipart(&[("technique", "uv")], "u03.ir.csv", b"1,2\n");
    let bad = answer(
        agent()
            .post(server.url("/api/v1/search"))
            .header("Cookie", &cookie)
            .header("Content-Type", &content_type)
            .send(&body[..]),
    );
    assert_eq!(bad.status, 400, "{}", bad.body);
    assert!(bad.body["message"].as_str().unwrap().contains("technique"));

    // Wrong passwords are refused; after the third the next try waits, even with the right
    // password; once the wait is over the right password signs in.
    for _ in 0..3 {
        let (a, c) = sign_in(&server, "c.curator", "not the password at all");
        assert_eq!(a.status, 401, "{}", a.body);
        assert!(c.is_none());
    }
    let (a, _) = sign_in(&server, "c.curator", PASSWORDS[3].2);
    assert_eq!(a.status, 429, "{}", a.body);
    assert_eq!(a.body["kind"], "backoff");
    let wait: u64 = a.headers["retry-after"].to_str().unwrap().parse().unwrap();
    assert!((1..=60).contains(&wait));
    std::thread::sleep(Duration::from_millis(wait * 1000 + 200));
    let (a, curator_cookie) = sign_in(&server, "c.curator", PASSWORDS[3].2);
    assert_eq!(a.status, 200, "{}", a.body);
    let curator_cookie = curator_cookie.unwrap();

    // A signed sign-off: the password again at signing; the signer is the signed-in account,
    // whatever the body says.
    let (_, signer_cookie) = sign_in(&server, "g.signer", PASSWORDS[2].2);
    let signer_cookie = signer_cookie.unwrap();
    let path = format!("/api/v1/spectra/{pending}/review");
    let wrong = call(
        &server,
        "POST",
        &path,
        Auth::Cookie(&signer_cookie),
        Some(
            json!({ "decision": "approve", "password": "not mine at all", "reviewer": "a.admin" }),
        ),
    );
    assert_eq!(wrong.status, 401, "{}", wrong.body);
    let signed = call(
        &server,
        "POST",
        &path,
        Auth::Cookie(&signer_cookie),
        Some(json!({ "decision": "approve", "password": PASSWORDS[2].2, "reviewer": "a.admin" })),
    );
    assert_eq!(signed.status, 200, "{}", signed.body);
    assert_eq!(signed.body["reviewer"], "g.signer");
    assert_eq!(signed.body["revision"], 1);
    // The trail says which events were signed in: the sign-off made through the server, not
    // the submission made on the command line.
    let trail = lab.json(&["log", &pending.to_string()]);
    let kinds: Vec<(&str, &str)> = trail
        .as_array()
        .unwrap()
        .iter()
        .map(|e| {
            (
                e["action"].as_str().unwrap(),
                e["identity"].as_str().unwrap(),
            )
        })
        .collect();
    assert_eq!(kinds, [("add", "asserted"), ("review", "signed-in")]);
    let table = lab.ok(&["log", &pending.to_string()]);
    assert!(
        table.contains("identity") && table.contains("signed-in"),
        "{table}"
    );
    let shown = lab.json(&["show", &pending.to_string()]);
    assert_eq!(shown["spectrum"]["status"], "verified", "{shown}");
    assert_eq!(shown["reviews"][0]["reviewer"], "g.signer");

    // With signed sign-offs required, the command line's asserted review is refused and
    // changes nothing; the same sign-off through the server is accepted.
    let second_file = seed().join("unknowns").join("u05.ir.csv");
    let second = lab
        .ok(&[
            "add",
            second_file.to_str().unwrap(),
            "--technique",
            "ir",
            "--name",
            "second pending",
        ])
        .trim()
        .to_string();
    // A policy change without a reason is refused, as every policy change is.
    let err = lab.fails(&["policy", "--sign-offs", "signed-only"], 3);
    assert!(err.contains("needs a reason"), "{err}");
    let policy = lab.ok(&[
        "policy",
        "--sign-offs",
        "signed-only",
        "--reason",
        "QA rule 7",
        "--by",
        "a.admin",
    ]);
    assert!(policy.contains("sign-offs: signed-only"), "{policy}");
    let text = lab.refuses(&["review", &second, "--approve", "--by", "g.signer"], 3);
    assert!(text.contains("only signed sign-offs"), "{text}");
    assert!(hint(&text).contains("/api/v1/spectra/ID/review"), "{text}");
    let path = format!("/api/v1/spectra/{second}/review");
    let signed = call(
        &server,
        "POST",
        &path,
        Auth::Cookie(&signer_cookie),
        Some(json!({ "decision": "approve", "password": PASSWORDS[2].2 })),
    );
    assert_eq!(signed.status, 200, "{}", signed.body);
    let policy_event = lab
        .json(&["log"])
        .as_array()
        .unwrap()
        .iter()
        .rev()
        .find(|e| e["action"] == "policy")
        .cloned()
        .unwrap();
    assert_eq!(policy_event["payload"]["sign_offs"], "signed-only");
    assert_eq!(policy_event["payload"]["reason"], "QA rule 7");

    // A bearer token: used (and logged by id), then revoked, refused at once.
    let token = lab
        .ok(&[
            "token",
            "create",
            "--account",
            "c.curator",
            "--label",
            "lims",
            "--expires",
            "1d",
        ])
        .trim()
        .to_string();
    let tokens = lab.json(&["token", "list"]);
    let token_id = tokens[0]["id"].as_i64().unwrap();
    let used = call(&server, "GET", "/api/v1/stats", Auth::Bearer(&token), None);
    assert_eq!(used.status, 200, "{}", used.body);
    assert_eq!(used.body["state_hash"], lab.json(&["stats"])["state_hash"]);
    assert!(
        server.log().contains(&format!("token={token_id}")),
        "{}",
        server.log()
    );
    lab.ok(&["token", "revoke", &token_id.to_string()]);
    let after = call(&server, "GET", "/api/v1/stats", Auth::Bearer(&token), None);
    assert_eq!(after.status, 401);

    // Role matrix: every route that needs a capability, under a token of every role, is
    // refused with 403 exactly where the documented roles say so. Bodies are empty and ids
    // absent, so the allowed calls fail later (400, 404, 415, 422) and change nothing.
    for (name, role, _) in PASSWORDS {
        let t = lab
            .ok(&["token", "create", "--account", name, "--label", "matrix"])
            .trim()
            .to_string();
        for r in &routes {
            let Some(capability) = r["access"]["needs"].as_str() else {
                continue;
            };
            let (method, path) = (r["method"].as_str().unwrap(), r["path"].as_str().unwrap());
            let a = call(&server, method, &concrete(path), Auth::Bearer(&t), None);
            let allowed = documented_allows(role, capability);
            assert_eq!(
                a.status != 403,
                allowed,
                "{role} {method} {path}: status {} {}",
                a.status,
                a.body
            );
            assert!(a.status < 500, "{role} {method} {path}: {}", a.body);
        }
    }

    // Sign-out revokes the session at once.
    let out = call(
        &server,
        "DELETE",
        "/api/v1/session",
        Auth::Cookie(&curator_cookie),
        None,
    );
    assert_eq!(out.status, 204);
    let gone = call(
        &server,
        "GET",
        "/api/v1/session",
        Auth::Cookie(&curator_cookie),
        None,
    );
    assert_eq!(gone.status, 401);

    // The logs carry request ids, never a password, a token or a session cookie.
    let log = server.log();
    assert!(log.contains("id="), "{log}");
    for (_, _, password) in PASSWORDS {
        assert!(!log.contains(password));
    }
    assert!(!log.contains(&token));
    for c in [&cookie, &curator_cookie, &signer_cookie] {
        assert!(!log.contains(c.split('=').nth(1).unwrap()));
    }

    // SIGTERM: a clean stop.
    let status = server.terminate();
    assert!(status.success(), "{status:?}\n{}", server.log());
    assert!(server.log().contains("stopped"), "{}", server.log());
    lab.ok(&["check"]);
}

#[test]
fn a_submission_in_flight_at_sigterm_is_finished_and_kept() {
    let lab = Lab::new();
    lab.ok(&["account", "add", "s.submitter", "--role", "submitter"]);
    let token = lab
        .ok(&[
            "token",
            "create",
            "--account",
            "s.submitter",
            "--label",
            "instrument",
        ])
        .trim()
        .to_string();
    let mut server = Server::start(&lab);
    let file = std::fs::read(seed().join("unknowns").join("u02.ir.csv")).unwrap();
    let (content_type, body) = multipart(
        &[("technique", "ir"), ("name", "methyl acetate")],
        "u02.ir.csv",
        &file,
    );
    let address = server.base.trim_start_matches("http://").to_string();
    let mut stream = std::net::TcpStream::connect(&address).unwrap();
    stream
        .set_read_timeout(Some(Duration::from_secs(30)))
        .unwrap();
    write!(
        stream,
        "POST /api/v1/spectra HTTP/1.1\r\nHost: {address}\r\nAuthorization: Bearer {token}\r\nContent-Type: {content_type}\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
        body.len()
    )
    .unwrap();
    // Half the body, then SIGTERM while the request is in flight, then the rest.
    let half = body.len() / 2;
    stream.write_all(&body[..half]).unwrap();
    stream.flush().unwrap();
    std::thread::sleep(Duration::from_millis(300));
    let pid = server.child.id().to_string();
    assert!(
        std::process::Command::new("kill")
            .args(["-TERM", &pid])
            .status()
            .unwrap()
            .success()
    );
    std::thread::sleep(Duration::from_millis(300));
    stream.write_all(&body[half..]).unwrap();
    let mut answer = String::new();
    std::io::Read::read_to_string(&mut stream, &mut answer).unwrap();
    assert!(answer.starts_with("HTTP/1.1 200"), "{answer}");
    let status = server.wait_exit();
    let log = server.log();
    assert!(status.success(), "{status:?}\n{log}");
    // The request was answered after the shutdown began, so it was in flight at SIGTERM.
    let began = log.find("shutting down").expect("a shutdown line");
    let answered = log
        .find("path=/api/v1/spectra}: tower_http::trace::on_response")
        .expect("the submission's response line");
    assert!(began < answered, "{log}");
    // The acknowledged submission is in the library, submitted by the token's account.
    let list = lab.json(&["list"]);
    assert_eq!(list.as_array().unwrap().len(), 1, "{list}");
    let shown = lab.json(&["show", "1"]);
    assert_eq!(shown["spectrum"]["submitted_by"], "s.submitter", "{shown}");
    lab.ok(&["check"]);
}
