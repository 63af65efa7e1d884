//! Portable bundles: export spectra with their full history, and verify a bundle before it is
//! imported elsewhere (`bundle_import`).
//!
//! A bundle is a folder: `spectra/<id>.<technique>.csv` (raw points exactly as imported),
//! `manifest.csv` (metadata, provenance, revision and review history), `bundle.json` (format,
//! state hash of what was exported, recipes, who and when) and `SHA256SUMS` (sha256sum format)
//! covering every other file.

use std::collections::{BTreeMap, BTreeSet, HashSet};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::keys::{KeyPair, SIGNATURE_FILE, signature_line};
use super::manifest::{KNOWN_COLUMNS, ManifestRow, resolve_within};
use super::records::SpectrumRecord;
use super::{ContentSum, Library, now, record_hash, state_hash};
use crate::error::{Error, Location, Result};
use crate::spectrum::{Metadata, Status};
use crate::spectrum::{csv_cell, sha256_hex, sha256_hex_of};

/// The bundle format this build writes and reads.
pub const BUNDLE_FORMAT: &str = "whorl-bundle-1";

/// `bundle.json`.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct BundleInfo {
    /// Always [`BUNDLE_FORMAT`].
    pub format: String,
    /// State hash of the exported spectra (recipes plus their searchable records). Bundles
    /// written before the term changed call it `fingerprint`.
    #[serde(alias = "fingerprint")]
    pub state_hash: String,
    /// Spectra in the bundle.
    pub spectra: usize,
    /// When it was written (UTC).
    pub exported_at: String,
    /// Who wrote it.
    pub exported_by: String,
    /// whorl version that wrote it.
    pub tool_version: String,
    /// State hash of the whole library it came from (`source_fingerprint` in older bundles).
    #[serde(alias = "source_fingerprint")]
    pub source_state_hash: String,
    /// The recipes of the library it came from.
    pub recipes: serde_json::Value,
    /// The metadata query that selected the spectra, if any.
    pub query: Option<String>,
    /// The status that selected the spectra, if any.
    pub status: Option<Status>,
}

/// One earlier or current revision, as carried in a bundle.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub(super) struct RevisionEntry {
    pub(super) number: i64,
    pub(super) metadata: Metadata,
    pub(super) created_at: String,
    pub(super) created_by: String,
    pub(super) reason: Option<String>,
}

/// What an export wrote.
#[derive(Debug, Clone, Serialize)]
pub struct ExportReport {
    /// The bundle folder.
    pub dir: PathBuf,
    /// `bundle.json` as written.
    pub info: BundleInfo,
}

const PROVENANCE_COLUMNS: [&str; 11] = [
    "whorl_original_id",
    "whorl_status",
    "whorl_revision",
    "whorl_original_file",
    "whorl_original_file_sha256",
    "whorl_raw_sha256",
    "whorl_created_at",
    "whorl_withdrawn_reason",
    "whorl_revisions",
    "whorl_reviews",
    "whorl_status_history",
];

fn io(context: impl Into<String>) -> impl FnOnce(std::io::Error) -> Error {
    let context = context.into();
    move |e| Error::io(context, e)
}

/// The text of a raw-points CSV: shortest round-trip decimal forms, so reading it back gives
/// the same f64 values and so the same raw hash.
fn points_csv(rec: &SpectrumRecord, points: &[(f64, f64)]) -> String {
    let mut s = format!(
        "# whorl bundle: raw points of spectrum {} as imported from {} (x {}, y {})\nx,y\n",
        rec.id, rec.file_name, rec.x_unit, rec.y_unit
    );
    for (x, y) in points {
        let _ = writeln!(s, "{x},{y}");
    }
    s
}

impl Library {
    /// Writes a bundle of the spectra matching `query` and `status` (all when both are `None`)
    /// into `dir`, which must not exist or be empty, signed with `signer` if given (a
    /// `SIGNATURE` over `SHA256SUMS`). The bundle is written beside `dir` and
    /// renamed into place, so a failed export leaves no half bundle. `progress(done, total)`
    /// is called as spectra are written.
    pub fn export(
        &self,
        dir: &Path,
        query: Option<&str>,
        status: Option<Status>,
        actor: &str,
        signer: Option<&KeyPair>,
        progress: &dyn Fn(usize, usize),
    ) -> Result<ExportReport> {
        if dir.exists()
            && std::fs::read_dir(dir)
                .map_err(io(format!("reading {}", dir.display())))?
                .next()
                .is_some()
        {
            return Err(Error::invalid(
                format!("{} exists and is not empty", dir.display()),
                "export into a new folder",
            ));
        }
        let allowed: Option<HashSet<i64>> = query.map(|q| self.text.matching_ids(q)).transpose()?;
        let records: Vec<SpectrumRecord> = self
            .all_records()?
            .into_iter()
            .filter(|r| status.is_none_or(|s| r.status == s))
            .filter(|r| allowed.as_ref().is_none_or(|a| a.contains(&r.id)))
            .collect();
        let name = dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "bundle".into());
        let staging = dir.with_file_name(format!(".{name}.partial"));
        if staging.exists() {
            std::fs::remove_dir_all(&staging)
                .map_err(io(format!("removing {}", staging.display())))?;
        }
        // Recorded in the library before it is made, so that a killed export's folder is
        // removed the next time the library is opened, wherever it was being written.
        let under_way = self.record_export(&staging)?;
        std::fs::create_dir_all(staging.join("spectra"))
            .map_err(io(format!("creating {}", staging.display())))?;
        if let Some((_, token)) = &under_way {
            std::fs::write(staging.join(EXPORT_MARK), token)
                .map_err(io(format!("writing {}", staging.display())))?;
        }

        let extra_keys: BTreeSet<String> = records
            .iter()
            .flat_map(|r| r.metadata.extra.keys().cloned())
            .collect();
        let mut w = csv::Writer::from_writer(Vec::new());
        let header: Vec<&str> = KNOWN_COLUMNS
            .iter()
            .copied()
            .chain(extra_keys.iter().map(String::as_str))
            .chain(PROVENANCE_COLUMNS.iter().copied())
            .collect();
        // Text from users and files is written through `csv_cell` (OWASP's CSV-injection
        // guidance), which the bundle reader undoes, so the round trip loses nothing.
        w.write_record(header.iter().map(|h| csv_cell(h).into_owned()))
            .map_err(csv_error)?;
        let mut sums: BTreeMap<String, String> = BTreeMap::new();
        let mut content = ContentSum::default();
        for (done, rec) in records.iter().enumerate() {
            progress(done, records.len());
            let file = format!("spectra/{}.{}.csv", rec.id, rec.technique);
            let text = points_csv(rec, &self.raw_points(rec.id)?);
            std::fs::write(staging.join(&file), &text).map_err(io(format!("writing {file}")))?;
            sums.insert(file.clone(), sha256_hex(text.as_bytes()));
            let m = &rec.metadata;
            let revisions = self.revision_entries(rec.id)?;
            let reviews = self.reviews(rec.id)?;
            let mut row: Vec<String> = vec![
                file,
                rec.technique.to_string(),
                m.name.clone(),
                m.formula.clone().unwrap_or_default(),
                m.cas.clone().unwrap_or_default(),
                m.synonyms.join(";"),
                m.tags.join(";"),
                m.solvent.clone().unwrap_or_default(),
                rec.y_unit.clone(),
                rec.x_unit.clone(),
                m.source.clone().unwrap_or_default(),
                rec.submitted_by.clone(),
                m.instrument.clone().unwrap_or_default(),
                m.acquired.clone().unwrap_or_default(),
                m.notes.clone().unwrap_or_default(),
            ];
            row.extend(
                extra_keys
                    .iter()
                    .map(|k| m.extra.get(k).cloned().unwrap_or_default()),
            );
            row.extend([
                rec.id.to_string(),
                rec.status.to_string(),
                rec.revision.to_string(),
                rec.file_name.clone(),
                rec.file_sha256.clone(),
                rec.raw_sha256.clone(),
                rec.created_at.clone(),
                self.withdrawn_reason(rec.id)?.unwrap_or_default(),
                serde_json::to_string(&revisions)?,
                serde_json::to_string(&reviews)?,
                serde_json::to_string(&self.status_history(rec.id)?)?,
            ]);
            w.write_record(row.iter().map(|c| csv_cell(c).into_owned()))
                .map_err(csv_error)?;
            if rec.status.searchable() {
                content.add(&record_hash(
                    rec.technique.name(),
                    rec.status.name(),
                    &rec.raw_sha256,
                    &serde_json::to_string(m)?,
                ));
            }
        }
        let manifest = w
            .into_inner()
            .map_err(|e| Error::invalid(format!("writing the manifest: {e}"), ""))?;
        std::fs::write(staging.join("manifest.csv"), &manifest)
            .map_err(io("writing manifest.csv"))?;
        sums.insert("manifest.csv".into(), sha256_hex(&manifest));

        let recipes_json = serde_json::to_string(&self.recipes.values().collect::<Vec<_>>())?;
        let info = BundleInfo {
            format: BUNDLE_FORMAT.into(),
            state_hash: state_hash(&recipes_json, content),
            spectra: records.len(),
            exported_at: now(),
            exported_by: actor.into(),
            tool_version: env!("CARGO_PKG_VERSION").into(),
            source_state_hash: self.state_hash()?,
            recipes: serde_json::from_str(&recipes_json)?,
            query: query.map(str::to_string),
            status,
        };
        let info_text = serde_json::to_string_pretty(&info)? + "\n";
        std::fs::write(staging.join("bundle.json"), &info_text)
            .map_err(io("writing bundle.json"))?;
        sums.insert("bundle.json".into(), sha256_hex(info_text.as_bytes()));
        let mut listing = String::new();
        for (file, sum) in &sums {
            let _ = writeln!(listing, "{sum}  {file}");
        }
        std::fs::write(staging.join("SHA256SUMS"), &listing).map_err(io("writing SHA256SUMS"))?;
        if let Some(key) = signer {
            std::fs::write(
                staging.join(SIGNATURE_FILE),
                signature_line(key, listing.as_bytes()),
            )
            .map_err(io("writing SIGNATURE"))?;
        }
        if dir.exists() {
            std::fs::remove_dir(dir).map_err(io(format!("replacing empty {}", dir.display())))?;
        }
        if under_way.is_some() {
            std::fs::remove_file(staging.join(EXPORT_MARK))
                .map_err(io(format!("writing {}", staging.display())))?;
        }
        std::fs::rename(&staging, dir)
            .map_err(io(format!("moving the bundle into {}", dir.display())))?;
        if let Some((record, _)) = under_way {
            // The bundle is whole; a record left behind would only be skipped later.
            let _ = std::fs::remove_file(record);
        }
        Ok(ExportReport {
            dir: dir.to_path_buf(),
            info,
        })
    }

    /// Records an export under way in the library's `exports-under-way/` folder: a file
    /// named after this process and the time, holding the staging folder's absolute path;
    /// returns the record and the token the staging folder's mark holds. `None` for an
    /// in-memory library.
    fn record_export(&self, staging: &Path) -> Result<Option<(PathBuf, String)>> {
        let Some(root) = self.root() else {
            return Ok(None);
        };
        let folder = root.join(EXPORTS_UNDER_WAY);
        std::fs::create_dir_all(&folder).map_err(io(format!("creating {}", folder.display())))?;
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or_default();
        let token = format!("{}-{nanos}", std::process::id());
        let absolute =
            std::path::absolute(staging).map_err(io(format!("resolving {}", staging.display())))?;
        let record = folder.join(&token);
        std::fs::write(&record, absolute.to_string_lossy().as_bytes())
            .map_err(io(format!("writing {}", record.display())))?;
        Ok(Some((record, token)))
    }

    fn revision_entries(&self, id: i64) -> Result<Vec<RevisionEntry>> {
        let mut stmt = self.conn.prepare(
            "SELECT number, metadata, created_at, created_by, reason FROM revision WHERE spectrum_id = ?1 ORDER BY number",
        )?;
        let rows = stmt.query_map([id], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, String>(1)?,
                r.get(2)?,
                r.get(3)?,
                r.get(4)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (number, metadata, created_at, created_by, reason) = row?;
            out.push(RevisionEntry {
                number,
                metadata: serde_json::from_str(&metadata)?,
                created_at,
                created_by,
                reason,
            });
        }
        Ok(out)
    }
}

fn csv_error(e: csv::Error) -> Error {
    Error::invalid(
        format!("writing the bundle manifest: {e}"),
        "check the free space and permissions of the folder",
    )
}

/// The state hash of what a bundle holds, recomputed from its manifest as the export computed
/// it: the recipes of `bundle.json` and, for every searchable row, its technique, status, raw
/// hash (each row's points are checked against it when stored) and metadata.
pub(super) fn content_state_hash(
    dir: &Path,
    info: &BundleInfo,
    rows: &[ManifestRow],
) -> Result<String> {
    let info_path = || Location::file(dir.join("bundle.json"));
    let recipes: Vec<crate::prepare::Recipe> = serde_json::from_value(info.recipes.clone())
        .map_err(|e| {
            Error::input(
                info_path(),
                format!("the recipes cannot be read: {e}"),
                "export the bundle again",
            )
        })?;
    let mut content = ContentSum::default();
    for row in rows {
        let Ok(sub) = &row.submission else { continue };
        let status: Status = row
            .provenance
            .get("whorl_status")
            .map(String::as_str)
            .unwrap_or("")
            .parse()
            .map_err(|_| {
                Error::input(
                    Location::line(dir.join("manifest.csv"), row.line),
                    "the bundle row has an unreadable whorl_status",
                    "export the bundle again",
                )
            })?;
        if status.searchable() {
            content.add(&record_hash(
                sub.technique.name(),
                status.name(),
                row.provenance
                    .get("whorl_raw_sha256")
                    .map(String::as_str)
                    .unwrap_or(""),
                &serde_json::to_string(&sub.metadata)?,
            ));
        }
    }
    Ok(state_hash(&serde_json::to_string(&recipes)?, content))
}

/// Checks `SHA256SUMS` against every file it lists, and that every file in the bundle is listed.
pub fn verify_bundle(dir: &Path) -> Result<BundleInfo> {
    verify_listing(dir, &read_sums(dir)?)
}

/// Whether a file that fails its checksum matches it once its CRLF line endings are turned
/// back into LF: a text-mode copy changed it, nothing else. Only asked of a file that
/// already failed, and only of one small enough to read whole (64 MiB).
fn crlf_converted(path: &Path, sum: &str) -> bool {
    let small = std::fs::metadata(path).is_ok_and(|m| m.len() <= 64 << 20);
    let Some(bytes) = small.then(|| std::fs::read(path).ok()).flatten() else {
        return false;
    };
    if !bytes.windows(2).any(|w| w == b"\r\n") {
        return false;
    }
    sha256_hex(&lf_endings(&bytes)) == sum
}

/// `bytes` with every CRLF turned into LF.
pub(super) fn lf_endings(bytes: &[u8]) -> Vec<u8> {
    let mut out = Vec::with_capacity(bytes.len());
    for (i, &b) in bytes.iter().enumerate() {
        if !(b == b'\r' && bytes.get(i + 1) == Some(&b'\n')) {
            out.push(b);
        }
    }
    out
}

/// The library's folder of exports under way (see [`remove_abandoned_exports`]).
pub const EXPORTS_UNDER_WAY: &str = "exports-under-way";

/// The file in an export's staging folder that names its record (removed before the rename).
const EXPORT_MARK: &str = ".whorl-export";

/// Removes the staging folders of exports that were killed before they finished, wherever
/// they were being written, as the library's `exports-under-way/` records them. A record
/// whose process still runs is left alone; a folder is removed only if its name ends in
/// `.partial` and its mark holds the record's token, so an edited record cannot make whorl
/// delete anything else. Best effort: returns the folders removed.
pub fn remove_abandoned_exports(root: &Path) -> Vec<PathBuf> {
    let mut removed = Vec::new();
    let Ok(entries) = std::fs::read_dir(root.join(EXPORTS_UNDER_WAY)) else {
        return removed;
    };
    for entry in entries.flatten() {
        let record = entry.path();
        let token = entry.file_name().to_string_lossy().into_owned();
        let Some(pid) = token.split('-').next().and_then(|p| p.parse::<u32>().ok()) else {
            continue;
        };
        if pid != std::process::id() && process_runs(pid) {
            continue;
        }
        let Ok(target) = std::fs::read_to_string(&record) else {
            continue;
        };
        let staging = PathBuf::from(target.trim_end_matches('\n'));
        let ours = staging
            .file_name()
            .is_some_and(|n| n.to_string_lossy().ends_with(".partial"))
            && std::fs::read_to_string(staging.join(EXPORT_MARK)).is_ok_and(|t| t == token);
        if ours {
            if std::fs::remove_dir_all(&staging).is_err() {
                // Kept, to be tried again next time.
                continue;
            }
            removed.push(staging);
        }
        let _ = std::fs::remove_file(&record);
    }
    removed
}

/// Whether a process with this id runs (Linux: `/proc/PID`; elsewhere assumed to, so that a
/// running export is never disturbed and a leftover waits for a rename or manual removal).
fn process_runs(pid: u32) -> bool {
    if cfg!(target_os = "linux") {
        Path::new("/proc").join(pid.to_string()).exists()
    } else {
        true
    }
}

/// The text of a bundle's `SHA256SUMS`.
pub(super) fn read_sums(dir: &Path) -> Result<String> {
    let sums_path = dir.join("SHA256SUMS");
    std::fs::read_to_string(&sums_path).map_err(|e| {
        Error::input(
            Location::file(&sums_path),
            format!("cannot read the checksum list: {e}"),
            "a bundle folder holds SHA256SUMS, manifest.csv, bundle.json and spectra/",
        )
    })
}

/// [`verify_bundle`] with the text of `SHA256SUMS` already read (and its signature checked).
pub(super) fn verify_listing(dir: &Path, text: &str) -> Result<BundleInfo> {
    let sums_path = dir.join("SHA256SUMS");
    let mut listed = BTreeSet::new();
    for (i, line) in text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty())
    {
        let at = Location::line(&sums_path, i + 1);
        let Some((sum, file)) = line.split_once("  ") else {
            return Err(Error::input(
                at,
                "not a checksum line",
                "each line is '<sha256>  <relative path>'",
            ));
        };
        let path = resolve_within(dir, file).map_err(|reason| {
            Error::input(
                at.clone(),
                reason,
                "a bundle may only list files inside its own folder; nothing was imported",
            )
        })?;
        let in_place = file == "manifest.csv"
            || file == "bundle.json"
            || file
                .strip_prefix("spectra/")
                .is_some_and(|f| !f.is_empty() && !f.contains(['/', '\\']));
        if !in_place {
            return Err(Error::input(
                at,
                format!(
                    "'{}' is not a file a bundle holds",
                    crate::error::excerpt(file, 80)
                ),
                "a bundle holds manifest.csv, bundle.json and the files of spectra/, nothing else; nothing was imported",
            ));
        }
        // Only regular files, hashed as they are read: a FIFO would block, a device never end.
        let unreadable = |e: String| {
            Error::input(
                at.clone(),
                format!("{file} is listed but cannot be read: {e}"),
                "the bundle is incomplete; copy it again from its source; nothing was imported",
            )
        };
        match std::fs::metadata(&path) {
            Ok(m) if m.is_file() => {}
            Ok(_) => return Err(unreadable("it is not a regular file".into())),
            Err(e) => return Err(unreadable(e.to_string())),
        }
        let digest = std::fs::File::open(&path)
            .and_then(sha256_hex_of)
            .map_err(|e| unreadable(e.to_string()))?;
        if digest != sum.trim() {
            if crlf_converted(&path, sum.trim()) {
                return Err(Error::input(
                    at,
                    format!(
                        "{file} does not match its checksum: its line endings were turned into CRLF after export (with LF endings it matches)"
                    ),
                    "copy the bundle as binary files (no text-mode transfer, no line-ending conversion such as git's core.autocrlf); nothing was imported",
                ));
            }
            return Err(Error::input(
                at,
                format!("{file} does not match its checksum"),
                "the file was altered or damaged after export; copy the bundle again from its source; nothing was imported",
            ));
        }
        listed.insert(file.to_string());
    }
    let mut present = vec!["manifest.csv".to_string(), "bundle.json".to_string()];
    if let Ok(entries) = std::fs::read_dir(dir.join("spectra")) {
        for e in entries.flatten() {
            present.push(format!("spectra/{}", e.file_name().to_string_lossy()));
        }
    }
    for file in present {
        if !listed.contains(&file) {
            return Err(Error::input(
                Location::file(&sums_path),
                format!("{file} is in the bundle but has no checksum"),
                "a bundle must list every file in SHA256SUMS; nothing was imported",
            ));
        }
    }
    let info_path = dir.join("bundle.json");
    let info: BundleInfo =
        serde_json::from_slice(&std::fs::read(&info_path).map_err(io("reading bundle.json"))?)
            .map_err(|e| {
                Error::input(
                    Location::file(&info_path),
                    format!("not a bundle description: {e}"),
                    "export the bundle again",
                )
            })?;
    if info.format != BUNDLE_FORMAT {
        return Err(Error::input(
            Location::file(&info_path),
            format!("bundle format '{}' is not {BUNDLE_FORMAT}", info.format),
            "import it with the whorl version that exported it",
        ));
    }
    Ok(info)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{curated, rows};

    fn export(lib: &Library, dir: &Path) -> ExportReport {
        lib.export(dir, None, None, "carol", None, &|_, _| {})
            .unwrap()
    }

    /// The SHA256SUMS location and reason of a refused bundle.
    fn refusal(dir: &Path) -> (Option<usize>, String) {
        match verify_bundle(dir) {
            Err(Error::Input { at, reason, .. }) => {
                assert_eq!(at.file, dir.join("SHA256SUMS"));
                (at.line, reason)
            }
            other => panic!("expected a refusal, got {other:?}"),
        }
    }

    /// The line of SHA256SUMS that lists `file`.
    fn listed_at(dir: &Path, file: &str) -> usize {
        let sums = std::fs::read_to_string(dir.join("SHA256SUMS")).unwrap();
        1 + sums
            .lines()
            .position(|l| l.ends_with(&format!("  {file}")))
            .unwrap()
    }

    #[test]
    fn an_exported_bundle_verifies_and_names_what_it_holds() {
        let lib = curated();
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        let report = export(&lib, &dir);
        let info = verify_bundle(&dir).unwrap();
        assert_eq!(info.spectra, 3);
        assert_eq!(info.format, BUNDLE_FORMAT);
        assert_eq!(info.exported_by, "carol");
        // Everything exported: the bundle's state hash is the library's.
        assert_eq!(info.state_hash, lib.state_hash().unwrap());
        assert_eq!(report.info.state_hash, info.state_hash);
        let mut files: Vec<String> = std::fs::read_dir(dir.join("spectra"))
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        files.sort();
        assert_eq!(files, ["1.ir.csv", "2.ir.csv", "3.ir.csv"]);
        // Nothing is left beside the bundle.
        assert_eq!(std::fs::read_dir(tmp.path()).unwrap().count(), 1);
    }

    #[test]
    fn a_file_turned_into_crlf_is_refused_saying_so() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        export(&curated(), &dir);
        let file = dir.join("manifest.csv");
        let text = std::fs::read_to_string(&file).unwrap();
        std::fs::write(&file, text.replace('\n', "\r\n")).unwrap();
        let (_, reason) = refusal(&dir);
        assert!(
            reason.contains("line endings were turned into CRLF"),
            "{reason}"
        );
    }

    #[test]
    fn a_file_changed_after_export_is_refused_by_name() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        export(&curated(), &dir);
        let file = dir.join("spectra/2.ir.csv");
        let mut text = std::fs::read_to_string(&file).unwrap();
        text = text.replacen("\n4000,", "\n4000.5,", 1);
        std::fs::write(&file, text).unwrap();
        let (line, reason) = refusal(&dir);
        assert_eq!(reason, "spectra/2.ir.csv does not match its checksum");
        assert_eq!(line, Some(listed_at(&dir, "spectra/2.ir.csv")));
        // Nothing is imported from it.
        let mut other = Library::in_memory("t").unwrap();
        assert!(
            other
                .import_bundle(&dir, "dave", crate::library::Acceptance::Untrusted)
                .is_err()
        );
        assert_eq!(rows(&other, "spectrum"), 0);
    }

    #[test]
    fn a_changed_checksum_line_is_refused_by_name() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        export(&curated(), &dir);
        let sums_path = dir.join("SHA256SUMS");
        let sums = std::fs::read_to_string(&sums_path).unwrap();
        let at = listed_at(&dir, "manifest.csv");
        let changed: Vec<String> = sums
            .lines()
            .enumerate()
            .map(|(i, l)| {
                if i + 1 != at {
                    return l.to_string();
                }
                let flipped = if l.starts_with('0') { "1" } else { "0" };
                format!("{flipped}{}", &l[1..])
            })
            .collect();
        std::fs::write(&sums_path, changed.join("\n") + "\n").unwrap();
        assert_eq!(
            refusal(&dir),
            (Some(at), "manifest.csv does not match its checksum".into())
        );
    }

    #[test]
    fn a_file_the_checksums_do_not_list_is_refused_by_name() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        export(&curated(), &dir);
        std::fs::write(dir.join("spectra/9.ir.csv"), "x,y\n1000,1\n").unwrap();
        let (line, reason) = refusal(&dir);
        assert_eq!(line, None);
        assert_eq!(
            reason,
            "spectra/9.ir.csv is in the bundle but has no checksum"
        );
    }

    #[test]
    fn a_checksum_line_pointing_outside_the_bundle_is_refused() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("bundle");
        export(&curated(), &dir);
        let sums_path = dir.join("SHA256SUMS");
        let mut sums = std::fs::read_to_string(&sums_path).unwrap();
        sums.push_str(&format!("{}  ../secret.csv\n", "0".repeat(64)));
        std::fs::write(&sums_path, sums).unwrap();
        let (_, reason) = refusal(&dir);
        assert!(reason.contains("outside"), "{reason}");
    }
}
