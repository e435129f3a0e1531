//! Reading terms for references: which written names are premises and which are locals.
//!
//! Takes a token range of a statement or a term proof and the names already bound (binders
//! of the declaration, `variable`s, universes); gives the references to declarations, the
//! count of dot notation on locals (`h.trans`), and which `variable`s were used. Binding
//! forms are followed: `fun`/`λ` and `∀`/`∃`-style binders, `let`/`have`, `match`
//! discriminants, set-builder braces, `if h : c`, `for x in` (binder lists, binder groups
//! and patterns themselves are read by `binders.rs`, tactic blocks by `tactics.rs`). Names
//! a binder introduces stay bound for the rest of the declaration: a flat approximation of
//! Lean's scoping that only errs when a bound name shadows a declaration used later in the
//! same proof. It never resolves a name.

use std::collections::HashMap;

use super::lexer::Kind;
use super::names::{head, is_auto_bound_candidate, is_dotted, normalize_name};
use super::source::Source;
use crate::extract::RawReference;

/// Deeper nesting than this is read flat (every name a reference), so that no input can
/// exhaust the stack.
pub(super) const MAX_DEPTH: u32 = 160;

/// Where a bound name came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Origin {
    /// A binder, pattern variable or hypothesis of this declaration.
    Bound,
    /// A `variable` of the enclosing section.
    Variable,
    /// A universe level.
    Universe,
}

/// Atomic words that lex as names but never name a premise: do-notation and tactic
/// modifiers.
const NEVER_PREMISES: &[&str] = &["_", "mod_cast", "rec", "try"];

/// How far past a `|` to look for the `=>` of an alternative, in tokens or bracketed
/// groups.
const ALTERNATIVE_LOOKAHEAD: usize = 64;

/// Binder-notation symbols followed by binders and a `,`.
const QUANTIFIERS: &[&str] = &["∀", "∃", "∃!", "Π", "Σ", "Σ'", "∑", "∏", "⋃", "⋂", "⨆", "⨅"];

/// Reads references out of token ranges of one declaration.
pub(super) struct Walker<'s, 'a> {
    pub src: &'s Source<'a>,
    locals: HashMap<String, Origin>,
    pub refs: Vec<RawReference>,
    pub dot_on_local: u32,
    /// `variable`s mentioned, in order of first mention (repeats allowed).
    pub used_variables: Vec<String>,
    /// In a signature: an unbound single-letter name is an auto-bound implicit.
    pub auto_bound: bool,
    pub(super) depth: u32,
    /// How many brackets enclose the current position (a `by` inside brackets ends at `,`).
    pub(super) brackets: u32,
}

impl<'s, 'a> Walker<'s, 'a> {
    /// A walker with `locals` already bound (and `this`).
    pub fn new(src: &'s Source<'a>, locals: impl IntoIterator<Item = (String, Origin)>) -> Self {
        let mut map: HashMap<String, Origin> = locals.into_iter().collect();
        map.insert("this".into(), Origin::Bound);
        Walker {
            src,
            locals: map,
            refs: Vec::new(),
            dot_on_local: 0,
            used_variables: Vec::new(),
            auto_bound: false,
            depth: 0,
            brackets: 0,
        }
    }

    /// Binds `name` for the rest of the declaration.
    pub fn bind(&mut self, name: &str) {
        if name != "_" && !name.is_empty() {
            self.locals.insert(normalize_name(name), Origin::Bound);
        }
    }

    /// Binds `name` with the given origin (a `variable` read while reading later ones).
    pub fn declare(&mut self, name: &str, origin: Origin) {
        self.locals.insert(normalize_name(name), origin);
    }

    /// Whether `name` is bound.
    pub fn is_local(&self, name: &str) -> bool {
        self.locals.contains_key(name)
    }

    /// Takes the references read so far.
    pub fn take_refs(&mut self) -> Vec<RawReference> {
        std::mem::take(&mut self.refs)
    }

    pub(super) fn text(&self, i: usize) -> &'a str {
        self.src.text_of(i)
    }

    /// One name token: a reference, a local, dot notation on a local, or nothing.
    pub fn ident(&mut self, i: usize) {
        let s = self.text(i);
        if NEVER_PREMISES.contains(&s) {
            return;
        }
        if self.src.glued_to_prev(i) && matches!(self.text(i - 1), "." | "|>." | "$" | "?") {
            // A projection `(e).f`, a leading-dot constructor `.inl`, an antiquotation or
            // a named hole: nothing a name table can resolve.
            return;
        }
        if self.src.is(i + 1, ":=") && self.field_position(i) {
            return;
        }
        let Some(tok) = self.src.tok(i) else { return };
        let h = normalize_name(head(s));
        if let Some(&origin) = self.locals.get(&h) {
            if origin == Origin::Variable {
                self.used_variables.push(h);
            }
            if is_dotted(s) {
                self.dot_on_local += 1;
            }
            return;
        }
        if self.auto_bound && !is_dotted(s) && is_auto_bound_candidate(s) {
            self.bind(s);
            return;
        }
        self.refs.push(RawReference {
            name: normalize_name(s),
            offset: tok.start,
        });
    }

    /// Whether a name followed by `:=` names a field or argument (`{ qty := 0 }`,
    /// `(n := 3)`, a `where` field) rather than ending a term (`calc _ = total := ...`).
    fn field_position(&self, i: usize) -> bool {
        let first = self.src.tok(i).is_some_and(|t| t.first_on_line);
        first || i == 0 || matches!(self.text(i - 1), "(" | "{" | "," | "with" | "⟨")
    }

    /// Every name in `lo..hi` read as a reference or local, with no structure: the fallback
    /// past [`MAX_DEPTH`].
    pub(super) fn flat(&mut self, lo: usize, hi: usize) {
        for i in lo..hi.min(self.src.len()) {
            if self.src.is_ident(i) {
                self.ident(i);
            }
        }
    }

    /// Reads a term.
    pub fn term(&mut self, lo: usize, hi: usize) {
        let hi = hi.min(self.src.len());
        if self.depth >= MAX_DEPTH {
            self.flat(lo, hi);
            return;
        }
        self.depth += 1;
        let mut i = lo;
        while i < hi {
            i = self.term_step(i, hi).max(i + 1);
        }
        self.depth -= 1;
    }

    /// Reads the construct starting at `i`; returns where the next one starts.
    pub(super) fn term_step(&mut self, i: usize, hi: usize) -> usize {
        match self.src.kind(i) {
            Some(Kind::Ident) => {
                self.ident(i);
                i + 1
            }
            Some(Kind::Keyword) => self.keyword(i, hi),
            Some(Kind::Symbol) => self.symbol(i, hi),
            _ => i + 1,
        }
    }

    fn keyword(&mut self, i: usize, hi: usize) -> usize {
        match self.text(i) {
            "fun" => self.fun_binders(i, hi),
            "let" | "have" | "haveI" | "letI" | "suffices" => self.have_like(i, hi),
            "match" => self.match_discriminants(i, hi),
            "if" => {
                if self.src.is_ident(i + 1) && self.src.is(i + 2, ":") {
                    self.bind(self.text(i + 1));
                    i + 3
                } else if self.src.is(i + 1, "let") {
                    let k = self.src.find_at_depth0(i + 2, hi, &[":="]).unwrap_or(hi);
                    self.pattern(i + 2, k, true);
                    k
                } else {
                    i + 1
                }
            }
            "for" => {
                let k = self.src.find_at_depth0(i + 1, hi, &["in"]).unwrap_or(hi);
                for j in i + 1..k {
                    if self.src.is_ident(j) {
                        self.bind(self.text(j));
                    }
                }
                k
            }
            "catch" => {
                if self.src.is_ident(i + 1) {
                    self.bind(self.text(i + 1));
                }
                i + 2
            }
            "by" => self.tactic_block(i + 1, hi, self.brackets > 0),
            "decreasing_by" => self.tactic_block(i + 1, hi, false),
            "termination_by" => {
                let stop = self
                    .src
                    .find_at_depth0(i + 1, hi, &["decreasing_by"])
                    .unwrap_or(hi);
                match self.src.find_at_depth0(i + 1, stop, &["=>"]) {
                    Some(arrow) => {
                        self.binders(i + 1, arrow);
                        arrow + 1
                    }
                    None => i + 1,
                }
            }
            "Type" | "Sort" => self.universe_args(i, hi),
            _ => i + 1,
        }
    }

    fn symbol(&mut self, i: usize, hi: usize) -> usize {
        let s = self.text(i);
        match s {
            "λ" => self.fun_binders(i, hi),
            "|" => self.alternative(i, hi),
            "." if self.src.is(i + 1, "{") && self.src.glued_to_prev(i + 1) => {
                // `Foo.{u}`: universe levels.
                self.src.skip_group(i + 1, hi)
            }
            _ if QUANTIFIERS.contains(&s) => self.quantifier(i, hi),
            "(" | "`(" | "[" | "@[" | "#[" | "%[" | "{" | "⟨" | "⦃" | "‹" => {
                match self.src.closing(i, hi) {
                    Some(c) => {
                        self.bracket(i, c);
                        c + 1
                    }
                    None => i + 1,
                }
            }
            _ => i + 1,
        }
    }

    /// The inside of a matched bracket.
    fn bracket(&mut self, open: usize, close: usize) {
        self.brackets += 1;
        match self.text(open) {
            "{" => self.brace(open + 1, close),
            "`(" => self.quotation(open + 1, close),
            _ => self.term(open + 1, close),
        }
        self.brackets -= 1;
    }

    /// `{x | p x}` and `{x : A // p x}` bind `x`; anything else in braces is a term
    /// (structure instances `{ qty := 0 }`, implicit lambdas).
    fn brace(&mut self, lo: usize, hi: usize) {
        let binds = self.src.is_ident(lo)
            && !is_dotted(self.text(lo))
            && matches!(self.text(lo + 1), "|" | "//" | ":" | "∈");
        if binds {
            if let Some(bar) = self.src.find_at_depth0(lo + 1, hi, &["|", "//"]) {
                self.bind(self.text(lo));
                self.term(lo + 1, bar);
                self.term(bar + 1, hi);
                return;
            }
        }
        self.term(lo, hi);
    }

    /// A syntax quotation `` `(tactic| simp [foo]) `` or `` `(f $x) ``.
    fn quotation(&mut self, lo: usize, hi: usize) {
        if self.src.is(lo + 1, "|") {
            match self.text(lo) {
                "tactic" | "conv" => {
                    self.tactic_block(lo + 2, hi, false);
                    return;
                }
                "term" | "command" | "doElem" => {
                    self.term(lo + 2, hi);
                    return;
                }
                _ => {}
            }
        }
        self.term(lo, hi);
    }

    fn fun_binders(&mut self, i: usize, hi: usize) -> usize {
        if self.src.is(i + 1, "|") {
            return i + 1;
        }
        let arrow = self
            .src
            .find_at_depth0(i + 1, hi, &["=>", "↦"])
            .unwrap_or(hi);
        self.binders(i + 1, arrow);
        arrow + 1
    }

    fn quantifier(&mut self, i: usize, hi: usize) -> usize {
        let comma = self.src.find_at_depth0(i + 1, hi, &[","]).unwrap_or(hi);
        self.binders(i + 1, comma);
        comma + 1
    }

    /// `let x := e`, `have h (n : Nat) : P := e`, `let ⟨a, b⟩ := e`, `let x ← e`: binds the
    /// names and returns where the type or value starts.
    fn have_like(&mut self, i: usize, hi: usize) -> usize {
        const ENDS: &[&str] = &[":", ":=", "|", "←", "<-"];
        let mut j = i + 1;
        while matches!(self.text(j), "rec" | "mut") {
            j += 1;
        }
        if matches!(self.text(j), "⟨" | "(") {
            let k = self.src.find_at_depth0(j, hi, ENDS).unwrap_or(hi);
            self.pattern(j, k, false);
            return k;
        }
        if self.src.is_ident(j) && !is_dotted(self.text(j)) {
            let next = self.text(j + 1);
            let named = ENDS.contains(&next)
                || matches!(next, "(" | "{" | "[" | "⦃")
                || self.src.is_ident(j + 1);
            if named {
                self.bind(self.text(j));
                let k = self.src.find_at_depth0(j + 1, hi, ENDS).unwrap_or(hi);
                self.binders(j + 1, k);
                return k;
            }
        }
        j
    }

    /// `match h : e, f with`: binds `h`, reads the discriminants, returns the index after
    /// `with` (the alternatives are read as they come).
    pub(super) fn match_discriminants(&mut self, i: usize, hi: usize) -> usize {
        let with = self.src.find_at_depth0(i + 1, hi, &["with"]).unwrap_or(hi);
        let mut start = i + 1;
        while start < with {
            let end = self.src.find_at_depth0(start, with, &[","]).unwrap_or(with);
            if self.src.is_ident(start) && self.src.is(start + 1, ":") {
                self.bind(self.text(start));
                self.term(start + 2, end);
            } else {
                self.term(start, end);
            }
            start = end + 1;
        }
        with + 1
    }

    /// At `|`: when a `=>` follows (before another alternative or a term-only token), the
    /// patterns of a `match`, `fun` or equation alternative; else nothing (set-builder
    /// bars, `first | ...`).
    fn alternative(&mut self, i: usize, hi: usize) -> usize {
        // Patterns are short; the bound keeps a run of bars without arrows linear.
        let mut k = i + 1;
        let mut steps = 0;
        while k < hi && steps < ALTERNATIVE_LOOKAHEAD {
            steps += 1;
            let t = self.text(k);
            if t == "=>" {
                self.pattern(i + 1, k, true);
                return k + 1;
            }
            let new_alternative = t == "|" && self.src.tok(k).is_some_and(|t| t.first_on_line);
            if new_alternative || matches!(t, ":=" | "fun" | "λ" | "by" | "←") {
                break;
            }
            k = self.src.skip_group(k, hi);
        }
        i + 1
    }

    /// `Type u`, `Sort (max u v)`, `Type*`: the levels are not references.
    fn universe_args(&mut self, i: usize, hi: usize) -> usize {
        let j = i + 1;
        if j >= hi {
            return j;
        }
        if self.src.is_ident(j) && !is_dotted(self.text(j)) {
            return j + 1;
        }
        if self.src.is(j, "(") {
            if let Some(c) = self.src.closing(j, hi) {
                let levels = (j + 1..c).all(|k| {
                    self.src.is_ident(k)
                        || matches!(self.src.kind(k), Some(Kind::Number))
                        || matches!(self.text(k), "+" | "(" | ")")
                });
                if levels {
                    return c + 1;
                }
            }
        }
        j
    }
}
