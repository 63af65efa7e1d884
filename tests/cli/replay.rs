//! Saved searches and their replay.

use crate::util::{Lab, ir_csv};

fn lab_with_two() -> Lab {
    let lab = Lab::new();
    for (name, band) in [("alpha ketone", 1715.0), ("beta ester", 1740.0)] {
        let file = lab.write(
            &format!("{name}.csv"),
            ir_csv(&[(band, 0.9, 10.0), (2960.0, 0.3, 15.0)]),
        );
        let id = lab.ok(&[
            "add",
            file.to_str().unwrap(),
            "-t",
            "ir",
            "--name",
            name,
            "--by",
            "s.submitter",
        ]);
        lab.ok(&["review", id.trim(), "--approve", "--by", "r.reviewer"]);
    }
    lab.write("u.csv", ir_csv(&[(1716.0, 0.8, 10.0), (2960.0, 0.3, 15.0)]));
    lab
}

#[test]
fn a_replay_of_an_unchanged_library_gives_the_same_hits() {
    let lab = lab_with_two();
    lab.ok(&["search", "u.csv", "-t", "ir", "--save", "saved.json"]);
    let saved: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(lab.path("saved.json")).unwrap()).unwrap();
    for key in [
        "tool_version",
        "library",
        "unknown",
        "parameters",
        "hits",
        "caution",
    ] {
        assert!(saved.get(key).is_some(), "{key}");
    }
    assert_eq!(
        saved["unknown"]["sha256"],
        whorl::spectrum::sha256_hex(&std::fs::read(lab.path("u.csv")).unwrap())
    );
    let r = lab.json(&["replay", "saved.json"]);
    assert_eq!(r["same"], true, "{r}");
    assert_eq!(r["events_since"].as_array().unwrap().len(), 0);
    assert_eq!(r["state_hash_then"], r["state_hash_now"], "{r}");

    // A search saved when the library's state hash was still called `fingerprint` replays.
    let mut old = saved.clone();
    let hash = old["library"]
        .as_object_mut()
        .unwrap()
        .remove("state_hash")
        .expect("the saved search names the library's state hash");
    old["library"]["fingerprint"] = hash.clone();
    std::fs::write(lab.path("old.json"), old.to_string()).unwrap();
    let r = lab.json(&["replay", "old.json"]);
    assert_eq!(r["same"], true, "{r}");
    assert_eq!(r["state_hash_then"], hash, "{r}");
}

#[test]
fn a_replay_after_a_change_lists_the_difference_and_the_events_that_explain_it() {
    let lab = lab_with_two();
    lab.ok(&["search", "u.csv", "-t", "ir", "--save", "saved.json"]);
    lab.ok(&["withdraw", "1", "--reason", "recalled", "--by", "q.manager"]);
    let out = lab.run(&["replay", "saved.json"]);
    assert_eq!(out.status.code(), Some(5));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("the hits differ") && text.contains("rank 1: was spectrum 1"),
        "{text}"
    );
    assert!(text.contains("withdraw spectrum:1 by q.manager"), "{text}");
}

#[test]
fn a_saved_search_replays_without_its_file_and_an_older_record_needs_it_unchanged() {
    let lab = lab_with_two();
    lab.ok(&["search", "u.csv", "-t", "ir", "--save", "saved.json"]);
    let text = std::fs::read_to_string(lab.path("saved.json")).unwrap();
    let saved: serde_json::Value = serde_json::from_str(&text).unwrap();
    // The raw points are kept, hashed as stored raw points are: the SHA-256 of each x then y
    // as little-endian f64 (the library's canonical encoding), here recomputed by hand.
    let points = hex_decode(saved["unknown"]["points"].as_str().unwrap());
    assert_eq!(points.len(), 1801 * 16);
    let first_x = f64::from_le_bytes(points[..8].try_into().unwrap());
    assert_eq!(first_x, 4000.0);
    assert_eq!(
        saved["unknown"]["points_sha256"],
        whorl::spectrum::sha256_hex(&points)
    );
    // `search --json` does not carry them.
    let shown = lab.json(&["search", "u.csv", "-t", "ir"]);
    assert!(shown["unknown"].get("points").is_none());
    // The unknown's file gone (or changed), the record replays from its points, from
    // anywhere.
    std::fs::remove_file(lab.path("u.csv")).unwrap();
    let elsewhere = tempfile::tempdir().unwrap();
    let moved = elsewhere.path().join("saved.json");
    std::fs::write(&moved, &text).unwrap();
    let r = lab.json(&["replay", moved.to_str().unwrap()]);
    assert_eq!(r["same"], true, "{r}");
    // Edited points are refused, naming the record as edited.
    let mut forged = saved.clone();
    let mut bytes = points.clone();
    bytes[8] ^= 1;
    forged["unknown"]["points"] = hex_encode(&bytes).into();
    lab.write("forged.json", forged.to_string());
    let err = lab.fails(&["replay", "forged.json"], 3);
    assert!(err.contains("do not hash to the value it records"), "{err}");
    // A record saved before points were kept needs the file, unchanged.
    let mut old = saved.clone();
    let unknown = old["unknown"].as_object_mut().unwrap();
    unknown.remove("points");
    unknown.remove("points_sha256");
    lab.write("old.json", old.to_string());
    let err = lab.fails(&["replay", "old.json"], 3);
    assert!(
        err.contains("cannot be read") && err.contains("saved before"),
        "{err}"
    );
    lab.write("u.csv", ir_csv(&[(1740.0, 0.8, 10.0)]));
    let err = lab.fails(&["replay", "old.json"], 3);
    assert!(err.contains("the unknown changed"), "{err}");
    lab.write("u.csv", ir_csv(&[(1716.0, 0.8, 10.0), (2960.0, 0.3, 15.0)]));
    assert_eq!(lab.json(&["replay", "old.json"])["same"], true);
}

fn hex_decode(text: &str) -> Vec<u8> {
    (0..text.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&text[i..i + 2], 16).unwrap())
        .collect()
}

fn hex_encode(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
