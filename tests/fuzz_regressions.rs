//! Replays every input the fuzz targets ever crashed on (`tests/fuzz/regressions/TARGET/`)
//! through the same checks the targets run (`tests/fuzz/checks.rs`), so a fixed crash stays
//! fixed without a nightly toolchain or cargo-fuzz. Each file is one input, as libFuzzer
//! saved it.

#[allow(dead_code)]
#[path = "fuzz/checks.rs"]
mod checks;

use std::path::{Path, PathBuf};

/// The saved inputs of one target, sorted by name.
fn inputs(target: &str) -> Vec<(PathBuf, Vec<u8>)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fuzz/regressions")
        .join(target);
    let mut out: Vec<(PathBuf, Vec<u8>)> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("`{}`: {e}", dir.display()))
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.is_file() && p.file_name().is_some_and(|n| n != ".gitkeep"))
        .map(|p| {
            let bytes = std::fs::read(&p).unwrap();
            (p, bytes)
        })
        .collect();
    out.sort();
    out
}

/// Runs `check` on every saved input of `target`; the input being checked is printed first,
/// so a failure names it.
fn replay(target: &str, check: impl Fn(&[u8])) -> usize {
    let saved = inputs(target);
    for (path, bytes) in &saved {
        eprintln!("{target}: replaying `{}`", path.display());
        check(bytes);
    }
    saved.len()
}

#[test]
fn lean_frontend_inputs_that_once_crashed() {
    replay("lean_frontend", checks::lean_frontend);
}

#[test]
fn coq_frontend_inputs_that_once_crashed() {
    replay("coq_frontend", checks::coq_frontend);
}

#[test]
fn goal_parser_inputs_that_once_crashed() {
    replay("goal_parser", checks::goal_parser);
}

#[test]
fn tokenizer_inputs_that_once_crashed() {
    replay("tokenizer", checks::tokenizer);
}

#[test]
fn rank_request_inputs_that_once_crashed() {
    let library =
        checks::fixture_library(&Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures"));
    replay("rank_request", |bytes| {
        checks::rank_request(&library, bytes)
    });
}

#[test]
fn the_hand_written_seeds_pass_the_checks() {
    // The seeds must pass, or every fuzz run would stop at its first input.
    let seeds = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fuzz/seeds");
    let library =
        checks::fixture_library(&Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures"));
    let mut n = 0;
    for (target, dir) in [
        ("goal_parser", "goal_parser"),
        ("rank_request", "rank_request"),
    ] {
        for e in std::fs::read_dir(seeds.join(dir)).unwrap().flatten() {
            let bytes = std::fs::read(e.path()).unwrap();
            match target {
                "goal_parser" => {
                    checks::goal_parser(&bytes);
                    checks::tokenizer(&bytes);
                }
                _ => checks::rank_request(&library, &bytes),
            }
            n += 1;
        }
    }
    assert!(n >= 10, "only {n} seeds");
}
