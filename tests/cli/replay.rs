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
fn a_replay_refuses_a_changed_unknown() {
    let lab = lab_with_two();
    lab.ok(&["search", "u.csv", "-t", "ir", "--save", "saved.json"]);
    lab.write("u.csv", ir_csv(&[(1740.0, 0.8, 10.0)]));
    let err = lab.fails(&["replay", "saved.json"], 3);
    assert!(err.contains("the unknown changed"), "{err}");
}
