//! Coq/Rocq frontend: reads `.v` files into declarations, and resolves their names.
//!
//! Takes a file's logical module path (`Coq.Arith.PeanoNat`) and its text; gives a
//! [`FileExtraction`]: the imports (with the implicit `Coq.Init.Prelude` that coqc loads for
//! every file outside `Coq.Init`), the declarations with fully qualified names (file module,
//! then the enclosing `Module` chain; sections add nothing), their statements, binders,
//! section hypotheses, proofs and the names written in each, and the naming scopes.
//!
//! The file is read sentence by sentence (`lexer.rs`); each declaration sentence is read by
//! `declarations.rs`, the names written in statements, bodies and proof scripts by
//! `references.rs`, and `resolve.rs` holds coqc's rules for what a written name means.
//! It does not run Coq: no notation is parsed, no type is computed, and names made by
//! functor application, `Include` or `Scheme` are not declarations here, since no source
//! text declares them.

mod commands;
mod declarations;
mod declaring;
mod lexer;
mod notations;
mod references;
mod resolve;

use std::collections::HashSet;

pub use resolve::{resolve, resolve_module_in};

use commands::{find_top_assign, module_names, prefixes};
use declarations::Declares;
use lexer::{Lexed, Sentence, TokenKind};
use references::Scan;

use super::text::LineIndex;
use super::{FileExtraction, ModuleExport, OpenDirective, RawImport, Scope};
use crate::library::{DeclKind, Diagnostic, Hypothesis, ProofEnding, Severity, Visibility};

/// Reads one Coq file whose logical module path is `module`.
///
/// ```
/// use quarry::extract::coq::extract;
/// let e = extract("Demo.Basics", "Module M.\nLemma two : 1 + 1 = 2.\nProof. reflexivity. Qed.\nEnd M.\n");
/// assert_eq!(e.declarations[0].name, "Demo.Basics.M.two");
/// assert_eq!(e.imports[0].module, "Coq.Init.Prelude");
/// ```
pub fn extract(module: &str, text: &str) -> FileExtraction {
    let lexed = lexer::lex(text);
    let index = LineIndex::new(text);
    let mut ex = Extractor {
        module,
        text,
        lx: &lexed,
        index: &index,
        out: FileExtraction::default(),
        frames: Vec::new(),
        file_opened: Vec::new(),
        scope: 0,
        pending: None,
    };
    ex.out.scopes.push(Scope {
        namespaces: vec![module.to_string()],
        opened: Vec::new(),
    });
    if module != "Coq.Init" && !module.starts_with("Coq.Init.") {
        ex.out.imports.push(RawImport {
            module: "Coq.Init.Prelude".to_string(),
            from: None,
            export: false,
            opens: true,
            line: 1,
        });
    }
    for si in 0..lexed.sentences.len() {
        ex.sentence(si);
    }
    ex.close_proof(None, None);
    if let Some((what, at)) = lexed.unterminated {
        let p = index.position(at as usize);
        ex.out.diagnostics.push(Diagnostic {
            severity: Severity::Warning,
            line: p.line,
            column: p.column,
            message: format!(
                "unterminated {what} opened at line {}; the rest of the file is not read",
                p.line
            ),
        });
    }
    ex.out
}

/// One sentence of a Coq file as coqc splits it: its byte range (up to and including its
/// `.`, or the bullet or brace itself) and whether it is a bullet or a focusing brace.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SentenceSpan {
    /// Byte offset of the sentence's first token.
    pub start: u32,
    /// Byte offset just past the sentence.
    pub end: u32,
    /// A bullet (`-`, `+`, `*`, ...) or a focusing brace (`{`, `}`, `2: {`).
    pub bullet: bool,
}

/// The sentences of a Coq file in order, comments left out (for tools that work sentence by
/// sentence, e.g. `harvest`, which instruments every tactic of a proof).
///
/// ```
/// use quarry::extract::coq::sentence_spans;
/// let s = sentence_spans("Proof. - auto. Qed.");
/// assert_eq!(s.len(), 4);
/// assert!(s[1].bullet);
/// assert_eq!((s[2].start, s[2].end), (9, 14));
/// ```
pub fn sentence_spans(text: &str) -> Vec<SentenceSpan> {
    lexer::lex(text)
        .sentences
        .iter()
        .map(|s| SentenceSpan {
            start: s.start,
            end: s.end,
            bullet: s.bullet,
        })
        .collect()
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum FrameKind {
    Module,
    Section,
}

/// A section variable (`Variable`, `Hypothesis`, `Context`): one binder group.
#[derive(Clone, Debug)]
struct SectionVariable {
    hypothesis: Hypothesis,
    /// Identifiers its type mentions (so that using `H : P x` also uses `x`).
    mentions: HashSet<String>,
}

/// An open `Module`, `Module Type` or `Section`.
#[derive(Clone, Debug)]
struct Frame {
    kind: FrameKind,
    name: String,
    /// The module's fully qualified path.
    path: String,
    opened: Vec<OpenDirective>,
    variables: Vec<SectionVariable>,
    /// Section-local names that are no declarations (`Let`).
    locals: Vec<String>,
    /// `Module Import M` / `Module Export M`: opened in the enclosing scope at its `End`.
    import_at_end: bool,
    /// `Module Export M`: importing the enclosing module (or file) imports `M` too.
    export_at_end: bool,
}

/// A declaration (or several, for a mutual block) waiting for its proof.
#[derive(Debug)]
struct PendingProof {
    /// Indices into the output declarations, with each one's statement scan.
    declarations: Vec<(usize, Scan)>,
    sentences: Vec<usize>,
    using: Vec<String>,
}

struct Extractor<'a> {
    module: &'a str,
    text: &'a str,
    lx: &'a Lexed,
    index: &'a LineIndex<'a>,
    out: FileExtraction,
    frames: Vec<Frame>,
    /// `Import`s written at the file's top level.
    file_opened: Vec<OpenDirective>,
    scope: usize,
    pending: Option<PendingProof>,
}

/// Sentence keywords that cannot be tactics: a proof left open before one of them ended
/// without a closing command we could read.
fn ends_open_proof(word: &str) -> bool {
    matches!(
        word,
        "Lemma"
            | "Theorem"
            | "Fact"
            | "Remark"
            | "Corollary"
            | "Proposition"
            | "Example"
            | "Property"
            | "Definition"
            | "Fixpoint"
            | "CoFixpoint"
            | "Inductive"
            | "CoInductive"
            | "Variant"
            | "Record"
            | "Structure"
            | "Class"
            | "Section"
            | "End"
            | "Module"
            | "Require"
            | "From"
            | "Axiom"
            | "Parameter"
            | "Goal"
            | "Instance"
            | "Notation"
            | "Infix"
            | "Ltac"
            | "Scheme"
    )
}

impl<'a> Extractor<'a> {
    fn sentence_tokens(&self, s: &Sentence) -> &'a [lexer::Token] {
        self.lx.tokens.get(s.tokens.clone()).unwrap_or(&[])
    }

    fn current_path(&self) -> String {
        self.frames
            .iter()
            .rev()
            .find(|f| f.kind == FrameKind::Module)
            .map_or_else(|| self.module.to_string(), |f| f.path.clone())
    }

    fn in_section(&self) -> bool {
        self.frames.iter().any(|f| f.kind == FrameKind::Section)
    }

    /// Makes `self.scope` describe the current module chain and imports.
    fn refresh_scope(&mut self) {
        let mut namespaces = vec![self.module.to_string()];
        namespaces.extend(
            self.frames
                .iter()
                .filter(|f| f.kind == FrameKind::Module)
                .map(|f| f.path.clone()),
        );
        let mut opened = self.file_opened.clone();
        for f in &self.frames {
            opened.extend(f.opened.iter().cloned());
        }
        let scope = Scope { namespaces, opened };
        if self.out.scopes.get(self.scope) == Some(&scope) {
            return;
        }
        if let Some(i) = self.out.scopes.iter().rposition(|s| *s == scope) {
            self.scope = i;
        } else {
            self.out.scopes.push(scope);
            self.scope = self.out.scopes.len() - 1;
        }
    }

    /// Records that importing the innermost module (or the file, at its top level) imports
    /// `target` too. An `Export` inside a section does not outlive it and is not recorded.
    fn export(&mut self, target: String) {
        let module = match self.frames.last() {
            Some(f) if f.kind == FrameKind::Module => f.path.clone(),
            Some(_) => return,
            None => self.module.to_string(),
        };
        self.out.module_exports.push(ModuleExport {
            module,
            target,
            scope: self.scope,
        });
    }

    fn open(&mut self, directive: OpenDirective) {
        match self.frames.last_mut() {
            Some(f) => f.opened.push(directive),
            None => self.file_opened.push(directive),
        }
        self.refresh_scope();
    }

    fn sentence(&mut self, si: usize) {
        let s = &self.lx.sentences[si];
        let tokens = self.sentence_tokens(s);
        let word = |i: usize| tokens.get(i).map_or("", |t| t.text(self.text));
        if self.pending.is_some() {
            if s.bullet {
                self.push_proof_sentence(si);
                return;
            }
            let (_, _, k) = prefixes(tokens, self.text);
            match word(k) {
                "Proof" => {
                    match word(k + 1) {
                        "" | "using" | "with" => {
                            if word(k + 1) == "using" {
                                let names: Vec<String> = tokens[k + 2..]
                                    .iter()
                                    .filter(|t| t.kind == TokenKind::Ident)
                                    .map(|t| t.text(self.text).to_string())
                                    .collect();
                                if let Some(p) = self.pending.as_mut() {
                                    p.using.extend(names);
                                }
                            }
                            self.push_proof_sentence(si);
                        }
                        // `Proof term.`
                        _ => {
                            self.push_proof_sentence(si);
                            self.close_proof(Some(ProofEnding::Term), Some(si));
                        }
                    }
                    return;
                }
                "Qed" | "Save" => return self.close_proof(Some(ProofEnding::Qed), Some(si)),
                "Defined" => return self.close_proof(Some(ProofEnding::Defined), Some(si)),
                "Admitted" => return self.close_proof(Some(ProofEnding::Admitted), Some(si)),
                "Abort" => return self.close_proof(Some(ProofEnding::Aborted), Some(si)),
                w if ends_open_proof(w) => self.close_proof(None, None),
                _ => {
                    self.push_proof_sentence(si);
                    return;
                }
            }
        }
        if s.bullet {
            return;
        }
        self.vernacular(si);
    }

    fn push_proof_sentence(&mut self, si: usize) {
        if let Some(p) = self.pending.as_mut() {
            p.sentences.push(si);
        }
    }

    /// One sentence outside proofs.
    fn vernacular(&mut self, si: usize) {
        let s = &self.lx.sentences[si];
        let tokens = self.sentence_tokens(s);
        let text = self.text;
        let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
        let (attributes, local, k) = prefixes(tokens, text);
        let keyword = word(k);
        let visibility = if local {
            Visibility::Local
        } else {
            Visibility::Public
        };
        let declares = match keyword {
            "Lemma" | "Theorem" | "Fact" | "Remark" | "Corollary" | "Proposition" | "Example"
            | "Property" => Some(Declares::Theorem),
            "Definition" | "Fixpoint" | "CoFixpoint" | "Function" => {
                Some(Declares::Definition(DeclKind::Definition))
            }
            "Let" if self.in_section() => {
                if let Some(name) = tokens.get(k + 1).filter(|t| t.kind == TokenKind::Ident) {
                    let name = name.text(text).to_string();
                    if let Some(f) = self
                        .frames
                        .iter_mut()
                        .rev()
                        .find(|f| f.kind == FrameKind::Section)
                    {
                        f.locals.push(name);
                    }
                }
                if find_top_assign(tokens, text, k + 1).is_none() {
                    self.start_proof(Vec::new());
                }
                return;
            }
            "Let" => Some(Declares::Definition(DeclKind::Definition)),
            "Instance" if word(k + 1) != ":" => Some(Declares::Definition(DeclKind::Instance)),
            "Instance" => {
                // An anonymous instance: coqc names it; its proof is read and dropped.
                if find_top_assign(tokens, text, k + 1).is_none()
                    && !attributes.iter().any(|a| a == "program")
                {
                    self.start_proof(Vec::new());
                }
                return;
            }
            "Declare" if word(k + 1) == "Instance" => {
                return self.declare(
                    si,
                    k + 2,
                    Declares::Definition(DeclKind::Instance),
                    visibility,
                    attributes,
                    false,
                )
            }
            "Canonical" | "Coercion" => {
                let first = if word(k + 1) == "Structure" {
                    k + 2
                } else {
                    k + 1
                };
                if find_top_assign(tokens, text, first).is_some() {
                    let kind = if keyword == "Canonical" {
                        DeclKind::Instance
                    } else {
                        DeclKind::Definition
                    };
                    return self.declare(
                        si,
                        first,
                        Declares::Definition(kind),
                        visibility,
                        attributes,
                        false,
                    );
                }
                return;
            }
            "Inductive" | "CoInductive" | "Variant" => Some(Declares::Inductive),
            "Record" | "Structure" | "Class" => Some(Declares::Record),
            "Axiom" | "Axioms" | "Parameter" | "Parameters" | "Conjecture" | "Conjectures" => {
                Some(Declares::Axiom)
            }
            "Primitive" => Some(Declares::Definition(DeclKind::Axiom)),
            "Scheme" => Some(Declares::Scheme),
            "Variable" | "Variables" | "Hypothesis" | "Hypotheses" | "Context" => {
                if self.in_section() {
                    self.section_variables(tokens, k + 1);
                    return;
                }
                if keyword == "Context" {
                    return;
                }
                Some(Declares::Axiom)
            }
            "Notation" => Some(Declares::Notation),
            "Infix" => Some(Declares::Infix),
            "Goal" => {
                self.start_proof(Vec::new());
                return;
            }
            "Next" | "Obligation"
                if (keyword == "Next" && word(k + 1) == "Obligation")
                    || (keyword == "Obligation"
                        && tokens
                            .get(k + 1)
                            .is_some_and(|t| t.kind == TokenKind::Number)) =>
            {
                self.start_proof(Vec::new());
                return;
            }
            "Add" if (k + 1..k + 4).any(|i| word(i) == "Morphism") => {
                self.start_proof(Vec::new());
                return;
            }
            "Require" | "From" => {
                self.require(tokens, k);
                return;
            }
            "Import" | "Export" => {
                let export = word(k) == "Export";
                for name in module_names(tokens, text, k + 1) {
                    if export {
                        self.export(name.clone());
                    }
                    self.open(OpenDirective::all(name));
                }
                return;
            }
            "Module" => {
                self.module(tokens, k + 1);
                return;
            }
            "Section" => {
                let name = word(k + 1).to_string();
                self.frames.push(Frame {
                    kind: FrameKind::Section,
                    name: name.clone(),
                    path: name,
                    opened: Vec::new(),
                    variables: Vec::new(),
                    locals: Vec::new(),
                    import_at_end: false,
                    export_at_end: false,
                });
                return;
            }
            "End" => {
                self.end(word(k + 1));
                return;
            }
            _ => None,
        };
        if let Some(what) = declares {
            let program = attributes.iter().any(|a| a == "program");
            self.declare(si, k + 1, what, visibility, attributes, !program);
        }
    }
}

#[cfg(test)]
mod tests;
