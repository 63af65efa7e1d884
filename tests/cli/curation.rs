//! Review sign-off, revisions, withdrawal, the audit log, and the default search scope.

use crate::util::{Lab, hint, ir_csv};

/// A lab with one IR spectrum submitted by `s.submitter`; returns its id.
fn one_spectrum() -> (Lab, String) {
    let lab = Lab::new();
    let file = lab.write(
        "ketone.csv",
        ir_csv(&[(1715.0, 0.9, 10.0), (2960.0, 0.3, 15.0)]),
    );
    let id = lab.ok(&[
        "add",
        file.to_str().unwrap(),
        "-t",
        "ir",
        "--name",
        "example ketone",
        "--formula",
        "C3H6O",
        "--by",
        "s.submitter",
    ]);
    (lab, id.trim().to_string())
}

fn status(lab: &Lab, id: &str) -> String {
    lab.json(&["show", id])["spectrum"]["status"]
        .as_str()
        .unwrap()
        .to_string()
}

#[test]
fn a_second_analyst_approves_and_the_spectrum_is_searched() {
    let (lab, id) = one_spectrum();
    assert_eq!(status(&lab, &id), "pending");
    let unknown = lab.write("u.csv", ir_csv(&[(1715.0, 0.9, 10.0), (2960.0, 0.3, 15.0)]));
    let u = unknown.to_str().unwrap();
    // Pending spectra are not searched by default, and the report says so.
    let before = lab.json(&["search", u, "-t", "ir"]);
    assert_eq!(before["hits"].as_array().unwrap().len(), 0);
    assert!(before["warnings"].to_string().contains("--include-pending"));
    assert!(
        before["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "pending-not-searched"),
        "{before}"
    );
    assert_eq!(
        lab.json(&["search", u, "-t", "ir", "--include-pending"])["hits"]
            .as_array()
            .unwrap()
            .len(),
        1
    );

    // `--approve`, the other name of `--verify` (which `Lab::approve_all` uses), still works.
    let signed = lab.json(&[
        "review",
        &id,
        "--approve",
        "--by",
        "r.reviewer",
        "--note",
        "checked against CoA",
    ]);
    assert_eq!(signed["decision"], "approved");
    assert_eq!(signed["reviewer"], "r.reviewer");
    assert!(signed["meaning"].as_str().unwrap().contains("approved"));
    assert_eq!(status(&lab, &id), "verified");
    assert_eq!(
        lab.json(&["search", u, "-t", "ir"])["hits"][0]["status"],
        "verified"
    );
    let shown = lab.json(&["show", &id]);
    assert_eq!(shown["reviews"][0]["note"], "checked against CoA");
}

#[test]
fn self_review_is_refused_unless_the_policy_allows_it() {
    let (lab, id) = one_spectrum();
    let err = lab.fails(&["review", &id, "--approve", "--by", "S.Submitter"], 3);
    assert!(
        err.contains("reviewer must be someone else") && err.contains("hint:"),
        "{err}"
    );
    assert_eq!(status(&lab, &id), "pending");
    // A change of policy needs a reason.
    let err = lab.refuses(
        &["policy", "--self-review", "allow", "--by", "q.manager"],
        3,
    );
    assert!(err.contains("needs a reason"), "{err}");
    lab.ok(&[
        "policy",
        "--self-review",
        "allow",
        "--by",
        "q.manager",
        "--reason",
        "single-analyst weekend shift",
    ]);
    lab.ok(&["review", &id, "--approve", "--by", "s.submitter"]);
    assert_eq!(status(&lab, &id), "verified");
    let log = lab.json(&["log"]);
    assert!(
        log.as_array()
            .unwrap()
            .iter()
            .any(|e| e["action"] == "policy"
                && e["actor"] == "q.manager"
                && e["payload"]["reason"] == "single-analyst weekend shift")
    );
}

#[test]
fn a_rejected_revision_must_be_revised_before_approval() {
    let (lab, id) = one_spectrum();
    lab.ok(&[
        "review",
        &id,
        "--reject",
        "--by",
        "r.reviewer",
        "--note",
        "wrong formula",
    ]);
    assert_eq!(status(&lab, &id), "pending");
    let err = lab.fails(&["review", &id, "--approve", "--by", "r.other"], 3);
    assert!(err.contains("was rejected by r.reviewer"), "{err}");
    lab.ok(&[
        "revise",
        &id,
        "--formula",
        "C4H8O",
        "--reason",
        "formula corrected",
        "--by",
        "s.submitter",
    ]);
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    assert_eq!(status(&lab, &id), "verified");
}

#[test]
fn a_revision_replaces_the_old_one_and_the_old_one_stays_readable() {
    let (lab, id) = one_spectrum();
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    let raw_before = lab.json(&["show", &id])["spectrum"]["raw_sha256"].clone();
    let out = lab.ok(&[
        "revise",
        &id,
        "--name",
        "example ketone (corrected)",
        "--tag",
        "solvent",
        "--reason",
        "name",
        "--by",
        "e.editor",
    ]);
    assert!(out.contains("revision 2"), "{out}");
    let now = lab.json(&["show", &id]);
    assert_eq!(
        now["spectrum"]["metadata"]["name"],
        "example ketone (corrected)"
    );
    assert_eq!(
        now["spectrum"]["status"], "pending",
        "a revision goes back to review"
    );
    assert_eq!(
        now["spectrum"]["raw_sha256"], raw_before,
        "raw points are never edited"
    );
    let old = lab.json(&["show", &id, "--revision", "1"]);
    assert_eq!(old["spectrum"]["metadata"]["name"], "example ketone");
    assert_eq!(old["revision"]["created_by"], "s.submitter");
    assert_eq!(now["revision"]["reason"], "name");
    // The search finds the new name only.
    assert_eq!(
        lab.json(&["find", "corrected"]).as_array().unwrap().len(),
        1
    );
    let err = lab.fails(&["show", &id, "--revision", "7"], 3);
    assert!(err.contains("no revision 7"), "{err}");
    let err = lab.fails(&["revise", &id, "--by", "e.editor", "--reason", "none"], 3);
    assert!(err.contains("changes nothing"), "{err}");
}

#[test]
fn withdrawal_keeps_the_spectrum_out_of_search_and_out_of_review() {
    let (lab, id) = one_spectrum();
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    let before = lab.json(&["stats"])["state_hash"].clone();
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "standard lot recalled",
        "--by",
        "q.manager",
    ]);
    assert_ne!(
        lab.json(&["stats"])["state_hash"],
        before,
        "withdrawal changes the searchable content"
    );
    let shown = lab.json(&["show", &id]);
    assert_eq!(shown["spectrum"]["status"], "withdrawn");
    assert_eq!(shown["withdrawn_reason"], "standard lot recalled");
    let unknown = lab.write("u.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    let hits = lab.json(&[
        "search",
        unknown.to_str().unwrap(),
        "-t",
        "ir",
        "--include-pending",
    ]);
    assert_eq!(hits["hits"].as_array().unwrap().len(), 0);
    let err = lab.fails(&["review", &id, "--approve", "--by", "r.other"], 3);
    assert!(err.contains("withdrawn") && err.contains("hint:"), "{err}");
    let err = lab.fails(&["withdraw", &id, "--reason", "again"], 3);
    assert!(err.contains("already withdrawn"), "{err}");
}

#[test]
fn an_unknown_id_is_a_clear_error() {
    let lab = Lab::new();
    for args in [
        vec!["show", "99"],
        vec!["review", "99", "--approve", "--by", "r"],
        vec!["withdraw", "99", "--reason", "x"],
        vec!["revise", "99", "--name", "x", "--reason", "x"],
        vec!["log", "99"],
    ] {
        let err = lab.fails(&args, 3);
        assert!(
            err.contains("no spectrum with id 99") && err.contains("whorl list"),
            "{args:?}: {err}"
        );
    }
}

#[test]
fn the_log_records_who_did_what_in_order() {
    let (lab, id) = one_spectrum();
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "superseded",
        "--by",
        "q.manager",
    ]);
    let events = lab.json(&["log", &id]);
    let actions: Vec<(&str, &str)> = events
        .as_array()
        .unwrap()
        .iter()
        .map(|e| (e["action"].as_str().unwrap(), e["actor"].as_str().unwrap()))
        .collect();
    // The identity is the --by of each command; an add is done by whoever ran it
    // (WHORL_USER here), the submitter it names is in its payload.
    assert_eq!(events[0]["payload"]["submitted_by"], "s.submitter");
    assert_eq!(
        actions,
        [
            ("add", "t.tester"),
            ("review", "r.reviewer"),
            ("withdraw", "q.manager")
        ]
    );
    let seqs: Vec<i64> = events
        .as_array()
        .unwrap()
        .iter()
        .map(|e| e["seq"].as_i64().unwrap())
        .collect();
    assert!(seqs.windows(2).all(|w| w[0] < w[1]));
    let human = lab.ok(&["log"]);
    assert!(
        human.contains("superseded") && human.contains("init"),
        "{human}"
    );
}

#[test]
fn the_state_hash_changes_exactly_when_the_searchable_content_changes() {
    let (lab, id) = one_spectrum();
    let fp = |lab: &Lab| {
        lab.json(&["stats"])["state_hash"]
            .as_str()
            .unwrap()
            .to_string()
    };
    let mut seen = vec![fp(&lab)];
    let mut changed = |lab: &Lab, args: &[&str], expect_change: bool| {
        let out = lab.run(args);
        let now = fp(lab);
        assert_eq!(
            now != *seen.last().unwrap(),
            expect_change,
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        seen.push(now);
    };
    let u = lab.write("u.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    let u = u.to_str().unwrap();
    // Reading, failing and re-adding change nothing.
    changed(&lab, &["search", u, "-t", "ir", "--include-pending"], false);
    changed(&lab, &["log"], false);
    changed(
        &lab,
        &["review", &id, "--approve", "--by", "s.submitter"],
        false,
    );
    changed(
        &lab,
        &[
            "add",
            "ketone.csv",
            "-t",
            "ir",
            "--name",
            "example ketone",
            "--by",
            "s.submitter",
        ],
        false,
    );
    changed(&lab, &["check"], false);
    // Every change of what is searched, or of whether it is searched by default, changes it.
    changed(
        &lab,
        &["review", &id, "--approve", "--by", "r.reviewer"],
        true,
    );
    changed(
        &lab,
        &[
            "revise", &id, "--note", "lot 2", "--by", "e.editor", "--reason", "lot",
        ],
        true,
    );
    changed(&lab, &["add", u, "-t", "ir", "--name", "other"], true);
    changed(
        &lab,
        &["withdraw", &id, "--reason", "recalled", "--by", "q.manager"],
        true,
    );
    // Withdrawing the only other spectrum leaves the empty library's state hash.
    changed(
        &lab,
        &["withdraw", "2", "--reason", "test", "--by", "q.manager"],
        true,
    );
    let empty = Lab::new();
    assert_eq!(
        fp(&empty),
        *seen.last().unwrap(),
        "nothing searchable: the state hash of the recipes alone"
    );
}

#[test]
fn a_withdrawn_spectrum_is_reinstated_pending_and_adding_it_again_points_there() {
    let (lab, id) = one_spectrum();
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "lot recalled",
        "--by",
        "q.manager",
    ]);
    let withdrawn = lab.state_hash();
    // Adding the same file again does not say "already present" and succeed: it names the
    // withdrawn spectrum and the way back, exit 3, library unchanged.
    let file = lab.path("ketone.csv");
    let err = lab.refuses(
        &[
            "add",
            file.to_str().unwrap(),
            "-t",
            "ir",
            "--name",
            "example ketone",
        ],
        3,
    );
    assert!(
        err.contains(&format!("spectrum {id}, which is withdrawn (lot recalled)")),
        "{err}"
    );
    assert!(
        hint(&err).contains(&format!("whorl reinstate {id} --reason")),
        "{err}"
    );
    // A reason is required; a spectrum that is not withdrawn cannot be reinstated.
    lab.fails(&["reinstate", &id], 2);
    let err = lab.refuses(
        &["reinstate", &id, "--reason", "  ", "--by", "c.curator"],
        3,
    );
    assert!(err.contains("needs a reason"), "{err}");
    let out = lab.ok(&[
        "reinstate",
        &id,
        "--reason",
        "lot cleared by QA",
        "--by",
        "c.curator",
    ]);
    assert!(out.contains("reinstated, pending a new sign-off"), "{out}");
    assert_ne!(lab.state_hash(), withdrawn);
    let shown = lab.json(&["show", &id]);
    assert_eq!(shown["spectrum"]["status"], "pending");
    assert!(shown["withdrawn_reason"].is_null(), "{shown}");
    let err = lab.refuses(
        &["reinstate", &id, "--reason", "again", "--by", "c.curator"],
        3,
    );
    assert!(err.contains("not withdrawn"), "{err}");
    // The event is in the log with its reason, and `check` replays it.
    let log = lab.ok(&["log", &id]);
    assert!(
        log.contains("reinstate") && log.contains("lot cleared by QA"),
        "{log}"
    );
    lab.ok(&["check"]);
    // The review policy applies again: the submitter may not approve, a second person may.
    lab.fails(&["review", &id, "--approve", "--by", "s.submitter"], 3);
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    assert_eq!(status(&lab, &id), "verified");
    lab.ok(&["check"]);
}

#[test]
fn a_reinstated_spectrum_travels_in_a_bundle_as_pending() {
    let (lab, id) = one_spectrum();
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "lot recalled",
        "--by",
        "q.manager",
    ]);
    lab.ok(&[
        "reinstate",
        &id,
        "--reason",
        "lot cleared",
        "--by",
        "c.curator",
    ]);
    let bundle = lab.path("bundle");
    lab.ok(&["export", bundle.to_str().unwrap()]);
    let rows = crate::util::csv_rows(&bundle.join("manifest.csv"));
    assert_eq!(rows[0]["whorl_status"], "pending");
    assert_eq!(rows[0]["whorl_withdrawn_reason"], "");
    let other = Lab::new();
    other.ok(&["import", bundle.to_str().unwrap(), "--untrusted"]);
    let copy = other.json(&["show", "1"]);
    assert_eq!(copy["spectrum"]["status"], "pending");
    assert!(copy["withdrawn_reason"].is_null(), "{copy}");
    other.ok(&["check"]);
}

#[test]
fn a_manifest_row_with_a_withdrawn_spectrums_file_names_it_and_the_way_back() {
    let (lab, id) = one_spectrum();
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "lot recalled",
        "--by",
        "q.manager",
    ]);
    lab.write(
        "other.csv",
        ir_csv(&[(1650.0, 0.7, 12.0), (2900.0, 0.3, 15.0)]),
    );
    lab.write(
        "m.csv",
        "file,technique,name\nketone.csv,ir,example ketone\nother.csv,ir,other\n",
    );
    // Not "already present" with exit 0: the row is refused naming the withdrawn spectrum,
    // its reason and `whorl reinstate`; the other row is imported.
    let out = lab.fails(&["import", "m.csv"], 3);
    let line = out
        .lines()
        .find(|l| l.starts_with("rejected") && l.contains(":2 "))
        .unwrap_or_else(|| panic!("no rejected line for row 2:\n{out}"));
    assert!(
        line.contains(&format!("spectrum {id}, which is withdrawn (lot recalled)")),
        "{out}"
    );
    assert!(
        hint(&out).contains(&format!("whorl reinstate {id} --reason")),
        "{out}"
    );
    assert!(
        out.contains("imported 1 (ids 2..2), already present 0, rejected 1"),
        "{out}"
    );
    // All or nothing: the withdrawn row refuses the whole import.
    lab.write(
        "third.csv",
        ir_csv(&[(1600.0, 0.7, 12.0), (2850.0, 0.3, 15.0)]),
    );
    lab.write(
        "m2.csv",
        "file,technique,name\nthird.csv,ir,third\nketone.csv,ir,example ketone\n",
    );
    lab.refuses(&["import", "m2.csv", "--all-or-nothing"], 3);
    // The same points in a file with other bytes are caught too (by the raw points).
    lab.write(
        "copy.csv",
        format!(
            "{}\n",
            std::fs::read_to_string(lab.path("ketone.csv")).unwrap()
        ),
    );
    lab.write(
        "m3.csv",
        "file,technique,name\ncopy.csv,ir,example ketone\n",
    );
    let json = lab.run(&["import", "m3.csv", "--json"]);
    assert_eq!(json.status.code(), Some(3));
    let v: serde_json::Value = serde_json::from_slice(&json.stdout).unwrap();
    let reason = v["rejected"][0]["reason"].as_str().unwrap();
    assert!(
        reason.contains(&format!("spectrum {id}, which is withdrawn")),
        "{v}"
    );
    assert!(
        v["rejected"][0]["hint"]
            .as_str()
            .unwrap()
            .contains("whorl reinstate"),
        "{v}"
    );
    lab.ok(&["check"]);
}

#[test]
fn withdrawal_and_reinstatement_travel_in_bundles_as_history() {
    let (lab, id) = one_spectrum();
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "lot recalled",
        "--by",
        "q.manager",
    ]);
    lab.ok(&[
        "reinstate",
        &id,
        "--reason",
        "lot cleared",
        "--by",
        "c.curator",
    ]);
    // Verified again at home: still pending where it arrives.
    lab.ok(&["review", &id, "--approve", "--by", "r.reviewer"]);
    assert_eq!(status(&lab, &id), "verified");
    let steps = |v: &serde_json::Value| -> Vec<(String, String, String)> {
        v["status_history"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| {
                (
                    c["action"].as_str().unwrap().to_string(),
                    c["by"].as_str().unwrap().to_string(),
                    c["reason"].as_str().unwrap().to_string(),
                )
            })
            .collect()
    };
    let expected = vec![
        (
            "withdraw".to_string(),
            "q.manager".to_string(),
            "lot recalled".to_string(),
        ),
        (
            "reinstate".to_string(),
            "c.curator".to_string(),
            "lot cleared".to_string(),
        ),
    ];
    assert_eq!(steps(&lab.json(&["show", &id])), expected);
    let bundle = lab.path("bundle");
    lab.ok(&["export", bundle.to_str().unwrap()]);
    let other = Lab::new();
    other.ok(&["import", bundle.to_str().unwrap(), "--untrusted"]);
    let copy = other.json(&["show", "1"]);
    assert_eq!(copy["spectrum"]["status"], "pending");
    assert!(copy["withdrawn_reason"].is_null(), "{copy}");
    assert_eq!(steps(&copy), expected);
    // Each step names the library it was taken in; the sign-offs are history too.
    let from = copy["reviews"][0]["imported_from"]
        .as_str()
        .unwrap()
        .to_string();
    for c in copy["status_history"].as_array().unwrap() {
        assert_eq!(c["library"].as_str(), Some(from.as_str()), "{copy}");
    }
    let shown = other.ok(&["show", "1"]);
    assert!(
        shown.contains("withdraw at")
            && shown.contains("lot recalled")
            && shown.contains("reinstate at")
            && shown.contains("lot cleared"),
        "{shown}"
    );
    other.ok(&["check"]);
    // On to a third library: the history keeps its steps and where they were taken.
    let again = other.path("again");
    other.ok(&["export", again.to_str().unwrap()]);
    let third = Lab::new();
    third.ok(&["import", again.to_str().unwrap(), "--untrusted"]);
    let last = third.json(&["show", "1"]);
    assert_eq!(steps(&last), expected);
    assert_eq!(last["status_history"], copy["status_history"]);
    third.ok(&["check"]);
    // Withdrawn again at home and exported: it arrives withdrawn with all three steps.
    lab.ok(&[
        "withdraw",
        &id,
        "--reason",
        "recalled again",
        "--by",
        "q.manager",
    ]);
    let withdrawn = lab.path("withdrawn");
    lab.ok(&["export", withdrawn.to_str().unwrap()]);
    let fourth = Lab::new();
    fourth.ok(&["import", withdrawn.to_str().unwrap(), "--untrusted"]);
    let w = fourth.json(&["show", "1"]);
    assert_eq!(w["spectrum"]["status"], "withdrawn");
    assert_eq!(w["withdrawn_reason"], "recalled again");
    assert_eq!(steps(&w).len(), 3);
    fourth.ok(&["check"]);
}
