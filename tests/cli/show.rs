use crate::util::{Lab, hint, ir_csv, sha256_of};

const BANDS: [(f64, f64, f64); 2] = [(1715.0, 0.8, 10.0), (1200.0, 0.5, 12.0)];

#[test]
fn show_json_holds_the_record_peaks_and_events() {
    let lab = Lab::new();
    let id = lab.add(
        "a.csv",
        &ir_csv(&BANDS),
        "ir",
        "compound a",
        &["--source", "made in house", "--instrument", "bench one"],
    );
    let show = lab.json(&["show", &id.to_string()]);
    let s = &show["spectrum"];
    assert_eq!(s["id"], id);
    assert_eq!(s["technique"], "ir");
    assert_eq!(s["status"], "pending");
    assert_eq!(s["revision"], 1);
    assert_eq!(s["file_name"], "a.csv");
    // ir_csv writes 4000..400 cm-1 at 2 cm-1: 1801 points.
    assert_eq!(s["points"], 1801);
    assert_eq!(s["file_sha256"], sha256_of(&lab.path("a.csv")));
    assert_eq!(s["metadata"]["source"], "made in house");
    assert_eq!(s["metadata"]["instrument"], "bench one");
    // A Gaussian band peaks at its centre; the grid step is 2 cm-1.
    let peaks: Vec<f64> = show["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["x"].as_f64().unwrap())
        .collect();
    for (centre, _, _) in BANDS {
        assert!(
            peaks.iter().any(|x| (x - centre).abs() <= 2.0),
            "no peak at {centre}: {peaks:?}"
        );
    }
    let events = show["events"].as_array().unwrap();
    assert_eq!(events.len(), 1, "{events:?}");
    assert_eq!(events[0]["action"], "add");
    assert_eq!(events[0]["actor"], "t.tester");
    assert_eq!(events[0]["record"], format!("spectrum:{id}"));
}

#[test]
fn show_prints_the_record_for_people() {
    let lab = Lab::new();
    let id = lab.add(
        "a.csv",
        &ir_csv(&BANDS),
        "ir",
        "compound a",
        &["--formula", "C3H6O", "--tag", "solvent"],
    );
    let out = lab.ok(&["show", &id.to_string()]);
    let field = |name: &str| {
        out.lines()
            .find(|l| l.starts_with(name))
            .unwrap_or_else(|| panic!("no {name} line in\n{out}"))
            .to_string()
    };
    assert!(field("spectrum").contains(&format!("{id} (revision 1 of 1, pending)")));
    assert!(field("compound").contains("compound a"));
    assert!(field("formula").ends_with("C3H6O"));
    assert!(field("tags").ends_with("solvent"));
    assert!(field("file sha256").ends_with(&sha256_of(&lab.path("a.csv"))));
    assert!(field("submitted").ends_with("by t.tester"));
    assert!(out.contains("\npeaks ("), "{out}");
    assert!(out.contains("add by t.tester"), "{out}");
}

#[test]
fn show_of_a_missing_id_is_refused_with_a_hint() {
    let lab = Lab::new();
    lab.add("a.csv", &ir_csv(&BANDS), "ir", "compound a", &[]);
    let text = lab.refuses(&["show", "99"], 3);
    assert!(text.contains("99"), "{text}");
    assert!(hint(&text).contains("whorl list"), "{text}");
}
