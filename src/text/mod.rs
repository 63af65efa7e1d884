//! The full-text index over spectrum metadata (tantivy). Derived data: rebuilt from SQLite
//! whenever its recorded generation differs from the database's.

use std::collections::{BTreeSet, HashSet};
use std::path::Path;

use tantivy::collector::{DocSetCollector, TopDocs};
use tantivy::query::QueryParser;
use tantivy::schema::{
    FAST, Field, INDEXED, IndexRecordOption, STORED, STRING, Schema, TEXT, TextFieldIndexing,
    TextOptions,
};
use tantivy::{Index, IndexReader, IndexWriter, TantivyDocument, Term};

use crate::error::{Error, Result};
use crate::spectrum::Metadata;

mod prune;

/// What the index holds for one spectrum.
#[derive(Debug, Clone)]
pub struct IndexDoc<'a> {
    /// Spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Technique name.
    pub technique: &'a str,
    /// Status name.
    pub status: &'a str,
    /// Who submitted it.
    pub submitted_by: &'a str,
    /// The current revision's metadata.
    pub metadata: &'a Metadata,
}

#[derive(Debug, Clone, Copy)]
struct Fields {
    spectrum_id: Field,
    compound_id: Field,
    name: Field,
    synonym: Field,
    cas: Field,
    formula: Field,
    tag: Field,
    technique: Field,
    status: Field,
    solvent: Field,
    note: Field,
    source: Field,
    instrument: Field,
    submitted_by: Field,
    acquired: Field,
    extra: Field,
    meta: Field,
}

/// The names users can put before a colon in a query; other names are looked up among the
/// extra metadata columns.
pub const QUERY_FIELDS: [&str; 15] = [
    "name",
    "synonym",
    "cas",
    "formula",
    "tag",
    "technique",
    "status",
    "solvent",
    "note",
    "source",
    "instrument",
    "submitted_by",
    "acquired",
    "extra",
    "meta",
];

fn schema() -> (Schema, Fields) {
    let mut b = Schema::builder();
    // Positions, like TEXT fields have, so that a value of several words ('QR-3727',
    // "aromatic ketone") can be queried: the query parser turns it into a phrase.
    // Fast (columnar) as well, so that numeric values (stored as JSON numbers, see
    // `json_value`) answer range queries such as `ri:[800 TO 900]`.
    let json = TextOptions::default()
        .set_indexing_options(
            TextFieldIndexing::default()
                .set_tokenizer("default")
                .set_index_option(IndexRecordOption::WithFreqsAndPositions),
        )
        .set_fast("raw");
    let fields = Fields {
        spectrum_id: b.add_u64_field("spectrum_id", INDEXED | STORED | FAST),
        compound_id: b.add_u64_field("compound_id", STORED | FAST),
        name: b.add_text_field("name", TEXT | STORED),
        synonym: b.add_text_field("synonym", TEXT),
        cas: b.add_text_field("cas", TEXT),
        formula: b.add_text_field("formula", TEXT),
        tag: b.add_text_field("tag", TEXT),
        technique: b.add_text_field("technique", STRING),
        status: b.add_text_field("status", STRING),
        solvent: b.add_text_field("solvent", TEXT),
        note: b.add_text_field("note", TEXT),
        source: b.add_text_field("source", TEXT),
        instrument: b.add_text_field("instrument", TEXT),
        submitted_by: b.add_text_field("submitted_by", TEXT),
        acquired: b.add_text_field("acquired", TEXT),
        extra: b.add_text_field("extra", TEXT),
        meta: b.add_json_field("meta", json),
    };
    (b.build(), fields)
}

/// The deepest nesting of brackets a query may have. The parser descends once per bracket,
/// so a query nested thousands deep would overflow the stack; people write a few levels.
pub const MAX_QUERY_DEPTH: usize = 32;
/// The longest query accepted, in bytes.
pub const MAX_QUERY_BYTES: usize = 4096;

/// Refuses a query too long or nested too deep to parse safely.
fn check_shape(query: &str) -> Result<()> {
    let refuse = |reason: String| Error::Query {
        query: query.to_string(),
        reason,
    };
    if query.len() > MAX_QUERY_BYTES {
        return Err(refuse(format!(
            "it is {} bytes long; the most is {MAX_QUERY_BYTES}",
            query.len()
        )));
    }
    let (mut depth, mut deepest, mut quoted) = (0usize, 0usize, false);
    for c in query.chars() {
        match c {
            '"' => quoted = !quoted,
            '(' if !quoted => {
                depth += 1;
                deepest = deepest.max(depth);
            }
            ')' if !quoted => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    if deepest > MAX_QUERY_DEPTH {
        return Err(refuse(format!(
            "brackets nested {deepest} deep; the most is {MAX_QUERY_DEPTH}"
        )));
    }
    Ok(())
}

/// The tantivy index of one library.
pub struct TextIndex {
    index: Index,
    reader: IndexReader,
    fields: Fields,
    /// Why the index found on disk could not be opened and was started afresh, if it was.
    damage: Option<String>,
}

/// Memory budget of the index writer; tantivy needs a few MB per thread at least.
const WRITER_BUDGET: usize = 50_000_000;

impl TextIndex {
    /// Opens the index in `dir`, creating it when the folder is empty or missing. An index that
    /// cannot be opened (a truncated `meta.json`, a missing or unreadable segment file) is
    /// derived data: it is removed and started afresh, empty, so the library rebuilds it
    /// from the database; [`TextIndex::damage`] then says why. Only a folder that cannot be
    /// created or removed is an error.
    pub fn open_or_create(dir: &Path) -> Result<TextIndex> {
        let first = match TextIndex::open_as_is(dir) {
            Ok(t) => return Ok(t),
            Err(e @ Error::Io { .. }) => return Err(e),
            Err(e) => e,
        };
        // Once more after a moment, in case another process was replacing a file just then.
        std::thread::sleep(std::time::Duration::from_millis(50));
        if let Ok(t) = TextIndex::open_as_is(dir) {
            return Ok(t);
        }
        std::fs::remove_dir_all(dir)
            .map_err(|e| Error::io(format!("removing the damaged {}", dir.display()), e))?;
        let mut t = TextIndex::open_as_is(dir)?;
        t.damage = Some(first.to_string());
        Ok(t)
    }

    /// Why the index found on disk was damaged and started afresh when it was opened, if it
    /// was (the library then rebuilds it from the database).
    pub fn damage(&self) -> Option<&str> {
        self.damage.as_deref()
    }

    /// The files of the index whose checksums do not match their content (tantivy keeps a
    /// CRC32 footer in each managed file), read whole: for `check`, not for every command.
    pub fn corrupted_files(&self) -> Result<Vec<String>> {
        let mut bad: Vec<String> = self
            .index
            .validate_checksum()?
            .into_iter()
            .map(|p| p.display().to_string())
            .collect();
        bad.sort();
        Ok(bad)
    }

    fn open_as_is(dir: &Path) -> Result<TextIndex> {
        std::fs::create_dir_all(dir)
            .map_err(|e| Error::io(format!("creating {}", dir.display()), e))?;
        let (schema, fields) = schema();
        let mmap =
            tantivy::directory::MmapDirectory::open(dir).map_err(tantivy::TantivyError::from)?;
        let index = match Index::open_or_create(mmap, schema.clone()) {
            Ok(index) => index,
            // A schema from an older build: the index is derived, so start it afresh.
            Err(tantivy::TantivyError::SchemaError(_)) => {
                std::fs::remove_dir_all(dir)
                    .map_err(|e| Error::io(format!("removing {}", dir.display()), e))?;
                return TextIndex::open_as_is(dir);
            }
            Err(e) => return Err(e.into()),
        };
        TextIndex::from_index(index, fields)
    }

    /// An index held in memory, for tests and throw-away libraries.
    pub fn in_ram() -> Result<TextIndex> {
        let (schema, fields) = schema();
        TextIndex::from_index(Index::create_in_ram(schema), fields)
    }

    fn from_index(index: Index, fields: Fields) -> Result<TextIndex> {
        let reader = index
            .reader_builder()
            .reload_policy(tantivy::ReloadPolicy::Manual)
            .try_into()?;
        Ok(TextIndex {
            index,
            reader,
            fields,
            damage: None,
        })
    }

    /// Moves the reader to the index's newest commit when it holds other segments (or other
    /// deletions) than the reader has open: another process, or another `TextIndex` of the
    /// same folder, committed since. For an index kept open between a server's requests.
    pub fn catch_up(&self) -> Result<()> {
        let metas = self.index.load_metas()?;
        let searcher = self.reader.searcher();
        let open = searcher.generation().segments();
        let same = open.len() == metas.segments.len()
            && metas
                .segments
                .iter()
                .all(|m| open.get(&m.id()) == Some(&m.delete_opstamp()));
        if !same {
            self.reader.reload()?;
        }
        Ok(())
    }

    /// The library generation the index was last committed at, if any.
    pub fn generation(&self) -> Result<Option<i64>> {
        let metas = self.index.load_metas()?;
        Ok(metas.payload.and_then(|p| p.parse().ok()))
    }

    /// Number of documents in the index.
    pub fn len(&self) -> u64 {
        self.reader.searcher().num_docs()
    }

    /// True when the index holds no document.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    fn writer(&self) -> Result<IndexWriter> {
        Ok(self.index.writer_with_num_threads(1, WRITER_BUDGET)?)
    }

    fn commit(&self, mut writer: IndexWriter, generation: i64) -> Result<()> {
        let mut prepared = writer.prepare_commit()?;
        prepared.set_payload(&generation.to_string());
        prepared.commit()?;
        // Let the merges the commit started finish: a writer dropped at once abandons them,
        // and a bulk import (one commit per batch) then leaves thousands of segments, each
        // opened by every later command (2,007 segments made `whorl find` take 380 ms at
        // 1M spectra).
        writer.wait_merging_threads()?;
        self.reader.reload()?;
        Ok(())
    }

    /// Replaces the whole index with `docs` and records `generation`.
    pub fn rebuild<'a>(
        &self,
        docs: impl IntoIterator<Item = IndexDoc<'a>>,
        generation: i64,
    ) -> Result<()> {
        let writer = self.writer()?;
        writer.delete_all_documents()?;
        for doc in docs {
            writer.add_document(self.document(&doc))?;
        }
        self.commit(writer, generation)
    }

    /// Adds or replaces the documents of these spectra and records `generation`.
    pub fn upsert<'a>(
        &self,
        docs: impl IntoIterator<Item = IndexDoc<'a>>,
        generation: i64,
    ) -> Result<()> {
        let writer = self.writer()?;
        for doc in docs {
            writer.delete_term(Term::from_field_u64(
                self.fields.spectrum_id,
                doc.spectrum_id as u64,
            ));
            writer.add_document(self.document(&doc))?;
        }
        self.commit(writer, generation)
    }

    fn document(&self, d: &IndexDoc<'_>) -> TantivyDocument {
        let f = &self.fields;
        let m = d.metadata;
        let mut doc = TantivyDocument::default();
        doc.add_u64(f.spectrum_id, d.spectrum_id as u64);
        doc.add_u64(f.compound_id, d.compound_id as u64);
        doc.add_text(f.name, &m.name);
        doc.add_text(f.technique, d.technique);
        doc.add_text(f.status, d.status);
        doc.add_text(f.submitted_by, d.submitted_by);
        for s in &m.synonyms {
            doc.add_text(f.synonym, s);
        }
        for t in &m.tags {
            doc.add_text(f.tag, t);
        }
        let optional = [
            (f.cas, &m.cas),
            (f.formula, &m.formula),
            (f.solvent, &m.solvent),
            (f.note, &m.notes),
            (f.source, &m.source),
            (f.instrument, &m.instrument),
            (f.acquired, &m.acquired),
        ];
        for (field, value) in optional {
            if let Some(v) = value {
                doc.add_text(field, v);
            }
        }
        if !m.extra.is_empty() {
            let mut object = serde_json::Map::new();
            for (k, v) in &m.extra {
                doc.add_text(f.extra, v);
                object.insert(k.clone(), json_value(v));
            }
            let value = serde_json::Value::Object(object);
            if let Ok(owned) = serde_json::from_value::<tantivy::schema::OwnedValue>(value) {
                doc.add_field_value(f.meta, &owned);
            }
        }
        doc
    }

    /// How much a match in `field` counts relative to the other fields.
    fn boost(&self, field: Field) -> f32 {
        if field == self.fields.name {
            3.0
        } else if field == self.fields.synonym {
            2.0
        } else {
            1.0
        }
    }

    fn parser(&self, boosted: bool) -> QueryParser {
        let f = &self.fields;
        let defaults = vec![
            f.name,
            f.synonym,
            f.cas,
            f.formula,
            f.tag,
            f.note,
            f.source,
            f.instrument,
            f.solvent,
            f.extra,
        ];
        let mut parser = QueryParser::for_index(&self.index, defaults.clone());
        if boosted {
            for field in defaults {
                let boost = self.boost(field);
                if boost != 1.0 {
                    parser.set_field_boost(field, boost);
                }
            }
        }
        parser
    }

    /// The extra metadata columns some spectrum in the index has, by their query names.
    pub fn extra_fields(&self) -> Result<BTreeSet<String>> {
        let mut names = BTreeSet::new();
        for reader in self.reader.searcher().segment_readers() {
            for f in reader.fields_metadata()? {
                if let Some(name) = f.field_name.strip_prefix("meta.") {
                    names.insert(name.to_string());
                }
            }
        }
        Ok(names)
    }

    /// Refuses a query naming a field that is neither one of [`QUERY_FIELDS`] nor an extra
    /// column some spectrum has: a misspelt field would otherwise match nothing, silently.
    fn check_fields(&self, query: &str) -> Result<()> {
        let named = extra_field_names(query);
        if named.is_empty() {
            return Ok(());
        }
        let known = self.extra_fields()?;
        if let Some(unknown) = named.iter().find(|n| !known.contains(n.as_str())) {
            let extra = if known.is_empty() {
                "no spectrum has extra columns".to_string()
            } else {
                format!(
                    "the library's extra columns: {}",
                    known.iter().cloned().collect::<Vec<_>>().join(", ")
                )
            };
            return Err(Error::Query {
                query: query.to_string(),
                reason: format!(
                    "no spectrum has a field '{unknown}'; the fields are {}; {extra}",
                    QUERY_FIELDS.join(", ")
                ),
            });
        }
        Ok(())
    }

    fn parse(&self, query: &str) -> Result<Box<dyn tantivy::query::Query>> {
        check_shape(query)?;
        self.check_fields(query)?;
        let rewritten = route_extra_fields(query);
        self.parser(true)
            .parse_query(&rewritten)
            .map_err(|e| Error::Query {
                query: query.to_string(),
                reason: e.to_string(),
            })
    }

    /// The query for ranking: [`prune::PrunedUnion`] where it applies (a union of terms and
    /// phrases; no slop, which the parser reads only after `~`), else the parsed query.
    fn parse_ranked(&self, query: &str) -> Result<Box<dyn tantivy::query::Query>> {
        check_shape(query)?;
        self.check_fields(query)?;
        if !query.contains('~') {
            let rewritten = route_extra_fields(query);
            if let Ok(plain) = self.parser(false).parse_query(&rewritten)
                && let Some(pruned) =
                    prune::PrunedUnion::from_parsed(plain.as_ref(), |f| self.boost(f))
            {
                return Ok(Box::new(pruned));
            }
        }
        self.parse(query)
    }

    /// Every spectrum id matching the query.
    pub fn matching_ids(&self, query: &str) -> Result<HashSet<i64>> {
        let q = self.parse(query)?;
        let searcher = self.reader.searcher();
        let addresses = searcher.search(&q, &DocSetCollector)?;
        let mut out = HashSet::with_capacity(addresses.len());
        let mut columns = Vec::new();
        for reader in searcher.segment_readers() {
            columns.push(reader.fast_fields().u64("spectrum_id")?);
        }
        for a in addresses {
            if let Some(id) = columns[a.segment_ord as usize].first(a.doc_id) {
                out.insert(id as i64);
            }
        }
        Ok(out)
    }

    /// The best `limit` matches with their relevance scores, best first.
    pub fn find(&self, query: &str, limit: usize) -> Result<Vec<(f32, i64)>> {
        self.find_with(self.parse_ranked(query)?.as_ref(), limit)
    }

    fn find_with(&self, q: &dyn tantivy::query::Query, limit: usize) -> Result<Vec<(f32, i64)>> {
        let searcher = self.reader.searcher();
        let top = searcher.search(q, &TopDocs::with_limit(limit.max(1)).order_by_score())?;
        // The id from the fast field (a column read) rather than the stored document (a
        // compressed block decoded per hit).
        let mut columns = Vec::new();
        for reader in searcher.segment_readers() {
            columns.push(reader.fast_fields().u64("spectrum_id")?);
        }
        let mut out = Vec::with_capacity(top.len());
        for (score, address) in top {
            if let Some(id) = columns[address.segment_ord as usize].first(address.doc_id) {
                out.push((score, id as i64));
            }
        }
        Ok(out)
    }
}

/// An extra metadata value as the index holds it: a plain decimal number as a JSON number (so
/// that ranges compare it as a number), anything else as text. A value whose digits carry
/// more than its number (a leading zero, `007`; a sign; an exponent) stays text, so that an
/// identifier such as a lot number is matched as written.
fn json_value(v: &str) -> serde_json::Value {
    let t = v.trim();
    let digits = t.strip_prefix('-').unwrap_or(t);
    let plain = !digits.is_empty()
        && digits.chars().all(|c| c.is_ascii_digit() || c == '.')
        && digits.matches('.').count() <= 1
        && !digits.starts_with('.')
        && !digits.ends_with('.')
        && !(digits.len() > 1 && digits.starts_with('0') && !digits.starts_with("0."));
    match t.parse::<f64>() {
        Ok(x) if plain && x.is_finite() => serde_json::Number::from_f64(x)
            .map(serde_json::Value::Number)
            .unwrap_or_else(|| serde_json::Value::String(v.to_string())),
        _ => serde_json::Value::String(v.to_string()),
    }
}

/// The extra-column names a query uses before a colon (lower case, as they are stored).
fn extra_field_names(query: &str) -> Vec<String> {
    let routed = route_extra_fields(query);
    let mut names = Vec::new();
    let mut rest = routed.as_str();
    while let Some(at) = rest.find("meta.") {
        let after = &rest[at + 5..];
        let end = after
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .unwrap_or(after.len());
        // Only where the rewrite put it: at a token start, followed by a colon.
        let starts_token =
            at == 0 || matches!(rest.as_bytes()[at - 1], b' ' | b'(' | b'+' | b'-' | b'\t');
        if starts_token && after[end..].starts_with(':') && !after[..end].is_empty() {
            names.push(after[..end].to_string());
        }
        rest = &after[end..];
    }
    names
}

/// Rewrites `column:value` for a name that is not one of the fixed fields into
/// `meta.column:value`, so that extra manifest columns can be queried by their own names.
fn route_extra_fields(query: &str) -> String {
    let mut out = String::with_capacity(query.len() + 16);
    let mut in_quotes = false;
    let chars: Vec<char> = query.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c == '"' {
            in_quotes = !in_quotes;
        }
        let at_token_start = i == 0 || matches!(chars[i - 1], ' ' | '(' | '+' | '-' | '\t');
        if !in_quotes && at_token_start && (c.is_ascii_alphabetic() || c == '_') {
            let mut j = i;
            while j < chars.len() && (chars[j].is_ascii_alphanumeric() || chars[j] == '_') {
                j += 1;
            }
            if j < chars.len() && chars[j] == ':' {
                let name: String = chars[i..j].iter().collect();
                if !QUERY_FIELDS.contains(&name.as_str())
                    && !matches!(name.as_str(), "AND" | "OR" | "NOT")
                {
                    out.push_str("meta.");
                    out.push_str(&name.to_ascii_lowercase());
                    i = j;
                    continue;
                }
            }
        }
        out.push(c);
        i += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    fn meta(name: &str, formula: &str, tags: &[&str], extra: &[(&str, &str)]) -> Metadata {
        Metadata {
            name: name.into(),
            formula: Some(formula.into()),
            tags: tags.iter().map(|s| s.to_string()).collect(),
            extra: extra
                .iter()
                .map(|(k, v)| (k.to_string(), v.to_string()))
                .collect::<BTreeMap<_, _>>(),
            ..Metadata::default()
        }
    }

    #[test]
    fn field_queries_and_extra_columns() {
        let idx = TextIndex::in_ram().unwrap();
        let toluene = meta(
            "toluene",
            "C7H8",
            &["solvent", "aromatic"],
            &[("class", "aromatic hydrocarbon")],
        );
        let acetone = meta("acetone", "C3H6O", &["solvent"], &[("class", "ketone")]);
        let docs = [(1, &toluene), (2, &acetone)].map(|(id, m)| IndexDoc {
            spectrum_id: id,
            compound_id: id,
            technique: "ir",
            status: "pending",
            submitted_by: "a.analyst",
            metadata: m,
        });
        idx.rebuild(docs, 7).unwrap();
        assert_eq!(idx.generation().unwrap(), Some(7));
        assert_eq!(
            idx.matching_ids("tag:solvent AND formula:C7H8").unwrap(),
            HashSet::from([1])
        );
        assert_eq!(
            idx.matching_ids("class:ketone").unwrap(),
            HashSet::from([2])
        );
        assert_eq!(idx.matching_ids("technique:ir").unwrap().len(), 2);
        assert_eq!(idx.find("acetone", 5).unwrap()[0].1, 2);
        assert!(matches!(
            idx.matching_ids("name:(unclosed").unwrap_err(),
            Error::Query { .. }
        ));
    }

    #[test]
    fn numeric_extra_columns_answer_ranges_and_an_unknown_field_is_refused() {
        let idx = TextIndex::in_ram().unwrap();
        // Retention indices (numbers), a lot number that only looks like one (a leading
        // zero keeps it text) and a text column.
        let rows = [
            meta(
                "a",
                "C6H6",
                &[],
                &[("ri", "763.1578947368421"), ("lot", "007")],
            ),
            meta("b", "C7H8", &[], &[("ri", "812"), ("lot", "L-8")]),
            meta("c", "C8H10", &[], &[("ri", "905.5"), ("class", "aromatic")]),
            meta("d", "C3H6O", &[], &[("ri", "n/a")]),
        ];
        let docs = rows.iter().enumerate().map(|(i, m)| IndexDoc {
            spectrum_id: i as i64 + 1,
            compound_id: i as i64 + 1,
            technique: "ms-ei",
            status: "verified",
            submitted_by: "a.analyst",
            metadata: m,
        });
        idx.rebuild(docs, 1).unwrap();
        let ids = |q: &str| {
            let mut v: Vec<i64> = idx.matching_ids(q).unwrap().into_iter().collect();
            v.sort();
            v
        };
        // Inclusive and exclusive bounds compare as numbers (812 < 905.5 < 1000), not as text.
        assert_eq!(ids("ri:[800 TO 1000]"), [2, 3]);
        assert_eq!(ids("ri:[700 TO 812]"), [1, 2]);
        assert_eq!(ids("ri:{700 TO 812}"), [1]);
        assert_eq!(ids("ri:[900 TO *]"), [3]);
        assert_eq!(ids("RI:[0 TO 800] AND formula:C6H6"), [1]);
        // A text value in the same column is still text; a lot number is matched as written.
        assert_eq!(ids("ri:n/a"), [4]);
        assert_eq!(ids("lot:007"), [1]);
        // A field no spectrum has is refused, naming the fields there are.
        let err = idx.matching_ids("retention:[800 TO 900]").unwrap_err();
        let Error::Query { reason, .. } = err else {
            panic!("a query error")
        };
        assert!(reason.contains("'retention'"), "{reason}");
        assert!(reason.contains("class, lot, ri"), "{reason}");
        assert!(reason.contains("name, synonym"), "{reason}");
        assert!(idx.find("nosuch:x", 5).is_err());
        // Known fields and words inside quotes are not taken for field names.
        assert!(idx.matching_ids("name:\"x nosuch:y\"").unwrap().is_empty());
    }

    #[test]
    fn only_plain_decimal_numbers_are_indexed_as_numbers() {
        for (v, number) in [
            ("812", true),
            ("763.16", true),
            ("0.5", true),
            ("-3.5", true),
            ("0", true),
            ("007", false),
            ("1e3", false),
            ("+5", false),
            (".5", false),
            ("5.", false),
            ("1.2.3", false),
            ("NaN", false),
            ("inf", false),
            ("QR-3727", false),
            ("", false),
        ] {
            assert_eq!(json_value(v).is_number(), number, "{v:?}");
        }
    }

    /// The pruned ranking of `find` against tantivy's own ranking of the same parsed query:
    /// same ids, same scores, same order, ties included, over several segments with
    /// replaced (deleted) documents.
    #[test]
    fn pruned_find_ranks_exactly_as_tantivy() {
        let idx = TextIndex::in_ram().unwrap();
        let metas: Vec<Metadata> = (0..600)
            .map(|i| {
                let name = match i % 7 {
                    0 => format!("ms-ei {i} ms-ei"),
                    1 => format!("ms-ei sample {i} of a longer name"),
                    2 => format!("ir {i}"),
                    _ => format!("ms-ei {i}"),
                };
                let mut m = meta(&name, "C7H8", &["solvent"], &[("lot", "QR-3727")]);
                if i % 5 == 0 {
                    m.synonyms = vec![format!("ms-ei alias {}", i % 11)];
                }
                m
            })
            .collect();
        let doc = |i: usize| IndexDoc {
            spectrum_id: i as i64 + 1,
            compound_id: i as i64 + 1,
            technique: "ms-ei",
            status: "pending",
            submitted_by: "a.analyst",
            metadata: &metas[i],
        };
        // Several commits make several segments; the second pass replaces documents, which
        // leaves deleted ones behind in the older segments.
        for (generation, chunk) in (0..600).collect::<Vec<_>>().chunks(150).enumerate() {
            idx.upsert(chunk.iter().map(|&i| doc(i)), generation as i64)
                .unwrap();
        }
        idx.upsert((0..600).step_by(13).map(doc), 9).unwrap();
        let queries = [
            "ms-ei 500",
            "ms-ei",
            "ms-ei 12 alias",
            "\"ms ei\" 3",
            "ms-ei sample 8",
            "name:ms-ei 40",
            "ms-ei ir",
            "qr-3727 ms-ei",
            "lot:QR-3727 ms-ei 7",
        ];
        for q in queries {
            let plain = idx.parse(q).unwrap();
            let ranked = idx.parse_ranked(q).unwrap();
            assert!(
                ranked.downcast_ref::<prune::PrunedUnion>().is_some()
                    || q.starts_with("lot:")
                    || q.starts_with("name:"),
                "{q} should take the pruned path"
            );
            for k in [1, 3, 10, 40, 700] {
                let expected = idx.find_with(plain.as_ref(), k).unwrap();
                let got = idx.find_with(ranked.as_ref(), k).unwrap();
                assert_eq!(got, expected, "{q}, top {k}");
            }
        }
    }

    #[test]
    fn routing_leaves_known_fields_and_quotes_alone() {
        assert_eq!(
            route_extra_fields("tag:a AND lot:QR-1"),
            "tag:a AND meta.lot:QR-1"
        );
        assert_eq!(route_extra_fields("name:\"x lot:y\""), "name:\"x lot:y\"");
        assert_eq!(route_extra_fields("(Class:ketone)"), "(meta.class:ketone)");
    }
}
