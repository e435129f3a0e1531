//! Reading binders and patterns (the binding half of [`Walker`]).
//!
//! Takes the token range of a binder list (`fun x (y : Nat) =>`, `∀ x ∈ s,`, a signature),
//! a binder group (`(n q : Nat := 0)`, `[ToString α]`, `⦃k⦄`, `{{k}}`), a pattern
//! (`receive n :: ms`, `⟨a, b⟩`, `.ship k`) or the fields of a structure instance written
//! with `where`; gives the names they bind, with the types and defaults read as terms. In
//! a pattern of a `match` or equation, an applied or dotted name is a constructor and so a
//! reference; every other name is bound. Knows nothing of which constructors exist, so a
//! bare nullary constructor (`| audit =>`) reads as a variable.

use super::lexer::Kind;
use super::names::{head, is_dotted, normalize_name};
use super::terms::{Walker, MAX_DEPTH};
use crate::library::BinderStyle;

/// One binder group as read: `(n q : Nat)`, `[ToString α]`, or a bare name.
#[derive(Clone, Debug)]
pub(super) struct Binder {
    pub names: Vec<String>,
    pub style: BinderStyle,
    /// Token range of the type; empty when the binder gives none.
    pub ty: (usize, usize),
    /// Token range of the whole group, brackets included.
    pub group: (usize, usize),
}

/// Symbols after which a binder list goes on as a term: `∀ x ∈ s, ...`.
const BINDER_PREDICATES: &[&str] = &["∈", "∉", "<", "≤", ">", "≥", "≠", "⊆", "⊂", "⊇", "⊃"];

impl<'s, 'a> Walker<'s, 'a> {
    /// Binders up to a `=>` or `,` (already cut off at `hi`): bare names, bracket groups,
    /// anonymous-constructor patterns, then an optional `: type` or binder predicate.
    pub(super) fn binders(&mut self, lo: usize, hi: usize) {
        let mut i = lo;
        while i < hi {
            let s = self.text(i);
            match self.src.kind(i) {
                Some(Kind::Ident) => {
                    if !is_dotted(s) {
                        self.bind(s);
                    }
                    i += 1;
                }
                Some(Kind::Keyword) if s == "in" => {
                    self.term(i + 1, hi);
                    return;
                }
                Some(Kind::Symbol) if s == ":" || BINDER_PREDICATES.contains(&s) => {
                    self.term(i + 1, hi);
                    return;
                }
                Some(Kind::Symbol) if matches!(s, "(" | "{" | "[" | "⦃" | "⟨") => {
                    let Some(c) = self.src.closing(i, hi) else {
                        i += 1;
                        continue;
                    };
                    let tuple = s == "("
                        && self.src.find_at_depth0(i + 1, c, &[","]).is_some()
                        && self.src.find_at_depth0(i + 1, c, &[":"]).is_none();
                    if s == "⟨" || tuple {
                        self.pattern(i + 1, c, false);
                    } else {
                        self.binder_group(i, c);
                    }
                    i = c + 1;
                }
                _ => i += 1,
            }
        }
    }

    /// Reads the binder group opened at `open` and closed at `close`: its type and default
    /// are read, then its names bound.
    pub fn binder_group(&mut self, open: usize, close: usize) -> Binder {
        let (style, lo, hi) = match self.text(open) {
            "{" if self.src.is(open + 1, "{")
                && self.src.closing(open + 1, close + 1) == Some(close - 1) =>
            {
                (BinderStyle::Strict, open + 2, close - 1)
            }
            "{" => (BinderStyle::Implicit, open + 1, close),
            "[" => (BinderStyle::Instance, open + 1, close),
            "⦃" => (BinderStyle::Strict, open + 1, close),
            _ => (BinderStyle::Explicit, open + 1, close),
        };
        let colon = self.src.find_at_depth0(lo, hi, &[":"]);
        let (names_end, ty, default) = match colon {
            Some(k) => {
                let d = self.src.find_at_depth0(k + 1, hi, &[":="]);
                (k, (k + 1, d.unwrap_or(hi)), d)
            }
            None if style == BinderStyle::Instance => (lo, (lo, hi), None),
            None => {
                let d = self.src.find_at_depth0(lo, hi, &[":="]);
                let end = d.unwrap_or(hi);
                (end, (end, end), d)
            }
        };
        let names: Vec<String> = (lo..names_end)
            .filter(|&k| self.src.is_ident(k) && !is_dotted(self.text(k)))
            .map(|k| normalize_name(self.text(k)))
            .collect();
        self.brackets += 1;
        self.term(ty.0, ty.1);
        if let Some(d) = default {
            self.term(d + 1, hi);
        }
        self.brackets -= 1;
        for n in &names {
            self.bind(n);
        }
        Binder {
            names,
            style,
            ty,
            group: (open, close + 1),
        }
    }

    /// The binders of a signature, up to `hi` (its `:` or end): bracket groups and bare
    /// names.
    pub fn signature_binders(&mut self, lo: usize, hi: usize) -> Vec<Binder> {
        let mut out = Vec::new();
        let mut i = lo;
        while i < hi {
            let s = self.text(i);
            if matches!(s, "(" | "{" | "[" | "⦃") {
                if let Some(c) = self.src.closing(i, hi) {
                    out.push(self.binder_group(i, c));
                    i = c + 1;
                    continue;
                }
            } else if self.src.is_ident(i) && !is_dotted(s) {
                self.bind(s);
                out.push(Binder {
                    names: if s == "_" {
                        Vec::new()
                    } else {
                        vec![normalize_name(s)]
                    },
                    style: BinderStyle::Explicit,
                    ty: (i + 1, i + 1),
                    group: (i, i + 1),
                });
            }
            i += 1;
        }
        out
    }

    /// Reads a pattern: names are bound, except constructor heads when `ctor_heads` (an
    /// applied name like `receive n`, or a dotted one like `Movement.ship`), which are
    /// references. A lone atomic name is read as a variable, so a nullary constructor
    /// written bare (`| audit =>`) is missed; Lean tells them apart by looking it up.
    pub fn pattern(&mut self, lo: usize, hi: usize, ctor_heads: bool) {
        let hi = hi.min(self.src.len());
        if self.depth >= MAX_DEPTH {
            return;
        }
        self.depth += 1;
        let mut i = lo;
        while i < hi {
            let s = self.text(i);
            match self.src.kind(i) {
                Some(Kind::Ident) => {
                    let after_dot =
                        self.src.glued_to_prev(i) && matches!(self.text(i - 1), "." | "?" | "$");
                    if !after_dot && s != "rfl" && s != "_" {
                        let at_head = i == lo || self.head_position(i - 1);
                        let applied = i + 1 < hi && self.starts_argument(i + 1);
                        let dotted = is_dotted(s);
                        if ctor_heads
                            && ((dotted && !self.is_local(head(s))) || (at_head && applied))
                        {
                            self.ident(i);
                        } else if !dotted {
                            self.bind(s);
                        }
                    }
                    i += 1;
                }
                Some(Kind::Symbol) if s == ":" => {
                    self.term(i + 1, hi);
                    break;
                }
                Some(Kind::Symbol) if matches!(s, "(" | "[" | "{" | "⟨" | "⦃") => {
                    match self.src.closing(i, hi) {
                        Some(c) => {
                            self.pattern(i + 1, c, ctor_heads);
                            i = c + 1;
                        }
                        None => i += 1,
                    }
                }
                _ => i += 1,
            }
        }
        self.depth -= 1;
    }

    fn head_position(&self, prev: usize) -> bool {
        matches!(
            self.src.kind(prev),
            Some(Kind::Symbol) | Some(Kind::Keyword)
        ) && self.text(prev) != "."
    }

    fn starts_argument(&self, j: usize) -> bool {
        match self.src.kind(j) {
            Some(Kind::Ident | Kind::Number | Kind::Str | Kind::Char) => true,
            Some(Kind::Symbol) => {
                matches!(self.text(j), "(" | "⟨" | "[" | "{" | "@")
                    || (self.text(j) == "." && !self.src.glued_to_prev(j))
            }
            _ => false,
        }
    }

    /// The fields of a structure instance written with `where` (`instance : ToString Sku
    /// where toString s := ...`): field names are not references, their binders are bound.
    pub fn where_fields(&mut self, lo: usize, hi: usize) {
        for (a, b) in self.src.items(lo, hi) {
            if self.src.is_ident(a) {
                let k = self.src.find_at_depth0(a + 1, b, &[":=", "|"]).unwrap_or(b);
                self.binders(a + 1, k);
                let body = if self.src.is(k, ":=") { k + 1 } else { k };
                self.term(body, b);
            } else {
                self.term(a, b);
            }
        }
    }
}
