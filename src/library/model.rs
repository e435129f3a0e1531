//! The library model: the declarations, modules and source files of one indexed library.
//!
//! Takes nothing: it is plain data, built by `extract::build_library` and saved by
//! `library::store`. Gives every later stage (index build, retrieval, server, evaluation) one
//! shared vocabulary. It deliberately holds no ranking data and no raw source text beyond
//! each declaration's statement.

use serde::{Deserialize, Serialize};

use super::graph::DependencyGraph;

/// Index of a declaration in [`Library::declarations`]; stable within one index build.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub struct DeclId(pub u32);

/// Index of a module in [`Library::modules`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub struct ModuleId(pub u32);

/// Index of a source file in [`Library::files`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub struct FileId(pub u32);

/// The proof language a source file is written in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Language {
    Lean,
    Coq,
}

impl Language {
    /// The language of a path, by its extension (`.lean`, `.v`).
    pub fn of_path(path: &std::path::Path) -> Option<Language> {
        match path.extension()?.to_str()? {
            "lean" => Some(Language::Lean),
            "v" => Some(Language::Coq),
            _ => None,
        }
    }

    /// Lower-case name used in JSON and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            Language::Lean => "lean",
            Language::Coq => "coq",
        }
    }
}

/// What sort of thing a declaration is, across both languages.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DeclKind {
    /// `theorem`, `lemma`, `Lemma`, `Theorem`, `Corollary`, `Example`, `Fact`, ...
    Theorem,
    /// `def`, `abbrev`, `opaque`, `Definition`, `Fixpoint`, `Let`, ...
    Definition,
    /// `instance`, `Instance`, `Canonical`.
    Instance,
    /// `structure`, `class`, `Record`, `Structure`, `Class`.
    Structure,
    /// `inductive`, `Inductive`, `CoInductive`, `Variant`.
    Inductive,
    /// A constructor of an inductive type or structure.
    Constructor,
    /// A field (projection) of a structure or record.
    Field,
    /// `axiom`, `Axiom`, `Parameter`, `Conjecture`, and proofs ending in `Admitted`.
    Axiom,
    /// `notation`, `infixl`, `macro`, `Notation`, `Infix`: a symbol with what it unfolds to.
    Notation,
}

impl DeclKind {
    /// All kinds, in display order.
    pub const ALL: [DeclKind; 9] = [
        DeclKind::Theorem,
        DeclKind::Definition,
        DeclKind::Instance,
        DeclKind::Structure,
        DeclKind::Inductive,
        DeclKind::Constructor,
        DeclKind::Field,
        DeclKind::Axiom,
        DeclKind::Notation,
    ];

    /// Snake-case name used in JSON and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            DeclKind::Theorem => "theorem",
            DeclKind::Definition => "definition",
            DeclKind::Instance => "instance",
            DeclKind::Structure => "structure",
            DeclKind::Inductive => "inductive",
            DeclKind::Constructor => "constructor",
            DeclKind::Field => "field",
            DeclKind::Axiom => "axiom",
            DeclKind::Notation => "notation",
        }
    }

    /// Parses the name given by [`DeclKind::as_str`].
    pub fn parse(text: &str) -> Option<DeclKind> {
        DeclKind::ALL.into_iter().find(|k| k.as_str() == text)
    }
}

/// A position in a source file: 1-based line, 1-based column counted in Unicode scalar
/// values, and the 0-based byte offset (what Coq's `.glob` files use).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
pub struct Position {
    pub line: u32,
    pub column: u32,
    pub byte: u32,
}

/// A half-open range `[start, end)` of a source file.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Span {
    pub start: Position,
    pub end: Position,
}

/// Who may refer to a declaration.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Visibility {
    #[default]
    Public,
    /// Lean `private`: only its own file.
    Private,
    /// Lean `protected`: never by its last component alone.
    Protected,
    /// Coq `Local` / `#[local]`: not exported by `Import`.
    Local,
}

/// How a proof (or body) ends, where the language says so.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ProofEnding {
    /// Coq `Qed.`
    Qed,
    /// Coq `Defined.`
    Defined,
    /// Coq `Admitted.`, Lean `sorry` as the whole proof.
    Admitted,
    /// Coq `Abort.`: the statement was never added to the library.
    Aborted,
    /// A term given directly (`:= term`, `Proof term.`, Lean `:= ...`, `by ...`).
    Term,
}

/// One hypothesis of a statement: a binder such as `(n m : nat)` or `[Monoid α]`.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Hypothesis {
    /// The bound names; empty for an anonymous instance binder `[Ring R]`.
    pub names: Vec<String>,
    /// The type, whitespace normalised; empty when the binder gives none.
    pub ty: String,
    /// `explicit` `(x : A)`, `implicit` `{x : A}`, `instance` `[A]`, `strict` `⦃x : A⦄`.
    pub style: BinderStyle,
}

/// The bracket a binder was written with.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BinderStyle {
    #[default]
    Explicit,
    Implicit,
    Instance,
    Strict,
}

/// For notation declarations: the symbol and the name it unfolds to.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct NotationInfo {
    /// The notation's symbol tokens (`⊕`, `+++`, `x ∈ S` gives `∈`), in order.
    pub symbols: Vec<String>,
    /// The fully qualified name it unfolds to, when one could be resolved.
    pub unfolds_to: Option<String>,
    /// The name as written (`xor`, `Ledger.credit`), before resolution.
    pub unfolds_to_written: Option<String>,
}

/// Counts of references that could not be turned into dependency edges.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ReferenceCounts {
    /// Resolved to one declaration of the library: these are the edges.
    pub resolved: u32,
    /// Named nothing the library declares (a local, or a declaration outside the library).
    pub unresolved: u32,
    /// Matched more than one declaration equally well.
    pub ambiguous: u32,
    /// Lean dot notation on a local (`h.trans`): needs the local's type to resolve.
    pub dot_on_local: u32,
}

impl ReferenceCounts {
    /// Adds `other` into `self`.
    pub fn add(&mut self, other: &ReferenceCounts) {
        self.resolved += other.resolved;
        self.unresolved += other.unresolved;
        self.ambiguous += other.ambiguous;
        self.dot_on_local += other.dot_on_local;
    }
}

/// One declaration of the library.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Declaration {
    pub id: DeclId,
    /// Fully qualified name (`Coq.Arith.PeanoNat.Nat.add_comm`, `Ledger.credit_total`).
    pub name: String,
    pub kind: DeclKind,
    /// The statement as written, whitespace normalised: binders, `:` and type.
    pub statement: String,
    /// The binders, including section variables and Lean `variable`s the statement uses.
    pub hypotheses: Vec<Hypothesis>,
    /// The type after the binders, when the syntax separates it.
    pub conclusion: Option<String>,
    pub module: ModuleId,
    pub file: FileId,
    pub statement_span: Span,
    pub proof_span: Option<Span>,
    pub proof_ending: Option<ProofEnding>,
    pub visibility: Visibility,
    /// Attributes as written without brackets (`simp`, `grind =`, `export`, `deprecated`).
    pub attributes: Vec<String>,
    pub notation: Option<NotationInfo>,
    /// References of the statement and proof that gave no edge.
    pub references: ReferenceCounts,
    /// The written names behind `references.unresolved` and `.ambiguous`, for inspection.
    pub unresolved_names: Vec<String>,
}

/// One import of a module, in source order.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Import {
    /// The module name as written, qualified as far as the frontend could.
    pub module: String,
    /// The library module it names, when it is part of this library.
    pub resolved: Option<ModuleId>,
    /// Re-exported to importers (Coq `Export`, Lean `public import` in a `module` file).
    pub export: bool,
    /// Brings short names into scope (Coq `Require Import`); `false` for a bare `Require`.
    pub opens: bool,
    pub line: u32,
}

/// A module: one source file's namespace of declarations.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Module {
    pub id: ModuleId,
    /// `Coq.Arith.PeanoNat`, `Ledger.Basic`.
    pub name: String,
    pub file: FileId,
    pub imports: Vec<Import>,
}

/// Severity of a problem met while reading a file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// The file was skipped entirely.
    Error,
    /// Part of the file could not be read; what could be read was kept.
    Warning,
}

/// A problem met while reading one file, with where it is.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Diagnostic {
    pub severity: Severity,
    pub line: u32,
    pub column: u32,
    pub message: String,
}

/// One source file of the library.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SourceFile {
    pub id: FileId,
    /// Path relative to its root, with `/` separators.
    pub path: String,
    /// Index into [`Library::roots`].
    pub root: u32,
    pub language: Language,
    pub module: Option<ModuleId>,
    /// BLAKE3 of the file's bytes, hex.
    pub content_hash: String,
    pub bytes: u64,
    pub diagnostics: Vec<Diagnostic>,
    pub references: ReferenceCounts,
}

/// A whole indexed library: what `quarry build` extracts and saves.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Library {
    /// The root folders given to the build, as given (absolute where possible).
    pub roots: Vec<String>,
    pub files: Vec<SourceFile>,
    pub modules: Vec<Module>,
    pub declarations: Vec<Declaration>,
    pub graph: DependencyGraph,
}

impl Library {
    /// The declaration with id `id`. Ids come from this library, so this indexes directly.
    pub fn declaration(&self, id: DeclId) -> &Declaration {
        &self.declarations[id.0 as usize]
    }

    /// The module with id `id`.
    pub fn module(&self, id: ModuleId) -> &Module {
        &self.modules[id.0 as usize]
    }

    /// The file with id `id`.
    pub fn file(&self, id: FileId) -> &SourceFile {
        &self.files[id.0 as usize]
    }

    /// Declarations whose fully qualified name is `name` (more than one only when two
    /// roots define the same module).
    pub fn find_exact(&self, name: &str) -> Vec<DeclId> {
        self.declarations
            .iter()
            .filter(|d| d.name == name)
            .map(|d| d.id)
            .collect()
    }

    /// Declarations whose name is `name` or ends with `.name` (a partially qualified lookup).
    pub fn find_by_suffix(&self, name: &str) -> Vec<DeclId> {
        let dotted = format!(".{name}");
        self.declarations
            .iter()
            .filter(|d| d.name == name || d.name.ends_with(&dotted))
            .map(|d| d.id)
            .collect()
    }

    /// Sum of the reference counts of every file.
    pub fn reference_totals(&self) -> ReferenceCounts {
        let mut total = ReferenceCounts::default();
        for f in &self.files {
            total.add(&f.references);
        }
        total
    }
}
