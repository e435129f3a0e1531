//! The lexical path on the Coq standard library index (Debian's `libcoq-stdlib`; the demo
//! library when it is not installed): tokenizing a goal, parsing a goal display, opening
//! the index, ranking a typical goal (fused, and with the lexical signal alone), BM25 scoring
//! alone, refusing a 10 MB goal, and building the lexical index (tantivy written, opened
//! and its impact table computed: what a query waits for).
//! `cargo bench --bench lexical`; figures in docs/performance.md.

use std::path::PathBuf;
use std::sync::Arc;

use criterion::{criterion_group, criterion_main, BatchSize, Criterion};
use quarry::eval::queries::statement_goal;
use quarry::extract::{build_library, BuildOptions, CoqPrefix};
use quarry::index::lexical::{self, FieldBoosts, LexicalIndex};
use quarry::index::{build_index, library_tokenizer, tokenize_fn, OpenIndex};
use quarry::library::DeclKind;
use quarry::query::{parse_goal, GoalSelection, QueryTerm};
use quarry::retrieve::{rank, RankRequest, Signal, FUSION_DEPTH};
use quarry::tokens::Tokenizer;

fn options() -> (String, BuildOptions) {
    let stdlib = PathBuf::from("/usr/lib/ocaml/coq/theories");
    if stdlib.is_dir() {
        (
            "coq-stdlib".into(),
            BuildOptions {
                roots: vec![stdlib.clone()],
                coq_prefixes: vec![CoqPrefix {
                    logical: "Coq".into(),
                    dir: stdlib,
                }],
                ..BuildOptions::default()
            },
        )
    } else {
        (
            "demo-library".into(),
            BuildOptions {
                roots: vec![PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("index_fixtures")],
                ..BuildOptions::default()
            },
        )
    }
}

const COQ_GOAL: &str =
    "n, m, p : nat\nH : n <= m\nH0 : m < p\n============================\nn + 0 <= p * 1 + m";

fn bench_lexical(c: &mut Criterion) {
    let (name, opts) = options();
    let library = match build_library(&opts) {
        Ok(l) => l,
        Err(e) => {
            eprintln!("skipping the lexical bench: {e}");
            return;
        }
    };
    let dir = tempfile::tempdir().expect("a temporary folder");
    if let Err(e) = build_index(dir.path(), &library, Default::default()) {
        eprintln!("skipping the lexical bench: {e}");
        return;
    }
    let index = OpenIndex::open(dir.path()).expect("the index opens");
    // Typical goals: evenly spaced theorem statements of the library, as headers.
    let theorems: Vec<_> = library
        .declarations
        .iter()
        .filter(|d| d.kind == DeclKind::Theorem)
        .map(|d| d.id)
        .collect();
    let step = (theorems.len() / 100).max(1);
    let goals: Vec<String> = theorems
        .iter()
        .step_by(step)
        .take(100)
        .map(|&id| statement_goal(&library, id))
        .collect();
    let tokens: Vec<usize> = goals
        .iter()
        .map(|g| Tokenizer::standard().tokenize(g).len())
        .collect();
    eprintln!(
        "{name}: {} declarations; {} goals, median {} tokens",
        library.declarations.len(),
        goals.len(),
        {
            let mut t = tokens.clone();
            t.sort();
            t.get(t.len() / 2).copied().unwrap_or(0)
        }
    );

    let mut group = c.benchmark_group("lexical");
    group.bench_function("tokenize/coq-goal-display", |b| {
        b.iter(|| index.tokenizer.tokenize(COQ_GOAL).len())
    });
    group.bench_function("parse/coq-goal-display", |b| {
        b.iter(|| parse_goal(COQ_GOAL).map(|g| g.goals.len()).unwrap_or(0))
    });
    let mut i = 0;
    group.bench_function(format!("rank/{name}/statement-goals"), |b| {
        b.iter(|| {
            i = (i + 1) % goals.len();
            let r = rank(&index, &RankRequest::new(goals[i].clone()));
            r.map(|r| r.premises.len()).unwrap_or(0)
        })
    });
    let mut j = 0;
    group.bench_function(format!("rank-lexical-only/{name}/statement-goals"), |b| {
        b.iter(|| {
            j = (j + 1) % goals.len();
            let mut request = RankRequest::new(goals[j].clone());
            request.signals = Some(vec![Signal::Lexical]);
            rank(&index, &request)
                .map(|r| r.premises.len())
                .unwrap_or(0)
        })
    });
    // The lexical scoring alone, as a fused ranking asks for it: every matching declaration
    // scored once, the premise list 100 deep and the 40 voting theorems picked as the scores
    // are collected.
    let queries: Vec<Vec<QueryTerm>> = goals
        .iter()
        .filter_map(|g| parse_goal(g).ok())
        .map(|g| g.query_terms(&index.tokenizer, GoalSelection::First))
        .collect();
    let premises = index.default_candidates.clone();
    let voters = index.votable_filter.intersection(&premises);
    let mut k = 0;
    group.bench_function(format!("bm25/{name}/two-lists"), |b| {
        b.iter(|| {
            k = (k + 1) % queries.len();
            index
                .lexical
                .top_lists(
                    &queries[k],
                    &index.lexical_boosts,
                    &[
                        (Some(&premises), FUSION_DEPTH),
                        (Some(&voters), index.vote_params.neighbours),
                    ],
                )
                .map(|lists| lists.iter().map(Vec::len).sum::<usize>())
                .unwrap_or(0)
        })
    });
    group.bench_function(format!("rank/{name}/coq-goal-display"), |b| {
        b.iter(|| {
            rank(&index, &RankRequest::new(COQ_GOAL))
                .map(|r| r.premises.len())
                .unwrap_or(0)
        })
    });
    let huge = "x".repeat(10 << 20);
    // `rank` refuses before any other work: parsing is its first step after the limit check.
    group.bench_function("parse/refuse-10MB-goal", |b| {
        b.iter(|| parse_goal(&huge).is_err())
    });
    group.sample_size(10);
    let tokenizer = Arc::new(library_tokenizer(&library));
    // What the lexical build tokenizes: each declaration's name, conclusion, hypotheses and
    // its name with its statement (the four text fields).
    let field_texts: Vec<String> = library
        .declarations
        .iter()
        .flat_map(|d| {
            let name = lexical::local_name(&library, d.id);
            [
                name.to_string(),
                lexical::conclusion_text(&library, d.id).to_string(),
                lexical::hypotheses_text(&library, d.id),
                format!("{name}\n{}", d.statement),
            ]
        })
        .collect();
    let tokenize = tokenize_fn(tokenizer.clone());
    group.bench_function(format!("tokenize/{name}/every-field"), |b| {
        let mut out = Vec::new();
        b.iter(|| {
            let mut n = 0;
            for t in &field_texts {
                out.clear();
                tokenize(t, &mut out);
                n += out.len();
            }
            n
        })
    });
    group.bench_function(format!("build/{name}"), |b| {
        b.iter_batched(
            || tempfile::tempdir().expect("a temporary folder"),
            |scratch| {
                let lexical_dir = scratch.path().join("lexical");
                // A failed build must not be timed as a fast one.
                lexical::build(&library, tokenize_fn(tokenizer.clone()), &lexical_dir)
                    .and_then(|_| {
                        LexicalIndex::open(
                            &lexical_dir,
                            tokenize_fn(tokenizer.clone()),
                            library.declarations.len(),
                        )
                    })
                    .and_then(|built| built.prepare(&FieldBoosts::default()).map(|_| ()))
                    .expect("the lexical build of the bench's library")
            },
            BatchSize::PerIteration,
        )
    });
    group.bench_function(format!("open/{name}"), |b| {
        b.iter_batched(
            || (),
            |_| {
                OpenIndex::open(dir.path())
                    .map(|i| i.library.declarations.len())
                    .unwrap_or(0)
            },
            BatchSize::PerIteration,
        )
    });
    group.finish();
}

criterion_group!(benches, bench_lexical);
criterion_main!(benches);
