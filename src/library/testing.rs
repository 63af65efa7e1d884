//! Helpers for the library's unit tests: in-memory libraries holding seeded synthetic spectra.

use super::{Decision, Library, MetadataPatch, Outcome, Staged, default_recipes};
use crate::library::synthetic::{Rng, ir_points, ms_points, staged};
use crate::technique::Technique;

/// A seeded synthetic IR spectrum named `name`, submitted by `by`, staged with the default
/// recipe (the one `Library::in_memory` starts with).
pub(super) fn ir(seed: u64, name: &str, by: &str) -> Staged {
    submitted(Technique::Ir, ir_points(&mut Rng::new(seed)), name, by)
}

/// A seeded synthetic EI mass spectrum named `name`, submitted by `by`, as [`ir`].
pub(super) fn ms(seed: u64, name: &str, by: &str) -> Staged {
    submitted(Technique::MsEi, ms_points(&mut Rng::new(seed)), name, by)
}

/// Points staged with the default recipe as a spectrum named `name`, submitted by `by`.
pub(super) fn submitted(
    technique: Technique,
    points: Vec<(f64, f64)>,
    name: &str,
    by: &str,
) -> Staged {
    let mut s = staged(&default_recipes(), technique, points, name, &[]).unwrap();
    s.submission.submitted_by = by.to_string();
    s
}

/// Stores one staged spectrum that is new to the library and returns its id.
pub(super) fn add(lib: &mut Library, s: &Staged) -> i64 {
    match lib
        .store(std::slice::from_ref(s), "t", false)
        .unwrap()
        .remove(0)
    {
        Ok(Outcome::Added { spectrum_id, .. }) => spectrum_id,
        other => panic!("expected a new spectrum, got {other:?}"),
    }
}

/// Rows in a table.
pub(super) fn rows(lib: &Library, table: &str) -> i64 {
    lib.conn
        .query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
        .unwrap()
}

/// A library with one spectrum of each kind of history: approved, revised, withdrawn.
pub(super) fn curated() -> Library {
    let mut lib = Library::in_memory("t").unwrap();
    let a = add(&mut lib, &ir(1, "acetone", "alice"));
    let b = add(&mut lib, &ir(2, "butanone", "alice"));
    let c = add(&mut lib, &ir(3, "cyclohexanone", "alice"));
    lib.review(a, "bob", Decision::Approve, None, Some("matches the CoA"))
        .unwrap();
    let patch = MetadataPatch {
        tags: Some(vec!["solvent".into()]),
        ..Default::default()
    };
    lib.revise(b, &patch, "alice", Some("tagged")).unwrap();
    lib.withdraw(c, "alice", "wrong sample").unwrap();
    lib
}
