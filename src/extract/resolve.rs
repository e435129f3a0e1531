//! Resolution: from the names written in each file to declaration ids across the library.
//!
//! Takes every file's [`FileExtraction`] with its module name; gives the assembled
//! [`Library`]: modules with resolved imports, declarations with ids, the dependency graph,
//! and per-declaration and per-file counts of references that gave no edge. The rules for
//! turning a written name into candidates belong to each language (`lean::resolve`,
//! `coq::resolve`); this file holds what they share: the name table, which modules a file
//! can see, and the bookkeeping. Nothing is dropped silently: every reference ends up
//! resolved, unresolved, ambiguous, or (Lean) dot notation on a local.

use std::cell::RefCell;
use std::collections::{HashMap, VecDeque};
use std::rc::Rc;

use rayon::prelude::*;

use super::{FileExtraction, RawReference, Scope};
use crate::library::{
    DeclId, Declaration, DependencyGraph, FileId, Import, Language, Library, Module, ModuleId,
    ReferenceCounts, SourceFile, Visibility,
};

/// What one written name resolved to.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Resolution {
    /// Exactly one declaration (its index in the library).
    Resolved(u32),
    /// Several declarations matched equally well.
    Ambiguous,
    /// Nothing in the library (a local the frontend did not see bound, or a declaration
    /// outside the library).
    Unresolved,
}

/// One file ready for assembly: its record (diagnostics filled, ids not yet), module name
/// and what its frontend read.
#[derive(Clone, Debug)]
pub struct ExtractedFile {
    pub file: SourceFile,
    pub module_name: String,
    pub extraction: FileExtraction,
}

/// Where a declaration sits, for visibility checks.
#[derive(Clone, Copy, Debug)]
struct Site {
    module: u32,
    file: u32,
    start: u32,
    visibility: Visibility,
}

/// Every declaration name of the library, indexed for exact and suffix lookups.
#[derive(Debug, Default)]
pub struct NameTable {
    names: Vec<String>,
    sites: Vec<Site>,
    exact: HashMap<String, Vec<u32>>,
    by_last: HashMap<String, Vec<u32>>,
    module_names: Vec<String>,
    /// Module paths (file modules and the modules declared inside them, as the prefixes of
    /// declaration names below a file module) with the index of their file module, keyed
    /// by their last component.
    module_paths: HashMap<String, Vec<(String, u32)>>,
    /// Per module path (or file module): the modules its `Export`s open, resolved, in
    /// order (Coq; see [`super::ModuleExport`]).
    module_exports: HashMap<String, Vec<String>>,
}

impl NameTable {
    fn insert(&mut self, name: String, site: Site) {
        let idx = self.names.len() as u32;
        self.exact.entry(name.clone()).or_default().push(idx);
        let last = last_component(&name).to_string();
        self.by_last.entry(last).or_default().push(idx);
        self.names.push(name);
        self.sites.push(site);
    }

    /// Records `path` as a module of file module `file_module` (once).
    fn insert_module_path(&mut self, path: &str, file_module: u32) {
        let last = last_component(path).to_string();
        let entry = self.module_paths.entry(last).or_default();
        if !entry.iter().any(|(p, m)| p == path && *m == file_module) {
            entry.push((path.to_string(), file_module));
        }
    }
}

/// The last dot-separated component of a name, respecting Lean's `«guillemets»`.
pub fn last_component(name: &str) -> &str {
    match split_last_dot(name) {
        Some((_, last)) => last,
        None => name,
    }
}

/// Splits `A.B.c` into (`A.B`, `c`); `None` when there is no separating dot outside
/// guillemets.
pub fn split_last_dot(name: &str) -> Option<(&str, &str)> {
    let mut depth = 0i32;
    let mut cut = None;
    for (i, c) in name.char_indices() {
        match c {
            '«' => depth += 1,
            '»' => depth -= 1,
            '.' if depth == 0 && i > 0 && i + 1 < name.len() => cut = Some(i),
            _ => {}
        }
    }
    cut.map(|i| (&name[..i], &name[i + 1..]))
}

/// What a file's references may see: the library's names, filtered to the modules the file
/// imports (transitively) and to the declarations of its own file that come before the
/// reference.
pub struct ResolveEnv<'a> {
    table: &'a NameTable,
    file: u32,
    module: u32,
    visible: &'a [bool],
    opened: &'a [u32],
    /// Per scope of the file (keyed by its address, stable while the file is resolved):
    /// the modules it opens, as the frontend computed them for its first reference.
    opened_by_scope: RefCell<HashMap<usize, Rc<[String]>>>,
}

impl<'a> ResolveEnv<'a> {
    /// What file `fi` (its own file module) sees, from the tables `assemble` computed.
    fn of_file(
        table: &'a NameTable,
        fi: usize,
        visible: &'a [Vec<bool>],
        opened: &'a [Vec<u32>],
    ) -> ResolveEnv<'a> {
        ResolveEnv {
            table,
            file: fi as u32,
            module: fi as u32,
            visible: &visible[fi],
            opened: &opened[fi],
            opened_by_scope: RefCell::new(HashMap::new()),
        }
    }

    /// The modules `scope` opens: `compute` runs for the first reference of each scope of
    /// the file, later references reuse its answer.
    pub fn opened_in(&self, scope: &Scope, compute: impl FnOnce() -> Vec<String>) -> Rc<[String]> {
        let key = scope as *const Scope as usize;
        if let Some(found) = self.opened_by_scope.borrow().get(&key) {
            return Rc::clone(found);
        }
        let opened: Rc<[String]> = compute().into();
        self.opened_by_scope
            .borrow_mut()
            .insert(key, Rc::clone(&opened));
        opened
    }

    fn can_see(&self, idx: u32, at: u32) -> bool {
        let site = self.table.sites[idx as usize];
        if site.file == self.file {
            return site.start < at;
        }
        if site.visibility == Visibility::Private {
            return false;
        }
        self.visible[site.module as usize]
    }

    /// Visible declarations whose fully qualified name is `full`, for a reference at byte `at`.
    pub fn exact(&self, full: &str, at: u32) -> Vec<u32> {
        match self.table.exact.get(full) {
            Some(ids) => ids
                .iter()
                .copied()
                .filter(|&i| self.can_see(i, at))
                .collect(),
            None => Vec::new(),
        }
    }

    /// Declarations of the file being resolved whose fully qualified name is `full`,
    /// wherever they are in the file: for references a language allows to point ahead
    /// (Lean's `mutual` blocks and `where` functions).
    pub fn exact_in_file(&self, full: &str) -> Vec<u32> {
        match self.table.exact.get(full) {
            Some(ids) => ids
                .iter()
                .copied()
                .filter(|&i| self.table.sites[i as usize].file == self.file)
                .collect(),
            None => Vec::new(),
        }
    }

    /// Visible declarations whose name is `suffix` or ends with `.suffix`.
    pub fn suffix(&self, suffix: &str, at: u32) -> Vec<u32> {
        let last = last_component(suffix);
        let Some(ids) = self.table.by_last.get(last) else {
            return Vec::new();
        };
        ids.iter()
            .copied()
            .filter(|&i| {
                let name = &self.table.names[i as usize];
                (name == suffix
                    || (name.len() > suffix.len()
                        && name.ends_with(suffix)
                        && name.as_bytes()[name.len() - suffix.len() - 1] == b'.'))
                    && self.can_see(i, at)
            })
            .collect()
    }

    /// The fully qualified name of declaration `idx`.
    pub fn name(&self, idx: u32) -> &str {
        &self.table.names[idx as usize]
    }

    /// The visibility of declaration `idx`.
    pub fn visibility(&self, idx: u32) -> Visibility {
        self.table.sites[idx as usize].visibility
    }

    /// The module name of declaration `idx`.
    pub fn module_of(&self, idx: u32) -> &str {
        &self.table.module_names[self.table.sites[idx as usize].module as usize]
    }

    /// Whether declaration `idx` is in the file being resolved.
    pub fn is_same_file(&self, idx: u32) -> bool {
        self.table.sites[idx as usize].file == self.file
    }

    /// The name of the module being resolved.
    pub fn own_module(&self) -> &str {
        &self.table.module_names[self.module as usize]
    }

    /// Modules the file can see (file modules and the modules declared inside them) named
    /// `written` or ending with `.written`, each with the name of its file module. Used to
    /// resolve `Import M` written inside a file, where `M` may be a module of another file.
    pub fn modules_by_suffix(&self, written: &str) -> Vec<(&str, &str)> {
        let Some(paths) = self.table.module_paths.get(last_component(written)) else {
            return Vec::new();
        };
        paths
            .iter()
            .filter(|(path, m)| {
                self.visible[*m as usize]
                    && (path == written
                        || (path.len() > written.len()
                            && path.ends_with(written)
                            && path.as_bytes()[path.len() - written.len() - 1] == b'.'))
            })
            .map(|(path, m)| (path.as_str(), self.table.module_names[*m as usize].as_str()))
            .collect()
    }

    /// The modules that importing module `path` imports too (its `Export`s), in order.
    pub fn exports_of(&self, path: &str) -> &[String] {
        self.table
            .module_exports
            .get(path)
            .map_or(&[], Vec::as_slice)
    }

    /// Modules whose short names the file's imports open, in the order they were opened
    /// (later ones shadow earlier ones), each after the modules it re-exports.
    pub fn opened_modules(&self) -> impl Iterator<Item = &str> + '_ {
        self.opened
            .iter()
            .map(|&m| self.table.module_names[m as usize].as_str())
    }
}

/// Finds the library module an import names: the exact name; else, with a `From` prefix, a
/// module under that prefix ending with the written name; else the unique module ending
/// with `.written`.
fn resolve_import(
    written: &str,
    from: Option<&str>,
    modules: &HashMap<&str, u32>,
    names: &[String],
) -> Option<u32> {
    let full = match from {
        Some(f) => format!("{f}.{written}"),
        None => written.to_string(),
    };
    if let Some(&m) = modules.get(full.as_str()) {
        return Some(m);
    }
    let dotted = format!(".{written}");
    let hits: Vec<u32> = names
        .iter()
        .enumerate()
        .filter(|(_, n)| {
            let under = from.is_none_or(|f| n.starts_with(&format!("{f}.")));
            under && (n.ends_with(&dotted) || n.as_str() == written)
        })
        .map(|(i, _)| i as u32)
        .collect();
    match hits.as_slice() {
        [one] => Some(*one),
        _ => None,
    }
}

/// The resolver of `language`: candidates for one written name in one scope.
fn resolve_one(
    language: Language,
    reference: &RawReference,
    scope: &Scope,
    env: &ResolveEnv,
) -> Resolution {
    match language {
        Language::Lean => super::lean::resolve(reference, scope, env),
        Language::Coq => super::coq::resolve(reference, scope, env),
    }
}

/// Assembles the library from extracted files (in the order given, which the caller makes
/// deterministic) and the root folders they came from.
pub fn assemble(roots: Vec<String>, mut files: Vec<ExtractedFile>) -> Library {
    // Modules and the name table.
    let module_names: Vec<String> = files.iter().map(|f| f.module_name.clone()).collect();
    let module_index: HashMap<&str, u32> = module_names
        .iter()
        .enumerate()
        .map(|(i, n)| (n.as_str(), i as u32))
        .collect();
    let mut table = NameTable {
        module_names: module_names.clone(),
        ..NameTable::default()
    };
    for (fi, f) in files.iter().enumerate() {
        table.insert_module_path(&f.module_name, fi as u32);
        // A module that only re-exports others declares nothing, but is a module all the
        // same (iris's `Module Import bi. Export bi.interface.bi. ... End bi.`).
        for e in &f.extraction.module_exports {
            table.insert_module_path(&e.module, fi as u32);
        }
        for d in &f.extraction.declarations {
            let mut prefix = d.name.as_str();
            while let Some((head, _)) = split_last_dot(prefix) {
                if head.len() <= f.module_name.len() {
                    break;
                }
                table.insert_module_path(head, fi as u32);
                prefix = head;
            }
            table.insert(
                d.name.clone(),
                Site {
                    module: fi as u32,
                    file: fi as u32,
                    start: d.statement_span.start.byte,
                    visibility: d.visibility,
                },
            );
        }
    }

    // Imports, the modules each file can see, and those whose names it opens.
    let imports: Vec<Vec<Import>> = files
        .iter()
        .map(|f| {
            f.extraction
                .imports
                .iter()
                .map(|imp| Import {
                    module: match &imp.from {
                        Some(from) => format!("{from}.{}", imp.module),
                        None => imp.module.clone(),
                    },
                    resolved: resolve_import(
                        &imp.module,
                        imp.from.as_deref(),
                        &module_index,
                        &module_names,
                    )
                    .map(ModuleId),
                    export: imp.export,
                    opens: imp.opens,
                    line: imp.line,
                })
                .collect()
        })
        .collect();
    let n = files.len();
    let visible: Vec<Vec<bool>> = (0..n)
        .map(|fi| {
            let mut seen = vec![false; n];
            let mut queue = VecDeque::from([fi]);
            seen[fi] = true;
            while let Some(m) = queue.pop_front() {
                for imp in &imports[m] {
                    if let Some(ModuleId(t)) = imp.resolved {
                        if !seen[t as usize] {
                            seen[t as usize] = true;
                            queue.push_back(t as usize);
                        }
                    }
                }
            }
            seen
        })
        .collect();
    let opened: Vec<Vec<u32>> = (0..n)
        .map(|fi| {
            let mut order = Vec::new();
            for imp in imports[fi].iter().filter(|i| i.opens) {
                if let Some(ModuleId(t)) = imp.resolved {
                    push_with_exports(t, &imports, &mut order, &mut vec![false; n]);
                }
            }
            order
        })
        .collect();

    // What each module's `Export`s open, resolved in the scope they were written in.
    let mut module_exports: HashMap<String, Vec<String>> = HashMap::new();
    for (fi, f) in files.iter().enumerate() {
        if f.extraction.module_exports.is_empty() {
            continue;
        }
        let env = ResolveEnv::of_file(&table, fi, &visible, &opened);
        let default_scope = Scope::default();
        for e in &f.extraction.module_exports {
            let scope = f.extraction.scopes.get(e.scope).unwrap_or(&default_scope);
            let target = match f.file.language {
                Language::Coq => super::coq::resolve_module_in(&e.target, scope, &env),
                Language::Lean => None,
            };
            if let Some(target) = target.filter(|t| *t != e.module) {
                module_exports
                    .entry(e.module.clone())
                    .or_default()
                    .push(target);
            }
        }
    }
    table.module_exports = module_exports;

    // Resolve every reference, file by file in parallel; results keep the file order.
    struct FileEdges {
        proof: Vec<(u32, u32)>,
        statement: Vec<(u32, u32)>,
        per_decl: Vec<(ReferenceCounts, Vec<String>)>,
        notation_targets: Vec<Option<String>>,
    }
    let mut first_decl = Vec::with_capacity(n);
    let mut total = 0u32;
    for f in &files {
        first_decl.push(total);
        total += f.extraction.declarations.len() as u32;
    }
    let resolved: Vec<FileEdges> = files
        .par_iter()
        .enumerate()
        .map(|(fi, f)| {
            let env = ResolveEnv::of_file(&table, fi, &visible, &opened);
            let language = f.file.language;
            let mut out = FileEdges {
                proof: Vec::new(),
                statement: Vec::new(),
                per_decl: Vec::new(),
                notation_targets: Vec::new(),
            };
            let default_scope = Scope::default();
            for (di, d) in f.extraction.declarations.iter().enumerate() {
                let me = first_decl[fi] + di as u32;
                let scope = f.extraction.scopes.get(d.scope).unwrap_or(&default_scope);
                let mut counts = ReferenceCounts {
                    dot_on_local: d.dot_on_local,
                    ..ReferenceCounts::default()
                };
                let mut missing = Vec::new();
                for (refs, edges) in [
                    (&d.statement_refs, &mut out.statement),
                    (&d.proof_refs, &mut out.proof),
                ] {
                    for r in refs {
                        match resolve_one(language, r, scope, &env) {
                            Resolution::Resolved(t) => {
                                counts.resolved += 1;
                                if t != me {
                                    edges.push((me, t));
                                }
                            }
                            Resolution::Ambiguous => {
                                counts.ambiguous += 1;
                                missing.push(r.name.clone());
                            }
                            Resolution::Unresolved => {
                                counts.unresolved += 1;
                                missing.push(r.name.clone());
                            }
                        }
                    }
                }
                missing.sort();
                missing.dedup();
                let target = d.notation.as_ref().and_then(|n| {
                    let written = n.unfolds_to_written.as_ref()?;
                    let r = RawReference {
                        name: written.clone(),
                        offset: d
                            .statement_span
                            .end
                            .byte
                            .max(d.statement_span.start.byte + 1),
                    };
                    match resolve_one(language, &r, scope, &env) {
                        Resolution::Resolved(t) => Some(table.names[t as usize].clone()),
                        _ => None,
                    }
                });
                out.notation_targets.push(target);
                out.per_decl.push((counts, missing));
            }
            out
        })
        .collect();

    // Assemble ids, modules, declarations and the graph.
    let mut declarations = Vec::with_capacity(total as usize);
    let mut modules = Vec::with_capacity(n);
    let mut proof_edges = Vec::new();
    let mut statement_edges = Vec::new();
    for (fi, (f, r)) in files.iter_mut().zip(resolved).enumerate() {
        let mut file_counts = ReferenceCounts::default();
        let extraction = std::mem::take(&mut f.extraction);
        for ((d, (counts, missing)), target) in extraction
            .declarations
            .into_iter()
            .zip(r.per_decl)
            .zip(r.notation_targets)
        {
            file_counts.add(&counts);
            let id = DeclId(declarations.len() as u32);
            let mut notation = d.notation;
            if let Some(n) = notation.as_mut() {
                n.unfolds_to = target;
            }
            declarations.push(Declaration {
                id,
                name: d.name,
                kind: d.kind,
                statement: d.statement,
                hypotheses: d.hypotheses,
                conclusion: d.conclusion,
                module: ModuleId(fi as u32),
                file: FileId(fi as u32),
                statement_span: d.statement_span,
                proof_span: d.proof_span,
                proof_ending: d.proof_ending,
                visibility: d.visibility,
                attributes: d.attributes,
                notation,
                references: counts,
                unresolved_names: missing,
            });
        }
        proof_edges.extend(r.proof);
        statement_edges.extend(r.statement);
        f.file.id = FileId(fi as u32);
        f.file.module = Some(ModuleId(fi as u32));
        f.file.references = file_counts;
        f.file.diagnostics.extend(extraction.diagnostics);
        modules.push(Module {
            id: ModuleId(fi as u32),
            name: f.module_name.clone(),
            file: FileId(fi as u32),
            imports: imports[fi].clone(),
        });
    }
    let graph = DependencyGraph::from_edges(declarations.len(), &proof_edges, &statement_edges);
    Library {
        roots,
        files: files.into_iter().map(|f| f.file).collect(),
        modules,
        declarations,
        graph,
    }
}

/// Appends, depth first, the modules `m` re-exports and then `m` itself (once each): as in
/// coqc, a library's `Require Export`s are opened before its own names, which shadow theirs
/// (`Import uPred` in iris names the `uPred` of `base_logic`, which re-exports the `uPred`
/// modules of `bi` and `derived`).
fn push_with_exports(m: u32, imports: &[Vec<Import>], order: &mut Vec<u32>, seen: &mut [bool]) {
    if seen[m as usize] {
        return;
    }
    seen[m as usize] = true;
    for imp in imports[m as usize].iter().filter(|i| i.export) {
        if let Some(ModuleId(t)) = imp.resolved {
            push_with_exports(t, imports, order, seen);
        }
    }
    order.push(m);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn last_component_respects_guillemets() {
        assert_eq!(last_component("A.B.c"), "c");
        assert_eq!(last_component("A.«b.c»"), "«b.c»");
        assert_eq!(last_component("x"), "x");
        assert_eq!(split_last_dot("A.B.c"), Some(("A.B", "c")));
        assert_eq!(split_last_dot("abc"), None);
    }
}
