//! Harvesting real goal states from a Coq library by replaying its proofs with coqc.
//!
//! Takes the library's root folders, its Coq logical prefixes and a `coqc`; gives
//! [`GoalRecord`]s, one per tactic sentence that names a declaration: the goal coqc
//! displayed before the tactic, the premises the tactic names (from coqc's `.glob`), and
//! where it is. Each `.v` file is copied with markers inserted (`instrument`), compiled in
//! a temporary folder (`compile`), and its displays (`displays`) and references (`glob`)
//! are joined by marker number (`records`). Files run in parallel, one coqc each. A file
//! that does not compile costs only its own records. It needs the library's dependencies
//! compiled (`.vo` files beside the sources, or installed, as for the standard library);
//! it does not build them, and it does not index or rank anything.

pub mod compile;
pub mod displays;
pub mod glob;
pub mod instrument;
pub mod records;

use std::path::{Path, PathBuf};
use std::time::Duration;

use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;

pub use records::GoalRecord;

use crate::extract::walk::coq_project_prefixes;
use crate::extract::CoqPrefix;

/// How to harvest.
#[derive(Clone, Debug)]
pub struct HarvestOptions {
    pub roots: Vec<PathBuf>,
    pub coq_prefixes: Vec<CoqPrefix>,
    /// The coqc program.
    pub coqc: PathBuf,
    /// coqc is stopped on a file after this long.
    pub timeout_per_file: Duration,
    /// Files compiled at once; `None`: one per core.
    pub threads: Option<usize>,
    /// Show a progress bar (the caller decides: only on a terminal).
    pub progress: bool,
}

/// Why nothing could be harvested.
#[derive(Debug, thiserror::Error)]
pub enum HarvestError {
    #[error("library root `{0}` does not exist or is not a folder")]
    MissingRoot(PathBuf),
    #[error("no `.v` files under {0}")]
    NoSources(String),
    #[error("coqc `{0}` cannot be run ({1}); install Coq (e.g. apt-get install coq)")]
    NoCoqc(PathBuf, String),
    #[error("reading the `_CoqProject` in `{0}`: {1}")]
    CoqProject(PathBuf, String),
    #[error("could not start {0} worker threads: {1}")]
    Threads(usize, String),
}

/// A file that did not compile, and Coq's first error line (or the time limit).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FailedFile {
    pub file: String,
    pub error: String,
}

/// What a harvest did.
#[derive(Clone, Debug, Default)]
pub struct HarvestOutcome {
    /// Records of every replayed file, in file order.
    pub records: Vec<GoalRecord>,
    /// Files compiled with their markers.
    pub files_replayed: usize,
    /// Files that did not compile.
    pub failed: Vec<FailedFile>,
}

/// A `.v` file to replay.
#[derive(Clone, Debug)]
struct CoqFile {
    abs: PathBuf,
    /// Relative to its root, with `/` (as written in records).
    rel: String,
    /// Logical module, as quarry names it (`Coq.Arith.PeanoNat`).
    module: String,
    /// The prefix it is under, if any, and its path under that prefix's folder.
    prefix: Option<(CoqPrefix, PathBuf)>,
}

/// The name the copies of a library with logical name `logical` are compiled under: the
/// standard library (`Coq`) cannot be compiled again as `Coq` against the installed one,
/// so its copies are the library `Copy`.
fn copy_logical(logical: &str) -> String {
    match logical.strip_prefix("Coq") {
        Some(rest) if rest.is_empty() || rest.starts_with('.') => format!("Copy{rest}"),
        _ => logical.to_string(),
    }
}

/// Turns a name coqc wrote for a stdlib copy (`Copy.X`) back into quarry's (`Coq.X`).
fn quarry_name(name: &str) -> String {
    match name.strip_prefix("Copy.") {
        Some(rest) => format!("Coq.{rest}"),
        None => name.to_string(),
    }
}

fn canonical(p: &Path) -> PathBuf {
    std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf())
}

fn find_files(opts: &HarvestOptions) -> Result<(Vec<CoqFile>, Vec<CoqPrefix>), HarvestError> {
    let mut files = Vec::new();
    let mut prefixes: Vec<CoqPrefix> = opts
        .coq_prefixes
        .iter()
        .map(|p| CoqPrefix {
            logical: p.logical.clone(),
            dir: canonical(&p.dir),
        })
        .collect();
    let mut per_root = Vec::new();
    for root in &opts.roots {
        if !root.is_dir() {
            return Err(HarvestError::MissingRoot(root.clone()));
        }
        let root = canonical(root);
        let mut here = Vec::new();
        for entry in ignore::WalkBuilder::new(&root)
            .require_git(false)
            .follow_links(false)
            .build()
            .flatten()
        {
            let path = entry.path();
            if !entry.file_type().is_some_and(|t| t.is_file()) {
                continue;
            }
            if entry.file_name() == "_CoqProject" {
                if let Some(dir) = path.parent() {
                    prefixes.extend(
                        coq_project_prefixes(dir)
                            .map_err(|e| {
                                HarvestError::CoqProject(dir.to_path_buf(), e.to_string())
                            })?
                            .into_iter()
                            .map(|p| CoqPrefix {
                                logical: p.logical,
                                dir: canonical(&p.dir),
                            }),
                    );
                }
            } else if path.extension().is_some_and(|e| e == "v") {
                here.push(path.to_path_buf());
            }
        }
        per_root.push((root, here));
    }
    for (root, paths) in per_root {
        for abs in paths {
            let rel = slash_path(abs.strip_prefix(&root).unwrap_or(&abs));
            let prefix = prefixes
                .iter()
                .filter(|p| abs.starts_with(&p.dir))
                .max_by_key(|p| p.dir.components().count())
                .and_then(|p| Some((p.clone(), abs.strip_prefix(&p.dir).ok()?.to_path_buf())));
            let under = match &prefix {
                Some((_, under)) => under.clone(),
                None => abs.strip_prefix(&root).unwrap_or(&abs).to_path_buf(),
            };
            let dotted = slash_path(&under.with_extension("")).replace('/', ".");
            let module = match &prefix {
                Some((p, _)) if !p.logical.is_empty() => format!("{}.{dotted}", p.logical),
                _ => dotted,
            };
            files.push(CoqFile {
                abs,
                rel,
                module,
                prefix,
            });
        }
    }
    files.sort_by(|a, b| a.rel.cmp(&b.rel).then(a.abs.cmp(&b.abs)));
    Ok((files, prefixes))
}

fn slash_path(p: &Path) -> String {
    p.components()
        .map(|c| c.as_os_str().to_string_lossy().into_owned())
        .collect::<Vec<_>>()
        .join("/")
}

/// Checks that `coqc` runs (`coqc --version`).
fn check_coqc(coqc: &Path) -> Result<(), HarvestError> {
    match std::process::Command::new(coqc).arg("--version").output() {
        Ok(o) if o.status.success() => Ok(()),
        Ok(o) => Err(HarvestError::NoCoqc(
            coqc.into(),
            format!("`--version` exited {}", o.status),
        )),
        Err(e) => Err(HarvestError::NoCoqc(coqc.into(), e.to_string())),
    }
}

/// Replays every `.v` file under the roots and harvests its goal states.
pub fn harvest(opts: &HarvestOptions) -> Result<HarvestOutcome, HarvestError> {
    check_coqc(&opts.coqc)?;
    let (files, prefixes) = find_files(opts)?;
    if files.is_empty() {
        let roots: Vec<String> = opts.roots.iter().map(|r| r.display().to_string()).collect();
        return Err(HarvestError::NoSources(roots.join(", ")));
    }
    let threads = opts.threads.unwrap_or_else(|| {
        std::thread::available_parallelism().map_or(1, std::num::NonZeroUsize::get)
    });
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|e| HarvestError::Threads(threads, e.to_string()))?;
    let bar = if opts.progress {
        let bar = ProgressBar::new(files.len() as u64);
        if let Ok(style) =
            ProgressStyle::with_template("{bar:40} {pos}/{len} files replayed, {elapsed} {msg}")
        {
            bar.set_style(style);
        }
        bar
    } else {
        ProgressBar::hidden()
    };
    let results: Vec<Result<Vec<GoalRecord>, FailedFile>> = pool.install(|| {
        files
            .par_iter()
            .map(|f| {
                let r = replay(f, &prefixes, opts).map_err(|error| FailedFile {
                    file: f.rel.clone(),
                    error,
                });
                bar.inc(1);
                r
            })
            .collect()
    });
    bar.finish_and_clear();
    let mut outcome = HarvestOutcome::default();
    for r in results {
        match r {
            Ok(records) => {
                outcome.files_replayed += 1;
                outcome.records.extend(records);
            }
            Err(failed) => outcome.failed.push(failed),
        }
    }
    Ok(outcome)
}

/// Instruments, compiles and reads one file; the error is the message for the summary.
fn replay(
    f: &CoqFile,
    prefixes: &[CoqPrefix],
    opts: &HarvestOptions,
) -> Result<Vec<GoalRecord>, String> {
    let bytes = std::fs::read(&f.abs).map_err(|e| format!("cannot read: {e}"))?;
    let text = crate::extract::walk::read_source(&bytes).map_err(|d| d.message)?;
    let inst = instrument::instrument(&f.module, text);
    if inst.sentences.is_empty() {
        return Ok(Vec::new());
    }
    let dir = tempfile::tempdir().map_err(|e| format!("no temporary folder: {e}"))?;
    let (copy_rel, own_logical) = match &f.prefix {
        Some((p, under)) => (under.clone(), copy_logical(&p.logical)),
        None => (
            PathBuf::from(f.abs.file_name().unwrap_or_default()),
            String::new(),
        ),
    };
    let copy = dir.path().join("src").join(&copy_rel);
    if let Some(parent) = copy.parent() {
        std::fs::create_dir_all(parent).map_err(|e| format!("cannot create a copy: {e}"))?;
    }
    std::fs::write(&copy, &inst.text).map_err(|e| format!("cannot write the copy: {e}"))?;
    // The other libraries (compiled where they are), then the copy as its own library.
    let mut load_path = Vec::new();
    for p in prefixes {
        if copy_logical(&p.logical) != p.logical {
            continue; // the installed standard library is loaded by coqc itself
        }
        load_path.extend([
            "-R".to_string(),
            p.dir.display().to_string(),
            p.logical.clone(),
        ]);
    }
    load_path.extend([
        "-Q".to_string(),
        dir.path().join("src").display().to_string(),
        own_logical,
    ]);
    let stdlib_copy = f
        .prefix
        .as_ref()
        .is_some_and(|(p, _)| copy_logical(&p.logical) != p.logical);
    let compiled = compile::compile(
        &opts.coqc,
        &load_path,
        dir.path(),
        &copy,
        opts.timeout_per_file,
    )
    .map_err(|e| e.to_string())?;
    let shown = displays::displays(&compiled.stdout);
    let refs = glob::references(&compiled.glob);
    Ok(records::file_records(
        &f.rel,
        text,
        &inst,
        &shown,
        &refs,
        &|name: &str| {
            if stdlib_copy {
                quarry_name(name)
            } else {
                name.to_string()
            }
        },
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stdlib_copies_are_renamed_both_ways() {
        assert_eq!(copy_logical("Coq"), "Copy");
        assert_eq!(copy_logical("Coq.Arith"), "Copy.Arith");
        assert_eq!(copy_logical("Coquelicot"), "Coquelicot");
        assert_eq!(
            quarry_name("Copy.Arith.PeanoNat.Nat.add_0_r"),
            "Coq.Arith.PeanoNat.Nat.add_0_r"
        );
        assert_eq!(quarry_name("Coq.Init.Logic.I"), "Coq.Init.Logic.I");
    }

    #[test]
    fn a_missing_root_and_a_missing_coqc_are_errors() {
        let opts = HarvestOptions {
            roots: vec![PathBuf::from("/no/such/folder")],
            coq_prefixes: Vec::new(),
            coqc: PathBuf::from("/no/such/coqc"),
            timeout_per_file: Duration::from_secs(1),
            threads: Some(1),
            progress: false,
        };
        assert!(matches!(harvest(&opts), Err(HarvestError::NoCoqc(..))));
        assert!(matches!(
            find_files(&opts),
            Err(HarvestError::MissingRoot(_))
        ));
    }
}
