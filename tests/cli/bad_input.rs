//! Every rejected input: the documented exit code (3 for input, 4 for the library), an
//! error that names the file (and line), a `hint:` line, and a library left as it was.

use crate::util::{
    Lab, hint, ir_csv, ir_micrometre_csv, ms_csv, nmr_csv, raman_csv, sha256_of, xy_csv,
};

/// A library holding one spectrum, so that "unchanged" has something to compare.
fn lab() -> Lab {
    let lab = Lab::new();
    lab.add(
        "ref.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "reference",
        &[],
    );
    lab
}

/// `whorl add bad.csv` with `contents` must fail with exit 3 and an error starting with
/// `at` (the file, or the file and line), print a hint and leave the library as it was.
/// Returns the output for further checks.
fn refused_add(contents: impl AsRef<[u8]>, technique: &str, more: &[&str], at: &str) -> String {
    let lab = lab();
    lab.write("bad.csv", contents);
    let mut args = vec!["add", "bad.csv", "--technique", technique, "--name", "bad"];
    args.extend_from_slice(more);
    let text = lab.refuses(&args, 3);
    assert!(
        text.contains(&format!("error: {at}: ")),
        "expected 'error: {at}: ...' in\n{text}"
    );
    assert!(!hint(&text).is_empty());
    text
}

/// Imports `m/list.csv` (with `files` written beside it) expecting its one row to be
/// rejected: exit 3, the manifest's file and line, a hint, and nothing stored.
fn refused_row(manifest: &str, files: &[(&str, String)]) -> String {
    let lab = lab();
    for (name, contents) in files {
        lab.write(&format!("m/{name}"), contents);
    }
    lab.write("m/list.csv", manifest);
    let text = lab.refuses(&["import", "m/list.csv"], 3);
    assert!(text.contains("rejected m/list.csv:2 ("), "{text}");
    assert!(!hint(&text).is_empty());
    text
}

/// `n` IR points from 4000 cm-1 down in steps of 100.
fn ir_points(n: usize) -> Vec<(f64, f64)> {
    (0..n)
        .map(|i| (4000.0 - 100.0 * i as f64, 0.1 + 0.01 * i as f64))
        .collect()
}

fn contains(text: &str, part: &str) {
    assert!(text.contains(part), "expected {part:?} in\n{text}");
}

#[test]
fn an_empty_file() {
    let text = refused_add("", "ir", &[], "bad.csv");
    contains(&text, "empty");
}

#[test]
fn a_header_without_data() {
    let text = refused_add("wavenumber,absorbance\n", "ir", &[], "bad.csv");
    contains(&text, "header line but no data");
}

#[test]
fn fewer_than_10_ir_points() {
    let text = refused_add(xy_csv("x,y", &ir_points(9)), "ir", &[], "bad.csv");
    contains(&text, "only 9 data points");
    contains(&text, "at least 10");
}

#[test]
fn fewer_than_10_raman_points() {
    let points: Vec<_> = (0..9).map(|i| (200.0 + 100.0 * i as f64, 500.0)).collect();
    let text = refused_add(xy_csv("shift,counts", &points), "raman", &[], "bad.csv");
    contains(&text, "only 9 data points");
}

#[test]
fn fewer_than_10_nmr_points() {
    let points: Vec<_> = (0..9).map(|i| (8.0 - i as f64, 10.0)).collect();
    let text = refused_add(xy_csv("ppm,intensity", &points), "nmr-1h", &[], "bad.csv");
    contains(&text, "only 9 data points");
}

#[test]
fn a_mass_spectrum_without_peaks() {
    let text = refused_add(
        ms_csv(&[(15, 0.0), (43, 0.0), (58, 0.0)]),
        "ms-ei",
        &[],
        "bad.csv",
    );
    contains(&text, "no peaks");
}

#[test]
fn a_field_that_is_not_a_number() {
    let text = refused_add("x,y\n4000,0.1\n3998,abc\n", "ir", &[], "bad.csv:3");
    contains(&text, "'abc' is not a number");
}

#[test]
fn a_decimal_comma_in_a_comma_delimited_file() {
    // Both numbers with a decimal comma: four fields where two were meant.
    let text = refused_add("x,y\n4000,5,0,1\n", "ir", &[], "bad.csv:2");
    assert!(hint(&text).contains("';'"), "{text}");
}

#[test]
fn a_nan() {
    let text = refused_add("x,y\n4000,0.1\n3998,NaN\n", "ir", &[], "bad.csv:3");
    contains(&text, "not a finite number");
}

#[test]
fn an_infinity() {
    let text = refused_add("x,y\n4000,0.1\n3998,0.2\ninf,0.3\n", "ir", &[], "bad.csv:4");
    contains(&text, "not a finite number");
}

#[test]
fn a_repeated_x() {
    // ir_csv has a header, then x = 4000 - 2 i on line i + 2: x = 1000 is on line 1502,
    // and the appended point is line 1803.
    let text = format!("{}1000,0.5\n", ir_csv(&[(1715.0, 0.8, 10.0)]));
    let text = refused_add(text, "ir", &[], "bad.csv:1803");
    contains(&text, "x = 1000 appears twice (lines 1502 and 1803)");
}

#[test]
fn an_ir_x_below_10_per_cm() {
    let text = format!("{}5,0.1\n", ir_csv(&[(1715.0, 0.8, 10.0)]));
    let text = refused_add(text, "ir", &[], "bad.csv:1803");
    contains(&text, "x = 5 is outside");
}

#[test]
fn an_ir_x_above_10000_per_cm() {
    let text = format!("{}10001,0.1\n", ir_csv(&[(1715.0, 0.8, 10.0)]));
    let text = refused_add(text, "ir", &[], "bad.csv");
    assert!(hint(&text).contains("--x-unit nm"), "{text}");
}

#[test]
fn an_nmr_shift_below_minus_5_ppm() {
    // nmr_csv has a header and 2501 points: the appended point is line 2503.
    let text = format!("{}-6,1\n", nmr_csv(&[(2.0, 100.0, 0.01)]));
    let text = refused_add(text, "nmr-1h", &[], "bad.csv:2503");
    contains(&text, "x = -6 is outside");
}

#[test]
fn an_nmr_shift_above_20_ppm() {
    let text = format!("{}21,1\n", nmr_csv(&[(2.0, 100.0, 0.01)]));
    let text = refused_add(text, "nmr-1h", &[], "bad.csv:2503");
    contains(&text, "x = 21 is outside");
}

#[test]
fn an_mz_of_zero() {
    let text = refused_add(ms_csv(&[(0, 1.0), (43, 100.0)]), "ms-ei", &[], "bad.csv:2");
    contains(&text, "x = 0 is outside");
}

#[test]
fn an_ir_file_in_micrometres_without_x_unit() {
    let text = ir_micrometre_csv(&[(5.83, 0.8, 0.03)]);
    let text = refused_add(text, "ir", &[], "bad.csv");
    contains(&text, "micrometres");
    assert!(hint(&text).contains("--x-unit um"), "{text}");
}

#[test]
fn a_negative_ion_abundance() {
    let text = refused_add(
        "mz,abundance\n15,1\n28,-0.5\n43,100\n",
        "ms-ei",
        &[],
        "bad.csv:3",
    );
    contains(&text, "negative ion abundance");
}

#[test]
fn an_ir_spectrum_of_zeros() {
    let points: Vec<_> = ir_points(20).into_iter().map(|(x, _)| (x, 0.0)).collect();
    let text = refused_add(xy_csv("x,y", &points), "ir", &[], "bad.csv");
    contains(&text, "every intensity is zero");
}

#[test]
fn a_raman_spectrum_outside_its_range() {
    let text = format!("{}6000,100\n", raman_csv(&[(1000.0, 5000.0, 5.0)]));
    // raman_csv has a header and 1701 points: the appended point is line 1703.
    let text = refused_add(text, "raman", &[], "bad.csv:1703");
    contains(&text, "x = 6000 is outside");
}

#[test]
fn a_file_that_is_not_utf8() {
    let text = refused_add(
        b"x,y\n4000,0.1\n3998,\xff\xfe\n".as_slice(),
        "ir",
        &[],
        "bad.csv:3",
    );
    contains(&text, "not valid UTF-8");
}

#[test]
fn a_utf16_file() {
    let mut bytes = vec![0xFF, 0xFE];
    for unit in "x,y\n4000,0.1\n".encode_utf16() {
        bytes.extend_from_slice(&unit.to_le_bytes());
    }
    let text = refused_add(bytes, "ir", &[], "bad.csv");
    contains(&text, "UTF-16");
}

#[test]
fn a_missing_file() {
    let lab = lab();
    let text = lab.refuses(&["add", "missing.csv", "-t", "ir", "--name", "x"], 3);
    contains(&text, "error: missing.csv: cannot read the file");
    assert!(!hint(&text).is_empty());
}

#[test]
fn a_bad_unknown_is_refused_by_search_as_well() {
    let lab = lab();
    lab.write("u.csv", "x,y\n4000,0.1\n3998,abc\n");
    let text = lab.refuses(&["search", "u.csv", "-t", "ir"], 3);
    contains(&text, "error: u.csv:3: ");
    assert!(!hint(&text).is_empty());
}

#[test]
fn an_unknown_technique_on_the_command_line() {
    let lab = lab();
    lab.write("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    // clap refuses the value before whorl runs: its usage-error code is 2.
    let text = lab.refuses(&["add", "a.csv", "--technique", "uv", "--name", "x"], 2);
    contains(&text, "unknown technique 'uv'");
}

#[test]
fn an_unknown_technique_in_a_manifest_row() {
    let text = refused_row(
        "file,technique,name\na.csv,uv,x\n",
        &[("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]))],
    );
    contains(&text, "unknown technique 'uv'");
    assert!(hint(&text).contains("ir, raman, ms-ei, nmr-1h"), "{text}");
}

#[test]
fn a_manifest_row_naming_a_missing_file() {
    let text = refused_row("file,technique,name\nmissing.csv,ir,x\n", &[]);
    contains(&text, "(missing.csv)");
    contains(
        &text,
        "m/missing.csv: the file 'missing.csv' does not exist",
    );
    // The hint speaks of manifest paths here, and only here (a search's missing file gets
    // a plain one).
    contains(hint(&text), "relative to the manifest's folder");
}

#[test]
fn a_missing_manifest() {
    let lab = lab();
    let text = lab.refuses(&["import", "nowhere.csv"], 3);
    contains(&text, "error: nowhere.csv: cannot read the manifest");
    assert!(!hint(&text).is_empty());
}

#[test]
fn a_manifest_without_a_required_column() {
    let lab = lab();
    lab.write("m/a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    lab.write("m/list.csv", "file,name\na.csv,x\n");
    let text = lab.refuses(&["import", "m/list.csv"], 3);
    contains(
        &text,
        "error: m/list.csv:1: the manifest has no 'technique' column",
    );
    assert!(hint(&text).contains("file,technique,name"), "{text}");
}

#[test]
fn a_manifest_row_with_a_wrong_number_of_fields() {
    let lab = lab();
    lab.write("m/a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    lab.write("m/list.csv", "file,technique,name\na.csv,ir,x\na.csv,ir\n");
    let text = lab.refuses(&["import", "m/list.csv"], 3);
    contains(&text, "error: m/list.csv:3: ");
    assert!(!hint(&text).is_empty());
}

#[test]
fn a_manifest_on_the_command_line_takes_absolute_paths_and_paths_out_of_its_folder() {
    // Scripts write absolute paths; the person running `import` can read those files anyway.
    // The server's upload and drop folder stay confined (serve_api.rs, the upload tests).
    let lab = lab();
    lab.write("x.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    let far = lab.write("elsewhere/y.csv", ir_csv(&[(1700.0, 0.9, 12.0)]));
    let far = far.to_str().unwrap();
    lab.write(
        "m/list.csv",
        format!("file,technique,name\n../x.csv,ir,up\n{far},ir,far\n"),
    );
    let text = lab.ok(&["import", "m/list.csv"]);
    contains(&text, "imported 2");
    let listed = lab.ok(&["list"]);
    contains(&listed, "up");
    contains(&listed, "far");
}

#[test]
fn a_crlf_manifest_names_the_line_an_lf_manifest_would() {
    // RFC 4180 section 2 rule 1 ends records with CRLF; the third line is line 3 either way.
    let lab = lab();
    lab.write("m/a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    lab.write(
        "m/list.csv",
        "file,technique,name\r\na.csv,ir,x\r\na.csv,bogus,y\r\n",
    );
    let text = lab.refuses(&["import", "--all-or-nothing", "m/list.csv"], 3);
    contains(&text, "rejected m/list.csv:3 (a.csv)");
}

#[test]
fn an_unknown_nmr_solvent_on_the_command_line() {
    let lab = lab();
    lab.write("n.csv", nmr_csv(&[(2.0, 100.0, 0.01)]));
    let text = lab.refuses(
        &[
            "add",
            "n.csv",
            "-t",
            "nmr-1h",
            "--name",
            "x",
            "--solvent",
            "CDCl4",
        ],
        3,
    );
    contains(&text, "unknown NMR solvent 'CDCl4'");
    assert!(hint(&text).contains("CDCl3"), "{text}");
}

#[test]
fn an_unknown_nmr_solvent_in_a_manifest_row() {
    let text = refused_row(
        "file,technique,name,solvent\nn.csv,nmr-1h,x,CDCl4\n",
        &[("n.csv", nmr_csv(&[(2.0, 100.0, 0.01)]))],
    );
    contains(&text, "rejected m/list.csv:2 (n.csv)");
    contains(&text, "unknown NMR solvent 'CDCl4'");
}

#[test]
fn a_command_on_a_folder_without_a_library() {
    let lab = Lab::empty();
    lab.write("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    let text = lab.fails(&["add", "a.csv", "-t", "ir", "--name", "x"], 4);
    contains(&text, &format!("library {}", lab.library().display()));
    assert!(hint(&text).contains("whorl init"), "{text}");
    assert!(
        !lab.library().exists(),
        "the failed add created a library folder"
    );
}

#[test]
fn a_library_from_a_newer_whorl() {
    let lab = lab();
    let db = lab.library().join("library.sqlite");
    rusqlite::Connection::open(&db)
        .unwrap()
        .pragma_update(None, "user_version", 99)
        .unwrap();
    let before = sha256_of(&db);
    lab.write("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    let text = lab.fails(&["add", "a.csv", "-t", "ir", "--name", "x"], 4);
    contains(&text, "schema version 99");
    assert!(hint(&text).contains("newer whorl"), "{text}");
    assert_eq!(sha256_of(&db), before, "the database file changed");
}

#[test]
fn a_file_of_another_technique_is_refused_saying_what_it_looks_like() {
    // The demo's IR unknown (4000-400 cm-1 at 2 cm-1) searched as EI-MS once scored 0.000
    // against everything; now it is refused, with what the file looks like.
    let lab = lab();
    let ir = crate::util::seed().join("unknowns/u01.ir.csv");
    let ir = ir.to_str().unwrap();
    let text = lab.refuses(&["search", ir, "--technique", "ms-ei"], 3);
    contains(
        &text,
        "u01.ir.csv: x runs from 400 to 4000 in 1801 evenly spaced points: \
         this looks like an IR or Raman spectrum (cm-1), not ms-ei data",
    );
    contains(hint(&text), "give the technique as ir or raman");
    // Adding it as 1H NMR names the first point outside the ppm range and the same shape.
    let text = refused_add(std::fs::read(ir).unwrap(), "nmr-1h", &[], "bad.csv:5");
    contains(&text, "this looks like an IR or Raman spectrum");
    // A 1H NMR unknown given as IR.
    let proton = crate::util::seed().join("unknowns/u12.nmr-1h.csv");
    let text = refused_add(std::fs::read(proton).unwrap(), "ir", &[], "bad.csv");
    contains(
        &text,
        "this looks like a 1H NMR spectrum (ppm), not ir data",
    );
    contains(hint(&text), "give the technique as nmr-1h");
}

#[test]
fn a_search_of_a_missing_file() {
    let lab = lab();
    let text = lab.refuses(&["search", "nowhere.csv", "-t", "ir"], 3);
    contains(&text, "nowhere.csv: cannot read the file");
    let h = hint(&text);
    assert!(
        h.contains("check the path") && !h.contains("manifest"),
        "{text}"
    );
}

#[test]
fn a_y_that_overflows_in_preparation_is_refused_with_its_line() {
    // 1e200 squared is infinite in IEEE 754 binary64 (largest finite value about 1.8e308).
    let mut pts = ir_points(30);
    pts[4].1 = 1e200;
    let text = refused_add(xy_csv("x,y", &pts), "ir", &[], "bad.csv:6");
    contains(&text, "far larger than any measured value");
    // The same file as an unknown: no NaN scores, the same refusal.
    let lab = lab();
    lab.write("u.csv", xy_csv("x,y", &pts));
    let text = lab.refuses(&["search", "u.csv", "--technique", "ir"], 3);
    contains(&text, "u.csv:6");
}

#[test]
fn top_zero_is_refused() {
    let lab = lab();
    lab.write("u.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    let text = lab.refuses(
        &[
            "search",
            "u.csv",
            "--technique",
            "ir",
            "--include-pending",
            "--top",
            "0",
        ],
        3,
    );
    contains(&text, "--top 0");
    assert!(!hint(&text).is_empty());
}

#[test]
fn an_unterminated_quote_in_a_manifest_is_refused_with_its_line() {
    let lab = lab();
    lab.write("m/a.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    lab.write("m/b.csv", ir_csv(&[(1600.0, 0.8, 10.0)]));
    lab.write("m/c.csv", ir_csv(&[(1500.0, 0.8, 10.0)]));
    // RFC 4180, section 2: a quoted field ends at the next single quote; line 3 opens one
    // that nothing closes, which would swallow the row after it.
    lab.write(
        "m/list.csv",
        "file,technique,name\na.csv,ir,alpha\nb.csv,ir,\"beta\nc.csv,ir,gamma\n",
    );
    let text = lab.refuses(&["import", "m/list.csv"], 3);
    contains(&text, "m/list.csv:3");
    contains(&text, "never closed");
    assert!(!hint(&text).is_empty());
}

#[test]
fn a_fifo_or_a_device_is_refused_at_once() {
    let lab = lab();
    let fifo = lab.path("pipe.csv");
    // mkfifo (POSIX.1-2017, XCU "mkfifo"): reading one waits for a writer.
    assert!(
        std::process::Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success()
    );
    let text = lab.refuses(&["add", "pipe.csv", "-t", "ir", "--name", "p"], 3);
    contains(&text, "not a regular file");
    // /dev/zero never ends (POSIX.1-2017 does not define it; Linux's null(4) does).
    let text = lab.refuses(&["add", "/dev/zero", "-t", "ir", "--name", "z"], 3);
    contains(&text, "not a regular file");
    let text = lab.refuses(&["import", "pipe.csv"], 3);
    contains(&text, "not a regular file");
}

#[test]
fn a_query_nested_thousands_deep_is_refused_with_a_hint() {
    let lab = lab();
    let deep = format!("{}name:x{}", "(".repeat(9000), ")".repeat(9000));
    let text = lab.refuses(&["find", &deep[..8192.min(deep.len())]], 3);
    assert!(!hint(&text).is_empty());
    let q = format!("{}name:x{}", "(".repeat(100), ")".repeat(100));
    let text = lab.refuses(&["find", &q], 3);
    contains(&text, "nested 100 deep");
    // The query is quoted only in part.
    assert!(text.len() < 1000, "{text}");
}

#[test]
fn control_characters_in_metadata_are_refused() {
    // ECMA-48 (5th edition, 1991), 5.4: ESC [ starts a control sequence; a line feed would
    // start a line of its own in `whorl log`.
    let lab = lab();
    lab.write("c.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    for name in ["two\nlines", "red \u{1b}[31mname", "tab\there"] {
        let text = lab.refuses(&["add", "c.csv", "-t", "ir", "--name", name], 3);
        contains(&text, "control character");
        assert!(!hint(&text).is_empty());
        assert!(
            !text.contains('\u{1b}'),
            "the ESC is not echoed raw: {text:?}"
        );
    }
}

#[test]
fn reserved_and_colliding_metadata_keys_are_refused() {
    let lab = lab();
    for set in ["whorl_status=verified", "Name=x", "submitted by=someone"] {
        let text = lab.refuses(
            &[
                "revise", "1", "--set", set, "--reason", "test", "--by", "e.editor",
            ],
            3,
        );
        contains(&text, "metadata key");
    }
    // A manifest whose extra column spells a known one differently.
    lab.write("m/a.csv", ir_csv(&[(1600.0, 0.8, 10.0)]));
    lab.write(
        "m/list.csv",
        "file,technique,name,Submitted_By\na.csv,ir,alpha,x\n",
    );
    let text = lab.refuses(&["import", "m/list.csv"], 3);
    contains(&text, "m/list.csv:2");
    contains(&text, "metadata key");
}

#[test]
fn a_formula_no_structure_can_have() {
    // C3H60: a zero typed for the O of acetone's C3H6O. IHD = C - H/2 + 1 = -26 (common
    // practice), so no structure exists; `whorl formula` reports the same number.
    let lab = lab();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    let before = lab.state();
    let text = lab.refuses(
        &[
            "add",
            "a.csv",
            "-t",
            "ir",
            "--name",
            "acetone",
            "--formula",
            "C3H60",
        ],
        3,
    );
    contains(
        &text,
        "formula C3H60 has an index of hydrogen deficiency of -26",
    );
    contains(hint(&text), "C3H6O");
    assert_eq!(lab.state(), before, "nothing stored");
    let formula = lab.json(&["formula", "C3H60"]);
    assert_eq!(formula["ihd"], -26.0, "{formula}");
    // The same formula in a manifest row is refused with its line.
    let text = refused_row(
        "file,technique,name,formula\na.csv,ir,acetone,C3H60\n",
        &[("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]))],
    );
    contains(&text, "-26");
}

#[test]
fn an_acquisition_date_that_is_not_iso_8601() {
    let lab = lab();
    lab.write("a.csv", ir_csv(&[(1715.0, 0.8, 10.0)]));
    for bad in ["last tuesday", "28/05/2025", "2025-02-30"] {
        let text = lab.refuses(
            &["add", "a.csv", "-t", "ir", "--name", "x", "--acquired", bad],
            3,
        );
        contains(&text, "is not an ISO 8601 date");
        contains(hint(&text), "YYYY-MM-DD");
    }
    let text = refused_row(
        "file,technique,name,acquired\na.csv,ir,x,yesterday\n",
        &[("a.csv", ir_csv(&[(1050.0, 0.8, 12.0)]))],
    );
    contains(&text, "acquired date 'yesterday'");
    // ISO 8601 forms are kept as written.
    lab.write("b.csv", ir_csv(&[(1050.0, 0.8, 12.0)]));
    lab.ok(&[
        "add",
        "b.csv",
        "-t",
        "ir",
        "--name",
        "x",
        "--acquired",
        "2025-05",
    ]);
    let shown = lab.json(&["show", "2"]);
    assert_eq!(
        shown["spectrum"]["metadata"]["acquired"], "2025-05",
        "{shown}"
    );
}

/// An IR spectrum in percent transmittance: baseline 90 %, a band at 1715 cm-1 dipping to
/// `bottom`, 4000..400 cm-1 at 2 cm-1 (data from line 2).
fn percent_t_csv(bottom: f64) -> String {
    let points: Vec<(f64, f64)> = (0..=1800)
        .map(|i| {
            let x = 4000.0 - 2.0 * f64::from(i);
            let d = (x - 1715.0) / 15.0;
            (x, 90.0 - (90.0 - bottom) * (-d * d).exp())
        })
        .collect();
    xy_csv("wavenumber,value", &points)
}

#[test]
fn percent_transmittance_declared_as_absorbance() {
    // Values up to 90 as absorbance would mean 1e-90 of the light passed (A = -log10 T).
    let text = refused_add(
        percent_t_csv(20.0),
        "ir",
        &["--y-unit", "absorbance"],
        "bad.csv:2",
    );
    contains(&text, "absorbance 90 cannot be measured");
    contains(hint(&text), "transmittance-percent");
}

#[test]
fn percent_transmittance_far_above_100_or_below_0() {
    let mut over = percent_t_csv(20.0);
    over = over.replacen("3000,90\n", "3000,300\n", 1);
    let text = refused_add(over, "ir", &["--y-unit", "%T"], "bad.csv:502");
    contains(&text, "more than the reference beam passes");
    let text = refused_add(
        percent_t_csv(-30.0),
        "ir",
        &["--y-unit", "%T"],
        "bad.csv:1144",
    );
    contains(&text, "below zero by more than detector noise");
}

#[test]
fn transmittance_at_zero_is_stored_with_a_warning() {
    let lab = lab();
    lab.write("zero.csv", percent_t_csv(-1.0));
    let out = lab
        .command(&[
            "add",
            "zero.csv",
            "-t",
            "ir",
            "--name",
            "thick film",
            "--y-unit",
            "%T",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    contains(&err, "warning: zero.csv: ");
    contains(&err, "at or below zero transmittance (first at line");
}

#[test]
fn a_constant_y() {
    let points: Vec<(f64, f64)> = (0..100)
        .map(|i| (4000.0 - 20.0 * f64::from(i), 0.5))
        .collect();
    let text = refused_add(xy_csv("x,y", &points), "ir", &[], "bad.csv");
    contains(
        &text,
        "every y value is 0.5: a flat line holds no ir spectrum (lines 2 to 101)",
    );
}

#[test]
fn all_negative_raman_counts_are_stored_with_a_warning() {
    let lab = lab();
    let negative: String = raman_csv(&[(1001.0, 500.0, 5.0)])
        .lines()
        .enumerate()
        .map(|(i, l)| match (i, l.split_once(',')) {
            (0, _) | (_, None) => format!("{l}\n"),
            (_, Some((x, y))) => format!("{x},{}\n", y.parse::<f64>().unwrap() - 2000.0),
        })
        .collect();
    lab.write("neg.csv", negative);
    let out = lab
        .command(&["add", "neg.csv", "-t", "raman", "--name", "offset"])
        .output()
        .unwrap();
    assert!(out.status.success());
    contains(
        &String::from_utf8_lossy(&out.stderr),
        "every Raman intensity is negative",
    );
}

#[test]
fn a_file_with_cr_line_endings_is_read() {
    let lab = lab();
    lab.write(
        "mac.csv",
        ir_csv(&[(1600.0, 0.7, 12.0)]).replace('\n', "\r"),
    );
    let id = lab.ok(&["add", "mac.csv", "-t", "ir", "--name", "cr only"]);
    let shown = lab.json(&["show", id.trim()]);
    assert_eq!(shown["spectrum"]["points"], 1801, "{shown}");
}
