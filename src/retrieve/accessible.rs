//! Which premises may answer a query: the declarations a proof at a given place can use.
//!
//! Takes the library model and, optionally, a place (a module, or a file, and a line);
//! gives a [`PremiseFilter`], a bit set over declaration ids. Without a place every
//! declaration may answer. With a module: the declarations of the modules it imports,
//! transitively, and of the module itself; with a line too, only its own declarations that
//! start before that line, and never the declaration whose text contains the line (the
//! theorem being proved). The command line, the server and evaluation all call this.

use std::collections::VecDeque;

use crate::library::{DeclId, DeclKind, FileId, Library, ModuleId};

/// A place in the library that a query comes from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct QueryPlace {
    pub module: ModuleId,
    /// 1-based line of the cursor in the module's file.
    pub line: Option<u32>,
}

/// Why a place named by a user does not exist in the library.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum PlaceError {
    #[error("no module named `{0}` in the index")]
    UnknownModule(String),
    #[error("no file `{0}` in the index (give its path as indexed, or the end of it)")]
    UnknownFile(String),
    #[error("`{name}` matches {count} files in the index; give more of its path")]
    AmbiguousFile { name: String, count: usize },
    #[error("line {0} is not a line number (lines start at 1)")]
    BadLine(u32),
}

/// A set of declaration ids allowed to answer.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PremiseFilter {
    bits: Vec<u64>,
    len: usize,
}

impl PremiseFilter {
    /// Every one of `n` declarations.
    pub fn all(n: usize) -> PremiseFilter {
        let mut f = PremiseFilter {
            bits: vec![u64::MAX; n.div_ceil(64)],
            len: n,
        };
        f.clear_tail();
        f
    }

    /// None of `n` declarations.
    pub fn none(n: usize) -> PremiseFilter {
        PremiseFilter {
            bits: vec![0; n.div_ceil(64)],
            len: n,
        }
    }

    fn clear_tail(&mut self) {
        let extra = self.bits.len() * 64 - self.len;
        if extra > 0 {
            if let Some(last) = self.bits.last_mut() {
                *last &= u64::MAX >> extra;
            }
        }
    }

    /// Whether `id` may answer.
    pub fn contains(&self, id: DeclId) -> bool {
        let i = id.0 as usize;
        i < self.len && self.bits[i / 64] & (1 << (i % 64)) != 0
    }

    /// Allows `id`.
    pub fn insert(&mut self, id: DeclId) {
        let i = id.0 as usize;
        if i < self.len {
            self.bits[i / 64] |= 1 << (i % 64);
        }
    }

    /// Forbids `id`.
    pub fn remove(&mut self, id: DeclId) {
        let i = id.0 as usize;
        if i < self.len {
            self.bits[i / 64] &= !(1 << (i % 64));
        }
    }

    /// The declarations both filters allow (a word-wise AND: O(n/64), not O(n)). Filters
    /// of different sizes are cut to the smaller.
    pub fn intersection(&self, other: &PremiseFilter) -> PremiseFilter {
        PremiseFilter {
            bits: self
                .bits
                .iter()
                .zip(&other.bits)
                .map(|(a, b)| a & b)
                .collect(),
            len: self.len.min(other.len),
        }
    }

    /// How many declarations may answer.
    pub fn count(&self) -> usize {
        self.bits.iter().map(|w| w.count_ones() as usize).sum()
    }

    /// Keeps only declarations of the given kinds.
    pub fn retain_kinds(&mut self, library: &Library, kinds: &[DeclKind]) {
        for d in &library.declarations {
            if !kinds.contains(&d.kind) {
                self.remove(d.id);
            }
        }
    }
}

/// The modules `module` can see: itself and everything it imports, transitively.
pub fn visible_modules(library: &Library, module: ModuleId) -> Vec<bool> {
    let mut seen = vec![false; library.modules.len()];
    let Some(slot) = seen.get_mut(module.0 as usize) else {
        return seen;
    };
    *slot = true;
    let mut queue = VecDeque::from([module]);
    while let Some(m) = queue.pop_front() {
        for imp in &library.module(m).imports {
            if let Some(t) = imp.resolved {
                if !seen[t.0 as usize] {
                    seen[t.0 as usize] = true;
                    queue.push_back(t);
                }
            }
        }
    }
    seen
}

/// The premises accessible at `place` (every declaration when `place` is `None`),
/// restricted to `kinds` when given.
pub fn accessible_premises(
    library: &Library,
    place: Option<&QueryPlace>,
    kinds: Option<&[DeclKind]>,
) -> PremiseFilter {
    let n = library.declarations.len();
    let mut filter = match place {
        None => PremiseFilter::all(n),
        Some(p) => {
            let visible = visible_modules(library, p.module);
            let mut f = PremiseFilter::none(n);
            for d in &library.declarations {
                let Some(&seen) = visible.get(d.module.0 as usize) else {
                    continue;
                };
                if !seen {
                    continue;
                }
                if d.module == p.module {
                    if let Some(line) = p.line {
                        let starts_before = d.statement_span.start.line < line;
                        let end = d
                            .proof_span
                            .map(|s| s.end.line)
                            .unwrap_or(d.statement_span.end.line);
                        let encloses = d.statement_span.start.line <= line && line <= end;
                        if !starts_before || encloses {
                            continue;
                        }
                    }
                }
                f.insert(d.id);
            }
            f
        }
    };
    if let Some(kinds) = kinds {
        filter.retain_kinds(library, kinds);
    }
    filter
}

/// The module named `name`.
pub fn module_by_name(library: &Library, name: &str) -> Result<ModuleId, PlaceError> {
    library
        .modules
        .iter()
        .find(|m| m.name == name)
        .map(|m| m.id)
        .ok_or_else(|| PlaceError::UnknownModule(name.to_string()))
}

/// The file a user's path names: the indexed path, an absolute path under a root, or a
/// unique ending of one (`Ledger/Basic.lean`). Never touches the disk.
pub fn file_by_path(library: &Library, path: &str) -> Result<FileId, PlaceError> {
    let wanted = path.replace('\\', "/");
    let full = |f: &crate::library::SourceFile| match library.roots.get(f.root as usize) {
        Some(root) => format!("{root}/{}", f.path),
        None => f.path.clone(),
    };
    let exact: Vec<FileId> = library
        .files
        .iter()
        .filter(|f| f.path == wanted || full(f) == wanted)
        .map(|f| f.id)
        .collect();
    if let [one] = exact.as_slice() {
        return Ok(*one);
    }
    let tail = format!("/{}", wanted.trim_start_matches("./"));
    let hits: Vec<FileId> = library
        .files
        .iter()
        .filter(|f| full(f).ends_with(&tail) || f.path == wanted.trim_start_matches("./"))
        .map(|f| f.id)
        .collect();
    match hits.as_slice() {
        [one] => Ok(*one),
        [] => Err(PlaceError::UnknownFile(path.to_string())),
        many => Err(PlaceError::AmbiguousFile {
            name: path.to_string(),
            count: many.len(),
        }),
    }
}

/// The place of a cursor in `file` at `line`.
pub fn place_of_file(
    library: &Library,
    file: &str,
    line: Option<u32>,
) -> Result<QueryPlace, PlaceError> {
    if line == Some(0) {
        return Err(PlaceError::BadLine(0));
    }
    let id = file_by_path(library, file)?;
    let module = library
        .file(id)
        .module
        .ok_or_else(|| PlaceError::UnknownFile(file.to_string()))?;
    Ok(QueryPlace { module, line })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_intersection_keeps_what_both_allow_across_words() {
        // 130 declarations span three 64-bit words; the last one holds two.
        let mut a = PremiseFilter::none(130);
        let mut b = PremiseFilter::all(130);
        for i in [0, 63, 64, 100, 129] {
            a.insert(DeclId(i));
        }
        b.remove(DeclId(63));
        b.remove(DeclId(129));
        let both = a.intersection(&b);
        let kept: Vec<u32> = (0..130).filter(|&i| both.contains(DeclId(i))).collect();
        assert_eq!(kept, [0, 64, 100]);
        assert_eq!(both.count(), 3);
        // Cut to the smaller filter: nothing past its end is allowed.
        let short = PremiseFilter::all(70);
        let cut = a.intersection(&short);
        assert_eq!(cut.count(), 3);
        assert!(!cut.contains(DeclId(100)));
    }
}
