//! `whorl compound`: one substance stored under two compound rows, found, merged with a
//! reason, and then seen as one by `identify`, `log` and `check`.

use serde_json::Value;

use crate::util::{Lab, seed};

/// The seed library without its toluene 13C spectrum, imported and signed off; then that
/// spectrum added by hand as "Toluene" without its CAS RN, as in the case reported in issue
/// 16. Returns the lab and the id of the hand-added spectrum.
fn toluene_twice() -> (Lab, i64) {
    let lab = Lab::new();
    let manifest = std::fs::read_to_string(seed().join("manifest.csv")).unwrap();
    let mut lines = manifest.lines();
    let mut kept = format!("{}\n", lines.next().unwrap());
    for line in lines {
        if line.starts_with("spectra/toluene.nmr-13c.csv,") {
            continue;
        }
        // Absolute paths: the manifest lives in the lab folder, the spectra in the seed.
        kept.push_str(&format!("{}/{line}\n", seed().display()));
    }
    let m = lab.write("m.csv", kept);
    lab.ok(&["import", m.to_str().unwrap()]);
    let c13 = seed().join("spectra/toluene.nmr-13c.csv");
    let out = lab.run(&[
        "add",
        c13.to_str().unwrap(),
        "--technique",
        "nmr-13c",
        "--name",
        "Toluene",
        "--solvent",
        "CDCl3",
        "--json",
    ]);
    assert!(out.status.success(), "{out:?}");
    let stderr = String::from_utf8_lossy(&out.stderr);
    let added: Value = serde_json::from_slice(&out.stdout).unwrap();
    let id = added["id"]
        .as_i64()
        .or_else(|| added["spectrum_id"].as_i64())
        .unwrap_or_else(|| panic!("no spectrum id in {added}"));
    lab.approve_all();
    // The new compound takes the name of an existing one: the warning says how to merge.
    assert!(
        stderr.contains("has the same name") && stderr.contains("whorl compound merge"),
        "{stderr}"
    );
    (lab, id)
}

/// The rows of a JSON array named toluene, in any case.
fn toluene_rows(rows: &Value) -> Vec<Value> {
    rows.as_array()
        .unwrap()
        .iter()
        .filter(|c| c["name"].as_str().unwrap().eq_ignore_ascii_case("toluene"))
        .cloned()
        .collect()
}

fn toluenes(lab: &Lab) -> Vec<Value> {
    toluene_rows(&lab.json(&["compound", "list"]))
}

fn identify(lab: &Lab) -> Value {
    // u03: toluene's IR with weak bands missing, noise, semicolons and decimal commas.
    let ir = seed().join("unknowns/u03.ir.csv");
    let c13 = seed().join("spectra/toluene.nmr-13c.csv");
    lab.json(&[
        "identify",
        "--ir",
        ir.to_str().unwrap(),
        "--nmr-13c",
        c13.to_str().unwrap(),
        "--solvent",
        "CDCl3",
        "--top",
        "5",
    ])
}

fn fused_toluenes(report: &Value) -> Vec<Value> {
    toluene_rows(&report["fusion"]["compounds"])
}

#[test]
fn two_toluene_rows_disagree_until_merged_then_identify_sees_one_compound() {
    let (lab, c13_id) = toluene_twice();
    let rows = toluenes(&lab);
    assert_eq!(rows.len(), 2, "{rows:?}");
    // The seed's toluene keeps its CAS RN key; the hand-added one is keyed by its name.
    let (with_cas, by_name) = if rows[0]["key"].as_str().unwrap().starts_with("cas:") {
        (&rows[0], &rows[1])
    } else {
        (&rows[1], &rows[0])
    };
    assert_eq!(with_cas["key"], "cas:108-88-3");
    assert_eq!(by_name["key"], "name:toluene");
    let (keep, away) = (
        with_cas["id"].as_i64().unwrap(),
        by_name["id"].as_i64().unwrap(),
    );
    let show = lab.json(&["compound", "show", &keep.to_string()]);
    assert_eq!(show["same_name"], serde_json::json!([away]));

    // Before the merge each row has one technique: both are listed, each missing the other.
    let before = identify(&lab);
    let listed = fused_toluenes(&before);
    assert_eq!(listed.len(), 2, "{}", before["fusion"]);
    for c in &listed {
        assert_eq!(c["missing"].as_array().unwrap().len(), 1, "{c}");
        assert!(!c["disagreements"].as_array().unwrap().is_empty(), "{c}");
    }

    // A merge needs a reason; with one it moves the spectrum and is in the trail.
    let err = lab.fails(
        &[
            "compound",
            "merge",
            &away.to_string(),
            &keep.to_string(),
            "--reason",
            " ",
        ],
        3,
    );
    assert!(err.contains("needs a reason"), "{err}");
    let merge = lab.json(&[
        "compound",
        "merge",
        &away.to_string(),
        &keep.to_string(),
        "--reason",
        "the same toluene; the 13C spectrum was added without its CAS RN",
    ]);
    assert_eq!(merge["spectra"], serde_json::json!([c13_id]));
    let rows = toluenes(&lab);
    let merged = rows.iter().find(|c| c["id"] == away).unwrap();
    assert_eq!(merged["merged_into"], keep);
    // `show` names the compound the spectrum belongs to now, not the one its revision named.
    let shown = lab.json(&["show", &c13_id.to_string()]);
    assert_eq!(
        shown["spectrum"]["compound_id"], keep,
        "{}",
        shown["spectrum"]
    );

    // After: one toluene, first by both techniques, nothing missing, no disagreement.
    let after = identify(&lab);
    let listed = fused_toluenes(&after);
    assert_eq!(listed.len(), 1, "{}", after["fusion"]);
    let t = &listed[0];
    assert_eq!(t["compound_id"], keep);
    assert_eq!(t["rank"], 1, "{t}");
    // Both lists are in the JSON, empty.
    assert_eq!(t["missing"], serde_json::json!([]));
    assert_eq!(t["disagreements"], serde_json::json!([]));
    for e in t["evidence"].as_array().unwrap() {
        assert_eq!(e["rank"], 1, "{e}");
    }
    let warnings = after["fusion"]["warnings"].as_array().unwrap();
    assert!(
        warnings.iter().all(|w| w["code"] != "techniques-disagree"),
        "{warnings:?}"
    );

    // The spectrum's own log shows the merge that moved it; the library still checks clean.
    let log = lab.json(&["log", &c13_id.to_string()]);
    let actions: Vec<&str> = log
        .as_array()
        .unwrap()
        .iter()
        .map(|e| e["action"].as_str().unwrap())
        .collect();
    assert!(actions.contains(&"compound-merge"), "{actions:?}");
    assert_eq!(actions.first(), Some(&"add"), "{actions:?}");
    let text = lab.ok(&["log", &c13_id.to_string()]);
    assert!(text.contains(&format!("into compound {keep}")), "{text}");
    lab.ok(&["check"]);
}

#[test]
fn a_spectrum_of_the_target_compound_sees_a_merge_into_its_compound_in_its_log() {
    let (lab, c13_id) = toluene_twice();
    let ir_id = lab
        .json(&["list"])
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == "toluene" && r["technique"] == "ir")
        .map(|r| r["id"].as_i64().unwrap())
        .unwrap();
    let log_before = lab.json(&["log", &ir_id.to_string()]);
    let rows = toluenes(&lab);
    let keep = rows.iter().find(|c| c["key"] == "cas:108-88-3").unwrap()["id"]
        .as_i64()
        .unwrap();
    let away = rows.iter().find(|c| c["id"] != keep).unwrap()["id"]
        .as_i64()
        .unwrap();
    lab.ok(&[
        "compound",
        "merge",
        &away.to_string(),
        &keep.to_string(),
        "--reason",
        "one substance",
    ]);
    let log_after = lab.json(&["log", &ir_id.to_string()]);
    assert_eq!(
        log_after.as_array().unwrap().len(),
        log_before.as_array().unwrap().len() + 1
    );
    assert_eq!(
        log_after.as_array().unwrap().last().unwrap()["action"],
        "compound-merge"
    );
    // An unrelated spectrum's log does not show it.
    let other = lab
        .json(&["list"])
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == "methanol")
        .map(|r| r["id"].as_i64().unwrap())
        .unwrap();
    let log = lab.json(&["log", &other.to_string()]);
    assert!(
        log.as_array()
            .unwrap()
            .iter()
            .all(|e| e["action"] != "compound-merge"),
        "{log}"
    );
    assert!(c13_id != ir_id);
}
