//! The delimited-text reader: two numeric columns, x and y, in any of the common layouts.
//!
//! Accepted: an optional header line, `#` comments, comma / semicolon / tab / whitespace
//! delimiters, a decimal comma with any delimiter but the comma, UTF-8 with or without a
//! byte-order mark, and x in any order. A technique whose files may be bare position lists
//! ([`Technique::reads_position_list`], 13C shift lists) also accepts one column, read as
//! lines of equal height [`LIST_HEIGHT`].

use std::path::Path;

use crate::error::{Error, Location, Result};
use crate::spectrum::{XUnit, sha256_hex};
use crate::technique::Technique;

/// Points read from a file, with the line each came from so that later checks can point at it.
#[derive(Debug, Clone, PartialEq)]
pub struct ParsedPoints {
    /// `(x, y)` in file order.
    pub points: Vec<(f64, f64)>,
    /// The one-based line of each point.
    pub lines: Vec<usize>,
    /// The header line, if the file had one.
    pub header: Option<String>,
    /// SHA-256 of the file bytes, hex.
    pub file_sha256: String,
    /// True when the file had one column (positions only) and every y is [`LIST_HEIGHT`].
    pub one_column: bool,
}

/// The height given to every line of a one-column position list: the list says where the
/// lines are, not how tall, so all are read as equal.
pub const LIST_HEIGHT: f64 = 1.0;

#[derive(Debug, Clone, Copy, PartialEq)]
enum Delimiter {
    Comma,
    Semicolon,
    Tab,
    Whitespace,
}

impl Delimiter {
    fn detect(line: &str) -> Delimiter {
        if line.contains('\t') {
            Delimiter::Tab
        } else if line.contains(';') {
            Delimiter::Semicolon
        } else if line.contains(',') {
            Delimiter::Comma
        } else {
            Delimiter::Whitespace
        }
    }

    fn split(self, line: &str) -> Vec<&str> {
        let mut fields: Vec<&str> = match self {
            Delimiter::Comma => line.split(',').map(str::trim).collect(),
            Delimiter::Semicolon => line.split(';').map(str::trim).collect(),
            Delimiter::Tab => line.split('\t').map(str::trim).collect(),
            Delimiter::Whitespace => line.split_whitespace().collect(),
        };
        // A trailing delimiter ("1,2,") leaves one empty field; spreadsheets write these.
        if fields.len() > 2 && fields.last() == Some(&"") {
            fields.pop();
        }
        fields
    }

    fn name(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Whitespace => "whitespace",
        }
    }
}

/// Reads a spectrum file of `technique` from disk: two columns, or one for a technique whose
/// files may be position lists.
pub fn read_points(path: &Path, technique: Technique) -> Result<ParsedPoints> {
    let bytes = std::fs::read(path).map_err(|e| {
        let hint = if e.kind() == std::io::ErrorKind::NotFound {
            "check the path; manifest paths are relative to the manifest's folder"
        } else {
            "check the file's permissions"
        };
        Error::input(
            Location::file(path),
            format!("cannot read the file: {e}"),
            hint,
        )
    })?;
    read_points_from_bytes(path, &bytes, technique)
}

/// Reads a spectrum of `technique` from bytes; `path` is used in messages only.
pub fn read_points_from_bytes(
    path: &Path,
    bytes: &[u8],
    technique: Technique,
) -> Result<ParsedPoints> {
    let file_sha256 = sha256_hex(bytes);
    let text = decode_text(path, bytes)?;

    let mut points = Vec::new();
    let mut lines = Vec::new();
    let mut header: Option<String> = None;
    let mut delimiter: Option<Delimiter> = None;
    // Decided by the first data line: one field there makes a position list, if the
    // technique allows one.
    let mut one_column: Option<bool> = None;

    for (index, raw_line) in text.split('\n').enumerate() {
        let line_no = index + 1;
        let line = raw_line.trim_end_matches('\r').trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let at = || Location::line(path, line_no);
        if delimiter.is_none() && !looks_numeric(line) {
            if header.is_some() {
                return Err(Error::input(
                    at(),
                    format!("line is neither data nor the header: '{}'", shorten(line)),
                    "only one header line is allowed; start comment lines with '#'",
                ));
            }
            header = Some(line.to_string());
            continue;
        }
        let delim = *delimiter.get_or_insert_with(|| Delimiter::detect(line));
        let mut fields = delim.split(line);
        // "12.5," from a spreadsheet leaves one empty field.
        if technique.reads_position_list()
            && one_column != Some(false)
            && fields.len() == 2
            && fields[1].is_empty()
        {
            fields.pop();
        }
        let list = *one_column.get_or_insert(technique.reads_position_list() && fields.len() == 1);
        if list {
            if fields.len() != 1 {
                return Err(Error::input(
                    at(),
                    format!(
                        "expected 1 field (a position), found {}: '{}'",
                        fields.len(),
                        shorten(line)
                    ),
                    "the first data line has one number, so the file is read as a list of \
                     positions; give one number per line, or x and y on every line",
                ));
            }
            points.push((parse_number(fields[0], delim, &at)?, LIST_HEIGHT));
            lines.push(line_no);
            continue;
        }
        if fields.len() != 2 {
            let hint = if delim == Delimiter::Comma && fields.len() == 4 {
                "this looks like decimal commas in a comma-delimited file; use ';' as the delimiter"
                    .to_string()
            } else {
                format!(
                    "each data line needs exactly two numbers, x and y, separated by a {} \
                     (the delimiter found on the first data line)",
                    delim.name()
                )
            };
            return Err(Error::input(
                at(),
                format!(
                    "expected 2 fields (x, y), found {}: '{}'",
                    fields.len(),
                    shorten(line)
                ),
                hint,
            ));
        }
        let x = parse_number(fields[0], delim, &at)?;
        let y = parse_number(fields[1], delim, &at)?;
        points.push((x, y));
        lines.push(line_no);
    }

    if points.is_empty() {
        let (reason, hint) = match header {
            Some(_) => (
                "the file has a header line but no data",
                "add the x,y data lines below the header",
            ),
            None => (
                "the file is empty",
                "export the spectrum again; expected two columns, x and y",
            ),
        };
        return Err(Error::input(Location::file(path), reason, hint));
    }
    Ok(ParsedPoints {
        points,
        lines,
        header,
        file_sha256,
        one_column: one_column == Some(true),
    })
}

fn decode_text<'a>(path: &Path, bytes: &'a [u8]) -> Result<&'a str> {
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Err(Error::input(
            Location::file(path),
            "the file is UTF-16 encoded",
            "save it as UTF-8 (with or without a byte-order mark)",
        ));
    }
    let bytes = bytes.strip_prefix(&[0xEF, 0xBB, 0xBF]).unwrap_or(bytes);
    std::str::from_utf8(bytes).map_err(|e| {
        let line = bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1;
        Error::input(
            Location::line(path, line),
            "the file is not valid UTF-8 text",
            "save it as UTF-8 text; a binary instrument file must be exported as CSV first",
        )
    })
}

fn looks_numeric(line: &str) -> bool {
    line.chars()
        .next()
        .is_some_and(|c| c.is_ascii_digit() || matches!(c, '-' | '+' | '.'))
}

fn parse_number(field: &str, delim: Delimiter, at: &dyn Fn() -> Location) -> Result<f64> {
    // A decimal comma is unambiguous whenever the delimiter is not itself a comma.
    let owned;
    let text = if delim != Delimiter::Comma && field.contains(',') && !field.contains('.') {
        owned = field.replacen(',', ".", 1);
        owned.as_str()
    } else {
        field
    };
    let value: f64 = text.parse().map_err(|_| {
        Error::input(
            at(),
            format!("'{}' is not a number", shorten(field)),
            "x and y must be plain decimal numbers such as 1715.5 or 1.2e-3",
        )
    })?;
    if !value.is_finite() {
        return Err(Error::input(
            at(),
            format!("'{field}' is not a finite number (NaN or infinity)"),
            "remove the point or replace it with a measured value",
        ));
    }
    Ok(value)
}

fn shorten(s: &str) -> String {
    if s.chars().count() > 40 {
        format!("{}...", s.chars().take(40).collect::<String>())
    } else {
        s.to_string()
    }
}

/// Checks parsed points against what the technique allows, after converting x to the
/// technique's own unit. Returns the converted points.
pub fn check_points(
    path: &Path,
    parsed: &ParsedPoints,
    technique: Technique,
    x_unit: XUnit,
) -> Result<Vec<(f64, f64)>> {
    let n = parsed.points.len();
    let at = |i: usize| Location::line(path, parsed.lines[i]);
    let shape = Shape::of(&parsed.points);
    if n < technique.min_points() {
        let mut reason = format!(
            "only {n} data points; a usable {technique} spectrum has at least {}",
            technique.min_points()
        );
        let hint = match shape.looks_like(technique) {
            Some((what, _)) => {
                reason.push_str(&format!("; {}: this looks like {what}", shape.describe()));
                shape.hint(technique)
            }
            None => "check that the whole spectrum was exported".to_string(),
        };
        return Err(Error::input(Location::file(path), reason, hint));
    }

    let converted: Vec<(f64, f64)> = parsed
        .points
        .iter()
        .map(|&(x, y)| (x_unit.to_wavenumber(x), y))
        .collect();

    if let Some(reason) = shape.refuses(technique, x_unit) {
        return Err(Error::input(
            Location::file(path),
            reason,
            shape.hint(technique),
        ));
    }

    if technique == Technique::Ir && x_unit == XUnit::Wavenumber {
        let max_x = parsed.points.iter().map(|p| p.0).fold(f64::MIN, f64::max);
        if max_x <= 50.0 && max_x > 0.0 {
            // Mid-IR wavelengths (2.5-25 um) and 1H shifts (0-16 ppm) overlap: say both.
            let (also, or_nmr) = match shape.looks_like(technique) {
                Some((what, [Technique::Nmr1h])) => (
                    format!("; {}: it may also be {what}", shape.describe()),
                    ", or give the technique as nmr-1h",
                ),
                _ => (String::new(), ""),
            };
            return Err(Error::input(
                Location::file(path),
                format!(
                    "x values end at {max_x}, which looks like a wavelength in micrometres, not cm-1{also}"
                ),
                format!(
                    "pass --x-unit um (or put x_unit=um in the manifest) to convert wavelength to wavenumber{or_nmr}"
                ),
            ));
        }
        if max_x > technique.plausible_x().1 {
            return Err(Error::input(
                Location::file(path),
                format!(
                    "x values reach {max_x}, which looks like a wavelength in nanometres, not cm-1"
                ),
                "pass --x-unit nm (or put x_unit=nm in the manifest) to convert wavelength to wavenumber",
            ));
        }
    }

    let (lo, hi) = technique.plausible_x();
    for (i, &(x, y)) in converted.iter().enumerate() {
        let out_of_range = if technique == Technique::MsEi {
            x <= lo || x > hi
        } else {
            x < lo || x > hi
        };
        if out_of_range {
            let mut reason = format!(
                "x = {} is outside the plausible {technique} range {lo}..{hi} ({})",
                parsed.points[i].0,
                technique.x_label()
            );
            let hint = match shape.looks_like(technique) {
                Some(guess) => {
                    reason.push_str(&format!(
                        "; {}: this looks like {}",
                        shape.describe(),
                        guess.0
                    ));
                    shape.hint(technique)
                }
                None => "check the technique and the x unit of the file".to_string(),
            };
            return Err(Error::input(at(i), reason, hint));
        }
        if technique == Technique::MsEi && y < 0.0 {
            return Err(Error::input(
                at(i),
                format!("negative ion abundance {y} at m/z {x}"),
                "a mass spectrum's abundances must be zero or positive; export the centroided peak list",
            ));
        }
    }

    if converted.iter().all(|p| p.1 == 0.0) {
        let reason = if technique == Technique::MsEi {
            "no peaks: every abundance is zero"
        } else {
            "every intensity is zero"
        };
        return Err(Error::input(
            Location::file(path),
            reason,
            "the export holds no signal; export the spectrum again",
        ));
    }

    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| converted[a].0.total_cmp(&converted[b].0));
    for pair in order.windows(2) {
        if converted[pair[0]].0 == converted[pair[1]].0 {
            let (first, second) = (
                parsed.lines[pair[0]].min(parsed.lines[pair[1]]),
                parsed.lines[pair[0]].max(parsed.lines[pair[1]]),
            );
            return Err(Error::input(
                Location::line(path, second),
                format!(
                    "x = {} appears twice (lines {first} and {second})",
                    parsed.points[pair[0]].0
                ),
                "remove or average the repeated point",
            ));
        }
    }
    Ok(converted)
}

/// What a file's x axis looks like: its range, its number of points and whether they are
/// evenly spaced. Used to refuse a file that cannot be the technique it is given as, and to
/// say in the message which technique it looks like.
#[derive(Debug, Clone, Copy)]
struct Shape {
    lo: f64,
    hi: f64,
    n: usize,
    /// The spacing, when every gap is within 1 % of the median gap (a sampled spectrum).
    step: Option<f64>,
    /// True when every x is a whole number (nominal masses, or a coarse grid).
    whole: bool,
}

/// A spectrum with at least this many points sampled on a grid is a continuous spectrum, not
/// a peak list: an EI peak list of a small molecule has tens of ions, a 13C list tens of
/// lines (common practice).
const DENSE_POINTS: usize = 200;

/// EI spectra of the compounds a GC-MS library holds are recorded up to about m/z 1000
/// (common practice; the default EI grid stops there).
const EI_TOP: f64 = 1000.0;

impl Shape {
    fn of(points: &[(f64, f64)]) -> Shape {
        let mut xs: Vec<f64> = points.iter().map(|p| p.0).collect();
        xs.sort_by(f64::total_cmp);
        let (lo, hi) = (xs[0], xs[xs.len() - 1]);
        let mut gaps: Vec<f64> = xs.windows(2).map(|w| w[1] - w[0]).collect();
        gaps.sort_by(f64::total_cmp);
        let step = gaps.get(gaps.len() / 2).copied().filter(|&median| {
            median > 0.0 && gaps.iter().all(|g| (g - median).abs() <= 0.01 * median)
        });
        Shape {
            lo,
            hi,
            n: xs.len(),
            step,
            whole: xs.iter().all(|x| x.fract() == 0.0),
        }
    }

    fn dense(&self) -> bool {
        self.n >= DENSE_POINTS
    }

    /// "x runs from 400 to 4000 in 1801 evenly spaced points".
    fn describe(&self) -> String {
        let spacing = match self.step {
            Some(_) => " evenly spaced",
            None => "",
        };
        let noun = if self.n == 1 { "point" } else { "points" };
        format!(
            "x runs from {} to {} in {}{spacing} {noun}",
            round_for_display(self.lo),
            round_for_display(self.hi),
            self.n
        )
    }

    /// What the file looks like, other than `given`: a description and the techniques it
    /// suggests. Ranges from the techniques' own plausible ranges, narrowed to where real
    /// spectra lie (common practice): IR and Raman spectra reach beyond 1000 cm-1, 1H spectra
    /// lie within -2..16 ppm, 13C within its plausible -10..250 ppm, EI peaks at whole m/z up
    /// to about 1000.
    fn looks_like(&self, given: Technique) -> Option<(&'static str, &'static [Technique])> {
        let optical = self.dense() && self.hi > EI_TOP && self.lo >= -500.0 && self.hi <= 10_000.0;
        let proton = self.lo >= -2.0 && self.hi <= 16.0;
        let (carbon_lo, carbon_hi) = Technique::Nmr13c.plausible_x();
        let carbon = self.lo >= carbon_lo && self.hi <= carbon_hi;
        let ei = self.whole && self.lo >= 1.0 && self.hi <= EI_TOP && !self.dense();
        let guesses: [(bool, &'static str, &'static [Technique]); 4] = [
            (
                optical,
                "an IR or Raman spectrum (cm-1)",
                &[Technique::Ir, Technique::Raman],
            ),
            (proton, "a 1H NMR spectrum (ppm)", &[Technique::Nmr1h]),
            (
                carbon && !ei,
                "a 13C NMR spectrum or shift list (ppm)",
                &[Technique::Nmr13c],
            ),
            (ei, "an EI mass spectrum (m/z)", &[Technique::MsEi]),
        ];
        guesses
            .into_iter()
            .find(|(fits, _, techniques)| *fits && !techniques.contains(&given))
            .map(|(_, what, techniques)| (what, techniques))
    }

    /// Why a file inside `technique`'s plausible range still cannot be that technique, if it
    /// cannot: a dense spectrum running past m/z 1000 given as EI-MS, a spectrum within NMR's
    /// ppm range given as IR or Raman, a dense spectrum within 1H's range given as 13C.
    fn refuses(&self, technique: Technique, x_unit: XUnit) -> Option<String> {
        let wrong = match technique {
            Technique::MsEi => self.dense() && self.hi > EI_TOP,
            // An IR or Raman spectrum reaches into the fingerprint region above 250 cm-1;
            // x that ends below it is a chemical shift. A positive range ending at 50 or
            // below is left to the micrometre check, which says more.
            Technique::Ir | Technique::Raman => {
                x_unit == XUnit::Wavenumber
                    && self.hi <= 250.0
                    && !(technique == Technique::Ir && self.lo > 0.0 && self.hi <= 50.0)
            }
            Technique::Nmr13c => self.dense() && self.lo >= -2.0 && self.hi <= 16.0,
            Technique::Nmr1h => false,
        };
        if !wrong {
            return None;
        }
        let (what, _) = self.looks_like(technique)?;
        Some(format!(
            "{}: this looks like {what}, not {technique} data",
            self.describe(),
        ))
    }

    /// The hint for a refused file: the techniques it looks like.
    fn hint(&self, given: Technique) -> String {
        match self.looks_like(given) {
            Some((_, techniques)) => {
                let names: Vec<&str> = techniques.iter().map(|t| t.name()).collect();
                format!(
                    "give the technique as {} (--technique, or the technique column of a \
                     manifest), or check that this is the file you meant",
                    names.join(" or ")
                )
            }
            None => "check the technique and the x unit of the file".to_string(),
        }
    }
}

/// A number as a message shows it: whole numbers without decimals, others to 4 significant
/// digits.
fn round_for_display(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e9 {
        format!("{x:.0}")
    } else {
        let digits = (3 - x.abs().log10().floor() as i32).clamp(0, 6) as usize;
        let text = format!("{x:.digits$}");
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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
}

#[cfg(test)]
mod properties {
    use super::*;
    use proptest::prelude::*;

    /// Cases per property: 60k each, so that CI feeds the reader 120k inputs
    /// (random bytes and near-valid CSV). `PROPTEST_CASES` overrides it for a quick local run.
    fn cases() -> u32 {
        std::env::var("PROPTEST_CASES")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(60_000)
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: cases(), failure_persistence: None, ..ProptestConfig::default() })]

        #[test]
        fn the_reader_never_panics(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
            for t in [Technique::Ir, Technique::Nmr13c] {
                let _ = read_points_from_bytes(Path::new("fuzz.csv"), &bytes, t);
            }
        }

        #[test]
        fn the_reader_never_panics_on_near_valid_text(lines in prop::collection::vec("[0-9.,;eE+\\-\\t #a-z]{0,24}", 0..30)) {
            let text = lines.join("\n");
            if let Ok(p) = read_points_from_bytes(Path::new("fuzz.csv"), text.as_bytes(), Technique::Nmr13c) {
                prop_assert!(p.points.iter().all(|(x, y)| x.is_finite() && y.is_finite()));
                for t in Technique::ALL {
                    let _ = check_points(Path::new("fuzz.csv"), &p, t, XUnit::Wavenumber);
                }
            }
        }
    }
}
