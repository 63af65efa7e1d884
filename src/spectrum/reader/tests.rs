//! The reader and the checks on hand-made files.

use super::*;
use crate::spectrum::XUnit;

fn parse(text: &str) -> Result<ParsedPoints> {
    read_points_from_bytes(Path::new("t.csv"), text.as_bytes(), Technique::Ir)
}

fn parse_13c(text: &str) -> Result<ParsedPoints> {
    read_points_from_bytes(Path::new("t.csv"), text.as_bytes(), Technique::Nmr13c)
}

fn check(text: &str, expected: &[(f64, f64)]) {
    assert_eq!(parse(text).unwrap().points, expected, "input: {text:?}");
}

fn fails(text: &str, line: Option<usize>, reason_part: &str) {
    match parse(text) {
        Err(Error::Input { at, reason, .. }) => {
            assert_eq!(at.line, line, "input {text:?}: {reason}");
            assert!(
                reason.contains(reason_part),
                "input {text:?}: reason {reason:?}"
            );
        }
        other => panic!("input {text:?} gave {other:?}"),
    }
}

#[test]
fn layouts_read_alike() {
    let want = [(1.5, 2.0), (3.0, 4.25)];
    check("1.5,2\n3,4.25\n", &want);
    check("x,y\n1.5,2\n3,4.25\n", &want);
    check("# comment\n\nx;y\n1,5;2\n3;4,25\n", &want);
    check("1.5\t2\r\n3\t4.25\r\n", &want);
    check("1,5\t2\n3\t4,25\n", &want);
    check("  1.5   2\n3 4.25", &want);
    check("\u{feff}ppm,intensity\n1.5,2\n3,4.25\n", &want);
    check("1.5,2,\n3,4.25,\n", &want);
    check("1.5e0,2E0\n+3,4.25\n", &want);
    // CR alone ends the lines (issue 13, item 17: once read as "a header but no data").
    check("x,y\r1.5,2\r3,4.25\r", &want);
    check("1.5,2\r3,4.25", &want);
}

#[test]
fn lines_ended_by_cr_alone_are_counted_for_messages() {
    match parse("x,y\r1,2\r3,abc\r") {
        Err(Error::Input { at, .. }) => assert_eq!(at.line, Some(3)),
        other => panic!("{other:?}"),
    }
}

#[test]
fn bad_layouts_name_the_line() {
    fails("", None, "empty");
    fails("# only a comment\n", None, "empty");
    fails("wavenumber,absorbance\n", None, "header");
    fails("x,y\n1,2\n3,abc\n", Some(3), "not a number");
    fails("1,2\n3,NaN\n", Some(2), "finite");
    fails("1,2\ninf,3\n", Some(2), "finite");
    fails("1,2\n3\n", Some(2), "found 1");
    fails("1,5,2,0\n", Some(1), "found 4");
    fails(
        "x,y\nunits,more\n1,2\n",
        Some(2),
        "neither data nor the header",
    );
}

#[test]
fn a_13c_shift_list_may_have_one_column() {
    // Shifts of 2-butanone in CDCl3 (from memory: about 209, 37, 29, 8 ppm); a list of
    // shifts says where the lines are, so every line gets the same height.
    let want = [(209.3, 1.0), (36.9, 1.0), (29.4, 1.0), (7.9, 1.0)];
    for text in [
        "209.3\n36.9\n29.4\n7.9\n",
        "shift_ppm\n209.3\n36.9\n29.4\n7.9\n",
        "# CDCl3\r\n209.3\r\n36.9\r\n29.4\r\n7.9\r\n",
        "209.3,\n36.9,\n29.4,\n7.9,\n",
        "209,3\n36,9\n29,4\n7,9\n",
    ] {
        let p = parse_13c(text).unwrap();
        if text.starts_with("209,3") {
            // A decimal comma cannot be told from a comma delimiter: two columns.
            assert!(!p.one_column);
            continue;
        }
        assert_eq!(p.points, want, "input: {text:?}");
        assert!(p.one_column);
    }
    // Two columns stay two columns for 13C.
    let p = parse_13c("209.3,0.4\n36.9,1\n").unwrap();
    assert_eq!(p.points, [(209.3, 0.4), (36.9, 1.0)]);
    assert!(!p.one_column);
    // A list that turns into x,y (or the reverse) is refused at the line that breaks it.
    for (text, part) in [
        ("209.3\n36.9 1\n", "expected 1 field"),
        ("209.3\n36.9,1\n", "not a number"),
    ] {
        match parse_13c(text) {
            Err(Error::Input { at, reason, .. }) => {
                assert_eq!(at.line, Some(2));
                assert!(reason.contains(part), "{reason}");
            }
            other => panic!("{other:?}"),
        }
    }
    match parse_13c("209.3,1\n36.9\n") {
        Err(Error::Input { at, reason, .. }) => {
            assert_eq!(at.line, Some(2));
            assert!(reason.contains("found 1"), "{reason}");
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn other_techniques_refuse_one_column() {
    for t in Technique::ALL
        .into_iter()
        .filter(|&t| t != Technique::Nmr13c)
    {
        match read_points_from_bytes(Path::new("t.csv"), b"x\n1715\n1600\n", t) {
            Err(Error::Input { at, reason, hint }) => {
                assert_eq!(at.line, Some(2), "{t}");
                assert!(
                    reason.contains("expected 2 fields (x, y), found 1"),
                    "{t}: {reason}"
                );
                assert!(hint.contains("exactly two numbers"), "{t}: {hint}");
            }
            other => panic!("{t}: {other:?}"),
        }
    }
}

#[test]
fn non_utf8_is_refused_with_its_line() {
    let bytes = b"1,2\n3,\xff\n";
    let err = read_points_from_bytes(Path::new("t.csv"), bytes, Technique::Ir).unwrap_err();
    assert!(
        matches!(
            err,
            Error::Input {
                at: Location { line: Some(2), .. },
                ..
            }
        ),
        "{err:?}"
    );
}

fn points(n: usize, f: impl Fn(usize) -> (f64, f64)) -> ParsedPoints {
    let pts: Vec<_> = (0..n).map(f).collect();
    ParsedPoints {
        lines: (1..=n).collect(),
        points: pts,
        header: None,
        file_sha256: String::new(),
        one_column: false,
    }
}

fn check_fails(p: &ParsedPoints, t: Technique, unit: XUnit, part: &str) {
    let err = check_points(Path::new("t.csv"), p, t, unit).unwrap_err();
    assert!(
        err.to_string().contains(part) || err.hint().unwrap_or("").contains(part),
        "{err}"
    );
}

#[test]
fn technique_checks() {
    let ir = points(20, |i| (4000.0 - 100.0 * i as f64, 0.1));
    assert!(check_points(Path::new("t"), &ir, Technique::Ir, XUnit::Wavenumber).is_ok());
    check_fails(
        &points(5, |i| (1000.0 + i as f64, 0.1)),
        Technique::Ir,
        XUnit::Wavenumber,
        "at least 10",
    );
    check_fails(
        &points(20, |i| (2.5 + i as f64, 0.1)),
        Technique::Ir,
        XUnit::Wavenumber,
        "--x-unit um",
    );
    check_fails(
        &points(20, |i| (2500.0 + 1000.0 * i as f64, 0.1)),
        Technique::Ir,
        XUnit::Wavenumber,
        "--x-unit nm",
    );
    let um = check_points(
        Path::new("t"),
        &points(20, |i| (2.5 + i as f64, 0.1)),
        Technique::Ir,
        XUnit::Micrometre,
    )
    .unwrap();
    assert_eq!(um[0].0, 4000.0);
    check_fails(
        &points(20, |i| (-10.0 + i as f64, 0.1)),
        Technique::Nmr1h,
        XUnit::Ppm,
        "outside",
    );
    check_fails(
        &points(3, |i| (10.0 + i as f64, -1.0)),
        Technique::MsEi,
        XUnit::MassToCharge,
        "negative",
    );
    check_fails(
        &points(3, |i| (10.0 + i as f64, 0.0)),
        Technique::MsEi,
        XUnit::MassToCharge,
        "no peaks",
    );
    check_fails(
        &points(3, |i| (i as f64, 5.0)),
        Technique::MsEi,
        XUnit::MassToCharge,
        "outside",
    );
    check_fails(
        &points(12, |i| (1.0 + (i % 11) as f64, 1.0)),
        Technique::Nmr1h,
        XUnit::Ppm,
        "appears twice",
    );
    check_fails(
        &points(12, |i| (1.0 + i as f64, 0.0)),
        Technique::Nmr1h,
        XUnit::Ppm,
        "zero",
    );
}

/// `n` points evenly spaced from `lo` to `hi`, y a smooth positive curve.
fn sampled(lo: f64, hi: f64, n: usize) -> ParsedPoints {
    let step = (hi - lo) / (n - 1) as f64;
    points(n, |i| {
        (lo + step * i as f64, 0.5 + 0.4 * (i as f64 * 0.01).sin())
    })
}

/// Refused for the whole file (no line), the reason naming what the file looks like and
/// the hint the technique to use.
fn mismatch(p: &ParsedPoints, t: Technique, reason_parts: &[&str], hint_part: &str) {
    match check_points(Path::new("t.csv"), p, t, XUnit::Wavenumber) {
        Err(Error::Input { reason, hint, .. }) => {
            for part in reason_parts {
                assert!(reason.contains(part), "{t}: {part:?} not in {reason:?}");
            }
            assert!(
                hint.contains(hint_part),
                "{t}: {hint_part:?} not in {hint:?}"
            );
        }
        other => panic!("{t}: {other:?}"),
    }
}

#[test]
fn a_file_of_another_technique_is_refused_saying_what_it_looks_like() {
    // Mid-IR 4000-400 cm-1 at 2 cm-1 is 1801 points (common practice; DESIGN's IR grid).
    let ir = sampled(400.0, 4000.0, 1801);
    let looks_optical = "x runs from 400 to 4000 in 1801 evenly spaced points: \
                         this looks like an IR or Raman spectrum";
    mismatch(
        &ir,
        Technique::MsEi,
        &[looks_optical, "not ms-ei data"],
        "ir or raman",
    );
    // A 4 cm-1 Raman file with fractional x (100-3500 cm-1, 851 points).
    mismatch(
        &sampled(100.0, 3500.0, 851),
        Technique::MsEi,
        &[
            "x runs from 100 to 3500 in 851 evenly spaced points",
            "IR or Raman",
        ],
        "ir or raman",
    );
    // Given as NMR, the first point outside the ppm range is named, and the file's shape.
    for t in [Technique::Nmr1h, Technique::Nmr13c] {
        mismatch(
            &ir,
            t,
            &["outside the plausible", looks_optical],
            "ir or raman",
        );
    }
    // A 1H spectrum (-0.5..12.5 ppm, common practice for 1H) given as IR, Raman or 13C.
    let proton = sampled(-0.5, 12.5, 3251);
    let looks_proton = "x runs from -0.5 to 12.5 in 3251 evenly spaced points: \
                        this looks like a 1H NMR spectrum";
    for t in [Technique::Ir, Technique::Raman, Technique::Nmr13c] {
        mismatch(&proton, t, &[looks_proton], "nmr-1h");
    }
    // A 1H spectrum from 0.5 ppm could also be micrometres (mid-IR 2.5-25 um): both said.
    mismatch(
        &sampled(0.5, 12.0, 2000),
        Technique::Ir,
        &["micrometres", "it may also be a 1H NMR spectrum"],
        "nmr-1h",
    );
    // A 13C shift list (2-butanone, from memory) given as IR, Raman or 1H.
    let carbon = points(12, |i| {
        ([209.3, 36.9, 29.4, 7.9][i % 4] + (i / 4) as f64 * 0.5, 1.0)
    });
    for t in [Technique::Ir, Technique::Raman, Technique::Nmr1h] {
        mismatch(
            &carbon,
            t,
            &["this looks like a 13C NMR spectrum or shift list"],
            "nmr-13c",
        );
    }
    // A short 13C list (acetophenone, from memory) given as 1H: too few points, and what
    // it looks like.
    let shifts = [198.1, 137.1, 133.0, 128.5, 128.2, 26.5, 0.0];
    mismatch(
        &points(7, |i| (shifts[i], 1.0)),
        Technique::Nmr1h,
        &[
            "only 7 data points",
            "x runs from 0 to 198.1 in 7 points: this looks like a 13C NMR spectrum",
        ],
        "nmr-13c",
    );
    // An EI peak list (ethylbenzene's ions, from memory) given as 1H NMR.
    let ions = [
        27.0, 39.0, 50.0, 51.0, 63.0, 65.0, 77.0, 78.0, 91.0, 92.0, 105.0, 106.0,
    ];
    let ei = points(12, |i| (ions[i], 10.0));
    mismatch(
        &ei,
        Technique::Nmr1h,
        &["this looks like an EI mass spectrum"],
        "ms-ei",
    );
}

#[test]
fn shape_is_not_refused_where_the_technique_fits() {
    // EI profile data at 0.1 m/z up to 600 and a peak list reaching m/z 1200 are EI.
    let profile = sampled(40.0, 600.0, 5601);
    assert!(
        check_points(
            Path::new("t"),
            &profile,
            Technique::MsEi,
            XUnit::MassToCharge
        )
        .is_ok()
    );
    let heavy = points(20, |i| (100.0 + 55.0 * i as f64, 5.0));
    assert!(check_points(Path::new("t"), &heavy, Technique::MsEi, XUnit::MassToCharge).is_ok());
    // A 13C profile spectrum over 0..220 ppm is 13C.
    let profile = sampled(-10.0, 220.0, 4601);
    assert!(check_points(Path::new("t"), &profile, Technique::Nmr13c, XUnit::Ppm).is_ok());
}

#[test]
fn the_demo_files_are_accepted_as_their_technique() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("seed-library");
    let mut seen = 0;
    for (manifest, folder) in [
        (root.join("manifest.csv"), root.clone()),
        (root.join("unknowns/manifest.csv"), root.join("unknowns")),
    ] {
        let text = std::fs::read_to_string(&manifest).unwrap();
        let mut lines = text.lines();
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let unit_col = header.iter().position(|h| *h == "x_unit");
        for line in lines {
            // The first columns are plain (file, technique, then x_unit for unknowns).
            let fields: Vec<&str> = line.split(',').collect();
            let path = folder.join(fields[0]);
            let technique: Technique = fields[1].parse().unwrap();
            let unit = unit_col
                .map(|c| fields[c])
                .filter(|u| !u.is_empty())
                .map(|u| u.parse().unwrap())
                .unwrap_or(match technique {
                    Technique::Ir | Technique::Raman => XUnit::Wavenumber,
                    Technique::MsEi => XUnit::MassToCharge,
                    _ => XUnit::Ppm,
                });
            let parsed = read_points(&path, technique).unwrap();
            if let Err(e) = check_points(&path, &parsed, technique, unit) {
                panic!("{}: {e}", path.display());
            }
            seen += 1;
        }
    }
    // Every row of both manifests: 220 references and 17 unknowns.
    assert_eq!(seen, 237);
}
