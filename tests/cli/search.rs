use serde_json::Value;

use crate::util::{Lab, csv_rows, hint, ir_csv, keys, seed, sha256_of};

/// Three IR references with different bands and metadata: `t` is tagged solvent with
/// formula C7H8, `k` is tagged solvent with another formula, `c` has C7H8 but no solvent tag.
fn small_lab() -> Lab {
    let lab = Lab::new();
    let t = ir_csv(&[(3030.0, 0.3, 10.0), (1605.0, 0.5, 8.0), (730.0, 0.9, 8.0)]);
    let k = ir_csv(&[(1715.0, 0.9, 10.0), (1360.0, 0.4, 10.0)]);
    let c = ir_csv(&[(3300.0, 0.6, 60.0), (1050.0, 0.8, 12.0)]);
    lab.add(
        "t.csv",
        &t,
        "ir",
        "compound t",
        &["--tag", "solvent", "--formula", "C7H8"],
    );
    lab.add(
        "k.csv",
        &k,
        "ir",
        "compound k",
        &["--tag", "solvent", "--formula", "C3H6O"],
    );
    lab.add(
        "c.csv",
        &c,
        "ir",
        "compound c",
        &["--tag", "reagent", "--formula", "C7H8"],
    );
    // Search covers verified spectra by default: a second analyst signs them off.
    lab.ok(&["review", "1", "2", "3", "--approve", "--by", "r.second"]);
    lab
}

fn hits(report: &Value) -> &Vec<Value> {
    report["hits"].as_array().expect("hits is an array")
}

/// The search arguments for one row of the seed unknowns manifest.
fn unknown_args(row: &std::collections::BTreeMap<String, String>) -> Vec<String> {
    let file = seed().join("unknowns").join(&row["file"]);
    let mut args = vec![
        "search".to_string(),
        file.to_str().unwrap().to_string(),
        "--technique".to_string(),
        row["technique"].clone(),
    ];
    for (column, flag) in [
        ("solvent", "--solvent"),
        ("y_unit", "--y-unit"),
        ("x_unit", "--x-unit"),
    ] {
        if !row[column].is_empty() {
            args.push(format!("{flag}={}", row[column]));
        }
    }
    args
}

fn seed_unknowns() -> Vec<std::collections::BTreeMap<String, String>> {
    let rows = csv_rows(&seed().join("unknowns").join("manifest.csv"));
    assert!(!rows.is_empty(), "the unknowns manifest has no rows");
    rows
}

#[test]
fn an_identical_spectrum_is_hit_1_with_score_1() {
    let lab = small_lab();
    let report = lab.json(&["search", "k.csv", "-t", "ir"]);
    let h = hits(&report);
    assert_eq!(h[0]["name"], "compound k");
    assert_eq!(h[0]["rank"], 1);
    // Every measure of a spectrum against itself is at its maximum.
    assert!(
        (h[0]["score"].as_f64().unwrap() - 1.0).abs() < 1e-6,
        "{}",
        h[0]
    );
    assert_eq!(report["candidates"], 3);
}

#[test]
fn search_json_has_the_documented_keys() {
    let lab = small_lab();
    let report = lab.json(&["search", "k.csv", "-t", "ir"]);
    assert_eq!(
        keys(&report),
        [
            "candidates",
            "caution",
            "confidence",
            "excluded_count",
            "hits",
            "library",
            "margin",
            "parameters",
            "searched_at",
            "tool_version",
            "unknown",
            "verdict",
            "warnings",
        ]
    );
    assert_eq!(
        keys(&report["library"]),
        ["last_event", "path", "state_hash"]
    );
    assert_eq!(report["library"]["path"], lab.library().to_str().unwrap());
    assert_eq!(report["library"]["state_hash"], lab.state_hash());
    let unknown = &report["unknown"];
    for key in ["file", "sha256", "technique"] {
        assert!(
            unknown.get(key).is_some(),
            "unknown has no {key}: {unknown}"
        );
    }
    assert_eq!(unknown["file"], "k.csv");
    assert_eq!(unknown["sha256"], sha256_of(&lab.path("k.csv")));
    assert_eq!(unknown["technique"], "ir");
    assert!(report["parameters"].is_object());
    assert!(report["warnings"].is_array());
    assert!(
        report["caution"]
            .as_str()
            .unwrap()
            .contains("not proof of identity"),
        "{}",
        report["caution"]
    );
    assert_eq!(hits(&report).len(), 3);
    for hit in hits(&report) {
        assert_eq!(
            keys(hit),
            [
                "cas",
                "components",
                "compound_id",
                "formula",
                "name",
                "rank",
                "score",
                "spectrum_id",
                "status",
                "technique",
            ]
        );
        assert_eq!(hit["technique"], "ir");
        assert_eq!(hit["status"], "verified");
    }
}

#[test]
fn scores_lie_in_0_to_1_and_are_sorted_best_first() {
    let lab = Lab::seeded();
    let manifest = csv_rows(&seed().join("manifest.csv"));
    for row in seed_unknowns() {
        let mut args = unknown_args(&row);
        args.extend(["--top".to_string(), "1000".to_string()]);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let report = lab.json(&args);
        let h = hits(&report);
        // With a large --top every spectrum of the technique is listed.
        let of_technique = manifest
            .iter()
            .filter(|r| r["technique"] == row["technique"])
            .count();
        assert_eq!(h.len(), of_technique, "{}", row["file"]);
        assert_eq!(report["candidates"], of_technique);
        let scores: Vec<f64> = h.iter().map(|x| x["score"].as_f64().unwrap()).collect();
        assert!(
            scores.iter().all(|s| (0.0..=1.0).contains(s)),
            "{}: {scores:?}",
            row["file"]
        );
        assert!(
            scores.windows(2).all(|w| w[0] >= w[1]),
            "{}: not sorted {scores:?}",
            row["file"]
        );
        let ranks: Vec<u64> = h.iter().map(|x| x["rank"].as_u64().unwrap()).collect();
        assert_eq!(ranks, (1..=h.len() as u64).collect::<Vec<_>>());
    }
}

#[test]
fn where_restricts_the_candidates_to_matching_spectra() {
    let lab = small_lab();
    let report = lab.json(&[
        "search",
        "k.csv",
        "-t",
        "ir",
        "--where",
        "tag:solvent AND formula:C7H8",
    ]);
    assert_eq!(report["candidates"], 1);
    let h = hits(&report);
    assert_eq!(h.len(), 1);
    assert_eq!(h[0]["name"], "compound t");
    assert_eq!(
        report["parameters"]["where"],
        "tag:solvent AND formula:C7H8"
    );
}

#[test]
fn where_on_the_seed_library_keeps_only_matching_spectra() {
    let lab = Lab::seeded();
    let manifest = csv_rows(&seed().join("manifest.csv"));
    let matching = manifest
        .iter()
        .filter(|r| {
            r["technique"] == "ir"
                && r["formula"] == "C7H8"
                && r["tags"].split(';').any(|t| t.trim() == "solvent")
        })
        .count();
    assert!(
        matching > 0,
        "no IR solvent with formula C7H8 in the seed manifest"
    );
    let unknown = seed().join("unknowns").join("u01.ir.csv");
    let report = lab.json(&[
        "search",
        unknown.to_str().unwrap(),
        "-t",
        "ir",
        "--top",
        "1000",
        "--where",
        "tag:solvent AND formula:C7H8",
    ]);
    assert_eq!(report["candidates"], matching);
    assert_eq!(hits(&report).len(), matching);
    assert!(hits(&report).iter().all(|h| h["formula"] == "C7H8"));
}

#[test]
fn where_matching_nothing_gives_no_hits_and_a_warning() {
    let lab = small_lab();
    let report = lab.json(&["search", "k.csv", "-t", "ir", "--where", "name:nosuchname"]);
    assert_eq!(report["candidates"], 0);
    assert!(hits(&report).is_empty());
    let warnings = report["warnings"].as_array().unwrap();
    assert!(
        warnings.iter().any(|w| w["code"] == "no-candidates"
            && w["message"]
                .as_str()
                .unwrap()
                .contains("no library spectrum")),
        "{warnings:?}"
    );
}

#[test]
fn a_malformed_where_query_is_refused_with_a_hint() {
    let lab = small_lab();
    let text = lab.refuses(&["search", "k.csv", "-t", "ir", "--where", "name:("], 3);
    assert!(text.contains("name:("), "{text}");
    assert!(!hint(&text).is_empty());
}

#[test]
fn top_limits_the_number_of_hits() {
    let lab = small_lab();
    for n in [1usize, 2, 3] {
        let report = lab.json(&["search", "k.csv", "-t", "ir", "--top", &n.to_string()]);
        assert_eq!(hits(&report).len(), n);
        assert_eq!(report["parameters"]["top"], n);
    }
    // More than the library holds lists what there is.
    let report = lab.json(&["search", "k.csv", "-t", "ir", "--top", "50"]);
    assert_eq!(hits(&report).len(), 3);
}

#[test]
fn a_search_changes_nothing_in_the_library() {
    let lab = small_lab();
    let before = lab.state();
    lab.ok(&["search", "t.csv", "-t", "ir"]);
    assert_eq!(lab.state(), before);
}

/// The start and end (byte offsets) of a column's header word in the header line.
fn column(header: &str, name: &str) -> (usize, usize) {
    let start = header
        .split(' ')
        .scan(0, |at, word| {
            let here = *at;
            *at += word.len() + 1;
            Some((here, word))
        })
        .find(|(_, word)| *word == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
        .0;
    (start, start + name.len())
}

#[test]
fn human_output_shows_the_state_hash_the_caution_and_aligned_columns() {
    let lab = Lab::seeded();
    let unknown = seed().join("unknowns").join("u01.ir.csv");
    let unknown = unknown.to_str().unwrap();
    let out = lab.ok(&["search", unknown, "-t", "ir", "--top", "8"]);
    let state_hash = lab.state_hash();
    // The first 16 hex digits, then the closing bracket: no more, no less.
    assert!(
        out.contains(&format!("(state hash {})", &state_hash[..16])),
        "{out}"
    );
    let caution = lab.json(&["search", unknown, "-t", "ir"])["caution"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(
        out.lines()
            .any(|l| l.starts_with("caution") && l.ends_with(&caution)),
        "{out}"
    );

    let lines: Vec<&str> = out.lines().collect();
    let first = lines
        .iter()
        .position(|l| l.starts_with("rank "))
        .expect("a table header");
    let table: Vec<&str> = lines[first..]
        .iter()
        .take_while(|l| !l.is_empty())
        .copied()
        .collect();
    assert_eq!(table.len(), 1 + 8, "{out}");
    let header = table[0];
    // Numbers are right-aligned under their header, words left-aligned.
    for name in ["rank", "score", "peaks", "id"] {
        let (_, end) = column(header, name);
        for row in &table[1..] {
            let b = row.as_bytes();
            assert!(
                b[end - 1] != b' ' && b.get(end).is_none_or(|&c| c == b' '),
                "column {name} is not right-aligned in {row:?}\n{out}"
            );
        }
    }
    for name in ["compound", "formula", "status"] {
        let (start, _) = column(header, name);
        for row in &table[1..] {
            let b = row.as_bytes();
            assert!(
                b[start] != b' ' && b[start - 1] == b' ',
                "column {name} is not left-aligned in {row:?}\n{out}"
            );
        }
    }
}

#[test]
fn every_example_unknown_has_its_expected_compound_at_rank_1() {
    let lab = Lab::seeded();
    let mut misses = Vec::new();
    for row in seed_unknowns() {
        let args = unknown_args(&row);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let report = lab.json(&args);
        let best = &hits(&report)[0];
        if best["name"] != row["expected"].as_str()
            || best["technique"] != row["technique"].as_str()
        {
            misses.push(format!(
                "{}: expected {}, rank 1 is {} ({})",
                row["file"], row["expected"], best["name"], best["score"]
            ));
        }
    }
    assert!(misses.is_empty(), "{}", misses.join("\n"));
}

#[test]
fn several_unknowns_are_searched_together_one_hit_list_each() {
    let lab = small_lab();
    let dir = lab.path("batch");
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::copy(lab.path("k.csv"), dir.join("a-k.csv")).unwrap();
    std::fs::copy(lab.path("t.csv"), dir.join("b-t.csv")).unwrap();
    let lines = lab.ok(&["search", "--batch", "batch", "c.csv", "-t", "ir", "--json"]);
    let reports: Vec<Value> = lines
        .lines()
        .map(|l| serde_json::from_str(l).expect("one JSON report per line"))
        .collect();
    assert_eq!(reports.len(), 3);
    // Files given come first, then the folder's files by name; each list equals a single search.
    for (report, file) in reports
        .iter()
        .zip(["c.csv", "batch/a-k.csv", "batch/b-t.csv"])
    {
        let single = lab.json(&["search", file, "-t", "ir"]);
        assert_eq!(hits(report), hits(&single), "{file}");
    }
    assert_eq!(hits(&reports[1])[0]["name"], "compound k");
    let table = lab.ok(&["search", "k.csv", "t.csv", "-t", "ir"]);
    assert_eq!(table.matches("caution").count(), 2);
    let err = lab.fails(
        &["search", "k.csv", "t.csv", "-t", "ir", "--save", "s.json"],
        3,
    );
    assert!(err.contains("one unknown"), "{err}");
}

#[test]
fn a_batch_folder_that_is_missing_empty_or_a_file_is_an_input_error() {
    let lab = small_lab();
    let err = lab.fails(&["search", "--batch", "nowhere", "-t", "ir"], 3);
    assert!(err.contains("batch folder nowhere does not exist"), "{err}");
    assert!(err.contains("hint:"), "{err}");
    let err = lab.fails(&["search", "--batch", "k.csv", "-t", "ir"], 3);
    assert!(err.contains("k.csv is not a folder"), "{err}");
    std::fs::create_dir_all(lab.path("empty")).unwrap();
    let err = lab.fails(&["search", "--batch", "empty", "-t", "ir"], 3);
    assert!(err.contains("holds no files"), "{err}");
}

#[test]
fn a_search_writes_the_vector_cache_and_check_rebuilds_it() {
    let lab = small_lab();
    lab.ok(&["search", "k.csv", "-t", "ir"]);
    let cache = lab.library().join("cache").join("ir.corr.wvc");
    assert!(cache.is_file());
    std::fs::write(&cache, b"damaged").unwrap();
    // A damaged cache is never served: the search rebuilds it and finds the same hits.
    let report = lab.json(&["search", "k.csv", "-t", "ir"]);
    assert_eq!(hits(&report)[0]["name"], "compound k");
    let out = lab.ok(&["check"]);
    assert!(out.contains("vector cache for ir rebuilt"), "{out}");
    assert!(std::fs::metadata(&cache).unwrap().len() > 512);
}

#[test]
fn near_identical_hits_print_with_the_digits_that_rank_them() {
    // Two references that differ in one point's absorbance by 0.002: searched with the first
    // as the unknown, both score 1.000 to three decimals. The table widens the score column
    // until the two differ; JSON and CSV carry the scores at full precision.
    let lab = Lab::new();
    let bands = [(1715.0, 0.9, 10.0), (1360.0, 0.4, 10.0)];
    let exact = ir_csv(&bands);
    let nudged: String = exact
        .lines()
        .map(|line| match line.strip_prefix("1716,") {
            Some(y) => format!("1716,{:.6}\n", y.parse::<f64>().unwrap() + 0.002),
            None => format!("{line}\n"),
        })
        .collect();
    assert_ne!(exact, nudged);
    lab.add("a.csv", &exact, "ir", "original", &[]);
    lab.add("b.csv", &nudged, "ir", "nudged", &[]);
    lab.approve_all();
    let path = lab.path("a.csv");
    let args = ["search", path.to_str().unwrap(), "-t", "ir", "--top", "2"];
    let json = lab.json(&args);
    let scores: Vec<f64> = json["hits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|h| h["score"].as_f64().unwrap())
        .collect();
    assert_eq!(scores.len(), 2, "{json}");
    assert!(scores[0] > scores[1], "{scores:?}");
    assert_eq!(format!("{:.3}", scores[0]), format!("{:.3}", scores[1]));
    // The digits the table needs: the fewest, from three up, at which the two differ.
    let digits = (3..=9)
        .find(|&d| format!("{:.d$}", scores[0]) != format!("{:.d$}", scores[1]))
        .unwrap();
    assert!(digits > 3);
    let table = lab.ok(&args);
    for s in &scores {
        let shown = format!("{s:.digits$}");
        assert!(table.contains(&shown), "{shown} not in\n{table}");
    }
    let margin = format!("margin    {:.digits$} between", scores[0] - scores[1]);
    assert!(table.contains(&margin), "{margin:?} not in\n{table}");
    // CSV: the same f64 as the JSON (serde_json's default float reader, used here to read the
    // JSON, may be one unit in the last place off; Rust's own parse of the CSV is exact).
    let mut csv_args = args.to_vec();
    csv_args.push("--csv");
    let text = lab.ok(&csv_args);
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let headers = reader.headers().unwrap().clone();
    let col = headers.iter().position(|h| h == "score").unwrap();
    let csv_scores: Vec<f64> = reader
        .records()
        .map(|r| r.unwrap()[col].parse().unwrap())
        .collect();
    for (c, j) in csv_scores.iter().zip(&scores) {
        assert!((c - j).abs() <= 2.0 * f64::EPSILON, "{c} against {j}");
    }
    assert!(csv_scores[0] > csv_scores[1]);
}

#[test]
fn a_batch_goes_on_past_an_unreadable_file_and_fails_at_the_end() {
    let lab = small_lab();
    lab.write(
        "batch/1.csv",
        ir_csv(&[(1715.0, 0.9, 10.0), (1360.0, 0.4, 10.0)]),
    );
    lab.write("batch/2.csv", "x,y\n");
    lab.write(
        "batch/3.csv",
        ir_csv(&[(730.0, 0.9, 8.0), (1605.0, 0.5, 8.0)]),
    );
    let args = ["search", "-t", "ir", "--batch", "batch"];
    // JSON lines: two hit lists and, in the second place, the error of 2.csv.
    let mut json_args = args.to_vec();
    json_args.push("--json");
    let out = lab.run(&json_args);
    assert_eq!(out.status.code(), Some(3));
    let lines: Vec<Value> = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(lines.len(), 3);
    assert_eq!(hits(&lines[0])[0]["name"], "compound k");
    assert!(lines[1]["unknown"].as_str().unwrap().ends_with("2.csv"));
    assert_eq!(lines[1]["error"]["kind"], "input");
    assert!(
        lines[1]["error"]["hint"]
            .as_str()
            .is_some_and(|h| !h.is_empty())
    );
    assert_eq!(hits(&lines[2])[0]["name"], "compound t");
    // With --json the closing error on stderr is JSON too.
    let err: Value = serde_json::from_str(String::from_utf8(out.stderr).unwrap().trim()).unwrap();
    assert!(err["error"]["message"].as_str().unwrap().contains("1 of 3"));
    // CSV: one header; the failed file's row carries its error and nothing else.
    let mut csv_args = args.to_vec();
    csv_args.push("--csv");
    let out = lab.run(&csv_args);
    assert_eq!(out.status.code(), Some(3));
    let text = String::from_utf8(out.stdout).unwrap();
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let headers = reader.headers().unwrap().clone();
    assert_eq!(&headers[0], "unknown");
    assert_eq!(&headers[1], "error");
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    let failed: Vec<&csv::StringRecord> = rows.iter().filter(|r| !r[1].is_empty()).collect();
    assert_eq!(failed.len(), 1);
    assert!(failed[0][0].ends_with("2.csv"));
    assert!(failed[0].iter().skip(2).all(str::is_empty));
    assert!(rows.iter().filter(|r| r[1].is_empty()).count() >= 2);
    // Text: the error in its place, between the two hit lists.
    let out = lab.run(&args);
    assert_eq!(out.status.code(), Some(3));
    let text = String::from_utf8(out.stdout).unwrap();
    let (k, bad, t) = (
        text.find("compound k").unwrap(),
        text.find("error ").unwrap(),
        text.find("unknown   batch/3.csv").unwrap(),
    );
    assert!(k < bad && bad < t, "{text}");
}

#[test]
fn csv_rows_carry_the_verdict_margin_warning_codes_and_library_state_as_the_json_does() {
    let lab = small_lab();
    lab.write("u.csv", ir_csv(&[(1715.0, 0.9, 10.0), (1360.0, 0.4, 10.0)]));
    // A pending spectrum too, so that the list warns that it was not searched.
    lab.add(
        "p.csv",
        &ir_csv(&[(2100.0, 0.9, 10.0)]),
        "ir",
        "compound p",
        &[],
    );
    let report = lab.json(&["search", "u.csv", "-t", "ir"]);
    let text = lab.ok(&["search", "u.csv", "-t", "ir", "--csv"]);
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let headers = reader.headers().unwrap().clone();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), hits(&report).len());
    let codes: Vec<&str> = report["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["code"].as_str().unwrap())
        .collect();
    assert!(codes.contains(&"pending-not-searched"), "{codes:?}");
    for row in &rows {
        assert_eq!(
            &row[col("verdict")],
            report["verdict"]["verdict"].as_str().unwrap()
        );
        assert_eq!(
            row[col("margin")].parse::<f64>().unwrap(),
            report["margin"].as_f64().unwrap()
        );
        assert_eq!(&row[col("warnings")], codes.join(";"));
        assert_eq!(
            &row[col("library_state_hash")],
            report["library"]["state_hash"].as_str().unwrap()
        );
    }
    // A list without hits is one row, so its verdict and warnings are still read.
    let none = lab.ok(&[
        "search",
        "u.csv",
        "-t",
        "ir",
        "--where",
        "name:nosuchname",
        "--csv",
    ]);
    let mut reader = csv::Reader::from_reader(none.as_bytes());
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 1);
    assert_eq!(&rows[0][col("rank")], "");
    assert_eq!(&rows[0][col("verdict")], "no-acceptable-match");
    assert!(rows[0][col("warnings")].contains("no-candidates"));
}
