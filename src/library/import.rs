//! Bulk import: stage files in parallel, store them in batched transactions.

use rayon::prelude::*;

use crate::error::{Error, Result};
use crate::library::{Library, ManifestRow, Outcome, Staged, stage};
use crate::prepare::Coverage;
use crate::spectrum::sha256_hex;
use crate::technique::Technique;

/// Spectra per transaction in a bulk import. A crash loses at most the batch under way, and
/// re-running the import skips what is already stored.
pub const BATCH: usize = 500;

/// The batch size: `WHORL_IMPORT_BATCH` when set (the crash test uses small batches to land
/// its kills between many commits), else [`BATCH`].
pub fn batch_size() -> usize {
    std::env::var("WHORL_IMPORT_BATCH")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n| n > 0)
        .unwrap_or(BATCH)
}

/// What happened to one manifest row.
#[derive(Debug)]
pub struct RowReport {
    /// Manifest line.
    pub line: usize,
    /// File as written in the manifest.
    pub file: String,
    /// Stored, already present, or refused with the reason.
    pub outcome: Result<Outcome>,
    /// What preparation warned about (stored with a new spectrum).
    pub warnings: Vec<String>,
    /// A new IR or Raman spectrum measured over less than its grid: its technique and the
    /// range it covers.
    pub coverage: Option<(Technique, Coverage)>,
}

/// The result of a bulk import.
#[derive(Debug, Default)]
pub struct ImportReport {
    /// One entry per manifest row, in manifest order.
    pub rows: Vec<RowReport>,
    /// True when `all_or_nothing` refused the whole import.
    pub rolled_back: bool,
}

impl ImportReport {
    /// Rows newly stored.
    pub fn imported(&self) -> usize {
        self.rows
            .iter()
            .filter(|r| matches!(r.outcome, Ok(Outcome::Added { .. })))
            .count()
    }

    /// Rows whose raw points were already in the library.
    pub fn already_present(&self) -> usize {
        self.rows
            .iter()
            .filter(|r| matches!(r.outcome, Ok(Outcome::AlreadyPresent { .. })))
            .count()
    }

    /// The new spectra measured over less than their grid, as one note for the whole import
    /// (a lab importing 600 ATR spectra reads one line, not 600): how many of the files
    /// stored, and their ranges, most frequent first. `None` when every one covers its grid.
    pub fn coverage_note(&self) -> Option<String> {
        let mut ranges: Vec<((Technique, i64, i64), usize)> = Vec::new();
        for (t, c) in self.rows.iter().filter_map(|r| r.coverage.as_ref()) {
            let key = (*t, c.lo.round() as i64, c.hi.round() as i64);
            match ranges.iter_mut().find(|(k, _)| *k == key) {
                Some((_, n)) => *n += 1,
                None => ranges.push((key, 1)),
            }
        }
        if ranges.is_empty() {
            return None;
        }
        ranges.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
        let partial: usize = ranges.iter().map(|r| r.1).sum();
        let mut listed: Vec<String> = (ranges.iter().take(4))
            .map(|((t, lo, hi), n)| format!("{t} {lo}-{hi} cm-1 ({n})"))
            .collect();
        if ranges.len() > 4 {
            listed.push(format!("{} other ranges", ranges.len() - 4));
        }
        Some(format!(
            "{partial} of {} files stored cover less than their grid: {}; scores compare each with an unknown over the range both cover",
            self.imported(),
            listed.join(", ")
        ))
    }

    /// Rows refused, with their reasons.
    pub fn rejected(&self) -> impl Iterator<Item = (&RowReport, &Error)> {
        self.rows
            .iter()
            .filter_map(|r| r.outcome.as_ref().err().map(|e| (r, e)))
    }
}

/// A batch read and prepared, waiting to be stored.
struct Prepped {
    /// Rows whose files are already stored.
    skipped: Vec<RowReport>,
    /// `(line, file, staged)` for the rest.
    staged: Vec<(usize, String, Result<Staged>)>,
    rows: usize,
}

/// Imports manifest rows. By default every good row is stored and bad rows are reported;
/// with `all_or_nothing`, one bad row means nothing is stored. `progress` is called with the
/// number of rows finished so far.
///
/// Batches are pipelined: while one batch is stored (SQLite, one thread), the next one is
/// read and prepared on the other cores. Preparing has no side effects, so a crash leaves
/// every committed batch whole and nothing of the one under way or the one being prepared;
/// a re-run stores those.
///
/// The text index is updated once, after the last batch ([`Library::defer_text`]).
pub fn import_rows(
    lib: &mut Library,
    rows: Vec<ManifestRow>,
    actor: &str,
    all_or_nothing: bool,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<ImportReport> {
    lib.defer_text();
    let result = import_batches(lib, rows, actor, all_or_nothing, progress);
    let flushed = lib.flush_text();
    let report = result?;
    flushed?;
    Ok(report)
}

fn import_batches(
    lib: &mut Library,
    rows: Vec<ManifestRow>,
    actor: &str,
    all_or_nothing: bool,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<ImportReport> {
    let mut report = ImportReport::default();
    let chunk = if all_or_nothing {
        rows.len().max(1)
    } else {
        batch_size()
    };
    let mut done = 0;
    let mut rows = rows.into_iter().peekable();
    let mut waiting: Option<Prepped> = None;
    loop {
        let batch: Vec<ManifestRow> = rows.by_ref().take(chunk).collect();
        if batch.is_empty() && waiting.is_none() {
            break;
        }
        // Files already stored are skipped before preparing. A file of this batch that
        // the batch being stored also holds is caught by the store itself (same raw points).
        let (skipped, to_stage) = present_files(lib, batch)?;
        let recipes = lib.recipes().clone();
        let previous = waiting.take();
        let (staged, stored) = std::thread::scope(|s| {
            let staging = s.spawn(move || stage_rows(&recipes, to_stage));
            let stored = match previous {
                Some(p) => store_batch(lib, p, actor, all_or_nothing, &mut report).map(Some),
                None => Ok(None),
            };
            (staging.join().expect("staging does not panic"), stored)
        });
        if let Some(n) = stored? {
            done += n;
            progress(done);
        }
        if report.rolled_back {
            break;
        }
        let n = skipped.len() + staged.len();
        if n > 0 {
            waiting = Some(Prepped {
                skipped,
                staged,
                rows: n,
            });
        }
    }
    if report.rolled_back {
        // Nothing was committed: report every row that was good as not imported.
        report.rows.retain(|r| r.outcome.is_err());
    }
    report.rows.sort_by_key(|r| r.line);
    Ok(report)
}

/// Splits a batch into rows whose exact file bytes are already stored for their technique
/// (reported as already present, without reading and preparing them: a re-run resumes
/// quickly) and rows to prepare.
fn present_files(
    lib: &Library,
    batch: Vec<ManifestRow>,
) -> Result<(Vec<RowReport>, Vec<ManifestRow>)> {
    let file_hashes: Vec<Option<(Technique, String)>> = batch
        .par_iter()
        .map(|row| {
            let s = row.submission.as_ref().ok()?;
            let bytes = std::fs::read(&s.path).ok()?;
            Some((s.technique, sha256_hex(&bytes)))
        })
        .collect();
    let mut skipped = Vec::new();
    let mut rest = Vec::with_capacity(batch.len());
    for (row, h) in batch.into_iter().zip(file_hashes) {
        let known = match h {
            Some((t, sha)) => lib.present_by_file(t, &sha)?,
            None => None,
        };
        match known {
            Some(spectrum_id) => skipped.push(RowReport {
                line: row.line,
                // A withdrawn spectrum's file is refused with the way back, as `add` refuses it.
                outcome: match row.submission.as_ref().map(|s| s.path.as_path()) {
                    Ok(path) => super::store::refuse_withdrawn(&lib.conn, spectrum_id, path)
                        .map(|()| Outcome::AlreadyPresent { spectrum_id }),
                    Err(_) => Ok(Outcome::AlreadyPresent { spectrum_id }),
                },
                file: row.file,
                warnings: Vec::new(),
                coverage: None,
            }),
            None => rest.push(row),
        }
    }
    Ok((skipped, rest))
}

/// A row whose file does not exist gets a reason and hint about manifest paths, which the
/// spectrum reader (also used for a search's unknown) cannot give.
fn missing(err: Error, entry: &str, path: &std::path::Path) -> Error {
    if path.exists() {
        return err;
    }
    Error::input(
        crate::error::Location::file(path),
        format!("the file '{entry}' does not exist"),
        "check the name; a manifest's paths are read relative to the manifest's folder",
    )
}

/// Reads and prepares rows in parallel.
fn stage_rows(
    recipes: &crate::library::Recipes,
    rows: Vec<ManifestRow>,
) -> Vec<(usize, String, Result<Staged>)> {
    rows.into_par_iter()
        .map(|row| {
            let file = row.file;
            let staged = row.submission.and_then(|s| {
                let path = s.path.clone();
                stage(recipes, s).map_err(|e| missing(e, &file, &path))
            });
            (row.line, file, staged)
        })
        .collect()
}

/// Stores one prepared batch in one transaction and reports its rows; returns the rows done.
fn store_batch(
    lib: &mut Library,
    batch: Prepped,
    actor: &str,
    all_or_nothing: bool,
    report: &mut ImportReport,
) -> Result<usize> {
    // A row refused before staging (the file of a withdrawn spectrum) counts as bad too.
    let skipped_bad = batch.skipped.iter().any(|r| r.outcome.is_err());
    report.rows.extend(batch.skipped);
    let staged = batch.staged;
    let good: Vec<Staged> = staged
        .iter()
        .filter_map(|(_, _, s)| s.as_ref().ok().cloned())
        .collect();
    let any_bad = skipped_bad || staged.iter().any(|s| s.2.is_err());
    let mut stored = if all_or_nothing && any_bad {
        Vec::new()
    } else {
        lib.store(&good, actor, all_or_nothing)?
    };
    stored.reverse();
    for (line, file, s) in staged {
        let (outcome, warnings, coverage) = match s {
            Ok(_) if all_or_nothing && any_bad => continue,
            Ok(staged) => {
                let outcome = stored.pop().expect("one outcome per staged spectrum");
                let added = matches!(outcome, Ok(Outcome::Added { .. }));
                let mut warnings = staged.prepared.warnings;
                if let Some(w) = outcome.as_ref().ok().and_then(Outcome::same_name_warning) {
                    warnings.push(w);
                }
                let coverage = (staged.prepared.coverage)
                    .filter(|_| added)
                    .map(|c| (staged.submission.technique, c));
                (outcome, warnings, coverage)
            }
            Err(e) => (Err(e), Vec::new(), None),
        };
        report.rows.push(RowReport {
            line,
            file,
            outcome,
            warnings,
            coverage,
        });
    }
    if all_or_nothing && (any_bad || report.rejected().next().is_some()) {
        report.rolled_back = true;
    }
    Ok(batch.rows)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::read_manifest;
    use crate::library::synthetic::{Rng, ir_points};
    use crate::library::testing::rows;
    use std::path::Path;

    /// Writes seeded IR spectra as CSV files and returns their text.
    fn write_spectra(dir: &Path, seeds: &[u64]) -> Vec<String> {
        seeds
            .iter()
            .map(|&seed| {
                let mut text = "x,y\n".to_string();
                for (x, y) in ir_points(&mut Rng::new(seed)) {
                    text.push_str(&format!("{x},{y}\n"));
                }
                std::fs::write(dir.join(format!("s{seed}.csv")), &text).unwrap();
                text
            })
            .collect()
    }

    fn import(lib: &mut Library, manifest: &Path, all_or_nothing: bool) -> ImportReport {
        let rows = read_manifest(manifest, "alice").unwrap();
        import_rows(lib, rows, "alice", all_or_nothing, &|_| {}).unwrap()
    }

    fn ids(report: &ImportReport) -> Vec<i64> {
        report
            .rows
            .iter()
            .map(|r| match r.outcome.as_ref().unwrap() {
                Outcome::Added { spectrum_id, .. } | Outcome::AlreadyPresent { spectrum_id } => {
                    *spectrum_id
                }
            })
            .collect()
    }

    #[test]
    fn rows_already_stored_are_skipped() {
        let tmp = tempfile::tempdir().unwrap();
        let texts = write_spectra(tmp.path(), &[1, 2, 3]);
        let manifest = tmp.path().join("manifest.csv");
        std::fs::write(
            &manifest,
            "file,technique,name\ns1.csv,ir,acetone\ns2.csv,ir,butanone\ns3.csv,ir,ethanol\n",
        )
        .unwrap();
        let mut lib = Library::in_memory("t").unwrap();
        let first = import(&mut lib, &manifest, false);
        assert_eq!((first.imported(), first.already_present()), (3, 0));
        assert_eq!(lib.text().len(), 3);
        let events = lib.last_event().unwrap();
        // The same files again: found by their bytes, nothing written.
        let again = import(&mut lib, &manifest, false);
        assert_eq!((again.imported(), again.already_present()), (0, 3));
        assert_eq!(ids(&again), ids(&first));
        assert_eq!(lib.last_event().unwrap(), events);
        // Found before they are read and prepared: a CAS RN with a wrong check digit, which
        // staging refuses, does not matter for a file already stored.
        std::fs::write(
            &manifest,
            "file,technique,name,cas\ns1.csv,ir,acetone,67-64-2\n",
        )
        .unwrap();
        let skipped = import(&mut lib, &manifest, false);
        assert_eq!(ids(&skipped), [ids(&first)[0]]);
        // Other bytes holding the same points: found by the raw points when stored.
        std::fs::write(
            tmp.path().join("copy.csv"),
            format!("# measured again\n{}", texts[1]),
        )
        .unwrap();
        let copy = tmp.path().join("copy-manifest.csv");
        std::fs::write(&copy, "file,technique,name\ncopy.csv,ir,butanone\n").unwrap();
        let report = import(&mut lib, &copy, false);
        assert_eq!(ids(&report), [ids(&first)[1]]);
        assert_eq!(report.already_present(), 1);
        assert_eq!(rows(&lib, "spectrum"), 3);
        assert_eq!(lib.last_event().unwrap(), events);
    }

    #[test]
    fn spectra_covering_less_than_the_grid_make_one_note_per_import() {
        // Twelve IR files, nine measured from 650 cm-1 only (a diamond ATR accessory's range,
        // common practice), one from 1000 to 3000 cm-1: one note for the import, counting
        // them by range. Before, each file carried its own warning line.
        let tmp = tempfile::tempdir().unwrap();
        let mut manifest = "file,technique,name\n".to_string();
        for seed in 1..=12u64 {
            let range = match seed {
                1 | 2 => (400.0, 4000.0),
                3 => (1000.0, 3000.0),
                _ => (650.0, 4000.0),
            };
            let mut text = "x,y\n".to_string();
            for (x, y) in ir_points(&mut Rng::new(seed)) {
                if x >= range.0 && x <= range.1 {
                    text.push_str(&format!("{x},{y}\n"));
                }
            }
            std::fs::write(tmp.path().join(format!("s{seed}.csv")), text).unwrap();
            manifest.push_str(&format!("s{seed}.csv,ir,c{seed}\n"));
        }
        let path = tmp.path().join("manifest.csv");
        std::fs::write(&path, manifest).unwrap();
        let mut lib = Library::in_memory("t").unwrap();
        let report = import(&mut lib, &path, false);
        assert_eq!(report.imported(), 12);
        assert!(
            report.rows.iter().all(|r| r.warnings.is_empty()),
            "no per-file warnings"
        );
        assert_eq!(
            report.coverage_note().unwrap(),
            "10 of 12 files stored cover less than their grid: ir 652-4000 cm-1 (9), \
             ir 1000-3000 cm-1 (1); scores compare each with an unknown over the range both cover"
        );
        // Imported again: nothing new is stored, so nothing to note.
        assert_eq!(import(&mut lib, &path, false).coverage_note(), None);
    }

    #[test]
    fn all_or_nothing_stores_nothing_when_one_row_is_bad() {
        let tmp = tempfile::tempdir().unwrap();
        write_spectra(tmp.path(), &[1, 2]);
        std::fs::write(tmp.path().join("bad.csv"), "x,y\n4000,abc\n").unwrap();
        let manifest = tmp.path().join("manifest.csv");
        std::fs::write(
            &manifest,
            "file,technique,name\ns1.csv,ir,acetone\nbad.csv,ir,broken\ns2.csv,ir,butanone\n",
        )
        .unwrap();
        let mut lib = Library::in_memory("t").unwrap();
        let report = import(&mut lib, &manifest, true);
        assert!(report.rolled_back);
        let refused: Vec<usize> = report.rejected().map(|(r, _)| r.line).collect();
        assert_eq!(refused, [3]);
        assert_eq!(rows(&lib, "spectrum"), 0);
        // Without it, the good rows are stored and the bad one reported.
        let report = import(&mut lib, &manifest, false);
        assert!(!report.rolled_back);
        assert_eq!((report.imported(), report.rejected().count()), (2, 1));
    }
}
