//! Evaluation end to end on the demo library: the index that answers held-out queries must
//! never have learned from their proofs. The checker [`leaks`] looks for every way a
//! held-out proof could reach the index (votable theorems, the encoder's training goals,
//! rankings that contain the query's own theorem or a declaration after it in its file),
//! and a deliberately leaky build (every theorem learned from) proves it can fail. The same
//! checks run on goal states harvested from the ring buffer's proofs by a real coqc (Debian's
//! `coq` 8.16; under `CI=true` it must be present, see `support::debian::coqc`).

mod support;

use std::collections::BTreeMap;
use std::path::Path;

use quarry::eval::queries::{statement_queries, EvalQuery};
use quarry::eval::split::{split, Split, SplitConfig, SplitKind};
use quarry::eval::states::{state_queries, training_states};
use quarry::eval::{run_system, System};
use quarry::extract::{build_library, BuildOptions};
use quarry::index::dense::DenseMode;
use quarry::index::dense::TrainingState;
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
    index_with_states(library, split, training, &[], dir)
}

/// [`index_of`], the encoder also learning from the goal states of training theorems.
fn index_with_states(
    library: &Library,
    split: &Split,
    training: Option<&[DeclId]>,
    states: &[TrainingState],
    dir: &Path,
) -> OpenIndex {
    let config = BuildConfig {
        dense: DenseMode::Learned,
        training,
        validation: Some(&split.validation),
        fusion: FusionChoice::Equal,
        states,
        seed: 3,
    };
    build_index_with(dir, library, BTreeMap::new(), &config).expect("the index builds");
    OpenIndex::open(dir).expect("the index opens")
}

/// Every way a held-out proof reaches `index`, described; empty when none does.
fn leaks(index: &OpenIndex, split: &Split) -> Vec<String> {
    let queries = statement_queries(&index.library, &split.test);
    leaks_for(index, split, &queries)
}

/// [`leaks`], the rankings checked on `queries` (statements or goal states).
fn leaks_for(index: &OpenIndex, split: &Split, queries: &[EvalQuery]) -> Vec<String> {
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
    let systems = [
        System::Signal(Signal::Lexical),
        System::Signal(Signal::Dense),
        System::Signal(Signal::Neighbours),
        System::Fusion,
    ];
    for system in systems {
        let runs = run_system(index, queries, system, split, 50, 1).expect("queries run");
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

/// Goal states of the ring buffer's proofs, replayed by coqc (`None`: no coqc outside CI).
/// The harvest compiles against the library's `.vo` files, so a copy of the fixture is
/// compiled first, in its `_CoqProject` order (Core, Lemmas, Queue), as a user would.
fn ring_buffer_states(dir: &Path) -> Option<Vec<quarry::harvest::GoalRecord>> {
    let coqc = support::debian::coqc()?;
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq");
    let root = dir.join("ring-buffer");
    std::fs::create_dir_all(&root).unwrap();
    for file in ["_CoqProject", "Core.v", "Lemmas.v", "Queue.v"] {
        std::fs::copy(fixture.join(file), root.join(file)).unwrap();
    }
    for file in ["Core.v", "Lemmas.v", "Queue.v"] {
        let out = std::process::Command::new(&coqc)
            .current_dir(&root)
            .args(["-R", ".", "RingBuffer", file])
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "coqc {file}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    let outcome = quarry::harvest::harvest(&quarry::harvest::HarvestOptions {
        roots: vec![root],
        coq_prefixes: Vec::new(),
        coqc,
        timeout_per_file: std::time::Duration::from_secs(120),
        threads: Some(1),
        progress: false,
    })
    .expect("the ring buffer replays");
    assert!(
        outcome.failed.is_empty(),
        "the ring buffer compiles: {:?}",
        outcome.failed
    );
    Some(outcome.records)
}

/// Held out by theorem: every goal state of a held-out theorem is a query, none of another,
/// and no ranking of a goal state reaches a held-out proof, the theorem itself or what
/// follows it; the leaky build is caught on goal states too.
#[test]
fn no_held_out_proof_reaches_the_index_answering_goal_states() {
    let tmp = tempfile::tempdir().unwrap();
    let Some(records) = ring_buffer_states(tmp.path()) else {
        return;
    };
    let library = demo_library();
    let split = demo_split(&library);
    let mut test = split.test.clone();
    test.sort_unstable();
    let (queries, counts) = state_queries(&library, &records, &test);
    assert!(!queries.is_empty(), "held-out theorems have goal states");
    let held_out: std::collections::HashSet<&str> = test
        .iter()
        .map(|&t| library.declaration(t).name.as_str())
        .collect();
    // coqc's records, counted apart from state_queries: those of held-out theorems.
    let of_test = records
        .iter()
        .filter(|r| held_out.contains(r.theorem.as_str()))
        .count();
    assert_eq!(counts.selected, of_test, "{counts:?}");
    assert_eq!(counts.queries + counts.no_answer, of_test, "{counts:?}");
    for q in &queries {
        assert!(test.binary_search(&q.theorem).is_ok());
        // Each answer is a declaration the record's tactic named (coqc's `.glob`).
        let record_premises: Vec<&str> = records
            .iter()
            .filter(|r| r.goal == q.goal && library.declaration(q.theorem).name == r.theorem)
            .flat_map(|r| r.premises.iter().map(String::as_str))
            .collect();
        for p in &q.relevant {
            assert!(
                record_premises.contains(&library.declaration(*p).name.as_str()),
                "{} answers {} but no record names it",
                library.declaration(*p).name,
                q.qid
            );
        }
    }
    // The encoder learns from the training theorems' goal states, as `quarry eval
    // --states` builds it; the leaky build is handed every theorem's.
    let honest_states = training_states(&library, &records, &split.train);
    assert!(
        !honest_states.is_empty(),
        "training theorems have goal states"
    );
    let honest = index_with_states(
        &library,
        &split,
        Some(&split.train),
        &honest_states,
        &tmp.path().join("honest"),
    );
    let found = leaks_for(&honest, &split, &queries);
    assert!(found.is_empty(), "held-out proofs leak: {found:#?}");
    let all: Vec<DeclId> = library.declarations.iter().map(|d| d.id).collect();
    let every_state = training_states(&library, &records, &all);
    let leaky = index_with_states(
        &library,
        &split,
        None,
        &every_state,
        &tmp.path().join("leaky"),
    );
    let found = leaks_for(&leaky, &split, &queries);
    assert!(
        found.iter().any(|f| f.contains("votes")),
        "a build learning from test proofs was not caught on goal states: {found:#?}"
    );
    assert!(
        found.iter().any(|f| f.contains("encoder was trained")),
        "an encoder trained on test goal states was not caught: {found:#?}"
    );
}

/// `quarry eval --states` end to end: the report says it measured goal states, its query
/// count is what `state_queries` gives for the same split, the TREC query ids name held-out
/// theorems, and a file with a broken line is refused with its line named.
#[test]
fn quarry_eval_measures_goal_states_and_refuses_a_broken_file() {
    let tmp = tempfile::tempdir().unwrap();
    let Some(records) = ring_buffer_states(tmp.path()) else {
        return;
    };
    let states = tmp.path().join("states.jsonl");
    let lines: Vec<String> = records
        .iter()
        .map(|r| serde_json::to_string(r).unwrap())
        .collect();
    std::fs::write(&states, lines.join("\n") + "\n").unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq");
    let out = tmp.path().join("report");
    let run = std::process::Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("eval")
        .arg(&root)
        .arg("--states")
        .arg(&states)
        .args(["--holdout", "0.3", "--seed", "7", "--dense", "off"])
        .arg("--out")
        .arg(&out)
        .arg("--trec")
        .arg(out.join("trec"))
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(
        run.status.success(),
        "{stdout}{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    assert_eq!(report["queries_from"], "goal_states");
    // The same split computed here, through the library, gives the same queries.
    let library = build_library(&BuildOptions {
        roots: vec![root],
        coq_prefixes: Vec::new(),
        threads: Some(1),
        progress: false,
    })
    .unwrap();
    let split = split(
        &library,
        &SplitConfig {
            kind: SplitKind::Random,
            holdout: 0.3,
            validation: 0.1,
            seed: 7,
        },
    )
    .unwrap();
    let mut test = split.test.clone();
    test.sort_unstable();
    let (queries, _) = state_queries(&library, &records, &test);
    assert!(!queries.is_empty());
    assert_eq!(report["counts"]["queries"], queries.len());
    let qrels = std::fs::read_to_string(out.join("trec/qrels.txt")).unwrap();
    for line in qrels.lines() {
        let qid = line.split(' ').next().unwrap_or("");
        let theorem = qid.split('@').next().unwrap_or("");
        assert!(
            test.iter().any(|&t| library.declaration(t).name == theorem),
            "qrels query {qid} is not a held-out theorem's"
        );
    }
    // `quarry build --states`: the encoder learns from the goal states beside the
    // statements, so it has more training goals than the same build without them.
    let dense_goals = |extra: &[&std::ffi::OsStr]| {
        let dir = tempfile::tempdir().unwrap();
        let run = std::process::Command::new(env!("CARGO_BIN_EXE_quarry"))
            .arg("build")
            .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq"))
            .arg("--out")
            .arg(dir.path().join("idx"))
            .args(extra)
            .output()
            .unwrap();
        assert!(
            run.status.success(),
            "{}",
            String::from_utf8_lossy(&run.stderr)
        );
        let generation = quarry::library::store::open_generation(&dir.path().join("idx")).unwrap();
        generation.manifest.settings["dense"]["goals"]
            .as_u64()
            .unwrap_or(0)
    };
    let without = dense_goals(&[]);
    let with = dense_goals(&["--states".as_ref(), states.as_os_str()]);
    assert!(
        without > 0 && with > without,
        "training goals without states {without}, with {with}"
    );
    // A broken line: refused, naming the file and the line.
    std::fs::write(&states, format!("{}\n{{\"goal\": 3}}\n", lines[0])).unwrap();
    let run = std::process::Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("eval")
        .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq"))
        .arg("--states")
        .arg(&states)
        .args(["--dense", "off"])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&run.stderr);
    assert!(!run.status.success());
    assert!(
        stderr.contains("states.jsonl") && stderr.contains("line 2"),
        "{stderr}"
    );
}
