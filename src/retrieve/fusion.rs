//! Reciprocal rank fusion: one ranking from several signals' rankings, and the choice of
//! its weights on held-out proofs.
//!
//! Takes each signal's ranked list and its weight; gives one list ordered by
//! score(d) = Σ_s w_s / (k + rank_s(d)) (Cormack, Clarke & Büttcher, "Reciprocal rank fusion
//! outperforms Condorcet and individual rank learning methods", SIGIR 2009; k = 60 there).
//! [`grid_search`] picks the weights on validation lists by recall@10 and falls back to the
//! best single signal when no weighting beats it. It looks only at ranks, never at the
//! signals' raw scores, which are not comparable; it runs no signal itself.

use std::collections::HashSet;

use serde::{Deserialize, Serialize};

use crate::library::DeclId;
use crate::retrieve::Signal;

/// The constant `k` of the paper.
pub const DEFAULT_K: f32 = 60.0;

/// The cut-off the weights must not lose at: the fused recall@10 must beat the best
/// single signal's.
pub const TUNED_AT: usize = 10;
/// The deep cut-off the weights are also chosen for: among weightings that beat the best
/// signal at recall@10, the one with the largest recall@10 + recall@100 wins (a weighting
/// tuned for recall@10 alone lets one signal fill the whole top 100).
pub const DEEP_AT: usize = 100;

/// The weights tried for each signal by [`grid_search`].
pub const WEIGHT_GRID: [f32; 6] = [0.0, 0.25, 0.5, 1.0, 2.0, 4.0];

/// The parameters of the fusion.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FusionWeights {
    pub k: f32,
    /// Weight per signal name; a signal without a weight counts 1.
    pub weights: Vec<(String, f32)>,
}

impl Default for FusionWeights {
    fn default() -> FusionWeights {
        FusionWeights {
            k: DEFAULT_K,
            weights: Vec::new(),
        }
    }
}

impl FusionWeights {
    /// The weight of signal `name`.
    pub fn weight(&self, name: &str) -> f32 {
        self.weights
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, w)| *w)
            .unwrap_or(1.0)
    }
}

/// Fuses `lists` (each best first, with its weight); returns (id, fused score), best first,
/// ties broken by the smaller id so the order never depends on hashing.
///
/// The contributions are gathered in list order and summed after a stable sort by id, so
/// each id's terms add up in the same order as a running sum per id would (the same bits);
/// a hash map of the ids cost 4.5 % of a fused ranking in the profile of
/// docs/performance.md ("Where a fused ranking's time goes").
pub fn reciprocal_rank_fusion(lists: &[(&[DeclId], f32)], k: f32) -> Vec<(DeclId, f32)> {
    let mut terms: Vec<(DeclId, f32)> = Vec::with_capacity(lists.iter().map(|l| l.0.len()).sum());
    for (list, weight) in lists {
        if *weight <= 0.0 {
            continue;
        }
        terms.extend(
            list.iter()
                .enumerate()
                .map(|(i, id)| (*id, weight / (k + i as f32 + 1.0))),
        );
    }
    terms.sort_by_key(|t| t.0);
    let mut out: Vec<(DeclId, f32)> = Vec::with_capacity(terms.len());
    for (id, term) in terms {
        match out.last_mut() {
            Some(last) if last.0 == id => last.1 += term,
            _ => out.push((id, term)),
        }
    }
    out.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    out
}

/// One validation query for [`grid_search`]: each signal's list (in the order of the
/// signals given) and the premises its proof really used.
#[derive(Clone, Debug, Default)]
pub struct TuningQuery {
    pub lists: Vec<Vec<DeclId>>,
    pub relevant: Vec<DeclId>,
}

/// What [`grid_search`] chose and why.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct FusionTuning {
    /// The weights chosen.
    pub weights: FusionWeights,
    /// How many validation queries they were chosen on.
    pub queries: usize,
    /// Recall@10 of each signal alone on those queries.
    pub signal_recall: Vec<(String, f64)>,
    /// Recall@10 of the fusion with the chosen weights.
    pub fused_recall: f64,
    /// Recall@100 of each signal alone on those queries.
    #[serde(default)]
    pub signal_recall_100: Vec<(String, f64)>,
    /// Recall@100 of the fusion with the chosen weights.
    #[serde(default)]
    pub fused_recall_100: f64,
    /// True when no weighting beat the best signal and the weights reproduce it alone.
    pub fell_back: bool,
}

/// Found premises / all premises in the first `k` (0 when there are none to find).
fn recall_at(ranked: &[DeclId], relevant: &HashSet<DeclId>, k: usize) -> f64 {
    if relevant.is_empty() {
        return 0.0;
    }
    let found = ranked
        .iter()
        .take(k)
        .filter(|d| relevant.contains(d))
        .count();
    found as f64 / relevant.len() as f64
}

/// Mean (recall@10, recall@100) of the fusion with `weights`.
fn mean_recall(
    queries: &[TuningQuery],
    relevant: &[HashSet<DeclId>],
    weights: &[f32],
    k: f32,
) -> (f64, f64) {
    let n = queries.len().max(1) as f64;
    queries
        .iter()
        .zip(relevant)
        .map(|(q, rel)| {
            let lists: Vec<(&[DeclId], f32)> = q
                .lists
                .iter()
                .zip(weights)
                .map(|(l, &w)| (l.as_slice(), w))
                .collect();
            let fused: Vec<DeclId> = reciprocal_rank_fusion(&lists, k)
                .into_iter()
                .take(DEEP_AT)
                .map(|f| f.0)
                .collect();
            (
                recall_at(&fused, rel, TUNED_AT),
                recall_at(&fused, rel, DEEP_AT),
            )
        })
        .fold((0.0, 0.0), |acc, r| (acc.0 + r.0 / n, acc.1 + r.1 / n))
}

/// Every weighting of `signals` over [`WEIGHT_GRID`] that uses two signals or more, tried
/// on `queries`: among those whose fused recall@10 beats the best single signal's
/// strictly, the largest recall@10 + recall@100 wins, ties going to the earlier weighting.
/// When none beats it, the weights are 1 for that signal and 0 for the others
/// (`fell_back`).
pub fn grid_search(signals: &[Signal], queries: &[TuningQuery], k: f32) -> FusionTuning {
    let relevant: Vec<HashSet<DeclId>> = queries
        .iter()
        .map(|q| q.relevant.iter().copied().collect())
        .collect();
    let n = queries.len().max(1) as f64;
    let single = |at: usize| -> Vec<(String, f64)> {
        signals
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let r = queries
                    .iter()
                    .zip(&relevant)
                    .map(|(q, rel)| q.lists.get(i).map_or(0.0, |l| recall_at(l, rel, at)))
                    .sum::<f64>()
                    / n;
                (s.as_str().to_string(), r)
            })
            .collect()
    };
    let signal_recall = single(TUNED_AT);
    let signal_recall_100 = single(DEEP_AT);
    let (best_signal, best_single) =
        signal_recall
            .iter()
            .enumerate()
            .fold((0, f64::NEG_INFINITY), |acc, (i, (_, r))| {
                if *r > acc.1 {
                    (i, *r)
                } else {
                    acc
                }
            });
    let mut best: Option<((f64, f64), Vec<f32>)> = None;
    let mut weights = vec![0usize; signals.len()];
    loop {
        let w: Vec<f32> = weights.iter().map(|&i| WEIGHT_GRID[i]).collect();
        // Only weightings that use at least two signals are fusions.
        if w.iter().filter(|&&x| x > 0.0).count() >= 2 {
            let r = mean_recall(queries, &relevant, &w, k);
            let better = best.as_ref().is_none_or(|b| r.0 + r.1 > b.0 .0 + b.0 .1);
            if r.0 > best_single && better {
                best = Some((r, w));
            }
        }
        // Next weighting, odometer order.
        let mut pos = 0;
        while let Some(slot) = weights.get_mut(pos) {
            *slot += 1;
            if *slot < WEIGHT_GRID.len() {
                break;
            }
            *slot = 0;
            pos += 1;
        }
        if pos >= signals.len() {
            break;
        }
    }
    let named = |w: &[f32]| FusionWeights {
        k,
        weights: signals
            .iter()
            .zip(w)
            .map(|(s, &x)| (s.as_str().to_string(), x))
            .collect(),
    };
    match best {
        Some((r, w)) => FusionTuning {
            weights: named(&w),
            queries: queries.len(),
            signal_recall,
            fused_recall: r.0,
            signal_recall_100,
            fused_recall_100: r.1,
            fell_back: false,
        },
        _ => {
            let w: Vec<f32> = (0..signals.len())
                .map(|i| if i == best_signal { 1.0 } else { 0.0 })
                .collect();
            let fused_recall_100 = signal_recall_100.get(best_signal).map_or(0.0, |r| r.1);
            FusionTuning {
                weights: named(&w),
                queries: queries.len(),
                signal_recall,
                fused_recall: best_single.max(0.0),
                signal_recall_100,
                fused_recall_100,
                fell_back: true,
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Worked by hand with k = 60: signal A ranks [x, y, z] with weight 1, signal B ranks
    /// [y, w] with weight 0.5.
    ///   x: 1/61                 = 0.016393
    ///   y: 1/62 + 0.5/61        = 0.016129 + 0.008197 = 0.024326
    ///   z: 1/63                 = 0.015873
    ///   w: 0.5/62               = 0.008065
    /// so the fused order is y, x, z, w. (The formula: Cormack et al., SIGIR 2009.)
    #[test]
    fn fusion_matches_the_hand_worked_example() {
        let (x, y, z, w) = (DeclId(1), DeclId(2), DeclId(3), DeclId(4));
        let a = [x, y, z];
        let b = [y, w];
        let fused = reciprocal_rank_fusion(&[(&a, 1.0), (&b, 0.5)], 60.0);
        let order: Vec<DeclId> = fused.iter().map(|f| f.0).collect();
        assert_eq!(order, vec![y, x, z, w]);
        let expect = [0.024326, 0.016393, 0.015873, 0.008065];
        for (f, e) in fused.iter().zip(expect) {
            assert!((f.1 - e).abs() < 1e-6, "{} vs {e}", f.1);
        }
    }

    #[test]
    fn zero_weight_signals_are_ignored_and_ties_break_by_id() {
        let a = [DeclId(5), DeclId(3)];
        let b = [DeclId(3), DeclId(5)];
        let fused = reciprocal_rank_fusion(&[(&a, 1.0), (&b, 1.0)], 60.0);
        assert_eq!(fused[0].0, DeclId(3));
        let only_a = reciprocal_rank_fusion(&[(&a, 1.0), (&b, 0.0)], 60.0);
        assert_eq!(only_a[0].0, DeclId(5));
    }

    /// The sort-then-sum above against a running sum per id in a map (the textbook way of
    /// writing the formula): the same ids, order and bits, on lists that share ids.
    #[test]
    fn sorted_sums_are_the_running_sums() {
        let a: Vec<DeclId> = (0..300u32).map(|i| DeclId(i * 7 % 211)).collect();
        let b: Vec<DeclId> = (0..150u32).map(|i| DeclId(i * 13 % 173)).collect();
        let c: Vec<DeclId> = (0..90u32).map(|i| DeclId(i * 3 % 97)).collect();
        let lists = [(&a[..], 0.25f32), (&b[..], 0.5), (&c[..], 1.0)];
        let mut running: std::collections::BTreeMap<DeclId, f32> = Default::default();
        for (list, w) in lists {
            for (i, id) in list.iter().enumerate() {
                *running.entry(*id).or_default() += w / (60.0 + i as f32 + 1.0);
            }
        }
        let mut expect: Vec<(DeclId, f32)> = running.into_iter().collect();
        expect.sort_by(|x, y| y.1.total_cmp(&x.1).then(x.0.cmp(&y.0)));
        let fused = reciprocal_rank_fusion(&lists, 60.0);
        assert_eq!(fused.len(), expect.len());
        for (f, e) in fused.iter().zip(&expect) {
            assert_eq!((f.0, f.1.to_bits()), (e.0, e.1.to_bits()));
        }
    }

    fn ids(xs: &[u32]) -> Vec<DeclId> {
        xs.iter().map(|&x| DeclId(x)).collect()
    }

    /// Two signals that each find a different half of the answers: any fusion with both
    /// finds more in the top 10 than either alone, so the search must not fall back.
    #[test]
    fn grid_search_prefers_a_fusion_that_beats_both_signals() {
        let q = TuningQuery {
            lists: vec![
                ids(&[1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12]),
                ids(&[21, 22, 23, 24, 25, 26, 27, 28, 29, 30, 11, 12]),
            ],
            relevant: ids(&[11, 12]),
        };
        let t = grid_search(&[Signal::Lexical, Signal::Dense], &[q], DEFAULT_K);
        assert!(!t.fell_back);
        assert_eq!(t.signal_recall[0].1, 0.0);
        assert!(t.fused_recall > 0.99, "{}", t.fused_recall);
    }

    /// The second signal only adds noise ahead of the first one's answers: no weighting
    /// beats the first signal, so the weights reproduce it.
    #[test]
    fn grid_search_falls_back_to_the_best_signal() {
        let q = TuningQuery {
            lists: vec![ids(&[1, 2, 3]), ids(&[7, 8, 9, 10, 11, 12, 13, 14, 15, 16])],
            relevant: ids(&[1, 2, 3]),
        };
        let t = grid_search(&[Signal::Lexical, Signal::Dense], &[q], DEFAULT_K);
        assert!(t.fell_back);
        assert_eq!(t.weights.weight("lexical"), 1.0);
        assert_eq!(t.weights.weight("dense"), 0.0);
        assert_eq!(t.fused_recall, 1.0);
    }
}
