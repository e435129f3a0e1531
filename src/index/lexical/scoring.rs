//! BM25 scores of one query over the lexical index, term at a time.
//!
//! Takes the query's weighted terms and the field boosts; gives [`LexicalScores`]: the
//! exact score of every declaration that matches a term, or only the best few under each
//! of a ranking's filters. The scores are sums of the [`ImpactTable`]'s precomputed
//! impacts, one multiply-add per posting into an accumulator over the declarations that
//! each thread keeps between queries (zeroing one the size of a million-declaration library
//! would cost more than scoring a goal). It does not know what the scores are for, nor
//! parse goals.
//!
//! When only the best few are wanted, the lightest terms may be left mostly unread, without
//! changing the lists: MaxScore (Turtle and Flood 1995), term at a time. Terms are added
//! heaviest bound first (a term's bound is its weight times its largest impact), so the
//! lightest are a suffix. Once the bounds of a suffix sum to less than every wanted list's
//! current cut-off, a declaration only the suffix's terms hold cannot enter a list (the
//! suffix is MaxScore's non-essential terms): the terms before it are added in full, and
//! the suffix's only at the declarations whose score plus the suffix's bound still reaches
//! the lowest cut-off, which drop out as the bound left shrinks. Finding a cut-off costs a
//! pass over the declarations scored so far, so it is tried only where the postings it could
//! leave unread are several times that work: in large libraries, whose common terms
//! (`forall`, the type's name, words of the symbols' names) hold most declarations. On the
//! Coq standard library it rarely pays (docs/performance.md, "Lexical ranking").

use std::cell::RefCell;
use std::sync::Arc;

use super::impacts::{ImpactRow, ImpactTable};
use super::top::TopPick;
use super::{FieldBoosts, LexicalError, LexicalIndex, LexicalScores};
use crate::library::DeclId;
use crate::query::QueryTerm;
use crate::retrieve::accessible::PremiseFilter;

/// One thread's accumulator: a score per declaration and a bit per declaration that has
/// one. Both are all zero between queries. `candidates` is the pruning's scratch list.
#[derive(Default)]
struct Accumulator {
    scores: Vec<f32>,
    touched: Vec<u64>,
    candidates: Vec<u32>,
}

/// When the scoring for a few lists tries to leave the common terms unread.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Pruning {
    /// A skip is taken only when the postings it leaves unread are at least `payoff` times
    /// what the passes over the declarations scored by then cost (about one posting's
    /// work per declaration scored, bounded by the postings read, plus the accumulator's
    /// bit words).
    pub(crate) payoff: usize,
    /// A try (one such pass, to find the lists' cut-offs) is made only when the widest
    /// skip it could find would pay this many times: most tries on a small library find
    /// too little to skip and would be paid for nothing.
    pub(crate) try_payoff: usize,
    /// At most this many tries per query.
    pub(crate) tries: usize,
}

impl Pruning {
    /// What rankings use. Chosen by the ranking times of `quarry serve` on the Coq standard
    /// library's goal states and the cost curve's 1M synthetic library (payoff 4, try 4,
    /// three tries made the stdlib 12 % slower; these are even with no pruning there);
    /// not chosen on recall, which pruning cannot change.
    pub(crate) const DEFAULT: Pruning = Pruning {
        payoff: 3,
        try_payoff: 8,
        tries: 2,
    };
    /// Tries before every term whatever it costs: for tests of the pruned path.
    #[cfg(test)]
    pub(crate) const EVERY_TERM: Pruning = Pruning {
        payoff: 0,
        try_payoff: 0,
        tries: usize::MAX,
    };
}

/// One list picked: declarations and their scores, best first.
pub(crate) type PickedList = Vec<(DeclId, f32)>;

/// What one scoring did: for benches and tests.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub(crate) struct ScoringWork {
    /// Postings added in full.
    pub(crate) postings_read: usize,
    /// Postings of the terms left unread (only looked up at the candidates).
    pub(crate) postings_skipped: usize,
    /// Declarations the skipped terms were looked up at.
    pub(crate) candidates: usize,
    /// Whether the common terms were cut short.
    pub(crate) pruned: bool,
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
            score_into(&mut acc, &table, terms, declarations, None, |id, score| {
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
        self.top_lists_with(terms, boosts, lists, Pruning::DEFAULT)
            .map(|(found, _)| found)
    }

    /// [`LexicalIndex::top_lists`] with a given pruning, and what the scoring did.
    pub(crate) fn top_lists_with(
        &self,
        terms: &[QueryTerm],
        boosts: &FieldBoosts,
        lists: &[(Option<&PremiseFilter>, usize)],
        pruning: Pruning,
    ) -> Result<(Vec<PickedList>, ScoringWork), LexicalError> {
        let table = self.prepare(boosts)?;
        let declarations = self.document_count();
        let mut picks: Vec<TopPick> = lists
            .iter()
            .map(|&(filter, limit)| TopPick::new(filter, limit))
            .collect();
        let cut_offs: Vec<TopPick> = picks.iter().map(TopPick::emptied).collect();
        let work = ACCUMULATOR.with(|cell| {
            let mut acc = cell.borrow_mut();
            score_into(
                &mut acc,
                &table,
                terms,
                declarations,
                Some((&cut_offs, pruning)),
                |id, score| {
                    for pick in &mut picks {
                        pick.offer(id, score);
                    }
                },
            )
        });
        Ok((picks.into_iter().map(TopPick::into_sorted).collect(), work))
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

/// A query term with its row of the impact table.
struct WeightedRow<'a> {
    weight: f32,
    row: ImpactRow<'a>,
}

impl WeightedRow<'_> {
    /// The most this term adds to any declaration's score.
    fn bound(&self) -> f32 {
        self.weight * self.row.max
    }
}

/// The terms that can score, heaviest bound first (ties in the query's order). Every
/// scoring adds terms in this order, pruned or not, so a declaration's score is the same
/// float sum either way.
fn weighted_rows<'a>(table: &'a ImpactTable, terms: &[QueryTerm]) -> Vec<WeightedRow<'a>> {
    let mut rows: Vec<WeightedRow<'a>> = terms
        .iter()
        .filter(|t| t.weight > 0.0 && !t.text.is_empty())
        .map(|t| WeightedRow {
            weight: t.weight,
            row: table.row(&t.text),
        })
        .filter(|w| !w.row.decls.is_empty())
        .collect();
    rows.sort_by(|a, b| b.bound().total_cmp(&a.bound()));
    rows
}

/// Adds each term's weighted impacts into `acc`, hands each declaration touched with its
/// score to `collect` (by increasing declaration id), and leaves `acc` all zero again.
///
/// With `cut` (the wanted lists, empty, and when to try), the lightest terms may be added
/// only where they can still change those lists (the module's doc): a declaration handed
/// over with a score short of its full one is then below every list's final cut-off, so
/// the lists picked from what `collect` gets are the same as without pruning.
fn score_into(
    acc: &mut Accumulator,
    table: &ImpactTable,
    terms: &[QueryTerm],
    declarations: usize,
    cut: Option<(&[TopPick], Pruning)>,
    mut collect: impl FnMut(DeclId, f32),
) -> ScoringWork {
    if acc.scores.len() < declarations {
        acc.scores.resize(declarations, 0.0);
        acc.touched.resize(declarations.div_ceil(64), 0);
    }
    let words = declarations.div_ceil(64);
    let Accumulator {
        scores,
        touched,
        candidates,
    } = acc;
    let rows = weighted_rows(table, terms);
    let mut work = ScoringWork::default();
    // rows[end..] are the terms added at the candidates only; `lowest` is the latest
    // cut-off found, which the bounds of rows[end..] stay under.
    let mut end = rows.len();
    let mut lowest = f32::NEG_INFINITY;
    let mut tries = 0;
    let mut bound_added = 0f32;
    let mut i = 0;
    while i < end {
        if let Some((lists, pruning)) = cut.filter(|(_, p)| tries < p.tries) {
            // No score so far exceeds the bounds added, so no cut-off found now could skip
            // more than rows[widest..]: a try that could not pay even then is not made.
            let widest = first_skippable(&rows, i, end, bound_added);
            let try_pays = Pruning {
                payoff: pruning.try_payoff,
                ..pruning
            };
            if skipping_pays(&rows, i, widest, work.postings_read, words, try_pays) {
                tries += 1;
                lowest = lowest.max(lowest_cut_off(scores, marked(touched, words), lists));
                let j = first_skippable(&rows, i, end, lowest);
                if skipping_pays(&rows, i, j, work.postings_read, words, pruning) {
                    end = j;
                }
                if i >= end {
                    break;
                }
            }
        }
        let Some(w) = rows.get(i) else { break };
        add_row(w, scores, touched, declarations);
        work.postings_read += w.row.decls.len();
        bound_added += w.bound();
        i += 1;
    }
    let skipped = rows.get(end..).unwrap_or(&[]);
    if let (Some((lists, _)), false) = (cut, skipped.is_empty()) {
        // The cut-off has grown since the terms were split; the higher it is, the fewer
        // candidates (a pass to find it and one to pick them measured faster than
        // picking them under the older cut-off and sifting them again).
        lowest = lowest.max(lowest_cut_off(scores, marked(touched, words), lists));
        let mut bound = bound_of(skipped);
        candidates.clear();
        candidates.extend(
            marked(touched, words)
                .filter(|&d| scores.get(d).is_some_and(|&s| s + bound >= lowest))
                .map(|d| d as u32),
        );
        work.candidates = candidates.len();
        // Heaviest first: after each term the bound of the ones left is lower, and the
        // candidates it no longer lifts to the cut-off drop out.
        for (k, w) in skipped.iter().enumerate() {
            add_at_candidates(candidates, w, scores);
            bound = bound_of(skipped.get(k + 1..).unwrap_or(&[]));
            let from_candidates = candidates.iter().map(|&d| d as usize);
            lowest = lowest.max(lowest_cut_off(scores, from_candidates, lists));
            candidates.retain(|&d| scores.get(d as usize).is_some_and(|&s| s + bound >= lowest));
        }
        work.postings_skipped = skipped.iter().map(|w| w.row.decls.len()).sum();
        work.pruned = true;
        // Only the candidates left can be in a list, and they have their full scores: the
        // others are only cleared.
        for &d in candidates.iter() {
            if let Some(&s) = scores.get(d as usize) {
                collect(DeclId(d), s);
            }
        }
        for d in marked(touched, words) {
            if let Some(s) = scores.get_mut(d) {
                *s = 0.0;
            }
        }
        if let Some(bits) = touched.get_mut(..words) {
            bits.fill(0);
        }
        return work;
    }
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
    work
}

/// Adds `w`'s weighted impacts into `scores` and marks its declarations in `touched`, of
/// a library of `declarations`.
fn add_row(w: &WeightedRow, scores: &mut [f32], touched: &mut [u64], declarations: usize) {
    let decls = w.row.decls;
    if decls.len().saturating_mul(DENSE_ROW) < declarations {
        for (&decl, &impact) in decls.iter().zip(w.row.impacts) {
            let d = decl as usize;
            // Which declarations have a score: a bitset, set without a branch, so the
            // loop does not mispredict on every new declaration.
            if let (Some(s), Some(bits)) = (scores.get_mut(d), touched.get_mut(d / 64)) {
                *s += w.weight * impact;
                *bits |= 1 << (d % 64);
            }
        }
        return;
    }
    // A dense row's declarations share bit words: the word is kept in a register while
    // they do, since or-ing each into memory would make every posting wait for the
    // store of the one before.
    let mut word_index = usize::MAX;
    let mut bits = 0u64;
    for (&decl, &impact) in decls.iter().zip(w.row.impacts) {
        let d = decl as usize;
        if d / 64 != word_index {
            if let Some(word) = touched.get_mut(word_index) {
                *word |= bits;
            }
            word_index = d / 64;
            bits = 0;
        }
        if let Some(s) = scores.get_mut(d) {
            *s += w.weight * impact;
            bits |= 1 << (d % 64);
        }
    }
    if let Some(word) = touched.get_mut(word_index) {
        *word |= bits;
    }
}

/// A row holding at least one declaration in this many is added keeping its bit word in
/// a register. BM25 queries of the Coq standard library's goals went from 18.6–20.3k to
/// 21.4–22.3k a second on one thread; 4 and 64 measured the same as 16 (docs/performance.md,
/// "Side by side", the BM25 queries).
const DENSE_ROW: usize = 16;

/// Whether reading rows[i..j] in full and skipping rows[j..] leaves `payoff` times the
/// postings that the passes over the declarations scored by then cost (at most the
/// postings read, plus the accumulator's bit words).
fn skipping_pays(
    rows: &[WeightedRow],
    i: usize,
    j: usize,
    read: usize,
    words: usize,
    pruning: Pruning,
) -> bool {
    let length = |r: Option<&[WeightedRow]>| -> usize {
        r.unwrap_or(&[]).iter().map(|w| w.row.decls.len()).sum()
    };
    let skipped = length(rows.get(j..));
    let read_by_then = read.saturating_add(length(rows.get(i..j)));
    skipped > 0
        && skipped
            >= pruning
                .payoff
                .saturating_mul(read_by_then.saturating_add(words))
}

/// The most `rows` add to any declaration's score, with a margin for the float sums'
/// order: every product weight · impact is at most weight · max, and the margin covers
/// the rounding of adding them up.
fn bound_of(rows: &[WeightedRow]) -> f32 {
    rows.iter().map(WeightedRow::bound).sum::<f32>() * (1.0 + 1e-4) + 1e-6
}

/// Where the skippable terms start: the smallest j in i..=end whose rows[j..] have a bound
/// under `lowest` (rows are heaviest first, so the lightest are a suffix). MaxScore's
/// non-essential terms: a declaration none of rows[..j] touched cannot reach `lowest`.
fn first_skippable(rows: &[WeightedRow], i: usize, end: usize, lowest: f32) -> usize {
    let mut j = end;
    while j > i {
        let Some(longer) = rows.get(j - 1..) else {
            break;
        };
        if bound_of(longer) >= lowest {
            break;
        }
        j -= 1;
    }
    j
}

/// The lowest of the wanted lists' cut-offs over the scores so far of `decls` (−∞ while a
/// list has fewer declarations than it wants, +∞ when no list wants any). Scores only
/// grow, so each list's final cut-off is at least this.
fn lowest_cut_off(scores: &[f32], decls: impl Iterator<Item = usize>, lists: &[TopPick]) -> f32 {
    let mut floors: Vec<TopPick> = lists.iter().map(TopPick::emptied).collect();
    for d in decls {
        let s = scores.get(d).copied().unwrap_or(0.0);
        for pick in &mut floors {
            pick.offer(DeclId(d as u32), s);
        }
    }
    lowest_floor(&floors)
}

/// The lowest floor of `picks` (+∞ for none).
fn lowest_floor(picks: &[TopPick]) -> f32 {
    picks
        .iter()
        .map(TopPick::floor)
        .fold(f32::INFINITY, f32::min)
}

/// The declarations marked in the first `words` words of `touched`, increasing.
fn marked(touched: &[u64], words: usize) -> impl Iterator<Item = usize> + '_ {
    touched
        .iter()
        .take(words)
        .enumerate()
        .flat_map(|(word_index, &word)| {
            let mut bits = word;
            std::iter::from_fn(move || {
                (bits != 0).then(|| {
                    let d = word_index * 64 + bits.trailing_zeros() as usize;
                    bits &= bits - 1;
                    d
                })
            })
        })
}

/// Adds `w`'s impacts at the declarations of `candidates` (increasing) that its row holds:
/// a galloping search forward through the row for each, so a short list of candidates
/// reads a few entries of a long row (Bentley and Yao 1976's unbounded search).
fn add_at_candidates(candidates: &[u32], w: &WeightedRow, scores: &mut [f32]) {
    let decls = w.row.decls;
    if candidates.len().saturating_mul(8) >= decls.len() {
        // Candidates about as dense as the row: one walk through both is cheaper.
        let mut at = candidates.iter().peekable();
        for (&d, &impact) in decls.iter().zip(w.row.impacts) {
            while at.next_if(|&&c| c < d).is_some() {}
            match at.peek() {
                None => break,
                Some(&&c) if c == d => {
                    if let Some(s) = scores.get_mut(d as usize) {
                        *s += w.weight * impact;
                    }
                }
                Some(_) => {}
            }
        }
        return;
    }
    let mut from = 0usize;
    for &c in candidates {
        let rest = decls.get(from..).unwrap_or(&[]);
        if rest.is_empty() {
            break;
        }
        // The first entry ≥ c lies below `reach` once rest[reach − 1] ≥ c.
        let mut reach = 1usize;
        while reach < rest.len() && rest.get(reach - 1).is_some_and(|&d| d < c) {
            reach = reach.saturating_mul(2);
        }
        let reach = reach.min(rest.len());
        let at = from + rest.get(..reach).unwrap_or(&[]).partition_point(|&d| d < c);
        if decls.get(at) == Some(&c) {
            if let (Some(s), Some(&impact)) = (scores.get_mut(c as usize), w.row.impacts.get(at)) {
                *s += w.weight * impact;
            }
        }
        from = at;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against the definition (a membership test for each candidate): impacts are added
    /// at exactly the candidates the row holds, in both of the function's regimes
    /// (candidates sparse, searched for; and dense, walked together with the row).
    #[test]
    fn impacts_are_added_at_exactly_the_candidates_the_row_holds() {
        let decls: Vec<u32> = (0..2000).filter(|d| d % 3 != 1).collect();
        let impacts: Vec<f32> = decls.iter().map(|&d| 1.0 + d as f32 / 1000.0).collect();
        let w = WeightedRow {
            weight: 0.5,
            row: ImpactRow {
                decls: &decls,
                impacts: &impacts,
                max: 3.0,
            },
        };
        for step in [1u32, 2, 7, 97, 1999] {
            let candidates: Vec<u32> = (0..2001).step_by(step as usize).collect();
            let mut scores = vec![0f32; 2001];
            add_at_candidates(&candidates, &w, &mut scores);
            for (d, &s) in scores.iter().enumerate() {
                let held = decls.binary_search(&(d as u32));
                let want = match held {
                    Ok(at) if candidates.contains(&(d as u32)) => 0.5 * impacts[at],
                    _ => 0.0,
                };
                assert_eq!(s, want, "declaration {d}, candidates every {step}");
            }
        }
    }
}
