//! The command line: parses arguments with clap and calls the library.
//!
//! Takes `std::env::args`; gives output on stdout, diagnostics on stderr, and an exit code.
//! It holds no extraction, ranking or storage logic of its own: each subcommand is a few
//! calls into the library.
//!
//! Exit codes (documented in README.md): 0 success; 1 failure (unreadable index, I/O,
//! nothing could be read); 2 usage error; 3 the goal cannot be ranked (empty, too large,
//! nothing to search for); 4 the named declaration does not exist.

mod ask;
mod build;
mod eval;
mod harvest;
mod inspect;
// `ask --server` calls it (ask.rs).
mod remote;
mod serve;

use std::io::IsTerminal;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

/// Exit code for a failure the user can act on (bad index, unreadable library, I/O).
pub const EXIT_FAILURE: u8 = 1;
/// Exit code for a declaration name that is not in the index.
pub const EXIT_NOT_FOUND: u8 = 4;

#[derive(Parser, Debug)]
#[command(
    name = "quarry",
    version,
    about = "Find the premises that close or advance a goal, in Lean 4 and Coq/Rocq libraries"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Extract a library's sources into an index folder.
    Build(build::BuildArgs),
    /// Print an index's counts, one declaration, or every declaration as JSON lines.
    Inspect(inspect::InspectArgs),
    /// Rank the premises of an index for a goal (argument or stdin).
    Ask(ask::AskArgs),
    /// Measure retrieval on held-out proofs of a library (recall@k, MRR, nDCG).
    Eval(eval::EvalArgs),
    /// Answer ranking requests over HTTP (JSON API under /v1; docs/api.md).
    Serve(serve::ServeArgs),
    /// Replay a Coq library's proofs with coqc and write the goal before each tactic
    /// (JSON lines; docs/evaluation.md).
    Harvest(harvest::HarvestArgs),
}

/// Parses the command line and runs the subcommand.
pub fn run() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Build(args) => build::run(args),
        Command::Inspect(args) => inspect::run(args),
        Command::Ask(args) => ask::run(args),
        Command::Eval(args) => eval::run(args),
        Command::Serve(args) => serve::run(args),
        Command::Harvest(args) => harvest::run(args),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprintln!("error: {}", error_text(&e));
            ExitCode::from(EXIT_FAILURE)
        }
    }
}

/// The error and its causes in one line, `outer: cause: cause`, leaving out a cause whose
/// text the line already holds: many of our errors print their cause in their own
/// message, and anyhow's `{:#}` would print it once per level.
pub fn error_text(e: &anyhow::Error) -> String {
    let mut line = e.to_string();
    for cause in e.chain().skip(1) {
        let text = cause.to_string();
        if !line.contains(&text) {
            line.push_str(": ");
            line.push_str(&text);
        }
    }
    line
}

/// Whether stderr is an interactive terminal (progress bars only then).
pub fn stderr_is_terminal() -> bool {
    std::io::stderr().is_terminal()
}

/// Shortens a path for messages: relative to the current folder when inside it.
pub fn display_path(path: &std::path::Path) -> String {
    let cwd = std::env::current_dir().unwrap_or_else(|_| PathBuf::from("."));
    path.strip_prefix(&cwd)
        .unwrap_or(path)
        .display()
        .to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, thiserror::Error)]
    #[error("dense part: `{path}`: {source}")]
    struct Quoting {
        path: String,
        #[source]
        source: std::io::Error,
    }

    #[test]
    fn a_cause_already_in_the_message_is_printed_once() {
        let io = std::io::Error::other("No space left on device");
        let e = anyhow::Error::new(Quoting {
            path: "ledger/.build-1/dense/encoder.bin".into(),
            source: io,
        })
        .context("cannot write the index to `ledger`");
        let text = error_text(&e);
        assert_eq!(text.matches("No space left on device").count(), 1, "{text}");
        assert!(text.starts_with("cannot write the index to `ledger`: dense part: "));
        // A cause the message does not quote is still given.
        let plain = anyhow::anyhow!("disk full").context("cannot write the index");
        assert_eq!(error_text(&plain), "cannot write the index: disk full");
    }
}
