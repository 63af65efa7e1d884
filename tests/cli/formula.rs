//! `whorl formula`: masses, IHD, nitrogen rule and isotope pattern; bad formulas exit 3.

use serde_json::Value;

use crate::util::Lab;

fn close(v: &Value, expected: f64, tol: f64) -> bool {
    (v.as_f64().unwrap() - expected).abs() <= tol
}

#[test]
fn caffeine_in_any_order() {
    // No library is needed: the command runs in an empty folder.
    let lab = Lab::empty();
    let v = lab.json(&["formula", "O2N4C8H10"]);
    assert_eq!(v["formula"], "C8H10N4O2");
    // CIAAW 2021 conventional weights: 8(12.011) + 10(1.008) + 4(14.007) + 2(15.999) = 194.194
    // (arithmetic); molmass 2026.1.8 gives 194.1910 with NIST's weights.
    assert!(close(&v["average_mass"], 194.194, 1e-9), "{v}");
    // molmass 2026.1.8 at test-writing time: monoisotopic 194.0803755792, pattern
    // M+1 10.3051, M+2 0.8925.
    assert!(close(&v["monoisotopic_mass"], 194.080376, 1e-6), "{v}");
    assert_eq!(v["nominal_mass"], 194);
    // Caffeine: two rings and four double bonds, IHD 6 (common practice).
    assert_eq!(v["ihd"], 6.0);
    assert_eq!(v["nitrogen_rule"]["nitrogens"], 4);
    assert_eq!(v["nitrogen_rule"]["nominal_mass_parity"], "even");
    assert_eq!(v["nitrogen_rule"]["consistent"], true);
    let iso = v["isotopes"].as_array().unwrap();
    let shifts: Vec<i64> = iso.iter().map(|p| p["shift"].as_i64().unwrap()).collect();
    assert_eq!(shifts, [0, 1, 2]);
    assert!(close(&iso[0]["relative"], 100.0, 0.0));
    assert!(close(&iso[1]["relative"], 10.3051, 1e-3), "{v}");
    assert!(close(&iso[2]["relative"], 0.8925, 1e-3), "{v}");
}

#[test]
fn pyridine_is_odd_with_one_nitrogen() {
    // Common practice: pyridine C5H5N, nominal mass 79 (odd) with one N, IHD 4.
    let v = Lab::empty().json(&["formula", "C5H5N"]);
    assert_eq!(v["nominal_mass"], 79);
    assert_eq!(v["ihd"], 4.0);
    assert_eq!(v["nitrogen_rule"]["nominal_mass_parity"], "odd");
    assert_eq!(v["nitrogen_rule"]["consistent"], true);
}

#[test]
fn bromoform_isotope_pattern() {
    // CHBr3: three bromines give M : M+2 about 1 : 3 (common practice); molmass 2026.1.8 at
    // test-writing time: M+2 291.8328 % of M.
    let v = Lab::empty().json(&["formula", "CHBr3"]);
    assert!(close(&v["isotopes"][2]["relative"], 291.8328, 1e-3), "{v}");
    assert_eq!(
        v["conventional_weights"],
        serde_json::json!(["Br", "C", "H"])
    );
}

#[test]
fn human_output_names_its_sources() {
    let out = Lab::empty().ok(&["formula", "C2H5"]);
    assert!(out.contains("monoisotopic mass  29.039125 u"), "{out}");
    assert!(out.contains("CIAAW 2021"), "{out}");
    assert!(out.contains("AME2016"), "{out}");
    assert!(out.contains("IUPAC 2009"), "{out}");
    // The ethyl radical: odd nominal mass without nitrogen.
    assert!(out.contains("IHD                0.5"), "{out}");
    assert!(
        out.contains("not possible for an even-electron neutral molecule"),
        "{out}"
    );
    assert!(out.contains("M 100.00   M+1 2.22"), "{out}");
}

#[test]
fn bad_formulas_exit_3_with_a_hint() {
    let lab = Lab::empty();
    for bad in ["C7H8+", "c7h8", "C(CH3)4", "Xx2", ""] {
        let err = lab.fails(&["formula", bad], 3);
        assert!(err.contains("is not valid"), "{bad}: {err}");
        assert!(err.contains("hint:"), "{bad}: {err}");
    }
}

#[test]
fn an_element_without_data_is_named_with_the_fix() {
    let err = Lab::empty().fails(&["formula", "C2H6Hg"], 3);
    assert!(err.contains("no atomic data for the element Hg"), "{err}");
    assert!(err.contains("src/chem/elements.rs"), "{err}");
}
