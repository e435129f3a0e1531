//! `quarry eval`: measure retrieval on held-out proofs, and compare two reports.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

use anyhow::Context;
use clap::Args;
use quarry::eval::queries::EvalQuery;
use quarry::eval::report::{compare, Report, SplitCounts, SystemReport};
use quarry::eval::split::{eligible_theorems, split, SplitConfig, SplitKind};
use quarry::eval::states::{read_states, side_queries, training_states};
use quarry::eval::{run_system, summarise, trec, System};
use quarry::extract::{build_library, BuildOptions, CoqPrefix};
use quarry::index::dense::DenseMode;
use quarry::index::lexical::FieldBoosts;
use quarry::index::{build_index_with, BuildConfig, FusionChoice, OpenIndex};
use quarry::library::DeclId;
use quarry::retrieve::Signal;

/// Arguments of `quarry eval`.
#[derive(Args, Debug)]
pub struct EvalArgs {
    /// Root folders of the library to evaluate on (as for `quarry build`).
    #[arg(value_name = "LIBRARY_ROOT", required_unless_present = "compare")]
    roots: Vec<PathBuf>,
    /// A Coq logical prefix, `Name=DIR`; repeatable.
    #[arg(long = "coq-prefix", value_name = "NAME=DIR", value_parser = CoqPrefix::parse)]
    coq_prefixes: Vec<CoqPrefix>,
    /// How theorems are held out: random, file (whole files) or novel (proofs using a
    /// premise no training proof uses).
    #[arg(long, default_value = "random", value_parser = parse_split)]
    split: SplitKind,
    /// Fraction of eligible theorems held out.
    #[arg(long, default_value_t = 0.1)]
    holdout: f64,
    /// Seed of the split and of the random baseline.
    #[arg(long, default_value_t = 42)]
    seed: u64,
    /// Cut-offs for recall@k (comma separated).
    #[arg(long, value_delimiter = ',', default_value = "1,5,10,20,50,100")]
    k: Vec<usize>,
    /// Signals to measure (comma separated; default all). Baselines always run.
    #[arg(long, value_delimiter = ',', value_parser = parse_signal)]
    signals: Option<Vec<Signal>>,
    /// The dense signal of the evaluated index: `learned` (trained on the training part),
    /// `transformer:MODEL_DIR` (a pretrained sentence-embedding model, learning nothing)
    /// or `off` (no dense signal; faster, for checks that need only the lexical path).
    #[arg(long, default_value = "learned", value_parser = super::build::parse_dense)]
    dense: DenseMode,
    /// Folder for report.json, report.md and recall_at_k.svg.
    #[arg(long, value_name = "REPORT_DIR")]
    out: Option<PathBuf>,
    /// Folder for TREC run files (one per system) and the qrels file.
    #[arg(long, value_name = "DIR")]
    trec: Option<PathBuf>,
    /// Choose the lexical field boosts on the validation part (never the test part) and
    /// print the grid.
    #[arg(long)]
    tune_boosts: bool,
    /// Evaluate on harvested goal states (`quarry harvest --out STATES.jsonl`) instead of
    /// theorem statements: the records of held-out theorems are the queries, and the fusion
    /// is tuned on the records of validation theorems.
    #[arg(long, value_name = "STATES.jsonl")]
    states: Option<PathBuf>,
    /// Print the differences between two report.json files and exit.
    #[arg(long, num_args = 2, value_names = ["A.json", "B.json"])]
    compare: Option<Vec<PathBuf>>,
}

fn parse_split(s: &str) -> Result<SplitKind, String> {
    SplitKind::parse(s).ok_or_else(|| format!("unknown split `{s}`: random, file or novel"))
}

fn parse_signal(s: &str) -> Result<Signal, String> {
    Signal::parse(s.trim()).ok_or_else(|| {
        format!(
            "unknown signal `{s}`; signals are {}",
            Signal::ALL.map(|k| k.as_str()).join(", ")
        )
    })
}

/// The depth of every ranked list: the largest cut-off asked for.
fn depth_of(ks: &[usize]) -> usize {
    ks.iter()
        .copied()
        .max()
        .unwrap_or(100)
        .clamp(1, quarry::retrieve::MAX_LIMIT)
}

/// Runs `quarry eval`.
pub fn run(args: EvalArgs) -> anyhow::Result<ExitCode> {
    if let Some(files) = &args.compare {
        let a = Report::read(&files[0])?;
        let b = Report::read(&files[1])?;
        print!("{}", compare(&a, &b));
        return Ok(ExitCode::SUCCESS);
    }
    if args.k.is_empty() || args.k.contains(&0) {
        anyhow::bail!("--k needs cut-offs of at least 1");
    }
    let mut seconds = BTreeMap::new();
    let t = Instant::now();
    let library = build_library(&BuildOptions {
        roots: args.roots.clone(),
        coq_prefixes: args.coq_prefixes.clone(),
        threads: None,
        progress: super::stderr_is_terminal(),
    })
    .context("cannot read the library")?;
    seconds.insert("extract".to_string(), t.elapsed().as_secs_f64());
    let config = SplitConfig {
        kind: args.split,
        holdout: args.holdout,
        seed: args.seed,
        ..SplitConfig::default()
    };
    let split = split(&library, &config)?;
    let records = match &args.states {
        Some(path) => Some(read_states(path)?),
        None => None,
    };
    let records = records.as_deref();
    // The goal states of training theorems are learned from, as their statements are.
    let training_states = match records {
        Some(records) => training_states(&library, records, &split.train),
        None => Vec::new(),
    };
    let t = Instant::now();
    let scratch = tempfile::tempdir().context("cannot make a temporary folder for the index")?;
    let mut settings = BTreeMap::new();
    settings.insert("evaluation".to_string(), serde_json::json!(true));
    // Only the training part is learned from, and the fusion is tuned on the validation
    // part: no test proof may reach the index that answers it.
    let tuner = |index: &OpenIndex, validation: &[DeclId]| {
        let (queries, _) = side_queries(records, &index.library, validation);
        quarry::eval::tune_fusion_on(index, &queries).map_err(|e| e.to_string())
    };
    let config = BuildConfig {
        training: Some(&split.train),
        validation: Some(&split.validation),
        fusion: FusionChoice::Tuned(&tuner),
        states: &training_states,
        seed: args.seed,
        dense: args.dense.clone(),
    };
    build_index_with(scratch.path(), &library, settings, &config)
        .context("cannot build the index")?;
    let mut index = OpenIndex::open(scratch.path()).context("cannot open the index")?;
    seconds.insert("index".to_string(), t.elapsed().as_secs_f64());
    let depth = depth_of(&args.k);

    if args.tune_boosts {
        let t = Instant::now();
        let (validation, _) = side_queries(records, &index.library, &split.validation);
        let best = tune_boosts(&mut index, &validation, &split, depth, args.seed)?;
        println!(
            "chosen on {} validation queries: name {}, conclusion {}, hypotheses {}, text {}\n",
            validation.len(),
            best.name,
            best.conclusion,
            best.hypotheses,
            best.text
        );
        index.lexical_boosts = best;
        seconds.insert("tune_boosts".to_string(), t.elapsed().as_secs_f64());
    }

    let (queries, state_counts) = side_queries(records, &index.library, &split.test);
    if let Some(path) = &args.states {
        println!(
            "goal states `{}`: {} records, {} of held-out theorems, {} queries ({} of an \
             unknown theorem, {} of an unknown file, {} with no premise that can answer; {} \
             named declarations dropped)\n",
            path.display(),
            state_counts.records,
            state_counts.selected,
            state_counts.queries,
            state_counts.unknown_theorem,
            state_counts.unknown_file,
            state_counts.no_answer,
            state_counts.dropped_premises
        );
        if queries.is_empty() {
            anyhow::bail!(
                "no goal state of `{}` belongs to a held-out theorem of this library: were \
                 they harvested from the same roots and prefixes?",
                path.display()
            );
        }
    }
    let mut systems: Vec<System> = args
        .signals
        .clone()
        .unwrap_or(Signal::ALL.to_vec())
        .into_iter()
        .filter(|s| args.dense != DenseMode::Off || *s != Signal::Dense)
        .map(System::Signal)
        .collect();
    if args.signals.is_none() {
        systems.push(System::Fusion);
    }
    systems.extend([System::Popularity, System::Random]);
    let t = Instant::now();
    let mut reports = Vec::new();
    let mut runs_by_system = Vec::new();
    for system in &systems {
        let runs = run_system(&index, &queries, *system, &split, depth, args.seed)?;
        let metrics = summarise(&system.name(), &queries, &runs, &args.k);
        reports.push(SystemReport::from(&metrics));
        runs_by_system.push((system.name(), runs));
    }
    seconds.insert("queries".to_string(), t.elapsed().as_secs_f64());
    let mut report_settings = BTreeMap::new();
    for key in ["fusion", "dense", "training"] {
        if let Some(v) = index.generation.manifest.settings.get(key) {
            report_settings.insert(key.to_string(), v.clone());
        }
    }
    if let Some(path) = &args.states {
        report_settings.insert(
            "goal_states".to_string(),
            serde_json::json!({"file": path.display().to_string(), "counts": state_counts}),
        );
    }
    report_settings.insert(
        "lexical_boosts".to_string(),
        serde_json::to_value(index.lexical_boosts)?,
    );
    let report = Report {
        quarry_version: env!("CARGO_PKG_VERSION").to_string(),
        queries_from: if args.states.is_some() {
            "goal_states".into()
        } else {
            "statements".into()
        },
        split: args.split.as_str().into(),
        holdout: args.holdout,
        seed: args.seed,
        ks: args.k.clone(),
        depth,
        library_roots: index.library.roots.clone(),
        build_id: index.build_id().to_string(),
        counts: SplitCounts {
            eligible: eligible_theorems(&index.library).len(),
            test: split.test.len() + split.excluded.len(),
            validation: split.validation.len(),
            train: split.train.len(),
            excluded: split.excluded.len(),
            queries: queries.len(),
        },
        seconds,
        systems: reports,
        settings: report_settings,
    };
    print!("{}", report.markdown());
    if let Some(dir) = &args.out {
        report.write(dir)?;
        println!("\nreport written to {}", dir.display());
    }
    if let Some(dir) = &args.trec {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("cannot create `{}`", dir.display()))?;
        let qrels = dir.join("qrels.txt");
        std::fs::write(&qrels, trec::qrels(&index.library, &queries))
            .with_context(|| format!("cannot write `{}`", qrels.display()))?;
        for (name, runs) in &runs_by_system {
            let path = dir.join(format!("run.{name}.txt"));
            std::fs::write(&path, trec::run_file(&index.library, runs, name))
                .with_context(|| format!("cannot write `{}`", path.display()))?;
        }
        println!("TREC files written to {}", dir.display());
    }
    Ok(ExitCode::SUCCESS)
}

/// Grid search of the lexical field boosts by recall@10 on the validation queries.
fn tune_boosts(
    index: &mut OpenIndex,
    validation: &[EvalQuery],
    split: &quarry::eval::split::Split,
    depth: usize,
    seed: u64,
) -> anyhow::Result<FieldBoosts> {
    let grid = [0.0f32, 0.5, 1.0, 2.0];
    let mut best = (f64::NEG_INFINITY, FieldBoosts::default());
    println!(
        "| name | conclusion | hypotheses | text | R@10 (validation) |\n|---:|---:|---:|---:|---:|"
    );
    for &name in &grid {
        for &conclusion in &grid {
            for &hypotheses in &[0.0f32, 0.25, 0.5] {
                for &text in &grid {
                    if name + conclusion + hypotheses + text == 0.0 {
                        continue;
                    }
                    index.lexical_boosts = FieldBoosts {
                        name,
                        conclusion,
                        hypotheses,
                        text,
                    };
                    let runs = run_system(
                        index,
                        validation,
                        System::Signal(Signal::Lexical),
                        split,
                        depth,
                        seed,
                    )?;
                    let m = summarise("lexical", validation, &runs, &[10]);
                    let r10 = m.recall.get(&10).copied().unwrap_or(0.0);
                    println!(
                        "| {name} | {conclusion} | {hypotheses} | {text} | {:.2} |",
                        r10 * 100.0
                    );
                    if r10 > best.0 {
                        best = (r10, index.lexical_boosts);
                    }
                }
            }
        }
    }
    Ok(best.1)
}
