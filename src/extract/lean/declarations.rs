//! Reading declaration commands into [`RawDeclaration`]s.
//!
//! Takes one command's token range (its attributes and modifiers already read into a
//! [`Header`]); gives its declarations: `theorem`/`lemma`, `def`/`abbrev`/`opaque`,
//! `instance` (named, or named as Lean names anonymous ones), `axiom`, `alias` (one
//! theorem per name, whose proof is the target), and the `where` functions of a
//! definition (`f.aux`); `structure`, `class` and `inductive` go on to `structures.rs`,
//! notations to `notation.rs`. `example`s are read for nothing: they are not part of the
//! library. A statement is written as Lean shows it:
//! the `variable`s it includes, then its binders, then `: type`.

use super::binders::Binder;
use super::commands::{FileReader, Header};
use super::names::{anonymous_instance_name, normalize_name};
use super::source::Source;
use crate::extract::{RawDeclaration, RawReference};
use crate::library::{DeclKind, Hypothesis, ProofEnding, Visibility};

/// Where the signature of a definition-like command stops.
const SIGNATURE_ENDS: &[&str] = &[
    ":=",
    "|",
    "where",
    "deriving",
    "termination_by",
    "decreasing_by",
];

/// How a body ends: `sorry` as the whole proof is an admitted one.
fn ending(src: &Source, lo: usize, hi: usize) -> ProofEnding {
    let whole_sorry = (hi == lo + 1 && src.is(lo, "sorry"))
        || (hi == lo + 2 && src.is(lo, "by") && src.is(lo + 1, "sorry"));
    if whole_sorry {
        ProofEnding::Admitted
    } else {
        ProofEnding::Term
    }
}

pub(super) fn hypotheses_of(src: &Source, binders: &[Binder]) -> Vec<Hypothesis> {
    binders
        .iter()
        .map(|b| Hypothesis {
            names: b.names.clone(),
            ty: src.normalized(b.ty.0, b.ty.1),
            style: b.style,
        })
        .collect()
}

impl<'s, 'a> FileReader<'s, 'a> {
    /// A declaration command: attributes, modifiers, then its keyword.
    pub(super) fn declaration(&mut self, i: usize) -> usize {
        let src = self.src;
        let mut k = i;
        let mut attributes = Vec::new();
        let mut visibility = Visibility::Public;
        loop {
            if src.is(k, "@[") {
                let Some(c) = src.closing(k, src.len()) else {
                    break;
                };
                attributes.extend(self.attribute_list(k + 1, c));
                k = c + 1;
                continue;
            }
            match src.text_of(k) {
                "private" => visibility = Visibility::Private,
                "protected" => visibility = Visibility::Protected,
                "noncomputable" | "partial" | "nonrec" | "unsafe" | "public" | "meta" | "local"
                | "scoped" => {}
                _ => break,
            }
            k += 1;
        }
        let kw = src.text_of(k);
        if kw == "section" {
            return self.section(k);
        }
        let two_words = kw == "class" && matches!(src.text_of(k + 1), "inductive" | "abbrev");
        let structural = matches!(kw, "structure" | "class" | "inductive");
        let end = self.next_command(if two_words { k + 2 } else { k + 1 }, !structural);
        let h = Header {
            attributes,
            visibility,
            keyword: if two_words { k + 1 } else { k },
            end,
        };
        match kw {
            "theorem" | "lemma" | "def" | "abbrev" | "instance" | "axiom" | "opaque"
            | "example" | "irreducible_def" => self.definition(h),
            "class" if src.is(k + 1, "inductive") => self.inductive(h),
            "structure" | "class" if !two_words => self.structure(h),
            "inductive" => self.inductive(h),
            "alias" => self.alias(h),
            "notation" | "infix" | "infixl" | "infixr" | "prefix" | "postfix" | "macro"
            | "syntax" => self.notation(h),
            _ => {}
        }
        end
    }

    /// `theorem`, `lemma`, `def`, `abbrev`, `opaque`, `instance`, `axiom`, `example`.
    fn definition(&mut self, h: Header) {
        let src = self.src;
        let (k, end) = (h.keyword, h.end);
        let kind = match src.text_of(k) {
            "theorem" | "lemma" => DeclKind::Theorem,
            "instance" => DeclKind::Instance,
            "axiom" => DeclKind::Axiom,
            "example" => return,
            _ => DeclKind::Definition,
        };
        let mut j = k + 1;
        if kind == DeclKind::Instance && src.is(j, "(") && src.is(j + 1, "priority") {
            j = src.skip_group(j, end);
        }
        let name_tok = src.is_ident(j).then_some(j);
        if name_tok.is_none() && kind != DeclKind::Instance {
            return;
        }
        let header_lo = name_tok.map_or(j, |t| t + 1);
        let header_end = src
            .find_at_depth0(header_lo, end, SIGNATURE_ENDS)
            .unwrap_or(end);
        let colon = src.find_at_depth0(header_lo, header_end, &[":"]);

        let mut w = self.walker();
        w.auto_bound = true;
        let binders = w.signature_binders(header_lo, colon.unwrap_or(header_end));
        let before_type = w.refs.len();
        if let Some(c) = colon {
            w.term(c + 1, header_end);
        }
        let type_constants: Vec<String> = w.refs[before_type..]
            .iter()
            .map(|r| r.name.clone())
            .collect();
        let own_statement_refs = w.take_refs();
        let used_in_statement = w.used_variables.clone();
        w.auto_bound = false;

        let (full, extra) = match name_tok {
            Some(t) => self.full_name(src.text_of(t)),
            None => {
                let (f, _) = self.full_name(&anonymous_instance_name(&type_constants));
                (self.unused_name(f), Vec::new())
            }
        };

        let mut body = None;
        let mut aux_items = Vec::new();
        if header_end < end {
            if src.is(header_end, "where") {
                w.where_fields(header_end + 1, end);
                body = Some((header_end + 1, end));
            } else {
                let lo = if src.is(header_end, ":=") {
                    header_end + 1
                } else {
                    header_end
                };
                let where_at = src.find_at_depth0(lo, end, &["where"]);
                let hi = where_at.unwrap_or(end);
                w.term(lo, hi);
                body = Some((lo, hi));
                if let Some(wh) = where_at {
                    aux_items = src.items(wh + 1, end);
                }
            }
        }
        let proof_refs = w.take_refs();
        let used = if kind == DeclKind::Theorem {
            used_in_statement
        } else {
            w.used_variables.clone()
        };
        let (var_hyps, mut parts, mut statement_refs) = self.included_variables(&used);
        parts.extend(binders.iter().map(|b| src.normalized(b.group.0, b.group.1)));
        let conclusion = colon.map(|c| src.normalized(c + 1, header_end));
        if let Some(c) = &conclusion {
            parts.push(format!(": {c}"));
        }
        statement_refs.extend(own_statement_refs);
        let mut hypotheses = var_hyps;
        hypotheses.extend(hypotheses_of(src, &binders));

        let scope = self.scope_for(&extra);
        let first = self.out.declarations.len();
        let mut d = RawDeclaration::new(full.clone(), kind);
        d.statement = parts.join(" ");
        d.hypotheses = hypotheses;
        d.conclusion = conclusion;
        d.statement_span = src.span(k, header_end);
        d.proof_span = body.map(|(a, b)| src.span(a, b));
        d.proof_ending = body.map(|(a, b)| ending(src, a, b));
        d.visibility = h.visibility;
        d.attributes = h.attributes;
        d.statement_refs = statement_refs;
        d.proof_refs = proof_refs;
        d.dot_on_local = w.dot_on_local;
        d.scope = scope;
        self.out.declarations.push(d);

        if !aux_items.is_empty() {
            let parent_binders: Vec<String> =
                binders.iter().flat_map(|b| b.names.clone()).collect();
            let aux_kind = if kind == DeclKind::Theorem {
                DeclKind::Theorem
            } else {
                DeclKind::Definition
            };
            for (a, b) in aux_items {
                self.where_function(a, b, &full, aux_kind, scope, &parent_binders);
            }
            self.rewrite_forward_references(first, Some(full));
        }
    }

    /// One function of a `where` clause: `aux (n : Nat) : Nat := ...`, named `parent.aux`.
    /// A `termination_by`/`decreasing_by` line of its own belongs to the function before.
    fn where_function(
        &mut self,
        a: usize,
        b: usize,
        parent: &str,
        kind: DeclKind,
        scope: usize,
        parent_binders: &[String],
    ) {
        let src = self.src;
        let mut w = self.walker();
        for n in parent_binders {
            w.bind(n);
        }
        let mut k = a;
        let mut attributes = Vec::new();
        let mut visibility = Visibility::Public;
        loop {
            if src.is(k, "@[") {
                let Some(c) = src.closing(k, b) else { break };
                attributes.extend(self.attribute_list(k + 1, c));
                k = c + 1;
                continue;
            }
            match src.text_of(k) {
                "private" => visibility = Visibility::Private,
                "protected" => visibility = Visibility::Protected,
                "noncomputable" | "partial" | "nonrec" | "unsafe" => {}
                _ => break,
            }
            k += 1;
        }
        if !src.is_ident(k) {
            w.term(a, b);
            let refs = w.take_refs();
            if let Some(last) = self.out.declarations.last_mut() {
                last.proof_refs.extend(refs);
                last.dot_on_local += w.dot_on_local;
            }
            return;
        }
        let header_end = src.find_at_depth0(k + 1, b, SIGNATURE_ENDS).unwrap_or(b);
        let colon = src.find_at_depth0(k + 1, header_end, &[":"]);
        w.auto_bound = true;
        let binders = w.signature_binders(k + 1, colon.unwrap_or(header_end));
        if let Some(c) = colon {
            w.term(c + 1, header_end);
        }
        let statement_refs = w.take_refs();
        w.auto_bound = false;
        let body_lo = if src.is(header_end, ":=") {
            header_end + 1
        } else {
            header_end
        };
        let body = (body_lo < b).then_some((body_lo, b));
        if let Some((lo, hi)) = body {
            w.term(lo, hi);
        }
        let mut parts: Vec<String> = binders
            .iter()
            .map(|g| src.normalized(g.group.0, g.group.1))
            .collect();
        let conclusion = colon.map(|c| src.normalized(c + 1, header_end));
        if let Some(c) = &conclusion {
            parts.push(format!(": {c}"));
        }
        let mut d =
            RawDeclaration::new(format!("{parent}.{}", normalize_name(src.text_of(k))), kind);
        d.statement = parts.join(" ");
        d.hypotheses = hypotheses_of(src, &binders);
        d.conclusion = conclusion;
        d.statement_span = src.span(k, header_end);
        d.proof_span = body.map(|(lo, hi)| src.span(lo, hi));
        d.proof_ending = body.map(|(lo, hi)| ending(src, lo, hi));
        d.visibility = visibility;
        d.attributes = attributes;
        d.statement_refs = statement_refs;
        d.proof_refs = w.take_refs();
        d.dot_on_local = w.dot_on_local;
        d.scope = scope;
        self.out.declarations.push(d);
    }

    /// `alias new := old` and `alias ⟨mp, mpr⟩ := iff_lemma`: theorems whose proof is
    /// the target (Batteries' `alias` copies the target's kind; without types we say
    /// theorem, which is what aliases almost always are).
    fn alias(&mut self, h: Header) {
        let src = self.src;
        let (k, end) = (h.keyword, h.end);
        let mut j = k + 1;
        let mut names = Vec::new();
        if src.is(j, "⟨") {
            let Some(c) = src.closing(j, end) else { return };
            names.extend((j + 1..c).filter(|&t| src.is_ident(t) && !src.is(t, "_")));
            j = c + 1;
        } else if src.is_ident(j) {
            names.push(j);
            j += 1;
        }
        if !src.is(j, ":=") || !src.is_ident(j + 1) {
            return;
        }
        let Some(target) = src.tok(j + 1) else { return };
        let target = RawReference {
            name: normalize_name(src.text_of(j + 1)),
            offset: target.start,
        };
        for t in names {
            let (full, extra) = self.full_name(src.text_of(t));
            let mut d = RawDeclaration::new(full, DeclKind::Theorem);
            d.statement = src.normalized(k, j + 2);
            d.statement_span = src.span(k, j + 2);
            d.proof_span = Some(src.span(j + 1, j + 2));
            d.proof_ending = Some(ProofEnding::Term);
            d.visibility = h.visibility;
            d.attributes = h.attributes.clone();
            d.proof_refs = vec![target.clone()];
            d.scope = self.scope_for(&extra);
            self.out.declarations.push(d);
        }
    }
}
