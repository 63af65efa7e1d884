//! `whorl identify`: several techniques, one fused list per compound.

use serde_json::Value;

use crate::util::{Lab, seed};

fn seed_file(rel: &str) -> String {
    seed().join(rel).display().to_string()
}

/// Ethyl acetate's seed EI spectrum with abundances changed by up to 15 %.
const ETHYL_ACETATE_MS: &str =
    "mz,intensity\n15,11\n27,18\n29,27\n42,9\n43,100\n45,14\n61,17\n70,13\n73,5.5\n88,11.5\n";

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
        warnings.iter().any(|w| w["code"] == "techniques-disagree"
            && w["message"]
                .as_str()
                .unwrap()
                .contains("different compounds first")),
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
    assert!(
        html.contains("<dt>identity criteria</dt><dd>met: ethyl acetate is ranked first with a confident hit by 2 techniques (ir, ms-ei)"),
        "the identity-policy verdict"
    );
    assert!(!html.contains("<script"), "no script");
}

#[test]
fn the_identity_policy_of_whorl_toml_is_applied_and_reported() {
    let lab = Lab::new();
    lab.ok(&["import", &seed_file("manifest.csv")]);
    lab.approve_all();
    let ms = lab.write("ea.ms.csv", ETHYL_ACETATE_MS);
    let ms = ms.to_str().unwrap();
    let ir_ea = seed_file("unknowns/u01.ir.csv"); // ethyl acetate
    let ir_ma = seed_file("unknowns/u02.ir.csv"); // methyl acetate
    let policy = |args: &[&str]| lab.json(args)["policy"].clone();

    // Default: two techniques must agree confidently and none may contradict.
    let two = policy(&["identify", "--ir", &ir_ea, "--ms-ei", ms]);
    assert_eq!(two["met"], true, "{two}");
    assert_eq!(two["compound"], "ethyl acetate");
    assert_eq!(two["supporting"], serde_json::json!(["ir", "ms-ei"]));
    let one = policy(&["identify", "--ir", &ir_ea]);
    assert_eq!(one["met"], false, "{one}");
    assert_eq!(one["supporting"], serde_json::json!(["ir"]));
    // IR says methyl acetate, MS says ethyl acetate: a contradiction.
    let split = policy(&["identify", "--ir", &ir_ma, "--ms-ei", ms]);
    assert_eq!(split["met"], false, "{split}");
    assert_eq!(split["against"][0]["technique"], "ir");
    assert_eq!(
        split["against"][0]["reason"],
        "methyl acetate is confidently first"
    );
    let text = lab.ok(&["identify", "--ir", &ir_ma, "--ms-ei", ms]);
    assert!(
        text.contains("criteria  not met: ethyl acetate is ranked first with a confident hit by 1 technique (ms-ei); against: ir: methyl acetate is confidently first"),
        "{text}"
    );
    // A mass spectrum of another sample (ethylbenzene) does not look like ethyl acetate at
    // all: it speaks against it even though no hit of it is confident.
    let other = seed_file("unknowns/u09.ms-ei.csv");
    let nmr = seed_file("spectra/ethyl-acetate.nmr-1h.csv");
    let mixed = policy(&[
        "identify",
        "--ir",
        &ir_ea,
        "--ms-ei",
        &other,
        "--nmr-1h",
        &nmr,
        "--solvent",
        "CDCl3",
    ]);
    assert_eq!(mixed["supporting"], serde_json::json!(["ir", "nmr-1h"]));
    assert_eq!(mixed["against"][0]["technique"], "ms-ei");
    assert_eq!(mixed["met"], false, "{mixed}");

    // A library that accepts one technique, and one that lets a majority outvote.
    lab.write(
        "lib/whorl.toml",
        "[identity]\nmin_techniques = 1\nallow_contradiction = true\n",
    );
    assert_eq!(policy(&["identify", "--ir", &ir_ea])["met"], true);
    assert_eq!(
        policy(&["identify", "--ir", &ir_ma, "--ms-ei", ms])["met"],
        true
    );
    // The thresholds of whorl.toml decide what is confident: nothing reaches 0.999.
    lab.write(
        "lib/whorl.toml",
        "[identity]\nmin_techniques = 1\n[thresholds]\nweak_score = 0.999\n",
    );
    let strict = policy(&["identify", "--ir", &ir_ea]);
    assert_eq!(strict["met"], false, "{strict}");
    assert_eq!(strict["supporting"], serde_json::json!([]));
}
