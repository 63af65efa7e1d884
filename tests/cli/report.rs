//! `whorl search --html`: the self-contained report.

use crate::util::{Lab, ir_csv, unknown};

/// Compounds whose seed spectra these tests search among.
const COMPOUNDS: &[&str] = &[
    "ethyl acetate",
    "methyl acetate",
    "butyl acetate",
    "ethylbenzene",
    "o-xylene",
    "benzaldehyde",
    "styrene",
];

fn read(lab: &Lab, name: &str) -> String {
    std::fs::read_to_string(lab.path(name)).unwrap()
}

/// The text of every `<text>` element of the first SVG, with its x position.
fn first_plot_texts(html: &str) -> Vec<(f64, String)> {
    let svg = &html[html.find("<svg").unwrap()..html.find("</svg>").unwrap()];
    svg.split("<text ")
        .skip(1)
        .map(|t| {
            let head = &t[..t.find('>').unwrap()];
            let x = &head[head.find("x=\"").unwrap() + 3..];
            let x: f64 = x[..x.find('"').unwrap()].parse().unwrap();
            let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
            (x, body.trim().to_string())
        })
        .collect()
}

fn x_of(texts: &[(f64, String)], label: &str) -> f64 {
    texts
        .iter()
        .find(|(_, t)| t == label)
        .unwrap_or_else(|| panic!("no label {label} in {texts:?}"))
        .0
}

#[test]
fn search_writes_a_self_contained_report_with_everything_to_reproduce_it() {
    let lab = Lab::seeded_with(COMPOUNDS);
    let u = unknown("u01.ir.csv");
    let out = lab.run(&["search", &u, "-t", "ir", "--html", "r.html"]);
    assert!(out.status.success());
    // The hit list still goes to stdout; the report is announced on stderr.
    assert!(String::from_utf8_lossy(&out.stdout).contains("ethyl acetate"));
    assert!(String::from_utf8_lossy(&out.stderr).contains("report written to r.html"));

    let html = read(&lab, "r.html");
    let report = lab.json(&["search", &u, "-t", "ir"]);
    for needle in [
        report["unknown"]["sha256"].as_str().unwrap(),
        report["library"]["state_hash"].as_str().unwrap(),
        report["library"]["path"].as_str().unwrap(),
        report["tool_version"].as_str().unwrap(),
        u.as_str(),
        "ethyl acetate",
        "0.80 \u{D7} correlation + 0.20 \u{D7} peak overlap",
    ] {
        assert!(html.contains(needle), "report lacks {needle}");
    }
    assert!(html.contains(&whorl::report::escape(whorl::CAUTION)));
    // Top 5 hits of the 7 IR spectra are plotted; the hit table, and the case section's
    // provenance table, list all of them.
    assert_eq!(html.matches("<svg").count(), 5);
    assert_eq!(html.matches("<tr").count(), 2 * (1 + 7));
    // Self-contained: nothing to fetch and nothing to run.
    let without_svg_namespace = html.replace("xmlns=\"http://www.w3.org/2000/svg\"", "");
    for forbidden in ["http:", "https:", "src=", "<script", "<link", "@import"] {
        assert!(
            !without_svg_namespace.contains(forbidden),
            "report contains {forbidden}"
        );
    }
    assert!(html.contains("Content-Security-Policy"));
}

#[test]
fn a_compound_named_like_markup_stays_text() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0), (2950.0, 0.4, 15.0)]));
    lab.write("b.csv", ir_csv(&[(1740.0, 0.9, 10.0)]));
    let evil = "<script>alert(1)</script>";
    lab.ok(&[
        "add",
        "a.csv",
        "-t",
        "ir",
        "--name",
        evil,
        "--source",
        "<img src=x onerror=alert(2)>",
    ]);
    lab.ok(&[
        "add",
        "b.csv",
        "-t",
        "ir",
        "--name",
        "x\" onmouseover=\"alert(3)",
    ]);
    lab.write(
        "u<b>.csv",
        ir_csv(&[(1715.0, 0.8, 10.0), (2950.0, 0.3, 15.0)]),
    );
    lab.ok(&[
        "search",
        "u<b>.csv",
        "-t",
        "ir",
        "--include-pending",
        "--html",
        "r.html",
    ]);
    let html = read(&lab, "r.html");
    assert!(!html.contains("<script"), "a script element got through");
    assert!(!html.contains("<b>"), "a file name became markup");
    assert!(
        !html.contains("\" onmouseover=\""),
        "a name became an attribute"
    );
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert_eq!(html.matches("<svg").count(), 2);
}

#[test]
fn ir_and_nmr_axes_descend_and_mass_spectra_mirror() {
    let lab = Lab::seeded_with(COMPOUNDS);
    lab.ok(&[
        "search",
        &unknown("u01.ir.csv"),
        "-t",
        "ir",
        "--html",
        "ir.html",
    ]);
    let t = first_plot_texts(&read(&lab, "ir.html"));
    // Wavenumber descends from left to right, as the trade draws it.
    assert!(x_of(&t, "4000") < x_of(&t, "3000"));
    assert!(x_of(&t, "3000") < x_of(&t, "1000"));
    // The ester C=O stretch near 1740 cm-1 (common practice: 1735-1750) is labelled.
    assert!(
        t.iter().any(|(_, s)| s
            .parse::<f64>()
            .is_ok_and(|v| (1730.0..=1755.0).contains(&v))),
        "{t:?}"
    );

    lab.ok(&[
        "search",
        &unknown("u14.nmr-1h.csv"),
        "-t",
        "nmr-1h",
        "--solvent",
        "CDCl3",
        "--html",
        "nmr.html",
    ]);
    let html = read(&lab, "nmr.html");
    let t = first_plot_texts(&html);
    assert!(x_of(&t, "10") < x_of(&t, "8"));
    assert!(x_of(&t, "8") < x_of(&t, "2"));
    assert!(html.contains("chemical shift \u{3B4} / ppm"));

    lab.ok(&[
        "search",
        &unknown("u09.ms-ei.csv"),
        "-t",
        "ms-ei",
        "--html",
        "ms.html",
    ]);
    let html = read(&lab, "ms.html");
    let t = first_plot_texts(&html);
    assert!(t.iter().any(|(_, s)| s.starts_with("unknown (above)")));
    assert!(t.iter().any(|(_, s)| s.starts_with("reference (below)")));
    // m/z ascends (the unknown's extra ions at 207 and 281 stretch the axis to 300);
    // ethylbenzene's base peak m/z 91 is labelled on both sides.
    assert!(x_of(&t, "150") < x_of(&t, "250"));
    assert_eq!(t.iter().filter(|(_, s)| s == "91").count(), 2, "{t:?}");
    // Ions present in both are marked (one circle per tip, one in the legend).
    assert!(
        html[..html.find("</svg>").unwrap()]
            .matches("<circle")
            .count()
            > 2
    );
}

#[test]
fn the_number_of_plots_follows_whorl_toml() {
    let lab = Lab::seeded_with(COMPOUNDS);
    lab.write("lib/whorl.toml", "[report]\nplots = 2\n");
    lab.ok(&[
        "search",
        &unknown("u06.raman.csv"),
        "-t",
        "raman",
        "--html",
        "r.html",
    ]);
    let html = read(&lab, "r.html");
    assert_eq!(html.matches("<svg").count(), 2);
    assert!(html.contains("href=\"#raman-hit-2\"") && !html.contains("href=\"#raman-hit-3\""));
}

#[test]
fn an_unwritable_report_path_fails_without_losing_the_search() {
    let lab = Lab::seeded_with(&["ethyl acetate"]);
    let err = lab.fails(
        &[
            "search",
            &unknown("u01.ir.csv"),
            "-t",
            "ir",
            "--html",
            "no/such/folder/r.html",
        ],
        1,
    );
    assert!(
        err.contains("writing the HTML report to no/such/folder/r.html"),
        "{err}"
    );
    assert!(err.contains("hint: check the path"), "{err}");
}

/// True when `text` holds a character XML 1.0 does not allow (W3C XML 1.0, section 2.2,
/// `Char`: of the C0 controls only tab, LF and CR) or an ESC that would reach a terminal.
fn has_raw_controls(text: &str) -> bool {
    text.chars()
        .any(|c| (c.is_control() && !matches!(c, '\t' | '\n' | '\r')) || c == '\u{1b}')
}

#[test]
fn a_stored_name_with_control_characters_is_escaped_in_every_output() {
    // Metadata with control characters is refused at input; a library written before that
    // (or edited behind whorl's back) may still hold one. Put one there directly.
    let lab = Lab::new();
    let band = ir_csv(&[(1715.0, 0.9, 10.0), (2960.0, 0.3, 15.0)]);
    lab.add("a.csv", &band, "ir", "plain name", &[]);
    let evil = "evil\u{1b}[31mred\nforged line\u{7}<b>&";
    {
        let db = rusqlite::Connection::open(lab.library().join("library.sqlite")).unwrap();
        let triggers: Vec<String> = db
            .prepare("SELECT name FROM sqlite_master WHERE type = 'trigger'")
            .unwrap()
            .query_map([], |r| r.get(0))
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap();
        for t in triggers {
            db.execute_batch(&format!("DROP TRIGGER {t}")).unwrap();
        }
        db.execute(
            "UPDATE revision SET metadata = json_set(metadata, '$.name', ?1)",
            [evil],
        )
        .unwrap();
        db.execute("UPDATE compound SET name = ?1", [evil]).unwrap();
    }
    // An unknown whose file name carries the same characters.
    let unknown_name = "u\u{1b}[2J\u{7}.csv";
    lab.write(unknown_name, &band);
    let text_outputs: Vec<Vec<&str>> = vec![
        vec!["list"],
        vec!["show", "1"],
        vec!["find", "plain"],
        vec!["search", unknown_name, "-t", "ir", "--include-pending"],
        vec!["search", "a.csv", "-t", "ir", "--include-pending"],
        vec!["log"],
    ];
    for args in &text_outputs {
        let out = lab.run(args);
        let stdout = String::from_utf8_lossy(&out.stdout);
        assert!(out.status.success(), "{args:?}: {stdout}");
        assert!(
            !has_raw_controls(&stdout),
            "{args:?} printed raw controls:\n{stdout:?}"
        );
        assert!(
            !stdout.lines().any(|l| l.starts_with("forged line")),
            "{args:?} let a name forge a line:\n{stdout}"
        );
    }
    assert!(
        lab.ok(&["show", "1"])
            .contains("evil\\u{1b}[31mred\\nforged line\\u{7}<b>&")
    );
    // HTML and SVG: escaped markup, no character XML forbids.
    lab.ok(&[
        "search",
        unknown_name,
        "-t",
        "ir",
        "--include-pending",
        "--html",
        "r.html",
    ]);
    lab.ok(&["plot", "1", unknown_name, "-t", "ir", "-o", "p.svg"]);
    for file in ["r.html", "p.svg"] {
        let text = read(&lab, file);
        assert!(!has_raw_controls(&text), "{file} holds raw controls");
        assert!(
            !text.contains("<b>&"),
            "{file} holds the name's markup unescaped"
        );
        assert!(text.contains("evil\\u{1b}[31mred"), "{file} lost the name");
    }
}

#[test]
fn the_report_names_the_case_and_where_each_hits_reference_comes_from() {
    let lab = Lab::seeded_with(COMPOUNDS);
    let u = unknown("u01.ir.csv");
    lab.ok(&[
        "search",
        &u,
        "-t",
        "ir",
        "--top",
        "3",
        "--html",
        "r.html",
        "--sample",
        "S-<17>",
        "--analyst",
        "A. Nalyst",
    ]);
    let html = read(&lab, "r.html");
    // The case comes before the search, its values escaped.
    let case = html
        .find("<section class=\"case\"")
        .expect("a case section");
    assert!(case < html.find("<section class=\"query\"").unwrap());
    assert!(
        html.contains("<dt>sample</dt><dd>S-&lt;17&gt;</dd>"),
        "{html}"
    );
    assert!(html.contains("<dt>analyst</dt><dd>A. Nalyst</dd>"));
    // One provenance row per hit, each as the library's own record of the reference says:
    // its approver, revision and status from `whorl show`.
    let report = lab.json(&["search", &u, "-t", "ir", "--top", "3"]);
    let section = &html[case..html.find("<section class=\"query\"").unwrap()];
    let rows: Vec<&str> = section.split("<tr><td class=\"num\">").skip(1).collect();
    assert_eq!(rows.len(), 3, "{section}");
    for (row, hit) in rows.iter().zip(report["hits"].as_array().unwrap()) {
        let id = hit["spectrum_id"].as_i64().unwrap();
        let shown = lab.json(&["show", &id.to_string()]);
        assert!(
            row.contains(&format!("<td class=\"num\">{id}</td>")),
            "{row}"
        );
        assert!(
            row.contains(shown["spectrum"]["status"].as_str().unwrap()),
            "{row}"
        );
        let reviewer = shown["reviews"][0]["reviewer"].as_str().unwrap();
        assert_eq!(reviewer, "r.second");
        assert!(row.contains(&format!("<td>{reviewer}</td>")), "{row}");
        assert!(
            row.contains("asserted"),
            "a CLI sign-off is asserted: {row}"
        );
    }
    // Without a report there is nothing to name the case in.
    lab.fails(&["search", &u, "-t", "ir", "--sample", "S-1"], 2);
}
