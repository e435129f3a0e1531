//! Extraction throughput: the whole library model built from sources (read, extract, resolve).
//!
//! Runs on the Coq standard library when Debian's `libcoq-stdlib` is installed
//! (`/usr/lib/ocaml/coq/theories`), else on the bundled demo library. Figures and the command
//! are in docs/performance.md: `cargo bench --bench extract`.

use std::path::PathBuf;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use quarry::extract::{build_library, BuildOptions, CoqPrefix};

fn library_under_test() -> (String, BuildOptions) {
    let stdlib = PathBuf::from("/usr/lib/ocaml/coq/theories");
    if stdlib.is_dir() {
        let opts = BuildOptions {
            roots: vec![stdlib.clone()],
            coq_prefixes: vec![CoqPrefix {
                logical: "Coq".into(),
                dir: stdlib,
            }],
            threads: None,
            progress: false,
        };
        ("coq-stdlib".into(), opts)
    } else {
        let fixtures = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
        let opts = BuildOptions {
            roots: vec![fixtures],
            ..BuildOptions::default()
        };
        ("demo-library".into(), opts)
    }
}

fn bench_extract(c: &mut Criterion) {
    let (name, opts) = library_under_test();
    let library = match build_library(&opts) {
        Ok(l) => l,
        Err(e) => {
            eprintln!("skipping the extraction bench: {e}");
            return;
        }
    };
    let bytes: u64 = library.files.iter().map(|f| f.bytes).sum();
    eprintln!(
        "{name}: {} files, {bytes} bytes, {} declarations",
        library.files.len(),
        library.declarations.len()
    );
    let mut group = c.benchmark_group("extract");
    group.sample_size(10);
    group.throughput(Throughput::Bytes(bytes));
    group.bench_function(format!("build_library/{name}"), |b| {
        b.iter(|| {
            build_library(&opts)
                .map(|l| l.declarations.len())
                .unwrap_or(0)
        })
    });
    group.finish();
}

criterion_group!(benches, bench_extract);
criterion_main!(benches);
