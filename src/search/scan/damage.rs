//! Damaged cache files against the exact search: a real library on disk (SQLite, the real
//! cache files), holding the measured spectra of `real-spectra/` (CHARISMA Raman round-robin
//! spectra and the PNNL GC-MS metabolite library, see its README), whose cache files are
//! damaged one random byte at a time. A damaged file must be noticed before it changes a hit
//! list: every cached search must return the hits of `search_exact`, which reads the
//! database and no cache.

use std::path::{Path, PathBuf};

use super::*;
use crate::cache::{Kind, file_name};
use crate::library::synthetic::{Rng, perturb, staged};
use crate::library::{Decision, import_rows, read_manifest};
use crate::score::Measure;
use crate::search::{HitList, search, search_exact};
use crate::technique::Technique;

fn real(folder: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("real-spectra")
        .join(folder)
}

/// The hits as ids with their scores, for comparing two hit lists.
fn ranked(h: &HitList) -> Vec<(i64, f64)> {
    h.hits.iter().map(|h| (h.spectrum_id, h.score)).collect()
}

/// One search the test repeats after each damage: technique, measure, statuses searched.
struct Case {
    /// The cache file the cached search reads.
    file: String,
    unknown: Prepared,
    request: Request,
    exact: Vec<(i64, f64)>,
}

fn cases(lib: &Library) -> Vec<Case> {
    let mut rng = Rng::new(13);
    let mut out = Vec::new();
    for (technique, folder, files, measures) in [
        (
            Technique::Raman,
            "raman",
            ["raman003.csv", "raman040.csv", "raman101.csv"],
            [Measure::Correlation, Measure::Cosine],
        ),
        (
            Technique::MsEi,
            "ei-ms",
            ["ei0012.csv", "ei0250.csv", "ei0601.csv"],
            [Measure::Entropy, Measure::Composite],
        ),
    ] {
        let recipe = lib.recipe(technique).unwrap();
        for (k, f) in files.iter().enumerate() {
            let (raw, _) =
                crate::library::read_and_prepare(&real(folder).join(f), recipe, None, None, None)
                    .unwrap();
            // The measured file as it is, and measured again with 10 % noise.
            let points = if k == 0 {
                raw.points
            } else {
                perturb(&raw.points, &mut rng, 0.1)
            };
            let unknown = staged(lib.recipes(), technique, points, "u", &[])
                .unwrap()
                .prepared;
            for measure in measures {
                for pending in [false, true] {
                    let mut request = Request::new(technique);
                    request.params.measure = measure;
                    if pending {
                        request.statuses.push(Status::Pending);
                    }
                    let exact = ranked(&search_exact(lib, &unknown, &request).unwrap());
                    let kind = crate::cache::kind_for(technique, measure).unwrap();
                    out.push(Case {
                        file: file_name(technique, kind),
                        unknown: unknown.clone(),
                        request,
                        exact,
                    });
                }
            }
        }
    }
    out
}

#[test]
fn random_byte_damage_to_a_cache_file_never_changes_a_hit_list() {
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path().join("lib");
    let mut lib = Library::init(&root, "t").unwrap();
    for folder in ["raman", "ei-ms"] {
        let rows = read_manifest(&real(folder).join("manifest.csv"), "alice").unwrap();
        let report = import_rows(&mut lib, rows, "alice", false, &|_| {}).unwrap();
        assert_eq!(report.rejected().count(), 0);
    }
    // Every third spectrum verified, so a damaged status byte could change a verified-only
    // hit list.
    let mut ids: Vec<i64> = Vec::new();
    for t in [Technique::Raman, Technique::MsEi] {
        let pending = lib.candidates(t, &[Status::Pending]).unwrap();
        ids.extend(
            pending
                .iter()
                .map(|c| c.spectrum_id)
                .filter(|id| id % 3 == 0),
        );
    }
    lib.review_many(&ids, "bob", Decision::Approve, None, None)
        .unwrap();
    let cases = cases(&lib);
    // The cached searches write the four cache files; they agree with the exact search.
    for c in &cases {
        assert_eq!(
            ranked(&search(&lib, &c.unknown, &c.request).unwrap()),
            c.exact
        );
    }
    drop(lib);
    let files: Vec<(PathBuf, Vec<u8>)> = [
        (Technique::Raman, Kind::Centred),
        (Technique::Raman, Kind::Unit),
        (Technique::MsEi, Kind::Entropy),
        (Technique::MsEi, Kind::Sparse),
    ]
    .into_iter()
    .map(|(t, k)| {
        let p = root.join("cache").join(file_name(t, k));
        let bytes = std::fs::read(&p).unwrap();
        (p, bytes)
    })
    .collect();

    // 1,000 damaged files, each a good file with one byte changed (seeded, so every run
    // damages the same bytes), each searched by a newly opened library with two of the
    // searches that read that file (taken in turn, so every unknown, measure and status
    // meets damaged files).
    let mut rng = Rng::new(2026);
    let (mut wrong, mut searches) = (0, 0);
    for i in 0..1000 {
        let (path, good) = &files[(rng.next_u64() % files.len() as u64) as usize];
        let at = (rng.next_u64() % good.len() as u64) as usize;
        let mut bad = good.clone();
        bad[at] ^= 1 + (rng.next_u64() % 255) as u8;
        std::fs::write(path, &bad).unwrap();
        let lib = Library::open(&root).unwrap();
        let name = path.file_name().unwrap().to_str().unwrap();
        let reading: Vec<&Case> = cases.iter().filter(|c| c.file == name).collect();
        for k in 0..2 {
            let c = reading[(2 * i + k) % reading.len()];
            searches += 1;
            match search(&lib, &c.unknown, &c.request) {
                Ok(h) if ranked(&h) == c.exact => {}
                _ => wrong += 1,
            }
        }
    }
    eprintln!("1000 single-byte damages, {searches} searches: {wrong} wrong hit lists");
    assert_eq!(wrong, 0, "of {searches} searches");
}
