use crate::util::{Lab, hint, ir_csv, ir_micrometre_csv, nmr_csv};

/// A carbonyl-like band and a C-H-like band; any two bands would do.
const BANDS: [(f64, f64, f64); 2] = [(1715.0, 0.8, 10.0), (2950.0, 0.4, 15.0)];

#[test]
fn add_prints_the_id_of_a_new_spectrum() {
    let lab = Lab::new();
    // Ids count from 1 in a fresh library.
    assert_eq!(
        lab.add("a.csv", &ir_csv(&BANDS), "ir", "compound a", &[]),
        1
    );
    let other = ir_csv(&[(1050.0, 0.7, 12.0)]);
    assert_eq!(lab.add("b.csv", &other, "ir", "compound b", &[]), 2);
}

#[test]
fn adding_the_same_file_again_says_already_present_with_the_same_id() {
    let lab = Lab::new();
    let id = lab.add("a.csv", &ir_csv(&BANDS), "ir", "compound a", &[]);
    let before = lab.state();
    let out = lab.run(&["add", "a.csv", "--technique", "ir", "--name", "compound a"]);
    assert!(out.status.success());
    assert_eq!(String::from_utf8_lossy(&out.stdout).trim(), id.to_string());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("already present"), "{err}");
    assert_eq!(
        lab.state(),
        before,
        "an already-present spectrum wrote something"
    );
}

#[test]
fn the_same_points_under_another_file_name_are_already_present() {
    let lab = Lab::new();
    let id = lab.add("a.csv", &ir_csv(&BANDS), "ir", "compound a", &[]);
    let json = lab.json(&[
        "add",
        lab.write("copy.csv", ir_csv(&BANDS)).to_str().unwrap(),
        "--technique",
        "ir",
        "--name",
        "compound a",
    ]);
    assert_eq!(json["outcome"], "already_present");
    assert_eq!(json["spectrum_id"], id);
}

#[test]
fn add_json_says_what_was_added() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&BANDS));
    let json = lab.json(&["add", "a.csv", "-t", "ir", "--name", "compound a"]);
    assert_eq!(json["outcome"], "added");
    assert_eq!(json["spectrum_id"], 1);
    assert_eq!(json["compound_id"], 1);
}

#[test]
fn add_stores_formula_cas_tags_synonyms_and_solvent() {
    let lab = Lab::new();
    let id = lab.add(
        "n.csv",
        &nmr_csv(&[(2.17, 300.0, 0.01)]),
        "nmr-1h",
        "compound n",
        &[
            // Hill order puts C first, then H, then the rest alphabetically (Hill, J. Am.
            // Chem. Soc. 1900); a formula given in another order is stored in Hill order.
            "--formula",
            "OH6C3",
            // 67-64-1: digits 6764 from the right 4*1 + 6*2 + 7*3 + 6*4 = 61, check digit 1
            // (the CAS check-digit rule).
            "--cas",
            "67-64-1",
            "--tag",
            "solvent",
            "--tag",
            "voc",
            "--synonym",
            "other name",
            "--synonym",
            "third name",
            "--solvent",
            "cdcl3",
        ],
    );
    let show = lab.json(&["show", &id.to_string()]);
    let m = &show["spectrum"]["metadata"];
    assert_eq!(m["name"], "compound n");
    assert_eq!(m["formula"], "C3H6O");
    assert_eq!(m["cas"], "67-64-1");
    assert_eq!(m["tags"], serde_json::json!(["solvent", "voc"]));
    assert_eq!(
        m["synonyms"],
        serde_json::json!(["other name", "third name"])
    );
    // Solvent names are stored in their usual spelling whatever case was typed.
    assert_eq!(m["solvent"], "CDCl3");
    assert_eq!(show["spectrum"]["technique"], "nmr-1h");
    assert_eq!(show["spectrum"]["submitted_by"], "t.tester");
}

#[test]
fn add_refuses_a_cas_number_with_a_wrong_check_digit() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&BANDS));
    // 67-64-1 passes (see above), so 67-64-2 cannot.
    let text = lab.refuses(
        &[
            "add", "a.csv", "-t", "ir", "--name", "x", "--cas", "67-64-2",
        ],
        3,
    );
    assert!(text.contains("67-64-2"), "{text}");
    assert!(text.contains("check digit"), "{text}");
    assert!(!hint(&text).is_empty());
}

#[test]
fn add_converts_a_wavelength_file_given_with_x_unit_um() {
    let lab = Lab::new();
    // A band at 5.83 um is at 1e4 / 5.83 = 1715.3 cm-1 (wavenumber = 1 / wavelength).
    let text = ir_micrometre_csv(&[(5.83, 0.8, 0.03)]);
    let id = lab.add("um.csv", &text, "ir", "compound um", &["--x-unit", "um"]);
    let show = lab.json(&["show", &id.to_string()]);
    assert_eq!(show["spectrum"]["x_unit"], "um");
    // The raw points are kept as given: one per data line.
    assert_eq!(show["spectrum"]["points"], text.lines().count() - 1);
    let peaks = show["peaks"].as_array().unwrap();
    let expected = 1e4 / 5.83;
    assert!(
        peaks
            .iter()
            .any(|p| (p["x"].as_f64().unwrap() - expected).abs() <= 2.0),
        "no peak within one grid step (2 cm-1) of {expected}: {peaks:?}"
    );
}

#[test]
fn spectra_with_the_same_cas_belong_to_one_compound() {
    let lab = Lab::new();
    let a = lab.add(
        "a.csv",
        &ir_csv(&BANDS),
        "ir",
        "compound a",
        &["--cas", "67-64-1"],
    );
    let b = lab.add(
        "b.csv",
        &nmr_csv(&[(2.17, 300.0, 0.01)]),
        "nmr-1h",
        "compound a",
        &["--cas", "67-64-1"],
    );
    let c = lab.add(
        "c.csv",
        &ir_csv(&[(1050.0, 0.7, 12.0)]),
        "ir",
        "compound c",
        &[],
    );
    let compound =
        |id: i64| lab.json(&["show", &id.to_string()])["spectrum"]["compound_id"].clone();
    assert_eq!(compound(a), compound(b));
    assert_ne!(compound(a), compound(c));
    assert_eq!(lab.json(&["stats"])["compounds"], 2);
}
