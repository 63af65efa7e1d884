//! The best k matches of a union of term and phrase clauses without scoring every match.
//!
//! tantivy skips documents that cannot reach the top k (block-max WAND) only when every
//! clause of a union is a term. A query such as `ms-ei 500000` holds a phrase ("ms ei", one
//! per default field), and a phrase present in every record then makes tantivy score the
//! phrase at every record (positions read and matched), 45 ms at 1M records. [`PrunedUnion`]
//! applies MaxScore (Turtle & Flood, "Query evaluation: strategies and optimizations",
//! Information Processing & Management 31(6), 1995) per segment: each clause gets an upper
//! bound of its score in the segment; once the k-th best score reaches the summed bounds of
//! the weakest clauses, only documents matching a stronger clause are candidates, and each
//! candidate is scored by tantivy's own union scorer, so scores are tantivy's to the bit.
//!
//! The ranking is exactly tantivy's: documents come in id order, a skipped document scores at
//! most the current k-th best, and tantivy keeps the earlier document on a tie.

use tantivy::fieldnorm::FieldNormReader;
use tantivy::postings::TermInfo;
use tantivy::query::{
    Bm25Weight, BooleanQuery, BoostQuery, EmptyScorer, EnableScoring, Explanation, Occur,
    PhraseQuery, Query, Scorer, TermQuery, Weight,
};
use tantivy::schema::{Field, IndexRecordOption};
use tantivy::{DocId, DocSet, Score, SegmentReader, TERMINATED, Term};

/// One clause of the union: a term or phrase query on one field, with its field boost.
#[derive(Debug, Clone)]
struct Clause {
    field: Field,
    terms: Vec<Term>,
    boost: Score,
    phrase: bool,
}

/// A union (`Should` clauses only) of term and phrase queries, ranked like the same
/// `BooleanQuery` but with MaxScore pruning in [`Weight::for_each_pruning`].
#[derive(Debug, Clone)]
pub(super) struct PrunedUnion {
    inner: BooleanQuery,
    clauses: Vec<Clause>,
}

impl PrunedUnion {
    /// Rebuilds `query` (as parsed without field boosts) with the boosts `boost_of` gives each
    /// field, the way tantivy's query parser applies them, when it is a union of term and
    /// phrase clauses with at least one phrase; `None` for any other shape.
    pub(super) fn from_parsed(
        query: &dyn Query,
        boost_of: impl Fn(Field) -> Score,
    ) -> Option<PrunedUnion> {
        let union = query.downcast_ref::<BooleanQuery>()?;
        let mut clauses = Vec::new();
        let mut subqueries: Vec<(Occur, Box<dyn Query>)> = Vec::new();
        for (occur, sub) in union.clauses() {
            if *occur != Occur::Should {
                return None;
            }
            let clause = if let Some(t) = sub.downcast_ref::<TermQuery>() {
                Clause {
                    field: t.term().field(),
                    terms: vec![t.term().clone()],
                    boost: boost_of(t.term().field()),
                    phrase: false,
                }
            } else if let Some(p) = sub.downcast_ref::<PhraseQuery>() {
                Clause {
                    field: p.field(),
                    terms: p.phrase_terms(),
                    boost: boost_of(p.field()),
                    phrase: true,
                }
            } else {
                return None;
            };
            let leaf = sub.box_clone();
            subqueries.push(if clause.boost == 1.0 {
                (Occur::Should, leaf)
            } else {
                (Occur::Should, Box::new(BoostQuery::new(leaf, clause.boost)))
            });
            clauses.push(clause);
        }
        if !clauses.iter().any(|c| c.phrase) {
            // All terms: tantivy's block-max WAND already prunes.
            return None;
        }
        let inner = BooleanQuery::with_minimum_required_clauses(
            subqueries,
            union.get_minimum_number_should_match(),
        );
        Some(PrunedUnion { inner, clauses })
    }
}

impl Query for PrunedUnion {
    fn weight(&self, scoring: EnableScoring<'_>) -> tantivy::Result<Box<dyn Weight>> {
        let inner = self.inner.weight(scoring)?;
        let Some(searcher) = scoring.searcher() else {
            return Ok(inner);
        };
        let clauses = self
            .clauses
            .iter()
            .zip(self.inner.clauses())
            .map(|(c, (_, query))| {
                Ok(ClauseWeight {
                    weight: query.weight(scoring)?,
                    // As tantivy's term and phrase weights build theirs, boosted as their
                    // scorers are, so that a bound reached is the score to the bit.
                    bm25: Bm25Weight::for_terms(searcher, &c.terms)?.boost_by(c.boost),
                    clause: c.clone(),
                })
            })
            .collect::<tantivy::Result<_>>()?;
        Ok(Box::new(PrunedWeight { inner, clauses }))
    }

    fn query_terms<'a>(&'a self, visitor: &mut dyn FnMut(&'a Term, bool)) {
        self.inner.query_terms(visitor);
    }
}

struct ClauseWeight {
    weight: Box<dyn Weight>,
    bm25: Bm25Weight,
    clause: Clause,
}

struct PrunedWeight {
    inner: Box<dyn Weight>,
    clauses: Vec<ClauseWeight>,
}

/// Term frequencies above this get the loose bound (the BM25 weight itself) instead of a
/// maximum taken over every frequency up to them.
const TF_SCAN_LIMIT: u32 = 4096;

impl ClauseWeight {
    /// An upper bound of this clause's score at any document of the segment.
    ///
    /// BM25 grows with the frequency and shrinks with the field length. A phrase occurs in
    /// a document at most as often as each of its terms, so the rarest term's postings give
    /// the largest frequency and the shortest field (by fieldnorm id) that any match can
    /// have; the bound is the score at that pair, computed by the same weight the scorer
    /// uses. Anything unexpected (no frequencies, no fieldnorms) gives the loose bound.
    fn bound(&self, reader: &SegmentReader) -> tantivy::Result<Score> {
        let loose = self.bm25.score(0, u32::MAX);
        let inverted = reader.inverted_index(self.clause.field)?;
        let mut rarest: Option<TermInfo> = None;
        for term in &self.clause.terms {
            match inverted.get_term_info(term)? {
                None => return Ok(0.0),
                Some(info) => {
                    if rarest.as_ref().is_none_or(|r| info.doc_freq < r.doc_freq) {
                        rarest = Some(info);
                    }
                }
            }
        }
        let Some(info) = rarest else {
            return Ok(loose);
        };
        // The fieldnorm ids as stored (one byte per document), read directly: a lookup
        // through `FieldNormReader` per document costs more than the rest of the bound.
        let stored = reader
            .fieldnorms_readers()
            .get_inner_file()
            .open_read(self.clause.field)
            .map(|f| f.read_bytes())
            .transpose()?;
        let norms = match &stored {
            Some(bytes) if bytes.len() >= reader.max_doc() as usize => Norms::Stored(bytes),
            _ => match reader.get_fieldnorms_reader(self.clause.field) {
                Ok(r) => Norms::Reader(r),
                Err(_) => return Ok(loose),
            },
        };
        let mut postings =
            inverted.read_block_postings_from_terminfo(&info, IndexRecordOption::WithFreqs)?;
        let (mut max_tf, mut min_norm) = (0u32, u8::MAX);
        while !postings.docs().is_empty() {
            if postings.freqs().len() != postings.docs().len() {
                return Ok(loose);
            }
            max_tf = max_tf.max(postings.freqs().iter().copied().max().unwrap_or(0));
            min_norm = min_norm.min(min_fieldnorm_id(&norms, postings.docs()));
            postings.advance();
        }
        if max_tf == 0 || max_tf > TF_SCAN_LIMIT {
            return Ok(loose);
        }
        // The maximum over every frequency up to the largest rather than the score at the
        // largest: floating-point rounding need not keep tf / (tf + norm) increasing.
        Ok((1..=max_tf)
            .map(|tf| self.bm25.score(min_norm, tf))
            .fold(0.0, Score::max))
    }
}

/// A segment's fieldnorm ids of one field.
enum Norms<'a> {
    Stored(&'a [u8]),
    Reader(FieldNormReader),
}

fn min_fieldnorm_id(norms: &Norms<'_>, docs: &[DocId]) -> u8 {
    match norms {
        Norms::Stored(bytes) => docs
            .iter()
            .map(|&d| bytes.get(d as usize).copied().unwrap_or(0))
            .min(),
        Norms::Reader(r) => docs.iter().map(|&d| r.fieldnorm_id(d)).min(),
    }
    .unwrap_or(u8::MAX)
}

/// `bounds` summed, rounded up far enough to cover the rounding of tantivy's own f32 sum of
/// as many scores (one score is its own bound: no rounding).
fn summed_bound(bounds: &[Score]) -> f64 {
    let sum: f64 = bounds.iter().map(|&b| f64::from(b)).sum();
    if bounds.len() <= 1 {
        sum
    } else {
        sum * (1.0 + bounds.len() as f64 * f64::from(f32::EPSILON))
    }
}

impl Weight for PrunedWeight {
    fn scorer(&self, reader: &SegmentReader, boost: Score) -> tantivy::Result<Box<dyn Scorer>> {
        self.inner.scorer(reader, boost)
    }

    fn explain(&self, reader: &SegmentReader, doc: DocId) -> tantivy::Result<Explanation> {
        self.inner.explain(reader, doc)
    }

    fn count(&self, reader: &SegmentReader) -> tantivy::Result<u32> {
        self.inner.count(reader)
    }

    fn for_each(
        &self,
        reader: &SegmentReader,
        callback: &mut dyn FnMut(DocId, Score),
    ) -> tantivy::Result<()> {
        self.inner.for_each(reader, callback)
    }

    fn for_each_no_score(
        &self,
        reader: &SegmentReader,
        callback: &mut dyn FnMut(&[DocId]),
    ) -> tantivy::Result<()> {
        self.inner.for_each_no_score(reader, callback)
    }

    fn for_each_pruning(
        &self,
        threshold: Score,
        reader: &SegmentReader,
        callback: &mut dyn FnMut(DocId, Score) -> Score,
    ) -> tantivy::Result<()> {
        let mut scorers = Vec::with_capacity(self.clauses.len());
        let mut phrase_present = false;
        for c in &self.clauses {
            let scorer = c.weight.scorer(reader, 1.0)?;
            // tantivy drops empty clauses; with no phrase left it prunes by block-max WAND
            // (or scores a plain union), and that path is left to it.
            phrase_present |= c.clause.phrase && !scorer.is::<EmptyScorer>();
            scorers.push(scorer);
        }
        if !phrase_present {
            return self.inner.for_each_pruning(threshold, reader, callback);
        }
        // Clauses with a match in this segment, weakest bound first.
        let mut live: Vec<(Score, Box<dyn Scorer>)> = Vec::with_capacity(scorers.len());
        for (c, scorer) in self.clauses.iter().zip(scorers) {
            if scorer.doc() != TERMINATED {
                live.push((c.bound(reader)?, scorer));
            }
        }
        live.sort_by(|a, b| a.0.total_cmp(&b.0));
        let bounds: Vec<Score> = live.iter().map(|(b, _)| *b).collect();
        let mut full = self.inner.scorer(reader, 1.0)?;
        let mut threshold = threshold;
        // Clauses before `first` cannot lift a document above the threshold on their own.
        let mut first = 0;
        loop {
            while first < live.len() && summed_bound(&bounds[..=first]) <= f64::from(threshold) {
                first += 1;
            }
            let doc = live[first..]
                .iter()
                .map(|(_, s)| s.doc())
                .min()
                .unwrap_or(TERMINATED);
            if doc == TERMINATED {
                break;
            }
            if full.doc() < doc {
                full.seek(doc);
            }
            debug_assert_eq!(full.doc(), doc, "the union holds every clause's documents");
            if full.doc() == doc {
                let score = full.score();
                if score > threshold {
                    threshold = callback(doc, score);
                }
            }
            for (_, s) in &mut live[first..] {
                if s.doc() == doc {
                    s.advance();
                }
            }
        }
        Ok(())
    }
}
