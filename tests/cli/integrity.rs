//! `check` against a library tampered with directly in SQLite: every change is named.

use rusqlite::Connection;

use crate::util::{Lab, seed};

/// A library holding the seed spectra, a few of them reviewed, revised and withdrawn.
fn library() -> Lab {
    let lab = Lab::new();
    lab.ok(&["import", seed().join("manifest.csv").to_str().unwrap()]);
    lab.ok(&["review", "1", "--approve", "--by", "r.reviewer"]);
    lab.ok(&[
        "revise",
        "2",
        "--note",
        "re-measured lot",
        "--by",
        "e.editor",
        "--reason",
        "re-measured",
    ]);
    lab.ok(&["withdraw", "3", "--reason", "recalled", "--by", "q.manager"]);
    lab
}

fn tamper(lab: &Lab, sql: &str) {
    let conn = Connection::open(lab.library().join("library.sqlite")).unwrap();
    conn.execute_batch(sql).unwrap();
}

/// Runs `check`, expecting it to fail (exit 5), and returns its findings as "record: problem".
fn findings(lab: &Lab) -> Vec<String> {
    let out = lab.run(&["check", "--json"]);
    assert_eq!(
        out.status.code(),
        Some(5),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    v["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| {
            format!(
                "{}: {}",
                f["record"].as_str().unwrap(),
                f["problem"].as_str().unwrap()
            )
        })
        .collect()
}

fn named(findings: &[String], record: &str, words: &str) -> bool {
    findings
        .iter()
        .any(|f| f.starts_with(&format!("{record}:")) && f.contains(words))
}

#[test]
fn an_untouched_library_checks_clean() {
    let lab = library();
    let report = lab.json(&["check"]);
    assert_eq!(report["findings"].as_array().unwrap().len(), 0, "{report}");
    assert_eq!(report["spectra"], crate::util::seed_rows(None));
}

#[test]
fn the_normal_path_cannot_edit_or_delete_events_or_revisions() {
    let lab = library();
    let conn = Connection::open(lab.library().join("library.sqlite")).unwrap();
    for sql in [
        "UPDATE event SET actor = 'x' WHERE seq = 2",
        "DELETE FROM event WHERE seq = 2",
        "UPDATE revision SET metadata = '{}' WHERE spectrum_id = 1",
        "DELETE FROM review",
        "UPDATE spectrum SET raw = x'00' WHERE id = 1",
    ] {
        let err = conn.execute_batch(sql).unwrap_err().to_string();
        assert!(
            err.contains("append-only") || err.contains("kept"),
            "{sql}: {err}"
        );
    }
}

#[test]
fn an_edited_raw_blob_is_named() {
    let lab = library();
    // Flip one byte of spectrum 5's raw points.
    let conn = Connection::open(lab.library().join("library.sqlite")).unwrap();
    let mut raw: Vec<u8> = conn
        .query_row("SELECT raw FROM spectrum WHERE id = 5", [], |r| r.get(0))
        .unwrap();
    raw[20] ^= 0xff;
    conn.execute_batch("DROP TRIGGER spectrum_raw_is_fixed;")
        .unwrap();
    conn.execute("UPDATE spectrum SET raw = ?1 WHERE id = 5", [raw])
        .unwrap();
    drop(conn);
    let f = findings(&lab);
    assert!(
        named(&f, "spectrum:5", "raw points do not match their hash"),
        "{f:?}"
    );
}

#[test]
fn an_edited_metadata_value_is_named() {
    let lab = library();
    tamper(
        &lab,
        "DROP TRIGGER revision_no_update;
         UPDATE revision SET metadata = json_set(metadata, '$.formula', 'C9H9') WHERE spectrum_id = 7;",
    );
    let f = findings(&lab);
    assert!(
        named(&f, "spectrum:7", "metadata of revision 1 differs"),
        "{f:?}"
    );
}

#[test]
fn an_edited_status_is_named() {
    let lab = library();
    tamper(
        &lab,
        "UPDATE spectrum SET status = 'verified' WHERE id = 9;",
    );
    let f = findings(&lab);
    assert!(
        named(
            &f,
            "spectrum:9",
            "status is verified but its events say pending"
        ),
        "{f:?}"
    );
    assert!(named(&f, "library", "state hash sum"), "{f:?}");
}

#[test]
fn an_edited_prepared_vector_is_named() {
    let lab = library();
    tamper(
        &lab,
        "UPDATE prepared SET vector = zeroblob(length(vector)) WHERE spectrum_id = 11;",
    );
    let f = findings(&lab);
    assert!(
        named(&f, "spectrum:11", "prepared vector or peaks differ"),
        "{f:?}"
    );
}

#[test]
fn a_deleted_event_is_named() {
    let lab = library();
    tamper(
        &lab,
        "DROP TRIGGER event_no_delete; DELETE FROM event WHERE seq = 10;",
    );
    let f = findings(&lab);
    assert!(named(&f, "event:11", "events 10..10 are missing"), "{f:?}");
    assert!(named(&f, "event:11", "does not follow"), "{f:?}");
    // Event 10 recorded the import of spectrum 9, which now has no import event.
    assert!(
        named(&f, "spectrum:9", "no event records its import"),
        "{f:?}"
    );
}

#[test]
fn a_deleted_newest_event_is_named() {
    let lab = library();
    tamper(
        &lab,
        "DROP TRIGGER event_no_delete; DELETE FROM event WHERE seq = (SELECT max(seq) FROM event);",
    );
    let f = findings(&lab);
    assert!(named(&f, "library", "newest events were removed"), "{f:?}");
    // The withdrawal of spectrum 3 was the newest event.
    assert!(
        named(
            &f,
            "spectrum:3",
            "status is withdrawn but its events say pending"
        ),
        "{f:?}"
    );
}

#[test]
fn reordered_events_are_named() {
    let lab = library();
    // Swap the positions of events 20 and 21.
    tamper(
        &lab,
        "DROP TRIGGER event_no_update;
         UPDATE event SET seq = -1 WHERE seq = 20;
         UPDATE event SET seq = 20 WHERE seq = 21;
         UPDATE event SET seq = 21 WHERE seq = -1;",
    );
    let f = findings(&lab);
    assert!(
        named(&f, "event:20", "does not match its hash")
            || named(&f, "event:20", "does not follow"),
        "{f:?}"
    );
    assert!(named(&f, "event:21", "does not follow"), "{f:?}");
}

#[test]
fn an_edited_event_payload_is_named() {
    let lab = library();
    tamper(
        &lab,
        "DROP TRIGGER event_no_update;
         UPDATE event SET payload = replace(payload, 'recalled', 'routine') WHERE action = 'withdraw';",
    );
    let f = findings(&lab);
    assert!(
        f.iter()
            .any(|x| x.starts_with("event:") && x.contains("payload was edited")),
        "{f:?}"
    );
}

#[test]
fn a_deleted_text_index_is_rebuilt_by_check_and_is_not_a_finding() {
    let lab = library();
    std::fs::remove_dir_all(lab.library().join("text-index")).unwrap();
    let report = lab.json(&["check"]);
    assert_eq!(report["findings"].as_array().unwrap().len(), 0);
    assert_eq!(
        lab.json(&["find", "toluene"]).as_array().unwrap().len(),
        crate::util::seed_rows_of("toluene"),
        "one spectrum per technique"
    );
}

#[test]
fn a_damaged_vector_cache_is_a_finding_and_is_rebuilt() {
    let lab = library();
    let unknown = crate::util::unknown("u01.ir.csv");
    let search = |lab: &Lab| lab.json(&["search", &unknown, "-t", "ir", "--include-pending"]);
    let before = search(&lab);
    let file = lab.library().join("cache/ir.corr.wvc");
    let mut bytes = std::fs::read(&file).unwrap();
    // One byte in the middle of the rows changed.
    let at = bytes.len() / 2;
    bytes[at] ^= 0x40;
    std::fs::write(&file, &bytes).unwrap();
    let found = findings(&lab);
    assert!(
        named(&found, "cache:ir.corr.wvc", "fails its checksum"),
        "{found:?}"
    );
    // Rebuilt: the next check is clean, and the search gives what it gave before.
    assert_eq!(
        lab.json(&["check"])["findings"].as_array().unwrap().len(),
        0
    );
    assert_eq!(search(&lab)["hits"], before["hits"]);
}

/// Every command that reads the text index, run on a library whose index was damaged.
fn still_works(lab: &Lab) {
    lab.ok(&["stats"]);
    lab.ok(&["list"]);
    let hits = lab.json(&[
        "search",
        &crate::util::unknown("u01.ir.csv"),
        "-t",
        "ir",
        "--include-pending",
    ]);
    assert!(!hits["hits"].as_array().unwrap().is_empty());
    let report = lab.json(&["check"]);
    assert_eq!(report["findings"].as_array().unwrap().len(), 0, "{report}");
    assert_eq!(
        lab.json(&["find", "toluene"]).as_array().unwrap().len(),
        crate::util::seed_rows_of("toluene"),
    );
}

#[test]
fn a_text_index_with_a_truncated_meta_json_is_rebuilt() {
    let lab = library();
    let meta = lab.library().join("text-index/meta.json");
    let text = std::fs::read(&meta).unwrap();
    std::fs::write(&meta, &text[..text.len() / 2]).unwrap();
    still_works(&lab);
}

#[test]
fn a_text_index_missing_a_segment_file_is_rebuilt() {
    let lab = library();
    let dir = lab.library().join("text-index");
    let mut removed = 0;
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        // A segment's postings (tantivy names segment files `<uuid>.<component>`).
        if p.extension().is_some_and(|x| x == "idx") {
            std::fs::remove_file(&p).unwrap();
            removed += 1;
        }
    }
    assert!(removed > 0, "the index has segments");
    still_works(&lab);
}
