//! From declaration drafts to raw declarations: names qualified by the module chain,
//! spans, statement and proof references with locals left out, proofs read up to their
//! `Qed`/`Defined`/`Admitted`/`Abort`, and the section variables each declaration uses.
//!
//! Takes drafts from `declarations.rs` and the sentences of proofs; gives the file's
//! `RawDeclaration`s. It does not decide what a sentence is (that is `mod.rs`).

use std::collections::HashSet;

use super::commands::{clean_text, prefixes, scan_into};
use super::declarations::{self, Declares, Draft, Reader};
use super::references::{Mode, Scan};
use super::{Extractor, PendingProof, SectionVariable};
use crate::extract::RawDeclaration;
use crate::library::{DeclKind, Hypothesis, ProofEnding, Visibility};

impl<'a> Extractor<'a> {
    /// Reads the declarations of sentence `si` from token `start` (relative to it).
    pub(super) fn declare(
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
                    // An empty body (`:=` right before the sentence's end) has no span:
                    // its "first" token would lie after its "last".
                    if let (false, Some(first), Some(last)) = (
                        b.is_empty(),
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
    pub(super) fn raw_declaration(
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
        // `Lemma l : P.` is written with the colon right after the name; the statement of a
        // declaration without binders is its type, not `: P`.
        let statement = reader.text_of(d.statement.clone());
        raw.statement = match statement.strip_prefix(':') {
            Some(rest) if !rest.starts_with('=') => rest.trim_start().to_string(),
            _ => statement,
        };
        raw.statement_span = self.index.span(start as usize, end.max(start) as usize);
        raw.hypotheses = d.hypotheses.clone();
        raw.conclusion = d.conclusion.clone().map(|c| reader.text_of(c));
        raw.visibility = visibility;
        raw.attributes = attributes.to_vec();
        raw.notation = d.notation.clone();
        raw.scope = self.scope;
        raw
    }

    pub(super) fn start_proof(&mut self, declarations: Vec<(usize, Scan)>) {
        self.pending = Some(PendingProof {
            declarations,
            sentences: Vec::new(),
            using: Vec::new(),
        });
    }

    /// Ends the pending proof with `ending` (at sentence `last`, when it was read).
    pub(super) fn close_proof(&mut self, ending: Option<ProofEnding>, last: Option<usize>) {
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
    pub(super) fn finish(
        &mut self,
        idx: usize,
        statement: Scan,
        proof: Option<Scan>,
        using: &[String],
    ) {
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
}
