//! `quarry build`: extract a library and write an index generation.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;

use anyhow::Context;
use clap::Args;
use quarry::dense::transformer::DEFAULT_BATCH_SIZE;
use quarry::eval::states::{read_states, side_queries, training_states};
use quarry::eval::tune_fusion_on;
use quarry::extract::{build_library, walk::WalkError, BuildOptions, CoqPrefix};
use quarry::index::dense::{DenseMode, TransformerChoice};
use quarry::index::{build_index_with, BuildConfig, FusionChoice};
use quarry::library::{store, DeclId, Library, Severity};
use quarry::retrieve::fusion::FusionWeights;
use quarry::retrieve::Signal;

/// Arguments of `quarry build`.
#[derive(Args, Debug)]
pub struct BuildArgs {
    /// Root folders of the library (Lean: the folder module paths start from; Coq: with
    /// `_CoqProject` or `--coq-prefix`).
    #[arg(required = true, value_name = "LIBRARY_ROOT")]
    roots: Vec<PathBuf>,
    /// The index folder to write (a new generation replaces the live one atomically).
    #[arg(long, value_name = "INDEX_DIR")]
    out: PathBuf,
    /// A Coq logical prefix, `Name=DIR` (like `-R DIR Name`); repeatable.
    #[arg(long = "coq-prefix", value_name = "NAME=DIR", value_parser = parse_prefix)]
    coq_prefixes: Vec<CoqPrefix>,
    /// Worker threads (default: one per core).
    #[arg(long)]
    threads: Option<usize>,
    /// Print only errors.
    #[arg(long, short)]
    quiet: bool,
    /// The dense signal: `learned` (train the hashed-feature encoder on the library's own
    /// proofs), `transformer:MODEL_DIR` (embed with a BERT sentence-embedding model saved
    /// in MODEL_DIR; the index keeps its own copy) or `off`.
    #[arg(long, default_value = "learned", value_parser = parse_dense)]
    dense: DenseMode,
    /// Texts per forward pass of the transformer encoder.
    #[arg(long, default_value_t = DEFAULT_BATCH_SIZE, value_name = "N")]
    dense_batch_size: usize,
    /// Fusion weights, `signal=weight` comma separated (e.g. `lexical=1,neighbours=2`);
    /// signals not named weigh 1. Default: tuned on a held-out tenth of the library's
    /// proofs.
    #[arg(long, value_name = "SIGNAL=WEIGHT", value_delimiter = ',', value_parser = parse_weight)]
    fusion_weights: Option<Vec<(String, f32)>>,
    /// Seed of the validation hold-out and of the encoder.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Goal states harvested from this library's proofs (`quarry harvest --out
    /// STATES.jsonl`): the learned encoder learns from them beside the statements, and the
    /// fusion is tuned on those of the validation theorems.
    #[arg(long, value_name = "STATES.jsonl")]
    states: Option<PathBuf>,
}

/// Reads `--dense`: `learned`, `off`, or `transformer:MODEL_DIR` (batch size the default).
pub(super) fn parse_dense(s: &str) -> Result<DenseMode, String> {
    match s {
        "learned" => Ok(DenseMode::Learned),
        "off" => Ok(DenseMode::Off),
        _ => match s.strip_prefix("transformer:") {
            Some("") => Err("`transformer:` needs a model folder: transformer:MODEL_DIR".into()),
            Some(dir) => Ok(DenseMode::Transformer(TransformerChoice {
                model_dir: PathBuf::from(dir),
                batch_size: DEFAULT_BATCH_SIZE,
            })),
            None => Err(format!(
                "unknown dense mode `{s}`: learned, transformer:MODEL_DIR or off"
            )),
        },
    }
}

fn parse_weight(s: &str) -> Result<(String, f32), String> {
    let (name, weight) = s
        .split_once('=')
        .ok_or_else(|| format!("`{s}` is not SIGNAL=WEIGHT"))?;
    let signal = Signal::parse(name.trim()).ok_or_else(|| {
        format!(
            "unknown signal `{name}`; signals are {}",
            Signal::ALL.map(|k| k.as_str()).join(", ")
        )
    })?;
    let w: f32 = weight
        .trim()
        .parse()
        .map_err(|_| format!("weight `{weight}` of `{name}` is not a number"))?;
    if !(w.is_finite() && w >= 0.0) {
        return Err(format!("weight `{weight}` of `{name}` must be 0 or more"));
    }
    Ok((signal.as_str().to_string(), w))
}

fn parse_prefix(s: &str) -> Result<CoqPrefix, String> {
    CoqPrefix::parse(s)
}

/// How many diagnostics `build` prints before summarising the rest.
const SHOWN_DIAGNOSTICS: usize = 20;

/// Prints the library's diagnostics (up to a limit) to stderr.
fn report_diagnostics(library: &Library) {
    let mut shown = 0;
    let mut total = 0;
    for f in &library.files {
        for d in &f.diagnostics {
            total += 1;
            if shown < SHOWN_DIAGNOSTICS {
                let level = match d.severity {
                    Severity::Error => "skipped",
                    Severity::Warning => "warning",
                };
                eprintln!("{level}: {}:{}:{}: {}", f.path, d.line, d.column, d.message);
                shown += 1;
            }
        }
    }
    if total > shown {
        eprintln!(
            "... and {} more; `quarry inspect INDEX_DIR --json` lists them all",
            total - shown
        );
    }
}

/// Prints how many transformer embeddings were re-used and computed (nothing for the other
/// dense modes), from the manifest just written.
fn report_embeddings(gen: &std::path::Path) {
    let Some(dir) = gen.parent() else { return };
    let Ok(generation) = store::open_generation(dir) else {
        return;
    };
    let Some(d) = generation.manifest.settings.get("dense") else {
        return;
    };
    if d["mode"] == "transformer" {
        println!(
            "transformer embeddings of {} declarations: {} texts re-used, {} computed (cache: \
             {}); model `{}`, {} dimensions, {} pooling{}",
            d["statements"],
            d["reused"],
            d["computed"],
            d["cache"].as_str().unwrap_or("?"),
            d["model"]["name"].as_str().unwrap_or("?"),
            d["dim"],
            d["model"]["pooling"].as_str().unwrap_or("?"),
            if d["model"]["normalize"] == true {
                ", normalised"
            } else {
                ""
            }
        );
    }
}

/// Runs `quarry build`.
pub fn run(args: BuildArgs) -> anyhow::Result<ExitCode> {
    if args.threads == Some(0) {
        anyhow::bail!("--threads must be at least 1");
    }
    if args.dense_batch_size == 0 {
        anyhow::bail!("--dense-batch-size must be at least 1");
    }
    let mut dense = args.dense.clone();
    if let DenseMode::Transformer(choice) = &mut dense {
        choice.batch_size = args.dense_batch_size;
    }
    let started = Instant::now();
    let opts = BuildOptions {
        roots: args.roots.clone(),
        coq_prefixes: args.coq_prefixes.clone(),
        threads: args.threads,
        progress: !args.quiet && super::stderr_is_terminal(),
    };
    let library = match build_library(&opts) {
        Ok(l) => l,
        Err(WalkError::NothingReadable(n, library)) => {
            report_diagnostics(&library);
            anyhow::bail!("none of the {n} source files could be read; no index written");
        }
        Err(e) => return Err(e).context("cannot build the library"),
    };
    if !args.quiet {
        report_diagnostics(&library);
    }
    let extracted = started.elapsed();
    let mut settings = BTreeMap::new();
    settings.insert(
        "roots".to_string(),
        serde_json::json!(library.roots.clone()),
    );
    settings.insert(
        "coq_prefixes".to_string(),
        serde_json::json!(args
            .coq_prefixes
            .iter()
            .map(|p| format!("{}={}", p.logical, p.dir.display()))
            .collect::<Vec<_>>()),
    );
    let fixed = args.fusion_weights.clone().map(|weights| FusionWeights {
        weights,
        ..FusionWeights::default()
    });
    let records = match &args.states {
        Some(path) => Some(read_states(path)?),
        None => None,
    };
    let records = records.as_deref();
    let all: Vec<DeclId> = library.declarations.iter().map(|d| d.id).collect();
    // Only training theorems' states are learned from: the build drops the others.
    let states = match records {
        Some(records) => training_states(&library, records, &all),
        None => Vec::new(),
    };
    let tuner = |index: &quarry::index::OpenIndex, validation: &[DeclId]| {
        let (queries, _) = side_queries(records, &index.library, validation);
        tune_fusion_on(index, &queries).map_err(|e| e.to_string())
    };
    let config = BuildConfig {
        dense,
        fusion: match &fixed {
            Some(w) => FusionChoice::Fixed(w),
            None => FusionChoice::Tuned(&tuner),
        },
        seed: args.seed,
        states: &states,
        ..BuildConfig::default()
    };
    let (gen, timings) = build_index_with(&args.out, &library, settings, &config)
        .with_context(|| format!("cannot write the index to `{}`", args.out.display()))?;
    if !args.quiet {
        let counts = store::Counts::of(&library);
        let skipped = counts.files_with_errors;
        println!(
            "indexed {} files ({} skipped, {} with warnings): {} declarations, {} proof edges, \
             {} statement edges; {} references unresolved, {} ambiguous",
            counts.files,
            skipped,
            counts.files_with_warnings,
            counts.declarations,
            counts.proof_edges,
            counts.statement_edges,
            counts.references_unresolved,
            counts.references_ambiguous,
        );
        println!(
            "extracted in {:.2} s, lexical index {:.2} s, dense part {:.2} s, fusion tuned in \
             {:.2} s, written in {:.2} s to {}",
            extracted.as_secs_f64(),
            timings.lexical_seconds,
            timings.dense_seconds,
            timings.tuning_seconds,
            timings.write_seconds,
            super::display_path(&gen)
        );
        report_embeddings(&gen);
    }
    Ok(ExitCode::SUCCESS)
}
