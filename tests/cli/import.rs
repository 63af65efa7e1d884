use std::collections::BTreeSet;

use crate::util::{Lab, csv_rows, hint, ir_csv, keys, ms_csv, seed, seed_rows};

/// Writes three good spectra into `m/` and a manifest `m/<name>` listing them, with a row
/// for a file of repeated x values after the first when `bad` is true.
fn manifest(lab: &Lab, name: &str, bad: bool) -> String {
    lab.write("m/a.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    lab.write(
        "m/b.csv",
        ir_csv(&[(1050.0, 0.6, 12.0), (3350.0, 0.5, 80.0)]),
    );
    lab.write("m/c.csv", ms_csv(&[(43, 100.0), (58, 30.0)]));
    let repeated = format!("{}1000,0.5\n", ir_csv(&[(1600.0, 0.5, 10.0)]));
    lab.write("m/bad.csv", repeated);
    let mut text = String::from("file,technique,name,class,lot\n");
    text.push_str("a.csv,ir,compound a,ketone,QX-12\n");
    if bad {
        text.push_str("bad.csv,ir,compound bad,,\n");
    }
    text.push_str("b.csv,ir,compound b,aromatic alcohol,QX-13\n");
    text.push_str("c.csv,ms-ei,compound a,ketone,QX-12\n");
    let path = format!("m/{name}");
    lab.write(&path, text);
    path
}

fn names(list: &serde_json::Value) -> BTreeSet<String> {
    list.as_array()
        .unwrap()
        .iter()
        .map(|r| {
            format!(
                "{} {}",
                r["technique"].as_str().unwrap(),
                r["name"].as_str().unwrap()
            )
        })
        .collect()
}

#[test]
fn the_seed_manifest_imports_every_row() {
    let lab = Lab::new();
    let manifest = seed().join("manifest.csv");
    let rows = csv_rows(&manifest);
    let out = lab.ok(&["import", manifest.to_str().unwrap()]);
    let n = rows.len();
    assert!(
        out.contains(&format!(
            "imported {n} (ids 1..{n}), already present 0, rejected 0"
        )),
        "{out}"
    );
    let stats = lab.json(&["stats"]);
    let total: i64 = stats["spectra"]
        .as_object()
        .unwrap()
        .values()
        .flat_map(|by_status| by_status.as_object().unwrap().values())
        .map(|v| v.as_i64().unwrap())
        .sum();
    assert_eq!(total as usize, n);
    // A compound is identified by its CAS RN, and every seed row has one.
    let compounds: BTreeSet<&str> = rows.iter().map(|r| r["cas"].as_str()).collect();
    assert_eq!(stats["compounds"], compounds.len());
    assert_eq!(lab.json(&["list"]).as_array().unwrap().len(), n);
}

#[test]
fn importing_the_seed_manifest_again_imports_nothing() {
    let lab = Lab::seeded();
    let before = lab.state();
    let manifest = seed().join("manifest.csv");
    let n = csv_rows(&manifest).len();
    let summary = lab.json(&["import", manifest.to_str().unwrap()]);
    assert_eq!(summary["imported"], 0);
    assert_eq!(summary["already_present"], n);
    assert_eq!(summary["rejected"], serde_json::json!([]));
    assert_eq!(lab.state(), before);
}

#[test]
fn one_bad_row_is_reported_with_its_manifest_line_and_the_good_rows_are_imported() {
    let lab = Lab::new();
    let path = manifest(&lab, "with-bad.csv", true);
    let text = lab.fails(&["import", &path], 3);
    // The bad row is the second data row, on line 3 of the manifest.
    assert!(
        text.contains(&format!("rejected {path}:3 (bad.csv)")),
        "{text}"
    );
    assert!(text.contains("appears twice"), "{text}");
    assert!(!hint(&text).is_empty());
    assert!(text.contains("imported 3"), "{text}");
    let want: BTreeSet<String> = ["ir compound a", "ir compound b", "ms-ei compound a"]
        .map(String::from)
        .into();
    assert_eq!(names(&lab.json(&["list"])), want);
}

#[test]
fn all_or_nothing_with_one_bad_row_imports_nothing() {
    let lab = Lab::new();
    let path = manifest(&lab, "with-bad.csv", true);
    let text = lab.refuses(&["import", &path, "--all-or-nothing"], 3);
    assert!(text.contains(&format!("{path}:3")), "{text}");
    assert!(text.contains("nothing imported"), "{text}");
    assert_eq!(lab.json(&["list"]), serde_json::json!([]));
    assert_eq!(lab.json(&["stats"])["spectra"], serde_json::json!({}));
}

#[test]
fn all_or_nothing_json_says_it_rolled_back() {
    let lab = Lab::new();
    let path = manifest(&lab, "with-bad.csv", true);
    let out = lab.run(&["import", &path, "--all-or-nothing", "--json"]);
    assert_eq!(out.status.code(), Some(3));
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(summary["rolled_back"], true);
    assert_eq!(summary["imported"], 0);
    assert_eq!(summary["rejected"].as_array().unwrap().len(), 1);
}

#[test]
fn all_or_nothing_with_good_rows_imports_them_all() {
    let lab = Lab::new();
    let path = manifest(&lab, "good.csv", false);
    let summary = lab.json(&["import", &path, "--all-or-nothing"]);
    assert_eq!(summary["imported"], 3);
    assert_eq!(summary["rolled_back"], false);
    assert_eq!(lab.json(&["list"]).as_array().unwrap().len(), 3);
}

#[test]
fn import_json_summary_has_counts_and_rejected_rows() {
    let lab = Lab::new();
    let path = manifest(&lab, "with-bad.csv", true);
    let out = lab.run(&["import", &path, "--json"]);
    assert_eq!(out.status.code(), Some(3));
    let summary: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        keys(&summary),
        [
            "already_present",
            "coverage_note",
            "imported",
            "rejected",
            "rolled_back",
            "warnings"
        ]
    );
    assert_eq!(summary["imported"], 3);
    assert_eq!(summary["already_present"], 0);
    assert_eq!(summary["rolled_back"], false);
    let rejected = summary["rejected"].as_array().unwrap();
    assert_eq!(rejected.len(), 1);
    assert_eq!(keys(&rejected[0]), ["file", "hint", "line", "reason"]);
    assert_eq!(rejected[0]["file"], "bad.csv");
    assert_eq!(rejected[0]["line"], 3);
    assert!(
        rejected[0]["reason"]
            .as_str()
            .unwrap()
            .contains("appears twice")
    );
    assert!(!rejected[0]["hint"].as_str().unwrap().is_empty());
}

#[test]
fn extra_columns_are_kept_and_searchable() {
    let lab = Lab::new();
    let path = manifest(&lab, "good.csv", false);
    lab.ok(&["import", &path]);
    let found = lab.json(&["find", "class:ketone"]);
    assert_eq!(
        names(&found),
        ["ir compound a", "ms-ei compound a"]
            .map(String::from)
            .into()
    );
    let id = found[0]["spectrum_id"].to_string();
    let extra = &lab.json(&["show", &id])["spectrum"]["metadata"]["extra"];
    assert_eq!(extra["class"], "ketone");
    assert_eq!(extra["lot"], "QX-12");
}

#[test]
fn extra_column_values_of_several_words_are_searchable() {
    // Regression: values that split into several terms ('QX-12', "aromatic alcohol") made
    // a phrase query over the extra-column field, which was indexed without positions, so
    // the query failed with "does not have positions indexed".
    let lab = Lab::new();
    let path = manifest(&lab, "good.csv", false);
    lab.ok(&["import", &path]);
    assert_eq!(
        names(&lab.json(&["find", "lot:QX-12"])),
        ["ir compound a", "ms-ei compound a"]
            .map(String::from)
            .into()
    );
    assert_eq!(
        names(&lab.json(&["find", "class:\"aromatic alcohol\""])),
        ["ir compound b"].map(String::from).into()
    );
}

#[test]
fn the_seed_class_column_is_searchable() {
    let lab = Lab::seeded();
    let rows = csv_rows(&seed().join("manifest.csv"));
    // The text index splits values into words, so 'class:ketone' also finds "aromatic ketone".
    let want: BTreeSet<String> = rows
        .iter()
        .filter(|r| r["class"].split_whitespace().any(|w| w == "ketone"))
        .map(|r| format!("{} {}", r["technique"], r["name"]))
        .collect();
    assert!(!want.is_empty(), "the seed manifest has no ketones");
    let found = lab.json(&["find", "class:ketone", "--top", "1000"]);
    assert_eq!(names(&found), want);
}

#[test]
fn the_submitted_by_column_wins_over_the_importer() {
    let lab = Lab::new();
    lab.write("m/a.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    lab.write("m/b.csv", ir_csv(&[(1050.0, 0.6, 12.0)]));
    lab.write(
        "m/list.csv",
        "file,technique,name,submitted_by\na.csv,ir,compound a,s.submitter\nb.csv,ir,compound b,\n",
    );
    lab.ok(&["import", "m/list.csv", "--by", "i.importer"]);
    let list = lab.json(&["list"]);
    let by = |name: &str| {
        let row = list
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == name)
            .unwrap();
        lab.json(&["show", &row["id"].to_string()])["spectrum"]["submitted_by"].clone()
    };
    assert_eq!(by("compound a"), "s.submitter");
    assert_eq!(by("compound b"), "i.importer");
}

#[test]
fn a_manifest_with_a_duplicated_row_names_the_repeat() {
    let lab = Lab::new();
    lab.write("m/a.csv", crate::util::ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.write(
        "m/list.csv",
        "file,technique,name\na.csv,ir,compound a\nb.csv,ir,compound b\na.csv,ir,compound a\n",
    );
    lab.write("m/b.csv", crate::util::ir_csv(&[(1600.0, 0.9, 10.0)]));
    let out = lab.run(&["import", "m/list.csv"]);
    assert_eq!(out.status.code(), Some(3));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("list.csv:4") && text.contains("repeats line 2"),
        "{text}"
    );
    assert!(text.contains("imported 2"), "{text}");
}

/// Distinct segments in a library's text index (tantivy names each segment's files by one id).
fn text_segments(lab: &Lab) -> usize {
    let names: BTreeSet<String> = std::fs::read_dir(lab.library().join("text-index"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !n.starts_with('.') && !n.ends_with(".json") && !n.ends_with(".lock"))
        .filter_map(|n| n.split('.').next().map(str::to_string))
        .collect();
    names.len()
}

#[test]
fn a_bulk_import_leaves_the_text_index_merged() {
    // One commit per batch of 5: without waiting for its merges the index would keep one
    // segment per batch, and every later command would open them all.
    let lab = Lab::new();
    let manifest = seed().join("manifest.csv");
    let out = lab.run_env(
        &["import", manifest.to_str().unwrap()],
        &[("WHORL_IMPORT_BATCH", "5")],
    );
    assert!(out.status.success(), "{out:?}");
    let batches = seed_rows(None).div_ceil(5);
    let segments = text_segments(&lab);
    assert!(
        segments <= 16 && segments * 4 < batches,
        "{segments} segments after {batches} commits"
    );
}

#[test]
fn files_covering_less_than_the_grid_make_one_note() {
    // Three IR files measured from 650 cm-1 only (a diamond ATR accessory's range, common
    // practice) and one over the whole grid: one note line for the import, none per file.
    let lab = Lab::new();
    let atr = |bands: &[(f64, f64, f64)]| -> String {
        let full = ir_csv(bands);
        let mut lines = full.lines();
        let mut text = format!("{}\n", lines.next().unwrap());
        for line in lines.filter(|l| l.split(',').next().unwrap().parse::<f64>().unwrap() >= 650.0)
        {
            text.push_str(line);
            text.push('\n');
        }
        text
    };
    let mut manifest = String::from("file,technique,name\n");
    for k in 0..3 {
        lab.write(
            &format!("m/atr{k}.csv"),
            atr(&[(1000.0 + 300.0 * k as f64, 0.7, 12.0)]),
        );
        manifest.push_str(&format!("atr{k}.csv,ir,atr {k}\n"));
    }
    lab.write("m/full.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    manifest.push_str("full.csv,ir,full\n");
    lab.write("m/manifest.csv", manifest);
    let out = lab.run(&["import", "m/manifest.csv"]);
    assert_eq!(out.status.code(), Some(0));
    let stderr = String::from_utf8_lossy(&out.stderr);
    let notes: Vec<&str> = stderr.lines().filter(|l| l.contains("less than")).collect();
    assert_eq!(
        notes,
        [
            "note: 3 of 4 files stored cover less than their grid: ir 650-4000 cm-1 (3); \
          scores compare each with an unknown over the range both cover"
        ],
        "{stderr}"
    );
}

#[test]
fn a_warning_repeated_by_many_rows_is_printed_once_with_a_count() {
    // Twelve 1H spectra without a solvent: each warns that the solvent's residual signals
    // stay in. People get the warning once with the other rows' lines; --json keeps all.
    let lab = Lab::new();
    let mut m = String::from("file,technique,name\n");
    for i in 0..12 {
        let f = format!("h{i}.csv");
        lab.write(
            &format!("m/{f}"),
            crate::util::nmr_csv(&[(1.0 + 0.5 * i as f64, 1.0, 0.02), (7.2, 0.5, 0.02)]),
        );
        m.push_str(&format!("{f},nmr-1h,c{i}\n"));
    }
    lab.write("m/list.csv", &m);
    let out = lab.run(&["import", "m/list.csv"]);
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    let solvent: Vec<&str> = err
        .lines()
        .filter(|l| l.contains("no solvent declared"))
        .collect();
    assert_eq!(solvent.len(), 1, "{err}");
    assert!(solvent[0].contains("m/list.csv:2 (h0.csv)"), "{err}");
    assert!(
        err.contains(
            "warning: the same for 11 more rows (lines 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, ...)"
        ),
        "{err}"
    );
    // With --json every row keeps its own warning (a second import finds them present, so a
    // fresh library).
    let lab2 = Lab::new();
    for i in 0..12 {
        lab2.write(
            &format!("m/h{i}.csv"),
            crate::util::nmr_csv(&[(1.0 + 0.5 * i as f64, 1.0, 0.02), (7.2, 0.5, 0.02)]),
        );
    }
    lab2.write("m/list.csv", &m);
    let v = lab2.json(&["import", "m/list.csv"]);
    let n = v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|w| {
            w["warning"]
                .as_str()
                .unwrap()
                .contains("no solvent declared")
        })
        .count();
    assert_eq!(n, 12, "{v}");
}

#[test]
fn add_takes_extra_fields_with_set() {
    let lab = Lab::new();
    lab.write(
        "a.csv",
        crate::util::ms_csv(&[(43, 100.0), (58, 40.0), (15, 20.0)]),
    );
    let id = lab.ok(&[
        "add",
        "a.csv",
        "-t",
        "ms-ei",
        "--name",
        "acetone",
        "--set",
        "ri=472",
        "--set",
        "ri_phase=DB-5",
    ]);
    let shown = lab.json(&["show", id.trim()]);
    assert_eq!(
        shown["spectrum"]["metadata"]["extra"]["ri"], "472",
        "{shown}"
    );
    assert_eq!(shown["spectrum"]["metadata"]["extra"]["ri_phase"], "DB-5");
    // Searchable by its key, as a manifest column is.
    let found = lab.json(&["find", "ri_phase:DB-5"]);
    assert!(found.to_string().contains("acetone"), "{found}");
    // No '=', an empty value, a key twice, a reserved key: refused, nothing stored.
    lab.write("b.csv", crate::util::ms_csv(&[(44, 100.0), (29, 40.0)]));
    for (set, why) in [
        (vec!["--set", "ri"], "has no '='"),
        (vec!["--set", "ri="], "gives no value"),
        (vec!["--set", "ri=1", "--set", "ri=2"], "given twice"),
        (vec!["--set", "whorl_status=verified"], "whorl_"),
    ] {
        let mut args = vec!["add", "b.csv", "-t", "ms-ei", "--name", "x"];
        args.extend(set);
        let text = lab.refuses(&args, 3);
        assert!(text.contains(why), "{why}: {text}");
    }
}

#[test]
fn the_two_forms_of_import_are_named_and_checked_against_the_path() {
    let lab = Lab::new();
    let path = manifest(&lab, "list.csv", false);
    // `--manifest FILE` imports a manifest and the summary names the form.
    let out = lab.ok(&["import", "--manifest", &path]);
    assert!(
        out.contains(&format!("manifest {path}: imported 3 (ids 1..3)")),
        "{out}"
    );
    let bundle = lab.path("bundle");
    lab.ok(&["export", bundle.to_str().unwrap()]);
    let bundle = bundle.to_str().unwrap();
    // A form that disagrees with what the path is, refused before anything is read.
    let text = lab.refuses(&["import", "--manifest", bundle], 3);
    assert!(text.contains("is a folder, not a manifest CSV"), "{text}");
    assert!(hint(&text).contains("--bundle DIR"), "{text}");
    let text = lab.refuses(&["import", "--bundle", &path], 3);
    assert!(text.contains("is a file, not a bundle folder"), "{text}");
    assert!(hint(&text).contains("--manifest FILE"), "{text}");
    // Each form's own options are refused with the other form.
    let text = lab.refuses(&["import", "--manifest", &path, "--untrusted"], 3);
    assert!(text.contains("--untrusted applies to bundles"), "{text}");
    let text = lab.refuses(&["import", "--bundle", bundle, "--all-or-nothing"], 3);
    assert!(
        text.contains("--all-or-nothing applies to manifests"),
        "{text}"
    );
    // Two sources at once are a usage error (clap's exit 2).
    lab.refuses(&["import", &path, "--manifest", &path], 2);
    lab.refuses(&["import"], 2);
    // `--bundle DIR` imports the bundle (into another library: here everything is present).
    let other = lab.path("other");
    lab.ok(&["--library", other.to_str().unwrap(), "init"]);
    let out = lab.ok(&[
        "--library",
        other.to_str().unwrap(),
        "import",
        "--bundle",
        bundle,
        "--untrusted",
    ]);
    assert!(out.contains("imported 3, already present 0"), "{out}");
}
