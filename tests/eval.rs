//! Evaluation end to end on the demo library: the index that answers held-out queries must
//! never have learned from their proofs. The checker [`leaks`] looks for every way a
//! held-out proof could reach the index (votable theorems, the encoder's training goals,
//! rankings that contain the query's own theorem or a declaration after it in its file),
//! and a deliberately leaky build (every theorem learned from) proves it can fail.

use std::collections::BTreeMap;
use std::path::Path;

use quarry::eval::queries::statement_queries;
use quarry::eval::split::{split, Split, SplitConfig, SplitKind};
use quarry::eval::{run_system, System};
use quarry::extract::{build_library, BuildOptions};
use quarry::index::dense::DenseMode;
use quarry::index::{build_index_with, BuildConfig, FusionChoice, OpenIndex};
use quarry::library::{DeclId, Library};
use quarry::retrieve::Signal;

/// The demo libraries: the bounded ring buffer (Coq) and the stock ledger (Lean).
fn demo_library() -> Library {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    build_library(&BuildOptions {
        roots: vec![root.join("coq"), root.join("lean")],
        coq_prefixes: Vec::new(),
        threads: Some(1),
        progress: false,
    })
    .expect("the demo libraries build")
}

fn demo_split(library: &Library) -> Split {
    split(
        library,
        &SplitConfig {
            kind: SplitKind::Random,
            holdout: 0.3,
            validation: 0.2,
            seed: 7,
        },
    )
    .expect("the demo library has eligible theorems")
}

/// Builds an index of `library` learning from `training` (`None`: every theorem).
fn index_of(
    library: &Library,
    split: &Split,
    training: Option<&[DeclId]>,
    dir: &Path,
) -> OpenIndex {
    let config = BuildConfig {
        dense: DenseMode::Learned,
        training,
        validation: Some(&split.validation),
        fusion: FusionChoice::Equal,
        seed: 3,
    };
    build_index_with(dir, library, BTreeMap::new(), &config).expect("the index builds");
    OpenIndex::open(dir).expect("the index opens")
}

/// Every way a held-out proof reaches `index`, described; empty when none does.
fn leaks(index: &OpenIndex, split: &Split) -> Vec<String> {
    let library = &index.library;
    let name = |d: DeclId| library.declaration(d).name.clone();
    let mut found = Vec::new();
    for &t in &split.test {
        if index.is_votable(t) {
            found.push(format!("test theorem {} votes", name(t)));
        }
        if let Some(dense) = &index.dense {
            if dense.training_goals.binary_search(&t).is_ok() {
                found.push(format!("the encoder was trained on {}", name(t)));
            }
        }
    }
    let queries = statement_queries(library, &split.test);
    let systems = [
        System::Signal(Signal::Lexical),
        System::Signal(Signal::Dense),
        System::Signal(Signal::Neighbours),
        System::Fusion,
    ];
    for system in systems {
        let runs = run_system(index, &queries, system, split, 50, 1).expect("queries run");
        for run in runs {
            let q = library.declaration(run.theorem);
            for (d, _) in &run.ranked {
                let p = library.declaration(*d);
                let later =
                    p.file == q.file && p.statement_span.start.line >= q.statement_span.start.line;
                if *d == run.theorem || later {
                    found.push(format!(
                        "{} answers {} with {} (itself or later in its file)",
                        system.name(),
                        q.name,
                        p.name
                    ));
                }
            }
        }
    }
    found
}

#[test]
fn no_held_out_proof_reaches_the_evaluation_index() {
    let library = demo_library();
    let split = demo_split(&library);
    assert!(!split.test.is_empty() && !split.train.is_empty());
    let tmp = tempfile::tempdir().unwrap();
    let index = index_of(
        &library,
        &split,
        Some(&split.train),
        &tmp.path().join("honest"),
    );
    assert!(
        index.dense.is_some(),
        "the evaluation index has the dense part"
    );
    assert!(!index.votable.is_empty(), "training proofs vote");
    let found = leaks(&index, &split);
    assert!(found.is_empty(), "held-out proofs leak: {found:#?}");
    // Training figures and the votable set are what was asked for, no more.
    for v in &index.votable {
        assert!(
            split.is_training(*v),
            "{} votes but is not training",
            index.library.declaration(*v).name
        );
    }
}

/// The mutation check: learning from every theorem must be caught.
#[test]
fn the_leak_checker_catches_a_build_that_learns_from_every_proof() {
    let library = demo_library();
    let split = demo_split(&library);
    let tmp = tempfile::tempdir().unwrap();
    let leaky = index_of(&library, &split, None, &tmp.path().join("leaky"));
    let found = leaks(&leaky, &split);
    assert!(
        found.iter().any(|f| f.contains("votes")),
        "a build learning from test proofs was not caught: {found:#?}"
    );
    assert!(
        found.iter().any(|f| f.contains("encoder was trained")),
        "the encoder's leak was not caught: {found:#?}"
    );
}

/// The ranking's own leak: a ranking asked for at no place may contain the theorem itself,
/// so the checker's ranking rule is live (with the place, the accessible filter removes it).
#[test]
fn the_leak_checker_catches_a_ranking_that_contains_the_query_itself() {
    let library = demo_library();
    let split = demo_split(&library);
    let tmp = tempfile::tempdir().unwrap();
    let index = index_of(
        &library,
        &split,
        Some(&split.train),
        &tmp.path().join("honest"),
    );
    let mut queries = statement_queries(&index.library, &split.test);
    let mut caught = false;
    for q in &mut queries {
        // Pretend the query sits at the end of its file: everything there is accessible.
        q.place.line = None;
        let runs = run_system(
            &index,
            std::slice::from_ref(q),
            System::Signal(Signal::Lexical),
            &split,
            50,
            1,
        )
        .expect("queries run");
        caught |= runs[0].ranked.iter().any(|(d, _)| *d == q.theorem);
    }
    assert!(
        caught,
        "no query found itself with the place removed: the rule could not fail"
    );
}
