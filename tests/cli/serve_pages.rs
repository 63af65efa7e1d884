//! The submit, identify and accounts pages against the real server on a free loopback port:
//! what each saves, as whom, and what it refuses (the browser flows in tests/browser drive the
//! same pages in chromium).

use serde_json::Value;

use crate::serve::{PASSWORDS, Server, lab_with_accounts, sign_in};
use crate::serve_api::{Part, distinct_ir, form};
use crate::util::{Lab, seed};

/// An HTML answer: status, `Location` when redirected, body.
struct Page {
    status: u16,
    location: String,
    html: String,
}

/// An agent that does not follow redirects, so a test sees where a form sends the browser.
fn agent() -> ureq::Agent {
    ureq::Agent::config_builder()
        .http_status_as_error(false)
        .max_redirects(0)
        .build()
        .into()
}

fn page(r: Result<ureq::http::Response<ureq::Body>, ureq::Error>) -> Page {
    let mut r = r.expect("an HTTP answer");
    Page {
        status: r.status().as_u16(),
        location: r
            .headers()
            .get("location")
            .map(|v| v.to_str().unwrap().to_string())
            .unwrap_or_default(),
        html: r.body_mut().read_to_string().unwrap(),
    }
}

fn get(server: &Server, cookie: &str, path: &str) -> Page {
    page(
        agent()
            .get(server.url(path))
            .header("Cookie", cookie)
            .header("Accept", "text/html")
            .call(),
    )
}

fn post_multipart(server: &Server, cookie: &str, path: &str, parts: &[Part]) -> Page {
    let (ct, body) = form(parts);
    page(
        agent()
            .post(server.url(path))
            .header("Cookie", cookie)
            .header("Accept", "text/html")
            .header("Content-Type", &ct)
            .send(&body[..]),
    )
}

fn post_fields(server: &Server, cookie: &str, path: &str, fields: &[(&str, &str)]) -> Page {
    let body: Vec<String> = fields
        .iter()
        .map(|(k, v)| format!("{k}={}", v.replace('+', "%2B").replace(' ', "+")))
        .collect();
    page(
        agent()
            .post(server.url(path))
            .header("Cookie", cookie)
            .header("Accept", "text/html")
            .header("Content-Type", "application/x-www-form-urlencoded")
            .send(body.join("&").as_bytes()),
    )
}

/// The value of the first hidden field `name` of a page.
fn hidden(html: &str, name: &str) -> String {
    let key = format!("name=\"{name}\" value=\"");
    let at = html
        .find(&key)
        .unwrap_or_else(|| panic!("no field {name} in {html}"))
        + key.len();
    html[at..].split('"').next().unwrap().to_string()
}

/// Signs in as the account of `role` in [`PASSWORDS`]; the session cookie and its form token.
fn session(server: &Server, role: &str) -> (String, String) {
    let (name, _, password) = PASSWORDS.iter().find(|p| p.1 == role).unwrap();
    let (_, cookie) = sign_in(server, name, password);
    let cookie = cookie.expect("a session cookie");
    let start = get(server, &cookie, "/search");
    assert_eq!(start.status, 200, "{}", start.html);
    let csrf = hidden(&start.html, "csrf");
    (cookie, csrf)
}

fn text(s: &str) -> Vec<u8> {
    s.as_bytes().to_vec()
}

/// An IR file of 1-butanol with every absorbance scaled by 0.97: other raw points, the same
/// spectrum once prepared (each is scaled to its own maximum).
fn butanol_again() -> Vec<u8> {
    let original = std::fs::read_to_string(seed().join("spectra/1-butanol.ir.csv")).unwrap();
    let mut out = String::new();
    for line in original.lines() {
        match line.split_once(',') {
            Some((x, y)) if y.parse::<f64>().is_ok() => {
                out.push_str(&format!("{x},{:.6}\n", y.parse::<f64>().unwrap() * 0.97))
            }
            _ => {
                out.push_str(line);
                out.push('\n');
            }
        }
    }
    out.into_bytes()
}

fn list(lab: &Lab) -> Vec<Value> {
    lab.json(&["list"]).as_array().unwrap().clone()
}

#[test]
fn a_submission_is_previewed_with_its_warnings_and_saved_only_when_confirmed_as_the_signed_in_account()
 {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let (cookie, csrf) = session(&server, "submitter");
    let file = butanol_again();
    let sha256 = whorl::spectrum::sha256_hex(&file);
    let before = lab.state();
    let fields = |name: &str| -> Vec<Part> {
        vec![
            ("csrf", None, text(&csrf)),
            ("technique", None, text("ir")),
            ("name", None, text(name)),
            ("formula", None, text("")),
            ("file", Some("probe.ir.csv"), file.clone()),
        ]
    };

    // An identity given in the form is refused: the server takes it from the session.
    let mut forged = fields("probe compound");
    forged.push(("submitted_by", None, text("g.signer")));
    let refused = post_multipart(&server, &cookie, "/submit", &forged);
    assert_eq!(refused.status, 400, "{}", refused.html);
    assert!(refused.html.contains("submitted_by"), "{}", refused.html);
    // A formula no structure can have is refused by the check `whorl add` makes.
    let mut impossible = fields("probe compound");
    impossible[3].2 = text("C2H9");
    let refused = post_multipart(&server, &cookie, "/submit", &impossible);
    assert_eq!(refused.status, 400, "{}", refused.html);
    assert!(refused.html.contains("C2H9"), "{}", refused.html);

    // The preview: held under a random key, nothing saved, the near duplicate of 1-butanol
    // (another compound by its name) warned about.
    let held = post_multipart(&server, &cookie, "/submit", &fields("probe compound"));
    assert_eq!(held.status, 303, "{}", held.html);
    let key = held.location.strip_prefix("/submit/").unwrap().to_string();
    assert_eq!(key.len(), 32, "{key}");
    assert_eq!(lab.state(), before, "the preview saved something");
    let preview = get(&server, &cookie, &held.location);
    assert_eq!(preview.status, 200, "{}", preview.html);
    assert!(preview.html.contains("Not saved yet"));
    assert!(
        preview.html.contains(&sha256),
        "the preview names the file's SHA-256"
    );
    assert!(
        preview.html.contains("Near-duplicate of another compound")
            && preview.html.contains("1-butanol"),
        "{}",
        preview.html
    );
    assert!(preview.html.contains("<svg"), "no plot");

    // The confirmation must name the previewed file and come from the session that previewed it.
    let confirm = format!("/submit/{key}/confirm");
    let wrong = post_fields(
        &server,
        &cookie,
        &confirm,
        &[("csrf", &csrf), ("sha256", &"0".repeat(64))],
    );
    assert_eq!(wrong.status, 400, "{}", wrong.html);
    let (other_cookie, other_csrf) = session(&server, "submitter");
    let elsewhere = post_fields(
        &server,
        &other_cookie,
        &confirm,
        &[("csrf", &other_csrf), ("sha256", &sha256)],
    );
    assert_eq!(elsewhere.status, 404, "{}", elsewhere.html);
    let (signer_cookie, _) = session(&server, "signer");
    let signer = get(&server, &signer_cookie, &held.location);
    assert_eq!(
        signer.status, 403,
        "a signer may not submit: {}",
        signer.html
    );
    assert_eq!(
        lab.state(),
        before,
        "a refused confirmation saved something"
    );

    // Confirmed: saved pending, submitted and stored by the signed-in account.
    let saved = post_fields(
        &server,
        &cookie,
        &confirm,
        &[("csrf", &csrf), ("sha256", &sha256)],
    );
    assert_eq!(saved.status, 303, "{}", saved.html);
    let id: i64 = saved
        .location
        .strip_prefix("/spectra/")
        .and_then(|s| s.strip_suffix("?submitted=added"))
        .unwrap_or_else(|| panic!("{}", saved.location))
        .parse()
        .unwrap();
    let shown = lab.json(&["show", &id.to_string()]);
    assert_eq!(shown["spectrum"]["status"], "pending");
    assert_eq!(shown["spectrum"]["submitted_by"], "s.submitter");
    assert_eq!(shown["spectrum"]["metadata"]["name"], "probe compound");
    assert_eq!(shown["spectrum"]["file_sha256"], sha256.as_str());
    let notice = get(&server, &cookie, &saved.location);
    assert!(notice.html.contains("Saved: spectrum"), "{}", notice.html);
    let log = lab.json(&["log"]);
    let add = log
        .as_array()
        .unwrap()
        .iter()
        .rfind(|e| e["action"] == "add")
        .unwrap();
    assert_eq!(
        (add["actor"].as_str(), add["identity"].as_str()),
        (Some("s.submitter"), Some("signed-in"))
    );
    // Used once: a second confirmation finds nothing held.
    let again = post_fields(
        &server,
        &cookie,
        &confirm,
        &[("csrf", &csrf), ("sha256", &sha256)],
    );
    assert_eq!(again.status, 404, "{}", again.html);

    // A preview discarded: let go of at once, by its own session only; nothing saved.
    let before_discard = lab.state();
    let held = post_multipart(&server, &cookie, "/submit", &fields("probe to discard"));
    assert_eq!(held.status, 303, "{}", held.html);
    let key = held.location.strip_prefix("/submit/").unwrap().to_string();
    let preview = get(&server, &cookie, &held.location);
    assert!(
        preview
            .html
            .contains(&format!("action=\"/submit/{key}/discard\"")),
        "the preview offers to discard it: {}",
        preview.html
    );
    let discard = format!("/submit/{key}/discard");
    let elsewhere = post_fields(&server, &other_cookie, &discard, &[("csrf", &other_csrf)]);
    assert_eq!(elsewhere.status, 404, "{}", elsewhere.html);
    assert_eq!(
        get(&server, &cookie, &held.location).status,
        200,
        "still held"
    );
    let discarded = post_fields(&server, &cookie, &discard, &[("csrf", &csrf)]);
    assert_eq!(discarded.status, 303, "{}", discarded.html);
    assert_eq!(discarded.location, "/submit?discarded=1");
    let page = get(&server, &cookie, &discarded.location);
    assert!(page.html.contains("was discarded"), "{}", page.html);
    assert_eq!(get(&server, &cookie, &held.location).status, 404);
    let late = post_fields(
        &server,
        &cookie,
        &format!("/submit/{key}/confirm"),
        &[("csrf", &csrf), ("sha256", &sha256)],
    );
    assert_eq!(late.status, 404, "{}", late.html);
    assert_eq!(
        lab.state(),
        before_discard,
        "a discarded preview saved something"
    );

    // A manifest with its files, chosen in a browser (names without folders): a result per
    // row, the missing file refused, the other row stored as the signed-in account.
    let n = list(&lab).len();
    let manifest = post_multipart(
        &server,
        &cookie,
        "/submit/manifest",
        &[
            ("csrf", None, text(&csrf)),
            (
                "manifest",
                Some("batch.csv"),
                text("file,technique,name\nspectra/a.csv,ir,probe a\nmissing.csv,ir,probe b\n"),
            ),
            ("file", Some("a.csv"), distinct_ir(41)),
            ("file", Some(""), Vec::new()),
        ],
    );
    assert_eq!(manifest.status, 422, "{}", manifest.html);
    assert!(manifest.html.contains("1 added"), "{}", manifest.html);
    let rows: Vec<&str> = manifest.html.split("<tr>").skip(2).collect();
    assert_eq!(rows.len(), 2, "{}", manifest.html);
    assert!(rows[0].contains("spectra/a.csv") && rows[0].contains("added"));
    assert!(rows[1].contains("missing.csv") && rows[1].contains("refused"));
    assert!(!manifest.html.contains("/tmp/"), "a temporary path leaked");
    let after = list(&lab);
    assert_eq!(after.len(), n + 1);
    let a = after.iter().find(|s| s["name"] == "probe a").unwrap();
    let a = lab.json(&["show", &a["id"].to_string()]);
    assert_eq!(a["spectrum"]["submitted_by"], "s.submitter");
    lab.ok(&["check"]);
}

#[test]
fn the_identify_page_gives_the_command_lines_fused_list_and_the_accounts_page_is_for_administrators()
 {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);

    // Two unknowns of one sample, the other inputs left empty as a browser sends them.
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
    let (reader, reader_csrf) = session(&server, "reader");
    let shown = post_multipart(
        &server,
        &reader,
        "/identify",
        &[
            ("csrf", None, text(&reader_csrf)),
            ("ir", Some("u01.ir.csv"), std::fs::read(&ir).unwrap()),
            ("raman", Some(""), Vec::new()),
            ("ms-ei", Some(""), Vec::new()),
            (
                "nmr-1h",
                Some("sample.nmr-1h.csv"),
                std::fs::read(&nmr).unwrap(),
            ),
            ("nmr-13c", Some(""), Vec::new()),
            ("solvent", None, text("CDCl3")),
            ("top", None, text("4")),
            ("formula", None, text("")),
            ("elements", None, text("")),
            // As a browser sends the retention-index inputs left alone: no index, the
            // window's default.
            ("ri", None, text("")),
            ("ri_window", None, text("20")),
        ],
    );
    assert_eq!(shown.status, 200, "{}", shown.html);
    let verdict = if cli["policy"]["met"] == true {
        "Criteria met:"
    } else {
        "Criteria not met:"
    };
    let first = shown.html.find("id=\"verdict\"").unwrap();
    assert!(shown.html[first..].contains(verdict), "{}", shown.html);
    assert!(
        first < shown.html.find("id=\"fused\"").unwrap(),
        "the verdict comes first"
    );
    let body = &shown.html[shown.html.find("id=\"fused\"").unwrap()..];
    let mut at = 0;
    for c in cli["fusion"]["compounds"].as_array().unwrap() {
        let name = c["name"].as_str().unwrap();
        let row = format!(
            "<td class=\"num\">{}</td><td class=\"num\">{:.3}</td>",
            c["rank"],
            c["fused"].as_f64().unwrap()
        );
        let found = body[at..]
            .find(&row)
            .unwrap_or_else(|| panic!("{row} ({name}) not in order in {body}"));
        at += found;
        assert!(body[at..].contains(name));
    }
    let disagreements: usize = cli["fusion"]["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["disagreements"].as_array().map_or(0, Vec::len))
        .sum();
    if disagreements == 0 {
        assert!(shown.html.contains("id=\"disagreements-none\""));
    } else {
        assert!(shown.html.contains("id=\"disagreements\""));
    }
    let none = post_multipart(
        &server,
        &reader,
        "/identify",
        &[
            ("csrf", None, text(&reader_csrf)),
            ("ir", Some(""), Vec::new()),
        ],
    );
    assert_eq!(none.status, 400, "{}", none.html);
    assert!(none.html.contains("no spectrum file was chosen"));

    // Accounts: refused to all but administrators.
    for role in ["reader", "submitter", "signer", "curator"] {
        let (cookie, _) = session(&server, role);
        let refused = get(&server, &cookie, "/accounts");
        assert_eq!(refused.status, 403, "{role}: {}", refused.html);
        assert!(!refused.html.contains("id=\"accounts\""));
    }
    let (admin, csrf) = session(&server, "admin");
    let listed = get(&server, &admin, "/accounts");
    assert_eq!(listed.status, 200);
    for (name, role, _) in PASSWORDS {
        assert!(
            listed
                .html
                .contains(&format!("<tr><td>{name}</td><td>{role}</td>"))
        );
    }
    let accounts = lab.json(&["account", "list"]);
    // A password too short is refused before the account is made.
    let short = post_fields(
        &server,
        &admin,
        "/accounts",
        &[
            ("csrf", &csrf),
            ("name", "n.newcomer"),
            ("role", "reader"),
            ("password", "too short"),
            ("again", "too short"),
        ],
    );
    assert_eq!(short.status, 400, "{}", short.html);
    assert!(short.html.contains("at least 12"), "{}", short.html);
    assert_eq!(lab.json(&["account", "list"]), accounts);
    let added = post_fields(
        &server,
        &admin,
        "/accounts",
        &[
            ("csrf", &csrf),
            ("name", "n.newcomer"),
            ("role", "reader"),
            ("password", "newcomer passphrase six"),
            ("again", "newcomer passphrase six"),
        ],
    );
    assert_eq!(added.status, 303, "{}", added.html);
    let id = lab
        .json(&["account", "list"])
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["name"] == "n.newcomer")
        .unwrap()["id"]
        .clone();
    let (_, newcomer) = sign_in(&server, "n.newcomer", "newcomer passphrase six");
    assert!(newcomer.is_some(), "the initial password signs in");
    // A role change needs a reason.
    let no_reason = post_fields(
        &server,
        &admin,
        &format!("/accounts/{id}/role"),
        &[("csrf", &csrf), ("role", "signer"), ("reason", " ")],
    );
    assert_eq!(no_reason.status, 400, "{}", no_reason.html);
    let changed = post_fields(
        &server,
        &admin,
        &format!("/accounts/{id}/role"),
        &[
            ("csrf", &csrf),
            ("role", "signer"),
            ("reason", "signs off for the GC group"),
        ],
    );
    assert_eq!(changed.status, 303, "{}", changed.html);
    assert!(
        get(&server, &admin, &changed.location)
            .html
            .contains("n.newcomer now has the role signer")
    );
    let admin_id = lab
        .json(&["account", "list"])
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["name"] == "a.admin")
        .unwrap()["id"]
        .clone();
    let own = post_fields(
        &server,
        &admin,
        &format!("/accounts/{admin_id}/disable"),
        &[("csrf", &csrf), ("reason", "testing")],
    );
    assert_eq!(own.status, 400, "{}", own.html);
    // Nor may the only administrator demote themself: the library refuses it, as it refuses
    // `whorl account role`, and the page says why and what to do.
    let demoted = post_fields(
        &server,
        &admin,
        &format!("/accounts/{admin_id}/role"),
        &[
            ("csrf", &csrf),
            ("role", "curator"),
            ("reason", "stepping back"),
        ],
    );
    assert_eq!(demoted.status, 400, "{}", demoted.html);
    assert!(
        demoted.html.contains("Role not changed")
            && demoted.html.contains("is the only active administrator")
            && demoted
                .html
                .contains("give another account the admin role first"),
        "{}",
        demoted.html
    );
    let disabled = post_fields(
        &server,
        &admin,
        &format!("/accounts/{id}/disable"),
        &[("csrf", &csrf), ("reason", "left the lab")],
    );
    assert_eq!(disabled.status, 303, "{}", disabled.html);
    let newcomer = lab
        .json(&["account", "list"])
        .as_array()
        .unwrap()
        .iter()
        .find(|a| a["name"] == "n.newcomer")
        .unwrap()
        .clone();
    assert_eq!(newcomer["role"], "signer");
    assert_eq!(newcomer["disabled_reason"], "left the lab");
    // Each change is an event by the administrator, signed in, the password never in it.
    let log = lab.json(&["log"]);
    let events: Vec<(&str, &str, &str)> = log
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["payload"]["name"] == "n.newcomer")
        .map(|e| {
            (
                e["action"].as_str().unwrap(),
                e["actor"].as_str().unwrap(),
                e["identity"].as_str().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        events,
        [
            ("account-add", "a.admin", "signed-in"),
            ("account-password", "a.admin", "signed-in"),
            ("account-role", "a.admin", "signed-in"),
            ("account-disable", "a.admin", "signed-in"),
        ]
    );
    assert!(!lab.ok(&["log", "--json"]).contains("newcomer passphrase"));
    lab.ok(&["check"]);
}

#[test]
fn uploads_held_for_an_account_are_capped_and_a_submission_beyond_the_cap_is_refused() {
    let lab = lab_with_accounts();
    // An account may have twice --max-body of uploads held: 2 MiB here.
    let server = Server::start_with(&lab, &["--max-body", "1"]);
    // 1-butanol's points again, each y written with 440 more zeros: the same numbers in over
    // 0.7 MiB, so two previews fit in 2 MiB and a third does not.
    let big: Vec<u8> = String::from_utf8(butanol_again())
        .unwrap()
        .lines()
        .map(|line| match line.split_once(',') {
            Some((_, y)) if y.parse::<f64>().is_ok() => format!("{line}{}\n", "0".repeat(440)),
            _ => format!("{line}\n"),
        })
        .collect::<String>()
        .into_bytes();
    assert!((700_000..1_000_000).contains(&big.len()), "{}", big.len());
    let before = lab.state();
    let preview = |role: &str| {
        let (cookie, csrf) = session(&server, role);
        post_multipart(
            &server,
            &cookie,
            "/submit",
            &[
                ("csrf", None, text(&csrf)),
                ("technique", None, text("ir")),
                ("name", None, text("padded probe")),
                ("file", Some("padded.ir.csv"), big.clone()),
            ],
        )
    };
    for n in 0..2 {
        let held = preview("submitter");
        assert_eq!(held.status, 303, "preview {n}: {}", held.html);
    }
    let refused = preview("submitter");
    assert_eq!(refused.status, 429, "{}", refused.html);
    assert!(
        refused.html.contains("Submission refused")
            && refused.html.contains("2.0 MiB it holds per account")
            && refused
                .html
                .contains("confirm the submissions you have previewed"),
        "{}",
        refused.html
    );
    assert!(refused.html.contains("evidence, not proof"), "the caution");
    // The cap is per account: another account still has room.
    assert_eq!(preview("curator").status, 303);
    assert_eq!(lab.state(), before, "a preview saved something");
}

/// The spectrum ids of the library page's list, in the order shown.
fn listed_ids(html: &str) -> Vec<i64> {
    let table = &html[html.find("id=\"spectra\"").unwrap()..];
    let table = &table[..table.find("</table>").unwrap()];
    table
        .split("<a href=\"/spectra/")
        .skip(1)
        .map(|s| s[..s.find('"').unwrap()].parse().unwrap())
        .collect()
}

#[test]
fn the_library_page_filters_by_tag_and_instrument_and_sorts_by_its_column_links() {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let (cookie, _) = session(&server, "reader");
    // What to expect, from the seed manifest the library was imported from (not through the
    // server): each row's id by its compound name and technique.
    let ids: std::collections::HashMap<(String, String), i64> = list(&lab)
        .iter()
        .map(|s| {
            (
                (
                    s["name"].as_str().unwrap().to_string(),
                    s["technique"].as_str().unwrap().to_string(),
                ),
                s["id"].as_i64().unwrap(),
            )
        })
        .collect();
    let manifest: Vec<(i64, String, Vec<String>, String, String)> =
        crate::util::csv_rows(&seed().join("manifest.csv"))
            .into_iter()
            .map(|r| {
                (
                    ids[&(r["name"].clone(), r["technique"].clone())],
                    r["name"].to_lowercase(),
                    r["tags"].split(';').map(str::to_string).collect(),
                    r["instrument"].clone(),
                    r["acquired"].clone(),
                )
            })
            .collect();

    // A tag in any case, sorted by date acquired, newest first (ties by id).
    let mut ketones: Vec<&(i64, String, Vec<String>, String, String)> = manifest
        .iter()
        .filter(|m| m.2.iter().any(|t| t == "ketone"))
        .collect();
    ketones.sort_by(|a, b| b.4.cmp(&a.4).then(a.0.cmp(&b.0)));
    let expected: Vec<i64> = ketones.iter().map(|m| m.0).collect();
    assert!(expected.len() > 5 && expected.len() < 50);
    let shown = get(&server, &cookie, "/library?tag=KETONE&sort=date&order=desc");
    assert_eq!(shown.status, 200, "{}", shown.html);
    assert_eq!(listed_ids(&shown.html), expected);
    assert!(shown.html.contains("by date acquired, descending"));
    assert!(shown.html.contains("aria-sort=\"descending\""));
    assert!(
        shown.html.contains("evidence, not proof"),
        "the caution on the page"
    );

    // An instrument by part of its name, in any case, with the tag.
    let mut expected: Vec<i64> = manifest
        .iter()
        .filter(|m| m.2.iter().any(|t| t == "ketone") && m.3.to_lowercase().contains("raman probe"))
        .map(|m| m.0)
        .collect();
    expected.sort();
    assert!(!expected.is_empty());
    let shown = get(
        &server,
        &cookie,
        "/library?tag=ketone&instrument=RAMAN%20probe",
    );
    assert_eq!(listed_ids(&shown.html), expected);
    assert!(
        shown.html.contains("value=\"RAMAN probe\""),
        "the field keeps it"
    );

    // Sorted by compound name through the heading's link; the first page and the pager keep
    // the order, and the heading's link now turns it round.
    let mut by_name: Vec<(String, i64)> = manifest.iter().map(|m| (m.1.clone(), m.0)).collect();
    by_name.sort();
    let first = get(&server, &cookie, "/library");
    assert!(
        first
            .html
            .contains("<a href=\"/library?page=1&#38;sort=name&#38;order=asc\">compound</a>"),
        "{}",
        first.html
    );
    let shown = get(&server, &cookie, "/library?page=1&sort=name&order=asc");
    assert_eq!(
        listed_ids(&shown.html),
        by_name.iter().take(50).map(|n| n.1).collect::<Vec<_>>()
    );
    assert!(shown.html.contains(
        "aria-sort=\"ascending\"><a href=\"/library?page=1&#38;sort=name&#38;order=desc\">compound"
    ));
    assert!(
        shown
            .html
            .contains("href=\"/library?page=2&#38;sort=name&#38;order=asc\" rel=\"next\""),
        "{}",
        shown.html
    );
    let second = get(&server, &cookie, "/library?page=2&sort=name&order=asc");
    assert_eq!(
        listed_ids(&second.html),
        by_name
            .iter()
            .skip(50)
            .take(50)
            .map(|n| n.1)
            .collect::<Vec<_>>()
    );

    // A column the list does not sort by is refused with a hint.
    let refused = get(&server, &cookie, "/library?sort=mass");
    assert_eq!(refused.status, 400, "{}", refused.html);
    assert!(
        refused
            .html
            .contains("sort by name, technique, date or status")
    );
}

#[test]
fn extra_fields_on_the_submit_page_are_read_and_refused_as_whorl_add_reads_them() {
    let lab = lab_with_accounts();
    let server = Server::start(&lab);
    let (cookie, csrf) = session(&server, "submitter");
    let file = butanol_again();
    let sha256 = whorl::spectrum::sha256_hex(&file);
    lab.write("probe.ir.csv", &file);
    let before = lab.state();
    let with = |extra: &str| {
        post_multipart(
            &server,
            &cookie,
            "/submit",
            &[
                ("csrf", None, text(&csrf)),
                ("technique", None, text("ir")),
                ("name", None, text("probe compound")),
                ("extra", None, text(extra)),
                ("file", Some("probe.ir.csv"), file.clone()),
            ],
        )
    };
    // Each refused on the page with the reason `whorl add --set` gives for the same pairs.
    for (lines, set, why) in [
        ("ri", vec!["ri"], "has no '='"),
        ("ri=", vec!["ri="], "gives no value"),
        ("ri=1\nri=2", vec!["ri=1", "ri=2"], "is given twice"),
        (
            "whorl_status=verified",
            vec!["whorl_status=verified"],
            "starts with 'whorl_'",
        ),
        (
            "Submitted By=g.signer",
            vec!["Submitted By=g.signer"],
            "field in another spelling",
        ),
    ] {
        let refused = with(lines);
        assert_eq!(refused.status, 400, "{lines}: {}", refused.html);
        let page = refused.html.replace("&#39;", "'");
        assert!(page.contains(why), "{lines}: {page}");
        let mut args = vec!["add", "probe.ir.csv", "-t", "ir", "--name", "probe"];
        for kv in &set {
            args.extend(["--set", kv]);
        }
        let cli = lab.refuses(&args, 3);
        assert!(cli.contains(why), "{set:?}: {cli}");
    }
    assert_eq!(lab.state(), before, "a refused submission saved something");

    // Accepted (blank lines and spaces around '=' as `--set` allows): on the preview, then
    // saved with the spectrum and searchable as KEY:VALUE.
    let held = with("ri = 1012\n\nri_phase=DB-5\n");
    assert_eq!(held.status, 303, "{}", held.html);
    let preview = get(&server, &cookie, &held.location);
    assert!(
        preview.html.contains("ri_phase") && preview.html.contains("DB-5"),
        "{}",
        preview.html
    );
    let key = held.location.strip_prefix("/submit/").unwrap();
    let saved = post_fields(
        &server,
        &cookie,
        &format!("/submit/{key}/confirm"),
        &[("csrf", &csrf), ("sha256", &sha256)],
    );
    assert_eq!(saved.status, 303, "{}", saved.html);
    let id = saved
        .location
        .strip_prefix("/spectra/")
        .and_then(|s| s.strip_suffix("?submitted=added"))
        .unwrap()
        .to_string();
    let shown = lab.json(&["show", &id]);
    assert_eq!(shown["spectrum"]["metadata"]["extra"]["ri"], "1012");
    assert_eq!(shown["spectrum"]["metadata"]["extra"]["ri_phase"], "DB-5");
    let found = lab.json(&["find", "ri_phase:DB-5"]);
    assert!(found.to_string().contains("probe compound"), "{found}");
}

/// Each row of the library page's list: its spectrum id and its cells' text, in order.
fn listed_rows(html: &str) -> Vec<(i64, Vec<String>)> {
    let table = &html[html.find("id=\"spectra\"").unwrap()..];
    let table = &table[table.find("<tbody>").unwrap()..table.find("</tbody>").unwrap()];
    table
        .split("<tr>")
        .skip(1)
        .map(|row| {
            let cells: Vec<String> = row
                .split("<td")
                .skip(1)
                .map(|c| {
                    let c = &c[c.find('>').unwrap() + 1..c.find("</td>").unwrap()];
                    // The id's cell holds a link; the rest are text.
                    match c.find("\">") {
                        Some(at) if c.starts_with("<a ") => {
                            c[at + 2..c.find("</a>").unwrap()].to_string()
                        }
                        _ => c.to_string(),
                    }
                })
                .collect();
            (cells[0].parse().unwrap(), cells)
        })
        .collect()
}

/// Every page of a library list (following its "Next page" links from `path`), with the
/// summary line of the first.
fn all_pages(
    server: &Server,
    cookie: &str,
    path: &str,
) -> (Vec<(i64, Vec<String>)>, String, usize) {
    let mut rows = Vec::new();
    let mut next = path.to_string();
    let mut pages = 0;
    let mut summary = String::new();
    loop {
        let shown = get(server, cookie, &next);
        assert_eq!(shown.status, 200, "{next}: {}", shown.html);
        pages += 1;
        if pages == 1 {
            let at = shown.html.find("<p id=\"count\">").unwrap() + 14;
            summary = shown.html[at..at + shown.html[at..].find("</p>").unwrap()].to_string();
        }
        let page_rows = listed_rows(&shown.html);
        assert!(page_rows.len() <= 50, "a page holds at most 50 rows");
        rows.extend(page_rows);
        match shown.html.find("\" rel=\"next\"") {
            Some(end) => {
                let start = shown.html[..end].rfind("href=\"").unwrap() + 6;
                next = shown.html[start..end].replace("&#38;", "&");
            }
            None => break,
        }
        assert!(pages < 20, "the pager does not end");
    }
    (rows, summary, pages)
}

#[test]
fn the_library_page_pages_its_filtered_and_sorted_rows_with_the_count_of_every_match() {
    let lab = lab_with_accounts();
    // Two spectra withdrawn, so the status filter has something to tell apart.
    lab.ok(&["withdraw", "3", "--reason", "recalled lot"]);
    lab.ok(&["withdraw", "140", "--reason", "recalled lot"]);
    let server = Server::start(&lab);
    let (cookie, _) = session(&server, "reader");
    let manifest = crate::util::csv_rows(&seed().join("manifest.csv"));
    let listed = list(&lab);
    assert_eq!(listed.len(), manifest.len());
    assert!(listed.len() > 150, "more rows than three pages");
    // The date acquired of each id, from the manifest the library was imported from.
    let acquired: std::collections::HashMap<i64, String> = listed
        .iter()
        .map(|s| {
            let (name, technique) = (
                s["name"].as_str().unwrap(),
                s["technique"].as_str().unwrap(),
            );
            let row = manifest
                .iter()
                .find(|r| r["name"] == name && r["technique"] == technique)
                .unwrap();
            (s["id"].as_i64().unwrap(), row["acquired"].clone())
        })
        .collect();

    // Unfiltered: every spectrum once, by id, over five pages, counted in full.
    let (all, summary, pages) = all_pages(&server, &cookie, "/library");
    let ids: Vec<i64> = all.iter().map(|r| r.0).collect();
    let mut by_id: Vec<i64> = listed.iter().map(|s| s["id"].as_i64().unwrap()).collect();
    by_id.sort();
    assert_eq!(ids, by_id);
    assert_eq!(pages, listed.len().div_ceil(50));
    assert_eq!(summary, format!("{} spectra; by id.", listed.len()));
    // Each row's revision and date acquired are its own.
    for (id, cells) in &all {
        assert_eq!(cells[7], "1", "spectrum {id}'s revision");
        assert_eq!(cells[8], acquired[id], "spectrum {id}'s date acquired");
    }
    // The molar mass each row shows (from its formula), for the range below.
    let mass: std::collections::HashMap<i64, f64> = all
        .iter()
        .filter_map(|(id, c)| c[4].parse::<f64>().ok().map(|m| (*id, m)))
        .collect();

    // A molar mass range wider than a page, sorted by date acquired, newest first (ties by
    // id), over every page: the same rows as the unfiltered list's masses say, in order.
    let mut expected: Vec<i64> = mass
        .iter()
        .filter(|(_, m)| (70.0..=95.0).contains(*m))
        .map(|(id, _)| *id)
        .collect();
    expected.sort_by(|a, b| acquired[b].cmp(&acquired[a]).then(a.cmp(b)));
    assert!(
        expected.len() > 50,
        "the range spans pages: {}",
        expected.len()
    );
    let (shown, summary, pages) = all_pages(
        &server,
        &cookie,
        "/library?mass_min=70&mass_max=95&sort=date&order=desc",
    );
    assert_eq!(shown.iter().map(|r| r.0).collect::<Vec<_>>(), expected);
    assert_eq!(pages, expected.len().div_ceil(50));
    assert_eq!(
        summary,
        format!("{} spectra; by date acquired, descending.", expected.len())
    );

    // The status filter with a date range, and a page past the last shows the last.
    let shown = get(&server, &cookie, "/library?status=withdrawn&page=9");
    assert_eq!(
        listed_rows(&shown.html)
            .iter()
            .map(|r| r.0)
            .collect::<Vec<_>>(),
        vec![3, 140]
    );
    assert!(shown.html.contains("Page 1 of 1"), "{}", shown.html);
    let lo = acquired[&140].clone();
    let shown = get(
        &server,
        &cookie,
        &format!("/library?status=withdrawn&acquired_from={lo}&acquired_to={lo}"),
    );
    let mut expected: Vec<i64> = [3, 140].into_iter().filter(|i| acquired[i] == lo).collect();
    expected.sort();
    assert_eq!(
        listed_rows(&shown.html)
            .iter()
            .map(|r| r.0)
            .collect::<Vec<_>>(),
        expected
    );

    // The find box: the text index's hits, filtered by technique, paged in relevance order,
    // the same ids as `whorl find` gives for that technique.
    let found: Vec<i64> = lab
        .json(&["find", "alcohol", "--top", "1000"])
        .as_array()
        .unwrap()
        .iter()
        .filter(|h| h["technique"] == "ir")
        .map(|h| h["spectrum_id"].as_i64().unwrap())
        .collect();
    assert!(!found.is_empty());
    let (shown, summary, _) = all_pages(&server, &cookie, "/library?q=alcohol&technique=ir");
    assert_eq!(shown.iter().map(|r| r.0).collect::<Vec<_>>(), found);
    assert_eq!(
        summary,
        format!("{} spectra match, most relevant first.", found.len())
    );
    // Sorted by name descending instead, across pages the rows keep their count.
    let (by_name, _, _) = all_pages(&server, &cookie, "/library?q=alcohol&sort=name&order=desc");
    let names: Vec<String> = by_name.iter().map(|r| r.1[1].to_lowercase()).collect();
    let mut sorted = names.clone();
    sorted.sort_by(|a, b| b.cmp(a));
    assert_eq!(names, sorted);
}

/// A GC-MS peak searched with its retention index, through the API and the search page: the
/// same hits, window and thresholds as `whorl search --ri` (the real server on loopback).
#[test]
fn an_ei_search_with_a_retention_index_answers_as_the_command_line_does() {
    let lab = lab_with_accounts();
    // Two EI references with retention indices (invented for the test): the seed's spectra
    // with every intensity scaled by 0.97, so that they are other raw points. The seed's own
    // EI spectra carry none, so a window leaves only these two.
    for (slug, ri) in [("toluene", "765"), ("ethylbenzene", "857")] {
        let file = format!("{slug}-ri.csv");
        let seed_file =
            std::fs::read_to_string(seed().join(format!("spectra/{slug}.ms-ei.csv"))).unwrap();
        let contents: String = seed_file
            .lines()
            .map(|line| match line.split_once(',') {
                Some((mz, y)) if y.trim().parse::<f64>().is_ok() => {
                    format!("{mz},{:.4}\n", y.trim().parse::<f64>().unwrap() * 0.97)
                }
                _ => format!("{line}\n"),
            })
            .collect();
        lab.add(
            &file,
            &contents,
            "ms-ei",
            &format!("{slug} (with RI)"),
            &["--set", &format!("ri={ri}")],
        );
    }
    let server = Server::start(&lab);
    let unknown = seed().join("unknowns/u09.ms-ei.csv");
    let bytes = std::fs::read(&unknown).unwrap();
    let cli = lab.json(&[
        "search",
        unknown.to_str().unwrap(),
        "-t",
        "ms-ei",
        "--ri",
        "860",
        "--ri-window",
        "100",
        "--include-pending",
    ]);
    let names = |v: &Value| -> Vec<String> {
        v["hits"]
            .as_array()
            .unwrap()
            .iter()
            .map(|h| h["name"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(
        names(&cli),
        ["ethylbenzene (with RI)", "toluene (with RI)"],
        "only the references inside the window"
    );
    assert_eq!(cli["confidence"]["retention_index"], true);

    // The API takes ri and ri_window as the command line takes --ri and --ri-window.
    let (cookie, csrf) = session(&server, "reader");
    let api = crate::serve_api::post_form(
        &server,
        "/api/v1/search",
        crate::serve::Auth::Cookie(&cookie),
        &[
            ("technique", None, text("ms-ei")),
            ("ri", None, text("860")),
            ("ri_window", None, text("100")),
            ("include_pending", None, text("true")),
            ("file", Some("u09.ms-ei.csv"), bytes.clone()),
        ],
    );
    assert_eq!(api.status, 200, "{}", api.body);
    assert_eq!(names(&api.body), names(&cli));
    assert_eq!(api.body["parameters"], cli["parameters"]);
    assert_eq!(api.body["confidence"], cli["confidence"]);
    assert_eq!(api.body["verdict"], cli["verdict"]);
    // A retention index on an IR search is refused, as on the command line.
    let ir = crate::serve_api::post_form(
        &server,
        "/api/v1/search",
        crate::serve::Auth::Cookie(&cookie),
        &[
            ("technique", None, text("ir")),
            ("ri", None, text("860")),
            (
                "file",
                Some("u01.ir.csv"),
                std::fs::read(seed().join("unknowns/u01.ir.csv")).unwrap(),
            ),
        ],
    );
    assert_eq!(ir.status, 400, "{}", ir.body);

    // The search page: the window is applied and shown with the result.
    let sent = post_multipart(
        &server,
        &cookie,
        "/search",
        &[
            ("csrf", None, text(&csrf)),
            ("technique", None, text("ms-ei")),
            ("include_pending", None, text("on")),
            ("ri", None, text("860")),
            ("ri_window", None, text("100")),
            ("file", Some("u09.ms-ei.csv"), bytes),
        ],
    );
    assert_eq!(sent.status, 303, "{}", sent.html);
    let shown = get(&server, &cookie, &sent.location);
    assert_eq!(shown.status, 200, "{}", shown.html);
    assert!(
        shown.html.contains("id=\"retention-index\">860 \u{b1} 100"),
        "{}",
        shown.html
    );
    let at = |name: &str| shown.html.find(name).unwrap_or(usize::MAX);
    assert!(at("ethylbenzene (with RI)") < at("toluene (with RI)"));
    assert!(
        !shown.html.contains("href=\"/spectra/1\""),
        "a seed spectrum outside the window"
    );
}
