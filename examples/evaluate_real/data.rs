//! The real sets as the harness reads them: manifests, raw CSV points, libraries imported
//! through whorl, and the split of identities into a tuning and a reported part.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use whorl::library::{
    Library, Outcome, Recipes, Status, Submission, default_recipes, import_rows, read_manifest,
    stage,
};
use whorl::prepare::{Prepared, Recipe};
use whorl::search::Request;
use whorl::technique::Technique;

/// One spectrum file of a set: its manifest row, its raw points as written in the CSV, and
/// the id whorl stored its points under.
pub struct Entry {
    /// The file, relative to the set's folder.
    pub file: String,
    /// The identity label: the InChIKey (EI) or the material (Raman).
    pub label: String,
    /// The instrument (Raman; empty for EI).
    pub instrument: String,
    /// The retention index the source gives (EI; `None` where the manifest has none).
    pub ri: Option<f64>,
    /// `(x, y)` as written in the file, in file order.
    pub points: Vec<(f64, f64)>,
}

/// Which part of a set an identity belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Part {
    Tuning,
    Reported,
}

/// FNV-1a, 64 bit (Fowler, Noll and Vo): a fixed hash of a label, so the split never depends
/// on the order of the files or on a library's hasher.
pub fn fnv1a(text: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// The split by identity: the labels sorted by their FNV-1a hash (ties by label), the first
/// half (rounded down) to the tuning part, the rest to the reported part. Every spectrum of
/// one identity lands in the same part.
pub fn split(labels: impl Iterator<Item = String>) -> BTreeMap<String, Part> {
    let mut distinct: Vec<String> = labels.collect();
    distinct.sort();
    distinct.dedup();
    distinct.sort_by_key(|l| (fnv1a(l), l.clone()));
    let half = distinct.len() / 2;
    distinct
        .into_iter()
        .enumerate()
        .map(|(i, l)| {
            (
                l,
                if i < half {
                    Part::Tuning
                } else {
                    Part::Reported
                },
            )
        })
        .collect()
}

/// Reads a CSV of `x,y` rows after a header line: the raw points, independent of whorl's
/// reader.
fn read_points(path: &Path) -> Vec<(f64, f64)> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            let (x, y) = l
                .split_once(',')
                .unwrap_or_else(|| panic!("{}: {l}", path.display()));
            let num = |s: &str| {
                s.trim()
                    .parse::<f64>()
                    .unwrap_or_else(|e| panic!("{}: {s}: {e}", path.display()))
            };
            (num(x), num(y))
        })
        .collect()
}

/// The entries of a set's manifest, in manifest order, with the column holding the label.
pub fn entries(dir: &Path, label_column: &str) -> Vec<Entry> {
    let mut reader = csv::Reader::from_path(dir.join("manifest.csv")).expect("manifest.csv");
    let header = reader.headers().expect("header").clone();
    let col = |name: &str| header.iter().position(|h| h == name);
    let (file, label) = (
        col("file").unwrap(),
        col(label_column).expect("label column"),
    );
    let instrument = col("instrument");
    let ri = col("ri");
    reader
        .records()
        .map(|r| {
            let r = r.expect("manifest row");
            Entry {
                file: r[file].to_string(),
                label: r[label].to_string(),
                instrument: instrument.map_or_else(String::new, |i| r[i].to_string()),
                ri: ri.and_then(|i| r[i].trim().parse::<f64>().ok()),
                points: read_points(&dir.join(&r[file])),
            }
        })
        .collect()
}

/// A set imported into an in-memory library with one recipe changed.
pub struct Imported {
    pub library: Library,
    /// The stored spectrum id of each entry (entries whose points repeat another file's share
    /// its id).
    pub ids: Vec<i64>,
    /// Each entry as whorl prepares it with the library's recipe.
    pub prepared: Vec<Prepared>,
}

/// Imports a set's manifest with `import_rows` (every row must import or be a repeat of an
/// earlier file), and stages each row again for its prepared form.
pub fn import(dir: &Path, technique: Technique, tweak: impl Fn(&mut Recipe)) -> Imported {
    let mut recipes: Recipes = default_recipes();
    tweak(recipes.get_mut(&technique).unwrap());
    let mut library = Library::in_memory_with("evaluate-real", recipes.clone()).expect("library");
    let rows = read_manifest(&dir.join("manifest.csv"), "evaluate-real").expect("manifest");
    let submissions: Vec<Submission> = rows
        .iter()
        .map(|r| r.submission.as_ref().expect("usable row").clone())
        .collect();
    let report = import_rows(&mut library, rows, "evaluate-real", false, &|_| {}).expect("import");
    let ids: Vec<i64> = report
        .rows
        .iter()
        .map(|r| match &r.outcome {
            Ok(Outcome::Added { spectrum_id, .. }) => *spectrum_id,
            Ok(Outcome::AlreadyPresent { spectrum_id }) => *spectrum_id,
            Err(e) => panic!("{} does not import: {e}", r.file),
        })
        .collect();
    let prepared = submissions
        .into_iter()
        .map(|s| stage(&recipes, s).expect("stages").prepared)
        .collect();
    Imported {
        library,
        ids,
        prepared,
    }
}

/// A search request over every spectrum of the library (they are imported unreviewed).
pub fn request(technique: Technique, top: usize) -> Request {
    let mut r = Request::new(technique);
    r.top = top;
    r.statuses = vec![Status::Verified, Status::Pending];
    r
}

/// The folder of the real sets: the first argument, else `real-spectra/` of the project.
pub fn root() -> PathBuf {
    std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("real-spectra"))
}
