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
    let cases: [(&str, &str, &str); 17] = [
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
            "spectrum.withdrawn_reason (a spectrum never withdrawn)",
            "UPDATE spectrum SET withdrawn_reason = 'no reason' WHERE id = 1",
            "spectrum:1",
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
    assert_eq!(found, 17);
}

/// Columns no event replays field by field are sealed: each event on a record carries the
/// digests of the rows the record stands for, and `check` compares them with the tables.
#[test]
fn check_finds_every_edited_sealed_column_row_id_and_library_setting() {
    let lab = audited();
    lab.ok(&["account", "add", "d.reader", "--role", "reader"]);
    lab.ok(&[
        "account",
        "disable",
        "d.reader",
        "--reason",
        "left",
        "--by",
        "q.manager",
    ]);
    lab.ok(&["account", "add", "e.signer", "--role", "signer"]);
    lab.ok(&[
        "token",
        "create",
        "--account",
        "e.signer",
        "--label",
        "lims",
        "--expires",
        "1d",
    ]);
    lab.ok(&["check"]);
    let cases: [(&str, &str, &str); 12] = [
        (
            "compound.name",
            "UPDATE compound SET name = 'acetane' WHERE id = 1",
            "spectrum:1",
        ),
        (
            "compound (row deleted)",
            "DELETE FROM compound WHERE id = 2",
            "spectrum:2",
        ),
        (
            "prepared.warnings",
            "UPDATE prepared SET warnings = '[\"made up\"]' WHERE spectrum_id = 1",
            "spectrum:1",
        ),
        (
            "prepared.y_unit",
            "UPDATE prepared SET y_unit = 'transmittance' WHERE spectrum_id = 2",
            "spectrum:2",
        ),
        (
            "revision.reason",
            "UPDATE revision SET reason = 'made up' WHERE spectrum_id = 1",
            "spectrum:1",
        ),
        (
            "revision.compound_id",
            "UPDATE revision SET compound_id = 2 WHERE spectrum_id = 1",
            "spectrum:1",
        ),
        (
            "spectrum.file_name",
            "UPDATE spectrum SET file_name = 'other.csv' WHERE id = 2",
            "spectrum:2",
        ),
        (
            "spectrum.compound_id",
            "UPDATE spectrum SET compound_id = 2 WHERE id = 1",
            "spectrum:1",
        ),
        (
            "review.id",
            "UPDATE review SET id = 99 WHERE spectrum_id = 1",
            "spectrum:1",
        ),
        (
            "account.disabled_reason",
            "UPDATE account SET disabled_reason = 'never left' WHERE disabled_at IS NOT NULL",
            "account:",
        ),
        ("token.label", "UPDATE token SET label = 'other'", "token:"),
        (
            "setting[created_at]",
            "UPDATE setting SET value = '2001-01-01T00:00:00.000Z' WHERE key = 'created_at'",
            "setting:created_at",
        ),
    ];
    for (i, (what, sql, record)) in cases.iter().enumerate() {
        let copy = lab.path(&format!("sealed-{i}"));
        copy_dir(&lab.library(), &copy);
        let db = rusqlite::Connection::open(copy.join("library.sqlite")).unwrap();
        drop_triggers(&db);
        db.execute_batch("PRAGMA foreign_keys = OFF").unwrap();
        assert_eq!(db.execute(sql, []).unwrap(), 1, "{what}");
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
        assert!(!t.contains("not covered"), "{what}: {t}");
    }
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

/// True when `text` holds a control character that would reach a terminal raw: a C0 control
/// other than the line break and tab whorl itself writes, DEL, or a C1 control (ECMA-48, 5th
/// edition, 1991, sections 5.3 and 8.2: ESC and CSI start the sequences a terminal obeys).
fn raw_controls(text: &str) -> bool {
    text.chars()
        .any(|c| c.is_control() && !matches!(c, '\n' | '\t'))
}

#[test]
fn stored_names_with_control_characters_reach_no_terminal_raw() {
    // ESC starting a colour sequence, a newline starting a forged line, and the C1 CSI
    // (U+009B), put where whorl's own input checks would refuse them: directly in SQLite.
    let evil = "n\u{1b}[31mred\nforged line\u{9b}2J";
    let lab = audited();
    lab.ok(&["account", "add", "d.reader", "--role", "reader"]);
    lab.ok(&[
        "token",
        "create",
        "--account",
        "d.reader",
        "--label",
        "lims",
        "--expires",
        "1d",
    ]);
    {
        let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
        drop_triggers(&db);
        for sql in [
            "UPDATE compound SET name = ?1",
            "UPDATE revision SET metadata = json_set(metadata, '$.name', ?1)",
            "UPDATE spectrum SET submitted_by = ?1, imported_by = ?1",
            "UPDATE review SET reviewer = ?1, meaning = ?1, note = ?1",
            "UPDATE spectrum SET withdrawn_reason = ?1 WHERE withdrawn_reason IS NOT NULL",
            "UPDATE trusted_key SET name = ?1, trusted_by = ?1, reason = ?1",
            "UPDATE account SET name = ?1 WHERE name = 'd.reader'",
            "UPDATE token SET label = ?1",
            "UPDATE event SET actor = ?1 WHERE seq = 2",
        ] {
            db.execute(sql, [evil]).unwrap();
        }
    }
    lab.write("u.csv", ir_csv(&[(1700.0, 0.8, 12.0)]));
    // A manifest whose row names a file with the same characters (import's rejected lines,
    // error messages quoting a path).
    lab.write(
        "m.csv",
        format!("file,technique,name\n\"{evil}.csv\",ir,x\n"),
    );
    let bundle = lab.path("bundle");
    let witness = lab.path(&format!("w{}", "\u{1b}[2J"));
    let runs: Vec<Vec<&str>> = vec![
        vec!["list"],
        vec!["show", "1"],
        vec!["show", "2"],
        vec!["find", "acetone OR butanone"],
        vec!["search", "u.csv", "-t", "ir", "--include-pending"],
        vec![
            "search",
            "u.csv",
            "-t",
            "ir",
            "--include-pending",
            "--components",
            "2",
        ],
        vec!["identify", "--ir", "u.csv"],
        vec!["log"],
        vec!["log", "1"],
        vec!["key", "list"],
        vec!["account", "list"],
        vec!["token", "list"],
        vec!["policy"],
        vec!["check"],
        vec!["export", bundle.to_str().unwrap()],
        vec!["import", "m.csv"],
        vec!["witness", "write", witness.to_str().unwrap()],
        vec!["show", "no\u{1b}[31m"],
        vec!["add", "x\u{1b}[2J\u{9b}.csv", "-t", "ir", "--name", "x"],
        vec![
            "review",
            "1",
            "--approve",
            "--by",
            "e.second",
            "--note",
            "ok",
        ],
    ];
    let mut seen = 0;
    for args in &runs {
        let out = lab.run(args);
        let all = text(&out);
        assert!(
            !raw_controls(&all),
            "{args:?} printed raw control characters:\n{all:?}"
        );
        assert!(
            !all.lines().any(|l| l.starts_with("forged line")),
            "{args:?} let a stored name forge a line:\n{all}"
        );
        seen += 1;
    }
    assert_eq!(seen, runs.len());
    // The names are shown, escaped, not dropped.
    assert!(
        lab.ok(&["key", "list"])
            .contains("n\\u{1b}[31mred\\nforged line\\u{9b}2J"),
        "the key's name is not shown escaped"
    );
    // The bundle carries the names as they are stored (CSV quoting, not terminal escapes);
    // its import prints them escaped.
    let other = Lab::new();
    let out = other.run(&["import", bundle.to_str().unwrap(), "--untrusted"]);
    assert!(!raw_controls(&text(&out)), "{:?}", text(&out));
    for args in [vec!["list"], vec!["show", "1"], vec!["log"]] {
        let out = other.run(&args);
        assert!(!raw_controls(&text(&out)), "{args:?}: {:?}", text(&out));
    }
}

/// `[audit] witness` in whorl.toml: every write appends its head, reads append nothing.
fn witnessed_lab() -> (Lab, std::path::PathBuf) {
    let lab = audited();
    let witness = lab.path("elsewhere/heads");
    std::fs::create_dir_all(witness.parent().unwrap()).unwrap();
    std::fs::write(
        lab.library().join("whorl.toml"),
        format!(
            "[audit]\nwitness = \"{}\"\n",
            witness.to_str().unwrap().replace('\\', "\\\\")
        ),
    )
    .unwrap();
    (lab, witness)
}

fn witness_lines(file: &std::path::Path) -> Vec<(i64, String)> {
    std::fs::read_to_string(file)
        .unwrap_or_default()
        .lines()
        .map(|l| {
            let f: Vec<&str> = l.split_whitespace().collect();
            (f[1].parse().unwrap(), f[2].to_string())
        })
        .collect()
}

fn head(lab: &Lab) -> (i64, String) {
    let log = lab.json(&["log"]);
    let last = log.as_array().unwrap().last().unwrap();
    (
        last["seq"].as_i64().unwrap(),
        last["hash"].as_str().unwrap().to_string(),
    )
}

#[test]
fn every_write_appends_its_head_to_the_configured_witness() {
    let (lab, witness) = witnessed_lab();
    assert!(witness_lines(&witness).is_empty());
    lab.add(
        "s9.csv",
        &ir_csv(&[(1650.0, 0.7, 10.0)]),
        "ir",
        "pentanone",
        &["--by", "a.analyst"],
    );
    assert_eq!(witness_lines(&witness), vec![head(&lab)]);
    lab.ok(&["review", "3", "--approve", "--by", "c.third"]);
    lab.ok(&[
        "withdraw",
        "1",
        "--reason",
        "lot recalled",
        "--by",
        "q.manager",
    ]);
    let lines = witness_lines(&witness);
    assert_eq!(lines.len(), 3, "{lines:?}");
    assert_eq!(lines.last().unwrap(), &head(&lab));
    // Reads and a refused write change nothing, so they append nothing.
    lab.ok(&["list"]);
    lab.ok(&["log"]);
    lab.fails(
        &["withdraw", "1", "--reason", "again", "--by", "q.manager"],
        3,
    );
    assert_eq!(witness_lines(&witness).len(), 3);
    lab.ok(&["check", "--witness", witness.to_str().unwrap()]);
    lab.ok(&["check"]);
    // The newest events removed and the head moved back to match: the chain alone is whole,
    // the witness every write kept is not; `check` uses it without being told, and no later
    // write puts the rewritten chain's head on record.
    let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
    drop_triggers(&db);
    db.execute_batch(
        "DELETE FROM event WHERE seq = (SELECT max(seq) FROM event);
         UPDATE spectrum SET status = 'pending', withdrawn_reason = NULL WHERE id = 1;
         UPDATE setting SET value = (SELECT seq || ':' || hash FROM event ORDER BY seq DESC LIMIT 1)
             WHERE key = 'event_head';",
    )
    .unwrap();
    drop(db);
    for args in [
        vec!["check", "--witness", witness.to_str().unwrap()],
        vec!["check"],
    ] {
        let out = lab.run(&args);
        let t = text(&out);
        assert_eq!(out.status.code(), Some(5), "{args:?}\n{t}");
        assert!(
            t.lines()
                .any(|l| l.starts_with("witness:") && l.contains("no longer holds")),
            "{args:?}\n{t}"
        );
    }
    let out = lab.run(&[
        "revise", "3", "--tag", "x", "--reason", "r", "--by", "c.third",
    ]);
    let t = text(&out);
    assert_ne!(out.status.code(), Some(0), "{t}");
    assert!(t.contains("no longer holds event"), "{t}");
    assert_eq!(witness_lines(&witness).len(), 3);
}

#[test]
fn a_witness_inside_the_library_or_relative_is_refused() {
    let lab = audited();
    let inside = lab.library().join("heads");
    std::fs::write(
        lab.library().join("whorl.toml"),
        format!("[audit]\nwitness = \"{}\"\n", inside.to_str().unwrap()),
    )
    .unwrap();
    let out = lab.run(&[
        "revise", "1", "--tag", "x", "--reason", "r", "--by", "c.third",
    ]);
    let err = text(&out);
    assert_ne!(out.status.code(), Some(0), "{err}");
    assert!(err.contains("inside the library folder"), "{err}");
    assert!(err.contains("changes are committed"), "{err}");
    assert!(!inside.exists());
    std::fs::write(
        lab.library().join("whorl.toml"),
        "[audit]\nwitness = \"heads\"\n",
    )
    .unwrap();
    let err = lab.fails(&["config"], 3);
    assert!(err.contains("absolute path"), "{err}");
}

/// The changed value of one cell: another valid value where a CHECK constraint allows only a
/// few, else the value with something appended or added (a byte for blobs).
fn tampered_value(table: &str, column: &str, decl: &str) -> String {
    match (table, column) {
        ("spectrum", "status") => {
            "CASE status WHEN 'verified' THEN 'pending' ELSE 'verified' END".into()
        }
        ("review", "decision") => {
            "CASE decision WHEN 'approved' THEN 'rejected' ELSE 'approved' END".into()
        }
        ("account", "role") => "CASE role WHEN 'admin' THEN 'reader' ELSE 'admin' END".into(),
        _ if decl.contains("INT") => format!("coalesce(\"{column}\", 0) + 1000"),
        _ if decl.contains("BLOB") => format!("CAST(\"{column}\" || x'00' AS BLOB)"),
        // JSON stays JSON where it was (a space changes its text, not its meaning, so a
        // replay that compares meanings may rightly see no change: append to a string in it
        // is not possible generically); text gets a visible change.
        _ => format!("coalesce(\"{column}\", '') || 'x'"),
    }
}

/// Walks every column of every table (each `setting` key on its own), changes it in one row
/// directly in SQLite with the triggers dropped, and counts what `check` finds. Run by hand
/// for the trust figures (about a minute): `cargo test --test cli tamper_walk -- --ignored
/// --nocapture`; `check_finds_every_tampered_sign_off_submitter_policy_and_key` runs the
/// guarded cases in CI.
#[test]
#[ignore]
fn tamper_walk_every_table_and_column() {
    let lab = audited();
    lab.ok(&[
        "revise",
        "1",
        "--tag",
        "solvent",
        "--reason",
        "tagged",
        "--by",
        "c.curator",
    ]);
    lab.ok(&[
        "reinstate",
        "2",
        "--reason",
        "baseline fixed",
        "--by",
        "q.manager",
    ]);
    lab.ok(&["account", "add", "d.reader", "--role", "reader"]);
    lab.ok(&[
        "account",
        "disable",
        "d.reader",
        "--reason",
        "left",
        "--by",
        "q.manager",
    ]);
    lab.ok(&["account", "add", "e.signer", "--role", "signer"]);
    lab.ok(&[
        "token",
        "create",
        "--account",
        "e.signer",
        "--label",
        "lims",
        "--expires",
        "1d",
    ]);
    // A compound no spectrum names any more: spectrum 1 renamed, its old compound left.
    lab.ok(&[
        "revise",
        "1",
        "--name",
        "propan-2-one",
        "--reason",
        "preferred name",
        "--by",
        "c.curator",
    ]);
    lab.ok(&["check"]);
    let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
    let tables: Vec<String> = db
        .prepare(
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY name",
        )
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<rusqlite::Result<_>>()
        .unwrap();
    // (case, edit)
    let mut cases: Vec<(String, String)> = Vec::new();
    for t in &tables {
        if t == "setting" {
            let keys: Vec<String> = db
                .prepare("SELECT key FROM setting ORDER BY key")
                .unwrap()
                .query_map([], |r| r.get(0))
                .unwrap()
                .collect::<rusqlite::Result<_>>()
                .unwrap();
            for k in keys {
                cases.push((
                    format!("setting[{k}]"),
                    format!(
                        "UPDATE setting SET value = CASE value WHEN 'true' THEN 'false' WHEN 'false' THEN 'true' ELSE value || 'x' END WHERE key = '{k}'"
                    ),
                ));
            }
            // The generation set to another count, as a stale cache would want it.
            cases.push((
                "setting[generation] (another count)".into(),
                "UPDATE setting SET value = CAST(CAST(value AS INTEGER) - 1 AS TEXT) WHERE key = 'generation'".into(),
            ));
            continue;
        }
        if t == "compound" {
            for c in ["key", "name", "formula", "cas", "created_at"] {
                cases.push((
                    format!("compound.{c} (no spectrum names it)"),
                    format!(
                        "UPDATE compound SET \"{c}\" = coalesce(\"{c}\", '') || 'x' WHERE id = (SELECT min(id) FROM compound WHERE id NOT IN (SELECT compound_id FROM spectrum))"
                    ),
                ));
            }
        }
        let columns: Vec<(String, String)> = db
            .prepare(&format!("PRAGMA table_info(\"{t}\")"))
            .unwrap()
            .query_map([], |r| Ok((r.get(1)?, r.get(2)?)))
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap();
        for (c, decl) in columns {
            let value = tampered_value(t, &c, &decl.to_uppercase());
            cases.push((
                format!("{t}.{c}"),
                format!("UPDATE \"{t}\" SET \"{c}\" = {value} WHERE rowid = (SELECT min(rowid) FROM \"{t}\")"),
            ));
        }
        cases.push((
            format!("{t} (row deleted)"),
            format!("DELETE FROM \"{t}\" WHERE rowid = (SELECT max(rowid) FROM \"{t}\")"),
        ));
    }
    drop(db);
    let mut missed = Vec::new();
    let mut refused = Vec::new();
    let mut per_table: std::collections::BTreeMap<String, (usize, usize)> = Default::default();
    for (i, (what, sql)) in cases.iter().enumerate() {
        let copy = lab.path(&format!("walk-{i}"));
        copy_dir(&lab.library(), &copy);
        let db = rusqlite::Connection::open(copy.join("library.sqlite")).unwrap();
        drop_triggers(&db);
        db.execute_batch("PRAGMA foreign_keys = OFF").unwrap();
        let changed = db.execute(sql, []).unwrap();
        assert_eq!(changed, 1, "{what}: {sql}");
        drop(db);
        let out = lab.run(&["--library", copy.to_str().unwrap(), "check"]);
        let table = what.split(['.', '[', ' ']).next().unwrap().to_string();
        let e = per_table.entry(table).or_default();
        e.0 += 1;
        match out.status.code() {
            Some(5) => e.1 += 1,
            // Not a finding, but no "no inconsistency" either: check refused to read the
            // edited row (invalid JSON, say) and said why.
            Some(c) if c != 0 => {
                e.1 += 1;
                refused.push(format!("{what} (exit {c})"));
            }
            _ => missed.push(what.clone()),
        }
        std::fs::remove_dir_all(&copy).unwrap();
    }
    println!("tamper cases per table (tried, found by check):");
    for (t, (tried, found)) in &per_table {
        println!("  {t:<12} {tried:>3} {found:>3}");
    }
    println!(
        "total: {} tried, {} found (of them {} by check refusing to read the row: {refused:?}); not found: {missed:?}",
        cases.len(),
        cases.len() - missed.len(),
        refused.len()
    );
    // What the trust work guards (who, what was decided, the trail, the policy, the keys, the
    // raw data and the searchable state) must all be found; the rest is printed above as the
    // figure, for the issue's closing note.
    let guarded = [
        "event.",
        "review.reviewer",
        "review.at",
        "review.decision",
        "review.meaning",
        "review.note",
        "review.revision",
        "review.spectrum_id",
        "review (row deleted)",
        "spectrum.submitted_by",
        "spectrum.imported_by",
        "spectrum.status",
        "spectrum.raw",
        "spectrum.raw_sha256",
        "spectrum.current_revision",
        "spectrum.withdrawn_reason",
        "revision.created_by",
        "revision.metadata",
        "setting[allow_self_review]",
        "setting[event_head]",
        "setting[content_sum]",
        "trusted_key.public_key",
        "trusted_key.reason",
        "trusted_key (row deleted)",
        "account.role",
        "account.name",
        "token.revoked_at",
        "prepared.vector",
        // Sealed by the events on their records.
        "compound",
        "prepared.y_unit",
        "prepared.warnings",
        "revision.",
        "review.",
        "spectrum.",
        "account.",
        "token.",
        "trusted_key.",
        "setting[created_at]",
        "setting[created_by_version]",
        "setting[generation]",
    ];
    let missed_guarded: Vec<&String> = missed
        .iter()
        .filter(|m| guarded.iter().any(|g| m.starts_with(g)))
        .collect();
    assert!(
        missed_guarded.is_empty(),
        "check missed: {missed_guarded:?}"
    );
}
