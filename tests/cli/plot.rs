//! `whorl plot`: spectra from the library and from files on one axis.

use crate::util::{Lab, ir_csv, unknown};

fn ids(lab: &Lab, technique: &str) -> Vec<(i64, String)> {
    lab.json(&["list", "--technique", technique])
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["id"].as_i64().unwrap(),
                r["name"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

#[test]
fn library_ids_and_files_share_one_axis() {
    let lab = Lab::seeded_with(&["ethyl acetate", "methyl acetate"]);
    let ir = ids(&lab, "ir");
    let (a, b) = (ir[0].0.to_string(), ir[1].0.to_string());
    let u = unknown("u01.ir.csv");
    let v = lab.json(&["plot", &a, &b, &u, "-o", "p.svg"]);
    assert_eq!(v["technique"], "ir");
    let spectra = v["spectra"].as_array().unwrap();
    assert_eq!(spectra.len(), 3);
    assert_eq!(spectra[0]["spectrum_id"], ir[0].0);
    assert_eq!(spectra[2]["file"], u.as_str());

    let svg = std::fs::read_to_string(lab.path("p.svg")).unwrap();
    assert!(svg.starts_with("<svg"));
    for (_, name) in &ir {
        assert!(svg.contains(name.as_str()), "legend lacks {name}");
    }
    assert!(svg.contains("u01.ir.csv"));
    assert!(svg.contains("wavenumber / cm"));
    // Three traces: one solid polyline, two dashed ones drawn as many short polylines.
    assert!(svg.matches("<polyline").count() > 50);
}

#[test]
fn two_mass_spectra_mirror_and_svg_can_go_to_stdout() {
    let lab = Lab::seeded_with(&["ethylbenzene", "o-xylene"]);
    let ms = ids(&lab, "ms-ei");
    let svg = lab.ok(&[
        "plot",
        &ms[0].0.to_string(),
        &ms[1].0.to_string(),
        "--svg",
        "-",
    ]);
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
    assert!(svg.contains("above: "));
    assert!(svg.contains("below: "));
    assert!(svg.contains("m/z present in both"));
}

#[test]
fn a_file_alone_needs_its_technique() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    let err = lab.fails(&["plot", "a.csv", "--svg", "p.svg"], 3);
    assert!(err.contains("hint: give it with --technique"), "{err}");
    lab.ok(&["plot", "a.csv", "-t", "ir", "--svg", "p.svg"]);
    assert!(lab.path("p.svg").is_file());
}

#[test]
fn bad_items_are_refused_with_a_reason() {
    let lab = Lab::seeded_with(&["ethyl acetate"]);
    let ir = ids(&lab, "ir")[0].0.to_string();
    let ms = ids(&lab, "ms-ei")[0].0.to_string();
    let err = lab.fails(&["plot", &ir, &ms, "--svg", "p.svg"], 3);
    assert!(
        err.contains("not ir") && err.contains("one plot holds one technique"),
        "{err}"
    );
    let err = lab.fails(&["plot", "9999", "--svg", "p.svg"], 3);
    assert!(err.contains("no spectrum with id 9999"), "{err}");
    lab.write("bad.csv", "x,y\n1000,0.1\n1002,abc\n");
    let err = lab.fails(&["plot", "bad.csv", "-t", "ir", "--svg", "p.svg"], 3);
    assert!(err.contains("bad.csv:3"), "{err}");
    assert!(
        !lab.path("p.svg").exists(),
        "nothing is written after a refusal"
    );
}
