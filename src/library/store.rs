//! The on-disk form of an index: a folder of generations, each a manifest and its parts.
//!
//! Takes a [`Library`] (and, from later stages, further parts such as the lexical index);
//! gives an index folder that readers open without ever seeing a half-written build:
//!
//! ```text
//! INDEX_DIR/
//!   CURRENT                 one line: the name of the live generation folder
//!   gen-<build id>/         a finished build, never modified after it is renamed into place
//!     manifest.json         format version, quarry version, settings, file hashes, counts,
//!                           and the size and BLAKE3 checksum of every part
//!     library.bin           declarations, modules, files (postcard)
//!     graph.bin             the dependency graph's CSR arrays (postcard)
//!   .build-<build id>/      a build in progress (ignored by readers, removed on success)
//! ```
//!
//! A build writes everything into `.build-*`, syncs it, renames it to `gen-*`, then replaces
//! `CURRENT` by renaming a new file over it: a crash at any point leaves the previous
//! generation live and intact. It does not know what the parts mean beyond the library
//! model; other stages add their parts through [`GenerationWriter`].

use std::collections::BTreeMap;
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::SystemTime;

use serde::{Deserialize, Serialize};

use super::graph::DependencyGraph;
use super::model::{DeclKind, Library, Severity};

/// The format version this build writes and reads.
pub const FORMAT_VERSION: u32 = 1;
/// The `format` field of every manifest.
pub const FORMAT_NAME: &str = "quarry-index";
const CURRENT: &str = "CURRENT";
const MANIFEST: &str = "manifest.json";
const LIBRARY_PART: &str = "library.bin";
const GRAPH_PART: &str = "graph.bin";

/// What went wrong reading or writing an index, with the file concerned.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    #[error(
        "`{0}` is not a quarry index folder (no `CURRENT` file); build one with `quarry build`"
    )]
    NotAnIndex(PathBuf),
    #[error("`{0}` exists and is not a quarry index folder: refusing to write into it")]
    WouldOverwrite(PathBuf),
    #[error("`{path}`: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("`{path}`: {message}")]
    Corrupt { path: PathBuf, message: String },
    #[error(
        "`{path}`: index format version {found}, this quarry reads version {expected}; rebuild the index"
    )]
    Version {
        path: PathBuf,
        found: u32,
        expected: u32,
    },
}

fn io_err(path: &Path) -> impl FnOnce(std::io::Error) -> StoreError + '_ {
    move |source| StoreError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Size and checksum of one part of a generation.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct PartRecord {
    pub bytes: u64,
    /// BLAKE3 of the file's bytes (for a folder part: of every file's relative path and
    /// bytes, in sorted order), hex.
    pub blake3: String,
}

/// One source file as recorded in the manifest.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ManifestFile {
    pub path: String,
    pub root: u32,
    pub language: String,
    pub blake3: String,
    pub bytes: u64,
}

/// Counts a person (or `quarry inspect`) wants without loading the payload.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counts {
    pub files: u64,
    pub files_with_errors: u64,
    pub files_with_warnings: u64,
    pub modules: u64,
    pub declarations: u64,
    pub declarations_by_kind: BTreeMap<String, u64>,
    pub proof_edges: u64,
    pub statement_edges: u64,
    pub references_resolved: u64,
    pub references_unresolved: u64,
    pub references_ambiguous: u64,
    pub references_dot_on_local: u64,
}

impl Counts {
    /// Counts of `library`.
    pub fn of(library: &Library) -> Counts {
        let mut by_kind: BTreeMap<String, u64> = DeclKind::ALL
            .iter()
            .map(|k| (k.as_str().to_string(), 0))
            .collect();
        for d in &library.declarations {
            *by_kind.entry(d.kind.as_str().to_string()).or_default() += 1;
        }
        let refs = library.reference_totals();
        let with = |s: Severity| {
            library
                .files
                .iter()
                .filter(|f| f.diagnostics.iter().any(|d| d.severity == s))
                .count() as u64
        };
        Counts {
            files: library.files.len() as u64,
            files_with_errors: with(Severity::Error),
            files_with_warnings: with(Severity::Warning),
            modules: library.modules.len() as u64,
            declarations: library.declarations.len() as u64,
            declarations_by_kind: by_kind,
            proof_edges: library.graph.proof_uses.edge_count() as u64,
            statement_edges: library.graph.statement_uses.edge_count() as u64,
            references_resolved: refs.resolved as u64,
            references_unresolved: refs.unresolved as u64,
            references_ambiguous: refs.ambiguous as u64,
            references_dot_on_local: refs.dot_on_local as u64,
        }
    }
}

/// The manifest of one generation: everything needed to check and describe it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Always [`FORMAT_NAME`].
    pub format: String,
    pub format_version: u32,
    pub quarry_version: String,
    /// Unique per build: creation time and a hash of the inputs.
    pub build_id: String,
    /// RFC 3339, UTC, seconds.
    pub created: String,
    /// The settings the build ran with (roots, prefixes, and those of later stages).
    pub settings: BTreeMap<String, serde_json::Value>,
    pub files: Vec<ManifestFile>,
    pub counts: Counts,
    /// Every part of the generation by relative path.
    pub parts: BTreeMap<String, PartRecord>,
}

/// A generation being written. Parts go into a hidden folder; [`GenerationWriter::commit`]
/// makes it live atomically.
pub struct GenerationWriter {
    index_dir: PathBuf,
    staging: PathBuf,
    build_id: String,
    created: String,
    parts: BTreeMap<String, PartRecord>,
    committed: bool,
    /// Held locked while the build lives; the kernel releases it when the process dies, so
    /// another build can tell a dead build's staging folder from a running one's.
    _lock: fs::File,
}

/// The lock file inside a staging folder.
const STAGING_LOCK: &str = ".lock";

impl GenerationWriter {
    /// Starts a generation in `index_dir` (created if missing). Refuses a folder that exists,
    /// is not empty and is not a quarry index, so a wrong `--out` never destroys anything.
    pub fn create(index_dir: &Path, inputs_hash: &str) -> Result<GenerationWriter, StoreError> {
        if index_dir.exists() {
            let is_index = index_dir.join(CURRENT).is_file();
            let empty = fs::read_dir(index_dir)
                .map_err(io_err(index_dir))?
                .next()
                .is_none();
            if !is_index && !empty {
                return Err(StoreError::WouldOverwrite(index_dir.to_path_buf()));
            }
        } else {
            fs::create_dir_all(index_dir).map_err(io_err(index_dir))?;
        }
        let now = SystemTime::now();
        let created = humantime::format_rfc3339_seconds(now).to_string();
        let nanos = now
            .duration_since(SystemTime::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or(0);
        let stamp = created.replace([':', '-'], "");
        let salt = blake3::hash(format!("{inputs_hash}{nanos}{}", std::process::id()).as_bytes())
            .to_hex()
            .to_string();
        let build_id = format!("{}-{}", stamp.trim_end_matches('Z'), &salt[..12]);
        let staging = index_dir.join(format!(".build-{build_id}"));
        fs::create_dir_all(&staging).map_err(io_err(&staging))?;
        let lock_path = staging.join(STAGING_LOCK);
        let lock = fs::File::create(&lock_path).map_err(io_err(&lock_path))?;
        lock.try_lock().map_err(|e| StoreError::Io {
            path: lock_path.clone(),
            source: match e {
                fs::TryLockError::Error(e) => e,
                fs::TryLockError::WouldBlock => std::io::Error::other("locked by another build"),
            },
        })?;
        Ok(GenerationWriter {
            index_dir: index_dir.to_path_buf(),
            staging,
            build_id,
            created,
            parts: BTreeMap::new(),
            committed: false,
            _lock: lock,
        })
    }

    /// The build id this generation will carry.
    pub fn build_id(&self) -> &str {
        &self.build_id
    }

    /// The folder parts are written into (for parts that write a folder themselves, such as
    /// a tantivy index); register them with [`GenerationWriter::record_folder`].
    pub fn staging_dir(&self) -> &Path {
        &self.staging
    }

    /// Writes one file part, synced to disk, and records its checksum.
    pub fn write_part(&mut self, name: &str, bytes: &[u8]) -> Result<(), StoreError> {
        let path = self.staging.join(name);
        if let Some(parent) = path.parent() {
            fs::create_dir_all(parent).map_err(io_err(parent))?;
        }
        let mut f = fs::File::create(&path).map_err(io_err(&path))?;
        f.write_all(bytes).map_err(io_err(&path))?;
        f.sync_all().map_err(io_err(&path))?;
        self.parts.insert(
            name.to_string(),
            PartRecord {
                bytes: bytes.len() as u64,
                blake3: blake3::hash(bytes).to_hex().to_string(),
            },
        );
        Ok(())
    }

    /// Records a folder part that a later stage wrote under the staging folder itself.
    pub fn record_folder(&mut self, name: &str) -> Result<(), StoreError> {
        let path = self.staging.join(name);
        let record = folder_checksum(&path)?;
        self.parts.insert(name.to_string(), record);
        Ok(())
    }

    /// Writes the library model's parts.
    pub fn write_library(&mut self, library: &Library) -> Result<(), StoreError> {
        let mut without_graph = library.clone();
        let graph = std::mem::take(&mut without_graph.graph);
        let lib_bytes = postcard::to_stdvec(&without_graph).map_err(|e| StoreError::Corrupt {
            path: self.staging.join(LIBRARY_PART),
            message: format!("cannot encode the library: {e}"),
        })?;
        self.write_part(LIBRARY_PART, &lib_bytes)?;
        let graph_bytes = postcard::to_stdvec(&graph).map_err(|e| StoreError::Corrupt {
            path: self.staging.join(GRAPH_PART),
            message: format!("cannot encode the graph: {e}"),
        })?;
        self.write_part(GRAPH_PART, &graph_bytes)
    }

    /// Writes the manifest, renames the generation into place and points `CURRENT` at it.
    /// Older generations except the one it replaces are removed (a running server may still
    /// be reading the one it replaces).
    pub fn commit(
        mut self,
        library: &Library,
        settings: BTreeMap<String, serde_json::Value>,
    ) -> Result<PathBuf, StoreError> {
        let manifest = Manifest {
            format: FORMAT_NAME.to_string(),
            format_version: FORMAT_VERSION,
            quarry_version: env!("CARGO_PKG_VERSION").to_string(),
            build_id: self.build_id.clone(),
            created: self.created.clone(),
            settings,
            files: library
                .files
                .iter()
                .map(|f| ManifestFile {
                    path: f.path.clone(),
                    root: f.root,
                    language: f.language.as_str().to_string(),
                    blake3: f.content_hash.clone(),
                    bytes: f.bytes,
                })
                .collect(),
            counts: Counts::of(library),
            parts: self.parts.clone(),
        };
        let json = serde_json::to_vec_pretty(&manifest).map_err(|e| StoreError::Corrupt {
            path: self.staging.join(MANIFEST),
            message: format!("cannot encode the manifest: {e}"),
        })?;
        let manifest_path = self.staging.join(MANIFEST);
        let mut f = fs::File::create(&manifest_path).map_err(io_err(&manifest_path))?;
        f.write_all(&json).map_err(io_err(&manifest_path))?;
        f.sync_all().map_err(io_err(&manifest_path))?;
        sync_dir(&self.staging)?;

        let gen_name = format!("gen-{}", self.build_id);
        let gen_dir = self.index_dir.join(&gen_name);
        // The lock file is not a part of the generation; the open handle keeps the lock
        // until the writer is dropped.
        let lock_path = self.staging.join(STAGING_LOCK);
        fs::remove_file(&lock_path).map_err(io_err(&lock_path))?;
        fs::rename(&self.staging, &gen_dir).map_err(io_err(&gen_dir))?;
        self.committed = true;
        let previous = read_current(&self.index_dir).ok();
        let tmp = self.index_dir.join(format!(".{CURRENT}.{}", self.build_id));
        let mut f = fs::File::create(&tmp).map_err(io_err(&tmp))?;
        f.write_all(format!("{gen_name}\n").as_bytes())
            .map_err(io_err(&tmp))?;
        f.sync_all().map_err(io_err(&tmp))?;
        let current = self.index_dir.join(CURRENT);
        fs::rename(&tmp, &current).map_err(io_err(&current))?;
        sync_dir(&self.index_dir)?;
        remove_stale(&self.index_dir, &gen_name, previous.as_deref());
        Ok(gen_dir)
    }
}

impl Drop for GenerationWriter {
    fn drop(&mut self) {
        if !self.committed {
            // A failed build removes its own staging folder; the live generation is untouched.
            let _ = fs::remove_dir_all(&self.staging);
        }
    }
}

fn sync_dir(dir: &Path) -> Result<(), StoreError> {
    fs::File::open(dir)
        .and_then(|d| d.sync_all())
        .map_err(io_err(dir))
}

/// Removes generations other than `keep` and `previous`, and staging folders of builds that
/// died: a staging folder whose lock no process holds (a killed build's: the kernel
/// released it), or one without a lock file not written to for an hour (a build that died
/// between creating its folder and its lock). A running build's folder is left alone.
fn remove_stale(index_dir: &Path, keep: &str, previous: Option<&str>) {
    let Ok(entries) = fs::read_dir(index_dir) else {
        return;
    };
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let old_gen = name.starts_with("gen-") && name != keep && Some(name.as_str()) != previous;
        let dead_build = name.starts_with(".build-") && staging_is_dead(&e.path());
        if old_gen || dead_build {
            let _ = fs::remove_dir_all(e.path());
        }
    }
}

/// Whether the staging folder `dir` belongs to a build that is no longer running.
fn staging_is_dead(dir: &Path) -> bool {
    match fs::File::open(dir.join(STAGING_LOCK)) {
        // Taken: no live process holds it. The handle drops (unlocking) before the removal.
        Ok(lock) => lock.try_lock().is_ok(),
        Err(_) => fs::metadata(dir)
            .and_then(|m| m.modified())
            .ok()
            .and_then(|t| t.elapsed().ok())
            .is_some_and(|age| age.as_secs() > 3600),
    }
}

fn read_current(index_dir: &Path) -> Result<String, StoreError> {
    let path = index_dir.join(CURRENT);
    let text = match fs::read_to_string(&path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(StoreError::NotAnIndex(index_dir.to_path_buf()))
        }
        Err(e) => return Err(io_err(&path)(e)),
    };
    let name = text.trim();
    let valid =
        name.starts_with("gen-") && !name.contains(['/', '\\']) && name != "." && name != "..";
    if !valid {
        return Err(StoreError::Corrupt {
            path,
            message: format!(
                "does not name a generation folder: `{}`",
                name.escape_debug()
            ),
        });
    }
    Ok(name.to_string())
}

/// BLAKE3 over a folder's files: relative path and bytes of each, in sorted order.
fn folder_checksum(dir: &Path) -> Result<PartRecord, StoreError> {
    let mut files = Vec::new();
    collect_files(dir, dir, &mut files)?;
    files.sort();
    let mut hasher = blake3::Hasher::new();
    let mut bytes = 0u64;
    for rel in files {
        let path = dir.join(&rel);
        let data = fs::read(&path).map_err(io_err(&path))?;
        hasher.update(rel.as_bytes());
        hasher.update(&[0]);
        hasher.update(&(data.len() as u64).to_le_bytes());
        hasher.update(&data);
        bytes += data.len() as u64;
    }
    Ok(PartRecord {
        bytes,
        blake3: hasher.finalize().to_hex().to_string(),
    })
}

fn collect_files(base: &Path, dir: &Path, out: &mut Vec<String>) -> Result<(), StoreError> {
    for e in fs::read_dir(dir).map_err(io_err(dir))? {
        let e = e.map_err(io_err(dir))?;
        let path = e.path();
        let ty = e.file_type().map_err(io_err(&path))?;
        if ty.is_dir() {
            collect_files(base, &path, out)?;
        } else if ty.is_file() {
            // tantivy keeps a lock file that changes while the index is open; it holds no data.
            let name = e.file_name().to_string_lossy().into_owned();
            if name.ends_with(".lock") {
                continue;
            }
            let rel = path
                .strip_prefix(base)
                .unwrap_or(&path)
                .to_string_lossy()
                .replace('\\', "/");
            out.push(rel);
        }
    }
    Ok(())
}

/// An opened generation: its folder and manifest. Parts are read on demand.
#[derive(Clone, Debug)]
pub struct Generation {
    pub dir: PathBuf,
    pub manifest: Manifest,
}

/// Opens the live generation of `index_dir` and checks its manifest (format and version).
pub fn open_generation(index_dir: &Path) -> Result<Generation, StoreError> {
    if !index_dir.is_dir() {
        return Err(StoreError::NotAnIndex(index_dir.to_path_buf()));
    }
    let name = read_current(index_dir)?;
    let dir = index_dir.join(&name);
    let manifest_path = dir.join(MANIFEST);
    let bytes = fs::read(&manifest_path).map_err(io_err(&manifest_path))?;
    let value: serde_json::Value =
        serde_json::from_slice(&bytes).map_err(|e| StoreError::Corrupt {
            path: manifest_path.clone(),
            message: format!("not valid JSON: {e}"),
        })?;
    if value.get("format").and_then(|f| f.as_str()) != Some(FORMAT_NAME) {
        return Err(StoreError::Corrupt {
            path: manifest_path,
            message: format!("not a quarry manifest (no \"format\": \"{FORMAT_NAME}\")"),
        });
    }
    let found = value
        .get("format_version")
        .and_then(|v| v.as_u64())
        .unwrap_or(0) as u32;
    if found != FORMAT_VERSION {
        return Err(StoreError::Version {
            path: manifest_path,
            found,
            expected: FORMAT_VERSION,
        });
    }
    let manifest: Manifest = serde_json::from_value(value).map_err(|e| StoreError::Corrupt {
        path: manifest_path,
        message: format!("unexpected manifest contents: {e}"),
    })?;
    Ok(Generation { dir, manifest })
}

impl Generation {
    /// The manifest's record of part `name`.
    fn part_record(&self, name: &str) -> Result<&PartRecord, StoreError> {
        self.manifest
            .parts
            .get(name)
            .ok_or_else(|| StoreError::Corrupt {
                path: self.dir.join(MANIFEST),
                message: format!("lists no part `{name}`"),
            })
    }

    /// Reads one file part and checks it against the manifest's size and checksum.
    pub fn read_part(&self, name: &str) -> Result<Vec<u8>, StoreError> {
        let path = self.dir.join(name);
        let record = self.part_record(name)?;
        let bytes = fs::read(&path).map_err(io_err(&path))?;
        if bytes.len() as u64 != record.bytes {
            return Err(StoreError::Corrupt {
                path,
                message: format!(
                    "is {} bytes, the manifest says {} (truncated or replaced?)",
                    bytes.len(),
                    record.bytes
                ),
            });
        }
        let sum = blake3::hash(&bytes).to_hex().to_string();
        if sum != record.blake3 {
            return Err(StoreError::Corrupt {
                path,
                message: "checksum does not match the manifest (the file is damaged)".into(),
            });
        }
        Ok(bytes)
    }

    /// Checks a folder part against the manifest.
    pub fn verify_folder(&self, name: &str) -> Result<(), StoreError> {
        let path = self.dir.join(name);
        let record = self.part_record(name)?;
        let actual = folder_checksum(&path)?;
        if &actual != record {
            return Err(StoreError::Corrupt {
                path,
                message: "folder contents do not match the manifest's checksum (damaged)".into(),
            });
        }
        Ok(())
    }

    /// Checks every part of the generation; returns the names checked.
    pub fn verify_all(&self) -> Result<Vec<String>, StoreError> {
        let mut checked = Vec::new();
        for name in self.manifest.parts.keys() {
            if self.dir.join(name).is_dir() {
                self.verify_folder(name)?;
            } else {
                self.read_part(name)?;
            }
            checked.push(name.clone());
        }
        Ok(checked)
    }

    /// Loads the library model (declarations, modules, files and graph), checked.
    pub fn load_library(&self) -> Result<Library, StoreError> {
        let bytes = self.read_part(LIBRARY_PART)?;
        let mut library: Library =
            postcard::from_bytes(&bytes).map_err(|e| StoreError::Corrupt {
                path: self.dir.join(LIBRARY_PART),
                message: format!("cannot decode: {e}"),
            })?;
        let gbytes = self.read_part(GRAPH_PART)?;
        let graph: DependencyGraph =
            postcard::from_bytes(&gbytes).map_err(|e| StoreError::Corrupt {
                path: self.dir.join(GRAPH_PART),
                message: format!("cannot decode: {e}"),
            })?;
        graph
            .validate(library.declarations.len())
            .map_err(|message| StoreError::Corrupt {
                path: self.dir.join(GRAPH_PART),
                message,
            })?;
        check_ids(&library).map_err(|message| StoreError::Corrupt {
            path: self.dir.join(LIBRARY_PART),
            message,
        })?;
        library.graph = graph;
        Ok(library)
    }
}

/// Checks that every id in the library points inside it, so later indexing cannot panic.
fn check_ids(library: &Library) -> Result<(), String> {
    let (nf, nm) = (library.files.len(), library.modules.len());
    for (i, d) in library.declarations.iter().enumerate() {
        if d.id.0 as usize != i || d.file.0 as usize >= nf || d.module.0 as usize >= nm {
            return Err(format!("declaration {i} has an id outside the library"));
        }
    }
    for (i, m) in library.modules.iter().enumerate() {
        let bad_import = m
            .imports
            .iter()
            .any(|imp| imp.resolved.is_some_and(|r| r.0 as usize >= nm));
        if m.id.0 as usize != i || m.file.0 as usize >= nf || bad_import {
            return Err(format!("module {i} has an id outside the library"));
        }
    }
    for (i, f) in library.files.iter().enumerate() {
        if f.id.0 as usize != i || f.module.is_some_and(|m| m.0 as usize >= nm) {
            return Err(format!("file {i} has an id outside the library"));
        }
    }
    Ok(())
}

/// Writes `library` as a new generation of `index_dir` with the given settings.
pub fn save_library(
    index_dir: &Path,
    library: &Library,
    settings: BTreeMap<String, serde_json::Value>,
) -> Result<PathBuf, StoreError> {
    let inputs: String = library
        .files
        .iter()
        .map(|f| f.content_hash.as_str())
        .collect();
    let mut writer = GenerationWriter::create(index_dir, &inputs)?;
    writer.write_library(library)?;
    writer.commit(library, settings)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn staging_folders(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with(".build-"))
            .collect();
        names.sort();
        names
    }

    #[test]
    fn a_commit_removes_dead_builds_staging_and_spares_a_running_one() {
        let dir = tempfile::tempdir().unwrap();
        let library = Library::default();
        GenerationWriter::create(dir.path(), "first")
            .unwrap()
            .commit(&library, BTreeMap::new())
            .unwrap();
        // A running build: its writer (and lock) stays alive across the other's commit.
        let running = GenerationWriter::create(dir.path(), "running").unwrap();
        // A dead build: a staging folder with a lock file nobody holds, as SIGKILL leaves it.
        let dead = dir.path().join(".build-20261202T000000-deadbeef0000");
        fs::create_dir_all(&dead).unwrap();
        fs::write(dead.join(STAGING_LOCK), b"").unwrap();
        fs::write(dead.join("half-written.bin"), b"\x00\x01").unwrap();
        // A fresh folder without a lock (its build may be between mkdir and lock): kept.
        let young = dir.path().join(".build-20261202T000001-0000feedface");
        fs::create_dir_all(&young).unwrap();

        let mut writer = GenerationWriter::create(dir.path(), "finishing").unwrap();
        writer.write_part("ledger.bin", b"balance").unwrap();
        let live = writer.commit(&library, BTreeMap::new()).unwrap();

        let left = staging_folders(dir.path());
        assert!(
            !left.iter().any(|n| dead.ends_with(n)),
            "dead staging kept: {left:?}"
        );
        assert!(
            left.iter().any(|n| young.ends_with(n)),
            "young staging removed: {left:?}"
        );
        assert!(
            left.iter().any(|n| running.staging_dir().ends_with(n)),
            "a running build's staging was removed: {left:?}"
        );
        // The committed generation carries no lock file.
        assert!(!live.join(STAGING_LOCK).exists());
        assert!(open_generation(dir.path()).unwrap().verify_all().is_ok());
        drop(running);
    }
}
