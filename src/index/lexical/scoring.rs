//! BM25 scores of one query over the lexical index, term at a time.
//!
//! Takes the query's weighted terms and the field boosts; gives [`LexicalScores`]: the
//! exact score of every declaration that matches a term. The scores are sums of the
//! [`ImpactTable`]'s precomputed impacts, one multiply-add per posting into an accumulator
//! over the declarations that each thread keeps between queries (zeroing one the size of
//! a million-declaration library would cost more than scoring a goal). It does not know
//! what the scores are for, nor parse goals.
//!
//! Not pruned: MaxScore-style skipping of the common terms (Turtle and Flood 1995) was
//! tried and measured slower on the Coq standard library's goals, since with lists 100
//! deep the common terms' bound rarely falls under the cut-off (docs/performance.md,
//! "Lexical ranking").

use std::cell::RefCell;
use std::sync::Arc;

use super::impacts::ImpactTable;
use super::top::TopPick;
use super::{FieldBoosts, LexicalError, LexicalIndex, LexicalScores};
use crate::library::DeclId;
use crate::query::QueryTerm;
use crate::retrieve::accessible::PremiseFilter;

/// One thread's accumulator: a score per declaration and a bit per declaration that has
/// one. Both are all zero between queries.
#[derive(Default)]
struct Accumulator {
    scores: Vec<f32>,
    touched: Vec<u64>,
}

thread_local! {
    static ACCUMULATOR: RefCell<Accumulator> = RefCell::new(Accumulator::default());
}

impl LexicalIndex {
    /// The BM25 score of every declaration that matches at least one of `terms` in a field
    /// with a non-zero boost: the sum over fields and terms of boost · term weight · BM25.
    /// Scores are tantivy's own BM25 (k1 = 1.2, b = 0.75, idf from the segments' document
    /// frequencies, its fieldnorm coding of document length); a unit test checks them
    /// against tantivy's `TermQuery` scorer, another against its `BooleanQuery` of them. A ranking
    /// needs these scores under two filters (the premises allowed, and the theorems allowed
    /// to vote): it asks [`LexicalIndex::top_lists`] for both at once instead.
    ///
    /// The first query with a set of boosts computes their impact table (about 60 ms on
    /// the Coq standard library: opening went from 39–63 to 107–115 ms); it is kept for the
    /// next queries with the same boosts, and [`LexicalIndex::prepare`] computes it ahead.
    pub fn scores(
        &self,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
    ) -> Result<LexicalScores, LexicalError> {
        let table = self.prepare(boosts)?;
        let declarations = self.document_count();
        let mut hits = Vec::new();
        ACCUMULATOR.with(|cell| {
            let mut acc = cell.borrow_mut();
            score_into(&mut acc, &table, terms, declarations, |id, score| {
                hits.push((id, score))
            });
        });
        Ok(LexicalScores { hits })
    }

    /// For each of `lists` (a filter, `None` for all, and a length), the best declarations
    /// by BM25 for `terms`, best first, as [`LexicalScores::top`] would pick them from
    /// [`LexicalIndex::scores`]: the lists are picked while the scores are collected, in
    /// one pass and without keeping the scores (the two picks cost a ranking about a tenth
    /// of its time when they were two passes over the kept scores; docs/performance.md,
    /// "HTTP server").
    pub fn top_lists(
        &self,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
        lists: &[(Option<&PremiseFilter>, usize)],
    ) -> Result<Vec<Vec<(DeclId, f32)>>, LexicalError> {
        let table = self.prepare(boosts)?;
        let declarations = self.document_count();
        let mut picks: Vec<TopPick> = lists
            .iter()
            .map(|&(filter, limit)| TopPick::new(filter, limit))
            .collect();
        ACCUMULATOR.with(|cell| {
            let mut acc = cell.borrow_mut();
            score_into(&mut acc, &table, terms, declarations, |id, score| {
                for pick in &mut picks {
                    pick.offer(id, score);
                }
            });
        });
        Ok(picks.into_iter().map(TopPick::into_sorted).collect())
    }

    /// The impact table of `boosts`: the kept one when it was computed with them, else a
    /// new one, which is kept instead. One table is kept, since every caller asks with one
    /// set of boosts at a time (the index's, or evaluation's tuning one setting after
    /// another); callers alternating between two sets would recompute it on every query.
    pub fn prepare(&self, boosts: &FieldBoosts) -> Result<Arc<ImpactTable>, LexicalError> {
        {
            let kept = self.impacts.read().unwrap_or_else(|p| p.into_inner());
            if let Some(table) = kept.as_ref().filter(|t| t.boosts() == boosts) {
                return Ok(Arc::clone(table));
            }
        }
        let table = Arc::new(self.impact_table(boosts)?);
        *self.impacts.write().unwrap_or_else(|p| p.into_inner()) = Some(Arc::clone(&table));
        Ok(table)
    }
}

/// Adds each term's weighted impacts into `acc`, hands each declaration touched with its
/// score to `collect` (by increasing declaration id), and leaves `acc` all zero again.
fn score_into(
    acc: &mut Accumulator,
    table: &ImpactTable,
    terms: &[QueryTerm],
    declarations: usize,
    mut collect: impl FnMut(DeclId, f32),
) {
    if acc.scores.len() < declarations {
        acc.scores.resize(declarations, 0.0);
        acc.touched.resize(declarations.div_ceil(64), 0);
    }
    let Accumulator { scores, touched } = acc;
    for t in terms {
        if t.weight <= 0.0 || t.text.is_empty() {
            continue;
        }
        let (decls, impacts) = table.postings(&t.text);
        for (&decl, &impact) in decls.iter().zip(impacts) {
            let d = decl as usize;
            // Which declarations have a score: a bitset, set without a branch, so the
            // loop does not mispredict on every new declaration.
            if let (Some(s), Some(bits)) = (scores.get_mut(d), touched.get_mut(d / 64)) {
                *s += t.weight * impact;
                *bits |= 1 << (d % 64);
            }
        }
    }
    let words = declarations.div_ceil(64);
    for (word_index, word) in touched.iter_mut().take(words).enumerate() {
        let mut bits = std::mem::take(word);
        while bits != 0 {
            let d = word_index * 64 + bits.trailing_zeros() as usize;
            bits &= bits - 1;
            if let Some(s) = scores.get_mut(d) {
                collect(DeclId(d as u32), std::mem::take(s));
            }
        }
    }
}
