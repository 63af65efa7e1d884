use crate::util::{Lab, ir_csv, ms_csv, nmr_csv};

fn is_sha256_hex(s: &str) -> bool {
    s.len() == 64 && s.bytes().all(|b| b.is_ascii_hexdigit())
}

#[test]
fn stats_counts_spectra_per_technique_and_status() {
    let lab = Lab::new();
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "compound a",
        &[],
    );
    lab.add(
        "a.ms.csv",
        &ms_csv(&[(43, 100.0)]),
        "ms-ei",
        "compound a",
        &[],
    );
    lab.add(
        "b.csv",
        &ir_csv(&[(1050.0, 0.8, 12.0)]),
        "ir",
        "compound b",
        &[],
    );
    let stats = lab.json(&["stats"]);
    assert_eq!(stats["spectra"]["ir"]["pending"], 2);
    assert_eq!(stats["spectra"]["ms-ei"]["pending"], 1);
    assert!(stats["spectra"].get("raman").is_none());
    // Without a CAS RN a compound is known by its name, so "compound a" is one compound.
    assert_eq!(stats["compounds"], 2);
    let techniques: Vec<&str> = stats["recipes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["technique"].as_str().unwrap())
        .collect();
    // One recipe for every technique whorl knows, in its own order.
    let known: Vec<&str> = whorl::technique::Technique::ALL
        .iter()
        .map(|t| t.name())
        .collect();
    assert_eq!(techniques, known);
    assert!(is_sha256_hex(stats["state_hash"].as_str().unwrap()));
}

#[test]
fn the_state_hash_changes_after_an_add_and_is_stable_otherwise() {
    let lab = Lab::new();
    let empty = lab.state_hash();
    assert_eq!(lab.state_hash(), empty, "two stats calls disagree");

    let id = lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "compound a",
        &[],
    );
    let one = lab.state_hash();
    assert_ne!(one, empty);

    // Reading, searching, re-adding the same points and a refused add change nothing.
    lab.ok(&["list"]);
    lab.ok(&["show", &id.to_string()]);
    lab.ok(&["find", "compound"]);
    lab.ok(&["search", "a.csv", "-t", "ir"]);
    lab.ok(&["add", "a.csv", "-t", "ir", "--name", "compound a"]);
    lab.write("bad.csv", "x,y\n");
    lab.fails(&["add", "bad.csv", "-t", "ir", "--name", "bad"], 3);
    assert_eq!(lab.state_hash(), one);

    lab.add(
        "n.csv",
        &nmr_csv(&[(2.1, 100.0, 0.01)]),
        "nmr-1h",
        "compound n",
        &[],
    );
    let two = lab.state_hash();
    assert_ne!(two, one);
    assert_ne!(two, empty);
}

#[test]
fn the_same_content_gives_the_same_state_hash_in_two_libraries() {
    // The state hash names the searchable content and the recipes, not the folder or the
    // time of import.
    let first = Lab::new();
    let second = Lab::new();
    assert_eq!(first.state_hash(), second.state_hash());
    let spectrum = ir_csv(&[(1715.0, 0.8, 10.0)]);
    for lab in [&first, &second] {
        lab.add(
            "a.csv",
            &spectrum,
            "ir",
            "compound a",
            &["--tag", "solvent"],
        );
    }
    assert_eq!(first.state_hash(), second.state_hash());
    // Different metadata is different content.
    let third = Lab::new();
    third.add(
        "a.csv",
        &spectrum,
        "ir",
        "compound a",
        &["--tag", "reagent"],
    );
    assert_ne!(third.state_hash(), first.state_hash());
}

#[test]
fn stats_prints_the_full_state_hash_and_a_row_per_technique() {
    let lab = Lab::new();
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "compound a",
        &[],
    );
    let out = lab.ok(&["stats"]);
    let state_hash = lab.state_hash();
    assert!(
        out.lines()
            .any(|l| l == format!("state hash   {state_hash}")),
        "{out}"
    );
    assert!(
        out.lines()
            .any(|l| l.split_whitespace().eq(["compounds", "1"])),
        "{out}"
    );
    let ir = out
        .lines()
        .find(|l| l.starts_with("ir "))
        .unwrap_or_else(|| panic!("no ir row in\n{out}"));
    // pending, verified, withdrawn
    assert!(
        ir.split_whitespace().skip(1).take(3).eq(["1", "0", "0"]),
        "{ir}"
    );
    for t in ["raman ", "ms-ei ", "nmr-1h "] {
        assert!(out.lines().any(|l| l.starts_with(t)), "no {t}row in\n{out}");
    }
}
