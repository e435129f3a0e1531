//! The cost curve of quarry from ten thousand to a million declarations.
//!
//! `cargo bench --bench cost -- [generate|measure|plot] SIZE...` (sizes like `10k`, `1M`;
//! `benches/cost/run.sh` runs them all). `generate` writes a seeded synthetic Coq library
//! per size under `target/cost/lib-SIZE/`; `measure` builds it with the release `quarry`
//! binary and serves it, writing `target/cost/result-SIZE.json`; `plot` reads every result,
//! fits the log–log slopes, writes `target/cost/cost.json` and one SVG per quantity, and
//! prints the table. It lives in `benches/` because nothing in the main flow needs it.

mod generate;
mod measure;
mod plot;

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use measure::SizeResult;

/// Fresh goals per library for the latency figures.
const GOALS: usize = 300;
/// Seed of every generated library (the size is mixed in).
const SEED: u64 = 2026;

fn parse_size(text: &str) -> Option<usize> {
    let t = text.trim();
    let (digits, scale) = match t.chars().last()? {
        'k' | 'K' => (&t[..t.len() - 1], 1_000),
        'm' | 'M' => (&t[..t.len() - 1], 1_000_000),
        _ => (t, 1),
    };
    digits.parse::<usize>().ok().map(|n| n * scale)
}

fn out_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/cost")
}

fn library_dir(size: usize) -> PathBuf {
    out_dir().join(format!("lib-{size}"))
}

/// The number of `.v` files below `dir`.
fn count_sources(dir: &Path) -> usize {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return 0;
    };
    entries
        .flatten()
        .map(|e| {
            let p = e.path();
            if p.is_dir() {
                count_sources(&p)
            } else {
                usize::from(p.extension().is_some_and(|x| x == "v"))
            }
        })
        .sum()
}

/// Generates the library of `size` unless a finished one is there (its marker written
/// last).
fn ensure_library(size: usize) -> Result<usize, String> {
    let dir = library_dir(size);
    let marker = dir.join("generated.json");
    if marker.is_file() {
        return Ok(count_sources(&dir));
    }
    if dir.exists() {
        // An interrupted generation of our own output folder: start it again in place.
        std::fs::remove_dir_all(&dir).map_err(|e| format!("{}: {e}", dir.display()))?;
    }
    let started = std::time::Instant::now();
    let w = generate::write_library(&dir, size, GOALS, SEED ^ size as u64)
        .map_err(|e| format!("writing {}: {e}", dir.display()))?;
    let summary = serde_json::json!({
        "declarations": w.declarations, "files": w.files, "bytes": w.bytes, "goals": w.goals,
        "most_cited": w.most_cited, "mean_cited": w.mean_cited,
        "seconds": started.elapsed().as_secs_f64(),
    });
    eprintln!("cost: generated {}: {summary}", dir.display());
    std::fs::write(&marker, summary.to_string())
        .map_err(|e| format!("{}: {e}", marker.display()))?;
    Ok(w.files)
}

fn measure(size: usize) -> Result<(), String> {
    let files = ensure_library(size)?;
    let quarry = measure::release_binary()
        .ok_or("no target/release/quarry: run `cargo build --release` first")?;
    let index = out_dir().join(format!("index-{size}"));
    if index.exists() {
        std::fs::remove_dir_all(&index).map_err(|e| format!("{}: {e}", index.display()))?;
    }
    let result = measure::measure_size(&quarry, &library_dir(size), &index, size, files)
        .map_err(|e| e.to_string())?;
    let path = out_dir().join(format!("result-{size}.json"));
    let text = serde_json::to_string_pretty(&result).map_err(|e| e.to_string())?;
    std::fs::write(&path, text).map_err(|e| format!("{}: {e}", path.display()))?;
    eprintln!("cost: wrote {}", path.display());
    Ok(())
}

fn plot_all() -> Result<(), String> {
    let dir = out_dir();
    let mut results: Vec<SizeResult> = Vec::new();
    for entry in std::fs::read_dir(&dir).map_err(|e| format!("{}: {e}", dir.display()))? {
        let p = entry.map_err(|e| e.to_string())?.path();
        let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if name.starts_with("result-") && name.ends_with(".json") {
            let text = std::fs::read_to_string(&p).map_err(|e| format!("{}: {e}", p.display()))?;
            results.push(serde_json::from_str(&text).map_err(|e| format!("{}: {e}", p.display()))?);
        }
    }
    results.sort_by_key(|r| r.declarations);
    println!(
        "| declarations | files | build s | build peak RSS MiB | index MiB | serve RSS MiB | rank median ms | rank p99 ms | round trip median ms | load avg |"
    );
    println!("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|");
    for r in &results {
        println!(
            "| {} | {} | {:.1} | {:.0} | {:.1} | {:.0} | {:.2} | {:.2} | {:.2} | {:.1}–{:.1} |",
            r.declarations,
            r.source_files,
            r.build_seconds,
            r.build_peak_rss_bytes as f64 / 1048576.0,
            r.index_bytes as f64 / 1048576.0,
            r.serve_rss_bytes as f64 / 1048576.0,
            r.rank_median_ms,
            r.rank_p99_ms,
            r.round_trip_median_ms,
            r.load_before,
            r.load_after,
        );
    }
    let mut slopes = serde_json::Map::new();
    for q in plot::QUANTITIES {
        let points: Vec<(f64, f64)> = results
            .iter()
            .map(|r| (r.declarations as f64, (q.value)(r)))
            .collect();
        let slope = plot::log_log_slope(&points);
        println!(
            "slope of {} ({}): {}",
            q.key,
            q.unit,
            slope.map_or("n/a".into(), |s| format!("{s:.2}"))
        );
        slopes.insert(q.key.to_string(), serde_json::json!(slope));
        let svg = dir.join(format!("cost-{}.svg", q.key));
        plot::plot_quantity(&results, q, slope, &svg)?;
    }
    let json = serde_json::json!({ "results": results, "slopes": slopes });
    let path = dir.join("cost.json");
    std::fs::write(
        &path,
        serde_json::to_string_pretty(&json).map_err(|e| e.to_string())?,
    )
    .map_err(|e| format!("{}: {e}", path.display()))?;
    eprintln!("cost: wrote {} and the SVGs beside it", path.display());
    Ok(())
}

fn main() -> ExitCode {
    // `cargo bench` passes `--bench`; only our own words count.
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let Some((action, sizes)) = args.split_first() else {
        eprintln!("usage: cargo bench --bench cost -- generate|measure|plot [SIZE...]");
        return ExitCode::from(2);
    };
    let mut parsed = Vec::new();
    for s in sizes {
        match parse_size(s) {
            Some(n) if n > 0 => parsed.push(n),
            _ => {
                eprintln!("`{s}` is not a size (10000, 10k, 1M)");
                return ExitCode::from(2);
            }
        }
    }
    let outcome = match action.as_str() {
        "generate" => parsed
            .iter()
            .try_for_each(|&n| ensure_library(n).map(|_| ())),
        "measure" => parsed.iter().try_for_each(|&n| measure(n)),
        "plot" => plot_all(),
        other => Err(format!(
            "unknown action `{other}`: generate, measure or plot"
        )),
    };
    match outcome {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("cost: {e}");
            ExitCode::FAILURE
        }
    }
}
