//! `whorl search --components N`: the unknown fitted as a mixture of library spectra, through
//! the real binary on a temporary library.

use std::collections::BTreeMap;

use serde_json::Value;

use crate::util::{Lab, hint, ms_csv};

/// Four EI references (made-up ion lists at unit resolution), signed off.
const REFERENCES: [(&str, &[(u32, f64)]); 4] = [
    (
        "aromatic a",
        &[
            (39, 80.0),
            (51, 40.0),
            (63, 50.0),
            (65, 120.0),
            (91, 1000.0),
            (92, 600.0),
        ],
    ),
    (
        "ketone b",
        &[
            (15, 150.0),
            (27, 60.0),
            (42, 80.0),
            (43, 1000.0),
            (58, 300.0),
        ],
    ),
    (
        "benzoyl c",
        &[
            (50, 100.0),
            (51, 300.0),
            (77, 700.0),
            (105, 1000.0),
            (106, 80.0),
        ],
    ),
    (
        "alkane d",
        &[
            (29, 400.0),
            (41, 600.0),
            (43, 500.0),
            (57, 1000.0),
            (71, 150.0),
            (85, 100.0),
        ],
    ),
];

fn lab() -> Lab {
    let lab = Lab::new();
    for (i, (name, ions)) in REFERENCES.iter().enumerate() {
        lab.add(&format!("r{i}.csv"), &ms_csv(ions), "ms-ei", name, &[]);
    }
    lab.ok(&[
        "review",
        "1",
        "2",
        "3",
        "4",
        "--approve",
        "--by",
        "r.second",
    ]);
    lab
}

/// Ion lists mixed so that `w` of the signal (sum of abundances) comes from the first.
fn mix(a: &[(u32, f64)], b: &[(u32, f64)], w: f64) -> Vec<(u32, f64)> {
    let sum = |p: &[(u32, f64)]| p.iter().map(|i| i.1).sum::<f64>();
    let mut ions: BTreeMap<u32, f64> = BTreeMap::new();
    for (p, k) in [(a, w / sum(a)), (b, (1.0 - w) / sum(b))] {
        for &(mz, y) in p {
            *ions.entry(mz).or_default() += 1000.0 * k * y;
        }
    }
    ions.into_iter().collect()
}

fn components(report: &Value) -> &Vec<Value> {
    report["mixture"]["components"]
        .as_array()
        .expect("components")
}

#[test]
fn a_three_to_one_mixture_gives_both_references_and_their_shares() {
    let lab = lab();
    let ions = mix(REFERENCES[0].1, REFERENCES[1].1, 0.75);
    lab.write("mix.csv", ms_csv(&ions));
    let report = lab.json(&["search", "mix.csv", "-t", "ms-ei", "--components", "3"]);
    let c = components(&report);
    assert_eq!(c.len(), 2, "{c:#?}");
    let share = |name: &str| {
        c.iter()
            .find(|x| x["name"] == name)
            .unwrap_or_else(|| panic!("{name} not among {c:#?}"))["share"]
            .as_f64()
            .unwrap()
    };
    // A mixture made as shares of signal add (common practice for a linear mixing model),
    // fitted exactly: the shares come back to rounding.
    assert!((share("aromatic a") - 0.75).abs() < 0.01);
    assert!((share("ketone b") - 0.25).abs() < 0.01);
    let explained = report["mixture"]["explained"].as_f64().unwrap();
    let by_best = report["mixture"]["explained_by_best"].as_f64().unwrap();
    assert!(
        explained > 0.999 && by_best < explained,
        "{explained} {by_best}"
    );
    assert_eq!(report["mixture"]["unexplained_ions"], serde_json::json!([]));
    // The hit list ends in "possibly a mixture", naming the larger share first.
    assert_eq!(
        report["verdict"],
        serde_json::json!({"verdict": "possible-mixture", "components": ["aromatic a", "ketone b"]})
    );

    // For people: the section after the hit list, with the shares and the verdict.
    let text = lab.ok(&["search", "mix.csv", "-t", "ms-ei", "--components", "3"]);
    let at = text.find("components  ").expect("components section");
    assert!(
        text[..at].contains("caution"),
        "after the hit list:\n{text}"
    );
    let section = &text[at..];
    assert!(section.contains("aromatic a") && section.contains("ketone b"));
    assert!(
        section.contains("75.0 %") && section.contains("25.0 %"),
        "{section}"
    );
    assert!(section.contains("possibly a mixture"), "{section}");
    assert!(section.contains("co-elution  none seen"), "{section}");

    // As CSV: the hit list as before, a blank line, then one row per component.
    let csv = lab.ok(&[
        "search",
        "mix.csv",
        "-t",
        "ms-ei",
        "--components",
        "3",
        "--csv",
    ]);
    let plain = lab.ok(&["search", "mix.csv", "-t", "ms-ei", "--csv"]);
    let (hits, rest) = csv.split_once("\n\n").expect("two tables");
    // The hits are unchanged; only each row's verdict is the fit's ("possible-mixture").
    let without_verdict = |text: &str| -> (Vec<Vec<String>>, Vec<String>) {
        let mut reader = csv::Reader::from_reader(text.as_bytes());
        let at = reader
            .headers()
            .unwrap()
            .iter()
            .position(|h| h == "verdict")
            .unwrap();
        let mut verdicts = Vec::new();
        let rows = reader
            .records()
            .map(|r| {
                let mut r: Vec<String> = r.unwrap().iter().map(String::from).collect();
                verdicts.push(r.remove(at));
                r
            })
            .collect();
        (rows, verdicts)
    };
    let (fitted, fitted_verdicts) = without_verdict(hits);
    let (alone, _) = without_verdict(&plain);
    assert_eq!(fitted, alone, "the hit list is unchanged");
    assert!(fitted_verdicts.iter().all(|v| v == "possible-mixture"));
    let rows: Vec<&str> = rest.lines().collect();
    assert!(rows[0].starts_with("component,share,coefficient,score,name"));
    assert_eq!(rows.len(), 3, "{rest}");
}

#[test]
fn the_hit_list_is_the_same_with_or_without_the_fit() {
    let lab = lab();
    lab.write(
        "mix.csv",
        ms_csv(&mix(REFERENCES[2].1, REFERENCES[3].1, 0.5)),
    );
    let mut with = lab.json(&["search", "mix.csv", "-t", "ms-ei", "--components", "2"]);
    let mut without = lab.json(&["search", "mix.csv", "-t", "ms-ei"]);
    assert!(with.as_object_mut().unwrap().remove("mixture").is_some());
    // Only the verdict follows the fit: a 1:1 mixture is possibly a mixture.
    assert_eq!(with["verdict"]["verdict"], "possible-mixture");
    assert_ne!(without["verdict"]["verdict"], "possible-mixture");
    for r in [&mut with, &mut without] {
        r.as_object_mut().unwrap().remove("searched_at");
        r.as_object_mut().unwrap().remove("verdict");
    }
    assert_eq!(with, without);
}

#[test]
fn a_pure_reference_gives_one_component() {
    let lab = lab();
    lab.write("pure.csv", ms_csv(REFERENCES[2].1));
    let report = lab.json(&["search", "pure.csv", "-t", "ms-ei", "--components", "3"]);
    let c = components(&report);
    assert_eq!(c.len(), 1, "{c:#?}");
    assert_eq!(c[0]["name"], "benzoyl c");
    assert_ne!(report["verdict"]["verdict"], "possible-mixture");
    let text = lab.ok(&["search", "pure.csv", "-t", "ms-ei", "--components", "3"]);
    assert!(!text.contains("possibly a mixture"), "{text}");
}

#[test]
fn ions_no_reference_has_are_flagged_as_co_elution() {
    let lab = lab();
    // A compound that is not in the library co-elutes with "aromatic a".
    let stranger: &[(u32, f64)] = &[(93, 200.0), (121, 400.0), (149, 1000.0)];
    lab.write(
        "coeluting.csv",
        ms_csv(&mix(REFERENCES[0].1, stranger, 0.7)),
    );
    let report = lab.json(&[
        "search",
        "coeluting.csv",
        "-t",
        "ms-ei",
        "--components",
        "3",
    ]);
    assert_eq!(components(&report)[0]["name"], "aromatic a");
    let flagged: Vec<f64> = report["mixture"]["unexplained_ions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["mz"].as_f64().unwrap())
        .collect();
    assert!(
        flagged.contains(&149.0) && flagged.contains(&121.0),
        "{flagged:?}"
    );
    let text = lab.ok(&[
        "search",
        "coeluting.csv",
        "-t",
        "ms-ei",
        "--components",
        "3",
    ]);
    assert!(
        text.contains("co-elution  ions no component explains"),
        "{text}"
    );
    assert!(text.contains("m/z 149"), "{text}");
}

#[test]
fn impossible_requests_are_refused_with_a_hint() {
    let lab = lab();
    lab.write("pure.csv", ms_csv(REFERENCES[2].1));
    // clap refuses a count outside 2..=5 (usage error, exit 2).
    for n in ["1", "6", "x"] {
        lab.fails(&["search", "pure.csv", "-t", "ms-ei", "--components", n], 2);
    }
    lab.write("other.csv", ms_csv(REFERENCES[1].1));
    let text = lab.fails(
        &[
            "search",
            "pure.csv",
            "other.csv",
            "-t",
            "ms-ei",
            "--components",
            "2",
        ],
        3,
    );
    assert!(hint(&text).contains("one at a time"), "{text}");
}
