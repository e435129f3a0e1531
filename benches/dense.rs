//! The dense signal's speed: encoding a goal, exact and HNSW search over 20,000 premise
//! vectors of dimension 256, and one training epoch on synthetic ring-buffer and scheduler
//! lemmas. The HNSW build time and its recall@10 against the exact scan are printed once.
//! `hnsw/build/*` times building the graph over 20,000 vectors of dimension 64 (the size of
//! the Coq standard library at the dimension quarry builds with), one point at a time and
//! on rayon's threads, and prints each graph's recall@10 at ef_search 64.
//! Figures and the command are in the report and docs: `cargo bench --bench dense`.

use std::hint::black_box;
use std::time::Instant;

use criterion::{criterion_group, criterion_main, Criterion};
use quarry::dense::synthetic::{clustered_vectors_and_queries, ring_and_scheduler_task};
use quarry::dense::{
    recall_against_exact, train, Encoder, EncoderSettings, ExactIndex, HnswIndex, HnswParams,
    LearnedEncoder, TrainConfig,
};

const GOAL: &str = "∀ ( buf : ring α ) ( x : α ) , ¬ is_full buf → size ( ring_push buf x ) = \
                    succ ( size buf ) ∧ peek ( ring_push buf x ) = peek buf ∨ is_empty buf";

fn bench_encode(c: &mut Criterion) {
    let (data, _) = ring_and_scheduler_task(1, 2_000, 0, 0);
    let encoder = match LearnedEncoder::initial(EncoderSettings::default(), &data.premises) {
        Ok(e) => e,
        Err(e) => return eprintln!("skipping the encoding bench: {e}"),
    };
    let bytes = encoder.to_bytes();
    let mut group = c.benchmark_group("encoder bytes");
    group.sample_size(10);
    group.bench_function("load a 2^18 × 256 encoder from bytes (untrained)", |b| {
        b.iter(|| black_box(LearnedEncoder::from_bytes(black_box(&bytes)).is_ok()))
    });
    group.finish();
    let tokens: Vec<&str> = GOAL.split_whitespace().collect();
    c.bench_function(
        &format!(
            "encode goal ({} tokens, 2^18 buckets, dim 256)",
            tokens.len()
        ),
        |b| b.iter(|| black_box(encoder.encode_goal(black_box(&tokens)))),
    );
}

fn bench_search(c: &mut Criterion) {
    let (vectors, queries) = match clustered_vectors_and_queries(7, 20_000, 200, 256, 200, 0.9) {
        Ok(v) => v,
        Err(e) => return eprintln!("skipping the search bench: {e}"),
    };
    let queries: Vec<Vec<f32>> = queries.iter().map(<[f32]>::to_vec).collect();
    let exact = ExactIndex::new(vectors.clone());
    let started = Instant::now();
    let hnsw = match HnswIndex::build(vectors, HnswParams::default()) {
        Ok(h) => h,
        Err(e) => return eprintln!("skipping the search bench: {e}"),
    };
    let recall = recall_against_exact(&hnsw, &queries, 10);
    eprintln!(
        "HNSW over 20,000 × 256 (M 16, ef_construction 100, sequential): built in {:.1} s; recall@10 {:.4} (worst query {:.2}) at the default ef_search",
        started.elapsed().as_secs_f64(),
        recall.recall,
        recall.worst
    );
    let mut i = 0;
    c.bench_function("exact scan top-10, 20k × 256", |b| {
        b.iter(|| {
            i = (i + 1) % queries.len();
            black_box(exact.search(&queries[i], 10))
        })
    });
    c.bench_function("HNSW top-10, 20k × 256, default ef_search", |b| {
        b.iter(|| {
            i = (i + 1) % queries.len();
            black_box(hnsw.search(&queries[i], 10))
        })
    });
}

fn bench_build(c: &mut Criterion) {
    let (vectors, queries) = match clustered_vectors_and_queries(11, 20_000, 300, 64, 400, 0.9) {
        Ok(v) => v,
        Err(e) => return eprintln!("skipping the HNSW build bench: {e}"),
    };
    let queries: Vec<Vec<f32>> = queries.iter().map(<[f32]>::to_vec).collect();
    let mut group = c.benchmark_group("hnsw/build");
    group.sample_size(10);
    for (name, parallel_build) in [("sequential", false), ("parallel", true)] {
        let params = HnswParams {
            parallel_build,
            ..HnswParams::default()
        };
        match HnswIndex::build(vectors.clone(), params) {
            Ok(mut index) => {
                index.set_ef_search(64);
                let recall = recall_against_exact(&index, &queries, 10);
                eprintln!(
                    "HNSW build {name}, 20,000 × 64: recall@10 {:.4} at ef_search 64",
                    recall.recall
                );
            }
            Err(e) => return eprintln!("skipping the HNSW build bench: {e}"),
        }
        group.bench_function(format!("{name}/20k-x-64"), |b| {
            b.iter(|| {
                HnswIndex::build(black_box(vectors.clone()), params).expect("params built once")
            })
        });
    }
    group.finish();
}

fn bench_train(c: &mut Criterion) {
    let (data, _) = ring_and_scheduler_task(3, 1_000, 1_500, 0);
    let config = TrainConfig {
        encoder: EncoderSettings {
            buckets: 1 << 16,
            ..EncoderSettings::default()
        },
        epochs: 1,
        ..TrainConfig::default()
    };
    let mut group = c.benchmark_group("train");
    group.sample_size(10);
    group.bench_function(
        format!(
            "one epoch, {} pairs, 2^16 buckets, dim 256, batch 64 (includes initialisation)",
            data.pairs.len()
        ),
        |b| b.iter(|| black_box(train(&data, &config, None).map(|(e, r)| (e.dim(), r)))),
    );
    group.finish();
}

criterion_group!(dense, bench_encode, bench_search, bench_build, bench_train);
criterion_main!(dense);
