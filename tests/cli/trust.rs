//! Trust: signed bundles and trusted keys, who may sign off what, the policy's history, and
//! tampering with the database that `check` must find.

use std::process::Output;

use crate::util::{Lab, hint, ir_csv};

fn text(out: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&out.stderr),
        String::from_utf8_lossy(&out.stdout)
    )
}

/// A library with three IR spectra added by `a.analyst`, and a bundle of them exported from it,
/// signed with `key` when given.
fn exported(lab: &Lab, key: Option<&str>) -> std::path::PathBuf {
    for (i, name) in ["acetone", "butanone", "toluene"].iter().enumerate() {
        let centre = 1700.0 + 50.0 * i as f64;
        lab.add(
            &format!("s{i}.csv"),
            &ir_csv(&[(centre, 0.8, 12.0), (2950.0, 0.4, 20.0)]),
            "ir",
            name,
            &["--by", "a.analyst"],
        );
    }
    lab.ok(&["review", "1", "--approve", "--by", "b.reviewer"]);
    let bundle = lab.path("bundle");
    let mut args = vec!["export", bundle.to_str().unwrap()];
    if let Some(k) = key {
        args.extend(["--sign", k]);
    }
    lab.ok(&args);
    bundle
}

fn other_library(lab: &Lab) -> String {
    let target = lab.path("other").to_str().unwrap().to_string();
    lab.ok(&["--library", &target, "init"]);
    target
}

#[test]
fn key_create_writes_a_private_key_only_its_owner_reads_outside_the_library() {
    let lab = Lab::new();
    let keys = lab.path("keys");
    let out = lab.ok(&["key", "create", "lab-a", "--dir", keys.to_str().unwrap()]);
    assert!(out.contains("lab-a"), "{out}");
    let secret = keys.join("lab-a.key");
    let public = std::fs::read_to_string(keys.join("lab-a.pub")).unwrap();
    assert!(
        public.starts_with("whorl-ed25519-public lab-a "),
        "{public}"
    );
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(&secret).unwrap().permissions().mode();
        assert_eq!(mode & 0o777, 0o600, "private key mode {mode:o}");
    }
    // By default under $XDG_CONFIG_HOME, not in the library.
    let config = lab.path("config");
    let out = lab.run_env(
        &["key", "create", "lab-b"],
        &[("XDG_CONFIG_HOME", config.to_str().unwrap())],
    );
    assert!(out.status.success(), "{}", text(&out));
    assert!(config.join("whorl/keys/lab-b.key").is_file());
    // Never inside the library folder.
    let inside = lab.library().join("keys");
    let err = lab.fails(
        &["key", "create", "lab-c", "--dir", inside.to_str().unwrap()],
        3,
    );
    assert!(err.contains("inside the library folder"), "{err}");
    assert!(!inside.exists());
}

#[test]
fn a_signed_bundle_imports_once_its_key_is_trusted_and_a_changed_one_is_refused() {
    let lab = Lab::new();
    let keys = lab.path("keys");
    lab.ok(&["key", "create", "lab-a", "--dir", keys.to_str().unwrap()]);
    let bundle = exported(&lab, Some(keys.join("lab-a.key").to_str().unwrap()));
    assert!(bundle.join("SIGNATURE").is_file());
    let target = other_library(&lab);
    let import = |extra: &[&str]| {
        let mut args = vec!["--library", &target, "import", bundle.to_str().unwrap()];
        args.extend_from_slice(extra);
        lab.run(&args)
    };
    // Not trusted yet: refused, naming the signature file, with a hint.
    let out = import(&[]);
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
    let t = text(&out);
    assert!(
        t.contains("SIGNATURE") && t.contains("does not trust"),
        "{t}"
    );
    assert!(hint(&t).contains("whorl key trust"), "{t}");
    // A reason is required to trust it; trusting is audited.
    let public = keys.join("lab-a.pub");
    lab.fails(
        &[
            "--library",
            &target,
            "key",
            "trust",
            public.to_str().unwrap(),
        ],
        2,
    );
    lab.ok(&[
        "--library",
        &target,
        "key",
        "trust",
        public.to_str().unwrap(),
        "--reason",
        "our partner lab; key read back over the phone",
        "--by",
        "q.manager",
    ]);
    let log = lab.ok(&["--library", &target, "log"]);
    assert!(log.contains("key-trust"), "{log}");
    let out = import(&[]);
    assert!(out.status.success(), "{}", text(&out));
    assert!(
        text(&out).contains("signed by trusted key lab-a"),
        "{}",
        text(&out)
    );
    // Approved at home, pending here.
    let show: serde_json::Value =
        serde_json::from_str(&lab.ok(&["--library", &target, "show", "1", "--json"])).unwrap();
    assert_eq!(show["spectrum"]["status"], "pending");
    lab.ok(&["--library", &target, "check"]);

    // The same bundle with SHA256SUMS changed after signing: refused, then accepted only as
    // untrusted, and recorded so.
    let target2 = lab.path("third").to_str().unwrap().to_string();
    lab.ok(&["--library", &target2, "init"]);
    lab.ok(&[
        "--library",
        &target2,
        "key",
        "trust",
        public.to_str().unwrap(),
        "--reason",
        "partner",
    ]);
    let sums = bundle.join("SHA256SUMS");
    let mut listing = std::fs::read_to_string(&sums).unwrap();
    listing.push('\n');
    std::fs::write(&sums, listing).unwrap();
    let b = bundle.to_str().unwrap();
    let err = lab.fails(&["--library", &target2, "import", b], 3);
    assert!(err.contains("does not verify"), "{err}");
    let out = lab.ok(&["--library", &target2, "import", b, "--untrusted"]);
    assert!(out.contains("accepted as untrusted"), "{out}");
    let log = lab.ok(&["--library", &target2, "log", "--json"]);
    assert!(log.contains("\"untrusted\""), "{log}");
}

#[test]
fn an_unsigned_bundle_needs_untrusted_and_its_spectra_arrive_pending() {
    let lab = Lab::new();
    let bundle = exported(&lab, None);
    let target = other_library(&lab);
    let b = bundle.to_str().unwrap();
    let err = lab.fails(&["--library", &target, "import", b], 3);
    assert!(err.contains("unsigned"), "{err}");
    lab.ok(&["--library", &target, "import", b, "--untrusted"]);
    let list: serde_json::Value =
        serde_json::from_str(&lab.ok(&["--library", &target, "list", "--json"])).unwrap();
    assert!(
        list.as_array()
            .unwrap()
            .iter()
            .all(|r| r["status"] == "pending"),
        "{list}"
    );
}

#[test]
fn whoever_ran_the_import_cannot_approve_what_it_names_as_someone_elses() {
    let lab = Lab::new();
    // `add --by` names a colleague as submitter; the person running it (WHORL_USER) is
    // recorded as importer, and may not approve it.
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.9, 10.0)]),
        "ir",
        "acetone",
        &["--by", "c.colleague"],
    );
    let err = lab.fails(&["review", "1", "--approve", "--by", "t.tester"], 3);
    assert!(err.contains("imported spectrum 1"), "{err}");
    // The same through a manifest whose submitted_by column names someone else.
    lab.write("m/b.csv", ir_csv(&[(1600.0, 0.9, 10.0)]));
    lab.write(
        "m/list.csv",
        "file,technique,name,submitted_by\nb.csv,ir,benzene,c.colleague\n",
    );
    lab.ok(&["import", "m/list.csv", "--by", "d.importer"]);
    let err = lab.fails(&["review", "2", "--approve", "--by", "D.Importer"], 3);
    assert!(err.contains("imported spectrum 2"), "{err}");
    let show = lab.json(&["show", "2"]);
    assert_eq!(show["spectrum"]["submitted_by"], "c.colleague");
    assert_eq!(show["spectrum"]["imported_by"], "d.importer");
    lab.ok(&["review", "1", "2", "--approve", "--by", "r.second"]);
}

#[test]
fn blank_and_hidden_names_are_refused_and_the_os_account_is_used_without_one() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    for bad in ["", "   ", "r\u{200B}x", "r\u{1b}[31mx"] {
        let err = lab.refuses(
            &[
                "add",
                "a.csv",
                "--technique",
                "ir",
                "--name",
                "acetone",
                "--by",
                bad,
            ],
            3,
        );
        assert!(err.contains("--by name"), "{bad:?}: {err}");
    }
    // Neither --by nor WHORL_USER, and USER pointing elsewhere: the account of the process's
    // user id (as `id -un`, POSIX, reports it) is recorded.
    let out = lab
        .command(&["add", "a.csv", "--technique", "ir", "--name", "acetone"])
        .env_remove("WHORL_USER")
        .env("USER", "somebody.else")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", text(&out));
    let id = std::process::Command::new("id")
        .arg("-un")
        .output()
        .unwrap();
    let account = String::from_utf8(id.stdout).unwrap().trim().to_string();
    let show = lab.json(&["show", "1"]);
    assert_eq!(show["spectrum"]["submitted_by"], account.as_str());
    assert_eq!(show["spectrum"]["imported_by"], account.as_str());
    // Full-width letters are stored in NFKC form (UAX #15).
    lab.write("b.csv", ir_csv(&[(1600.0, 0.9, 10.0)]));
    lab.ok(&[
        "add",
        "b.csv",
        "--technique",
        "ir",
        "--name",
        "benzene",
        "--by",
        "\u{FF44}.x",
    ]);
    assert_eq!(lab.json(&["show", "2"])["spectrum"]["submitted_by"], "d.x");
}

#[test]
fn review_of_the_same_id_twice_is_refused_and_a_pinned_revision_must_be_current() {
    let lab = Lab::new();
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.9, 10.0)]),
        "ir",
        "acetone",
        &["--by", "a.analyst"],
    );
    let err = lab.refuses(&["review", "1", "1", "--approve", "--by", "r.second"], 3);
    assert!(err.contains("more than once"), "{err}");
    lab.ok(&[
        "revise",
        "1",
        "--note",
        "dried",
        "--reason",
        "notes",
        "--by",
        "a.analyst",
    ]);
    let err = lab.refuses(
        &[
            "review",
            "1",
            "--approve",
            "--revision",
            "1",
            "--by",
            "r.second",
        ],
        3,
    );
    assert!(err.contains("at revision 2"), "{err}");
    lab.ok(&[
        "review",
        "1",
        "--approve",
        "--revision",
        "2",
        "--by",
        "r.second",
    ]);
    let show = lab.json(&["show", "1"]);
    assert_eq!(show["reviews"].as_array().unwrap().len(), 1);
}

/// A library with a history worth tampering with: spectra added by one person for another,
/// an approval with a note, a rejection, a policy change and a trusted key.
fn audited() -> Lab {
    let lab = Lab::new();
    for (i, name) in ["acetone", "butanone"].iter().enumerate() {
        lab.add(
            &format!("s{i}.csv"),
            &ir_csv(&[(1700.0 + 60.0 * i as f64, 0.8, 12.0)]),
            "ir",
            name,
            &["--by", "a.analyst"],
        );
    }
    lab.ok(&[
        "review",
        "1",
        "--approve",
        "--by",
        "b.reviewer",
        "--note",
        "matches the CoA",
    ]);
    lab.ok(&["review", "2", "--reject", "--by", "b.reviewer"]);
    lab.ok(&[
        "withdraw",
        "2",
        "--reason",
        "baseline drifts",
        "--by",
        "q.manager",
    ]);
    lab.ok(&[
        "policy",
        "--self-review",
        "forbid",
        "--reason",
        "confirmed at audit",
        "--by",
        "q.manager",
    ]);
    let keys = lab.path("keys");
    lab.ok(&["key", "create", "lab-a", "--dir", keys.to_str().unwrap()]);
    lab.ok(&[
        "key",
        "trust",
        keys.join("lab-a.pub").to_str().unwrap(),
        "--reason",
        "partner lab",
    ]);
    lab.ok(&["check"]);
    lab
}

fn copy_dir(from: &std::path::Path, to: &std::path::Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// Every trigger in the database, dropped as an attacker with the file would.
fn drop_triggers(db: &rusqlite::Connection) {
    let names: Vec<String> = db
        .prepare("SELECT name FROM sqlite_master WHERE type = 'trigger'")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<rusqlite::Result<_>>()
        .unwrap();
    for n in names {
        db.execute_batch(&format!("DROP TRIGGER \"{n}\"")).unwrap();
    }
}

#[test]
fn the_guarded_columns_refuse_edits_while_their_triggers_stand() {
    let lab = audited();
    let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
    for sql in [
        "UPDATE spectrum SET submitted_by = 'x' WHERE id = 1",
        "UPDATE spectrum SET imported_by = 'x' WHERE id = 1",
        "UPDATE setting SET value = 'true' WHERE key = 'allow_self_review'",
        "DELETE FROM setting WHERE key = 'allow_self_review'",
        "UPDATE trusted_key SET reason = 'x'",
        "DELETE FROM trusted_key",
        "DELETE FROM spectrum WHERE id = 2",
        "UPDATE review SET reviewer = 'x'",
        "UPDATE revision SET created_by = 'x'",
        "UPDATE spectrum SET withdrawn_reason = 'x' WHERE id = 2",
    ] {
        let err = db.execute_batch(sql).unwrap_err().to_string();
        assert!(!err.is_empty(), "{sql}");
    }
    drop(db);
    lab.ok(&["check"]);
}

#[test]
fn check_finds_every_tampered_sign_off_submitter_policy_and_key() {
    let lab = audited();
    // (table.column, edit, what check must name): each edit made directly in SQLite with the
    // triggers dropped.
    let cases: [(&str, &str, &str); 16] = [
        (
            "review.reviewer",
            "UPDATE review SET reviewer = 'm.allory' WHERE spectrum_id = 1",
            "review:1",
        ),
        (
            "review.at",
            "UPDATE review SET at = '2020-01-01T00:00:00.000Z' WHERE spectrum_id = 1",
            "review:1",
        ),
        (
            "review.decision",
            "UPDATE review SET decision = 'approved' WHERE spectrum_id = 2",
            "review:2",
        ),
        (
            "review.meaning",
            "UPDATE review SET meaning = 'whatever' WHERE spectrum_id = 1",
            "review:1",
        ),
        (
            "review.note",
            "UPDATE review SET note = NULL WHERE spectrum_id = 1",
            "review:1",
        ),
        (
            "review.revision",
            "UPDATE review SET revision = 7 WHERE spectrum_id = 1",
            "review:1",
        ),
        (
            "review (row deleted)",
            "DELETE FROM review WHERE spectrum_id = 1",
            "spectrum:1",
        ),
        (
            "review (row forged)",
            "INSERT INTO review (spectrum_id, revision, reviewer, at, decision, meaning) VALUES (2, 1, 'm.allory', '2026-01-01T00:00:00.000Z', 'approved', 'ok')",
            "spectrum:2",
        ),
        (
            "spectrum.submitted_by",
            "UPDATE spectrum SET submitted_by = 'b.reviewer' WHERE id = 2",
            "spectrum:2",
        ),
        (
            "revision.created_by",
            "UPDATE revision SET created_by = 'b.reviewer' WHERE spectrum_id = 2",
            "spectrum:2",
        ),
        (
            "spectrum.withdrawn_reason",
            "UPDATE spectrum SET withdrawn_reason = 'no reason' WHERE id = 2",
            "spectrum:2",
        ),
        (
            "spectrum.imported_by",
            "UPDATE spectrum SET imported_by = 'someone' WHERE id = 2",
            "spectrum:2",
        ),
        (
            "setting.allow_self_review",
            "UPDATE setting SET value = 'true' WHERE key = 'allow_self_review'",
            "setting:allow_self_review",
        ),
        (
            "trusted_key.reason",
            "UPDATE trusted_key SET reason = 'never checked'",
            "key:",
        ),
        (
            "trusted_key (row forged)",
            "INSERT INTO trusted_key (name, public_key, trusted_by, trusted_at, reason) VALUES ('evil', 'aa', 'x', 'now', 'x')",
            "key:aa",
        ),
        (
            "trusted_key (row deleted)",
            "DELETE FROM trusted_key",
            "key:",
        ),
    ];
    let mut found = 0;
    for (what, sql, record) in cases {
        let copy = lab.path(&format!("tampered-{found}"));
        copy_dir(&lab.library(), &copy);
        let db = rusqlite::Connection::open(copy.join("library.sqlite")).unwrap();
        drop_triggers(&db);
        db.execute_batch(sql).unwrap();
        drop(db);
        let out = lab.run(&["--library", copy.to_str().unwrap(), "check"]);
        let t = text(&out);
        assert_eq!(
            out.status.code(),
            Some(5),
            "{what}: check did not fail\n{t}"
        );
        assert!(
            t.lines().any(|l| l.starts_with(record)),
            "{what}: no finding on {record}\n{t}"
        );
        found += 1;
    }
    assert_eq!(found, 16);
}

#[test]
fn check_with_a_witness_finds_a_chain_cut_back_below_a_recorded_head() {
    let lab = audited();
    let witness = lab.path("elsewhere/witness");
    std::fs::create_dir_all(witness.parent().unwrap()).unwrap();
    let w = witness.to_str().unwrap();
    let out = lab.ok(&["witness", "write", w]);
    assert!(out.contains("witnessed event"), "{out}");
    lab.ok(&["check", "--witness", w]);
    // The newest events removed and the head on record moved back to match: the chain alone
    // looks whole, the witness does not.
    let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
    drop_triggers(&db);
    db.execute_batch(
        "DELETE FROM event WHERE seq = (SELECT max(seq) FROM event);
         UPDATE setting SET value = (SELECT seq || ':' || hash FROM event ORDER BY seq DESC LIMIT 1)
             WHERE key = 'event_head';
         DELETE FROM trusted_key;",
    )
    .unwrap();
    drop(db);
    let out = lab.run(&["check", "--witness", w]);
    let t = text(&out);
    assert_eq!(out.status.code(), Some(5), "{t}");
    assert!(
        t.lines()
            .any(|l| l.starts_with("witness:") && l.contains("no longer holds")),
        "{t}"
    );
}
