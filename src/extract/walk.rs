//! Walking a library: find the source files under its roots, name their modules, read them
//! safely, and extract them in parallel.
//!
//! Takes root folders and options; gives a [`Library`]. Files are found with the `ignore`
//! crate (so `.gitignore` and hidden folders such as `.lake` are respected), sorted, and
//! extracted with rayon; the output is the same whatever the thread count. A file that
//! cannot be read (not UTF-8, binary, a single line over the limit) is recorded with a
//! diagnostic and skipped; the rest of the library is still extracted.

use std::path::{Path, PathBuf};

use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;

use super::resolve::{assemble, ExtractedFile};
use crate::library::{
    Diagnostic, FileId, Language, Library, ReferenceCounts, Severity, SourceFile,
};

/// The longest single line quarry reads; longer lines mean generated or binary data.
pub const MAX_LINE_BYTES: usize = 1 << 20;
/// The largest file quarry reads.
pub const MAX_FILE_BYTES: u64 = 64 << 20;

/// One root folder of a library.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LibraryRoot {
    pub path: PathBuf,
}

/// A Coq logical prefix: files under `dir` have module names starting with `logical`
/// (as `-R dir Logical` / `-Q dir Logical` in a `_CoqProject`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CoqPrefix {
    pub logical: String,
    pub dir: PathBuf,
}

impl CoqPrefix {
    /// Parses `Name=DIR` as given to `--coq-prefix`.
    pub fn parse(text: &str) -> Result<CoqPrefix, String> {
        let (logical, dir) = text
            .split_once('=')
            .ok_or_else(|| format!("`{text}` is not of the form Name=DIR"))?;
        let valid = !logical.is_empty()
            && logical.split('.').all(|p| {
                !p.is_empty()
                    && p.chars()
                        .all(|c| c.is_alphanumeric() || c == '_' || c == '\'')
            });
        if !valid && !logical.is_empty() {
            return Err(format!("`{logical}` in `{text}` is not a Coq logical name"));
        }
        if dir.is_empty() {
            return Err(format!("`{text}` names no folder after `=`"));
        }
        Ok(CoqPrefix {
            logical: logical.to_string(),
            dir: PathBuf::from(dir),
        })
    }
}

/// How to build a library model.
#[derive(Clone, Debug, Default)]
pub struct BuildOptions {
    pub roots: Vec<PathBuf>,
    pub coq_prefixes: Vec<CoqPrefix>,
    /// Worker threads; `None` uses rayon's default (one per core).
    pub threads: Option<usize>,
    /// Show a progress bar (the caller decides: only on an interactive terminal).
    pub progress: bool,
}

/// Why a library could not be built at all.
#[derive(Debug, thiserror::Error)]
pub enum WalkError {
    #[error("library root `{0}` does not exist or is not a folder")]
    MissingRoot(PathBuf),
    #[error("no `.lean` or `.v` source files under {0}")]
    NoSources(String),
    #[error("none of the {0} source files could be read (see the diagnostics)")]
    NothingReadable(usize, Box<Library>),
    #[error("could not start {0} worker threads: {1}")]
    Threads(usize, String),
    #[error("reading `_CoqProject` in `{0}`: {1}")]
    CoqProject(PathBuf, std::io::Error),
}

/// A found source file before reading.
#[derive(Clone, Debug)]
struct Found {
    root: u32,
    abs: PathBuf,
    rel: String,
    language: Language,
    module: String,
}

/// Reads the `-R`/`-Q` lines of a `_CoqProject` in `root`, if there is one; their folders
/// are relative to `root`.
pub fn coq_project_prefixes(root: &Path) -> Result<Vec<CoqPrefix>, WalkError> {
    let path = root.join("_CoqProject");
    let text = match std::fs::read_to_string(&path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(WalkError::CoqProject(root.to_path_buf(), e)),
    };
    let words: Vec<&str> = text
        .lines()
        .map(|l| l.split('#').next().unwrap_or(""))
        .flat_map(|l| l.split_whitespace())
        .collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < words.len() {
        if (words[i] == "-R" || words[i] == "-Q") && i + 2 < words.len() {
            let dir = words[i + 1].trim_matches('"');
            out.push(CoqPrefix {
                logical: words[i + 2].trim_matches('"').to_string(),
                dir: root.join(dir),
            });
            i += 3;
        } else {
            i += 1;
        }
    }
    Ok(out)
}

/// The module name of a source file: Lean, the path under the root with `.` for `/`; Coq,
/// the logical prefix whose folder holds it (the longest match) followed by the path under
/// that folder, else the path under the root.
fn module_name(language: Language, root: &Path, abs: &Path, prefixes: &[CoqPrefix]) -> String {
    let rel_under = |base: &Path| -> Option<String> {
        let rel = abs.strip_prefix(base).ok()?;
        let stem = rel.with_extension("");
        let parts: Vec<String> = stem
            .components()
            .map(|c| c.as_os_str().to_string_lossy().into_owned())
            .collect();
        Some(parts.join("."))
    };
    if language == Language::Coq {
        let mut best: Option<(&CoqPrefix, usize)> = None;
        for p in prefixes {
            let dir = canonical(&p.dir);
            if abs.starts_with(&dir) {
                let depth = dir.components().count();
                if best.is_none_or(|(_, d)| depth > d) {
                    best = Some((p, depth));
                }
            }
        }
        if let Some((p, _)) = best {
            let rest = rel_under(&canonical(&p.dir)).unwrap_or_default();
            return match (p.logical.is_empty(), rest.is_empty()) {
                (true, _) => rest,
                (false, true) => p.logical.clone(),
                (false, false) => format!("{}.{}", p.logical, rest),
            };
        }
    }
    rel_under(root).unwrap_or_default()
}

fn canonical(p: &Path) -> PathBuf {
    std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf())
}

/// Files that mark the base folder of a Lean package: module names start below it.
const LEAN_PACKAGE_FILES: [&str; 2] = ["lakefile.lean", "lakefile.toml"];

/// The folder Lean module names of `path` start from: the nearest folder at or below
/// `root` holding a lakefile, else `root`.
fn lean_base(root: &Path, path: &Path, packages: &[PathBuf]) -> PathBuf {
    packages
        .iter()
        .filter(|p| path.starts_with(p))
        .max_by_key(|p| p.components().count())
        .cloned()
        .unwrap_or_else(|| root.to_path_buf())
}

fn find_sources(opts: &BuildOptions) -> Result<(Vec<String>, Vec<Found>), WalkError> {
    let mut roots = Vec::new();
    let mut found = Vec::new();
    for (ri, root) in opts.roots.iter().enumerate() {
        if !root.is_dir() {
            return Err(WalkError::MissingRoot(root.clone()));
        }
        let root_abs = canonical(root);
        roots.push(root_abs.to_string_lossy().into_owned());
        // One walk: the sources, and the project files that say how to name their modules
        // (`_CoqProject` anywhere under the root, lakefiles for Lean packages).
        let mut sources = Vec::new();
        let mut coq_projects = Vec::new();
        let mut lean_packages = Vec::new();
        for entry in ignore::WalkBuilder::new(&root_abs)
            .require_git(false)
            .follow_links(false)
            .build()
            .flatten()
        {
            let path = entry.path();
            if !entry.file_type().is_some_and(|t| t.is_file()) {
                continue;
            }
            let name = entry.file_name().to_string_lossy();
            if name == "_CoqProject" {
                if let Some(dir) = path.parent() {
                    coq_projects.push(dir.to_path_buf());
                }
            } else if LEAN_PACKAGE_FILES.contains(&name.as_ref()) {
                if let Some(dir) = path.parent() {
                    lean_packages.push(dir.to_path_buf());
                }
            } else if let Some(language) = Language::of_path(path) {
                sources.push((path.to_path_buf(), language));
            }
        }
        let mut prefixes = opts.coq_prefixes.clone();
        coq_projects.sort();
        for dir in &coq_projects {
            prefixes.extend(coq_project_prefixes(dir)?);
        }
        let mut here = Vec::new();
        for (path, language) in sources {
            let rel = path
                .strip_prefix(&root_abs)
                .unwrap_or(&path)
                .components()
                .map(|c| c.as_os_str().to_string_lossy().into_owned())
                .collect::<Vec<_>>()
                .join("/");
            let base = match language {
                Language::Lean => lean_base(&root_abs, &path, &lean_packages),
                Language::Coq => root_abs.clone(),
            };
            let module = module_name(language, &base, &path, &prefixes);
            here.push(Found {
                root: ri as u32,
                abs: path,
                rel,
                language,
                module,
            });
        }
        here.sort_by(|a, b| a.rel.cmp(&b.rel));
        found.extend(here);
    }
    Ok((roots, found))
}

/// Reads a file's bytes and checks that they are text quarry can extract. Returns the text,
/// or the diagnostic that says why the file is skipped.
pub fn read_source(bytes: &[u8]) -> Result<&str, Diagnostic> {
    let skip = |line: u32, message: String| Diagnostic {
        severity: Severity::Error,
        line,
        column: 1,
        message,
    };
    if let Some(pos) = bytes.iter().position(|&b| b == 0) {
        let line = bytes[..pos].iter().filter(|&&b| b == b'\n').count() as u32 + 1;
        return Err(skip(line, "binary file: contains a NUL byte".into()));
    }
    let text = std::str::from_utf8(bytes).map_err(|e| {
        let at = e.valid_up_to();
        let line = bytes[..at].iter().filter(|&&b| b == b'\n').count() as u32 + 1;
        skip(
            line,
            format!(
                "not UTF-8: invalid byte 0x{:02x} at byte offset {at}",
                bytes[at]
            ),
        )
    })?;
    for (line_no, line) in (1u32..).zip(text.split('\n')) {
        if line.len() > MAX_LINE_BYTES {
            return Err(skip(
                line_no,
                format!(
                    "line {line_no} is {} bytes long, over the {} byte limit for one line \
                     (generated or binary data?)",
                    line.len(),
                    MAX_LINE_BYTES
                ),
            ));
        }
    }
    Ok(text)
}

fn extract_found(f: &Found) -> ExtractedFile {
    let mut record = SourceFile {
        id: FileId(0),
        path: f.rel.clone(),
        root: f.root,
        language: f.language,
        module: None,
        content_hash: String::new(),
        bytes: 0,
        diagnostics: Vec::new(),
        references: ReferenceCounts::default(),
    };
    let skipped = |mut record: SourceFile, d: Diagnostic| ExtractedFile {
        file: {
            record.diagnostics.push(d);
            record
        },
        module_name: f.module.clone(),
        extraction: Default::default(),
    };
    match std::fs::metadata(&f.abs) {
        Ok(m) if m.len() > MAX_FILE_BYTES => {
            record.bytes = m.len();
            return skipped(
                record,
                Diagnostic {
                    severity: Severity::Error,
                    line: 1,
                    column: 1,
                    message: format!("{} bytes, over the {MAX_FILE_BYTES} byte limit", m.len()),
                },
            );
        }
        _ => {}
    }
    let bytes = match std::fs::read(&f.abs) {
        Ok(b) => b,
        Err(e) => {
            return skipped(
                record,
                Diagnostic {
                    severity: Severity::Error,
                    line: 1,
                    column: 1,
                    message: format!("cannot read: {e}"),
                },
            )
        }
    };
    record.bytes = bytes.len() as u64;
    record.content_hash = blake3::hash(&bytes).to_hex().to_string();
    let text = match read_source(&bytes) {
        Ok(t) => t,
        Err(d) => return skipped(record, d),
    };
    if text.trim().is_empty() {
        record.diagnostics.push(Diagnostic {
            severity: Severity::Warning,
            line: 1,
            column: 1,
            message: "empty file: no declarations".into(),
        });
    }
    let extraction = super::extract_text(f.language, &f.module, text);
    ExtractedFile {
        file: record,
        module_name: f.module.clone(),
        extraction,
    }
}

/// Finds, reads, extracts and resolves a whole library.
///
/// Fails only when a root is missing, no source file exists, or none could be read; every
/// other problem is a diagnostic on its file.
pub fn build_library(opts: &BuildOptions) -> Result<Library, WalkError> {
    let (roots, found) = find_sources(opts)?;
    if found.is_empty() {
        let list = opts
            .roots
            .iter()
            .map(|r| format!("`{}`", r.display()))
            .collect::<Vec<_>>()
            .join(", ");
        return Err(WalkError::NoSources(list));
    }
    let run = || {
        let bar = if opts.progress {
            let bar = ProgressBar::new(found.len() as u64);
            if let Ok(style) =
                ProgressStyle::with_template("{msg:>10} [{bar:40}] {pos}/{len} files ({eta})")
            {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_message("extracting");
            bar
        } else {
            ProgressBar::hidden()
        };
        let files: Vec<ExtractedFile> = found
            .par_iter()
            .map(|f| {
                let e = extract_found(f);
                bar.inc(1);
                e
            })
            .collect();
        bar.finish_and_clear();
        assemble(roots, files)
    };
    let library = match opts.threads {
        Some(t) => rayon::ThreadPoolBuilder::new()
            .num_threads(t)
            .build()
            .map_err(|e| WalkError::Threads(t, e.to_string()))?
            .install(run),
        None => run(),
    };
    let unreadable = library
        .files
        .iter()
        .filter(|f| f.diagnostics.iter().any(|d| d.severity == Severity::Error))
        .count();
    if unreadable == library.files.len() {
        return Err(WalkError::NothingReadable(unreadable, Box::new(library)));
    }
    Ok(library)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn read_source_rejects_binary_bad_utf8_and_huge_lines() {
        assert!(read_source(b"Lemma a : True.\n").is_ok());
        let e = read_source(b"ok\n\x00bin").unwrap_err();
        assert_eq!(e.line, 2);
        assert!(e.message.contains("NUL"));
        let e = read_source(b"a\nb\n\xff").unwrap_err();
        assert_eq!(e.line, 3);
        assert!(e.message.contains("not UTF-8"));
        let long = vec![b'x'; MAX_LINE_BYTES + 1];
        let e = read_source(&long).unwrap_err();
        assert!(e.message.contains("limit for one line"));
    }

    #[test]
    fn coq_prefix_parses_and_rejects() {
        let p = CoqPrefix::parse("Ledger=theories").unwrap();
        assert_eq!(p.logical, "Ledger");
        assert!(CoqPrefix::parse("noequals").is_err());
        assert!(CoqPrefix::parse("Bad Name=x").is_err());
        assert!(CoqPrefix::parse("Ok=").is_err());
    }
}
