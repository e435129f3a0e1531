//! Reading `structure`, `class` and `inductive` commands.
//!
//! Takes one command's token range (with its [`Header`]); gives the type, then its
//! constructor (`mk` unless written `make ::`), one field per projection (`S.qty`) and one
//! `toParent` field per `extends`, or, for an `inductive` (and `class inductive`), its
//! constructors `T.ctor`. The structure's body references are those of its fields' types
//! and defaults; the inductive's, those of its constructors. Derived instances
//! (`deriving Repr`) are not declared: their names are Lean's business, not written.

use super::binders::Binder;
use super::commands::{FileReader, Header};
use super::context::binder_text;
use super::declarations::hypotheses_of;
use super::names::{components, normalize_name};
use super::terms::Walker;
use crate::extract::{RawDeclaration, RawReference};
use crate::library::{BinderStyle, DeclKind, Hypothesis, ProofEnding, Visibility};

/// One parent of a structure (`extends Line`), which gives the field `toLine`.
struct Parent {
    projection: String,
    ty: String,
    refs: Vec<RawReference>,
    span: (usize, usize),
}

/// What the body of a structure declares, as it is read line by line.
struct StructureBody {
    fields: Vec<Field>,
    /// References of new defaults for inherited fields (`qty := 0` after `extends`).
    overrides: Vec<RawReference>,
    /// The constructor's name and token range (`mk` at the structure's name unless
    /// written `make ::`).
    ctor: (String, (usize, usize)),
    has_parents: bool,
}

/// One structure field as read.
struct Field {
    name: String,
    style: BinderStyle,
    ty: String,
    binders: Vec<Binder>,
    statement_refs: Vec<RawReference>,
    proof_refs: Vec<RawReference>,
    span: (usize, usize),
    default: Option<(usize, usize)>,
    visibility: Visibility,
}

impl<'s, 'a> FileReader<'s, 'a> {
    /// The binders and type of a `structure`, `class` or `inductive` header, read up to
    /// `header_end`.
    fn type_header(
        &self,
        w: &mut Walker<'s, 'a>,
        lo: usize,
        header_end: usize,
    ) -> (Vec<Binder>, Option<String>) {
        let colon = self.src.find_at_depth0(lo, header_end, &[":"]);
        w.auto_bound = true;
        let binders = w.signature_binders(lo, colon.unwrap_or(header_end));
        if let Some(c) = colon {
            w.term(c + 1, header_end);
        }
        (
            binders,
            colon.map(|c| self.src.normalized(c + 1, header_end)),
        )
    }

    /// `structure S (params) extends P where fields` and `class C ... where fields`.
    pub(super) fn structure(&mut self, h: Header) {
        let src = self.src;
        let (k, end) = (h.keyword, h.end);
        if !src.is_ident(k + 1) {
            return;
        }
        let name_tok = k + 1;
        let short = normalize_name(src.text_of(name_tok));
        let (full, extra) = self.full_name(&short);
        let header_end = src
            .find_at_depth0(name_tok + 1, end, &["extends", "where", ":=", "deriving"])
            .unwrap_or(end);
        let mut w = self.walker();
        let (binders, conclusion) = self.type_header(&mut w, name_tok + 1, header_end);
        let mut parents: Vec<Parent> = Vec::new();
        let mut body_at = header_end;
        if src.is(header_end, "extends") {
            let hi = src
                .find_at_depth0(header_end + 1, end, &["where", ":=", "deriving"])
                .unwrap_or(end);
            let mut a = header_end + 1;
            while a < hi {
                let b = src.find_at_depth0(a, hi, &[","]).unwrap_or(hi);
                let named = src.is_ident(a) && src.is(a + 1, ":");
                let ty_lo = if named { a + 2 } else { a };
                let before = w.refs.len();
                w.term(ty_lo, b);
                let refs = w.refs[before..].to_vec();
                let projection = if named {
                    Some(normalize_name(src.text_of(a)))
                } else {
                    (ty_lo..b).find(|&t| src.is_ident(t)).map(|t| {
                        let head = normalize_name(src.text_of(t));
                        format!("to{}", components(&head).last().copied().unwrap_or(""))
                    })
                };
                if let Some(projection) = projection {
                    parents.push(Parent {
                        projection,
                        ty: src.normalized(ty_lo, b),
                        refs,
                        span: (a, b),
                    });
                }
                a = b + 1;
            }
            body_at = hi;
        }
        let statement_refs = w.take_refs();
        w.auto_bound = false;
        let fields_lo = if matches!(src.text_of(body_at), "where" | ":=") {
            body_at + 1
        } else {
            body_at
        };
        let fields_hi = src
            .find_at_depth0(fields_lo, end, &["deriving"])
            .unwrap_or(end);

        let mut body = StructureBody {
            fields: Vec::new(),
            overrides: Vec::new(),
            ctor: ("mk".to_string(), (name_tok, name_tok + 1)),
            has_parents: !parents.is_empty(),
        };
        for (a, b) in src.items(fields_lo, fields_hi) {
            self.structure_field(&mut w, a, b, &mut body);
        }
        let StructureBody {
            fields,
            overrides,
            ctor,
            ..
        } = body;

        let scope = self.scope_for(&extra);
        let mut parts: Vec<String> = binders
            .iter()
            .map(|b| src.normalized(b.group.0, b.group.1))
            .collect();
        if let Some(c) = &conclusion {
            parts.push(format!(": {c}"));
        }
        if !parents.is_empty() {
            let list: Vec<&str> = parents.iter().map(|p| p.ty.as_str()).collect();
            parts.push(format!("extends {}", list.join(", ")));
        }
        let mut s = RawDeclaration::new(full.clone(), DeclKind::Structure);
        s.statement = parts.join(" ");
        s.hypotheses = hypotheses_of(src, &binders);
        s.conclusion = conclusion;
        s.statement_span = src.span(k, body_at);
        if fields_lo < fields_hi {
            s.proof_span = Some(src.span(fields_lo, fields_hi));
        }
        s.visibility = h.visibility;
        s.attributes = h.attributes;
        s.statement_refs = statement_refs;
        s.proof_refs = fields
            .iter()
            .flat_map(|f: &Field| f.statement_refs.iter().chain(&f.proof_refs).cloned())
            .chain(overrides)
            .collect();
        s.dot_on_local = w.dot_on_local;
        s.scope = scope;
        self.out.declarations.push(s);

        // The constructor takes the parents and the fields.
        let mut c = RawDeclaration::new(format!("{full}.{}", ctor.0), DeclKind::Constructor);
        let mut hyps: Vec<Hypothesis> = parents
            .iter()
            .map(|p| Hypothesis {
                names: vec![p.projection.clone()],
                ty: p.ty.clone(),
                style: BinderStyle::Explicit,
            })
            .collect();
        hyps.extend(fields.iter().map(|f| Hypothesis {
            names: vec![f.name.clone()],
            ty: f.ty.clone(),
            style: f.style,
        }));
        let mut result = vec![short.clone()];
        result.extend(binders.iter().flat_map(|b| b.names.clone()));
        let result = result.join(" ");
        let mut texts: Vec<String> = hyps
            .iter()
            .map(|h| binder_text(h.style, &h.names, &h.ty))
            .collect();
        texts.push(format!(": {result}"));
        c.statement = texts.join(" ");
        c.hypotheses = hyps;
        c.conclusion = Some(result);
        c.statement_span = src.span(ctor.1 .0, ctor.1 .1);
        c.statement_refs = parents.iter().flat_map(|p| p.refs.clone()).collect();
        c.statement_refs
            .extend(fields.iter().flat_map(|f| f.statement_refs.clone()));
        c.scope = scope;
        self.out.declarations.push(c);

        for parent in parents {
            let mut p =
                RawDeclaration::new(format!("{full}.{}", parent.projection), DeclKind::Field);
            p.statement = format!(": {}", parent.ty);
            p.conclusion = Some(parent.ty);
            p.statement_span = src.span(parent.span.0, parent.span.1);
            p.statement_refs = parent.refs;
            p.scope = scope;
            self.out.declarations.push(p);
        }
        for f in fields {
            let mut d = RawDeclaration::new(format!("{full}.{}", f.name), DeclKind::Field);
            let mut parts: Vec<String> = f
                .binders
                .iter()
                .map(|b| src.normalized(b.group.0, b.group.1))
                .collect();
            if !f.ty.is_empty() {
                parts.push(format!(": {}", f.ty));
            }
            d.statement = parts.join(" ");
            d.hypotheses = hypotheses_of(src, &f.binders);
            d.conclusion = (!f.ty.is_empty()).then(|| f.ty.clone());
            d.statement_span = src.span(f.span.0, f.span.1);
            d.proof_span = f.default.map(|(a, b)| src.span(a, b));
            d.proof_ending = f.default.map(|_| ProofEnding::Term);
            d.visibility = f.visibility;
            d.statement_refs = f.statement_refs;
            d.proof_refs = f.proof_refs;
            d.scope = scope;
            self.out.declarations.push(d);
        }
    }

    /// One line of a structure body: `mk ::`, `qty : Nat := 0`, `(a b : Nat)`,
    /// `f (x : Nat) : Nat`, or, after `extends`, `qty := 0` overriding a parent's default.
    fn structure_field(
        &self,
        w: &mut Walker<'s, 'a>,
        a: usize,
        b: usize,
        body: &mut StructureBody,
    ) {
        let src = self.src;
        let mut k = a;
        let mut visibility = Visibility::Public;
        loop {
            match src.text_of(k) {
                "private" => visibility = Visibility::Private,
                "protected" => visibility = Visibility::Protected,
                _ => break,
            }
            k += 1;
        }
        if src.is_ident(k) && src.is(k + 1, "::") {
            body.ctor = (normalize_name(src.text_of(k)), (k, k + 1));
            k += 2;
        }
        while k < b && matches!(src.text_of(k), "(" | "{" | "[" | "⦃") {
            let Some(c) = src.closing(k, b) else { return };
            let before = w.refs.len();
            let g = w.binder_group(k, c);
            let refs = w.refs.split_off(before);
            for n in &g.names {
                body.fields.push(Field {
                    name: n.clone(),
                    style: g.style,
                    ty: src.normalized(g.ty.0, g.ty.1),
                    binders: Vec::new(),
                    statement_refs: refs.clone(),
                    proof_refs: Vec::new(),
                    span: (k, c + 1),
                    default: None,
                    visibility,
                });
            }
            k = c + 1;
        }
        if k >= b || !src.is_ident(k) {
            if k < b {
                w.term(k, b);
            }
            return;
        }
        let mut names = Vec::new();
        while k < b && src.is_ident(k) {
            names.push(normalize_name(src.text_of(k)));
            k += 1;
        }
        let stop = src.find_at_depth0(k, b, &[":", ":="]).unwrap_or(b);
        let before = w.refs.len();
        let binders = w.signature_binders(k, stop);
        let (ty, default) = if src.is(stop, ":") {
            let d = src.find_at_depth0(stop + 1, b, &[":="]);
            ((stop + 1, d.unwrap_or(b)), d)
        } else {
            ((stop, stop), src.is(stop, ":=").then_some(stop))
        };
        w.term(ty.0, ty.1);
        let statement_refs = w.refs.split_off(before);
        if let Some(d) = default {
            w.term(d + 1, b);
        }
        let proof_refs = w.refs.split_off(before);
        for n in &names {
            w.bind(n);
        }
        if ty.0 >= ty.1 && body.has_parents {
            // A new default for an inherited field: no new projection.
            body.overrides.extend(statement_refs);
            body.overrides.extend(proof_refs);
            return;
        }
        for n in names {
            body.fields.push(Field {
                name: n,
                style: BinderStyle::Explicit,
                ty: src.normalized(ty.0, ty.1),
                binders: binders.clone(),
                statement_refs: statement_refs.clone(),
                proof_refs: proof_refs.clone(),
                span: (a, b),
                default: default.map(|d| (d + 1, b)),
                visibility,
            });
        }
    }

    /// `inductive T (params) : Sort where | c₁ ... | c₂ ...` and `class inductive`.
    pub(super) fn inductive(&mut self, h: Header) {
        let src = self.src;
        let (k, end) = (h.keyword, h.end);
        if !src.is_ident(k + 1) {
            return;
        }
        let name_tok = k + 1;
        let (full, extra) = self.full_name(src.text_of(name_tok));
        let header_end = src
            .find_at_depth0(name_tok + 1, end, &["where", "|", ":=", "deriving"])
            .unwrap_or(end);
        let mut w = self.walker();
        let (binders, conclusion) = self.type_header(&mut w, name_tok + 1, header_end);
        let statement_refs = w.take_refs();
        let ctors_lo = if matches!(src.text_of(header_end), "where" | ":=") {
            header_end + 1
        } else {
            header_end
        };
        let ctors_hi = src
            .find_at_depth0(ctors_lo, end, &["deriving"])
            .unwrap_or(end);
        let mut starts = Vec::new();
        let mut i = ctors_lo;
        while i < ctors_hi {
            if src.is(i, "|") || i == ctors_lo {
                starts.push(i);
            }
            i = src.skip_group(i, ctors_hi);
        }
        let scope = self.scope_for(&extra);
        let mut ctors = Vec::new();
        for (n, &a) in starts.iter().enumerate() {
            let b = starts.get(n + 1).copied().unwrap_or(ctors_hi);
            let mut c = if src.is(a, "|") { a + 1 } else { a };
            let mut visibility = Visibility::Public;
            loop {
                match src.text_of(c) {
                    "private" => visibility = Visibility::Private,
                    "protected" => visibility = Visibility::Protected,
                    _ => break,
                }
                c += 1;
            }
            if c >= b || !src.is_ident(c) {
                continue;
            }
            let (cbinders, cconclusion) = self.type_header(&mut w, c + 1, b);
            let mut parts: Vec<String> = cbinders
                .iter()
                .map(|g| src.normalized(g.group.0, g.group.1))
                .collect();
            if let Some(t) = &cconclusion {
                parts.push(format!(": {t}"));
            }
            let mut d = RawDeclaration::new(
                format!("{full}.{}", normalize_name(src.text_of(c))),
                DeclKind::Constructor,
            );
            d.statement = parts.join(" ");
            d.hypotheses = hypotheses_of(src, &cbinders);
            d.conclusion = cconclusion;
            d.statement_span = src.span(c, b);
            d.visibility = visibility;
            d.statement_refs = w.take_refs();
            d.scope = scope;
            ctors.push(d);
        }
        let mut parts: Vec<String> = binders
            .iter()
            .map(|b| src.normalized(b.group.0, b.group.1))
            .collect();
        if let Some(c) = &conclusion {
            parts.push(format!(": {c}"));
        }
        let mut t = RawDeclaration::new(full, DeclKind::Inductive);
        t.statement = parts.join(" ");
        t.hypotheses = hypotheses_of(src, &binders);
        t.conclusion = conclusion;
        t.statement_span = src.span(k, header_end);
        if ctors_lo < ctors_hi {
            t.proof_span = Some(src.span(ctors_lo, ctors_hi));
        }
        t.visibility = h.visibility;
        t.attributes = h.attributes;
        t.statement_refs = statement_refs;
        t.proof_refs = ctors
            .iter()
            .flat_map(|c| c.statement_refs.clone())
            .collect();
        t.dot_on_local = w.dot_on_local;
        t.scope = scope;
        self.out.declarations.push(t);
        self.out.declarations.extend(ctors);
    }
}
