//! `whorl identify`: several techniques, one fused list per compound.

use serde_json::Value;

use crate::util::{Lab, seed};

fn seed_file(rel: &str) -> String {
    seed().join(rel).display().to_string()
}

/// Ethyl acetate's seed EI spectrum with abundances changed by up to 15 %.
const ETHYL_ACETATE_MS: &str =
    "mz,intensity\n15,110\n27,180\n29,270\n42,90\n43,999\n45,140\n61,170\n70,130\n73,55\n88,115\n";

fn compound<'a>(report: &'a Value, name: &str) -> &'a Value {
    report["fusion"]["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap_or_else(|| panic!("{name} not in {}", report["fusion"]))
}

#[test]
fn three_techniques_agree_on_the_compound() {
    let lab = Lab::new();
    lab.ok(&["import", &seed_file("manifest.csv")]);
    lab.approve_all();
    let ms = lab.write("ea.ms.csv", ETHYL_ACETATE_MS);
    let ir = seed_file("unknowns/u01.ir.csv");
    let nmr = seed_file("spectra/ethyl-acetate.nmr-1h.csv");
    let args = [
        "identify",
        "--ir",
        ir.as_str(),
        "--ms-ei",
        ms.to_str().unwrap(),
        "--nmr-1h",
        nmr.as_str(),
        "--solvent",
        "CDCl3",
        "--top",
        "5",
    ];
    let report = lab.json(&args);
    let first = &report["fusion"]["compounds"][0];
    assert_eq!(first["name"], "ethyl acetate");
    assert_eq!(report["fusion"]["compounds"].as_array().unwrap().len(), 5);
    let evidence = first["evidence"].as_array().unwrap();
    let techniques: Vec<&str> = evidence
        .iter()
        .map(|e| e["technique"].as_str().unwrap())
        .collect();
    assert_eq!(techniques, ["ir", "ms-ei", "nmr-1h"]);
    for e in evidence {
        assert_eq!(e["rank"], 1, "{e}");
    }
    // The fused score is the mean of the three combined scores.
    let mean = evidence
        .iter()
        .map(|e| e["score"].as_f64().unwrap())
        .sum::<f64>()
        / 3.0;
    assert!((first["fused"].as_f64().unwrap() - mean).abs() < 1e-12);
    assert_eq!(report["runs"].as_array().unwrap().len(), 3);
    assert_eq!(report["runs"][2]["unknown"]["solvent"], "CDCl3");
    let text = lab.ok(&args);
    assert!(
        text.contains("fused     mean of the per-technique combined scores"),
        "{text}"
    );
    assert!(text.contains("ms-ei") && text.contains("nmr-1h"), "{text}");
    assert!(text.contains("caution"), "{text}");
}

#[test]
fn a_compound_without_a_technique_is_shown_as_missing() {
    let lab = Lab::new();
    // Methyl acetate has an IR reference but no EI spectrum in this library.
    let mut manifest = String::from("file,technique,name,formula\n");
    for (slug, name, formula, techniques) in [
        ("methyl-acetate", "methyl acetate", "C3H6O2", &["ir"][..]),
        (
            "ethyl-acetate",
            "ethyl acetate",
            "C4H8O2",
            &["ir", "ms-ei"][..],
        ),
        (
            "butyl-acetate",
            "butyl acetate",
            "C6H12O2",
            &["ir", "ms-ei"][..],
        ),
    ] {
        for t in techniques {
            let file = format!("{slug}.{t}.csv");
            std::fs::copy(seed().join("spectra").join(&file), lab.path(&file)).unwrap();
            manifest.push_str(&format!("{file},{t},{name},{formula}\n"));
        }
    }
    let m = lab.write("m.csv", manifest);
    lab.ok(&["import", m.to_str().unwrap()]);
    lab.approve_all();
    let ir = seed_file("unknowns/u02.ir.csv"); // methyl acetate in percent transmittance
    let ms = lab.write("ea.ms.csv", ETHYL_ACETATE_MS);
    let args = [
        "identify",
        "--ir",
        ir.as_str(),
        "--ms-ei",
        ms.to_str().unwrap(),
    ];
    let report = lab.json(&args);
    let ma = compound(&report, "methyl acetate");
    assert_eq!(ma["missing"], serde_json::json!(["ms-ei"]));
    assert_eq!(ma["evidence"][1]["score"], Value::Null);
    let ir_score = ma["evidence"][0]["score"].as_f64().unwrap();
    assert!((ma["fused"].as_f64().unwrap() - ir_score / 2.0).abs() < 1e-12);
    assert_eq!(ma["evidence"][0]["rank"], 1);
    assert!(
        ma["disagreements"][0]
            .as_str()
            .unwrap()
            .contains("no ms-ei reference"),
        "{ma}"
    );
    // The list says the techniques rank different compounds first.
    let warnings = report["fusion"]["warnings"].as_array().unwrap();
    assert!(
        warnings
            .iter()
            .any(|w| w.as_str().unwrap().contains("different compounds first")),
        "{warnings:?}"
    );
    let text = lab.ok(&args);
    assert!(text.contains("no ref"), "{text}");
    assert!(text.contains("disagree  methyl acetate"), "{text}");
}

#[test]
fn identify_needs_an_unknown_and_one_per_technique() {
    let lab = Lab::new();
    let err = lab.fails(&["identify"], 3);
    assert!(err.contains("no unknown to identify"), "{err}");
    assert!(err.contains("hint: give at least one of --ir"), "{err}");
}

#[test]
fn identify_writes_one_html_report_with_the_fused_list_and_each_technique() {
    let lab = Lab::seeded();
    let ms = lab.write("ea.ms.csv", ETHYL_ACETATE_MS);
    let ir = seed_file("unknowns/u01.ir.csv");
    lab.ok(&[
        "identify",
        "--ir",
        ir.as_str(),
        "--ms-ei",
        ms.to_str().unwrap(),
        "--top",
        "3",
        "--html",
        "id.html",
    ]);
    let html = std::fs::read_to_string(lab.path("id.html")).unwrap();
    assert!(html.contains("Fused list"), "the fused section");
    assert!(
        html.contains("IR unknown") && html.contains("EI mass spectrum unknown"),
        "one section per technique"
    );
    // The fused table names the compound every technique put first, and each technique's
    // section carries overlays (one SVG per plotted hit).
    assert!(html.contains("ethyl acetate"));
    assert!(html.matches("<svg").count() >= 2, "overlays present");
    assert!(html.contains("evidence, not proof"), "the caution");
    assert!(!html.contains("<script"), "no script");
}
