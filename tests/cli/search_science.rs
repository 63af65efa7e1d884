//! `whorl search` science: measures and their parameters, 13C, solvent notes, constraints,
//! retention indices, library-wide preparation choices, confidence.

use serde_json::Value;

use crate::util::{Lab, ir_csv, ms_csv, seed};

fn seeded() -> Lab {
    let lab = Lab::new();
    lab.ok(&["import", seed().join("manifest.csv").to_str().unwrap()]);
    lab.approve_all();
    lab
}

fn unknown(name: &str) -> String {
    seed().join("unknowns").join(name).display().to_string()
}

fn names(report: &Value) -> Vec<String> {
    report["hits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h["name"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn ms_exponents_reverse_and_cutoff_are_parameters_of_the_result() {
    let lab = seeded();
    let u = unknown("u09.ms-ei.csv"); // ethylbenzene with column-bleed ions 207 and 281
    // The default ranks by the entropy similarity; the composite is asked for by name.
    let default = lab.json(&["search", &u, "-t", "ms-ei"]);
    assert_eq!(default["parameters"]["score"]["measure"], "entropy");
    assert_eq!(names(&default)[0], "ethylbenzene");
    // The composite's own options are refused with another measure, with the way out.
    let err = lab.fails(&["search", &u, "-t", "ms-ei", "--forward"], 3);
    assert!(
        err.contains("--forward shapes the composite measure")
            && err.contains("--measure composite"),
        "{err}"
    );
    let c = ["search", &u, "-t", "ms-ei", "--measure", "composite"];
    let rev = lab.json(&c);
    let composite = &rev["parameters"]["score"]["composite"];
    // Stein & Scott 1994 defaults: intensity^0.6 x (m/z)^3; reverse search by default.
    assert_eq!(composite["intensity_exponent"], 0.6);
    assert_eq!(composite["mass_exponent"], 3.0);
    assert_eq!(composite["reverse"], true);
    assert_eq!(
        lab.json(&[&c[..], &["--reverse"]].concat())["parameters"],
        rev["parameters"]
    );
    let fwd = lab.json(&[&c[..], &["--forward"]].concat());
    assert_eq!(fwd["parameters"]["score"]["composite"]["reverse"], false);
    assert_eq!(names(&fwd)[0], "ethylbenzene");
    assert_eq!(names(&rev)[0], "ethylbenzene");
    // The bleed ions are not in the reference, so reverse search ignores them and scores higher.
    let (f, r) = (
        fwd["hits"][0]["score"].as_f64().unwrap(),
        rev["hits"][0]["score"].as_f64().unwrap(),
    );
    assert!(r > f, "reverse {r} vs forward {f}");

    let custom = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--measure",
        "composite",
        "--mz-exponent",
        "1",
        "--intensity-exponent",
        "0.5",
        "--min-mz",
        "40",
    ]);
    let p = &custom["parameters"]["score"];
    assert_eq!(p["composite"]["mass_exponent"], 1.0);
    assert_eq!(p["composite"]["intensity_exponent"], 0.5);
    assert_eq!(p["min_mz"], 40.0);
    // Ions below m/z 40 (27 and 39) are left out of the unknown's peaks: 12 ions, 10 kept.
    assert_eq!(
        custom["hits"][0]["components"]["peak_overlap"]["unknown_peaks"],
        10
    );
}

#[test]
fn ms_only_options_are_refused_for_other_techniques() {
    let lab = Lab::new();
    let file = lab.write("u.csv", ir_csv(&[(1715.0, 1.0, 10.0)]));
    let err = lab.fails(
        &["search", file.to_str().unwrap(), "-t", "ir", "--reverse"],
        3,
    );
    assert!(err.contains("--reverse applies to ms-ei"), "{err}");
    let err = lab.fails(
        &[
            "search",
            file.to_str().unwrap(),
            "-t",
            "ir",
            "--measure",
            "composite",
        ],
        3,
    );
    assert!(err.contains("does not apply to ir"), "{err}");
    assert!(err.contains("correlation, derivative, cosine"), "{err}");
    let err = lab.fails(
        &[
            "search",
            file.to_str().unwrap(),
            "-t",
            "ir",
            "--measure",
            "derivative",
            "--sg-window",
            "10",
        ],
        3,
    );
    assert!(err.contains("odd"), "{err}");
}

#[test]
fn derivative_measure_ranks_and_reports_its_window() {
    let lab = seeded();
    let u = unknown("u01.ir.csv"); // ethyl acetate, sloping baseline, shifted
    let report = lab.json(&[
        "search",
        &u,
        "-t",
        "ir",
        "--measure",
        "derivative",
        "--sg-window",
        "15",
        "--sg-order",
        "3",
    ]);
    assert_eq!(names(&report)[0], "ethyl acetate");
    let p = &report["parameters"]["score"];
    assert_eq!(p["measure"], "derivative");
    assert_eq!(p["derivative"]["window"], 15);
    assert_eq!(p["derivative"]["order"], 3);
    let c = &report["hits"][0]["components"];
    assert_eq!(c["spectral"], c["derivative"]);
    let text = lab.ok(&["search", &u, "-t", "ir", "--measure", "deriv"]);
    assert!(
        text.contains("deriv (Savitzky-Golay window 11, order 2)"),
        "{text}"
    );
}

#[test]
fn every_technique_reports_peak_overlap_per_hit() {
    let lab = seeded();
    for (file, technique, solvent) in [
        ("u01.ir.csv", "ir", None),
        ("u06.raman.csv", "raman", None),
        ("u09.ms-ei.csv", "ms-ei", None),
        ("u14.nmr-1h.csv", "nmr-1h", Some("CDCl3")),
        ("u16.nmr-13c.csv", "nmr-13c", Some("CDCl3")),
    ] {
        let u = unknown(file);
        let mut args = vec!["search", u.as_str(), "-t", technique, "--top", "3"];
        if let Some(s) = solvent {
            args.extend(["--solvent", s]);
        }
        let report = lab.json(&args);
        for h in report["hits"].as_array().unwrap() {
            let o = &h["components"]["peak_overlap"];
            for k in ["forward", "reverse", "jaccard"] {
                let v = o[k].as_f64().unwrap();
                assert!((0.0..=1.0).contains(&v), "{technique} {k} {v}");
            }
        }
        let text = lab.ok(&args);
        assert!(
            text.contains(" peaks ") && text.contains(" covered ") && text.contains("jacc"),
            "{text}"
        );
    }
}

#[test]
fn nmr_hits_note_a_solvent_that_differs() {
    let lab = seeded();
    // u12: diethyl ether run in acetone-d6; the reference was run in CDCl3.
    let u = unknown("u12.nmr-1h.csv");
    let report = lab.json(&["search", &u, "-t", "nmr-1h", "--solvent", "acetone-d6"]);
    let first = &report["hits"][0];
    assert_eq!(first["name"], "diethyl ether");
    assert_eq!(first["solvent"], "CDCl3");
    let note = first["notes"][0].as_str().unwrap();
    assert!(
        note.contains("reference in CDCl3, unknown in acetone-d6"),
        "{note}"
    );
    // Same solvent: no note.
    let same = lab.json(&[
        "search",
        &unknown("u14.nmr-1h.csv"),
        "-t",
        "nmr-1h",
        "--solvent",
        "CDCl3",
    ]);
    assert!(
        same["hits"][0].get("notes").is_none(),
        "{}",
        same["hits"][0]
    );
}

#[test]
fn declaring_a_solvent_never_loses_a_library_compound() {
    // Issue 12: a solvent mask applies to both the unknown and the reference. Each 1H seed
    // spectrum searched as an unknown, without a solvent and in each solvent whorl knows,
    // must find itself first; its score may drop only where the declared solvent's residual
    // or water window (Gottlieb et al., J. Org. Chem. 1997) hides one of its lines, which
    // then counts in neither peak list. Before the masks were shared, a reference in CDCl3
    // searched without a solvent kept its CDCl3 residual in the unknown only (methanol scored
    // 0.899 against itself), and acetone and acetonitrile in CD3CN lost their first place.
    let lab = seeded();
    let solvents = [
        "CDCl3",
        "DMSO-d6",
        "D2O",
        "CD3OD",
        "acetone-d6",
        "C6D6",
        "CD3CN",
    ];
    let mut dropped = Vec::new();
    for row in crate::util::csv_rows(&seed().join("manifest.csv")) {
        if row["technique"] != "nmr-1h" {
            continue;
        }
        let file = seed().join(&row["file"]).display().to_string();
        let search = |solvent: Option<&str>| -> Value {
            let mut args = vec!["search", file.as_str(), "-t", "nmr-1h", "--top", "2"];
            args.extend(solvent.iter().flat_map(|s| ["--solvent", s]));
            lab.json(&args)["hits"][0].clone()
        };
        let plain = search(None);
        assert_eq!(plain["name"], row["name"].as_str());
        // Without a solvent the unknown is compared with its own solvent's signals masked.
        assert!(plain["score"].as_f64().unwrap() > 0.999, "{plain}");
        let lines = |hit: &Value| hit["components"]["peak_overlap"]["reference_peaks"].as_u64();
        for s in solvents {
            let hit = search(Some(s));
            assert_eq!(hit["name"], row["name"].as_str(), "{} in {s}", row["name"]);
            let (before, after) = (
                plain["score"].as_f64().unwrap(),
                hit["score"].as_f64().unwrap(),
            );
            if after < before - 1e-9 {
                assert!(
                    lines(&hit) < lines(&plain),
                    "{} in {s}: {before} -> {after}",
                    row["name"]
                );
                dropped.push(format!("{} in {s}", row["name"]));
            }
        }
    }
    // Acetone (2.17 ppm in CDCl3) under CD3CN's water (2.13 ppm), acetonitrile (2.10 ppm) under
    // acetone-d6's residual (2.05 ppm) and CD3CN's water (Gottlieb et al. 1997, from memory).
    assert_eq!(
        dropped,
        [
            "acetone in CD3CN",
            "acetonitrile in acetone-d6",
            "acetonitrile in CD3CN"
        ]
    );
}

/// A 13C peak list `(ppm, intensity)` with a header.
fn c13(lines: &[f64]) -> String {
    let mut s = String::from("ppm,intensity\n");
    for p in lines {
        s.push_str(&format!("{p},1\n"));
    }
    s
}

#[test]
fn carbon_13_matches_within_the_tolerance() {
    let lab = seeded();
    // Ethyl acetate's seed table (171.1, 60.5, 21.0, 14.2 ppm; from memory) moved by 0.6 ppm.
    let shifted = lab.write("ea.csv", c13(&[171.7, 61.1, 21.6, 14.8]));
    let path = shifted.to_str().unwrap();
    let wide = lab.json(&["search", path, "-t", "nmr-13c", "--solvent", "CDCl3"]);
    assert_eq!(names(&wide)[0], "ethyl acetate");
    assert_eq!(wide["parameters"]["score"]["peak_tolerance"], 1.0);
    assert_eq!(wide["parameters"]["score"]["measure"], "shift-match");
    assert_eq!(wide["parameters"]["score"]["referencing_correction"], true);
    let first = &wide["hits"][0]["components"];
    assert_eq!(first["peak_overlap"]["matched"], 4);
    // The referencing correction removes the common 0.6 ppm (the mean of the four pair
    // differences), after which every pair agrees: 4 / (4 + 4 - 4) = 1.
    assert!(
        (first["shift_match"].as_f64().unwrap() - 1.0).abs() < 1e-9,
        "{first}"
    );
    let as_given = lab.json(&[
        "search",
        path,
        "-t",
        "nmr-13c",
        "--solvent",
        "CDCl3",
        "--no-referencing-correction",
    ]);
    assert_eq!(names(&as_given)[0], "ethyl acetate");
    // The ranking line says whether the correction was applied.
    let args = ["search", path, "-t", "nmr-13c", "--solvent", "CDCl3"];
    assert!(
        lab.ok(&args)
            .contains("shift (referencing correction, weak-line discount)")
    );
    let plain = [&args[..], &["--no-referencing-correction"]].concat();
    assert!(lab.ok(&plain).contains("shift (weak-line discount)"));
    let first = &as_given["hits"][0]["components"];
    // Each pair 0.6 ppm apart counts 1 - 0.6^2 = 0.64 (Epanechnikov weight); 4 pairs of 4 + 4.
    assert!(
        (first["shift_match"].as_f64().unwrap() - 0.64).abs() < 1e-9,
        "{first}"
    );
    // With a 0.5 ppm tolerance nothing pairs with ethyl acetate any more.
    let narrow = lab.json(&[
        "search",
        path,
        "-t",
        "nmr-13c",
        "--solvent",
        "CDCl3",
        "--tolerance",
        "0.5",
    ]);
    let ea = narrow["hits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|h| h["name"] == "ethyl acetate");
    assert!(
        ea.is_none_or(|h| h["components"]["peak_overlap"]["matched"] == 0),
        "{narrow}"
    );
    assert_eq!(narrow["parameters"]["score"]["peak_tolerance"], 0.5);
}

#[test]
fn carbon_13_unknowns_of_the_demo_rank_first() {
    let lab = seeded();
    for (file, expected) in [
        ("u16.nmr-13c.csv", "2-butanone"),
        ("u17.nmr-13c.csv", "acetophenone"),
    ] {
        let report = lab.json(&[
            "search",
            &unknown(file),
            "-t",
            "nmr-13c",
            "--solvent",
            "CDCl3",
        ]);
        assert_eq!(names(&report)[0], expected, "{file}");
    }
}

#[test]
fn constraints_exclude_what_they_should_and_explain_lists_reasons() {
    let lab = seeded();
    // u09 is ethylbenzene, C8H10: nominal mass 106, IHD 4.
    let u = unknown("u09.ms-ei.csv");
    let check = |extra: &[&str], allowed: &dyn Fn(&Value) -> bool| {
        let mut args = vec!["search", u.as_str(), "-t", "ms-ei", "--top", "44"];
        args.extend_from_slice(extra);
        let report = lab.json(&args);
        let hits = report["hits"].as_array().unwrap();
        assert!(!hits.is_empty(), "{extra:?}");
        for h in hits {
            assert!(allowed(h), "{extra:?} let through {}", h["name"]);
        }
        assert_eq!(
            hits.len() + report["excluded_count"].as_u64().unwrap() as usize,
            44,
            "{extra:?}"
        );
        report
    };
    let r = check(&["--formula", "C8H10"], &|h| h["formula"] == "C8H10");
    // The xylenes and ethylbenzene share C8H10 (seed tables).
    assert_eq!(r["hits"].as_array().unwrap().len(), 4);
    assert_eq!(names(&r)[0], "ethylbenzene");
    check(&["--mass", "106"], &|h| {
        ["C8H10", "C7H6O"].contains(&h["formula"].as_str().unwrap())
    });
    // IHD 4 in the seed library (worked by hand, C - (H + X)/2 + N/2 + 1): the benzene rings
    // without a further double bond, and pyridine; styrene, the aromatic carbonyls and
    // nitrobenzene have 5.
    let r = check(&["--ihd", "4"], &|h| {
        ["C6H6", "C7H8", "C8H10", "C6H5Cl", "C5H5N", "C6H7N", "C6H6O"]
            .contains(&h["formula"].as_str().unwrap())
    });
    assert_eq!(r["hits"].as_array().unwrap().len(), 10);
    check(&["--elements", "C,H"], &|h| {
        let f = h["formula"].as_str().unwrap();
        !f.contains('O') && !f.contains('N') && !f.contains("Cl")
    });

    // --explain lists what was ruled out above the last hit, with the reason.
    let report = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--top",
        "3",
        "--mass",
        "92",
        "--explain",
    ]);
    assert_eq!(names(&report)[0], "toluene");
    let excluded = report["excluded"].as_array().unwrap();
    let eb = excluded
        .iter()
        .find(|e| e["name"] == "ethylbenzene")
        .unwrap();
    assert_eq!(eb["reason"], "nominal mass 106, not 92");
    let text = lab.ok(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--top",
        "3",
        "--mass",
        "92",
        "--explain",
    ]);
    assert!(text.contains("ruled out"), "{text}");
    assert!(text.contains("constraints nominal mass 92"), "{text}");
    // Without --explain the reasons are not listed.
    let quiet = lab.json(&["search", &u, "-t", "ms-ei", "--top", "3", "--mass", "92"]);
    assert!(quiet.get("excluded").is_none());

    // --where takes part in --explain too.
    let report = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--top",
        "2",
        "--where",
        "tag:chlorinated",
        "--explain",
    ]);
    assert!(
        report["excluded"][0]["reason"]
            .as_str()
            .unwrap()
            .contains("does not match --where")
    );

    // A constraint nothing meets leaves an empty list with a warning.
    let none = lab.json(&["search", &u, "-t", "ms-ei", "--formula", "C60"]);
    assert!(none["hits"].as_array().unwrap().is_empty());
    assert!(
        none["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "no-candidates"
                && w["message"].as_str().unwrap().contains("constraints")),
        "{}",
        none["warnings"]
    );
}

#[test]
fn bad_constraints_are_refused_with_a_hint() {
    let lab = Lab::new();
    let file = lab.write("u.csv", "mz,intensity\n43,100\n58,30\n");
    let f = file.to_str().unwrap();
    for (args, part) in [
        (vec!["--ihd", "1.3"], "IHD 1.3"),
        (vec!["--formula", "c6h6"], "not valid"),
        (vec!["--elements", "C,Xx"], "not an element"),
        (vec!["--ri-phase", "DB-5"], "needs a retention index"),
        (vec!["--rt", "9.8", "--alkanes", "9:8.2"], "alkane"),
    ] {
        let mut all = vec!["search", f, "-t", "ms-ei"];
        all.extend(args.iter().copied());
        let err = lab.fails(&all, 3);
        assert!(err.contains(part), "{args:?}: {err}");
        assert!(err.contains("hint:"), "{err}");
    }
}

/// The codes of a report's warnings.
fn warning_codes(report: &Value) -> Vec<&str> {
    report["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["code"].as_str().unwrap())
        .collect()
}

#[test]
fn an_ei_hit_whose_reference_is_as_alike_as_an_isomer_is_flagged_without_a_retention_index() {
    // Positional isomers and close relatives give EI spectra that differ little more than two
    // runs of one standard, and GC-MS analysts tell them apart by retention index (common
    // practice). Made-up ion lists: "isomer b" is "isomer a" with two ratios changed and one
    // small ion added; "alkane d" shares no ion with either.
    let a = [
        (39, 80.0),
        (51, 40.0),
        (63, 50.0),
        (65, 120.0),
        (91, 1000.0),
        (92, 600.0),
    ];
    let b = [
        (39, 80.0),
        (51, 40.0),
        (63, 50.0),
        (65, 200.0),
        (91, 1000.0),
        (92, 450.0),
        (105, 60.0),
    ];
    let d = [
        (29, 400.0),
        (41, 600.0),
        (43, 500.0),
        (57, 1000.0),
        (71, 150.0),
        (85, 100.0),
    ];
    let lab = Lab::new();
    let ids: Vec<i64> = [
        ("a.csv", &a[..], "isomer a", "1000"),
        ("b.csv", &b[..], "isomer b", "1010"),
        ("d.csv", &d[..], "alkane d", "1005"),
    ]
    .iter()
    .map(|(file, ions, name, ri)| {
        lab.add(
            file,
            &ms_csv(ions),
            "ms-ei",
            name,
            &["--set", &format!("ri={ri}")],
        )
    })
    .collect();
    lab.approve_all();
    lab.write("u.csv", ms_csv(&a));
    let u = lab.path("u.csv").display().to_string();
    let plain = lab.json(&["search", &u, "-t", "ms-ei"]);
    assert_eq!(names(&plain), ["isomer a", "isomer b", "alkane d"]);
    // The unknown is isomer a's own spectrum, so the second score is the entropy similarity
    // of the two references, well clear of the close margin yet above TWIN_SIMILARITY.
    let second = plain["hits"][1]["score"].as_f64().unwrap();
    assert!((0.94..0.99).contains(&second), "{second}");
    assert!(
        warning_codes(&plain).contains(&"similar-references"),
        "{plain}"
    );
    assert!(!warning_codes(&plain).contains(&"too-close"), "{plain}");
    let w = plain["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|w| w["code"] == "similar-references")
        .unwrap()["message"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(w.contains(&format!("isomer b ({second:.3})")), "{w}");
    assert!(!w.contains("alkane d"), "{w}");
    // The text report shows it as every other warning.
    let text = lab.ok(&["search", &u, "-t", "ms-ei"]);
    assert!(text.contains("agree as closely as isomers"), "{text}");
    // Given a retention index, the window does the telling apart: no such warning.
    let with_ri = lab.json(&["search", &u, "-t", "ms-ei", "--ri", "1004"]);
    assert_eq!(names(&with_ri), ["isomer a", "isomer b", "alkane d"]);
    assert!(
        !warning_codes(&with_ri).contains(&"similar-references"),
        "{with_ri}"
    );
    // With isomer b withdrawn, nothing in the library is as alike: no warning.
    let b_id = ids[1].to_string();
    lab.ok(&["withdraw", &b_id, "--by", "r.second", "--reason", "test"]);
    let alone = lab.json(&["search", &u, "-t", "ms-ei"]);
    assert_eq!(names(&alone), ["isomer a", "alkane d"]);
    assert!(
        !warning_codes(&alone).contains(&"similar-references"),
        "{alone}"
    );
}

#[test]
fn retention_index_window_uses_the_ri_on_record() {
    let lab = Lab::new();
    // Three references with retention indices on two phases (invented values for the test).
    for name in ["toluene", "ethylbenzene", "p-xylene"] {
        let slug = name.replace(' ', "-");
        std::fs::copy(
            seed().join(format!("spectra/{slug}.ms-ei.csv")),
            lab.path(&format!("{slug}.csv")),
        )
        .unwrap();
    }
    lab.write(
        "m.csv",
        "file,technique,name,formula,ri,ri_phase\n\
         toluene.csv,ms-ei,toluene,C7H8,765,DB-5\n\
         ethylbenzene.csv,ms-ei,ethylbenzene,C8H10,857,DB-5\n\
         p-xylene.csv,ms-ei,p-xylene,C8H10,866,DB-WAX\n",
    );
    lab.ok(&["import", lab.path("m.csv").to_str().unwrap()]);
    lab.approve_all();
    let u = unknown("u09.ms-ei.csv");
    let report = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--ri",
        "860",
        "--ri-window",
        "10",
        "--explain",
    ]);
    assert_eq!(names(&report), ["ethylbenzene", "p-xylene"]);
    // A search given a retention index takes the weak threshold derived for such searches on
    // the real EI tuning part (docs/evaluation-real.md, on the best score); one without keeps
    // the spectrum's own (on the discriminant).
    let c = &report["confidence"];
    assert_eq!(c["retention_index"], true, "{c}");
    assert_eq!(c["evidence"], "score", "{c}");
    let plain = lab.json(&["search", &u, "-t", "ms-ei"]);
    let p = &plain["confidence"];
    assert!(p.get("retention_index").is_none(), "{p}");
    assert_eq!(p["evidence"], "discriminant", "{p}");
    assert_ne!(c["weak_score"], p["weak_score"]);
    let r = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--ri",
        "860",
        "--ri-window",
        "10",
        "--ri-phase",
        "db-5",
        "--explain",
    ]);
    assert_eq!(names(&r), ["ethylbenzene"]);
    let px = r["excluded"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["name"] == "p-xylene")
        .unwrap();
    assert!(
        px["reason"].as_str().unwrap().contains("phase DB-WAX"),
        "{px}"
    );
    // From retention times: C8 at 6.00 min, C9 at 8.40 min, the peak at 7.37 min gives
    // 100 * (8 + 1.37 / 2.40) = 857.1 (van den Dool & Kratz 1963), within 5 of ethylbenzene only.
    let r = lab.json(&[
        "search",
        &u,
        "-t",
        "ms-ei",
        "--rt",
        "7.37",
        "--alkanes",
        "8:6.00,9:8.40",
        "--ri-window",
        "5",
    ]);
    assert_eq!(names(&r), ["ethylbenzene"]);
    let ri = r["parameters"]["constraints"]["ri"]["value"]
        .as_f64()
        .unwrap();
    assert!((ri - 857.083).abs() < 0.001, "{ri}");

    // A retention index is a fact of the GC run (common practice): an IR search refuses it,
    // and `identify` applies it to its EI search alone, not to the IR references (which
    // carry no retention index and would all be ruled out).
    let id = lab.add(
        "eb.ir.csv",
        &crate::util::ir_csv(&[(1495.0, 0.7, 8.0), (2930.0, 0.5, 20.0)]),
        "ir",
        "ethylbenzene",
        &[],
    );
    lab.ok(&["review", "--approve", "--by", "r.second", &id.to_string()]);
    let ir = lab.path("eb.ir.csv");
    let ir = ir.to_str().unwrap();
    let text = lab.refuses(&["search", ir, "-t", "ir", "--ri", "860"], 3);
    assert!(
        text.contains("applies to GC-MS (EI) references only, not to ir"),
        "{text}"
    );
    let fused = lab.json(&[
        "identify",
        "--ir",
        ir,
        "--ms-ei",
        &u,
        "--ri",
        "860",
        "--ri-window",
        "10",
    ]);
    let ir_run = fused["runs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["unknown"]["technique"] == "ir")
        .unwrap_or_else(|| panic!("an ir run in {fused}"));
    assert!(
        ir_run["parameters"]["constraints"]["ri"].is_null(),
        "{ir_run}"
    );
    let first = &fused["fusion"]["compounds"][0];
    assert_eq!(first["name"], "ethylbenzene", "{fused}");
    assert_eq!(first["evidence"][0]["technique"], "ir");
    assert_eq!(first["evidence"][0]["rank"], 1, "{fused}");
}

#[test]
fn init_records_baseline_and_masks_in_the_recipe() {
    let lab = Lab::empty();
    let out = lab.ok(&[
        "init",
        "--ir-baseline",
        "als",
        "--ir-mask",
        "water-vapour",
        "--ir-mask",
        "diamond-atr",
    ]);
    assert!(out.contains("baseline als"), "{out}");
    let stats = lab.json(&["stats"]);
    let ir = stats["recipes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["technique"] == "ir")
        .unwrap()
        .clone();
    assert_eq!(ir["baseline"]["method"], "als");
    let masks: Vec<(f64, f64)> = ir["grid"]["masks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| (m[0].as_f64().unwrap(), m[1].as_f64().unwrap()))
        .collect();
    assert_eq!(
        masks,
        [
            (1300.0, 2000.0),
            (1900.0, 2300.0),
            (2280.0, 2400.0),
            (3500.0, 4000.0)
        ]
    );
    // The masked regions do not take part in the score: a band at 1715 cm-1 (inside the
    // water-vapour mask) cannot tell two spectra apart.
    let a = lab.write("a.csv", ir_csv(&[(1715.0, 1.0, 10.0), (1100.0, 0.5, 15.0)]));
    let b = lab.write("b.csv", ir_csv(&[(1100.0, 0.5, 15.0)]));
    lab.ok(&[
        "add",
        a.to_str().unwrap(),
        "-t",
        "ir",
        "--name",
        "with carbonyl",
    ]);
    let report = lab.json(&[
        "search",
        b.to_str().unwrap(),
        "-t",
        "ir",
        "--include-pending",
    ]);
    assert!(
        (report["hits"][0]["components"]["correlation"]
            .as_f64()
            .unwrap()
            - 1.0)
            .abs()
            < 1e-3
    );
    let err = lab.fails(&["init", "--ir-mask", "everything"], 3);
    assert!(err.contains("not a mask"), "{err}");
}

#[test]
fn hit_lists_state_their_confidence() {
    let lab = seeded();
    let report = lab.json(&["search", &unknown("u01.ir.csv"), "-t", "ir"]);
    let c = &report["confidence"];
    assert_eq!(c["derived"], true);
    assert!(c["weak_score"].as_f64().unwrap() > 0.0 && c["close_margin"].as_f64().unwrap() > 0.0);
    assert!(report["margin"].as_f64().unwrap() > 0.0);
    // An IR spectrum of a compound not in the library: one band where no seed compound has
    // its strongest band is a weak match.
    let odd = lab.write("odd.csv", ir_csv(&[(2100.0, 1.0, 8.0), (850.0, 0.6, 8.0)]));
    let r = lab.json(&["search", odd.to_str().unwrap(), "-t", "ir"]);
    assert!(
        r["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "weak-match"
                && w["message"].as_str().unwrap().contains("weak match")),
        "{}",
        r["warnings"]
    );
}

/// The EI peaks `(m/z, relative abundance)` of a compound in the seed tables.
fn seed_ms(name: &str) -> Vec<(u32, f64)> {
    let text = std::fs::read_to_string(seed().join("compounds.json")).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    let c = v["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap_or_else(|| panic!("{name} in compounds.json"));
    c["ms"]["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| (p["mz"].as_u64().unwrap() as u32, p["rel"].as_f64().unwrap()))
        .collect()
}

#[test]
fn a_co_eluting_contaminant_does_not_take_the_first_place() {
    // The evaluation's moderate EI degradation without its noise: 1-propanol with toluene
    // co-eluting at 15 %, ions under 5 % of the base peak lost. Both spectra come from the
    // seed tables the library's references were made from.
    let lab = seeded();
    let mut ions = std::collections::BTreeMap::<u32, f64>::new();
    for (mz, rel) in seed_ms("1-propanol") {
        if rel >= 5.0 {
            *ions.entry(mz).or_default() += rel;
        }
    }
    for (mz, rel) in seed_ms("toluene") {
        if 0.15 * rel >= 5.0 {
            *ions.entry(mz).or_default() += 0.15 * rel;
        }
    }
    assert!(ions.contains_key(&91) && ions.contains_key(&31), "{ions:?}");
    let mut csv = String::from("mz,intensity\n");
    for (mz, a) in &ions {
        csv.push_str(&format!("{mz},{a}\n"));
    }
    lab.write("mix.csv", csv);
    let default = lab.json(&["search", "mix.csv", "-t", "ms-ei"]);
    assert_eq!(names(&default)[0], "1-propanol", "{default}");
    // The composite in forward search puts the contaminant first: its heavy ions (91, 92)
    // outweigh 1-propanol's light ones under the (m/z)^3 weight.
    let forward = lab.json(&[
        "search",
        "mix.csv",
        "-t",
        "ms-ei",
        "--measure",
        "composite",
        "--forward",
    ]);
    assert_eq!(names(&forward)[0], "toluene", "{forward}");
}

#[test]
fn searches_saved_with_the_earlier_defaults_replay_with_them() {
    let lab = seeded();
    // EI-MS: a search saved with forward search (the earlier default) records it.
    lab.write("ms.csv", std::fs::read(unknown("u09.ms-ei.csv")).unwrap());
    lab.ok(&[
        "search",
        "ms.csv",
        "-t",
        "ms-ei",
        "--measure",
        "composite",
        "--forward",
        "--save",
        "ms.json",
    ]);
    let r = lab.json(&["replay", "ms.json"]);
    assert_eq!(r["same"], true, "{r}");
    assert_eq!(
        r["now"]["parameters"]["score"]["composite"]["reverse"],
        false
    );
    let now = lab.json(&["search", "ms.csv", "-t", "ms-ei"]);
    assert_ne!(now["hits"][0]["score"], r["now"]["hits"][0]["score"]);

    // 13C: a record from before the referencing correction and the weak-line discount has
    // neither field; it replays without them.
    lab.write("c.csv", c13(&[171.7, 61.1, 21.6, 14.8]));
    lab.ok(&[
        "search",
        "c.csv",
        "-t",
        "nmr-13c",
        "--solvent",
        "CDCl3",
        "--no-referencing-correction",
        "--no-weak-line-discount",
        "--save",
        "c.json",
    ]);
    let mut saved: Value =
        serde_json::from_str(&std::fs::read_to_string(lab.path("c.json")).unwrap()).unwrap();
    let score = saved["parameters"]["score"].as_object_mut().unwrap();
    assert_eq!(
        score.remove("referencing_correction"),
        Some(Value::Bool(false))
    );
    assert_eq!(score.remove("weak_line_discount"), Some(Value::Bool(false)));
    lab.write("c.json", serde_json::to_string(&saved).unwrap());
    let r = lab.json(&["replay", "c.json"]);
    assert_eq!(r["same"], true, "{r}");
    for key in ["referencing_correction", "weak_line_discount"] {
        assert_eq!(r["now"]["parameters"]["score"][key], false, "{key}");
    }
}

#[test]
fn a_one_column_13c_shift_list_is_searched_and_other_techniques_refuse_it() {
    let lab = seeded();
    // Acetophenone in CDCl3 (from memory: C=O 198.1, ipso 137.1, para 133.0, meta/ortho
    // 128.5 and 128.2, CH3 26.5 ppm), as a bare list of shifts under a header.
    let list = lab.write(
        "acetophenone-shifts.txt",
        "shift_ppm\n198.1\n137.1\n133.0\n128.5\n128.2\n26.5\n",
    );
    let path = list.to_str().unwrap();
    let report = lab.json(&["search", path, "-t", "nmr-13c", "--solvent", "CDCl3"]);
    assert_eq!(names(&report)[0], "acetophenone", "{report}");
    // One column stays refused for a technique that needs x and y.
    let text = lab.refuses(&["search", path, "-t", "nmr-1h"], 3);
    assert!(
        text.contains("acetophenone-shifts.txt:2: expected 2 fields (x, y), found 1"),
        "{text}"
    );
}
