//! The API routes beyond search and sign-in (identify, find, import, revise, check), the role
//! matrix with a valid request for every state-changing route, and the upload limits: the
//! real server on a free loopback port.

use std::io::Write;

use serde_json::{Value, json};

use crate::serve::{
    Answer, Auth, PASSWORDS, Server, agent, answer, call, documented_allows, lab_with_accounts,
    routes,
};
use crate::util::{Lab, ir_csv, seed};

/// One part of a multipart/form-data body (RFC 7578): a name, a file name for file parts, the
/// bytes.
pub(crate) type Part<'a> = (&'a str, Option<&'a str>, Vec<u8>);

/// A multipart/form-data body of any parts.
pub(crate) fn form(parts: &[Part]) -> (String, Vec<u8>) {
    let boundary = "whorl-api-test-boundary-51c2";
    let mut body = Vec::new();
    for (name, file, bytes) in parts {
        match file {
            Some(f) => write!(
                body,
                "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"; filename=\"{f}\"\r\nContent-Type: application/octet-stream\r\n\r\n"
            ),
            None => write!(
                body,
                "--{boundary}\r\nContent-Disposition: form-data; name=\"{name}\"\r\n\r\n"
            ),
        }
        .unwrap();
        body.extend_from_slice(bytes);
        body.extend_from_slice(b"\r\n");
    }
    write!(body, "--{boundary}--\r\n").unwrap();
    (format!("multipart/form-data; boundary={boundary}"), body)
}

/// Posts a multipart form.
pub(crate) fn post_form(server: &Server, path: &str, auth: Auth, parts: &[Part]) -> Answer {
    let (content_type, body) = form(parts);
    let mut req = agent()
        .post(server.url(path))
        .header("Content-Type", &content_type);
    match auth {
        Auth::Cookie(c) => req = req.header("Cookie", c),
        Auth::Bearer(t) => req = req.header("Authorization", &format!("Bearer {t}")),
        Auth::None => {}
    }
    answer(req.send(&body[..]))
}

fn text(v: &str) -> Vec<u8> {
    v.as_bytes().to_vec()
}

/// A synthetic IR spectrum no other test file has: bands placed by `n` (distinct for every
/// `n` below 150,000, all inside 4000-400 cm-1).
pub(crate) fn distinct_ir(n: usize) -> Vec<u8> {
    ir_csv(&[
        (500.0 + 2.0 * (n % 1500) as f64, 0.6, 6.0),
        (3700.0 - 2.0 * (n / 1500 % 100) as f64, 0.3, 20.0),
    ])
    .into_bytes()
}

/// A token for each account of [`PASSWORDS`], by role.
fn tokens(lab: &Lab) -> Vec<(&'static str, &'static str, String)> {
    PASSWORDS
        .iter()
        .map(|(name, role, _)| {
            let t = lab
                .ok(&["token", "create", "--account", name, "--label", "api test"])
                .trim()
                .to_string();
            (*name, *role, t)
        })
        .collect()
}

fn password_of(role: &str) -> &'static str {
    PASSWORDS.iter().find(|p| p.1 == role).unwrap().2
}

/// Adds a pending spectrum on the command line (submitted by t.tester); returns its id.
fn pending(lab: &Lab, n: usize) -> i64 {
    let file = format!("pending{n}.csv");
    lab.write(&file, distinct_ir(500 + n));
    lab.ok(&[
        "add",
        &file,
        "--technique",
        "ir",
        "--name",
        &format!("pending {n}"),
        "--by",
        "t.tester",
    ])
    .trim()
    .parse()
    .unwrap()
}

/// The compound spectrum `id` belongs to.
fn compound_of(lab: &Lab, id: i64) -> i64 {
    lab.json(&["show", &id.to_string()])["spectrum"]["compound_id"]
        .as_i64()
        .expect("show --json names the compound")
}

/// The concrete path a valid request of a route goes to, after making what it needs (a
/// pending spectrum submitted by someone else, for the routes on one spectrum).
fn concrete_for(lab: &Lab, path: &str, n: usize) -> String {
    if path.ends_with("/reinstate") {
        // Only a withdrawn spectrum can be reinstated.
        let id = pending(lab, n).to_string();
        lab.ok(&["withdraw", &id, "--reason", "matrix", "--by", "t.tester"]);
        path.replace("{id}", &id)
    } else if path.starts_with("/api/v1/compounds/") {
        // A compound of its own: the spectrum's name is new.
        path.replace("{id}", &compound_of(lab, pending(lab, n)).to_string())
    } else if path.contains("{id}") {
        path.replace("{id}", &pending(lab, n).to_string())
    } else {
        path.replace("{name}", "t.matrix")
    }
}

/// Sends a valid request to a state-changing route as `role` (its token); `n` makes each
/// request's data its own. A route without a valid request here fails the test, so a new
/// state-changing route cannot be left out of the matrix.
fn valid_request(
    server: &Server,
    method: &str,
    (path, concrete): (&str, &str),
    role: &str,
    token: &str,
    n: usize,
) -> Answer {
    let auth = Auth::Bearer(token);
    match (method, path) {
        ("POST", "/api/v1/search") => post_form(
            server,
            path,
            auth,
            &[
                ("technique", None, text("ir")),
                ("file", Some("u.csv"), distinct_ir(n)),
            ],
        ),
        ("POST", "/api/v1/identify") => {
            post_form(server, path, auth, &[("ir", Some("u.csv"), distinct_ir(n))])
        }
        ("POST", "/api/v1/spectra") => post_form(
            server,
            path,
            auth,
            &[
                ("technique", None, text("ir")),
                ("name", None, text(&format!("matrix {n}"))),
                ("file", Some("m.csv"), distinct_ir(100 + n)),
            ],
        ),
        ("POST", "/api/v1/import") => post_form(
            server,
            path,
            auth,
            &[
                (
                    "manifest",
                    Some("list.csv"),
                    text(&format!(
                        "file,technique,name\nspectra/i.csv,ir,imported {n}\n"
                    )),
                ),
                ("file", Some("spectra/i.csv"), distinct_ir(200 + n)),
            ],
        ),
        ("POST", "/api/v1/spectra/{id}/withdraw") => call(
            server,
            method,
            concrete,
            auth,
            Some(json!({ "reason": "matrix" })),
        ),
        ("POST", "/api/v1/spectra/{id}/reinstate") => call(
            server,
            method,
            concrete,
            auth,
            Some(json!({ "reason": "matrix" })),
        ),
        ("POST", "/api/v1/spectra/{id}/revise") => call(
            server,
            method,
            concrete,
            auth,
            Some(json!({ "reason": "matrix", "notes": "revised through the API" })),
        ),
        ("POST", "/api/v1/spectra/{id}/review") => call(
            server,
            method,
            concrete,
            auth,
            Some(json!({ "decision": "verify", "password": password_of(role) })),
        ),
        ("POST", "/api/v1/check") => call(server, method, path, auth, None),
        // Into the seed library's compound 1: the spectrum's compound has no formula to
        // contradict it.
        ("POST", "/api/v1/compounds/{id}/merge") => call(
            server,
            method,
            concrete,
            auth,
            Some(json!({ "into": 1, "reason": "matrix: one substance" })),
        ),
        ("DELETE", "/api/v1/session") => {
            // Signs in as the role's account and signs that session out.
            let name = PASSWORDS.iter().find(|p| p.1 == role).unwrap().0;
            let (_, cookie) = crate::serve::sign_in(server, name, password_of(role));
            call(server, method, path, Auth::Cookie(&cookie.unwrap()), None)
        }
        ("POST", "/api/v1/accounts/{name}/role") => call(
            server,
            method,
            concrete,
            auth,
            Some(
                json!({ "role": if n.is_multiple_of(2) { "signer" } else { "submitter" }, "reason": "matrix" }),
            ),
        ),
        other => panic!(
            "{other:?} changes state but the role matrix has no valid request for it: add one to valid_request"
        ),
    }
}

#[test]
fn every_state_changing_route_is_allowed_exactly_to_its_roles() {
    let lab = lab_with_accounts();
    lab.ok(&["account", "add", "t.matrix", "--role", "reader"]);
    let server = Server::start(&lab);
    let tokens = tokens(&lab);
    let mut n = 0;
    let mut checked = 0;
    for r in routes(&lab) {
        let (method, path) = (r["method"].as_str().unwrap(), r["path"].as_str().unwrap());
        let Some(capability) = r["access"]["needs"].as_str() else {
            continue;
        };
        // The pages take no tokens, only a browser session and its form token: their forms
        // are walked by `every_page_form_refuses_a_missing_or_wrong_csrf_token` below and
        // driven in a real browser by scripts/browser-flows.
        if method == "GET" || !path.starts_with("/api/") {
            continue;
        }
        for (_, role, token) in &tokens {
            n += 1;
            let concrete = concrete_for(&lab, path, n);
            let before = lab.state();
            let a = valid_request(&server, method, (path, &concrete), role, token, n);
            if documented_allows(role, capability) {
                assert!(
                    (200..300).contains(&a.status),
                    "{role} {method} {path} is allowed but answered {} {}",
                    a.status,
                    a.body
                );
            } else {
                assert_eq!(a.status, 403, "{role} {method} {path}: {}", a.body);
                assert_eq!(a.body["kind"], "forbidden");
                assert_eq!(
                    lab.state(),
                    before,
                    "{role} {method} {path} was refused but changed the library"
                );
            }
            checked += 1;
        }
    }
    assert!(checked >= 5 * 9, "only {checked} calls");
    lab.ok(&["check"]);
}

/// The fused list of an identify report: (rank, name, fused score) per compound.
fn fused(report: &Value) -> Vec<(i64, String, f64)> {
    report["fusion"]["compounds"]
        .as_array()
        .unwrap_or_else(|| panic!("no fused list in {report}"))
        .iter()
        .map(|c| {
            (
                c["rank"].as_i64().unwrap(),
                c["name"].as_str().unwrap().to_string(),
                c["fused"].as_f64().unwrap(),
            )
        })
        .collect()
}

#[test]
fn identify_find_import_revise_and_check_answer_as_the_command_line_does() {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let tokens = tokens(&lab);
    let token = |role: &str| tokens.iter().find(|t| t.1 == role).unwrap().2.clone();
    let reader = token("reader");
    let submitter = token("submitter");
    let curator = token("curator");

    // identify: two unknowns of one sample; the fused list is the command line's.
    let ir = seed().join("unknowns/u01.ir.csv");
    let nmr = seed().join("spectra/ethyl-acetate.nmr-1h.csv");
    let cli = lab.json(&[
        "identify",
        "--ir",
        ir.to_str().unwrap(),
        "--nmr-1h",
        nmr.to_str().unwrap(),
        "--solvent",
        "CDCl3",
        "--top",
        "4",
    ]);
    let api = post_form(
        &server,
        "/api/v1/identify",
        Auth::Bearer(&reader),
        &[
            ("ir", Some("u01.ir.csv"), std::fs::read(&ir).unwrap()),
            (
                "nmr-1h",
                Some("ea.nmr-1h.csv"),
                std::fs::read(&nmr).unwrap(),
            ),
            ("solvent", None, text("CDCl3")),
            ("top", None, text("4")),
        ],
    );
    assert_eq!(api.status, 200, "{}", api.body);
    assert_eq!(fused(&api.body).len(), 4);
    assert_eq!(fused(&api.body), fused(&cli));
    assert_eq!(fused(&api.body)[0].1, "ethyl acetate");
    assert_eq!(api.body["policy"], cli["policy"]);
    assert_eq!(api.body["caution"], cli["caution"]);
    // A constraint narrows the fused list as --formula does.
    let narrowed = post_form(
        &server,
        "/api/v1/identify",
        Auth::Bearer(&reader),
        &[
            ("ir", Some("u01.ir.csv"), std::fs::read(&ir).unwrap()),
            ("formula", None, text("C4H8O2")),
        ],
    );
    assert_eq!(narrowed.status, 200, "{}", narrowed.body);
    let cli_narrowed = lab.json(&[
        "identify",
        "--ir",
        ir.to_str().unwrap(),
        "--formula",
        "C4H8O2",
    ]);
    assert_eq!(fused(&narrowed.body), fused(&cli_narrowed));
    // No unknown, an unknown part, a bad number: 400 with a hint.
    for (parts, says) in [
        (vec![("top", None, text("3"))], "no unknown"),
        (
            vec![("uv", Some("x.csv"), text("1,2\n"))],
            "unknown form part",
        ),
        (
            vec![
                ("ir", Some("u.csv"), std::fs::read(&ir).unwrap()),
                ("mass", None, text("heavy")),
            ],
            "not a number",
        ),
    ] {
        let a = post_form(&server, "/api/v1/identify", Auth::Bearer(&reader), &parts);
        assert_eq!(a.status, 400, "{}", a.body);
        assert!(
            a.body["message"].as_str().unwrap().contains(says),
            "{}",
            a.body
        );
        assert!(!a.body["hint"].as_str().unwrap().is_empty());
    }

    // find: the rows of `whorl find --json`.
    let cli = lab.json(&["find", "acetate", "--top", "5"]);
    let api = call(
        &server,
        "GET",
        "/api/v1/find?q=acetate&top=5",
        Auth::Bearer(&reader),
        None,
    );
    assert_eq!(api.status, 200, "{}", api.body);
    assert!(!cli.as_array().unwrap().is_empty());
    assert_eq!(api.body, cli);
    let bad = call(
        &server,
        "GET",
        "/api/v1/find?q=%22unclosed&top=5",
        Auth::Bearer(&reader),
        None,
    );
    assert_eq!(bad.status, 400, "{}", bad.body);

    // import: a manifest and its files, a result per row; the submitter is the token's
    // account, and a row naming someone else as submitter is refused.
    let manifest = "file,technique,name,submitted_by,class\n\
        spectra/a.csv,ir,api alpha,,reagent\n\
        spectra/b.csv,ir,api beta,someone.else,reagent\n\
        spectra/missing.csv,ir,api gamma,,\n";
    let before = lab.state();
    let a = post_form(
        &server,
        "/api/v1/import",
        Auth::Bearer(&submitter),
        &[
            ("manifest", Some("list.csv"), text(manifest)),
            ("file", Some("spectra/a.csv"), distinct_ir(1)),
            ("file", Some("spectra/b.csv"), distinct_ir(2)),
            ("all_or_nothing", None, text("true")),
        ],
    );
    assert_eq!(a.status, 422, "{}", a.body);
    assert_eq!(a.body["kind"], "rows-rejected");
    assert_eq!(a.body["rolled_back"], true);
    assert_eq!(lab.state(), before, "all_or_nothing stored something");
    let a = post_form(
        &server,
        "/api/v1/import",
        Auth::Bearer(&submitter),
        &[
            ("manifest", Some("list.csv"), text(manifest)),
            ("file", Some("spectra/a.csv"), distinct_ir(1)),
            ("file", Some("spectra/b.csv"), distinct_ir(2)),
        ],
    );
    assert_eq!(a.status, 422, "{}", a.body);
    let rows = a.body["rows"].as_array().unwrap();
    let results: Vec<(i64, &str)> = rows
        .iter()
        .map(|r| (r["line"].as_i64().unwrap(), r["result"].as_str().unwrap()))
        .collect();
    assert_eq!(results, [(2, "added"), (3, "rejected"), (4, "rejected")]);
    assert!(
        rows[1]["reason"]
            .as_str()
            .unwrap()
            .contains("not the signed-in account"),
        "{}",
        rows[1]
    );
    assert!(rows[1]["hint"].as_str().unwrap().contains("submitted_by"));
    // Messages name the file as sent, never the server's temporary folder.
    let reason = rows[2]["reason"].as_str().unwrap();
    assert!(
        reason.contains("spectra/missing.csv") && !reason.contains("/tmp"),
        "{reason}"
    );
    let added = rows[0]["spectrum_id"].as_i64().unwrap();
    let shown = lab.json(&["show", &added.to_string()]);
    assert_eq!(shown["spectrum"]["submitted_by"], "s.submitter", "{shown}");
    assert_eq!(shown["spectrum"]["status"], "pending");
    assert_eq!(
        lab.json(&["find", "class:reagent"])
            .as_array()
            .unwrap()
            .len(),
        1
    );
    // All rows good: 200; the same again: already present.
    let good = "file,technique,name\nb.csv,ir,api beta\n";
    for expect in ["added", "already-present"] {
        let a = post_form(
            &server,
            "/api/v1/import",
            Auth::Bearer(&submitter),
            &[
                ("manifest", Some("m.csv"), text(good)),
                ("file", Some("b.csv"), distinct_ir(2)),
            ],
        );
        assert_eq!(a.status, 200, "{}", a.body);
        assert_eq!(a.body["rows"][0]["result"], expect);
    }
    // Unsafe file names and a manifest refused as a whole: 400, nothing imported.
    let before = lab.state();
    for (name, says) in [
        ("../escape.csv", "'..'"),
        ("/etc/passwd", "absolute"),
        ("spectra/../../x.csv", "'..'"),
        ("C:\\x.csv", "absolute"),
    ] {
        let a = post_form(
            &server,
            "/api/v1/import",
            Auth::Bearer(&submitter),
            &[
                (
                    "manifest",
                    Some("m.csv"),
                    text("file,technique,name\nok.csv,ir,fine\n"),
                ),
                ("file", Some("ok.csv"), distinct_ir(3)),
                ("file", Some(name), distinct_ir(4)),
            ],
        );
        assert_eq!(a.status, 400, "{name}: {}", a.body);
        assert!(
            a.body["message"].as_str().unwrap().contains(says),
            "{name}: {}",
            a.body
        );
        assert!(
            a.body["message"]
                .as_str()
                .unwrap()
                .contains("nothing was imported")
        );
    }
    let a = post_form(
        &server,
        "/api/v1/import",
        Auth::Bearer(&submitter),
        &[
            ("manifest", Some("m.csv"), text("file,name\nok.csv,fine\n")),
            ("file", Some("ok.csv"), distinct_ir(3)),
        ],
    );
    assert_eq!(a.status, 400, "{}", a.body);
    assert!(
        a.body["message"]
            .as_str()
            .unwrap()
            .contains("no 'technique' column"),
        "{}",
        a.body
    );
    // Too many files: 413, nothing imported.
    let mut parts: Vec<Part> = vec![(
        "manifest",
        Some("m.csv"),
        text("file,technique,name\nf0.csv,ir,many\n"),
    )];
    let names: Vec<String> = (0..1001).map(|i| format!("f{i}.csv")).collect();
    for name in &names {
        parts.push(("file", Some(name.as_str()), text("1,2\n")));
    }
    let a = post_form(&server, "/api/v1/import", Auth::Bearer(&submitter), &parts);
    assert_eq!(a.status, 413, "{}", a.body);
    assert_eq!(a.body["kind"], "too-many-files");
    assert_eq!(lab.state(), before);

    // revise: a new revision by the signed-in account, pending again, signed-in in the trail;
    // a field the API does not know is refused.
    let r = call(
        &server,
        "POST",
        &format!("/api/v1/spectra/{added}/revise"),
        Auth::Bearer(&curator),
        Some(
            json!({ "reason": "typo", "name": "api alpha (revised)", "extra": { "class": null } }),
        ),
    );
    assert_eq!(r.status, 200, "{}", r.body);
    assert_eq!(r.body["revision"], 2);
    let shown = lab.json(&["show", &added.to_string()]);
    assert_eq!(
        shown["spectrum"]["metadata"]["name"], "api alpha (revised)",
        "{shown}"
    );
    let last = lab
        .json(&["log", &added.to_string()])
        .as_array()
        .unwrap()
        .last()
        .cloned()
        .unwrap();
    assert_eq!(
        (
            last["action"].as_str(),
            last["identity"].as_str(),
            last["actor"].as_str()
        ),
        (Some("revise"), Some("signed-in"), Some("c.curator")),
        "{last}"
    );
    for body in [
        json!({ "reason": "  " }),
        json!({ "reason": "x", "reviser": "a.admin" }),
    ] {
        let before = lab.state();
        let r = call(
            &server,
            "POST",
            &format!("/api/v1/spectra/{added}/revise"),
            Auth::Bearer(&curator),
            Some(body),
        );
        assert!(r.status == 400 || r.status == 422, "{}", r.body);
        assert_eq!(lab.state(), before);
    }
    let r = call(
        &server,
        "POST",
        "/api/v1/spectra/999999/revise",
        Auth::Bearer(&curator),
        Some(json!({ "reason": "x" })),
    );
    assert_eq!(r.status, 404, "{}", r.body);

    // reinstate: a spectrum withdrawn through the API comes back pending through the API,
    // recorded as the signed-in curator; a spectrum that is not withdrawn, or no reason, is
    // refused with nothing changed.
    let w = call(
        &server,
        "POST",
        &format!("/api/v1/spectra/{added}/withdraw"),
        Auth::Bearer(&curator),
        Some(json!({ "reason": "wrong lot" })),
    );
    assert_eq!(w.status, 200, "{}", w.body);
    assert_eq!(
        lab.json(&["show", &added.to_string()])["spectrum"]["status"],
        "withdrawn"
    );
    for (body, token, status) in [
        (json!({ "reason": " " }), &curator, 400),
        (json!({ "reason": "lot confirmed" }), &submitter, 403),
    ] {
        let before = lab.state();
        let r = call(
            &server,
            "POST",
            &format!("/api/v1/spectra/{added}/reinstate"),
            Auth::Bearer(token),
            Some(body),
        );
        assert_eq!(r.status, status, "{}", r.body);
        assert_eq!(lab.state(), before);
    }
    let r = call(
        &server,
        "POST",
        &format!("/api/v1/spectra/{added}/reinstate"),
        Auth::Bearer(&curator),
        Some(json!({ "reason": "lot confirmed by the supplier" })),
    );
    assert_eq!(r.status, 200, "{}", r.body);
    assert_eq!(r.body["status"], "pending");
    let shown = lab.json(&["show", &added.to_string()]);
    assert_eq!(shown["spectrum"]["status"], "pending", "{shown}");
    let last = lab
        .json(&["log", &added.to_string()])
        .as_array()
        .unwrap()
        .last()
        .cloned()
        .unwrap();
    assert_eq!(
        (
            last["action"].as_str(),
            last["identity"].as_str(),
            last["actor"].as_str()
        ),
        (Some("reinstate"), Some("signed-in"), Some("c.curator")),
        "{last}"
    );
    let again = call(
        &server,
        "POST",
        &format!("/api/v1/spectra/{added}/reinstate"),
        Auth::Bearer(&curator),
        Some(json!({ "reason": "twice" })),
    );
    assert_eq!(again.status, 400, "{}", again.body);
    assert!(
        again.body["message"]
            .as_str()
            .unwrap()
            .contains("not withdrawn"),
        "{}",
        again.body
    );

    // check: the report of `whorl check --json`, clean.
    let c = call(
        &server,
        "POST",
        "/api/v1/check",
        Auth::Bearer(&curator),
        None,
    );
    assert_eq!(c.status, 200, "{}", c.body);
    assert_eq!(c.body["findings"], json!([]));
    assert_eq!(c.body["spectra"], lab.json(&["check"])["spectra"]);
    assert_eq!(c.body["state_hash"], lab.state_hash());

    // A recorded check changes no spectrum, so it leaves the vector cache current: the check
    // rebuilds the cache as it verifies, and the next search maps that same file instead of
    // building a new one and renaming it into place (a new inode).
    let unknown = seed().join("unknowns/u01.ir.csv");
    let search = || lab.ok(&["search", unknown.to_str().unwrap(), "-t", "ir"]);
    let state_hash = lab.state_hash();
    let c = call(
        &server,
        "POST",
        "/api/v1/check",
        Auth::Bearer(&curator),
        None,
    );
    assert_eq!(c.status, 200, "{}", c.body);
    assert_eq!(
        lab.json(&["log"]).as_array().unwrap().last().unwrap()["action"],
        "check"
    );
    assert_eq!(lab.state_hash(), state_hash);
    let before = ir_cache_identity(&lab);
    search();
    assert_eq!(
        ir_cache_identity(&lab),
        before,
        "the recorded check made the cache rebuild"
    );
    // A spectrum added after the cache was built is seen by the next search: scored beside the
    // cache (its tail) or in a rebuilt one.
    let candidates = || {
        lab.json(&[
            "search",
            unknown.to_str().unwrap(),
            "-t",
            "ir",
            "--include-pending",
        ])["candidates"]
            .as_i64()
            .unwrap()
    };
    let compared = candidates();
    pending(&lab, 90);
    assert_eq!(
        candidates(),
        compared + 1,
        "a new spectrum was not searched"
    );
}

/// The IR vector cache file's inode and modification time: a rebuild writes a new file and
/// renames it into place, so both change.
fn ir_cache_identity(lab: &Lab) -> (u64, i64, i64) {
    use std::os::unix::fs::MetadataExt;
    let file = std::fs::read_dir(lab.library().join("cache"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| {
            let name = p.file_name().unwrap().to_string_lossy();
            name.starts_with("ir.") && name.ends_with(".wvc")
        })
        .expect("an IR vector cache after a search");
    let m = std::fs::metadata(file).unwrap();
    (m.ino(), m.mtime(), m.mtime_nsec())
}

#[test]
fn an_upload_larger_than_max_body_is_refused_and_nothing_is_stored() {
    let lab = lab_with_accounts();
    let server = Server::start_with(&lab, &["--max-body", "1"]);
    let t = lab
        .ok(&[
            "token",
            "create",
            "--account",
            "s.submitter",
            "--label",
            "big",
        ])
        .trim()
        .to_string();
    let before = lab.state();
    // Declared too large: refused from the headers, before the body is read.
    let address = server.base.trim_start_matches("http://").to_string();
    let mut stream = std::net::TcpStream::connect(&address).unwrap();
    stream
        .set_read_timeout(Some(std::time::Duration::from_secs(20)))
        .unwrap();
    write!(
        stream,
        "POST /api/v1/spectra HTTP/1.1\r\nHost: {address}\r\nAuthorization: Bearer {t}\r\nContent-Type: multipart/form-data; boundary=b\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
        2 << 20
    )
    .unwrap();
    let mut raw = String::new();
    std::io::Read::read_to_string(&mut stream, &mut raw).unwrap();
    assert!(raw.starts_with("HTTP/1.1 413"), "{raw}");
    let body: Value = serde_json::from_str(raw.split("\r\n\r\n").nth(1).unwrap()).unwrap();
    assert_eq!(body["kind"], "too-large", "{body}");
    assert!(body["hint"].as_str().unwrap().contains("--max-body"));
    // Sent in chunks without a length: refused while the form is read. Just over the limit,
    // so the client has written all of it when the refusal comes (a larger body would meet
    // a closed connection instead of the answer).
    let big = vec![b'1'; (1 << 20) + 1024];
    let (content_type, form_body) = form(&[
        ("technique", None, text("ir")),
        ("name", None, text("too big")),
        ("file", Some("big.csv"), big),
    ]);
    let a = answer(
        agent()
            .post(server.url("/api/v1/spectra"))
            .header("Authorization", &format!("Bearer {t}"))
            .header("Content-Type", &content_type)
            .send(ureq::SendBody::from_reader(&mut &form_body[..])),
    );
    assert_eq!(a.body["kind"], "too-large", "{}", a.body);
    assert_eq!(a.status, 413, "{}", a.body);
    assert_eq!(lab.state(), before);
}

#[test]
fn backups_taken_during_submissions_check_and_hold_every_acknowledged_write() {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let t = lab
        .ok(&[
            "token",
            "create",
            "--account",
            "s.submitter",
            "--label",
            "backup",
        ])
        .trim()
        .to_string();
    // A reader holding a snapshot open all along (as a long search does): SQLite cannot
    // checkpoint past it, so later commits stay in the write-ahead log, where only a
    // WAL-aware copy finds them (a plain copy of library.sqlite would miss them).
    let reader = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
    reader.execute_batch("BEGIN").unwrap();
    let _: i64 = reader
        .query_row("SELECT count(*) FROM spectrum", [], |r| r.get(0))
        .unwrap();
    let stop = std::sync::atomic::AtomicBool::new(false);
    let acknowledged = std::sync::Mutex::new(Vec::<i64>::new());
    let copies = std::thread::scope(|s| {
        // Submissions through the server, and adds on the command line, while backups run.
        let api = s.spawn(|| {
            let mut n = 0;
            while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                n += 1;
                let a = post_form(
                    &server,
                    "/api/v1/spectra",
                    Auth::Bearer(&t),
                    &[
                        ("technique", None, text("ir")),
                        ("name", None, text(&format!("during backup {n}"))),
                        ("file", Some("b.csv"), distinct_ir(300 + n)),
                    ],
                );
                assert_eq!(a.status, 200, "{}", a.body);
                acknowledged
                    .lock()
                    .unwrap()
                    .push(a.body["spectrum_id"].as_i64().unwrap());
            }
        });
        let cli = s.spawn(|| {
            let mut n = 0;
            while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                n += 1;
                let id = pending(&lab, 700 + n);
                acknowledged.lock().unwrap().push(id);
            }
        });
        // The writers stop also when an assertion below fails (the scope waits for them).
        struct StopOnDrop<'a>(&'a std::sync::atomic::AtomicBool);
        impl Drop for StopOnDrop<'_> {
            fn drop(&mut self) {
                self.0.store(true, std::sync::atomic::Ordering::Relaxed);
            }
        }
        let guard = StopOnDrop(&stop);
        let mut copies = Vec::new();
        for i in 0..3 {
            std::thread::sleep(std::time::Duration::from_millis(700));
            let before: Vec<i64> = acknowledged.lock().unwrap().clone();
            let dest = lab.path(&format!("backup-{i}"));
            let out = lab.ok(&["backup", dest.to_str().unwrap()]);
            assert!(out.contains("library.sqlite"), "{out}");
            copies.push((dest, before));
        }
        drop(guard);
        api.join().unwrap();
        cli.join().unwrap();
        copies
    });
    reader.execute_batch("COMMIT").unwrap();
    drop(reader);
    assert!(acknowledged.lock().unwrap().len() >= 3);
    for (dest, before) in &copies {
        let run = |args: &[&str]| {
            let mut all = vec!["--library", dest.to_str().unwrap()];
            all.extend_from_slice(args);
            lab.ok(&all)
        };
        let checked = run(&["check"]);
        assert!(checked.contains("no inconsistency"), "{checked}");
        let list: Value = serde_json::from_str(&run(&["list", "--json"])).unwrap();
        let ids: Vec<i64> = list
            .as_array()
            .unwrap()
            .iter()
            .map(|r| r["id"].as_i64().unwrap())
            .collect();
        for id in before {
            assert!(
                ids.contains(id),
                "spectrum {id}, acknowledged before the backup, is not in {}",
                dest.display()
            );
        }
    }
    // A folder that is not empty, and one inside the library, are refused.
    let text = lab.fails(&["backup", copies[0].0.to_str().unwrap()], 3);
    assert!(text.contains("not an empty folder"), "{text}");
    let inside = lab.library().join("backup");
    let text = lab.fails(&["backup", inside.to_str().unwrap()], 3);
    assert!(text.contains("inside the library"), "{text}");
    lab.ok(&["check"]);
}

#[test]
fn the_server_speaks_tls_with_its_certificate_and_marks_the_cookie_secure() {
    let lab = lab_with_accounts();
    // A self-signed certificate for the loopback address, made for this test (rcgen).
    let made =
        rcgen::generate_simple_self_signed(vec!["127.0.0.1".into(), "localhost".into()]).unwrap();
    let cert = lab.write("cert.pem", made.cert.pem());
    let key = lab.write("key.pem", made.key_pair.serialize_pem());
    // TLS files that cannot be used are refused before anything is served; with TLS a
    // non-loopback address passes the address check (the refusal names the file instead).
    let text = lab.fails(
        &[
            "serve",
            "--address",
            "0.0.0.0:0",
            "--tls-cert",
            "missing.pem",
            "--tls-key",
            key.to_str().unwrap(),
        ],
        3,
    );
    assert!(
        text.contains("missing.pem") && text.contains("certificate"),
        "{text}"
    );
    let text = lab.fails(
        &[
            "serve",
            "--address",
            "127.0.0.1:0",
            "--tls-cert",
            key.to_str().unwrap(),
            "--tls-key",
            key.to_str().unwrap(),
        ],
        3,
    );
    assert!(text.contains("not accepted"), "{text}");

    let server = Server::start_with(
        &lab,
        &[
            "--tls-cert",
            cert.to_str().unwrap(),
            "--tls-key",
            key.to_str().unwrap(),
        ],
    );
    assert!(
        server.base.starts_with("https://127.0.0.1:"),
        "{}",
        server.base
    );
    let trusting: ureq::Agent = ureq::Agent::config_builder()
        .http_status_as_error(false)
        .tls_config(
            ureq::tls::TlsConfig::builder()
                .root_certs(ureq::tls::RootCerts::Specific(std::sync::Arc::new(vec![
                    ureq::tls::Certificate::from_der(made.cert.der()).to_owned(),
                ])))
                .build(),
        )
        .build()
        .into();
    let health = answer(trusting.get(server.url("/health")).call());
    assert_eq!(health.status, 200, "{}", health.body);
    assert_eq!(health.body["status"], "ok");
    // Sign-in over TLS: the session cookie is Secure, HttpOnly and SameSite=Strict.
    let signed = answer(
        trusting
            .post(server.url("/api/v1/session"))
            .header("Content-Type", "application/json")
            .send(json!({ "name": "v.viewer", "password": PASSWORDS[0].2 }).to_string()),
    );
    assert_eq!(signed.status, 200, "{}", signed.body);
    let set_cookie = signed.headers["set-cookie"].to_str().unwrap();
    assert!(
        set_cookie.contains("Secure")
            && set_cookie.contains("HttpOnly")
            && set_cookie.contains("SameSite=Strict"),
        "{set_cookie}"
    );
    let cookie = set_cookie.split(';').next().unwrap();
    let who = answer(
        trusting
            .get(server.url("/api/v1/session"))
            .header("Cookie", cookie)
            .call(),
    );
    assert_eq!(who.status, 200, "{}", who.body);
    assert_eq!(who.body["account"], "v.viewer");
    // A client that does not trust the certificate is refused by its own TLS check, and
    // plain HTTP on the TLS port gets no HTTP answer.
    let stranger: ureq::Agent = ureq::Agent::config_builder().build().into();
    assert!(stranger.get(server.url("/health")).call().is_err());
    let plain = agent()
        .get(server.url("/health").replacen("https", "http", 1))
        .call();
    assert!(plain.is_err() || plain.unwrap().status().as_u16() >= 400);
}

#[test]
fn roles_change_with_a_reason_audited_and_take_effect_at_once() {
    let lab = lab_with_accounts();
    // On the command line: a reason is needed; the event records before, after and why.
    let text = lab.fails(&["account", "role", "v.viewer", "submitter"], 2);
    assert!(text.contains("--reason"), "{text}");
    lab.ok(&[
        "account",
        "role",
        "V.Viewer",
        "submitter",
        "--reason",
        "joins the GC group",
        "--by",
        "a.admin",
    ]);
    let event = lab
        .json(&["log"])
        .as_array()
        .unwrap()
        .last()
        .cloned()
        .unwrap();
    assert_eq!(event["action"], "account-role");
    assert_eq!(event["payload"]["from"], "reader");
    assert_eq!(event["payload"]["role"], "submitter");
    assert_eq!(event["payload"]["reason"], "joins the GC group");
    let text = lab.refuses(
        &["account", "role", "a.admin", "reader", "--reason", "x"],
        3,
    );
    assert!(text.contains("only active administrator"), "{text}");
    let text = lab.refuses(
        &["account", "role", "v.viewer", "submitter", "--reason", "x"],
        3,
    );
    assert!(text.contains("already has the role"), "{text}");
    lab.ok(&["check"]);

    // Through the API, by an administrator; the account's token carries the new role at its
    // next request.
    let server = Server::start(&lab);
    let tokens = tokens(&lab);
    let token = |name: &str| tokens.iter().find(|t| t.0 == name).unwrap().2.clone();
    let viewer = token("v.viewer");
    let stats = || {
        call(
            &server,
            "POST",
            "/api/v1/check",
            Auth::Bearer(&viewer),
            None,
        )
        .status
    };
    assert_eq!(stats(), 403);
    let r = call(
        &server,
        "POST",
        "/api/v1/accounts/v.viewer/role",
        Auth::Bearer(&token("a.admin")),
        Some(json!({ "role": "curator", "reason": "curates the IR set", "name": "ignored" })),
    );
    assert_eq!(r.status, 200, "{}", r.body);
    assert_eq!(r.body["role"], "curator");
    assert_eq!(stats(), 200);
    // The check just run is recorded as the newest event, by the new curator, signed in; the
    // role change is the event before it.
    let log = lab.json(&["log"]);
    let log = log.as_array().unwrap();
    let check = &log[log.len() - 1];
    assert_eq!(
        (
            check["action"].as_str(),
            check["actor"].as_str(),
            check["identity"].as_str(),
            check["payload"]["findings"].as_u64()
        ),
        (Some("check"), Some("v.viewer"), Some("signed-in"), Some(0)),
        "{check}"
    );
    let event = log[log.len() - 2].clone();
    assert_eq!(
        (
            event["action"].as_str(),
            event["actor"].as_str(),
            event["identity"].as_str()
        ),
        (Some("account-role"), Some("a.admin"), Some("signed-in")),
        "{event}"
    );
    for (body, status) in [
        (json!({ "role": "owner", "reason": "x" }), 400),
        (json!({ "role": "reader", "reason": " " }), 400),
        (json!({ "role": "reader" }), 422),
    ] {
        let before = lab.state();
        let r = call(
            &server,
            "POST",
            "/api/v1/accounts/v.viewer/role",
            Auth::Bearer(&token("a.admin")),
            Some(body),
        );
        assert_eq!(r.status, status, "{}", r.body);
        assert_eq!(lab.state(), before);
    }
    let r = call(
        &server,
        "POST",
        "/api/v1/accounts/nobody/role",
        Auth::Bearer(&token("a.admin")),
        Some(json!({ "role": "reader", "reason": "x" })),
    );
    assert!(r.status == 400 || r.status == 404, "{}", r.body);
    lab.ok(&["check"]);
}

/// Waits (at most 30 s) for a file to appear.
fn wait_for(path: &std::path::Path) {
    let started = std::time::Instant::now();
    while !path.exists() {
        assert!(
            started.elapsed() < std::time::Duration::from_secs(30),
            "{} did not appear",
            path.display()
        );
        std::thread::sleep(std::time::Duration::from_millis(100));
    }
}

#[test]
fn drops_in_the_inbox_are_imported_as_its_account_once_their_marker_is_there() {
    let lab = lab_with_accounts();
    let inbox = lab.path("inbox");
    std::fs::create_dir(&inbox).unwrap();
    // The account must exist and may submit.
    let text = lab.fails(
        &[
            "serve",
            "--inbox",
            inbox.to_str().unwrap(),
            "--inbox-account",
            "v.viewer",
        ],
        3,
    );
    assert!(text.contains("may not submit"), "{text}");
    let server = Server::start_with(
        &lab,
        &[
            "--inbox",
            inbox.to_str().unwrap(),
            "--inbox-account",
            "S.Submitter",
        ],
    );
    let _ = &server;
    let before = lab.state();
    // A drop without its marker (still being copied) is never read.
    std::fs::create_dir(inbox.join("spectra")).unwrap();
    std::fs::write(
        inbox.join("run1.csv"),
        "file,technique,name,class\nspectra/r1a.csv,ir,dropped alpha,drop\nspectra/r1b.csv,ir,dropped beta,drop\n",
    )
    .unwrap();
    std::fs::write(inbox.join("spectra/r1a.csv"), distinct_ir(900)).unwrap();
    // Half a file, as a copy in progress leaves it.
    let whole = distinct_ir(901);
    std::fs::write(inbox.join("spectra/r1b.csv"), &whole[..whole.len() / 2]).unwrap();
    std::thread::sleep(std::time::Duration::from_millis(2500));
    assert_eq!(lab.state(), before, "a drop without its marker was read");
    assert!(inbox.join("run1.csv").exists());
    // The copy finishes, then the marker: imported, moved to done/ with the result.
    std::fs::write(inbox.join("spectra/r1b.csv"), &whole).unwrap();
    std::fs::write(inbox.join("run1.ready"), "").unwrap();
    let result = inbox.join("done/run1/run1.result.json");
    wait_for(&result);
    let result: Value = serde_json::from_str(&std::fs::read_to_string(&result).unwrap()).unwrap();
    assert_eq!(result["imported"], 2, "{result}");
    assert_eq!(result["account"], "s.submitter");
    for f in [
        "run1.csv",
        "run1.ready",
        "spectra/r1a.csv",
        "spectra/r1b.csv",
    ] {
        assert!(inbox.join("done/run1").join(f).is_file(), "{f} not moved");
        assert!(!inbox.join(f).exists(), "{f} left in the inbox");
    }
    let found = lab.json(&["find", "class:drop"]);
    assert_eq!(found.as_array().unwrap().len(), 2, "{found}");
    let id = found[0]["spectrum_id"].to_string();
    let shown = lab.json(&["show", &id]);
    assert_eq!(shown["spectrum"]["submitted_by"], "s.submitter", "{shown}");
    assert_eq!(shown["spectrum"]["status"], "pending");
    let event = lab.json(&["log", &id]).as_array().unwrap()[0].clone();
    assert_eq!(
        (event["actor"].as_str(), event["identity"].as_str()),
        (Some("s.submitter"), Some("asserted")),
        "{event}"
    );

    // A drop with a bad row: nothing imported, moved to failed/ with the reason per row.
    let before = lab.state();
    std::fs::write(
        inbox.join("run2.csv"),
        "file,technique,name\nr2a.csv,ir,good row\nr2b.csv,ir,missing file\n",
    )
    .unwrap();
    std::fs::write(inbox.join("r2a.csv"), distinct_ir(902)).unwrap();
    std::fs::write(inbox.join("run2.ready"), "").unwrap();
    let result = inbox.join("failed/run2/run2.result.json");
    wait_for(&result);
    let result: Value = serde_json::from_str(&std::fs::read_to_string(&result).unwrap()).unwrap();
    assert_eq!(result["rolled_back"], true, "{result}");
    assert_eq!(result["rows"][0]["result"], "rejected", "{result}");
    assert!(
        result["rows"][0]["reason"]
            .as_str()
            .unwrap()
            .contains("r2b.csv"),
        "{result}"
    );
    assert!(inbox.join("failed/run2/r2a.csv").is_file());
    assert_eq!(lab.state(), before);
    // A manifest refused as a whole: failed/, with the message and hint.
    std::fs::write(inbox.join("run3.csv"), "file,name\nx.csv,y\n").unwrap();
    std::fs::write(inbox.join("run3.ready"), "").unwrap();
    let result = inbox.join("failed/run3/run3.result.json");
    wait_for(&result);
    let result: Value = serde_json::from_str(&std::fs::read_to_string(&result).unwrap()).unwrap();
    assert!(
        result["error"]["message"]
            .as_str()
            .unwrap()
            .contains("no 'technique' column"),
        "{result}"
    );
    lab.ok(&["check"]);
}

/// Posts without panicking when the server is gone: the status and body, or `None` when no
/// answer came (the connection refused or cut).
fn try_post(
    base: &str,
    path: &str,
    token: &str,
    content_type: &str,
    body: &[u8],
) -> Option<(u16, Value)> {
    let r = agent()
        .post(format!("{base}{path}"))
        .header("Authorization", &format!("Bearer {token}"))
        .header("Content-Type", content_type)
        .send(body)
        .ok()?;
    let status = r.status().as_u16();
    let text = r.into_body().read_to_string().ok()?;
    Some((status, serde_json::from_str(&text).unwrap_or(Value::Null)))
}

#[test]
fn the_server_killed_twenty_times_keeps_every_acknowledged_write_and_checks() {
    let lab = Lab::new();
    for (name, role, password) in [PASSWORDS[1], PASSWORDS[2]] {
        lab.ok(&["account", "add", name, "--role", role]);
        assert!(
            crate::serve::set_password(&lab, name, password)
                .status
                .success()
        );
    }
    let token = |name: &str| {
        lab.ok(&["token", "create", "--account", name, "--label", "faults"])
            .trim()
            .to_string()
    };
    let (submitter, signer) = (token("s.submitter"), token("g.signer"));
    let added = std::sync::Mutex::new(Vec::<i64>::new());
    let signed = std::sync::Mutex::new(Vec::<i64>::new());
    let mut n = 0usize;
    // Twenty kills at least, and more (up to sixty) while fewer than twenty submissions and no
    // sign-off have been acknowledged: on a loaded machine a round can end before its first
    // answer, and the test means something only with enough acknowledged writes.
    for round in 0..60 {
        let enough = added.lock().unwrap().len() >= 20 && !signed.lock().unwrap().is_empty();
        if round >= 20 && enough {
            break;
        }
        let mut server = Server::start(&lab);
        // Spectra submitted in earlier rounds and not yet signed off.
        let mut to_sign: Vec<i64> = {
            let s = signed.lock().unwrap();
            added
                .lock()
                .unwrap()
                .iter()
                .copied()
                .filter(|id| !s.contains(id))
                .collect()
        };
        let first = n;
        n += 1_000;
        let base = server.base.clone();
        let pid = server.child.id().to_string();
        std::thread::scope(|s| {
            s.spawn(|| {
                for k in 0.. {
                    let (ct, body) = form(&[
                        ("technique", None, text("ir")),
                        ("name", None, text(&format!("fault {round} {k}"))),
                        ("file", Some("f.csv"), distinct_ir(first + k)),
                    ]);
                    match try_post(&base, "/api/v1/spectra", &submitter, &ct, &body) {
                        Some((200, v)) => added
                            .lock()
                            .unwrap()
                            .push(v["spectrum_id"].as_i64().unwrap()),
                        Some((status, v)) => panic!("submission answered {status}: {v}"),
                        None => break,
                    }
                }
            });
            s.spawn(|| {
                while let Some(id) = to_sign.pop() {
                    let body =
                        json!({ "decision": "approve", "password": PASSWORDS[2].2 }).to_string();
                    match try_post(
                        &base,
                        &format!("/api/v1/spectra/{id}/review"),
                        &signer,
                        "application/json",
                        body.as_bytes(),
                    ) {
                        Some((200, _)) => signed.lock().unwrap().push(id),
                        // Signed in a round killed before its answer came back: committed,
                        // never acknowledged.
                        Some((400, v))
                            if v["message"]
                                .as_str()
                                .is_some_and(|m| m.contains("already verified")) => {}
                        Some((status, v)) => panic!("sign-off of {id} answered {status}: {v}"),
                        None => break,
                    }
                }
            });
            // Killed at a different moment each round, while both are under way.
            std::thread::sleep(std::time::Duration::from_millis(
                250 + (round * 53 % 300) as u64,
            ));
            let killed = std::process::Command::new("kill")
                .args(["-KILL", &pid])
                .status()
                .unwrap();
            assert!(killed.success());
        });
        server.child.wait().unwrap();
        let checked = lab.ok(&["check"]);
        assert!(
            checked.contains("no inconsistency"),
            "round {round}: {checked}"
        );
        let list = lab.json(&["list"]);
        let status: std::collections::HashMap<i64, String> = list
            .as_array()
            .unwrap()
            .iter()
            .map(|r| {
                (
                    r["id"].as_i64().unwrap(),
                    r["status"].as_str().unwrap().to_string(),
                )
            })
            .collect();
        for id in added.lock().unwrap().iter() {
            assert!(
                status.contains_key(id),
                "round {round}: acknowledged submission {id} is missing"
            );
        }
        for id in signed.lock().unwrap().iter() {
            assert_eq!(
                status[id], "verified",
                "round {round}: acknowledged sign-off of {id} is missing"
            );
        }
    }
    assert!(
        added.lock().unwrap().len() >= 20,
        "too few submissions to mean anything"
    );
    assert!(
        !signed.lock().unwrap().is_empty(),
        "no sign-off was acknowledged"
    );
}

/// Every page form that changes state (the router's POST routes outside `/api/`, bar the
/// public sign-in, which ties its form to the browser by a cookie of its own) refuses a
/// missing or a wrong CSRF token from a signed-in session before it does anything else:
/// 403, the refusal page, the library unchanged (OWASP Cross-Site Request Forgery Prevention
/// Cheat Sheet, synchronizer token pattern). The routes come from the router, so a new form
/// cannot be left out.
#[test]
fn every_page_form_refuses_a_missing_or_wrong_csrf_token() {
    let lab = lab_with_accounts();
    let id = pending(&lab, 1);
    let server = Server::start(&lab);
    let (name, _, password) = PASSWORDS.iter().find(|p| p.1 == "admin").unwrap();
    let (_, cookie) = crate::serve::sign_in(&server, name, password);
    let cookie = cookie.expect("a session cookie");
    let mut checked = 0;
    for r in routes(&lab) {
        let (method, path) = (r["method"].as_str().unwrap(), r["path"].as_str().unwrap());
        if method != "POST" || path.starts_with("/api/") || r["access"] == "public" {
            continue;
        }
        let concrete = path
            .replace("{id}", &id.to_string())
            .replace("{key}", "0123456789abcdef");
        for token in [None, Some("forged-token")] {
            let before = lab.state();
            let accounts = lab.json(&["account", "list"]);
            let csrf = token.map(|t| format!("csrf={t}&")).unwrap_or_default();
            let req = agent()
                .post(server.url(&concrete))
                .header("Cookie", &cookie);
            // The multipart forms get a complete upload, the others every field any of them
            // takes: only the token is wrong.
            let mut parts: Vec<Part> = match path {
                "/search" => vec![("technique", None, text("ir"))],
                "/submit" => vec![
                    ("technique", None, text("ir")),
                    ("name", None, text("csrf probe")),
                ],
                "/submit/manifest" => vec![(
                    "manifest",
                    Some("m.csv"),
                    text("file,technique,name\nu.csv,ir,csrf probe\n"),
                )],
                _ => Vec::new(),
            };
            let multipart = !parts.is_empty() || path == "/identify";
            let sent = if multipart {
                let file_part = if path == "/identify" { "ir" } else { "file" };
                parts.push((file_part, Some("u.csv"), distinct_ir(7)));
                if let Some(t) = token {
                    parts.push(("csrf", None, text(t)));
                }
                let (ct, body) = form(&parts);
                req.header("Content-Type", &ct).send(&body[..])
            } else {
                let body = format!(
                    "{csrf}technique=ir&decision=approve&password={p}&again={p}&name=t.csrfprobe&role=admin&reason=csrf+probe&sha256=00",
                    p = password.replace(' ', "+")
                );
                req.header("Content-Type", "application/x-www-form-urlencoded")
                    .send(body.as_bytes())
            };
            let mut answer = sent.expect("an HTTP answer");
            let status = answer.status().as_u16();
            let text = answer.body_mut().read_to_string().unwrap();
            assert_eq!(status, 403, "{method} {path} with {token:?}: {text}");
            assert!(
                text.contains("security token is missing or belongs to another session"),
                "{path}: {text}"
            );
            assert_eq!(lab.state(), before, "{path} changed the library");
            assert_eq!(
                lab.json(&["account", "list"]),
                accounts,
                "{path} changed the accounts"
            );
            checked += 1;
        }
    }
    // The search form, searching again, the sign-off, the sign-out, the submission and its
    // confirmation, the manifest, the identification, and the three account forms, twice each.
    assert!(checked >= 22, "only {checked} refusals");
    // The pending spectrum is still pending: no sign-off went through.
    assert_eq!(
        lab.json(&["show", &id.to_string()])["spectrum"]["status"],
        "pending"
    );
}

#[test]
fn a_curator_merges_two_compounds_through_the_api_and_a_reader_cannot() {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let tokens = tokens(&lab);
    let token = |role: &str| tokens.iter().find(|t| t.1 == role).unwrap().2.clone();
    // A spectrum whose compound is a row of its own, as one stored without its CAS RN is.
    let spectrum = pending(&lab, 1);
    let away = compound_of(&lab, spectrum);
    let into = 1;

    let listed = call(
        &server,
        "GET",
        "/api/v1/compounds",
        Auth::Bearer(&token("reader")),
        None,
    );
    assert_eq!(listed.status, 200, "{}", listed.body);
    let ids: Vec<i64> = listed.body["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["id"].as_i64().unwrap())
        .collect();
    assert!(ids.contains(&away) && ids.contains(&into), "{ids:?}");

    let path = format!("/api/v1/compounds/{away}/merge");
    let body = json!({ "into": into, "reason": "one substance; its CAS RN was left out" });
    let before = lab.state();
    let refused = call(
        &server,
        "POST",
        &path,
        Auth::Bearer(&token("reader")),
        Some(body.clone()),
    );
    assert_eq!(refused.status, 403, "{}", refused.body);
    assert_eq!(lab.state(), before);
    let blank = call(
        &server,
        "POST",
        &path,
        Auth::Bearer(&token("curator")),
        Some(json!({ "into": into, "reason": " " })),
    );
    assert_eq!(blank.status, 400, "{}", blank.body);
    assert!(
        blank.body["message"]
            .as_str()
            .unwrap()
            .contains("needs a reason"),
        "{}",
        blank.body
    );

    let merged = call(
        &server,
        "POST",
        &path,
        Auth::Bearer(&token("curator")),
        Some(body),
    );
    assert_eq!(merged.status, 200, "{}", merged.body);
    assert_eq!(merged.body["merge"]["spectra"], json!([spectrum]));
    let curator = PASSWORDS.iter().find(|p| p.1 == "curator").unwrap().0;
    assert_eq!(merged.body["by"], curator);
    assert_eq!(compound_of(&lab, spectrum), into);
    let shown = call(
        &server,
        "GET",
        &format!("/api/v1/compounds/{away}"),
        Auth::Bearer(&token("reader")),
        None,
    );
    assert_eq!(
        shown.body["compound"]["merged_into"], into,
        "{}",
        shown.body
    );
    // The merge is a signed-in event by the curator, and the spectrum's log shows it.
    let log = lab.json(&["log", &spectrum.to_string()]);
    let event = log
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["action"] == "compound-merge")
        .unwrap_or_else(|| panic!("no merge in {log}"));
    assert_eq!(event["actor"], curator, "{event}");
    assert_eq!(event["identity"], "signed-in", "{event}");
    lab.ok(&["check"]);
}
