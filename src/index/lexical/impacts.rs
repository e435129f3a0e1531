//! Each term's BM25 contribution to each declaration, computed once per set of field
//! boosts, so that a query only adds up numbers.
//!
//! Takes the opened tantivy index and the [`FieldBoosts`]; gives an [`ImpactTable`]: for
//! every term text, the declarations it occurs in (in any field with a non-zero boost),
//! each with Σ over fields of boost · (k1 + 1) · idf · tf / (tf + k1 · (1 − b + b · dl /
//! avgdl)), tantivy's BM25 of the term in that field times the field's boost. A query's
//! score of a declaration is then Σ over its terms of the term's weight times this impact:
//! one multiply-add per posting, where reading tantivy's posting lists at query time costs
//! a fieldnorm lookup and a division per posting, and once per field. Scoring terms
//! eagerly into one sparse table is the idea of Lù's BM25S (2024); Anh and Moffat's
//! impact-ordered indexes (2002) store precomputed contributions the same way.
//!
//! Each row also keeps its largest impact, the bound [`super::scoring`]'s pruning of the
//! common terms needs.
//!
//! It costs memory: 8 bytes per (term, declaration) pair, about the size of the `text`
//! field's postings (docs/performance.md, "Lexical ranking"). It does not rank nor filter.

use std::collections::HashMap;
use std::io;
use std::sync::Arc;

use tantivy::fieldnorm::FieldNormReader;
use tantivy::index::InvertedIndexReader;
use tantivy::schema::IndexRecordOption;
use tantivy::Searcher;

use super::{FieldBoosts, LexicalError, LexicalField, LexicalIndex};

/// BM25's k1 and b, the values tantivy (and Lucene) use: the common middle of the ranges
/// Robertson and Zaragoza recommend (k1 in 1.2..2.0, b = 0.75).
const BM25_K1: f32 = 1.2;
const BM25_B: f32 = 0.75;

/// BM25's idf in its non-negative form, ln(1 + (N − n + 0.5) / (n + 0.5)), as tantivy
/// computes it.
fn bm25_idf(doc_freq: u64, docs: u64) -> f32 {
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

/// Every term's impact on every declaration it occurs in, for one set of field boosts.
#[derive(Debug)]
pub struct ImpactTable {
    boosts: FieldBoosts,
    /// Term text → row.
    rows: HashMap<String, u32>,
    /// Row r's postings are `decls[starts[r]..starts[r + 1]]`, by increasing declaration.
    starts: Vec<usize>,
    decls: Vec<u32>,
    impacts: Vec<f32>,
    /// Row r's largest impact: the most its term can add to any declaration's score.
    maxima: Vec<f32>,
}

/// One term's row of an [`ImpactTable`].
#[derive(Clone, Copy, Debug)]
pub struct ImpactRow<'a> {
    /// The declarations the term occurs in, increasing.
    pub decls: &'a [u32],
    /// The term's impact on each of them.
    pub impacts: &'a [f32],
    /// The largest of `impacts` (0 for an empty row).
    pub max: f32,
}

impl ImpactTable {
    /// The boosts the impacts were computed with.
    pub fn boosts(&self) -> &FieldBoosts {
        &self.boosts
    }

    /// The row of `text`, with its largest impact (an empty row for a term no field with
    /// a non-zero boost holds).
    pub fn row(&self, text: &str) -> ImpactRow<'_> {
        let empty = ImpactRow {
            decls: &[],
            impacts: &[],
            max: 0.0,
        };
        let Some(&row) = self.rows.get(text) else {
            return empty;
        };
        let row = row as usize;
        match (self.starts.get(row), self.starts.get(row + 1)) {
            (Some(&a), Some(&b)) => ImpactRow {
                decls: self.decls.get(a..b).unwrap_or(&[]),
                impacts: self.impacts.get(a..b).unwrap_or(&[]),
                max: self.maxima.get(row).copied().unwrap_or(0.0),
            },
            _ => empty,
        }
    }
}

impl LexicalIndex {
    /// Computes the impact table of `boosts` by reading every posting list of every field
    /// with a non-zero boost once.
    pub(super) fn impact_table(&self, boosts: &FieldBoosts) -> Result<ImpactTable, LexicalError> {
        let searcher = self.reader.searcher();
        let mut by_term: HashMap<String, Vec<(u32, f32)>> = HashMap::new();
        for (which, boost) in [
            (LexicalField::Name, boosts.name),
            (LexicalField::Conclusion, boosts.conclusion),
            (LexicalField::Hypotheses, boosts.hypotheses),
            (LexicalField::Text, boosts.text),
        ] {
            if boost > 0.0 {
                self.add_field_impacts(&searcher, which, boost, &mut by_term)?;
            }
        }
        let mut rows = HashMap::with_capacity(by_term.len());
        let mut starts = vec![0usize];
        let mut maxima = Vec::with_capacity(by_term.len());
        let total: usize = by_term.values().map(Vec::len).sum();
        let mut decls = Vec::with_capacity(total);
        let mut impacts = Vec::with_capacity(total);
        for (text, mut postings) in by_term {
            // The fields' lists of one term, merged: one entry per declaration, the fields'
            // impacts summed in field order (sort_by_key is stable).
            postings.sort_by_key(|p| p.0);
            let mut last = None;
            for (decl, impact) in postings {
                if last == Some(decl) {
                    if let Some(sum) = impacts.last_mut() {
                        *sum += impact;
                    }
                    continue;
                }
                last = Some(decl);
                decls.push(decl);
                impacts.push(impact);
            }
            rows.insert(text, (starts.len() - 1) as u32);
            let first = starts.last().copied().unwrap_or(0);
            maxima.push(
                impacts
                    .get(first..)
                    .unwrap_or(&[])
                    .iter()
                    .fold(0f32, |m, &x| m.max(x)),
            );
            starts.push(decls.len());
        }
        decls.shrink_to_fit();
        impacts.shrink_to_fit();
        Ok(ImpactTable {
            boosts: *boosts,
            rows,
            starts,
            decls,
            impacts,
            maxima,
        })
    }

    /// Appends to `by_term` every term of one field with `boost` · (k1 + 1) · idf · the
    /// term's saturated frequency in each live document holding it.
    fn add_field_impacts(
        &self,
        searcher: &Searcher,
        which: LexicalField,
        boost: f32,
        by_term: &mut HashMap<String, Vec<(u32, f32)>>,
    ) -> Result<(), LexicalError> {
        let err = |source| LexicalError::Tantivy {
            path: self.path.clone(),
            source,
        };
        let io_err = |e: io::Error| err(e.into());
        let field = self.field(which);
        let segments = searcher.segment_readers();
        let total_docs = searcher.num_docs();
        let inverted: Vec<Arc<InvertedIndexReader>> = segments
            .iter()
            .map(|s| s.inverted_index(field))
            .collect::<tantivy::Result<_>>()
            .map_err(err)?;
        let tokens: u64 = inverted.iter().map(|i| i.total_num_tokens()).sum();
        let norms = length_norms(tokens as f32 / total_docs.max(1) as f32);
        // Document frequencies over every segment first: idf needs the whole index's.
        let mut doc_freq: HashMap<Vec<u8>, u64> = HashMap::new();
        for inv in &inverted {
            let mut stream = inv.terms().stream().map_err(io_err)?;
            while stream.advance() {
                *doc_freq.entry(stream.key().to_vec()).or_default() +=
                    u64::from(stream.value().doc_freq);
            }
        }
        for (seg_ord, (seg, inv)) in segments.iter().zip(&inverted).enumerate() {
            let Some(decls) = self.doc_to_decl.get(seg_ord) else {
                continue;
            };
            let lengths = seg.get_fieldnorms_reader(field).map_err(err)?;
            let alive = seg.alive_bitset();
            let mut stream = inv.terms().stream().map_err(io_err)?;
            while stream.advance() {
                let Ok(text) = std::str::from_utf8(stream.key()) else {
                    // quarry's tokenizer only writes UTF-8; a term that is not cannot be
                    // asked for.
                    continue;
                };
                let df = doc_freq.get(stream.key()).copied().unwrap_or(0);
                let weight = boost * (1.0 + BM25_K1) * bm25_idf(df, total_docs);
                let list = by_term.entry(text.to_string()).or_default();
                let mut block = inv
                    .read_block_postings_from_terminfo(stream.value(), IndexRecordOption::WithFreqs)
                    .map_err(io_err)?;
                loop {
                    let docs = block.docs();
                    if docs.is_empty() {
                        break;
                    }
                    for (&doc, &tf) in docs.iter().zip(block.freqs()) {
                        if alive.is_some_and(|a| !a.is_alive(doc)) {
                            continue;
                        }
                        let Some(&decl) = decls.get(doc as usize) else {
                            continue;
                        };
                        let code = lengths.fieldnorm_id(doc) as usize;
                        let tf = tf as f32;
                        list.push((decl, weight * tf / (tf + norms[code])));
                    }
                    block.advance();
                }
            }
        }
        Ok(())
    }
}
