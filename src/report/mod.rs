//! Reports people look at: self-contained HTML pages with inline SVG overlays, and SVG plots.
//!
//! [`html::query_section`] renders one query (its facts, hit list and overlays) and
//! [`html::page`] wraps any number of sections in a page, so that a report over several
//! techniques is a page of several sections. [`plot`] draws the SVG. Nothing here prints or
//! touches files: the caller writes the string where it wants. Nor does anything here open the
//! library: the caller hands in the prepared references (`search::references` reads them).

#[cfg(test)]
mod fixtures;
pub mod html;
pub mod plot;

pub use html::{
    Case, IdentifyCase, Query, escape, identify_page, page, query_section, search_page,
    search_page_for_case,
};
pub use plot::{Series, overlay, spectra};
