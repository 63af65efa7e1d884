use std::collections::BTreeSet;

use crate::util::{Lab, hint, ir_csv, keys, ms_csv};

/// Two compounds, one with an IR and an MS spectrum, with distinct metadata.
fn lab() -> Lab {
    let lab = Lab::new();
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "compound alpha",
        &[
            "--tag",
            "solvent",
            "--formula",
            "C3H6O",
            "--synonym",
            "first synonym",
        ],
    );
    lab.add(
        "a.ms.csv",
        &ms_csv(&[(43, 100.0), (58, 30.0)]),
        "ms-ei",
        "compound alpha",
        &["--tag", "solvent", "--formula", "C3H6O"],
    );
    lab.add(
        "b.csv",
        &ir_csv(&[(1050.0, 0.8, 12.0)]),
        "ir",
        "compound beta",
        &[
            "--tag",
            "reagent",
            "--formula",
            "C2H6O",
            "--note",
            "kept cold",
        ],
    );
    lab
}

fn found(lab: &Lab, query: &str) -> BTreeSet<(String, String)> {
    lab.json(&["find", query])
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["name"].as_str().unwrap().to_string(),
                r["technique"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn set(items: &[(&str, &str)]) -> BTreeSet<(String, String)> {
    items
        .iter()
        .map(|(a, b)| (a.to_string(), b.to_string()))
        .collect()
}

#[test]
fn find_matches_words_and_fields() {
    let lab = lab();
    let alpha = set(&[("compound alpha", "ir"), ("compound alpha", "ms-ei")]);
    assert_eq!(found(&lab, "alpha"), alpha);
    assert_eq!(found(&lab, "tag:solvent"), alpha);
    assert_eq!(
        found(&lab, "formula:C2H6O"),
        set(&[("compound beta", "ir")])
    );
    assert_eq!(
        found(&lab, "synonym:first"),
        set(&[("compound alpha", "ir")])
    );
    assert_eq!(found(&lab, "note:cold"), set(&[("compound beta", "ir")]));
    assert_eq!(
        found(&lab, "tag:solvent AND technique:ms-ei"),
        set(&[("compound alpha", "ms-ei")])
    );
    assert_eq!(found(&lab, "compound").len(), 3);
}

#[test]
fn find_json_rows_carry_ids_and_metadata() {
    let lab = lab();
    let rows = lab.json(&["find", "beta"]);
    let rows = rows.as_array().unwrap();
    assert_eq!(rows.len(), 1);
    assert_eq!(
        keys(&rows[0]),
        [
            "cas",
            "compound_id",
            "formula",
            "name",
            "relevance",
            "spectrum_id",
            "status",
            "technique"
        ]
    );
    // compound beta was the third spectrum added to a fresh library.
    assert_eq!(rows[0]["spectrum_id"], 3);
    assert_eq!(rows[0]["formula"], "C2H6O");
    assert_eq!(rows[0]["status"], "pending");
    assert!(rows[0]["relevance"].as_f64().unwrap() > 0.0);
}

#[test]
fn find_top_limits_the_rows() {
    let lab = lab();
    let rows = lab.json(&["find", "compound", "--top", "2"]);
    assert_eq!(rows.as_array().unwrap().len(), 2);
}

#[test]
fn find_with_no_match_says_so() {
    let lab = lab();
    let out = lab.ok(&["find", "nosuchword"]);
    assert!(out.contains("nothing matches 'nosuchword'"), "{out}");
    assert_eq!(lab.json(&["find", "nosuchword"]), serde_json::json!([]));
}

#[test]
fn find_human_output_is_a_table() {
    let lab = lab();
    let out = lab.ok(&["find", "beta"]);
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines.len(), 2, "{out}");
    for word in [
        "relevance",
        "id",
        "technique",
        "compound",
        "formula",
        "cas",
        "status",
    ] {
        assert!(lines[0].split_whitespace().any(|w| w == word), "{out}");
    }
    assert!(
        lines[1].contains("compound beta") && lines[1].contains("C2H6O"),
        "{out}"
    );
}

#[test]
fn a_malformed_query_is_refused_with_a_hint() {
    let lab = lab();
    let text = lab.refuses(&["find", "name:("], 3);
    assert!(text.contains("'name:('"), "{text}");
    assert!(hint(&text).contains("AND"), "{text}");
}

/// Holds tantivy's writer lock on a library's text index (an exclusive `flock` on
/// `.tantivy-writer.lock`, as another process writing it would) until dropped.
struct IndexWriterHeld {
    _lock: std::fs::File,
}

impl IndexWriterHeld {
    fn on(lab: &Lab) -> IndexWriterHeld {
        use std::os::fd::AsRawFd;
        let file = std::fs::OpenOptions::new()
            .create(true)
            .truncate(false)
            .write(true)
            .open(lab.library().join("text-index/.tantivy-writer.lock"))
            .unwrap();
        // SAFETY: flock on a descriptor this File owns (BSD locks, flock(2)).
        let rc = unsafe { libc::flock(file.as_raw_fd(), libc::LOCK_EX | libc::LOCK_NB) };
        assert_eq!(rc, 0, "the writer lock was free");
        IndexWriterHeld { _lock: file }
    }
}

#[test]
fn find_says_when_the_text_index_is_behind() {
    let lab = lab();
    let out = lab.run(&["find", "gamma"]);
    assert!(String::from_utf8_lossy(&out.stderr).is_empty());
    let held = IndexWriterHeld::on(&lab);
    // Stored in the database, but the index cannot take it while another writer holds it.
    lab.add(
        "g.csv",
        &ir_csv(&[(1600.0, 0.8, 10.0)]),
        "ir",
        "compound gamma",
        &[],
    );
    let out = lab.run(&["find", "gamma"]);
    assert!(out.status.success());
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stdout.contains("nothing matches 'gamma' in the text index, which is behind"),
        "{stdout}"
    );
    assert!(
        stderr.contains("warning: the text index is behind the library"),
        "{stderr}"
    );
    // Also with --json (the warning on stderr, the list on stdout).
    let out = lab.run(&["find", "gamma", "--json"]);
    assert!(String::from_utf8_lossy(&out.stderr).contains("text index is behind"));
    drop(held);
    // The next command rebuilds it, and the answer needs no warning.
    let out = lab.run(&["find", "gamma"]);
    assert!(String::from_utf8_lossy(&out.stderr).is_empty());
    assert!(String::from_utf8_lossy(&out.stdout).contains("compound gamma"));
}

#[test]
fn numeric_metadata_answers_ranges_and_an_unknown_field_is_refused() {
    // Retention indices set on the command line and in a manifest (common practice: GC
    // retention indices in the hundreds to thousands).
    let lab = lab();
    lab.add(
        "r1.csv",
        &ms_csv(&[(91, 100.0), (92, 60.0)]),
        "ms-ei",
        "compound gamma",
        &["--set", "ri=763.1578947368421"],
    );
    lab.add(
        "r2.csv",
        &ms_csv(&[(105, 100.0), (77, 40.0)]),
        "ms-ei",
        "compound delta",
        &["--set", "ri=905"],
    );
    let names = |q: &str| -> BTreeSet<String> {
        lab.json(&["find", q])
            .as_array()
            .unwrap()
            .iter()
            .map(|r| r["name"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(
        names("ri:[700 TO 800]"),
        BTreeSet::from(["compound gamma".into()])
    );
    assert_eq!(
        names("ri:[900 TO *]"),
        BTreeSet::from(["compound delta".into()])
    );
    assert_eq!(names("ri:[700 TO 1000]").len(), 2);
    // A field no spectrum has: an error naming the fields there are, not "nothing matches".
    let text = lab.refuses(&["find", "rt:[1 TO 2]"], 3);
    assert!(text.contains("no spectrum has a field 'rt'"), "{text}");
    assert!(text.contains("extra columns: ri"), "{text}");
    assert!(!hint(&text).is_empty());
    // The same refusal in a search's --where.
    lab.write("u.csv", ms_csv(&[(91, 100.0), (92, 60.0)]));
    let text = lab.refuses(
        &["search", "u.csv", "-t", "ms-ei", "--where", "rt:[1 TO 2]"],
        3,
    );
    assert!(text.contains("no spectrum has a field 'rt'"), "{text}");
}
