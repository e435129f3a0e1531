//! Vernacular commands that declare nothing but change the naming context: section
//! variables, `Require`, `Module`, `End`; and the small readers of sentence parts they and
//! the rest of the frontend share (attributes and prefixes, module lists, comment-free
//! text).

use super::declarations::Reader;
use super::lexer::{self, TokenKind};
use super::references::{self, Mode, Scan};
use super::{Extractor, Frame, FrameKind, SectionVariable};
use crate::extract::text::normalize_whitespace;
use crate::extract::{OpenDirective, RawImport};
use crate::library::Hypothesis;

impl<'a> Extractor<'a> {
    /// `Variable x y : T`, `Variables (x : A) (y : B)`, `Context {A} `{Eq A}`.
    pub(super) fn section_variables(&mut self, tokens: &[lexer::Token], start: usize) {
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
    pub(super) fn require(&mut self, tokens: &[lexer::Token], k: usize) {
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
    pub(super) fn module(&mut self, tokens: &[lexer::Token], mut i: usize) {
        let text = self.text;
        let word = |i: usize| tokens.get(i).map_or("", |t| t.text(text));
        let (mut import_at_end, mut export_at_end) = (false, false);
        if word(i) == "Type" {
            i += 1;
        } else if matches!(word(i), "Import" | "Export") {
            import_at_end = true;
            export_at_end = word(i) == "Export";
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
            export_at_end,
        });
        self.refresh_scope();
    }

    /// `End X.`: closes the innermost module or section named `X`.
    pub(super) fn end(&mut self, name: &str) {
        let Some(at) = self.frames.iter().rposition(|f| f.name == name) else {
            return;
        };
        let closed: Vec<Frame> = self.frames.drain(at..).collect();
        let mut exported = None;
        if let Some(first) = closed.first() {
            if first.kind == FrameKind::Module && first.import_at_end {
                let path = first.path.clone();
                if first.export_at_end {
                    exported = Some(path.clone());
                }
                match self.frames.last_mut() {
                    Some(f) => f.opened.push(OpenDirective::all(path)),
                    None => self.file_opened.push(OpenDirective::all(path)),
                }
            }
        }
        self.refresh_scope();
        if let Some(path) = exported {
            self.export(path);
        }
    }
}

/// Scans `tokens` into `out`.
pub(super) fn scan_into(tokens: &[lexer::Token], text: &str, mode: Mode, out: &mut Scan) {
    references::scan(tokens, text, mode, out);
}

/// The `:=` at depth 0 from token `from`, if any.
pub(super) fn find_top_assign(tokens: &[lexer::Token], text: &str, from: usize) -> Option<usize> {
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
pub(super) fn module_definition(tokens: &[lexer::Token], text: &str, from: usize) -> bool {
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
pub(super) fn module_names(tokens: &[lexer::Token], text: &str, from: usize) -> Vec<String> {
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
pub(super) fn prefixes(tokens: &[lexer::Token], text: &str) -> (Vec<String>, bool, usize) {
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
pub(super) fn clean_text(
    text: &str,
    comments: &[std::ops::Range<u32>],
    start: u32,
    end: u32,
) -> String {
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
