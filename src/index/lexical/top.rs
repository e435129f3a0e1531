//! Picking the best few of many scored declarations: one bounded heap per list wanted.
//!
//! Takes (declaration, score) pairs in any order and, for each list wanted, a filter and a
//! length; gives each list best first, equal scores going to the smaller declaration id, so
//! the order is the same on every run. A ranking wants two lists from one query's scores (the
//! premises allowed, and the theorems allowed to vote), so each pair is offered to every list
//! as it is met, in one pass. It does not score.

use std::collections::BinaryHeap;

use crate::library::DeclId;
use crate::retrieve::accessible::PremiseFilter;

/// One list being picked: the best `limit` of the pairs `filter` allows (all when `None`).
pub(crate) struct TopPick<'a> {
    filter: Option<&'a PremiseFilter>,
    limit: usize,
    heap: BinaryHeap<Ranked>,
    /// Once the heap is full, the score of its worst entry: most pairs fall below it and
    /// are passed over on one float comparison.
    bar: f32,
}

impl<'a> TopPick<'a> {
    /// An empty pick of the best `limit` that `filter` allows.
    pub(crate) fn new(filter: Option<&'a PremiseFilter>, limit: usize) -> TopPick<'a> {
        TopPick {
            filter,
            limit,
            heap: BinaryHeap::with_capacity(limit),
            bar: f32::NEG_INFINITY,
        }
    }

    /// Considers one pair.
    #[inline]
    pub(crate) fn offer(&mut self, id: DeclId, score: f32) {
        if self.limit == 0 || score < self.bar || self.filter.is_some_and(|f| !f.contains(id)) {
            return;
        }
        let hit = Ranked(id, score);
        if self.heap.len() < self.limit {
            self.heap.push(hit);
            if self.heap.len() < self.limit {
                return;
            }
        } else {
            // The worst kept entry is replaced in place: one sift instead of a pop and a push.
            match self.heap.peek_mut() {
                Some(mut worst) if hit < *worst => *worst = hit,
                _ => return,
            }
        }
        self.bar = self.heap.peek().map_or(self.bar, |worst| worst.1);
    }

    /// The score a pair must beat to get into this list as it stands: the worst kept
    /// score once `limit` pairs are kept, −∞ before, +∞ when the list wants nothing. A
    /// list's final cut-off is never below it when later pairs only score higher.
    pub(crate) fn floor(&self) -> f32 {
        if self.limit == 0 {
            f32::INFINITY
        } else if self.heap.len() < self.limit {
            f32::NEG_INFINITY
        } else {
            self.bar
        }
    }

    /// An empty pick with the same filter and length.
    pub(crate) fn emptied(&self) -> TopPick<'a> {
        TopPick::new(self.filter, self.limit)
    }

    /// The picked pairs, best first.
    pub(crate) fn into_sorted(self) -> Vec<(DeclId, f32)> {
        self.heap
            .into_sorted_vec()
            .into_iter()
            .map(|Ranked(id, score)| (id, score))
            .collect()
    }
}

/// A scored declaration ordered best first: `a < b` when `a` ranks above `b` (higher
/// score, then smaller id), so a max-heap keeps the worst of its entries on top.
#[derive(Clone, Copy, Debug)]
struct Ranked(DeclId, f32);

impl PartialEq for Ranked {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == std::cmp::Ordering::Equal
    }
}

impl Eq for Ranked {}

impl PartialOrd for Ranked {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for Ranked {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        other.1.total_cmp(&self.1).then(self.0.cmp(&other.0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against a full sort of the same pairs (the definition of a top-k list): every
    /// length, with and without a filter, with ties.
    #[test]
    fn picks_what_a_full_sort_keeps() {
        let scores = [3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0, 5.0, 3.0, 5.0, 8.0];
        let pairs: Vec<(DeclId, f32)> = scores
            .iter()
            .enumerate()
            .map(|(i, &s)| (DeclId(i as u32), s))
            .collect();
        let mut odd = PremiseFilter::none(scores.len());
        for i in (1..scores.len()).step_by(2) {
            odd.insert(DeclId(i as u32));
        }
        for filter in [None, Some(&odd)] {
            let mut sorted: Vec<(DeclId, f32)> = pairs
                .iter()
                .copied()
                .filter(|(id, _)| filter.is_none_or(|f| f.contains(*id)))
                .collect();
            sorted.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
            for limit in 0..=scores.len() + 1 {
                let mut pick = TopPick::new(filter, limit);
                // Offered in reverse, so the order of arrival is not the answer's.
                for &(id, s) in pairs.iter().rev() {
                    pick.offer(id, s);
                }
                let want: Vec<(DeclId, f32)> = sorted.iter().copied().take(limit).collect();
                assert_eq!(pick.into_sorted(), want, "limit {limit}");
            }
        }
    }
}
