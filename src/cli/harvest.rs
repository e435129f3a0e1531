//! `quarry harvest`: replay a Coq library's proofs with coqc and write its goal states.
//!
//! Takes library roots, `--coq-prefix` options and `--out`; writes one JSON line per
//! harvested goal state (docs/evaluation.md, "Goal states harvested from Coq") and prints a
//! summary on stderr. All the work is in [`quarry::harvest`].

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::{Duration, Instant};

use anyhow::Context;
use clap::Args;
use quarry::extract::CoqPrefix;
use quarry::harvest::{harvest, HarvestOptions};

/// Arguments of `quarry harvest`.
#[derive(Args, Debug)]
pub struct HarvestArgs {
    /// Root folders of the Coq library (with `_CoqProject` or `--coq-prefix`).
    #[arg(required = true, value_name = "LIBRARY_ROOT")]
    roots: Vec<PathBuf>,
    /// The JSON-lines file to write the goal states to.
    #[arg(long, value_name = "STATES.jsonl")]
    out: PathBuf,
    /// A Coq logical prefix, `Name=DIR` (like `-R DIR Name`); repeatable.
    #[arg(long = "coq-prefix", value_name = "NAME=DIR", value_parser = CoqPrefix::parse)]
    coq_prefixes: Vec<CoqPrefix>,
    /// Seconds coqc may spend on one file before it is stopped.
    #[arg(long, default_value_t = 120, value_name = "SECONDS")]
    timeout_per_file: u64,
    /// Files compiled at once (default: one per core).
    #[arg(long)]
    threads: Option<usize>,
    /// The coqc program.
    #[arg(long, default_value = "coqc")]
    coqc: PathBuf,
    /// How many failed files the summary lists by name.
    #[arg(long, default_value_t = 20)]
    show_failures: usize,
}

/// Runs `quarry harvest`.
pub fn run(args: HarvestArgs) -> anyhow::Result<ExitCode> {
    let started = Instant::now();
    let opts = HarvestOptions {
        roots: args.roots,
        coq_prefixes: args.coq_prefixes,
        coqc: args.coqc,
        timeout_per_file: Duration::from_secs(args.timeout_per_file.max(1)),
        threads: args.threads,
        progress: super::stderr_is_terminal(),
    };
    let outcome = harvest(&opts)?;
    let file = std::fs::File::create(&args.out)
        .with_context(|| format!("cannot create `{}`", args.out.display()))?;
    let mut w = std::io::BufWriter::new(file);
    for r in &outcome.records {
        serde_json::to_writer(&mut w, r).context("writing a goal record")?;
        w.write_all(b"\n")
            .with_context(|| format!("writing `{}`", args.out.display()))?;
    }
    w.flush()
        .with_context(|| format!("writing `{}`", args.out.display()))?;
    for f in outcome.failed.iter().take(args.show_failures) {
        eprintln!("did not compile: {}: {}", f.file, f.error);
    }
    if outcome.failed.len() > args.show_failures {
        eprintln!("... and {} more", outcome.failed.len() - args.show_failures);
    }
    eprintln!(
        "{} files replayed, {} failed to compile, {} records written to {} in {:.1} s",
        outcome.files_replayed,
        outcome.failed.len(),
        outcome.records.len(),
        super::display_path(&args.out),
        started.elapsed().as_secs_f64()
    );
    if outcome.files_replayed == 0 {
        return Ok(ExitCode::from(super::EXIT_FAILURE));
    }
    Ok(ExitCode::SUCCESS)
}
