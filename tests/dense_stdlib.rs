//! The vector search on the Coq standard library's own vectors: HNSW at its default
//! parameters against an exact scan of the same vectors.
//!
//! The vectors are quarry's learned encoder's, over every declaration of the Coq standard
//! library (Debian's `libcoq-stdlib`, fetched by the test setup under `CI=true`), after a
//! short training run on the library's own proofs (one epoch of 8,000 statement → premise
//! pairs: enough to move the vectors off their initial hashed-feature layout, short enough
//! for a debug build; a full build trains five epochs on all pairs). The queries are the
//! goal-side vectors of 500 theorem statements, every k-th theorem, so they are real goals,
//! not indexed points.

mod support;

use quarry::dense::{
    recall_against_exact, token_refs, train, Encoder, HnswIndex, HnswParams, TrainConfig,
    TrainingData, TrainingPair, VectorSet,
};
use quarry::extract::build_library;
use quarry::index::dense::{build_encoder_settings, goal_tokens, premise_tokens};
use quarry::index::library_tokenizer;
use support::debian::{coq_stdlib, stdlib_options};

/// recall@10 ≥ 0.98 at the default parameters (M 16, ef_construction 100, ef_search 200):
/// the target the dense issue sets, in line with what the HNSW paper (Malkov & Yashunin,
/// TPAMI 2020) reports for M = 16 and a beam of about 100 at this size (from memory).
#[test]
fn hnsw_finds_what_the_exact_scan_finds_on_the_stdlib_vectors() {
    let Some(theories) = coq_stdlib() else {
        return;
    };
    let library = build_library(&stdlib_options(&theories))
        .unwrap_or_else(|e| panic!("the Coq stdlib at `{}`: {e}", theories.display()));
    let tokenizer = library_tokenizer(&library);

    let mut data = TrainingData {
        premises: library
            .declarations
            .iter()
            .map(|d| premise_tokens(&library, &tokenizer, d.id))
            .collect(),
        ..TrainingData::default()
    };
    let mut theorems = Vec::new();
    for d in &library.declarations {
        let used: Vec<_> = library.graph.premises(d.id).collect();
        let tokens = goal_tokens(&library, &tokenizer, d.id);
        if used.is_empty() || tokens.is_empty() {
            continue;
        }
        let goal = data.goals.len() as u32;
        data.goals.push(tokens);
        theorems.push(goal);
        for p in used {
            data.pairs.push(TrainingPair { goal, premise: p.0 });
        }
    }
    assert!(
        library.declarations.len() > 15_000 && theorems.len() > 5_000,
        "the stdlib read as {} declarations, {} theorems with proofs",
        library.declarations.len(),
        theorems.len()
    );
    let config = TrainConfig {
        encoder: build_encoder_settings(42),
        epochs: 1,
        pairs_per_epoch: Some(8_000),
        seed: 42,
        ..TrainConfig::default()
    };
    let (encoder, report) = train(&data, &config, None).expect("the stdlib's pairs train");
    assert_eq!(report.epochs.len(), 1);

    let rows: Vec<Vec<f32>> = data
        .premises
        .iter()
        .map(|p| encoder.encode_premise_tokens(p))
        .collect();
    let vectors = VectorSet::from_rows(encoder.dim(), &rows).expect("unit rows");
    let index = HnswIndex::build(vectors, HnswParams::default()).expect("default params");
    let step = (theorems.len() / 500).max(1);
    let queries: Vec<Vec<f32>> = theorems
        .iter()
        .step_by(step)
        .take(500)
        .map(|&g| encoder.encode_goal(&token_refs(&data.goals[g as usize])))
        .collect();
    let recall = recall_against_exact(&index, &queries, 10);
    eprintln!(
        "stdlib: {} vectors, {} queries: HNSW recall@10 {:.4} (worst query {:.2})",
        rows.len(),
        recall.queries,
        recall.recall,
        recall.worst
    );
    assert_eq!(recall.queries, 500);
    assert!(recall.recall >= 0.98, "recall@10 {recall:?}");
}
