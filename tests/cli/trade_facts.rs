//! Facts of the trade, used as check values (each marked with its source), against the demo
//! generator's tables, the generated spectra, and the ranking of unknowns that show them.

use std::collections::HashMap;

use serde_json::Value;

use crate::util::{Lab, ir_csv, seed};

fn compounds() -> Vec<Value> {
    let text = std::fs::read_to_string(seed().join("compounds.json")).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    v["compounds"].as_array().unwrap().clone()
}

fn classes() -> HashMap<String, String> {
    compounds()
        .iter()
        .map(|c| {
            (
                c["name"].as_str().unwrap().to_string(),
                c["class"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn has_carbonyl(class: &str) -> bool {
    ["ketone", "aldehyde", "ester", "acid", "amide"]
        .iter()
        .any(|k| class.contains(k))
}

fn saturated_carbonyl(class: &str) -> bool {
    matches!(class, "ketone" | "aldehyde" | "ester" | "carboxylic acid")
}

/// Absorbance of a generated IR file at a given wavenumber (the files step by 2 cm-1).
fn ir_absorbance(name: &str, at: f64) -> f64 {
    let mut manifest = csv::Reader::from_path(seed().join("manifest.csv")).unwrap();
    let file = manifest
        .records()
        .map(|r| r.unwrap())
        .find(|r| &r[1] == "ir" && &r[2] == name)
        .map(|r| r[0].to_string())
        .unwrap();
    let text = std::fs::read_to_string(seed().join(file)).unwrap();
    text.lines()
        .filter(|l| l.starts_with(|c: char| c.is_ascii_digit()))
        .map(|l| {
            let (x, y) = l.split_once(',').unwrap();
            (x.parse::<f64>().unwrap(), y.parse::<f64>().unwrap())
        })
        .find(|(x, _)| (x - at).abs() < 0.5)
        .map(|p| p.1)
        .unwrap()
}

#[test]
fn strong_carbonyl_stretch_lies_at_1700_to_1750() {
    // Common practice: a strong C=O stretch of saturated ketones, aldehydes, esters and
    // carboxylic acids lies at 1700-1750 cm-1; compounds without C=O show no strong band there.
    for c in compounds() {
        let class = c["class"].as_str().unwrap();
        let bands = c["ir"]["bands"].as_array().unwrap();
        let strong_co = bands.iter().any(|b| {
            let (pos, h) = (b["pos"].as_f64().unwrap(), b["height"].as_f64().unwrap());
            (1700.0..=1750.0).contains(&pos) && h >= 0.6
        });
        let any_in_window = bands.iter().any(|b| {
            let (pos, h) = (b["pos"].as_f64().unwrap(), b["height"].as_f64().unwrap());
            (1680.0..=1760.0).contains(&pos) && h > 0.15
        });
        if saturated_carbonyl(class) {
            assert!(
                strong_co,
                "{} ({class}) lacks a strong C=O band at 1700-1750",
                c["name"]
            );
        }
        if !has_carbonyl(class) {
            assert!(
                !any_in_window,
                "{} ({class}) has a strong band in the C=O window",
                c["name"]
            );
        }
    }
}

#[test]
fn carboxylic_acid_oh_is_broad_from_2500_to_above_3000() {
    // Common practice: the H-bonded O-H stretch of a carboxylic acid is a broad band from
    // about 2500 to above 3000 cm-1; other classes do not absorb broadly below 2800 cm-1.
    for (name, class) in classes() {
        let below: Vec<f64> = (0..=11)
            .map(|i| ir_absorbance(&name, 2500.0 + 50.0 * i as f64))
            .collect();
        if class == "carboxylic acid" {
            assert!(below.iter().all(|&a| a >= 0.15), "{name}: {below:?}");
        } else {
            let broad = [2500.0, 2600.0, 2700.0]
                .iter()
                .filter(|&&x| ir_absorbance(&name, x) >= 0.15)
                .count();
            assert_eq!(
                broad, 0,
                "{name} ({class}) absorbs broadly at 2500-2700 cm-1"
            );
        }
    }
}

#[test]
fn alkyl_chain_methyl_near_0_9_ppm_and_aldehyde_h_near_9_to_10() {
    // Common practice: a CH3 at the end of an alkyl chain appears near 0.9-1.0 ppm; an aldehyde
    // H near 9-10 ppm, and nothing else of these compounds does.
    let chain_ends = [
        "1-propanol",
        "1-butanol",
        "butanal",
        "butanoic acid",
        "butyl acetate",
        "n-hexane",
        "n-heptane",
    ];
    for c in compounds() {
        let name = c["name"].as_str().unwrap();
        let class = c["class"].as_str().unwrap();
        let shifts: Vec<f64> = c["nmr_1h"]["signals"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["ppm"].as_f64().unwrap())
            .collect();
        if chain_ends.contains(&name) {
            assert!(
                shifts.iter().any(|&p| (0.85..=1.05).contains(&p)),
                "{name}: {shifts:?}"
            );
        }
        let aldehyde_h = shifts.iter().any(|&p| (9.0..=10.1).contains(&p));
        assert_eq!(
            aldehyde_h,
            class.contains("aldehyde"),
            "{name} ({class}): {shifts:?}"
        );
    }
}

#[test]
fn methyl_and_ethyl_fragments_at_mz_15_and_29() {
    // Common practice: EI fragments at m/z 15 (CH3+) and m/z 29 (CHO+ or C2H5+).
    let with_29 = [
        "ethanol",
        "propanal",
        "butanal",
        "2-butanone",
        "propanoic acid",
        "ethyl acetate",
        "diethyl ether",
        "ethylbenzene",
    ];
    for c in compounds() {
        let name = c["name"].as_str().unwrap();
        let mz: Vec<i64> = c["ms"]["peaks"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["mz"].as_i64().unwrap())
            .collect();
        if with_29.contains(&name) {
            assert!(mz.contains(&29), "{name}: {mz:?}");
            assert!(mz.contains(&15), "{name}: {mz:?}");
        }
    }
}

fn seeded_lab() -> Lab {
    let lab = Lab::new();
    let manifest = seed().join("manifest.csv");
    lab.ok(&["import", manifest.to_str().unwrap()]);
    lab
}

fn top_classes(
    lab: &Lab,
    file: &str,
    technique: &str,
    extra: &[&str],
    n: usize,
) -> Vec<(String, String)> {
    let classes = classes();
    let mut args = vec![
        "search",
        file,
        "--technique",
        technique,
        "--top",
        "5",
        "--include-pending",
    ];
    args.extend_from_slice(extra);
    let report = lab.json(&args);
    report["hits"].as_array().unwrap()[..n]
        .iter()
        .map(|h| {
            let name = h["name"].as_str().unwrap().to_string();
            let class = classes[&name].clone();
            (name, class)
        })
        .collect()
}

/// A 1H spectrum in CDCl3 made of Lorentzian lines `(ppm, height)`, 12.5..-0.5 ppm.
fn nmr_csv(lines: &[(f64, f64)]) -> String {
    let mut s = String::from("ppm,intensity\n");
    for i in 0..3251 {
        let x = 12.5 - 0.004 * i as f64;
        let y: f64 = lines
            .iter()
            .map(|&(c, h)| h * 0.003f64.powi(2) / ((x - c).powi(2) + 0.003f64.powi(2)))
            .sum();
        s.push_str(&format!("{x:.3},{y:.5}\n"));
    }
    s
}

/// First-order multiplet lines at 400 MHz: `n` lines with binomial weights, J in Hz.
fn multiplet(centre: f64, protons: f64, lines: usize, j_hz: f64) -> Vec<(f64, f64)> {
    let weights: Vec<f64> = (0..lines)
        .map(|k| (0..k).fold(1.0, |acc, i| acc * (lines - 1 - i) as f64 / (i + 1) as f64))
        .collect();
    let total: f64 = weights.iter().sum();
    (0..lines)
        .map(|k| {
            (
                centre + (k as f64 - (lines - 1) as f64 / 2.0) * j_hz / 400.0,
                100.0 * protons * weights[k] / total,
            )
        })
        .collect()
}

#[test]
fn an_unknown_with_a_strong_1715_band_ranks_carbonyl_compounds_first() {
    // A saturated aliphatic carbonyl compound: C=O at 1715 cm-1 (common practice) with alkyl C-H.
    let lab = seeded_lab();
    let file = lab.write(
        "co.csv",
        ir_csv(&[
            (1715.0, 1.0, 10.0),
            (2960.0, 0.25, 15.0),
            (2875.0, 0.12, 12.0),
            (1365.0, 0.3, 10.0),
            (1170.0, 0.35, 15.0),
        ]),
    );
    for (name, class) in top_classes(&lab, file.to_str().unwrap(), "ir", &[], 3) {
        assert!(has_carbonyl(&class), "{name} ({class}) ranked in the top 3");
    }
}

#[test]
fn an_unknown_with_a_broad_oh_and_a_carbonyl_ranks_an_acid_first() {
    // Carboxylic acid: broad O-H 2500-3300 cm-1 and C=O near 1710 cm-1 (common practice).
    let lab = seeded_lab();
    let file = lab.write(
        "acid.csv",
        ir_csv(&[
            (2650.0, 0.3, 180.0),
            (2950.0, 0.45, 180.0),
            (3100.0, 0.3, 150.0),
            (1712.0, 1.0, 12.0),
            (1290.0, 0.5, 15.0),
            (935.0, 0.3, 25.0),
        ]),
    );
    let top = top_classes(&lab, file.to_str().unwrap(), "ir", &[], 1);
    assert_eq!(top[0].1, "carboxylic acid", "{top:?}");
}

#[test]
fn an_unknown_with_an_aldehyde_proton_ranks_an_aldehyde_first() {
    // Aldehyde H near 9.7 ppm (common practice), with an alkyl chain ending in CH3 at 0.95 ppm.
    let lab = seeded_lab();
    let mut lines = multiplet(9.76, 1.0, 3, 1.7);
    lines.extend(multiplet(2.42, 2.0, 4, 7.3));
    lines.extend(multiplet(1.66, 2.0, 6, 7.4));
    lines.extend(multiplet(0.96, 3.0, 3, 7.4));
    let file = lab.write("ald.csv", nmr_csv(&lines));
    let top = top_classes(
        &lab,
        file.to_str().unwrap(),
        "nmr-1h",
        &["--solvent", "CDCl3"],
        1,
    );
    assert!(top[0].1.contains("aldehyde"), "{top:?}");
}

#[test]
fn an_unknown_with_a_chain_end_methyl_ranks_compounds_with_one_first() {
    // CH3 triplet at 0.89 ppm and CH2 envelope at 1.28 ppm: an n-alkyl chain (common practice).
    let lab = seeded_lab();
    let mut lines = multiplet(0.89, 6.0, 3, 7.0);
    lines.extend(multiplet(1.28, 8.0, 5, 7.0));
    let file = lab.write("alkane.csv", nmr_csv(&lines));
    let tables: HashMap<String, Vec<f64>> = compounds()
        .iter()
        .map(|c| {
            let shifts = c["nmr_1h"]["signals"]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| s["ppm"].as_f64().unwrap())
                .collect();
            (c["name"].as_str().unwrap().to_string(), shifts)
        })
        .collect();
    for (name, _) in top_classes(
        &lab,
        file.to_str().unwrap(),
        "nmr-1h",
        &["--solvent", "CDCl3"],
        2,
    ) {
        assert!(
            tables[&name].iter().any(|&p| (0.85..=1.05).contains(&p)),
            "{name} has no CH3 near 0.9 ppm"
        );
    }
}

#[test]
fn an_unknown_with_mz_15_and_29_ranks_compounds_showing_both_first() {
    // EI fragments CH3+ (m/z 15) and C2H5+/CHO+ (m/z 29) (common practice).
    let lab = seeded_lab();
    let file = lab.write(
        "ms.csv",
        "mz,intensity\n15,120\n26,150\n27,420\n28,650\n29,999\n57,120\n58,310\n",
    );
    let ions: HashMap<String, Vec<i64>> = compounds()
        .iter()
        .map(|c| {
            let mz = c["ms"]["peaks"]
                .as_array()
                .unwrap()
                .iter()
                .map(|p| p["mz"].as_i64().unwrap())
                .collect();
            (c["name"].as_str().unwrap().to_string(), mz)
        })
        .collect();
    for (name, _) in top_classes(&lab, file.to_str().unwrap(), "ms-ei", &[], 3) {
        assert!(
            ions[&name].contains(&15) && ions[&name].contains(&29),
            "{name}: {:?}",
            ions[&name]
        );
    }
}
