//! BM25 scores of one query over the lexical index, term at a time.
//!
//! Takes the query's weighted terms and the field boosts; gives [`LexicalScores`]: the
//! exact score of every declaration that matches a term. Each term's place in each
//! segment's term dictionary is looked up once (for its document frequency and for its
//! postings), and its posting list is read block by block into one accumulator per
//! document. It does not know what the scores are for, nor parse goals.
//!
//! Not pruned: MaxScore-style skipping of the common terms (Turtle and Flood 1995) was
//! tried and measured slower on the Coq standard library's goals, since with lists 100
//! deep the common terms' bound rarely falls under the cut-off (docs/performance.md,
//! "Lexical ranking").

use std::io;
use std::sync::Arc;

use tantivy::fieldnorm::FieldNormReader;
use tantivy::index::InvertedIndexReader;
use tantivy::postings::TermInfo;
use tantivy::schema::{Field, IndexRecordOption};
use tantivy::Term;

use super::{FieldBoosts, LexicalError, LexicalField, LexicalIndex, LexicalScores};
use crate::library::DeclId;
use crate::query::QueryTerm;

/// BM25's k1 and b, the values tantivy (and Lucene) use: the common middle of the ranges
/// Robertson and Zaragoza recommend (k1 in 1.2..2.0, b = 0.75).
const BM25_K1: f32 = 1.2;
const BM25_B: f32 = 0.75;

/// BM25's idf in its non-negative form, ln(1 + (N − n + 0.5) / (n + 0.5)), as tantivy
/// computes it.
pub(super) fn bm25_idf(doc_freq: u64, docs: u64) -> f32 {
    let n = doc_freq.min(docs);
    let x = ((docs - n) as f32 + 0.5) / (n as f32 + 0.5);
    (1.0 + x).ln()
}

/// k1 · (1 − b + b · dl / avgdl) for each of tantivy's 256 fieldnorm codes of dl.
fn length_norms(average: f32) -> [f32; 256] {
    let mut out = [0f32; 256];
    let average = if average > 0.0 { average } else { 1.0 };
    for (code, k) in out.iter_mut().enumerate() {
        let dl = FieldNormReader::id_to_fieldnorm(code as u8) as f32;
        *k = BM25_K1 * (1.0 - BM25_B + BM25_B * dl / average);
    }
    out
}

/// One field's part of a query: the field, its inverted index in each segment, and the
/// length norms of its fieldnorm codes.
struct FieldPart {
    field: Field,
    inverted: Vec<Arc<InvertedIndexReader>>,
    norms: [f32; 256],
}

/// One posting list to read: a term in a field, its weight (boost · term weight · (k1 + 1)
/// · idf), and its place in each segment's term dictionary, looked up once.
struct TermPart {
    field: usize,
    weight: f32,
    infos: Vec<Option<TermInfo>>,
}

impl LexicalIndex {
    /// The BM25 score of every declaration that matches at least one of `terms` in a field
    /// with a non-zero boost: the sum over fields and terms of boost · term weight · BM25.
    /// Scores are tantivy's own BM25 (k1 = 1.2, b = 0.75, idf from the segments' document
    /// frequencies, its fieldnorm coding of document length); a unit test checks them
    /// against tantivy's `TermQuery` scorer, another against its `BooleanQuery` of them. A ranking
    /// needs these scores under two filters (the premises allowed, and the theorems allowed
    /// to vote): it scores once and [`LexicalScores::top`] picks each list.
    pub fn scores(
        &self,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
    ) -> Result<LexicalScores, LexicalError> {
        let err = |source| LexicalError::Tantivy {
            path: self.path.clone(),
            source,
        };
        let io_err = |e: io::Error| LexicalError::Tantivy {
            path: self.path.clone(),
            source: e.into(),
        };
        let searcher = self.reader.searcher();
        let segments = searcher.segment_readers();
        let total_docs = searcher.num_docs();
        let mut fields: Vec<FieldPart> = Vec::new();
        let mut parts: Vec<TermPart> = Vec::new();
        for (which, boost) in [
            (LexicalField::Name, boosts.name),
            (LexicalField::Conclusion, boosts.conclusion),
            (LexicalField::Hypotheses, boosts.hypotheses),
            (LexicalField::Text, boosts.text),
        ] {
            if boost <= 0.0 {
                continue;
            }
            let field = self.field(which);
            let inverted = segments
                .iter()
                .map(|s| s.inverted_index(field))
                .collect::<tantivy::Result<Vec<_>>>()
                .map_err(err)?;
            let before = parts.len();
            for t in terms {
                if t.weight <= 0.0 || t.text.is_empty() {
                    continue;
                }
                let term = Term::from_field_text(field, &t.text);
                let infos = inverted
                    .iter()
                    .map(|inv| inv.get_term_info(&term))
                    .collect::<io::Result<Vec<_>>>()
                    .map_err(io_err)?;
                let df: u64 = infos.iter().flatten().map(|i| u64::from(i.doc_freq)).sum();
                if df == 0 {
                    continue;
                }
                parts.push(TermPart {
                    field: fields.len(),
                    weight: boost * t.weight * (1.0 + BM25_K1) * bm25_idf(df, total_docs),
                    infos,
                });
            }
            if parts.len() == before {
                continue;
            }
            let tokens: u64 = inverted.iter().map(|i| i.total_num_tokens()).sum();
            let average = tokens as f32 / total_docs.max(1) as f32;
            fields.push(FieldPart {
                field,
                inverted,
                norms: length_norms(average),
            });
        }
        let mut hits: Vec<(DeclId, f32)> = Vec::new();
        for (seg_ord, seg) in segments.iter().enumerate() {
            let Some(decls) = self.doc_to_decl.get(seg_ord) else {
                continue;
            };
            let max_doc = seg.max_doc() as usize;
            let lengths = fields
                .iter()
                .map(|f| seg.get_fieldnorms_reader(f.field))
                .collect::<tantivy::Result<Vec<_>>>()
                .map_err(err)?;
            let mut acc = vec![0f32; max_doc];
            // Which documents have a score: a bitset, set without a branch, so the inner
            // loop does not mispredict on every new document.
            let mut touched = vec![0u64; max_doc.div_ceil(64)];
            for part in &parts {
                let Some(info) = part.infos.get(seg_ord).and_then(Option::as_ref) else {
                    continue;
                };
                let (Some(field), Some(lengths)) =
                    (fields.get(part.field), lengths.get(part.field))
                else {
                    continue;
                };
                let norms = &field.norms;
                let mut block = field.inverted[seg_ord]
                    .read_block_postings_from_terminfo(info, IndexRecordOption::WithFreqs)
                    .map_err(io_err)?;
                loop {
                    let docs = block.docs();
                    if docs.is_empty() {
                        break;
                    }
                    for (&doc, &tf) in docs.iter().zip(block.freqs()) {
                        let (Some(a), Some(bits)) = (
                            acc.get_mut(doc as usize),
                            touched.get_mut(doc as usize / 64),
                        ) else {
                            continue;
                        };
                        let code = lengths.fieldnorm_id(doc) as usize;
                        let tf = tf as f32;
                        *a += part.weight * tf / (tf + norms[code]);
                        *bits |= 1 << (doc % 64);
                    }
                    block.advance();
                }
            }
            let alive = seg.alive_bitset();
            for (word_index, &word) in touched.iter().enumerate() {
                let mut word = word;
                while word != 0 {
                    let doc = (word_index * 64 + word.trailing_zeros() as usize) as u32;
                    word &= word - 1;
                    if alive.is_some_and(|a| !a.is_alive(doc)) {
                        continue;
                    }
                    if let (Some(&id), Some(&score)) =
                        (decls.get(doc as usize), acc.get(doc as usize))
                    {
                        hits.push((DeclId(id), score));
                    }
                }
            }
        }
        Ok(LexicalScores { hits })
    }
}
