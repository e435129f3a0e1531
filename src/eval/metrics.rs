//! Retrieval metrics for one ranked list against the premises a proof really used.
//!
//! Takes a ranked list of declaration ids and the set of relevant ones; gives recall@k,
//! full recall@k, reciprocal rank and nDCG@k with binary gains — the definitions trec_eval
//! uses (`recall_k`, `recip_rank`, `ndcg_cut_k`), so figures can be checked with it.

use crate::library::DeclId;

/// recall@k: the fraction of the relevant premises found in the first `k` (trec_eval
/// `recall_k`). 0 when nothing is relevant.
pub fn recall_at(ranked: &[DeclId], relevant: &[DeclId], k: usize) -> f64 {
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

/// Full recall@k: 1 when every relevant premise is in the first `k`, else 0.
pub fn full_recall_at(ranked: &[DeclId], relevant: &[DeclId], k: usize) -> f64 {
    let top = &ranked[..k.min(ranked.len())];
    if !relevant.is_empty() && relevant.iter().all(|r| top.contains(r)) {
        1.0
    } else {
        0.0
    }
}

/// Reciprocal rank of the first relevant premise in the whole list (trec_eval `recip_rank`).
pub fn reciprocal_rank(ranked: &[DeclId], relevant: &[DeclId]) -> f64 {
    ranked
        .iter()
        .position(|d| relevant.contains(d))
        .map(|i| 1.0 / (i as f64 + 1.0))
        .unwrap_or(0.0)
}

/// nDCG@k with gain 1 for a relevant premise and discount log2(rank + 1) (Järvelin &
/// Kekäläinen, "Cumulated gain-based evaluation of IR techniques", TOIS 2002; trec_eval
/// `ndcg_cut_k`).
pub fn ndcg_at(ranked: &[DeclId], relevant: &[DeclId], k: usize) -> f64 {
    let dcg: f64 = ranked
        .iter()
        .take(k)
        .enumerate()
        .filter(|(_, d)| relevant.contains(d))
        .map(|(i, _)| 1.0 / (i as f64 + 2.0).log2())
        .sum();
    let ideal: f64 = (0..relevant.len().min(k))
        .map(|i| 1.0 / (i as f64 + 2.0).log2())
        .sum();
    if ideal == 0.0 {
        0.0
    } else {
        dcg / ideal
    }
}

/// The value at quantile `q` (0..=1) of `values`, by the nearest-rank method.
pub fn quantile(values: &[f64], q: f64) -> f64 {
    if values.is_empty() {
        return 0.0;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let rank = ((q * v.len() as f64).ceil() as usize).clamp(1, v.len());
    v[rank - 1]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids(v: &[u32]) -> Vec<DeclId> {
        v.iter().map(|&i| DeclId(i)).collect()
    }

    /// Worked by hand: ranked [5, 1, 7, 2], relevant {1, 2, 9}.
    /// recall@2 = 1/3, recall@4 = 2/3; full recall@4 = 0; first relevant at rank 2: RR = 0.5;
    /// DCG@4 = 1/log2(3) + 1/log2(5) = 0.630930 + 0.430677 = 1.061606;
    /// IDCG@4 = 1 + 1/log2(3) + 1/log2(4) = 1 + 0.630930 + 0.5 = 2.130930; nDCG@4 = 0.498189.
    #[test]
    fn metrics_match_the_hand_worked_example() {
        let ranked = ids(&[5, 1, 7, 2]);
        let rel = ids(&[1, 2, 9]);
        assert!((recall_at(&ranked, &rel, 2) - 1.0 / 3.0).abs() < 1e-12);
        assert!((recall_at(&ranked, &rel, 4) - 2.0 / 3.0).abs() < 1e-12);
        assert_eq!(full_recall_at(&ranked, &rel, 4), 0.0);
        assert_eq!(full_recall_at(&ranked, &ids(&[1, 2]), 4), 1.0);
        assert_eq!(reciprocal_rank(&ranked, &rel), 0.5);
        assert!((ndcg_at(&ranked, &rel, 4) - 0.498189).abs() < 1e-6);
        assert_eq!(reciprocal_rank(&ranked, &ids(&[42])), 0.0);
        assert_eq!(recall_at(&ranked, &[], 10), 0.0);
    }

    #[test]
    fn quantiles_by_nearest_rank() {
        let v = [5.0, 1.0, 3.0, 2.0, 4.0];
        assert_eq!(quantile(&v, 0.5), 3.0);
        assert_eq!(quantile(&v, 0.99), 5.0);
        assert_eq!(quantile(&v, 0.0), 1.0);
        assert_eq!(quantile(&[], 0.5), 0.0);
    }
}
