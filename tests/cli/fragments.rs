//! `whorl fragments`, and the warnings an EI spectrum gets at import when its peaks do not fit
//! its formula.

use serde_json::Value;

use crate::util::Lab;

fn formulas_at(v: &Value, mz: u64) -> Vec<String> {
    v["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["mz"] == mz)
        .unwrap()["fragments"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["formula"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn propanal_methyl_and_ethyl_or_formyl() {
    // Common practice: CH3+ at m/z 15; C2H5+ and CHO+ both at m/z 29 for propanal C3H6O.
    let v = Lab::empty().json(&["fragments", "C3H6O", "--mz", "15,29,43"]);
    assert_eq!(v["formula"], "C3H6O");
    assert_eq!(v["nominal_mass"], 58);
    assert_eq!(formulas_at(&v, 15), ["CH3"]);
    // CHO (29.0027) lies closer to 29 than C2H5 (29.0391) (AME2016 masses, arithmetic).
    assert_eq!(formulas_at(&v, 29), ["CHO", "C2H5"]);
    assert_eq!(formulas_at(&v, 43), ["C2H3O"]);
}

#[test]
fn human_output_lists_every_mz() {
    let out = Lab::empty().ok(&["fragments", "C3H6O", "--mz", "29,7"]);
    assert!(out.contains("CHO"), "{out}");
    assert!(out.contains("C2H5"), "{out}");
    // m/z 7 fits nothing in C3H6O (no composition of C, H, O weighs 7 with at most 6 H).
    assert!(out.contains("(none)"), "{out}");
}

#[test]
fn bad_mz_lists_exit_3() {
    let lab = Lab::empty();
    for bad in ["15,abc", "", "29.5", "0"] {
        let err = lab.fails(&["fragments", "C3H6O", "--mz", bad], 3);
        assert!(err.contains("m/z list"), "{bad}: {err}");
        assert!(err.contains("hint:"), "{bad}: {err}");
    }
    let err = lab.fails(&["fragments", "C3H6Hg", "--mz", "15"], 3);
    assert!(err.contains("Hg"), "{err}");
}

/// Adds an EI spectrum with a formula; returns (stdout, stderr).
fn add_ms(lab: &Lab, file: &str, points: &str, formula: &str) -> (String, String) {
    lab.write(file, format!("mz,intensity\n{points}"));
    let name = format!("compound {formula}");
    let out = lab.run(&[
        "add",
        file,
        "-t",
        "ms-ei",
        "--name",
        &name,
        "--formula",
        formula,
    ]);
    assert!(out.status.success(), "{out:?}");
    (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

#[test]
fn add_warns_about_an_impossible_base_peak_and_stores_it() {
    let lab = Lab::new();
    // m/z 10 fits no sub-formula of C3H6O.
    let (id, err) = add_ms(&lab, "a.csv", "10,100\n29,40\n58,30\n", "C3H6O");
    assert!(
        err.contains("base peak at m/z 10 fits no sub-formula of C3H6O"),
        "{err}"
    );
    let shown = lab.json(&["show", id.trim()]);
    let warnings = shown["preparation_warnings"].as_array().unwrap();
    assert_eq!(warnings.len(), 1, "{shown}");
    assert!(warnings[0].as_str().unwrap().contains("m/z 10"));
    let text = lab.ok(&["show", id.trim()]);
    assert!(text.contains("base peak at m/z 10"), "{text}");
}

#[test]
fn add_warns_about_ions_above_the_molecular_ion() {
    let lab = Lab::new();
    // A 40 % peak at m/z 72 lies above propanal's 58 (+2 for isotope peaks).
    let (_, err) = add_ms(&lab, "b.csv", "29,100\n58,30\n72,40\n", "C3H6O");
    assert!(err.contains("m/z 72 (40 % of the base peak)"), "{err}");
    // A 2 % peak there is below the 5 % significance threshold.
    let (_, err) = add_ms(&lab, "c.csv", "29,100\n58,30\n72,2\n", "C3H6O");
    assert!(!err.contains("warning"), "{err}");
}

#[test]
fn plausible_spectra_get_no_warning() {
    let lab = Lab::new();
    // Bromoform CHBr3: base peak m/z 173 (CH79Br81Br+) and molecular ions 250-256 (common
    // practice); 173 is no sub-formula's nominal mass but an isotope peak of CHBr2 (171).
    let (_, err) = add_ms(
        &lab,
        "bromoform.csv",
        "91,15\n93,15\n171,48\n173,100\n175,48\n250,6\n252,18\n254,18\n256,6\n",
        "CHBr3",
    );
    assert!(!err.contains("warning"), "{err}");
    // Propanal with its usual ions (common practice: 29 base, 58 molecular ion).
    let (_, err) = add_ms(
        &lab,
        "p.csv",
        "15,12\n27,42\n28,65\n29,100\n57,12\n58,31\n",
        "C3H6O",
    );
    assert!(!err.contains("warning"), "{err}");
}

#[test]
fn import_prints_and_reports_the_warning() {
    let lab = Lab::new();
    lab.write("s/bad.csv", "mz,intensity\n10,100\n29,40\n");
    lab.write(
        "s/m.csv",
        "file,technique,name,formula\nbad.csv,ms-ei,propanal,C3H6O\n",
    );
    let out = lab.run(&["import", "s/m.csv"]);
    assert!(out.status.success(), "{out:?}");
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("m.csv:2 (bad.csv)"), "{err}");
    assert!(err.contains("base peak at m/z 10"), "{err}");
    lab.write("s/again.csv", "mz,intensity\n10,100\n29,40.1\n");
    lab.write(
        "s/m2.csv",
        "file,technique,name,formula\nagain.csv,ms-ei,propanal,C3H6O\n",
    );
    let v = lab.json(&["import", "s/m2.csv"]);
    assert_eq!(v["imported"], 1);
    assert!(
        v["warnings"][0]["warning"]
            .as_str()
            .unwrap()
            .contains("m/z 10"),
        "{v}"
    );
}
