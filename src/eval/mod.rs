//! Evaluation on held-out proofs: how often the premises a proof really used come back.
//!
//! Takes an opened index, a split of the library's theorems and the systems to measure;
//! gives per-system metrics (recall@k, full recall@k, MRR, nDCG@10, latency) and the ranked
//! lists behind them (for TREC run files). Every signal is asked through the same
//! [`rank`](crate::retrieve::rank) the server calls; the baselines (popularity, random)
//! are computed here. It reads no source files.

pub mod metrics;
pub mod queries;
pub mod report;
pub mod split;
pub mod states;
pub mod trec;

use std::collections::BTreeMap;
use std::time::Instant;

use serde::Serialize;

use crate::dense::seeded::SplitMix64;
use crate::index::OpenIndex;
use crate::library::DeclId;
use crate::retrieve::accessible::accessible_premises;
use crate::retrieve::{rank, RankError, RankRequest, Signal, MAX_LIMIT};
use queries::EvalQuery;
use split::Split;

/// What is measured: one signal alone, or a baseline.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum System {
    /// One retrieval signal alone.
    Signal(Signal),
    /// Every signal, fused with the index's weights (what `rank` gives by default).
    Fusion,
    /// Premises ranked by how many training proofs use them.
    Popularity,
    /// Accessible premises in a seeded random order.
    Random,
}

impl System {
    /// The name used in reports and TREC run tags.
    pub fn name(&self) -> String {
        match self {
            System::Signal(s) => s.as_str().to_string(),
            System::Fusion => "fusion".into(),
            System::Popularity => "popularity".into(),
            System::Random => "random".into(),
        }
    }
}

/// One query's ranked list.
#[derive(Clone, Debug, PartialEq)]
pub struct QueryRun {
    /// The query's TREC id ([`EvalQuery::qid`]).
    pub qid: String,
    pub theorem: DeclId,
    /// Best first, with the system's scores.
    pub ranked: Vec<(DeclId, f32)>,
    pub latency_ms: f64,
}

/// Averages over the queries of one system.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct SystemMetrics {
    pub system: String,
    pub queries: usize,
    /// recall@k per k: found premises / all premises, averaged over queries.
    pub recall: BTreeMap<usize, f64>,
    /// full recall@k per k: the fraction of queries with every premise in the top k.
    pub full_recall: BTreeMap<usize, f64>,
    pub mrr: f64,
    pub ndcg_10: f64,
    pub latency_median_ms: f64,
    pub latency_p99_ms: f64,
}

/// Why an evaluation could not run.
#[derive(Debug, thiserror::Error)]
pub enum EvalError {
    #[error(transparent)]
    Split(#[from] split::SplitError),
    #[error("query for `{theorem}` failed: {source}")]
    Rank {
        theorem: String,
        #[source]
        source: RankError,
    },
    #[error("list depth {0} is out of range: 1 to {MAX_LIMIT}")]
    Depth(usize),
}

/// Runs `system` on every query, keeping `depth` premises per query.
pub fn run_system(
    index: &OpenIndex,
    queries: &[EvalQuery],
    system: System,
    split: &Split,
    depth: usize,
    seed: u64,
) -> Result<Vec<QueryRun>, EvalError> {
    if depth == 0 || depth > MAX_LIMIT {
        return Err(EvalError::Depth(depth));
    }
    let library = &index.library;
    let popularity: Vec<DeclId> = match system {
        System::Popularity => {
            let mut uses = vec![0u32; library.declarations.len()];
            for &t in &split.train {
                for p in library.graph.premises(t) {
                    uses[p.0 as usize] += 1;
                }
            }
            let mut order: Vec<DeclId> = library.declarations.iter().map(|d| d.id).collect();
            order.sort_by(|a, b| uses[b.0 as usize].cmp(&uses[a.0 as usize]).then(a.cmp(b)));
            order
        }
        _ => Vec::new(),
    };
    let rng = SplitMix64::new(seed);
    let mut runs = Vec::with_capacity(queries.len());
    for q in queries {
        let started = Instant::now();
        let ranked: Vec<(DeclId, f32)> = match system {
            System::Signal(_) | System::Fusion => {
                let request = RankRequest {
                    goal: q.goal.clone(),
                    limit: depth,
                    place: Some(q.place.clone()),
                    kinds: None,
                    signals: match system {
                        System::Signal(signal) => Some(vec![signal]),
                        _ => None,
                    },
                    all_goals: false,
                    explain: false,
                };
                match rank(index, &request) {
                    Ok(r) => r.premises.iter().map(|p| (p.id, p.score)).collect(),
                    // A statement with nothing to search for ranks nothing: it still counts.
                    Err(RankError::NoTerms) | Err(RankError::Goal(_)) => Vec::new(),
                    Err(source) => {
                        return Err(EvalError::Rank {
                            theorem: library.declaration(q.theorem).name.clone(),
                            source,
                        })
                    }
                }
            }
            System::Popularity => {
                let allowed = accessible_premises(library, Some(&q.place), None);
                popularity
                    .iter()
                    .filter(|&&d| allowed.contains(d))
                    .take(depth)
                    .enumerate()
                    .map(|(i, &d)| (d, (depth - i) as f32))
                    .collect()
            }
            System::Random => {
                let allowed = accessible_premises(library, Some(&q.place), None);
                let mut ids: Vec<DeclId> = library
                    .declarations
                    .iter()
                    .map(|d| d.id)
                    .filter(|&d| allowed.contains(d))
                    .collect();
                let mut r = rng.fork(q.theorem.0 as u64);
                let take = depth.min(ids.len());
                for i in 0..take {
                    let j = i + r.below(ids.len() - i);
                    ids.swap(i, j);
                }
                ids.truncate(take);
                ids.into_iter()
                    .enumerate()
                    .map(|(i, d)| (d, (depth - i) as f32))
                    .collect()
            }
        };
        runs.push(QueryRun {
            qid: q.qid.clone(),
            theorem: q.theorem,
            ranked,
            latency_ms: started.elapsed().as_secs_f64() * 1e3,
        });
    }
    Ok(runs)
}

/// The metrics of `runs` against the queries' answers, at the cut-offs `ks`.
pub fn summarise(
    name: &str,
    queries: &[EvalQuery],
    runs: &[QueryRun],
    ks: &[usize],
) -> SystemMetrics {
    let n = queries.len().max(1) as f64;
    let mut m = SystemMetrics {
        system: name.to_string(),
        queries: queries.len(),
        ..SystemMetrics::default()
    };
    let mut latencies = Vec::with_capacity(runs.len());
    for (q, r) in queries.iter().zip(runs) {
        let ranked: Vec<DeclId> = r.ranked.iter().map(|x| x.0).collect();
        for &k in ks {
            *m.recall.entry(k).or_default() += metrics::recall_at(&ranked, &q.relevant, k) / n;
            *m.full_recall.entry(k).or_default() +=
                metrics::full_recall_at(&ranked, &q.relevant, k) / n;
        }
        m.mrr += metrics::reciprocal_rank(&ranked, &q.relevant) / n;
        m.ndcg_10 += metrics::ndcg_at(&ranked, &q.relevant, 10) / n;
        latencies.push(r.latency_ms);
    }
    m.latency_median_ms = metrics::quantile(&latencies, 0.5);
    m.latency_p99_ms = metrics::quantile(&latencies, 0.99);
    m
}

/// The most validation queries the fusion is tuned on (an even spread of the validation
/// queries when there are more).
pub const TUNING_QUERIES: usize = 1_000;

/// Chooses the fusion weights of `index` on the theorems `validation` (never test
/// theorems), their statements as goals: see [`tune_fusion_on`].
pub fn tune_fusion(
    index: &OpenIndex,
    validation: &[DeclId],
) -> Result<crate::retrieve::fusion::FusionTuning, EvalError> {
    let queries = queries::statement_queries(&index.library, validation);
    tune_fusion_on(index, &queries)
}

/// Chooses the fusion weights of `index` on validation `queries` (never test queries; an
/// even spread of [`TUNING_QUERIES`] when there are more): each signal ranks every query
/// [`FUSION_DEPTH`](crate::retrieve::FUSION_DEPTH) deep through [`rank`], and
/// [`grid_search`](crate::retrieve::fusion::grid_search) picks the weights by recall@10.
/// Signals the index lacks (dense, built with `--dense off`) are left out.
pub fn tune_fusion_on(
    index: &OpenIndex,
    queries: &[EvalQuery],
) -> Result<crate::retrieve::fusion::FusionTuning, EvalError> {
    use crate::retrieve::fusion::{grid_search, TuningQuery};
    let step = queries.len().div_ceil(TUNING_QUERIES).max(1);
    let signals: Vec<Signal> = Signal::ALL
        .into_iter()
        .filter(|s| *s != Signal::Dense || index.dense.is_some())
        .collect();
    let mut tuning = Vec::with_capacity(queries.len() / step + 1);
    for q in queries.iter().step_by(step) {
        let mut lists = Vec::with_capacity(signals.len());
        for &signal in &signals {
            let request = RankRequest {
                goal: q.goal.clone(),
                limit: crate::retrieve::FUSION_DEPTH,
                place: Some(q.place.clone()),
                kinds: None,
                signals: Some(vec![signal]),
                all_goals: false,
                explain: false,
            };
            let list = match rank(index, &request) {
                Ok(r) => r.premises.iter().map(|p| p.id).collect(),
                Err(RankError::NoTerms) | Err(RankError::Goal(_)) => Vec::new(),
                Err(source) => {
                    return Err(EvalError::Rank {
                        theorem: index.library.declaration(q.theorem).name.clone(),
                        source,
                    })
                }
            };
            lists.push(list);
        }
        tuning.push(TuningQuery {
            lists,
            relevant: q.relevant.clone(),
        });
    }
    Ok(grid_search(&signals, &tuning, index.fusion.k))
}
