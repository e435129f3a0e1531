//! How closely HNSW finds what the exact scan finds: recall@k against the exact top k.
//!
//! Takes a built [`HnswIndex`] and query vectors (synthetic ones in the unit test; the
//! encoded goals of a real library, such as Coq's standard library, when called from an
//! evaluation); gives the mean share of each query's exact top k that HNSW returns. It
//! does not say whether either list is relevant to the goal: that is evaluation's job.

use rayon::prelude::*;

use super::exact::ExactIndex;
use super::hnsw::HnswIndex;

/// HNSW's recall against the exact scan.
#[derive(Clone, Debug, PartialEq)]
pub struct RecallReport {
    /// The k of recall@k.
    pub k: usize,
    /// Queries measured.
    pub queries: usize,
    /// Mean over queries of |HNSW top k ∩ exact top k| / |exact top k|.
    pub recall: f64,
    /// The lowest single query's recall.
    pub worst: f64,
}

/// Recall@k of `index` against an exact scan of its own vectors, over `queries`.
pub fn recall_against_exact(index: &HnswIndex, queries: &[Vec<f32>], k: usize) -> RecallReport {
    let exact = ExactIndex::new(index.vectors().clone());
    let per_query: Vec<f64> = queries
        .par_iter()
        .map(|q| {
            let truth: Vec<u32> = exact.search(q, k).into_iter().map(|h| h.0).collect();
            if truth.is_empty() {
                return 1.0;
            }
            let found = index.search(q, k);
            let hits = found.iter().filter(|h| truth.contains(&h.0)).count();
            hits as f64 / truth.len() as f64
        })
        .collect();
    let n = per_query.len();
    RecallReport {
        k,
        queries: n,
        recall: if n == 0 {
            1.0
        } else {
            per_query.iter().sum::<f64>() / n as f64
        },
        worst: per_query.iter().copied().fold(1.0, f64::min),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dense::hnsw::HnswParams;
    use crate::dense::synthetic::clustered_vectors_and_queries;

    /// recall@10 ≥ 0.98 at the default parameters: the target of the brief, in line with
    /// what the HNSW paper reports for M = 16 and a beam of ~100 on data sets of this
    /// size (from memory). Seeded clustered vectors; queries are fresh draws from the
    /// same clusters, not indexed points.
    #[test]
    fn hnsw_recall_at_10_against_exact() {
        let (vectors, queries) =
            clustered_vectors_and_queries(21, 3_000, 200, 32, 30, 0.9).expect("valid vectors");
        let index = HnswIndex::build(vectors, HnswParams::default()).expect("valid params");
        let queries: Vec<Vec<f32>> = queries.iter().map(<[f32]>::to_vec).collect();
        let report = recall_against_exact(&index, &queries, 10);
        assert_eq!(report.queries, 200);
        assert!(report.recall >= 0.98, "recall@10 {report:?}");
    }
}
