//! # whorl
//!
//! A laboratory's own library of verified reference spectra (IR, Raman, EI-MS, 1H and 13C NMR),
//! stored in SQLite with full provenance, and searched by spectral similarity combined with
//! a full-text query over metadata.
//!
//! A library match is evidence for an identity, not proof of it: identification follows the
//! lab's validated procedure and is reviewed by a qualified analyst.
//!
//! ```
//! use whorl::library::{Decision, Library, Metadata, Outcome, Submission, stage};
//! use whorl::search::{Request, search};
//! use whorl::technique::Technique;
//!
//! # fn main() -> whorl::Result<()> {
//! let dir = tempfile::tempdir().unwrap();
//! // A synthetic IR spectrum with one band at 1715 cm-1.
//! let file = dir.path().join("ketone.csv");
//! let rows: String = (0..=1800)
//!     .map(|i| {
//!         let x = 4000.0 - 2.0 * i as f64;
//!         format!("{x},{}\n", 0.9 * (-((x - 1715.0) / 10.0f64).powi(2)).exp() + 0.01)
//!     })
//!     .collect();
//! std::fs::write(&file, format!("wavenumber,absorbance\n{rows}")).unwrap();
//!
//! let mut library = Library::in_memory("a.analyst")?;
//! let submission = Submission {
//!     path: file.clone(),
//!     technique: Technique::Ir,
//!     metadata: Metadata { name: "example ketone".into(), ..Metadata::default() },
//!     x_unit: None,
//!     y_unit: None,
//!     submitted_by: "a.analyst".into(),
//! };
//! let staged = stage(library.recipes(), submission)?;
//! let stored = library.store(&[staged], "a.analyst", false)?;
//! let Ok(Outcome::Added { spectrum_id, .. }) = stored[0] else { panic!("not stored") };
//! // A second analyst signs it off; search covers verified spectra by default.
//! library.review(spectrum_id, "b.reviewer", Decision::Approve, None, None)?;
//!
//! let recipe = library.recipe(Technique::Ir)?.clone();
//! let (_, unknown) = whorl::library::read_and_prepare(&file, &recipe, None, None, None)?;
//! // Search covers verified spectra by default; this one has not been reviewed yet.
//! let mut request = Request::new(Technique::Ir);
//! request.statuses.push(whorl::library::Status::Pending);
//! let hits = search(&library, &unknown, &request)?;
//! assert_eq!(hits.hits[0].name, "example ketone");
//! assert!((hits.hits[0].score - 1.0).abs() < 1e-6);
//! # Ok(())
//! # }
//! ```

#![warn(missing_docs)]

pub mod cache;
pub mod chem;
pub mod config;
pub mod error;
pub mod library;
pub mod prepare;
pub mod report;
pub mod score;
pub mod search;
pub mod spectrum;
pub mod technique;
pub mod text;

pub use error::{Error, Location, Result};

/// The caution printed with every hit list and report.
pub const CAUTION: &str = "A library match is evidence, not proof of identity: confirm by the lab's validated procedure (e.g. an independent second technique), have a qualified analyst review it, and handle samples under local regulations.";
