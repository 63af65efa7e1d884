//! The delimited-text reader: two numeric columns, x and y, in any of the common layouts.
//!
//! Accepted: an optional header line, `#` comments, comma / semicolon / tab / whitespace
//! delimiters, a decimal comma with any delimiter but the comma, UTF-8 with or without a
//! byte-order mark, and x in any order. A technique whose files may be bare position lists
//! ([`Technique::reads_position_list`], 13C shift lists) also accepts one column, read as
//! lines of equal height [`LIST_HEIGHT`].

use std::path::Path;

use crate::error::{Error, Location, Result};
use crate::spectrum::sha256_hex;
use crate::technique::Technique;

mod check;
#[cfg(test)]
mod properties;
#[cfg(test)]
mod tests;

pub use check::{check_points, looks_like};

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
    // Only regular files: reading a FIFO waits for a writer forever, a device never ends.
    if let Ok(m) = std::fs::metadata(path)
        && !m.is_file()
    {
        return Err(Error::input(
            Location::file(path),
            "not a regular file (a folder, a FIFO or a device)",
            "give the path of a spectrum file exported by the instrument software",
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| {
        let hint = if e.kind() == std::io::ErrorKind::NotFound {
            "check the path and the file name"
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

    // Lines end in LF or CRLF; a file with CRs and no LF at all ends its lines in CR alone
    // (as classic Mac OS wrote text, and some instrument software still does).
    let cr_only = !text.contains('\n') && text.contains('\r');
    let ending = if cr_only { '\r' } else { '\n' };
    for (index, raw_line) in text.split(ending).enumerate() {
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
