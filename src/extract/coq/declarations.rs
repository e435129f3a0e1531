//! What one Coq declaration sentence declares.
//!
//! Takes the tokens of one sentence after its keyword (`Lemma`, `Inductive`, `Record`,
//! `Notation`, ...); gives drafts: the short names declared, their kinds, the token ranges
//! of their statements and bodies, their binders as hypotheses, and for notations the
//! symbols and the name they unfold to. It reads one sentence: proofs that follow, modules,
//! sections and name qualification are the caller's (`mod.rs`).

use std::ops::Range;

use super::lexer::{Token, TokenKind};
use super::notations;
use crate::library::{BinderStyle, DeclKind, Hypothesis, NotationInfo};

/// One declaration read from a sentence, before qualification.
#[derive(Clone, Debug)]
pub struct Draft {
    /// The short name (`add_comm`, `Build_R`, `x_'+'_x` for a notation).
    pub name: String,
    pub kind: DeclKind,
    /// The token of the name, for spans.
    pub name_token: usize,
    /// Statement tokens (binders, `:` and type), relative to the sentence.
    pub statement: Range<usize>,
    /// Where the binders end and the type starts (`None`: no `: type`).
    pub conclusion: Option<Range<usize>>,
    pub hypotheses: Vec<Hypothesis>,
    /// Body tokens after `:=`.
    pub body: Option<Range<usize>>,
    pub notation: Option<NotationInfo>,
    /// Names bound for this declaration by the sentence around it (an inductive's
    /// parameters for its constructors, earlier fields of a record).
    pub locals: Vec<String>,
}

impl Draft {
    pub fn new(name: String, kind: DeclKind, name_token: usize) -> Draft {
        Draft {
            name,
            kind,
            name_token,
            statement: name_token + 1..name_token + 1,
            conclusion: None,
            hypotheses: Vec::new(),
            body: None,
            notation: None,
            locals: Vec::new(),
        }
    }
}

/// Reads tokens and their texts for one sentence.
pub struct Reader<'a> {
    pub tokens: &'a [Token],
    pub text: &'a str,
    /// Text with comments removed, for statement strings.
    pub clean: &'a dyn Fn(u32, u32) -> String,
}

impl<'a> Reader<'a> {
    pub fn word(&self, i: usize) -> &'a str {
        self.tokens.get(i).map_or("", |t| t.text(self.text))
    }

    pub fn is_ident(&self, i: usize) -> bool {
        self.tokens
            .get(i)
            .is_some_and(|t| t.kind == TokenKind::Ident)
    }

    /// Normalised text of tokens `range`, comments left out.
    pub fn text_of(&self, range: Range<usize>) -> String {
        if range.start >= range.end || range.end > self.tokens.len() {
            return String::new();
        }
        (self.clean)(
            self.tokens[range.start].start,
            self.tokens[range.end - 1].end,
        )
    }

    /// The first index in `range` at bracket depth 0 where `stop` holds.
    pub fn find_top(&self, range: Range<usize>, stop: impl Fn(&str) -> bool) -> Option<usize> {
        let mut depth = 0i32;
        let mut matches = 0i32;
        for i in range {
            let w = self.word(i);
            match w {
                "(" | "[" | "{" | "{|" => depth += 1,
                ")" | "]" | "}" | "|}" => depth -= 1,
                _ if depth == 0 && stop(w) && !(w == "with" && matches > 0) => return Some(i),
                _ => {}
            }
            if depth == 0 {
                match w {
                    "match" | "lazymatch" | "multimatch" => matches += 1,
                    "end" => matches -= 1,
                    _ => {}
                }
            }
        }
        None
    }

    /// Splits `range` at depth-0 occurrences of `sep` (e.g. mutual `with`).
    fn split_top(&self, range: Range<usize>, sep: &str) -> Vec<Range<usize>> {
        let mut parts = Vec::new();
        let mut start = range.start;
        while let Some(at) = self.find_top(start..range.end, |w| w == sep) {
            parts.push(start..at);
            start = at + 1;
        }
        parts.push(start..range.end);
        parts
    }

    /// The `:=` ending a statement in `range`: at depth 0, not one of a `let` or `fix` in
    /// the type.
    fn find_assign(&self, range: Range<usize>) -> Option<usize> {
        let mut depth = 0i32;
        let mut pending = 0i32;
        for i in range {
            match self.word(i) {
                "(" | "[" | "{" | "{|" => depth += 1,
                ")" | "]" | "}" | "|}" => depth -= 1,
                "let" | "fix" | "cofix" if depth == 0 => pending += 1,
                ":=" if depth == 0 => {
                    if pending > 0 {
                        pending -= 1;
                    } else {
                        return Some(i);
                    }
                }
                _ => {}
            }
        }
        None
    }

    /// The end of the binders starting at `start`: the first depth-0 token that is not part
    /// of a binder.
    fn binders_end(&self, range: Range<usize>) -> usize {
        let mut depth = 0i32;
        for i in range.clone() {
            let w = self.word(i);
            match w {
                "(" | "[" | "{" | "{|" => depth += 1,
                ")" | "]" | "}" | "|}" => {
                    depth -= 1;
                    if depth < 0 {
                        return i;
                    }
                }
                _ if depth == 0 => {
                    let binder_word = (self.is_ident(i) && !matches!(w, "with" | "where" | "as"))
                        || matches!(w, "`" | "'" | "!" | "&");
                    if !binder_word {
                        return i;
                    }
                }
                _ => {}
            }
        }
        range.end
    }

    /// Binders in `range` as hypotheses.
    pub fn hypotheses(&self, range: Range<usize>) -> Vec<Hypothesis> {
        let mut out = Vec::new();
        let mut i = range.start;
        while i < range.end {
            let w = self.word(i);
            if self.is_ident(i) {
                out.push(Hypothesis {
                    names: vec![w.to_string()],
                    ty: String::new(),
                    style: BinderStyle::Explicit,
                });
                i += 1;
                continue;
            }
            let backquote = w == "`" || w == "!";
            let open = if backquote { i + 1 } else { i };
            let tick = w == "'";
            let style = match self.word(open) {
                "(" if backquote => BinderStyle::Instance,
                "(" => BinderStyle::Explicit,
                "{" if backquote => BinderStyle::Instance,
                "{" => BinderStyle::Implicit,
                "[" => BinderStyle::Implicit,
                _ => {
                    i += 1;
                    continue;
                }
            };
            let Some(close) = self.matching(open, range.end) else {
                break;
            };
            if tick {
                out.push(Hypothesis {
                    names: vec![self.text_of(i..close + 1)],
                    ty: String::new(),
                    style,
                });
                i = close + 1;
                continue;
            }
            let inner = open + 1..close;
            if self.word(open + 1) == "struct"
                || self.word(open + 1) == "measure"
                || self.word(open + 1) == "wf"
            {
                i = close + 1;
                continue;
            }
            let colon = self.find_top(inner.clone(), |w| w == ":" || w == ":>");
            let (names, ty) = match colon {
                Some(c) => {
                    let names: Vec<String> = (open + 1..c)
                        .filter(|&k| self.is_ident(k))
                        .map(|k| self.word(k).to_string())
                        .collect();
                    let ty_end = self.find_top(c + 1..close, |w| w == ":=").unwrap_or(close);
                    (names, self.text_of(c + 1..ty_end))
                }
                None if backquote => (Vec::new(), self.text_of(inner)),
                None => (
                    inner
                        .filter(|&k| self.is_ident(k))
                        .map(|k| self.word(k).to_string())
                        .collect(),
                    String::new(),
                ),
            };
            out.push(Hypothesis { names, ty, style });
            i = close + 1;
        }
        out
    }

    /// The index of the bracket closing the one at `open`.
    pub fn matching(&self, open: usize, limit: usize) -> Option<usize> {
        let mut depth = 0i32;
        for i in open..limit.min(self.tokens.len()) {
            match self.word(i) {
                "(" | "[" | "{" | "{|" => depth += 1,
                ")" | "]" | "}" | "|}" => {
                    depth -= 1;
                    if depth == 0 {
                        return Some(i);
                    }
                }
                _ => {}
            }
        }
        None
    }

    /// `name binders (: type)? (:= body)?` starting at the name token `at`, within `range`.
    fn signature(&self, name: String, kind: DeclKind, at: usize, end: usize) -> Draft {
        let mut d = Draft::new(name, kind, at);
        let binders_end = self.binders_end(at + 1..end);
        d.hypotheses = self.hypotheses(at + 1..binders_end);
        let assign = self.find_assign(binders_end..end);
        let statement_end = assign.unwrap_or(end);
        if self.word(binders_end) == ":" && binders_end < statement_end {
            d.conclusion = Some(binders_end + 1..statement_end);
        }
        d.statement = at + 1..statement_end;
        if let Some(a) = assign {
            d.body = Some(a + 1..end);
        }
        d
    }
}

/// Kinds of sentence that declare something.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Declares {
    /// `Lemma`, `Theorem`, ...: `name binders : type`, a proof follows unless `:=`.
    Theorem,
    /// `Definition`, `Fixpoint`, `Instance`, `Canonical`, `Coercion` with a body.
    Definition(DeclKind),
    Inductive,
    Record,
    Axiom,
    Notation,
    Infix,
    /// `Scheme name := Induction for T Sort S with name2 := ...`.
    Scheme,
}

/// Reads the declarations of a sentence whose keyword has been read; `start` is the first
/// token after the keyword, `end` the sentence's end.
pub fn read(r: &Reader, what: Declares, start: usize, end: usize) -> Vec<Draft> {
    match what {
        Declares::Theorem => r
            .split_top(start..end, "with")
            .into_iter()
            .filter(|p| r.is_ident(p.start))
            .map(|p| {
                r.signature(
                    r.word(p.start).to_string(),
                    DeclKind::Theorem,
                    p.start,
                    p.end,
                )
            })
            .collect(),
        Declares::Definition(kind) => {
            let body_end = r.find_top(start..end, |w| w == "where").unwrap_or(end);
            let mut out: Vec<Draft> = r
                .split_top(start..body_end, "with")
                .into_iter()
                .filter(|p| r.is_ident(p.start))
                .map(|p| r.signature(r.word(p.start).to_string(), kind, p.start, p.end))
                .collect();
            out.extend(where_notations(r, body_end, end));
            out
        }
        Declares::Inductive => {
            let body_end = r.find_top(start..end, |w| w == "where").unwrap_or(end);
            let mut out = Vec::new();
            for p in r.split_top(start..body_end, "with") {
                if r.is_ident(p.start) {
                    out.extend(inductive(r, p));
                }
            }
            out.extend(where_notations(r, body_end, end));
            out
        }
        Declares::Record => record(r, start..end),
        Declares::Axiom => axioms(r, start..end),
        Declares::Scheme => r
            .split_top(start..end, "with")
            .into_iter()
            .filter(|p| r.is_ident(p.start) && r.word(p.start + 1) == ":=")
            .map(|p| {
                let mut d = Draft::new(r.word(p.start).to_string(), DeclKind::Definition, p.start);
                d.statement = p.start + 2..p.end;
                d
            })
            .collect(),
        Declares::Notation | Declares::Infix => {
            notations::notation(r, what == Declares::Infix, start..end)
                .into_iter()
                .collect()
        }
    }
}

/// The notations of a `where "x <+> y" := (...) and ...` clause starting at `at`.
fn where_notations(r: &Reader, at: usize, end: usize) -> Vec<Draft> {
    if at >= end {
        return Vec::new();
    }
    r.split_top(at + 1..end, "and")
        .into_iter()
        .filter_map(|p| notations::notation(r, false, p))
        .collect()
}

/// One block of an inductive: the type, then its constructors.
fn inductive(r: &Reader, p: Range<usize>) -> Vec<Draft> {
    let name = r.word(p.start).to_string();
    let binders_end = r.binders_end(p.start + 1..p.end);
    let params = r.hypotheses(p.start + 1..binders_end);
    let Some(assign) = r.find_top(binders_end..p.end, |w| w == ":=") else {
        let mut d = r.signature(name, DeclKind::Inductive, p.start, p.end);
        d.hypotheses = params;
        return vec![d];
    };
    let mut ty = Draft::new(name.clone(), DeclKind::Inductive, p.start);
    ty.hypotheses = params.clone();
    ty.statement = p.start + 1..assign;
    if r.word(binders_end) == ":" {
        ty.conclusion = Some(binders_end + 1..assign);
    }
    let param_names: Vec<String> = params.iter().flat_map(|h| h.names.clone()).collect();
    let mut out = vec![ty];
    // Record syntax in an inductive: `Inductive R := mk { f : T }`.
    let first = assign + 1;
    if r.word(first) == "{" || (r.is_ident(first) && r.word(first + 1) == "{") {
        out.extend(record_body(r, &name, first, p.end, &param_names, false));
        return out;
    }
    let mut start = first;
    if r.word(start) == "|" {
        start += 1;
    }
    let mut constructors = Vec::new();
    let mut from = start;
    loop {
        let bar = r.find_top(from..p.end, |w| w == "|");
        let part = from..bar.unwrap_or(p.end);
        if r.is_ident(part.start) {
            constructors.push(part);
        }
        match bar {
            Some(b) => from = b + 1,
            None => break,
        }
    }
    for c in constructors {
        let mut d = r.signature(
            r.word(c.start).to_string(),
            DeclKind::Constructor,
            c.start,
            c.end,
        );
        d.body = None;
        d.locals = param_names.clone();
        out.push(d);
    }
    out
}

/// `Record`, `Structure`, `Class`: the type, its constructor and fields.
fn record(r: &Reader, range: Range<usize>) -> Vec<Draft> {
    if !r.is_ident(range.start) {
        return Vec::new();
    }
    let at = range.start;
    let name = r.word(at).to_string();
    let binders_end = r.binders_end(at + 1..range.end);
    let params = r.hypotheses(at + 1..binders_end);
    let param_names: Vec<String> = params.iter().flat_map(|h| h.names.clone()).collect();
    let assign = r.find_top(binders_end..range.end, |w| w == ":=");
    let mut ty = Draft::new(name.clone(), DeclKind::Structure, at);
    ty.hypotheses = params;
    ty.statement = at + 1..assign.unwrap_or(range.end);
    if r.word(binders_end) == ":" {
        ty.conclusion = Some(binders_end + 1..assign.unwrap_or(range.end));
    }
    let mut out = vec![ty];
    let Some(assign) = assign else {
        return out;
    };
    let first = assign + 1;
    if r.word(first) == "{" || (r.is_ident(first) && r.word(first + 1) == "{") {
        out.extend(record_body(r, &name, first, range.end, &param_names, true));
    } else if r.is_ident(first) {
        // A definitional class: `Class C A := op : A -> A.`
        let mut d = r.signature(r.word(first).to_string(), DeclKind::Field, first, range.end);
        d.body = None;
        d.locals = param_names;
        out.push(d);
    }
    out
}

/// `mk? { f1 : T1 ; f2 : T2 }` from token `first`.
fn record_body(
    r: &Reader,
    name: &str,
    first: usize,
    end: usize,
    params: &[String],
    is_record: bool,
) -> Vec<Draft> {
    let mut out = Vec::new();
    let (constructor, open) = if r.word(first) == "{" {
        (None, first)
    } else {
        (Some(first), first + 1)
    };
    let Some(close) = r.matching(open, end) else {
        return out;
    };
    let mut d = match constructor {
        Some(c) => Draft::new(r.word(c).to_string(), DeclKind::Constructor, c),
        None => Draft::new(format!("Build_{name}"), DeclKind::Constructor, open),
    };
    d.statement = open..close + 1;
    d.locals = params.to_vec();
    d.locals.extend(field_names(r, open, close));
    if constructor.is_some() || is_record {
        out.push(d);
    }
    let mut locals = params.to_vec();
    let mut from = open + 1;
    while from < close {
        let semi = r.find_top(from..close, |w| w == ";").unwrap_or(close);
        let mut f = from;
        // Field attributes `#[canonical=no]`.
        while r.word(f) == "#" && r.word(f + 1) == "[" {
            f = r.matching(f + 1, semi).map_or(semi, |c| c + 1);
        }
        if r.is_ident(f) && f < semi && r.word(f) != "_" {
            let field = r.word(f).to_string();
            let mut fd = Draft::new(field.clone(), DeclKind::Field, f);
            let binders_end = r.binders_end(f + 1..semi);
            fd.hypotheses = r.hypotheses(f + 1..binders_end);
            let default = r.find_top(binders_end..semi, |w| w == ":=");
            let stop = default.unwrap_or(semi);
            if matches!(r.word(binders_end), ":" | ":>" | "::" | ":>>") {
                fd.conclusion = Some(binders_end + 1..stop);
            }
            fd.statement = f + 1..stop;
            fd.locals = locals.clone();
            out.push(fd);
            locals.push(field);
        }
        from = semi + 1;
    }
    out
}

/// The field names of a record body `{ f1 : T1 ; f2 : T2 }` between `open` and `close`.
fn field_names(r: &Reader, open: usize, close: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut expect = true;
    let mut depth = 0i32;
    for i in open + 1..close {
        match r.word(i) {
            "(" | "[" | "{" | "{|" => depth += 1,
            ")" | "]" | "}" | "|}" => depth -= 1,
            ";" if depth == 0 => expect = true,
            w if expect && depth == 0 && r.is_ident(i) => {
                out.push(w.to_string());
                expect = false;
            }
            _ => {}
        }
    }
    out
}

/// `Axiom a b : T`, `Parameters (x : A) (y : B)`, `Parameter Inline(10) t : Type`.
fn axioms(r: &Reader, mut range: Range<usize>) -> Vec<Draft> {
    let mut out = Vec::new();
    if r.word(range.start) == "Inline" {
        range.start += 1;
        if r.word(range.start) == "(" {
            range.start = r
                .matching(range.start, range.end)
                .map_or(range.end, |c| c + 1);
        }
    }
    if r.word(range.start) == "(" {
        let mut i = range.start;
        while r.word(i) == "(" {
            let Some(close) = r.matching(i, range.end) else {
                break;
            };
            if let Some(colon) = r.find_top(i + 1..close, |w| w == ":") {
                for k in i + 1..colon {
                    if r.is_ident(k) {
                        let mut d = Draft::new(r.word(k).to_string(), DeclKind::Axiom, k);
                        d.statement = colon..close;
                        d.conclusion = Some(colon + 1..close);
                        out.push(d);
                    }
                }
            }
            i = close + 1;
        }
        return out;
    }
    let Some(colon) = r.find_top(range.clone(), |w| w == ":") else {
        return out;
    };
    let ty_end = r
        .find_top(colon..range.end, |w| w == ":=")
        .unwrap_or(range.end);
    for k in range.start..colon {
        if r.is_ident(k) {
            let mut d = Draft::new(r.word(k).to_string(), DeclKind::Axiom, k);
            d.statement = colon..ty_end;
            d.conclusion = Some(colon + 1..ty_end);
            out.push(d);
        }
    }
    out
}
