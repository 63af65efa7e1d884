//! The server beside the command line on one folder: reading requests reuse libraries earlier
//! requests opened, and still see what a CLI command wrote in between; a write that has begun
//! is answered with its outcome, never 408. The real server on a free loopback port.

use std::time::Duration;

use serde_json::Value;

use crate::serve::{Auth, Server, call, lab_with_accounts};
use crate::serve_api::{Part, distinct_ir, post_form};
use crate::util::Lab;

fn token(lab: &Lab, account: &str) -> String {
    lab.ok(&["token", "create", "--account", account, "--label", "beside"])
        .trim()
        .to_string()
}

/// The spectrum ids of an API search's hits (pending spectra included), best first.
fn search(server: &Server, token: &str, unknown: &[u8], filter: Option<&str>) -> Vec<i64> {
    let mut parts: Vec<Part> = vec![
        ("technique", None, b"ir".to_vec()),
        ("include_pending", None, b"true".to_vec()),
        ("file", Some("unknown.csv"), unknown.to_vec()),
    ];
    if let Some(q) = filter {
        parts.push(("where", None, q.as_bytes().to_vec()));
    }
    let a = post_form(server, "/api/v1/search", Auth::Bearer(token), &parts);
    assert_eq!(a.status, 200, "{}", a.body);
    a.body["hits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h["spectrum_id"].as_i64().unwrap())
        .collect()
}

fn found(server: &Server, token: &str, query: &str) -> Vec<i64> {
    let a = call(
        server,
        "GET",
        &format!("/api/v1/find?q={query}"),
        Auth::Bearer(token),
        None,
    );
    assert_eq!(a.status, 200, "{}", a.body);
    let rows: &Vec<Value> = a.body.as_array().unwrap();
    rows.iter()
        .map(|r| r["spectrum_id"].as_i64().unwrap())
        .collect()
}

#[test]
fn a_command_line_add_beside_the_server_is_seen_by_the_next_api_search() {
    let lab = lab_with_accounts();
    let reader = token(&lab, "v.viewer");
    let server = Server::start(&lab);
    let unknown = distinct_ir(7001);
    // Requests first, so the server holds libraries open between requests (their text index
    // readers, recipes and mapped caches) when the command line writes.
    let before = search(&server, &reader, &unknown, None);
    assert!(!before.is_empty());
    assert!(search(&server, &reader, &unknown, Some("name:zebrawood")).is_empty());
    assert!(found(&server, &reader, "zebrawood").is_empty());

    // The command line stores the unknown itself, pending, while the server runs.
    lab.write("beside.csv", unknown.clone());
    let id: i64 = lab
        .ok(&[
            "add",
            "beside.csv",
            "--technique",
            "ir",
            "--name",
            "zebrawood resin",
            "--by",
            "t.tester",
        ])
        .trim()
        .parse()
        .unwrap();
    assert!(!before.contains(&id));

    // The next requests see it: as the best hit of a search for itself (the vector cache
    // came before it), through the text index for a metadata filter and for find.
    for _ in 0..3 {
        let after = search(&server, &reader, &unknown, None);
        assert_eq!(after.first(), Some(&id), "{after:?}");
        assert_eq!(
            search(&server, &reader, &unknown, Some("name:zebrawood")),
            [id]
        );
        assert_eq!(found(&server, &reader, "zebrawood"), [id]);
    }

    // A withdrawal on the command line takes it out of the next search at once.
    lab.ok(&[
        "withdraw",
        &id.to_string(),
        "--reason",
        "beside test",
        "--by",
        "t.tester",
    ]);
    let after = search(&server, &reader, &unknown, None);
    assert!(!after.contains(&id), "{after:?}");
    assert!(search(&server, &reader, &unknown, Some("name:zebrawood")).is_empty());
}

/// Holds SQLite's write lock of the library, as a long command-line write would.
fn hold_write_lock(lab: &Lab, for_how_long: Duration) -> std::thread::JoinHandle<()> {
    let db = lab.library().join("library.sqlite");
    let conn = rusqlite::Connection::open(db).unwrap();
    conn.execute_batch("BEGIN IMMEDIATE").unwrap();
    std::thread::spawn(move || {
        std::thread::sleep(for_how_long);
        conn.execute_batch("COMMIT").unwrap();
    })
}

#[test]
fn a_write_under_way_at_the_request_timeout_is_answered_with_its_outcome() {
    let lab = lab_with_accounts();
    let submitter = token(&lab, "s.submitter");
    let mut server = Server::start_with(&lab, &["--request-timeout", "1"]);
    let before = lab.json(&["list"]).as_array().unwrap().len();
    // The server's write waits for the lock (busy timeout, 10 s) past the request timeout.
    let held = hold_write_lock(&lab, Duration::from_millis(2500));
    let a = post_form(
        &server,
        "/api/v1/spectra",
        Auth::Bearer(&submitter),
        &[
            ("technique", None, b"ir".to_vec()),
            ("name", None, b"late but stored".to_vec()),
            ("file", Some("late.csv"), distinct_ir(7002)),
        ],
    );
    held.join().unwrap();
    // A 408 would say nothing was written; the write had begun, so its answer is its outcome.
    assert!(a.status < 300, "{} {}", a.status, a.body);
    assert_eq!(a.body["outcome"], "added", "{}", a.body);
    let id = a.body["spectrum_id"].as_i64().unwrap();
    let shown = lab.json(&["show", &id.to_string()]);
    assert_eq!(
        shown["spectrum"]["metadata"]["name"], "late but stored",
        "{shown}"
    );
    assert_eq!(lab.json(&["list"]).as_array().unwrap().len(), before + 1);
    assert!(server.terminate().success());
}

#[test]
fn health_fails_once_the_library_database_is_moved_away_under_a_running_server() {
    let lab = lab_with_accounts();
    let reader = token(&lab, "v.viewer");
    let server = Server::start(&lab);
    // Requests first, so the server keeps library handles open between requests.
    for _ in 0..3 {
        assert_eq!(
            call(&server, "GET", "/health", Auth::None, None).status,
            200
        );
        assert!(found(&server, &reader, "zebrawood").is_empty());
    }
    // A kept handle still reads the moved (or unlinked) database through its open
    // descriptors, and the text index beside it still opens: health must not say "ok" for a
    // library whose database is no longer where the server serves it.
    let db = lab.library().join("library.sqlite");
    let away = lab.library().join("library.sqlite.moved");
    std::fs::rename(&db, &away).unwrap();
    let health = call(&server, "GET", "/health", Auth::None, None);
    assert_eq!(
        (health.status, health.body["kind"].as_str()),
        (503, Some("unavailable")),
        "{}",
        health.body
    );
    // Back in place, the next request opens it again.
    std::fs::rename(&away, &db).unwrap();
    assert_eq!(
        call(&server, "GET", "/health", Auth::None, None).status,
        200
    );
}
