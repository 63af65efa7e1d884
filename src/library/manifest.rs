//! Import manifests: a CSV naming spectrum files and their metadata.

use std::collections::BTreeMap;
use std::path::{Component, Path, PathBuf};

use super::identity::Person;
use crate::error::{Error, Location, Result};
use crate::library::{Metadata, Submission};
use crate::spectrum::{XUnit, YUnit, csv_cell_restored};
use crate::technique::Technique;

/// Columns every manifest must have.
pub const REQUIRED_COLUMNS: [&str; 3] = ["file", "technique", "name"];
/// Columns with a meaning of their own; any other column is kept as extra metadata.
pub const KNOWN_COLUMNS: [&str; 15] = [
    "file",
    "technique",
    "name",
    "formula",
    "cas",
    "synonyms",
    "tags",
    "solvent",
    "y_unit",
    "x_unit",
    "source",
    "submitted_by",
    "instrument",
    "acquired",
    "notes",
];

/// One data row of a manifest: its line and the submission it describes, or why it is unusable.
#[derive(Debug)]
pub struct ManifestRow {
    /// One-based line number in the manifest.
    pub line: usize,
    /// The file as written in the manifest.
    pub file: String,
    /// The submission, or the reason the row cannot be used.
    pub submission: Result<Submission>,
    /// The `whorl_*` provenance columns of a bundle manifest (empty for a plain manifest).
    pub provenance: BTreeMap<String, String>,
}

/// The prefix of the provenance columns an exported bundle's manifest carries.
pub const PROVENANCE_PREFIX: &str = "whorl_";

/// Gives a command-level error the manifest location it came from.
fn located(e: Error, at: Location) -> Error {
    match e {
        Error::Invalid { reason, hint } => Error::Input { at, reason, hint },
        other => other,
    }
}

/// Splits a `;`-separated list field.
fn list(field: &str) -> Vec<String> {
    field
        .split(';')
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .collect()
}

/// The name an extra column is stored and queried under: lower case, other characters as `_`.
pub fn extra_key(column: &str) -> String {
    column
        .trim()
        .to_lowercase()
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .collect()
}

/// Resolves a manifest's `file` entry against the manifest's folder, refusing absolute paths
/// and paths that climb out of the folder (a manifest must not pull in arbitrary files).
pub fn resolve_within(base: &Path, entry: &str) -> std::result::Result<PathBuf, String> {
    let rel = Path::new(entry.trim());
    if entry.trim().is_empty() {
        return Err("the file column is empty".into());
    }
    if rel.is_absolute()
        || rel
            .components()
            .any(|c| matches!(c, Component::Prefix(_) | Component::RootDir))
    {
        return Err(format!(
            "'{entry}' is an absolute path; manifest paths must be relative to the manifest's folder"
        ));
    }
    let mut depth = 0i32;
    for c in rel.components() {
        match c {
            Component::ParentDir => depth -= 1,
            Component::Normal(_) => depth += 1,
            _ => {}
        }
        if depth < 0 {
            return Err(format!("'{entry}' leads outside the manifest's folder"));
        }
    }
    let joined = base.join(rel);
    // Symbolic links could still lead out; compare the real paths when the file exists.
    if let (Ok(real), Ok(real_base)) = (joined.canonicalize(), base.canonicalize())
        && !real.starts_with(&real_base)
    {
        return Err(format!(
            "'{entry}' resolves outside the manifest's folder (through a link)"
        ));
    }
    Ok(joined)
}

/// Which `file` entries a manifest may use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ManifestPaths {
    /// Only paths that stay inside the manifest's folder ([`resolve_within`]): for a manifest
    /// that arrives from elsewhere (the server's upload and drop folder, a bundle), which must
    /// not pull in other files of the machine.
    Confined,
    /// Any path the person running the import can read: absolute paths as written, relative
    /// ones from the manifest's folder. For a manifest given on the command line, whose paths a
    /// script often writes absolute; the importing person could add each file by hand anyway.
    Readable,
}

/// Reads a manifest whose paths stay inside its folder ([`ManifestPaths::Confined`]).
/// Problems with the manifest as a whole (unreadable, missing a required column) are errors;
/// problems with one row are reported in that row.
pub fn read_manifest(path: &Path, default_submitter: &str) -> Result<Vec<ManifestRow>> {
    read_rows(path, default_submitter, false, ManifestPaths::Confined)
}

/// [`read_manifest`] with the given path rule.
pub fn read_manifest_with(
    path: &Path,
    default_submitter: &str,
    paths: ManifestPaths,
) -> Result<Vec<ManifestRow>> {
    read_rows(path, default_submitter, false, paths)
}

/// Reads the manifest of an exported bundle, keeping its provenance columns.
pub(super) fn read_bundle_manifest(path: &Path) -> Result<Vec<ManifestRow>> {
    read_rows(path, "unknown", true, ManifestPaths::Confined)
}

/// A `file` entry of a manifest read under [`ManifestPaths::Readable`]: absolute as written,
/// relative from the manifest's folder.
fn resolve_readable(base: &Path, entry: &str) -> std::result::Result<PathBuf, String> {
    let entry = entry.trim();
    if entry.is_empty() {
        return Err("the file column is empty".into());
    }
    Ok(base.join(entry))
}

/// The one-based line of the record the csv crate places at byte `offset`, counting line
/// feeds: a CRLF file numbers its lines as an LF file does. After a CRLF the crate places a
/// record on the line feed that ends the line before it, and counts that record's line one
/// low; a record never starts with a line end, so those are stepped over.
fn line_at(bytes: &[u8], offset: u64) -> usize {
    let mut end = usize::try_from(offset)
        .unwrap_or(usize::MAX)
        .min(bytes.len());
    while matches!(bytes.get(end), Some(b'\r' | b'\n')) {
        end += 1;
    }
    bytes[..end].iter().filter(|&&b| b == b'\n').count() + 1
}

/// The line on which a quoted field opens that the file never closes, read as RFC 4180
/// (Shafranovich, 2005, section 2, rules 5-7) reads quotes: a field that starts with a quote
/// ends at the next quote that is not doubled. The csv crate would take everything to the
/// end of the file into that one field.
fn unterminated_quote(bytes: &[u8]) -> Option<usize> {
    let (mut line, mut opened, mut quoted, mut field_start) = (1, 0, false, true);
    let mut i = 0;
    while i < bytes.len() {
        let b = bytes[i];
        if quoted {
            if b == b'"' {
                if bytes.get(i + 1) == Some(&b'"') {
                    i += 1;
                } else {
                    quoted = false;
                }
            }
        } else if b == b'"' && field_start {
            quoted = true;
            opened = line;
        }
        if b == b'\n' {
            line += 1;
        }
        field_start = !quoted && matches!(b, b',' | b'\n' | b'\r');
        i += 1;
    }
    quoted.then_some(opened)
}

/// A manifest cell as read: a bundle's cells were written through `csv_cell` (spreadsheet
/// formulas neutralised), so one leading quote is removed; a hand-written manifest is read
/// as it is.
fn cell(c: &str, bundle: bool) -> &str {
    if bundle { csv_cell_restored(c) } else { c }
}

fn read_rows(
    path: &Path,
    default_submitter: &str,
    bundle: bool,
    paths: ManifestPaths,
) -> Result<Vec<ManifestRow>> {
    if let Ok(m) = std::fs::metadata(path)
        && !m.is_file()
    {
        return Err(Error::input(
            Location::file(path),
            "the manifest is not a regular file (a folder, a FIFO or a device)",
            "give the path of a manifest CSV file",
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("cannot read the manifest: {e}"),
            "check the path to the manifest CSV",
        )
    })?;
    let bytes = bytes.strip_prefix(&[0xEF, 0xBB, 0xBF]).unwrap_or(&bytes);
    if let Some(line) = unterminated_quote(bytes) {
        return Err(Error::input(
            Location::line(path, line),
            "a quoted field opened on this line is never closed (the rows after it would be read as part of it)",
            "close the quote, or double a quote inside a quoted field (\"\")",
        ));
    }
    let mut reader = csv::ReaderBuilder::new().flexible(false).from_reader(bytes);
    let headers: Vec<String> = reader
        .headers()
        .map_err(|e| {
            Error::input(
                Location::line(path, 1),
                format!("the header is not valid CSV: {e}"),
                "save the manifest as UTF-8 CSV",
            )
        })?
        .iter()
        .map(|h| cell(h, bundle).trim().to_string())
        .collect();
    for required in REQUIRED_COLUMNS {
        if !headers.iter().any(|h| h == required) {
            return Err(Error::input(
                Location::line(path, 1),
                format!("the manifest has no '{required}' column"),
                format!(
                    "the header must name at least: {}",
                    REQUIRED_COLUMNS.join(",")
                ),
            ));
        }
    }
    if !bundle && headers.iter().any(|h| h.starts_with(PROVENANCE_PREFIX)) {
        return Err(Error::input(
            Location::line(path, 1),
            "this manifest belongs to an exported bundle (it has whorl_ provenance columns)",
            "import the bundle's folder instead (`whorl import DIR`), so its checksums and history are used",
        ));
    }
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut rows = Vec::new();
    let mut seen: std::collections::HashMap<(String, String), usize> =
        std::collections::HashMap::new();
    for record in reader.records() {
        let record = record.map_err(|e| {
            let line = e.position().map_or(0, |p| line_at(bytes, p.byte()));
            // The crate's own message carries its line count, wrong after CRLF line ends.
            let reason = match e.kind() {
                csv::ErrorKind::UnequalLengths {
                    expected_len, len, ..
                } => format!("this row has {len} fields, the header {expected_len}"),
                csv::ErrorKind::Utf8 { .. } => "the row is not UTF-8 text".to_string(),
                _ => e.to_string(),
            };
            Error::input(
                Location::line(path, line),
                format!("not valid CSV: {reason}"),
                "every row needs as many fields as the header; quote fields containing commas",
            )
        })?;
        let line = record.position().map_or(0, |p| line_at(bytes, p.byte()));
        let record: Vec<&str> = record.iter().map(|c| cell(c, bundle)).collect();
        let record = &record;
        let field = |name: &str| {
            headers
                .iter()
                .position(|h| h == name)
                .and_then(|i| record.get(i).copied())
                .map(str::trim)
                .unwrap_or("")
        };
        let opt = |name: &str| Some(field(name).to_string()).filter(|s| !s.is_empty());
        let file = field("file").to_string();
        let at = || Location::line(path, line);
        let key = (file.clone(), field("technique").to_ascii_lowercase());
        let first = *seen.entry(key).or_insert(line);
        let submission = (|| -> Result<Submission> {
            if first != line {
                return Err(Error::input(
                    at(),
                    format!("this row repeats line {first} (same file and technique)"),
                    "remove the duplicated row from the manifest",
                ));
            }
            let resolved = match paths {
                ManifestPaths::Confined => resolve_within(&base, &file),
                ManifestPaths::Readable => resolve_readable(&base, &file),
            }
            .map_err(|reason| {
                Error::input(
                    at(),
                    reason,
                    "write paths relative to the manifest, without '..'",
                )
            })?;
            let technique: Technique = field("technique").parse().map_err(|e| located(e, at()))?;
            let mut extra = BTreeMap::new();
            for (i, h) in headers.iter().enumerate() {
                if !KNOWN_COLUMNS.contains(&h.as_str())
                    && !h.is_empty()
                    && !h.starts_with(PROVENANCE_PREFIX)
                {
                    let v = record.get(i).copied().unwrap_or("").trim();
                    if !v.is_empty() {
                        extra.insert(extra_key(h), v.to_string());
                    }
                }
            }
            let metadata = Metadata {
                name: field("name").to_string(),
                formula: opt("formula"),
                cas: opt("cas"),
                synonyms: list(field("synonyms")),
                tags: list(field("tags")),
                solvent: opt("solvent"),
                source: opt("source"),
                instrument: opt("instrument"),
                acquired: opt("acquired"),
                notes: opt("notes"),
                extra,
            };
            Ok(Submission {
                path: resolved,
                technique,
                metadata,
                x_unit: opt("x_unit")
                    .map(|s| s.parse::<XUnit>())
                    .transpose()
                    .map_err(|e| located(e, at()))?,
                y_unit: opt("y_unit")
                    .map(|s| s.parse::<YUnit>())
                    .transpose()
                    .map_err(|e| located(e, at()))?,
                // Stored in NFKC form; a blank, control or invisible character is refused.
                submitted_by: match opt("submitted_by") {
                    Some(name) => Person::new(&name, "submitted_by")
                        .map_err(|e| located(e, at()))?
                        .name()
                        .to_string(),
                    None => default_submitter.to_string(),
                },
            })
        })();
        let provenance = headers
            .iter()
            .enumerate()
            .filter(|(_, h)| h.starts_with(PROVENANCE_PREFIX))
            .map(|(i, h)| (h.clone(), record.get(i).copied().unwrap_or("").to_string()))
            .collect();
        rows.push(ManifestRow {
            line,
            file,
            submission,
            provenance,
        });
    }
    if rows.is_empty() {
        return Err(Error::input(
            Location::file(path),
            "the manifest has a header but no rows",
            "add one row per spectrum file",
        ));
    }
    Ok(rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_stay_inside_the_manifest_folder() {
        let base = Path::new("/tmp/nowhere-whorl");
        assert!(resolve_within(base, "spectra/a.csv").is_ok());
        assert!(resolve_within(base, "spectra/../a.csv").is_ok());
        assert!(
            resolve_within(base, "../a.csv")
                .unwrap_err()
                .contains("outside")
        );
        assert!(
            resolve_within(base, "spectra/../../a.csv")
                .unwrap_err()
                .contains("outside")
        );
        assert!(
            resolve_within(base, "/etc/passwd")
                .unwrap_err()
                .contains("absolute")
        );
        assert!(resolve_within(base, "").is_err());
    }

    #[test]
    fn a_readable_manifest_takes_absolute_paths_and_paths_out_of_its_folder() {
        let tmp = tempfile::tempdir().unwrap();
        let elsewhere = tempfile::tempdir().unwrap();
        let far = elsewhere.path().join("far.csv");
        let path = tmp.path().join("list.csv");
        let text = format!(
            "file,technique,name\n{},ir,far\n../up.csv,ir,up\nnear.csv,ir,near\n",
            far.display()
        );
        std::fs::write(&path, text).unwrap();
        let rows = read_manifest_with(&path, "x", ManifestPaths::Readable).unwrap();
        let paths: Vec<PathBuf> = rows
            .into_iter()
            .map(|r| r.submission.unwrap().path)
            .collect();
        assert_eq!(
            paths,
            [
                far,
                tmp.path().join("../up.csv"),
                tmp.path().join("near.csv")
            ]
        );
        // The same manifest, confined: both rows that leave the folder are refused.
        let confined: Vec<bool> = read_manifest(&path, "x")
            .unwrap()
            .iter()
            .map(|r| r.submission.is_ok())
            .collect();
        assert_eq!(confined, [false, false, true]);
    }

    #[test]
    fn crlf_line_ends_number_lines_as_lf_does() {
        // RFC 4180 section 2 rule 1: CRLF ends a record; either way, the third line is line 3.
        for eol in ["\n", "\r\n"] {
            let text =
                format!("file,technique,name{eol}a.csv,ir,x{eol}b.csv,bogus,y{eol}c.csv,ir{eol}");
            let (_tmp, rows) = read(text.as_bytes());
            let err = rows.unwrap_err().to_string();
            assert!(err.contains("list.csv:4:"), "{eol:?}: {err}");
            let text = format!("file,technique,name{eol}a.csv,ir,x{eol}b.csv,bogus,y{eol}");
            let rows = submissions(text.as_bytes());
            let err = rows[1].as_ref().unwrap_err();
            assert!(err.contains("list.csv:3:"), "{eol:?}: {err}");
        }
    }

    #[test]
    fn extra_columns_get_query_names() {
        assert_eq!(extra_key("Lot No."), "lot_no_");
        assert_eq!(extra_key("class"), "class");
    }

    /// Reads `text` as a manifest file (bytes as given) in a fresh folder.
    fn read(text: &[u8]) -> (tempfile::TempDir, Result<Vec<ManifestRow>>) {
        let tmp = tempfile::tempdir().unwrap();
        let path = tmp.path().join("list.csv");
        std::fs::write(&path, text).unwrap();
        let rows = read_manifest(&path, "default.submitter");
        (tmp, rows)
    }

    /// The manifest-level refusal of `text`: its line and reason.
    fn refused(text: &str) -> (Option<usize>, String) {
        match read(text.as_bytes()).1 {
            Err(Error::Input { at, reason, .. }) => (at.line, reason),
            other => panic!("expected a refusal, got {other:?}"),
        }
    }

    /// The submission of each row, or its error message.
    fn submissions(text: &[u8]) -> Vec<std::result::Result<Submission, String>> {
        let (_tmp, rows) = read(text);
        rows.unwrap()
            .into_iter()
            .map(|r| r.submission.map_err(|e| e.to_string()))
            .collect()
    }

    #[test]
    fn a_manifest_is_refused_as_a_whole_with_its_line() {
        assert_eq!(
            refused("file,name\na.csv,x\n"),
            (Some(1), "the manifest has no 'technique' column".into())
        );
        assert_eq!(
            refused("file,technique,name\n"),
            (None, "the manifest has a header but no rows".into())
        );
        let (line, reason) = refused("file,technique,name,whorl_status\na.csv,ir,x,pending\n");
        assert_eq!(line, Some(1));
        assert!(reason.contains("exported bundle"), "{reason}");
        let (line, reason) = refused("file,technique,name\na.csv,ir\n");
        assert_eq!(line, Some(2));
        assert!(reason.contains("not valid CSV"), "{reason}");
    }

    #[test]
    fn a_submitter_is_stored_in_nfkc_and_a_hidden_character_refuses_the_row() {
        // Full-width letters become ASCII under NFKC (UAX #15); a zero-width space is refused.
        let rows = submissions(
            "file,technique,name,submitted_by\na.csv,ir,acetone,\u{FF42}.x\nb.csv,ir,butanone,b\u{200B}.x\n"
                .as_bytes(),
        );
        assert_eq!(rows[0].as_ref().unwrap().submitted_by, "b.x");
        let err = rows[1].as_ref().unwrap_err().to_string();
        assert!(err.contains("U+200B") && err.contains(":3"), "{err}");
    }

    #[test]
    fn a_byte_order_mark_and_spaces_around_headers_are_ignored() {
        let rows = submissions(b"\xEF\xBB\xBFfile , technique,name\na.csv,ir,acetone\n");
        let s = rows[0].as_ref().unwrap();
        assert_eq!(
            (s.technique, s.metadata.name.as_str()),
            (Technique::Ir, "acetone")
        );
        assert!(s.path.ends_with("a.csv"));
    }

    #[test]
    fn fields_become_metadata() {
        let text = "file,technique,name,synonyms,tags,Lot No.,submitted_by,x_unit\n\
                    a.csv,ir,acetone,\"propanone; dimethyl ketone;\",solvent;;ketone,L-7,,um\n\
                    b.csv,ir,butanone,,,,b.analyst,\n";
        let rows = submissions(text.as_bytes());
        let a = rows[0].as_ref().unwrap();
        assert_eq!(a.metadata.synonyms, ["propanone", "dimethyl ketone"]);
        assert_eq!(a.metadata.tags, ["solvent", "ketone"]);
        assert_eq!(
            a.metadata.extra.get("lot_no_").map(String::as_str),
            Some("L-7")
        );
        assert_eq!(a.submitted_by, "default.submitter");
        assert_eq!(a.x_unit, Some(XUnit::Micrometre));
        let b = rows[1].as_ref().unwrap();
        assert!(b.metadata.extra.is_empty() && b.metadata.synonyms.is_empty());
        assert_eq!(b.submitted_by, "b.analyst");
        assert_eq!(b.x_unit, None);
    }

    #[test]
    fn a_bad_row_is_refused_alone_with_its_line() {
        let text = "file,technique,name,y_unit\n\
                    a.csv,ir,acetone,\n\
                    a.csv,IR,acetone again,\n\
                    a.csv,raman,acetone,\n\
                    b.csv,uv,x,\n\
                    ../c.csv,ir,x,\n\
                    d.csv,ir,x,furlongs\n";
        let rows = submissions(text.as_bytes());
        assert!(rows[0].is_ok());
        // The same file and technique, whatever the case of the technique's name.
        let repeat = rows[1].as_ref().unwrap_err();
        assert!(repeat.contains(":3: this row repeats line 2"), "{repeat}");
        // The same file under another technique is another spectrum.
        assert!(rows[2].is_ok());
        for (i, part) in [(3, ":5:"), (4, ":6: '../c.csv' leads outside"), (5, ":7:")] {
            let err = rows[i].as_ref().unwrap_err();
            assert!(err.contains(part), "row {i}: {err}");
        }
    }
}
