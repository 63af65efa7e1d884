//! Everyday comfort: exit codes, hints, colour, CSV and JSON output, completions, the man
//! page, whorl.toml and progress bars.

use serde_json::Value;

use crate::util::{Lab, ir_csv, unknown};

fn stderr(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn stdout(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// The error and hint lines of a failed run.
fn error_and_hint(out: &std::process::Output) -> (String, String) {
    let text = stderr(out);
    let line = |prefix: &str| {
        text.lines()
            .find(|l| l.starts_with(prefix))
            .unwrap_or_else(|| panic!("no '{prefix}' line in:\n{text}"))
            .to_string()
    };
    (line("error: "), line("hint: "))
}

#[test]
fn exit_0_on_success() {
    let lab = Lab::new();
    let out = lab.run(&["stats"]);
    assert_eq!(out.status.code(), Some(0));
    assert!(stderr(&out).is_empty());
}

#[test]
fn exit_1_when_the_machine_fails_not_the_input() {
    // The report cannot be written: an I/O failure, not a fault of the unknown.
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.ok(&["add", "a.csv", "-t", "ir", "--name", "ketone"]);
    let out = lab.run(&["search", "a.csv", "-t", "ir", "--html", "missing/r.html"]);
    assert_eq!(out.status.code(), Some(1));
    let (error, hint) = error_and_hint(&out);
    assert!(error.contains("missing/r.html"), "{error}");
    assert!(hint.contains("does not exist"), "{hint}");
}

#[test]
fn exit_2_when_the_command_line_cannot_be_parsed() {
    let lab = Lab::new();
    for args in [
        &["search", "u.csv"][..],
        &["search", "u.csv", "-t", "uv"],
        &["plot", "1"],
        &["search", "u.csv", "-t", "ir", "--json", "--csv"],
        &["completions", "tcsh"],
        &["--color", "sometimes", "stats"],
    ] {
        let out = lab.run(args);
        assert_eq!(out.status.code(), Some(2), "{args:?}\n{}", stderr(&out));
        // clap's own message ends by pointing at --help.
        assert!(stderr(&out).contains("--help"), "{args:?}");
    }
}

#[test]
fn exit_3_when_an_input_is_rejected_with_file_line_and_hint() {
    let lab = Lab::new();
    lab.write("u.csv", "x,y\n1000,0.1\n1002,abc\n");
    let out = lab.run(&["search", "u.csv", "-t", "ir"]);
    assert_eq!(out.status.code(), Some(3));
    let (error, hint) = error_and_hint(&out);
    assert!(error.contains("u.csv:3"), "{error}");
    assert!(hint.len() > 10, "{hint}");
}

#[test]
fn exit_4_when_there_is_no_library() {
    let lab = Lab::empty();
    let out = lab.run(&["search", "u.csv", "-t", "ir"]);
    assert_eq!(out.status.code(), Some(4));
    let (_, hint) = error_and_hint(&out);
    assert!(hint.contains("whorl init"), "{hint}");
}

#[test]
fn every_error_has_one_line_of_cause_and_a_hint() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.write("empty.csv", "");
    lab.write("m.csv", "file,technique\n");
    let cases: &[&[&str]] = &[
        &["show", "12345"],
        &["find", "name:(("],
        &["search", "nothing.csv", "-t", "ir"],
        &["search", "empty.csv", "-t", "ir"],
        &[
            "add", "a.csv", "-t", "ir", "--name", "x", "--cas", "50-00-1",
        ],
        &[
            "add",
            "a.csv",
            "-t",
            "ir",
            "--name",
            "x",
            "--formula",
            "C7Q8",
        ],
        &["add", "a.csv", "-t", "nmr-1h", "--name", "x"],
        &["import", "m.csv"],
        &["import", "nothing.csv"],
        &["demo", "--seed", "nowhere", "--keep", "d"],
        &["plot", "a.csv", "--svg", "p.svg"],
    ];
    for args in cases {
        let out = lab.run(args);
        assert!(!out.status.success(), "{args:?} succeeded");
        let (error, hint) = error_and_hint(&out);
        let text = stderr(&out);
        assert_eq!(
            text.lines().filter(|l| l.starts_with("error: ")).count(),
            1,
            "{args:?}: {text}"
        );
        assert!(error.len() > "error: ".len() + 5, "{args:?}: {error}");
        assert!(hint.len() > "hint: ".len() + 10, "{args:?}: {hint}");
    }
}

#[test]
fn search_prints_csv_with_one_row_per_hit() {
    let lab = Lab::seeded_with(&["ethyl acetate", "methyl acetate", "butyl acetate"]);
    let text = lab.ok(&[
        "search",
        &unknown("u01.ir.csv"),
        "-t",
        "ir",
        "--top",
        "2",
        "--csv",
    ]);
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let headers = reader.headers().unwrap().clone();
    assert_eq!(&headers[0], "rank");
    assert!(headers.iter().any(|h| h == "peak_jaccard"));
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), 2);
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    assert_eq!(&rows[0][col("name")], "ethyl acetate");
    assert_eq!(&rows[0][col("measure")], "corr");
    let json = lab.json(&["search", &unknown("u01.ir.csv"), "-t", "ir", "--top", "2"]);
    let score: f64 = rows[1][col("score")].parse().unwrap();
    assert!((score - json["hits"][1]["score"].as_f64().unwrap()).abs() < 1e-6);
}

#[test]
fn every_command_that_prints_data_speaks_json() {
    let lab = Lab::empty();
    let parse = |args: &[&str]| -> Value {
        let out = lab.run(args);
        assert!(out.status.success(), "{args:?}: {}", stderr(&out));
        serde_json::from_slice(&out.stdout)
            .unwrap_or_else(|e| panic!("{args:?} did not print JSON: {e}\n{}", stdout(&out)))
    };
    assert!(parse(&["init", "--json"])["state_hash"].is_string());
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.write("m/b.csv", ir_csv(&[(1740.0, 0.9, 10.0)]));
    lab.write("m/manifest.csv", "file,technique,name\nb.csv,ir,ester\n");
    let added = parse(&["add", "a.csv", "-t", "ir", "--name", "ketone", "--json"]);
    let id = added["spectrum_id"].as_i64().unwrap().to_string();
    assert_eq!(
        parse(&["import", "m/manifest.csv", "--json"])["imported"],
        1
    );
    assert_eq!(
        parse(&["search", "a.csv", "-t", "ir", "--include-pending", "--json"])["hits"][0]["name"],
        "ketone"
    );
    assert_eq!(parse(&["find", "ketone", "--json"])[0]["name"], "ketone");
    assert_eq!(
        parse(&["show", &id, "--json"])["spectrum"]["metadata"]["name"],
        "ketone"
    );
    assert_eq!(parse(&["list", "--json"]).as_array().unwrap().len(), 2);
    assert!(parse(&["stats", "--json"])["state_hash"].is_string());
    assert_eq!(
        parse(&["plot", &id, "--svg", "p.svg", "--json"])["spectra"][0]["label"],
        format!("ketone (spectrum {id})")
    );
    assert_eq!(parse(&["config", "--json"])["found"], false);
    let demo = parse(&["demo", "--top", "1", "--json"]);
    assert_eq!(demo["unknowns"], demo["searches"].as_array().unwrap().len());
    assert!(demo["searches"][0]["report"]["hits"].is_array());
}

#[test]
fn colour_only_on_request_or_a_terminal_and_never_under_no_color() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.write("b.csv", ir_csv(&[(1725.0, 0.9, 10.0)]));
    lab.ok(&["add", "a.csv", "-t", "ir", "--name", "ketone"]);
    lab.ok(&["add", "b.csv", "-t", "ir", "--name", "aldehyde"]);
    lab.write(
        "u.csv",
        ir_csv(&[(1000.0, 0.9, 10.0), (1715.0, 0.05, 10.0)]),
    );
    let search = ["search", "u.csv", "-t", "ir", "--include-pending"];
    // Into a pipe (as here), auto means no colour at all.
    let plain = stdout(&lab.run(&search));
    assert!(!plain.contains('\x1b'), "{plain}");
    assert!(plain.contains("warning"), "a weak match warns: {plain}");
    // Asked for: the first hit is bold and warnings are yellow; the columns still align.
    let mut args = vec!["--color", "always"];
    args.extend(search);
    let coloured = stdout(&lab.run(&args));
    assert!(coloured.contains("\x1b[1m   1  "), "{coloured}");
    assert!(coloured.contains("\x1b[1;33mwarning\x1b[0m"), "{coloured}");
    let strip = coloured
        .replace("\x1b[1;33m", "")
        .replace("\x1b[1m", "")
        .replace("\x1b[0m", "");
    let no_time = |s: &str| s.lines().filter(|l| !l.starts_with("warning")).count();
    assert_eq!(no_time(&strip), no_time(&plain));
    // NO_COLOR turns auto off (and an explicit --color never too).
    let out = lab.run_env(&search, &[("NO_COLOR", "1")]);
    assert!(!stdout(&out).contains('\x1b'));
    let mut args = vec!["--color", "never"];
    args.extend(search);
    assert!(!stdout(&lab.run(&args)).contains('\x1b'));
    // Errors are coloured on request too.
    let out = lab.run(&["--color", "always", "show", "999"]);
    assert!(
        stderr(&out).starts_with("\x1b[1;31merror:\x1b[0m"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn hit_tables_have_aligned_columns() {
    let lab = Lab::seeded_with(&["ethyl acetate", "methyl acetate", "butyl acetate"]);
    let text = lab.ok(&["search", &unknown("u01.ir.csv"), "-t", "ir"]);
    let lines: Vec<&str> = text.lines().collect();
    let header = lines.iter().position(|l| l.starts_with("rank  ")).unwrap();
    let at = lines[header].find("compound").unwrap();
    let names = ["ethyl acetate", "methyl acetate", "butyl acetate"];
    for row in &lines[header + 1..header + 4] {
        assert!(
            names.iter().any(|n| row[at..].starts_with(n)),
            "compound column misaligned: {row:?}"
        );
        // Right-aligned numbers end where their header ends.
        let score_end = lines[header].find("score").unwrap() + "score".len();
        assert!(
            row[..score_end].ends_with(|c: char| c.is_ascii_digit()),
            "{row:?}"
        );
    }
}

#[test]
fn completions_for_the_common_shells() {
    let lab = Lab::empty();
    for (shell, marker) in [
        ("bash", "complete -F"),
        ("zsh", "#compdef whorl"),
        ("fish", "complete -c whorl"),
    ] {
        let script = lab.ok(&["completions", shell]);
        assert!(script.contains(marker), "{shell}");
        for command in ["search", "plot", "completions", "html", "technique"] {
            assert!(script.contains(command), "{shell} lacks {command}");
        }
    }
}

#[test]
fn the_man_page_covers_commands_exit_codes_and_settings() {
    let page = Lab::empty().ok(&["man"]);
    assert!(
        page.starts_with(".ie") || page.contains(".TH whorl"),
        "{page}"
    );
    for needle in [
        "search",
        "plot",
        "EXIT STATUS",
        "whorl.toml",
        "NO_COLOR",
        "WHORL_LIBRARY",
    ] {
        assert!(page.contains(needle), "man page lacks {needle}");
    }
    // Every exit code, 5 and 6 among them, in the EXIT STATUS section.
    let status = page.split(".SH EXIT STATUS").nth(1).unwrap();
    for code in 0..=6 {
        assert!(
            status.contains(&format!(".TP\n{code}\n")),
            "exit {code}:\n{status}"
        );
    }
}

#[test]
fn config_names_the_thresholds_in_use_when_the_file_sets_none() {
    let text = Lab::new().ok(&["config"]);
    let at = text.find("[thresholds]").expect("a thresholds table");
    let after = &text[at..];
    assert!(after.contains("# not set"), "{text}");
    for technique in [
        "ir correlation:",
        "raman derivative:",
        "ms-ei entropy:",
        "nmr-1h cosine:",
    ] {
        assert!(after.contains(technique), "{technique}: {text}");
    }
}

#[test]
fn whorl_toml_sets_search_defaults() {
    let lab = Lab::seeded_with(&[
        "ethyl acetate",
        "methyl acetate",
        "butyl acetate",
        "benzaldehyde",
    ]);
    let u = unknown("u01.ir.csv");
    assert_eq!(
        lab.json(&["search", &u, "-t", "ir"])["hits"]
            .as_array()
            .unwrap()
            .len(),
        4
    );
    lab.write(
        "lib/whorl.toml",
        "# lab defaults\n[search]\ntop = 3\n\n[technique.ir]\ntop = 2\nspectral_weight = 0.5\npeak_tolerance = 8\n\n[technique.nmr-1h]\nsolvent = \"CDCl3\"\n\n[thresholds]\nweak_score = 0.99\n",
    );
    let r = lab.json(&["search", &u, "-t", "ir"]);
    assert_eq!(r["hits"].as_array().unwrap().len(), 2);
    assert_eq!(r["parameters"]["score"]["spectral_weight"], 0.5);
    assert_eq!(r["parameters"]["score"]["peak_tolerance"], 8.0);
    assert_eq!(r["parameters"]["thresholds"]["weak_score"], 0.99);
    assert!(
        r["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w["code"] == "weak-match"
                && w["message"].as_str().unwrap().contains("below 0.99")),
        "{r}"
    );
    // --top (or -n) on the command line wins over the file.
    let r = lab.json(&["search", &u, "-t", "ir", "--top", "3"]);
    assert_eq!(r["hits"].as_array().unwrap().len(), 3);
    let r = lab.json(&["search", &u, "-t", "ir", "-n", "1"]);
    assert_eq!(r["hits"].as_array().unwrap().len(), 1);
    // identify lists `[search] top` compounds by default, as search lists hits.
    let fused = |extra: &[&str]| {
        let mut args = vec!["identify", "--ir", u.as_str()];
        args.extend_from_slice(extra);
        lab.json(&args)["fusion"]["compounds"]
            .as_array()
            .unwrap()
            .len()
    };
    assert_eq!(fused(&[]), 3);
    assert_eq!(fused(&["-n", "2"]), 2);
    // The NMR solvent default applies when --solvent is not given.
    let r = lab.json(&["search", &unknown("u14.nmr-1h.csv"), "-t", "nmr-1h"]);
    assert_eq!(r["unknown"]["solvent"], "CDCl3");
    let c = lab.json(&["config"]);
    assert_eq!(c["found"], true);
    assert_eq!(c["config"]["technique"]["ir"]["top"], 2);
}

#[test]
fn a_malformed_whorl_toml_names_file_line_and_fix() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    for (text, line, says) in [
        (
            "[search]\ntop = 5\n[technique.ir]\nspectral_weight = 2\n",
            4,
            "not between 0 and 1",
        ),
        ("[search]\ntopp = 5\n", 2, "unknown field"),
        ("[search\n", 1, ""),
        (
            "[technique.nmr-1h]\nsolvent = \"CDCl4\"\n",
            2,
            "unknown NMR solvent",
        ),
        (
            "[identity]\nmin_techniques = 0\n",
            1,
            "min_techniques must be 1 or more",
        ),
    ] {
        lab.write("lib/whorl.toml", text);
        for args in [&["search", "a.csv", "-t", "ir"][..], &["config"]] {
            let out = lab.run(args);
            assert_eq!(out.status.code(), Some(3), "{text:?}");
            let (error, hint) = error_and_hint(&out);
            assert!(error.contains(&format!("whorl.toml:{line}: ")), "{error}");
            assert!(error.contains(says), "{error}");
            assert!(hint.contains("Configuration"), "{hint}");
        }
    }
}

#[test]
fn progress_bars_stay_off_a_stderr_that_is_not_a_terminal() {
    let lab = Lab::new();
    lab.write("m/a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.write("m/b.csv", ir_csv(&[(1740.0, 0.9, 10.0)]));
    lab.write(
        "m/manifest.csv",
        "file,technique,name\na.csv,ir,a\nb.csv,ir,b\n",
    );
    let out = lab.run(&["import", "m/manifest.csv"]);
    assert!(out.status.success());
    let err = stderr(&out);
    assert!(!err.contains("importing") && !err.contains('\r'), "{err:?}");
}

/// The one JSON error object a failed `--json` run prints on stderr.
fn json_error(out: &std::process::Output) -> Value {
    let text = stderr(out);
    let v: Value = serde_json::from_str(text.trim())
        .unwrap_or_else(|e| panic!("stderr is not one JSON object ({e}):\n{text}"));
    v["error"].clone()
}

#[test]
fn revise_withdraw_policy_and_witness_print_json() {
    let lab = Lab::new();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.9, 10.0)]));
    lab.ok(&["add", "a.csv", "-t", "ir", "--name", "ketone"]);
    let v = lab.json(&["revise", "1", "--name", "butanone", "--reason", "typo"]);
    assert_eq!(v["spectrum"], 1);
    assert_eq!(v["revision"], 2);
    assert_eq!(v["status"], "pending");
    let v = lab.json(&["policy"]);
    assert_eq!(v["self_review"], "forbidden");
    assert_eq!(v["sign_offs"], "any");
    let witness = lab.path("heads.txt");
    let v = lab.json(&["witness", "write", witness.to_str().unwrap()]);
    assert!(v["event"].as_i64().unwrap() >= 1);
    assert_eq!(v["hash"].as_str().unwrap().len(), 64);
    let v = lab.json(&["withdraw", "1", "--reason", "contaminated"]);
    assert_eq!(v["status"], "withdrawn");
    assert_eq!(v["reason"], "contaminated");
    // The same facts as the library's own JSON.
    let shown = lab.json(&["show", "1"]);
    assert_eq!(shown["spectrum"]["status"], "withdrawn", "{shown}");
    assert_eq!(shown["withdrawn_reason"], "contaminated");
}

#[test]
fn with_json_errors_are_json_with_kind_hint_file_line_and_exit_code() {
    let lab = Lab::new();
    // An input error about one line of a file.
    lab.write("bad.csv", "wavenumber,absorbance\n1000,0.1\n1001,abc\n");
    let out = lab.run(&["add", "bad.csv", "-t", "ir", "--name", "x", "--json"]);
    assert_eq!(out.status.code(), Some(3));
    assert!(stdout(&out).is_empty(), "nothing on stdout");
    let e = json_error(&out);
    assert_eq!(e["kind"], "input");
    assert_eq!(e["line"], 3);
    assert!(e["file"].as_str().unwrap().ends_with("bad.csv"), "{e}");
    assert!(!e["hint"].as_str().unwrap().is_empty());
    assert_eq!(e["exit_code"], 3);
    // An unknown id.
    let out = lab.run(&["withdraw", "99", "--reason", "r", "--json"]);
    assert_eq!(out.status.code(), Some(3));
    let e = json_error(&out);
    assert_eq!(e["kind"], "not-found");
    assert!(e.get("line").is_none());
    // A command line that cannot be parsed: clap's exit code 2, still JSON.
    let out = lab.run(&["revise", "1", "--name", "x", "--json"]);
    assert_eq!(out.status.code(), Some(2));
    let e = json_error(&out);
    assert_eq!(e["kind"], "usage");
    assert!(e["message"].as_str().unwrap().contains("--reason"), "{e}");
    // No library: exit 4.
    let out = lab.run(&["--library", "/nonexistent/lib", "stats", "--json"]);
    assert_eq!(out.status.code(), Some(4));
    assert_eq!(json_error(&out)["kind"], "library");
    // Without --json the same error is the two plain lines.
    let out = lab.run(&["withdraw", "99", "--reason", "r"]);
    let (error, hint) = error_and_hint(&out);
    assert!(error.contains("no spectrum with id 99"), "{error}");
    assert!(hint.starts_with("hint: "));
}
