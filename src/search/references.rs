//! The prepared spectra of a report's top hits, read from the library for the report's overlays,
//! so that the report layer draws what it is handed and never opens the library itself.

use crate::error::Result;
use crate::library::Library;
use crate::prepare::Prepared;

use super::Report;

/// The prepared spectra of a report's first `n` hits, in rank order, as the overlays need them.
pub fn references(library: &Library, report: &Report, n: usize) -> Result<Vec<Prepared>> {
    report
        .hits
        .iter()
        .take(n)
        .map(|h| library.prepared(h.spectrum_id))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::{Metadata, Status, Submission, stage};
    use crate::search::{Request, Unknown, search_file};
    use crate::technique::Technique;

    fn ir_file(dir: &std::path::Path, name: &str, bands: &[(f64, f64)]) -> std::path::PathBuf {
        let rows: String = (0..=1800)
            .map(|i| {
                let x = 4000.0 - 2.0 * f64::from(i);
                let y: f64 = bands
                    .iter()
                    .map(|&(c, h)| h * (-((x - c) / 10.0f64).powi(2)).exp())
                    .sum();
                format!("{x},{}\n", y + 0.01)
            })
            .collect();
        let path = dir.join(name);
        std::fs::write(&path, format!("wavenumber,absorbance\n{rows}")).unwrap();
        path
    }

    #[test]
    fn the_references_are_the_top_hits_in_rank_order() {
        let dir = tempfile::tempdir().unwrap();
        let mut lib = Library::in_memory("a.analyst").unwrap();
        let bands: [&[(f64, f64)]; 3] = [
            &[(1600.0, 1.0)],
            &[(1715.0, 1.0), (2950.0, 0.4)],
            &[(1740.0, 1.0), (1240.0, 0.7)],
        ];
        let mut files = Vec::new();
        for (i, b) in bands.iter().enumerate() {
            let path = ir_file(dir.path(), &format!("r{i}.csv"), b);
            files.push(path.clone());
            let staged = stage(
                lib.recipes(),
                Submission {
                    path,
                    technique: Technique::Ir,
                    metadata: Metadata {
                        name: format!("compound {i}"),
                        ..Metadata::default()
                    },
                    x_unit: None,
                    y_unit: None,
                    submitted_by: "a.analyst".into(),
                },
            )
            .unwrap();
            lib.store(&[staged], "a.analyst", false).unwrap();
        }
        let mut request = Request::new(Technique::Ir);
        request.statuses.push(Status::Pending);
        // The unknown is the second reference's own file, so it ranks first and its prepared
        // spectrum is the unknown's.
        let (report, unknown) =
            search_file(&lib, &Unknown::new(Technique::Ir, &files[1]), &request).unwrap();
        assert_eq!(report.hits.len(), 3);
        assert_eq!(report.hits[0].name, "compound 1");

        let refs = references(&lib, &report, 2).unwrap();
        assert_eq!(refs.len(), 2, "only the first n");
        assert_eq!(refs[0].vector, unknown.vector);
        assert_ne!(refs[1].vector, unknown.vector);
        for (r, h) in refs.iter().zip(&report.hits) {
            assert_eq!(r, &lib.prepared(h.spectrum_id).unwrap());
        }
        assert_eq!(
            references(&lib, &report, 10).unwrap().len(),
            3,
            "no more than the hits"
        );
        assert!(references(&lib, &report, 0).unwrap().is_empty());
    }
}
