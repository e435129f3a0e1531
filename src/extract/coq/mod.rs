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

mod declarations;
mod lexer;
mod references;
mod resolve;

use std::collections::HashSet;

pub use resolve::resolve;

use declarations::{Declares, Draft, Reader};
use lexer::{Lexed, Sentence, TokenKind};
use references::{Mode, Scan};

use super::text::{normalize_whitespace, LineIndex};
use super::{FileExtraction, OpenDirective, RawDeclaration, RawImport, Scope};
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
                for name in module_names(tokens, text, k + 1) {
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

    /// Reads the declarations of sentence `si` from token `start` (relative to it).
    fn declare(
        &mut self,
        si: usize,
        start: usize,
        what: Declares,
        visibility: Visibility,
        attributes: Vec<String>,
        proof_may_follow: bool,
    ) {
        let s = &self.lx.sentences[si];
        let tokens = self.sentence_tokens(s);
        let text = self.text;
        let comments = &self.lx.comments;
        let clean = move |a: u32, b: u32| clean_text(text, comments, a, b);
        let reader = Reader {
            tokens,
            text,
            clean: &clean,
        };
        let drafts = declarations::read(&reader, what, start, tokens.len());
        if drafts.is_empty() {
            if proof_may_follow && matches!(what, Declares::Theorem) {
                self.start_proof(Vec::new());
            }
            return;
        }
        let prefix = self.current_path();
        let block_start = tokens
            .get(drafts[0].name_token)
            .map_or(s.start, |t| t.start);
        let mutual = drafts
            .iter()
            .filter(|d| !matches!(d.kind, DeclKind::Constructor | DeclKind::Field))
            .count()
            > 1;
        let mut waiting = Vec::new();
        for d in drafts {
            let needs_proof = proof_may_follow
                && d.body.is_none()
                && matches!(
                    d.kind,
                    DeclKind::Theorem | DeclKind::Definition | DeclKind::Instance
                )
                && !matches!(what, Declares::Axiom | Declares::Scheme);
            let mut statement_scan = Scan::default();
            // A notation's statement is its string and its term: only the term names things.
            let (read, mode) = match (d.kind, d.body.clone()) {
                (DeclKind::Notation, Some(body)) => (body, Mode::Term),
                _ => (d.statement.clone(), Mode::Statement),
            };
            scan_into(
                tokens.get(read).unwrap_or(&[]),
                text,
                mode,
                &mut statement_scan,
            );
            statement_scan.bound.extend(d.locals.iter().cloned());
            let raw = self.raw_declaration(
                &reader,
                &d,
                &prefix,
                visibility,
                &attributes,
                mutual,
                block_start,
            );
            let idx = self.out.declarations.len();
            self.out.declarations.push(raw);
            if needs_proof {
                waiting.push((idx, statement_scan));
            } else {
                let body = d
                    .body
                    .clone()
                    .filter(|_| !matches!(d.kind, DeclKind::Notation | DeclKind::Axiom));
                let mut body_scan = Scan::default();
                if let Some(b) = body.clone() {
                    scan_into(
                        tokens.get(b.clone()).unwrap_or(&[]),
                        text,
                        Mode::Term,
                        &mut body_scan,
                    );
                    let decl = &mut self.out.declarations[idx];
                    if let (Some(first), Some(last)) = (
                        tokens.get(b.start),
                        b.end.checked_sub(1).and_then(|e| tokens.get(e)),
                    ) {
                        decl.proof_span =
                            Some(self.index.span(first.start as usize, last.end as usize));
                        decl.proof_ending = Some(ProofEnding::Term);
                    }
                }
                self.finish(idx, statement_scan, body.map(|_| body_scan), &[]);
            }
        }
        if !waiting.is_empty() {
            self.start_proof(waiting);
        }
    }

    #[allow(clippy::too_many_arguments)]
    fn raw_declaration(
        &self,
        reader: &Reader,
        d: &Draft,
        prefix: &str,
        visibility: Visibility,
        attributes: &[String],
        mutual: bool,
        block_start: u32,
    ) -> RawDeclaration {
        let mut raw = RawDeclaration::new(format!("{prefix}.{}", d.name), d.kind);
        let name_start = reader.tokens.get(d.name_token).map_or(0, |t| t.start);
        let start = if mutual && !matches!(d.kind, DeclKind::Constructor | DeclKind::Field) {
            block_start
        } else {
            name_start
        };
        let end = d
            .statement
            .end
            .checked_sub(1)
            .filter(|&e| e >= d.statement.start)
            .and_then(|e| reader.tokens.get(e))
            .map_or_else(
                || reader.tokens.get(d.name_token).map_or(start, |t| t.end),
                |t| t.end,
            );
        raw.statement = reader.text_of(d.statement.clone());
        raw.statement_span = self.index.span(start as usize, end.max(start) as usize);
        raw.hypotheses = d.hypotheses.clone();
        raw.conclusion = d.conclusion.clone().map(|c| reader.text_of(c));
        raw.visibility = visibility;
        raw.attributes = attributes.to_vec();
        raw.notation = d.notation.clone();
        raw.scope = self.scope;
        raw
    }

    fn start_proof(&mut self, declarations: Vec<(usize, Scan)>) {
        self.pending = Some(PendingProof {
            declarations,
            sentences: Vec::new(),
            using: Vec::new(),
        });
    }

    /// Ends the pending proof with `ending` (at sentence `last`, when it was read).
    fn close_proof(&mut self, ending: Option<ProofEnding>, last: Option<usize>) {
        let Some(pending) = self.pending.take() else {
            return;
        };
        if ending == Some(ProofEnding::Aborted) {
            if let Some(&(first, _)) = pending.declarations.first() {
                self.out.declarations.truncate(first);
            }
            return;
        }
        let sentences = &self.lx.sentences;
        let mut proof_scan = Scan::default();
        for &si in &pending.sentences {
            let s = &sentences[si];
            let tokens = self.sentence_tokens(s);
            let (_, _, k) = prefixes(tokens, self.text);
            if tokens.get(k).map(|t| t.text(self.text)) == Some("Proof") {
                match tokens.get(k + 1).map(|t| t.text(self.text)) {
                    Some("using") => continue,
                    Some("with") => {
                        scan_into(&tokens[k + 2..], self.text, Mode::Tactics, &mut proof_scan);
                        continue;
                    }
                    Some(_) if ending == Some(ProofEnding::Term) => {
                        scan_into(&tokens[k + 1..], self.text, Mode::Term, &mut proof_scan);
                        continue;
                    }
                    _ => continue,
                }
            }
            scan_into(tokens, self.text, Mode::Tactics, &mut proof_scan);
        }
        let first = pending.sentences.first().map(|&si| sentences[si].start);
        let end = last
            .or(pending.sentences.last().copied())
            .map(|si| sentences[si].end);
        let span = match (first.or(end), end) {
            (Some(a), Some(b)) => Some(self.index.span(a as usize, b as usize)),
            _ => None,
        };
        for (idx, statement_scan) in pending.declarations {
            if let Some(d) = self.out.declarations.get_mut(idx) {
                d.proof_span = span;
                d.proof_ending = ending;
            }
            self.finish(
                idx,
                statement_scan,
                Some(proof_scan.clone()),
                &pending.using,
            );
        }
    }

    /// Fills the references and section hypotheses of declaration `idx`.
    fn finish(&mut self, idx: usize, statement: Scan, proof: Option<Scan>, using: &[String]) {
        let mut locals: HashSet<String> = statement.bound.clone();
        if let Some(p) = &proof {
            locals.extend(p.bound.iter().cloned());
        }
        let mut variables: Vec<&SectionVariable> = Vec::new();
        for f in &self.frames {
            variables.extend(f.variables.iter());
            locals.extend(f.locals.iter().cloned());
        }
        let variable_names: HashSet<&str> = variables
            .iter()
            .flat_map(|v| v.hypothesis.names.iter().map(String::as_str))
            .collect();
        // Section variables the declaration uses, and those their types use.
        let mut used: HashSet<String> = HashSet::new();
        let written = statement
            .refs
            .iter()
            .chain(proof.iter().flat_map(|p| p.refs.iter()))
            .map(|r| r.name.as_str())
            .chain(
                proof
                    .iter()
                    .flat_map(|p| p.hypotheses.iter().map(String::as_str)),
            )
            .chain(using.iter().map(String::as_str));
        for name in written {
            if variable_names.contains(name) && !statement.bound.contains(name) {
                used.insert(name.to_string());
            }
        }
        if using.iter().any(|u| u == "All") {
            used.extend(variable_names.iter().map(|s| s.to_string()));
        }
        loop {
            let before = used.len();
            for v in &variables {
                if v.hypothesis.names.iter().any(|n| used.contains(n))
                    || (v.hypothesis.names.is_empty()
                        && v.mentions.iter().any(|m| used.contains(m)))
                {
                    for m in &v.mentions {
                        if variable_names.contains(m.as_str()) {
                            used.insert(m.clone());
                        }
                    }
                }
            }
            if used.len() == before {
                break;
            }
        }
        let mut hypotheses = Vec::new();
        for v in &variables {
            let h = &v.hypothesis;
            if h.names.is_empty() {
                if v.mentions.iter().any(|m| used.contains(m)) {
                    hypotheses.push(h.clone());
                }
                continue;
            }
            let names: Vec<String> = h
                .names
                .iter()
                .filter(|n| used.contains(*n))
                .cloned()
                .collect();
            if !names.is_empty() {
                hypotheses.push(Hypothesis {
                    names,
                    ty: h.ty.clone(),
                    style: h.style,
                });
            }
        }
        locals.extend(variable_names.iter().map(|s| s.to_string()));
        let statement_refs = statement.free_refs(&locals);
        let proof_refs = proof.map(|p| p.free_refs(&locals)).unwrap_or_default();
        if let Some(d) = self.out.declarations.get_mut(idx) {
            if !hypotheses.is_empty() {
                hypotheses.append(&mut d.hypotheses);
                d.hypotheses = hypotheses;
            }
            d.statement_refs = statement_refs;
            d.proof_refs = proof_refs;
        }
    }

    /// `Variable x y : T`, `Variables (x : A) (y : B)`, `Context {A} `{Eq A}`.
    fn section_variables(&mut self, tokens: &[lexer::Token], start: usize) {
        let text = self.text;
        let comments = &self.lx.comments;
        let clean = move |a: u32, b: u32| clean_text(text, comments, a, b);
        let reader = Reader {
            tokens,
            text,
            clean: &clean,
        };
        let end = tokens.len();
        let groups: Vec<(Hypothesis, std::ops::Range<usize>)> =
            if matches!(reader.word(start), "(" | "{" | "[" | "`" | "!" | "'") {
                let hyps = reader.hypotheses(start..end);
                // Each group's type tokens: found again for the mentions.
                hyps.into_iter().map(|h| (h, start..end)).collect()
            } else {
                match reader.find_top(start..end, |w| w == ":") {
                    Some(colon) => {
                        let names = (start..colon)
                            .filter(|&k| reader.is_ident(k))
                            .map(|k| reader.word(k).to_string())
                            .collect();
                        vec![(
                            Hypothesis {
                                names,
                                ty: reader.text_of(colon + 1..end),
                                style: crate::library::BinderStyle::Explicit,
                            },
                            colon + 1..end,
                        )]
                    }
                    None => Vec::new(),
                }
            };
        let Some(frame) = self
            .frames
            .iter_mut()
            .rev()
            .find(|f| f.kind == FrameKind::Section)
        else {
            return;
        };
        for (h, _) in groups {
            let ty_lexed = lexer::lex(&format!("{}.", h.ty));
            let mentions = ty_lexed
                .tokens
                .iter()
                .filter(|t| t.kind == TokenKind::Ident)
                .filter_map(|t| {
                    let w = t.text(&h.ty);
                    (!w.is_empty()).then(|| w.to_string())
                })
                .collect();
            frame.variables.push(SectionVariable {
                hypothesis: h,
                mentions,
            });
        }
    }

    /// `Require Import A B`, `From L Require Export A`.
    fn require(&mut self, tokens: &[lexer::Token], k: usize) {
        let text = self.text;
        let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
        let (from, mut i) = if word(k) == "From" {
            (Some(word(k + 1).to_string()), k + 2)
        } else {
            (None, k)
        };
        if word(i) != "Require" {
            return;
        }
        i += 1;
        let (export, opens) = match word(i) {
            "Import" => {
                i += 1;
                (false, true)
            }
            "Export" => {
                i += 1;
                (true, true)
            }
            _ => (false, false),
        };
        let line = tokens
            .get(k)
            .map_or(1, |t| self.index.line(t.start as usize));
        for name in module_names(tokens, text, i) {
            self.out.imports.push(RawImport {
                module: name,
                from: from.clone(),
                export,
                opens,
                line,
            });
        }
    }

    /// `Module M.`, `Module Type T.`, `Module Import M (X : T) <: S.`; `Module M := N.`
    /// declares nothing that has source here.
    fn module(&mut self, tokens: &[lexer::Token], mut i: usize) {
        let text = self.text;
        let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
        let mut import_at_end = false;
        if word(i) == "Type" {
            i += 1;
        } else if matches!(word(i), "Import" | "Export") {
            import_at_end = true;
            i += 1;
        }
        let Some(name) = tokens.get(i).filter(|t| t.kind == TokenKind::Ident) else {
            return;
        };
        if module_definition(tokens, text, i + 1) {
            return;
        }
        let name = name.text(text).to_string();
        let path = format!("{}.{name}", self.current_path());
        self.frames.push(Frame {
            kind: FrameKind::Module,
            name,
            path,
            opened: Vec::new(),
            variables: Vec::new(),
            locals: Vec::new(),
            import_at_end,
        });
        self.refresh_scope();
    }

    /// `End X.`: closes the innermost module or section named `X`.
    fn end(&mut self, name: &str) {
        let Some(at) = self.frames.iter().rposition(|f| f.name == name) else {
            return;
        };
        let closed: Vec<Frame> = self.frames.drain(at..).collect();
        if let Some(first) = closed.first() {
            if first.kind == FrameKind::Module && first.import_at_end {
                let path = first.path.clone();
                match self.frames.last_mut() {
                    Some(f) => f.opened.push(OpenDirective::all(path)),
                    None => self.file_opened.push(OpenDirective::all(path)),
                }
            }
        }
        self.refresh_scope();
    }
}

/// Scans `tokens` into `out`.
fn scan_into(tokens: &[lexer::Token], text: &str, mode: Mode, out: &mut Scan) {
    references::scan(tokens, text, mode, out);
}

/// The `:=` at depth 0 from token `from`, if any.
fn find_top_assign(tokens: &[lexer::Token], text: &str, from: usize) -> Option<usize> {
    let mut depth = 0i32;
    for (i, t) in tokens.iter().enumerate().skip(from) {
        match t.text(text) {
            "(" | "[" | "{" | "{|" => depth += 1,
            ")" | "]" | "}" | "|}" => depth -= 1,
            ":=" if depth == 0 => return Some(i),
            _ => {}
        }
    }
    None
}

/// Whether a `Module` sentence defines the module by `:=` (an alias or a functor
/// application, with no body in this file) rather than opening it; the `:=` of
/// `with Module E := F` or `with Definition t := u` in its signature does not count.
fn module_definition(tokens: &[lexer::Token], text: &str, from: usize) -> bool {
    let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
    let mut depth = 0i32;
    for (i, t) in tokens.iter().enumerate().skip(from) {
        match t.text(text) {
            "(" | "[" | "{" => depth += 1,
            ")" | "]" | "}" => depth -= 1,
            ":=" if depth == 0 => {
                let constraint = i >= 3
                    && word(i - 3) == "with"
                    && matches!(word(i - 2), "Module" | "Definition");
                if !constraint {
                    return true;
                }
            }
            _ => {}
        }
    }
    false
}

/// Module names in an `Import`/`Require` list from token `from`, skipping `(notations)`
/// filters and `-`.
fn module_names(tokens: &[lexer::Token], text: &str, from: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut depth = 0i32;
    for t in tokens.iter().skip(from) {
        match t.text(text) {
            "(" => depth += 1,
            ")" => depth -= 1,
            w if depth == 0 && t.kind == TokenKind::Ident => out.push(w.to_string()),
            _ => {}
        }
    }
    out
}

/// The attributes and prefix words of a sentence (`#[local]`, `Local`, `Program`, ...):
/// the attributes as written, whether the sentence is `Local`, and the keyword's index.
fn prefixes(tokens: &[lexer::Token], text: &str) -> (Vec<String>, bool, usize) {
    let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
    let mut attributes = Vec::new();
    let mut local = false;
    let mut k = 0;
    loop {
        match word(k) {
            "#" if word(k + 1) == "[" => {
                let mut depth = 0i32;
                let mut j = k + 1;
                let mut item_start = k + 2;
                while j < tokens.len() {
                    match word(j) {
                        "[" | "(" => depth += 1,
                        "]" | ")" => {
                            depth -= 1;
                            if depth == 0 {
                                break;
                            }
                        }
                        "," if depth == 1 => {
                            push_attribute(tokens, text, item_start, j, &mut attributes);
                            item_start = j + 1;
                        }
                        _ => {}
                    }
                    j += 1;
                }
                push_attribute(tokens, text, item_start, j, &mut attributes);
                k = j + 1;
            }
            "Local" => {
                attributes.push("local".into());
                k += 1;
            }
            w @ ("Global" | "Program" | "Polymorphic" | "Monomorphic" | "Cumulative"
            | "NonCumulative" | "Private" | "Export")
                if is_prefix_word(w, word(k + 1)) =>
            {
                attributes.push(w.to_lowercase());
                k += 1;
            }
            _ => break,
        }
    }
    local |= attributes.iter().any(|a| a == "local");
    (attributes, local, k)
}

/// `Export` is a prefix only before a declaration keyword (`#[export]` style), not in
/// `Export M.`.
fn is_prefix_word(word: &str, next: &str) -> bool {
    word != "Export" || matches!(next, "Instance" | "Hint" | "Set" | "Unset")
}

fn push_attribute(tokens: &[lexer::Token], text: &str, a: usize, b: usize, out: &mut Vec<String>) {
    if a >= b || b > tokens.len() {
        return;
    }
    let start = tokens[a].start as usize;
    let end = tokens[b - 1].end as usize;
    if let Some(s) = text.get(start..end) {
        let s = normalize_whitespace(s);
        if !s.is_empty() {
            out.push(s);
        }
    }
}

/// The text of bytes `start..end` with comments left out, white space normalised.
fn clean_text(text: &str, comments: &[std::ops::Range<u32>], start: u32, end: u32) -> String {
    let mut out = String::new();
    let mut at = start;
    let first = comments.partition_point(|c| c.end <= start);
    for c in &comments[first..] {
        if c.start >= end {
            break;
        }
        if c.start > at {
            out.push_str(text.get(at as usize..c.start as usize).unwrap_or(""));
            out.push(' ');
        }
        at = at.max(c.end);
    }
    if at < end {
        out.push_str(text.get(at as usize..end as usize).unwrap_or(""));
    }
    normalize_whitespace(&out)
}

#[cfg(test)]
mod tests;
