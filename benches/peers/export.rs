//! quarry's side of the side-by-side harness (`benches/peers/run.sh` runs it; the Python
//! peers read what it writes).
//!
//! Takes the Coq standard library (Debian's `libcoq-stdlib`) and an output folder; builds
//! quarry's index with 500 seeded held-out theorems taken out of every learning set, and
//! writes, so that every system sees identical text and vectors: each declaration's
//! premise tokens (quarry's lexical `text` field), each goal's distinct query terms, the
//! premise and goal vectors of quarry's learned encoder (raw little-endian `f32`), and the
//! goals as text. It then measures quarry on them in this run — BM25 indexing and queries
//! (one and two threads, top 10), HNSW build and queries at several beam widths, the fused
//! ranking of each goal — and writes the figures and the top-10 lists to `quarry.json`.
//!
//! A `harness = false` bench rather than an example: `cargo bench` builds it with the
//! release profile into `target/release`, beside the `quarry` binary it compares with, and
//! clippy's `--all-targets` keeps it clean. It never reads a figure from a previous run.

mod timing;

use std::collections::BTreeSet;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::time::Instant;

use quarry::dense::seeded::SplitMix64;
use quarry::dense::{Encoder, ExactIndex, HnswIndex, HnswParams, VectorSet};
use quarry::eval::queries::statement_goal;
use quarry::eval::tune_fusion;
use quarry::extract::{build_library, BuildOptions, CoqPrefix};
use quarry::index::dense::premise_tokens;
use quarry::index::lexical::{self, FieldBoosts};
use quarry::index::{build_index_with, tokenize_fn, BuildConfig, FusionChoice, OpenIndex};
use quarry::library::{DeclId, DeclKind, ProofEnding};
use quarry::query::{parse_goal, GoalSelection, QueryTerm};
use quarry::retrieve::{rank, RankRequest};
use serde_json::json;
use timing::{median, repeat_timed};

/// Goals compared, as the issue asks.
const GOALS: usize = 500;
/// Seed of the held-out goals.
const SEED: u64 = 7;
/// Beam widths of the HNSW comparison (M 16 and ef_construction 100, quarry's defaults).
const EF_SEARCH: [usize; 4] = [16, 32, 64, 128];

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let out = args
        .first()
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/peers/export"));
    let repeats: usize = args.get(1).and_then(|r| r.parse().ok()).unwrap_or(5).max(1);
    if let Err(e) = run(&out, repeats) {
        eprintln!("peers export: {e}");
        std::process::exit(1);
    }
}

fn write_json(path: &Path, value: &serde_json::Value) -> Result<(), String> {
    let text = serde_json::to_string(value).map_err(|e| e.to_string())?;
    std::fs::write(path, text).map_err(|e| format!("{}: {e}", path.display()))
}

fn write_f32(path: &Path, values: &[f32]) -> Result<(), String> {
    let mut f = std::io::BufWriter::new(
        std::fs::File::create(path).map_err(|e| format!("{}: {e}", path.display()))?,
    );
    for v in values {
        f.write_all(&v.to_le_bytes())
            .map_err(|e| format!("{}: {e}", path.display()))?;
    }
    f.flush().map_err(|e| format!("{}: {e}", path.display()))
}

fn run(out: &Path, repeats: usize) -> Result<(), String> {
    let stdlib = PathBuf::from("/usr/lib/ocaml/coq/theories");
    if !stdlib.is_dir() {
        return Err(format!(
            "{} is missing: apt-get install libcoq-stdlib",
            stdlib.display()
        ));
    }
    std::fs::create_dir_all(out).map_err(|e| format!("{}: {e}", out.display()))?;
    let opts = BuildOptions {
        roots: vec![stdlib.clone()],
        coq_prefixes: vec![CoqPrefix {
            logical: "Coq".into(),
            dir: stdlib,
        }],
        ..BuildOptions::default()
    };
    let library = build_library(&opts).map_err(|e| e.to_string())?;
    // Held-out goals: seeded theorems with a finished proof that uses a premise.
    let mut provable: Vec<DeclId> = library
        .declarations
        .iter()
        .filter(|d| {
            d.kind == DeclKind::Theorem
                && d.proof_ending != Some(ProofEnding::Admitted)
                && library.graph.proof_uses.degree(d.id) > 0
        })
        .map(|d| d.id)
        .collect();
    SplitMix64::new(SEED).shuffle(&mut provable);
    let mut goal_ids: Vec<DeclId> = Vec::new();
    let mut goal_texts: Vec<String> = Vec::new();
    for &id in &provable {
        if goal_ids.len() == GOALS {
            break;
        }
        let text = statement_goal(&library, id);
        if parse_goal(&text).is_ok() {
            goal_ids.push(id);
            goal_texts.push(text);
        }
    }
    let held: BTreeSet<DeclId> = goal_ids.iter().copied().collect();
    let training: Vec<DeclId> = provable
        .iter()
        .copied()
        .filter(|d| !held.contains(d))
        .collect();
    let index_dir = out.join("index");
    if index_dir.exists() {
        std::fs::remove_dir_all(&index_dir).map_err(|e| format!("{}: {e}", index_dir.display()))?;
    }
    let tuner = |index: &OpenIndex, validation: &[DeclId]| {
        tune_fusion(index, validation).map_err(|e| e.to_string())
    };
    let config = BuildConfig {
        training: Some(&training),
        fusion: FusionChoice::Tuned(&tuner),
        ..BuildConfig::default()
    };
    eprintln!(
        "peers: building quarry's index of {} declarations",
        library.declarations.len()
    );
    let started = Instant::now();
    build_index_with(&index_dir, &library, Default::default(), &config)
        .map_err(|e| e.to_string())?;
    let build_seconds = started.elapsed().as_secs_f64();
    let index = OpenIndex::open(&index_dir).map_err(|e| e.to_string())?;
    let dense = index.dense.as_ref().ok_or("the index has no dense part")?;

    // What every system sees.
    let corpus: Vec<Vec<String>> = library
        .declarations
        .iter()
        .map(|d| premise_tokens(&library, &index.tokenizer, d.id))
        .collect();
    let mut goal_terms: Vec<Vec<QueryTerm>> = Vec::new();
    for text in &goal_texts {
        let goal = parse_goal(text).map_err(|e| e.to_string())?;
        goal_terms.push(goal.query_terms(&index.tokenizer, GoalSelection::First));
    }
    // BM25 peers take each query term once, unweighted: so does quarry's side here.
    let bm25_queries: Vec<Vec<QueryTerm>> = goal_terms
        .iter()
        .map(|terms| {
            let distinct: BTreeSet<&str> = terms.iter().map(|t| t.text.as_str()).collect();
            distinct
                .into_iter()
                .map(|t| QueryTerm {
                    text: t.to_string(),
                    weight: 1.0,
                })
                .collect()
        })
        .collect();
    let goal_vectors: Vec<f32> = goal_terms
        .iter()
        .flat_map(|terms| {
            let tokens: Vec<&str> = terms.iter().map(|t| t.text.as_str()).collect();
            dense.encoder.encode_goal(&tokens)
        })
        .collect();
    let premises = dense.vectors.vectors().clone();
    let dim = premises.dim();
    write_json(&out.join("corpus_tokens.json"), &json!(corpus))?;
    let query_tokens: Vec<Vec<&str>> = bm25_queries
        .iter()
        .map(|q| q.iter().map(|t| t.text.as_str()).collect())
        .collect();
    write_json(&out.join("goal_tokens.json"), &json!(query_tokens))?;
    write_json(&out.join("goals.json"), &json!(goal_texts))?;
    write_f32(&out.join("premise_vectors.f32"), premises.as_flat())?;
    write_f32(&out.join("goal_vectors.f32"), &goal_vectors)?;

    // BM25: quarry's lexical index on the `text` field alone (textbook single-field BM25).
    let text_only = FieldBoosts::text_only();
    let tokenize = tokenize_fn(index.tokenizer.clone());
    let build_dir = tempfile::tempdir().map_err(|e| e.to_string())?;
    let mut bm25_build = Vec::new();
    for r in 0..repeats {
        let dir = build_dir.path().join(format!("lexical-{r}"));
        // Indexing is done when a query can be answered: tantivy's index written, opened,
        // and the impact table of the query's boosts computed.
        let started = Instant::now();
        lexical::build(&library, tokenize.clone(), &dir).map_err(|e| e.to_string())?;
        let built = lexical::LexicalIndex::open(&dir, tokenize.clone(), library.declarations.len())
            .map_err(|e| e.to_string())?;
        built.prepare(&text_only).map_err(|e| e.to_string())?;
        bm25_build.push(started.elapsed().as_secs_f64());
    }
    let search = |q: &[QueryTerm]| -> Vec<u32> {
        index
            .lexical
            .search(q, &text_only, None, 10)
            .map(|hits| hits.into_iter().map(|h| h.0 .0).collect())
            .unwrap_or_default()
    };
    let bm25_top10: Vec<Vec<u32>> = bm25_queries.iter().map(|q| search(q)).collect();
    let bm25_one = repeat_timed(repeats, || {
        for q in &bm25_queries {
            std::hint::black_box(search(q));
        }
    });
    let bm25_two = repeat_timed(repeats, || {
        let (a, b) = bm25_queries.split_at(bm25_queries.len() / 2);
        std::thread::scope(|s| {
            for half in [a, b] {
                s.spawn(move || {
                    for q in half {
                        std::hint::black_box(search(q));
                    }
                });
            }
        });
    });

    // HNSW on the same vectors, quarry's defaults (M 16, ef_construction 100).
    let hnsw = hnsw_figures(&premises, &goal_vectors, dim, repeats)?;

    // The fused ranking of each goal, all signals, as the server runs it.
    let fused_rank = |text: &String| -> Vec<u32> {
        let mut request = RankRequest::new(text.clone());
        request.limit = 10;
        rank(&index, &request)
            .map(|r| r.premises.into_iter().map(|p| p.id.0).collect())
            .unwrap_or_default()
    };
    let fused_top10: Vec<Vec<u32>> = goal_texts.iter().map(fused_rank).collect();
    let fused_runs = repeat_timed(repeats, || {
        for g in &goal_texts {
            std::hint::black_box(fused_rank(g));
        }
    });
    let mut per_goal_ms = Vec::with_capacity(goal_texts.len());
    for g in &goal_texts {
        let started = Instant::now();
        std::hint::black_box(fused_rank(g));
        per_goal_ms.push(started.elapsed().as_secs_f64() * 1000.0);
    }
    let n = goal_texts.len() as f64;
    let figures = json!({
        "declarations": library.declarations.len(),
        "goals": goal_texts.len(),
        "goal_ids": goal_ids.iter().map(|d| d.0).collect::<Vec<_>>(),
        "dim": dim,
        "repeats": repeats,
        "index_build_seconds": build_seconds,
        "fusion": { "k": index.fusion.k, "weights": index.fusion.weights },
        "bm25": {
            "index_seconds": median(&bm25_build),
            "index_seconds_runs": bm25_build,
            "qps_1_thread": n / median(&bm25_one),
            "qps_2_threads": n / median(&bm25_two),
            "runs_1_thread_seconds": bm25_one,
            "runs_2_threads_seconds": bm25_two,
            "k1": 1.2, "b": 0.75,
            "top10": bm25_top10,
        },
        "hnsw": hnsw,
        "fused": {
            "ms_per_goal": 1000.0 * median(&fused_runs) / n,
            "runs_seconds": fused_runs,
            "median_ms": timing::quantile(&per_goal_ms, 0.5),
            "p99_ms": timing::quantile(&per_goal_ms, 0.99),
            "top10": fused_top10,
        },
    });
    write_json(&out.join("quarry.json"), &figures)?;
    eprintln!("peers: wrote {}", out.display());
    Ok(())
}

/// Build time (sequential and parallel insertion), queries per second on one thread and
/// top-10 lists per beam width of quarry's HNSW, and the exact scan's queries per second.
fn hnsw_figures(
    premises: &VectorSet,
    goals: &[f32],
    dim: usize,
    repeats: usize,
) -> Result<serde_json::Value, String> {
    let queries: Vec<&[f32]> = goals.chunks_exact(dim).collect();
    let n = queries.len() as f64;
    let mut built = None;
    let mut sequential = Vec::new();
    // A sequential build of 20k vectors takes seconds: three builds make the median.
    for _ in 0..repeats.min(3) {
        let started = Instant::now();
        let index =
            HnswIndex::build(premises.clone(), HnswParams::default()).map_err(|e| e.to_string())?;
        sequential.push(started.elapsed().as_secs_f64());
        built = Some(index);
    }
    let mut parallel = Vec::new();
    for _ in 0..repeats.min(3) {
        let started = Instant::now();
        let params = HnswParams {
            parallel_build: true,
            ..HnswParams::default()
        };
        std::hint::black_box(
            HnswIndex::build(premises.clone(), params).map_err(|e| e.to_string())?,
        );
        parallel.push(started.elapsed().as_secs_f64());
    }
    let mut index = built.ok_or("no HNSW build ran")?;
    let mut by_ef = Vec::new();
    for ef in EF_SEARCH {
        index.set_ef_search(ef);
        let top10: Vec<Vec<u32>> = queries
            .iter()
            .map(|q| index.search(q, 10).into_iter().map(|h| h.0).collect())
            .collect();
        let runs = repeat_timed(repeats, || {
            for q in &queries {
                std::hint::black_box(index.search(q, 10));
            }
        });
        by_ef.push(json!({
            "ef_search": ef,
            "qps_1_thread": n / median(&runs),
            "runs_seconds": runs,
            "top10": top10,
        }));
    }
    let exact = ExactIndex::new(premises.clone());
    let exact_runs = repeat_timed(repeats, || {
        for q in &queries {
            std::hint::black_box(exact.search(q, 10));
        }
    });
    let defaults = HnswParams::default();
    Ok(json!({
        "m": defaults.m,
        "ef_construction": defaults.ef_construction,
        "build_seconds_sequential": median(&sequential),
        "build_seconds_parallel": median(&parallel),
        "build_runs_sequential": sequential,
        "build_runs_parallel": parallel,
        "threads_parallel": rayon::current_num_threads(),
        "by_ef_search": by_ef,
        "exact_qps_1_thread": n / median(&exact_runs),
    }))
}
