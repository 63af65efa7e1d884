//! Reports people look at: self-contained HTML pages with inline SVG overlays, and SVG plots.
//!
//! [`html::query_section`] renders one query (its facts, hit list and overlays) and
//! [`html::page`] wraps any number of sections in a page, so that a report over several
//! techniques is a page of several sections. [`plot`] draws the SVG. Nothing here prints or
//! touches files: the caller writes the string where it wants.

pub mod html;
pub mod plot;

pub use html::{Query, escape, identify_page, page, query_section, search_page};
pub use plot::{Trace, overlay, spectra};

use crate::error::Result;
use crate::library::Library;
use crate::prepare::Prepared;
use crate::search::Report;

/// The prepared spectra of a report's first `n` hits, in rank order, as the overlays need them.
pub fn references(library: &Library, report: &Report, n: usize) -> Result<Vec<Prepared>> {
    report
        .hits
        .iter()
        .take(n)
        .map(|h| library.prepared(h.spectrum_id))
        .collect()
}
