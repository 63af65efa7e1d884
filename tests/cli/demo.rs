use crate::util::{Lab, csv_rows, seed};

#[test]
fn demo_finds_every_example_unknown_at_rank_1() {
    let unknowns = csv_rows(&seed().join("unknowns").join("manifest.csv"));
    let n = unknowns.len();
    assert!(n > 0);
    let lab = Lab::empty();
    let out = lab.ok(&["demo", "--top", "3"]);
    assert!(
        out.contains(&format!(
            "{n} of {n} example unknowns have the expected compound at rank 1"
        )),
        "{out}"
    );
    for row in &unknowns {
        assert!(
            out.contains(&format!("== {} (", row["file"])),
            "no section for {}",
            row["file"]
        );
    }
    // The demo builds its library elsewhere; the lab's --library stays absent.
    assert!(!lab.library().exists());
}

#[test]
fn demo_keep_leaves_a_library_with_every_seed_spectrum() {
    let lab = Lab::empty();
    let kept = lab.path("kept");
    lab.ok(&["demo", "--top", "1", "--keep", kept.to_str().unwrap()]);
    let n = csv_rows(&seed().join("manifest.csv")).len();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_whorl"))
        .arg("--library")
        .arg(&kept)
        .args(["list", "--json"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let list: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(list.as_array().unwrap().len(), n);
}

#[test]
fn demo_with_a_missing_seed_folder_names_it() {
    let lab = Lab::empty();
    let text = lab.fails(&["demo", "--seed", "no-such-seed"], 3);
    assert!(text.contains("no-such-seed"), "{text}");
    assert!(!crate::util::hint(&text).is_empty());
}
