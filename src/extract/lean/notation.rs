//! Reading notations, macros and syntax rules into `Notation` declarations.
//!
//! Takes one `notation`, `infix`/`infixl`/`infixr`/`prefix`/`postfix`, `macro`, `syntax`
//! or `macro_rules` command; gives a declaration named as Lean names it (its
//! `(name := ...)`, else the generated `«term_+++_»`-style name), with its symbols and,
//! when the expansion is a term headed by a name (`=> merge`, `` => `(merge $a $b) ``),
//! that name as written. A `macro_rules` adds its expansion to the `syntax` rule of this
//! file whose first symbol it matches; one for syntax declared elsewhere declares nothing.
//! The names in an expansion are the notation's proof references. Uses of a notation in
//! later statements are not references: that needs the notation table of the whole
//! library.

use super::commands::{FileReader, Header};
use super::lexer::Kind;
use super::names::{normalize_name, syntax_rule_name, SyntaxItem};
use super::source::Source;
use crate::extract::RawDeclaration;
use crate::library::{DeclKind, NotationInfo, ProofEnding};

/// The contents of a string literal token, with `\"` and `\\` unescaped.
fn unquote(s: &str) -> String {
    let inner = s
        .strip_prefix('"')
        .and_then(|s| s.strip_suffix('"'))
        .unwrap_or(s);
    let mut out = String::with_capacity(inner.len());
    let mut chars = inner.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            match chars.next() {
                Some('n') => out.push('\n'),
                Some('t') => out.push('\t'),
                Some(other) => out.push(other),
                None => {}
            }
        } else {
            out.push(c);
        }
    }
    out
}

/// The name heading an expansion (`merge a b`, `(merge a b)`, `` `(merge $a $b) ``), if
/// it is not one of the notation's own variables.
fn head_name(src: &Source, lo: usize, hi: usize, vars: &[String]) -> Option<String> {
    let mut k = lo;
    while k < hi && matches!(src.text_of(k), "(" | "`(") {
        k += 1;
    }
    if src.is_ident(k) && src.is(k + 1, "|") {
        k += 2;
    }
    let glued_antiquotation = src.glued_to_prev(k) && src.is(k.wrapping_sub(1), "$");
    if k < hi && src.is_ident(k) && !glued_antiquotation {
        let name = normalize_name(src.text_of(k));
        (!vars.contains(&name)).then_some(name)
    } else {
        None
    }
}

impl<'s, 'a> FileReader<'s, 'a> {
    /// `notation`, the `infix` family, `macro` and `syntax`.
    pub(super) fn notation(&mut self, h: Header) {
        let src = self.src;
        let (k, end) = (h.keyword, h.end);
        let kw = src.text_of(k);
        let mut j = k + 1;
        if src.is(j, ":") {
            j += 2;
        }
        let mut explicit = None;
        while src.is(j, "(")
            && matches!(src.text_of(j + 1), "name" | "priority" | "kind")
            && src.is(j + 2, ":=")
        {
            if src.is(j + 1, "name") && src.is_ident(j + 3) {
                explicit = Some(normalize_name(src.text_of(j + 3)));
            }
            j = src.skip_group(j, end);
        }
        let arrow = src.find_at_depth0(j, end, &["=>", ":="]);
        let spec_hi = arrow.unwrap_or(end);
        let mut vars = Vec::new();
        let mut items = Vec::new();
        let category;
        match kw {
            "infix" | "infixl" | "infixr" | "prefix" | "postfix" => {
                let Some(atom) = (j..spec_hi).find(|&t| src.kind(t) == Some(Kind::Str)) else {
                    return;
                };
                let atom = SyntaxItem::Atom(unquote(src.text_of(atom)));
                items = match kw {
                    "prefix" => vec![atom, SyntaxItem::Hole],
                    "postfix" => vec![SyntaxItem::Hole, atom],
                    _ => vec![SyntaxItem::Hole, atom, SyntaxItem::Hole],
                };
                category = "term".to_string();
            }
            "notation" => {
                let mut t = j;
                while t < spec_hi {
                    match src.kind(t) {
                        Some(Kind::Str) => items.push(SyntaxItem::Atom(unquote(src.text_of(t)))),
                        Some(Kind::Ident) => {
                            items.push(SyntaxItem::Hole);
                            vars.push(normalize_name(src.text_of(t)));
                        }
                        _ if src.is(t, ":") => t += 1,
                        _ => {}
                    }
                    t += 1;
                }
                category = "term".to_string();
            }
            _ => {
                // `macro ... : cat => rhs` and `syntax ... : cat`.
                let typed =
                    spec_hi >= j + 2 && src.is(spec_hi - 2, ":") && src.is_ident(spec_hi - 1);
                category = if typed {
                    src.text_of(spec_hi - 1).to_string()
                } else {
                    "term".to_string()
                };
                let items_hi = if typed { spec_hi - 2 } else { spec_hi };
                let mut t = j;
                while t < items_hi {
                    match src.kind(t) {
                        Some(Kind::Str) => items.push(SyntaxItem::Atom(unquote(src.text_of(t)))),
                        Some(Kind::Ident) => {
                            items.push(SyntaxItem::Hole);
                            if src.is(t + 1, ":") && src.glued_to_prev(t + 1) {
                                vars.push(normalize_name(src.text_of(t)));
                                t += 2;
                                if src.is(t + 1, ":") && src.glued_to_prev(t + 1) {
                                    t += 2;
                                }
                            }
                        }
                        _ => {}
                    }
                    t += 1;
                }
            }
        }
        let name = explicit.unwrap_or_else(|| syntax_rule_name(&category, &items));
        let (full, _) = self.full_name(&name);
        let full = self.unused_name(full);
        let symbols: Vec<String> = items
            .iter()
            .filter_map(|i| match i {
                SyntaxItem::Atom(a) if !a.trim().is_empty() => Some(a.trim().to_string()),
                _ => None,
            })
            .collect();
        let mut w = self.walker();
        for v in &vars {
            w.bind(v);
        }
        let rhs = arrow.map(|a| (a + 1, end)).filter(|(lo, hi)| lo < hi);
        let mut unfolds = None;
        if let Some((lo, hi)) = rhs {
            w.term(lo, hi);
            if category == "term" {
                unfolds = head_name(src, lo, hi, &vars);
            }
        }
        let statement_hi = if kw == "macro" { spec_hi } else { end };
        let mut d = RawDeclaration::new(full, DeclKind::Notation);
        d.statement = src.normalized(k, statement_hi);
        d.statement_span = src.span(k, spec_hi);
        d.proof_span = rhs.map(|(lo, hi)| src.span(lo, hi));
        d.proof_ending = rhs.map(|_| ProofEnding::Term);
        d.visibility = h.visibility;
        d.attributes = h.attributes;
        d.proof_refs = w.take_refs();
        d.dot_on_local = w.dot_on_local;
        d.notation = Some(NotationInfo {
            symbols: symbols.clone(),
            unfolds_to: None,
            unfolds_to_written: unfolds,
        });
        d.scope = self.scope_for(&[]);
        if kw == "syntax" {
            if let Some(first) = symbols.first() {
                self.syntax_rules
                    .push((self.out.declarations.len(), category, first.clone()));
            }
        }
        self.out.declarations.push(d);
    }

    /// `macro_rules | `(tactic| credit_simp) => `(tactic| simp [credit])`: the expansion
    /// goes to the matching `syntax` rule of this file.
    pub(super) fn macro_rules(&mut self, i: usize) -> usize {
        let src = self.src;
        let end = self.next_command(i + 1, true);
        let mut starts = Vec::new();
        let mut k = i + 1;
        while k < end {
            if src.is(k, "|") {
                starts.push(k);
            }
            k = src.skip_group(k, end);
        }
        for (n, &a) in starts.iter().enumerate() {
            let b = starts.get(n + 1).copied().unwrap_or(end);
            let Some(arrow) = src.find_at_depth0(a + 1, b, &["=>"]) else {
                continue;
            };
            if !src.is(a + 1, "`(") {
                continue;
            }
            let mut p = a + 2;
            if src.is_ident(p) && src.is(p + 1, "|") {
                p += 2;
            }
            let first = src.text_of(p);
            let Some((d, category)) = self
                .syntax_rules
                .iter()
                .rev()
                .find(|(_, _, atom)| atom == first)
                .map(|(d, c, _)| (*d, c.clone()))
            else {
                continue;
            };
            let mut w = self.walker();
            w.term(arrow + 1, b);
            let refs = w.take_refs();
            let unfolds = if category == "term" {
                head_name(src, arrow + 1, b, &[])
            } else {
                None
            };
            let Some(decl) = self.out.declarations.get_mut(d) else {
                continue;
            };
            decl.proof_refs.extend(refs);
            decl.dot_on_local += w.dot_on_local;
            if decl.proof_span.is_none() && arrow + 1 < b {
                decl.proof_span = Some(src.span(arrow + 1, b));
                decl.proof_ending = Some(ProofEnding::Term);
            }
            if let Some(info) = decl.notation.as_mut() {
                if info.unfolds_to_written.is_none() {
                    info.unfolds_to_written = unfolds;
                }
            }
        }
        end
    }
}
