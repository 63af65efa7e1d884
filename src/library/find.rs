//! `find`: the text index's ranked spectrum ids joined with their current records, one row
//! per hit, for the command line's `whorl find` and the server's `/api/v1/find`.

use serde::Serialize;

use super::Library;
use crate::error::Result;

/// One spectrum whose metadata matches a text query.
#[derive(Debug, Clone, Serialize)]
pub struct Found {
    /// tantivy's BM25 relevance.
    pub relevance: f32,
    /// Spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Technique.
    pub technique: String,
    /// Review status.
    pub status: String,
    /// Compound name (current revision).
    pub name: String,
    /// Formula.
    pub formula: Option<String>,
    /// CAS RN.
    pub cas: Option<String>,
}

impl Library {
    /// The spectra whose metadata matches `query` (tantivy syntax), best first, at most `top`.
    /// A hit the database no longer has (the index behind it) is left out, and the others keep
    /// their own records.
    pub fn find(&self, query: &str, top: usize) -> Result<Vec<Found>> {
        let found = self.text().find(query, top)?;
        let ids: Vec<i64> = found.iter().map(|f| f.1).collect();
        let mut records: std::collections::HashMap<i64, super::HitRecord> = self
            .hit_records(&ids)?
            .into_iter()
            .map(|r| (r.id, r))
            .collect();
        Ok(found
            .iter()
            .filter_map(|&(relevance, id)| records.remove(&id).map(|r| (relevance, r)))
            .map(|(relevance, r)| Found {
                relevance,
                spectrum_id: r.id,
                compound_id: r.compound_id,
                technique: r.technique.to_string(),
                status: r.status.to_string(),
                name: r.metadata.name,
                formula: r.metadata.formula,
                cas: r.metadata.cas,
            })
            .collect())
    }
}
