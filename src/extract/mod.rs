//! Extraction: from source files to the library model.
//!
//! Takes a library's root folders; gives a [`Library`](crate::library::Library): the
//! declarations, modules, files and dependency graph. One file per proof language reads its
//! syntax (`lean.rs`, `coq.rs`) into a [`FileExtraction`]; `walk.rs` finds and reads the
//! files; `resolve.rs` turns written names into declaration ids across the whole library.
//!
//! Architecture invariant: extraction knows nothing of ranking or of the index on disk.
//! Extraction never fails: a frontend returns the declarations it could read together with
//! the problems it met, never a `Result` for the whole file.

pub mod coq;
pub mod lean;
pub mod resolve;
pub mod text;
pub mod walk;

pub use walk::{build_library, BuildOptions, CoqPrefix, LibraryRoot};

use crate::library::{
    DeclKind, Diagnostic, Hypothesis, Language, NotationInfo, ProofEnding, Span, Visibility,
};

/// A name written in a statement or proof, before resolution.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RawReference {
    /// The name as written, without `@` or `←` (`Nat.add_comm`, `foo`, `_root_.bar`).
    pub name: String,
    /// Byte offset of the name in the file.
    pub offset: u32,
}

/// The naming context at one point of a file: what a short name may expand to.
///
/// Frontends push a new scope whenever a namespace, section, module or `open` changes, and
/// every declaration points at the scope it was read in.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Scope {
    /// Enclosing namespaces (Lean) or modules (Coq), outermost first, fully qualified
    /// (for Coq including the file's own module: `Coq.Arith.PeanoNat`, `Coq.Arith.PeanoNat.Nat`).
    pub namespaces: Vec<String>,
    /// Opened namespaces (Lean `open`) or imported modules (Coq `Import`, `Require Import`
    /// after the file's start), in the order they were opened.
    pub opened: Vec<OpenDirective>,
}

/// One `open` / `Import`, as far as the frontend could read it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OpenDirective {
    /// The namespace or module as written (`Nat`, `List`, `Ledger.Lemmas`).
    pub target: String,
    /// Lean `open X (a b)`: only these names. `None`: all of them.
    pub only: Option<Vec<String>>,
    /// Lean `open X hiding a b`.
    pub hiding: Vec<String>,
    /// Lean `open X renaming a → b`: (new, old).
    pub renaming: Vec<(String, String)>,
}

impl OpenDirective {
    /// An `open` of every name of `target`.
    pub fn all(target: impl Into<String>) -> OpenDirective {
        OpenDirective {
            target: target.into(),
            only: None,
            hiding: Vec::new(),
            renaming: Vec::new(),
        }
    }
}

/// A module import as written at the top of a file (or, in Coq, anywhere).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct RawImport {
    /// The module as written (`Coq.Arith.PeanoNat`, `PeanoNat`, `Ledger.Basic`).
    pub module: String,
    /// Coq `From L Require ...`: the logical prefix `L`.
    pub from: Option<String>,
    /// Re-exported to importers (Coq `Export`, Lean `public import`).
    pub export: bool,
    /// Brings short names into scope (Coq `Require Import`/`Export`; every Lean import).
    pub opens: bool,
    pub line: u32,
}

/// One declaration as a frontend read it, before its names are resolved.
#[derive(Clone, Debug, PartialEq)]
pub struct RawDeclaration {
    /// Fully qualified as far as the file can tell (namespaces and Coq modules applied,
    /// including the file's module prefix for Coq; `_root_` removed for Lean).
    pub name: String,
    pub kind: DeclKind,
    pub statement: String,
    pub hypotheses: Vec<Hypothesis>,
    pub conclusion: Option<String>,
    pub statement_span: Span,
    pub proof_span: Option<Span>,
    pub proof_ending: Option<ProofEnding>,
    pub visibility: Visibility,
    pub attributes: Vec<String>,
    pub notation: Option<NotationInfo>,
    /// Names written in the statement (binders and type).
    pub statement_refs: Vec<RawReference>,
    /// Names written in the proof or body.
    pub proof_refs: Vec<RawReference>,
    /// Lean only: dot notation on a local (`h.trans`), which needs types to resolve.
    pub dot_on_local: u32,
    /// Index into [`FileExtraction::scopes`].
    pub scope: usize,
}

impl RawDeclaration {
    /// A declaration with the given name and kind and everything else empty.
    pub fn new(name: impl Into<String>, kind: DeclKind) -> RawDeclaration {
        RawDeclaration {
            name: name.into(),
            kind,
            statement: String::new(),
            hypotheses: Vec::new(),
            conclusion: None,
            statement_span: Span::default(),
            proof_span: None,
            proof_ending: None,
            visibility: Visibility::Public,
            attributes: Vec::new(),
            notation: None,
            statement_refs: Vec::new(),
            proof_refs: Vec::new(),
            dot_on_local: 0,
            scope: 0,
        }
    }
}

/// What a frontend read from one file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FileExtraction {
    /// Imports in source order.
    pub imports: Vec<RawImport>,
    /// Declarations in source order.
    pub declarations: Vec<RawDeclaration>,
    /// Naming contexts; `scopes[0]` is the file's top level.
    pub scopes: Vec<Scope>,
    /// Problems met; what could be read is still in `declarations`.
    pub diagnostics: Vec<Diagnostic>,
    /// Coq's `Export M` inside a module or at a file's top level, and `Module Export M`:
    /// what importing that module (or file) opens besides it.
    pub module_exports: Vec<ModuleExport>,
}

/// One Coq `Export`: importing `module` also imports `target`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ModuleExport {
    /// The fully qualified module (or file module) that exports.
    pub module: String,
    /// The exported module as written (`bi.derived_laws.bi`) or fully qualified.
    pub target: String,
    /// The scope `target` is resolved in (`scopes[scope]`).
    pub scope: usize,
}

/// Assembles a library from in-memory files `(module, text)` written in `language`, as
/// the unit tests of both frontends need it.
#[cfg(test)]
pub(crate) fn in_memory_library(
    language: Language,
    files: &[(&str, &str)],
) -> crate::library::Library {
    use crate::library::{FileId, ReferenceCounts, SourceFile};
    let extension = match language {
        Language::Lean => "lean",
        Language::Coq => "v",
    };
    let extracted = files
        .iter()
        .enumerate()
        .map(|(i, (module, text))| resolve::ExtractedFile {
            file: SourceFile {
                id: FileId(i as u32),
                path: format!("{}.{extension}", module.replace('.', "/")),
                root: 0,
                language,
                module: None,
                content_hash: String::new(),
                bytes: text.len() as u64,
                diagnostics: Vec::new(),
                references: ReferenceCounts::default(),
            },
            module_name: module.to_string(),
            extraction: extract_text(language, module, text),
        })
        .collect();
    resolve::assemble(vec!["demo".into()], extracted)
}

/// Extracts one file's text written in `language`, whose module is `module`
/// (for Coq the logical path, e.g. `Coq.Arith.PeanoNat`; for Lean `Ledger.Basic`).
pub fn extract_text(language: Language, module: &str, text: &str) -> FileExtraction {
    match language {
        Language::Lean => lean::extract(module, text),
        Language::Coq => coq::extract(module, text),
    }
}
