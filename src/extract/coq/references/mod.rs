//! Names written in Coq terms and proof scripts, and the local names bound around them.
//!
//! Takes the tokens of a statement, a body or a proof script; gives every identifier
//! occurrence that may name a global declaration (with its byte offset) and the set of names
//! the text binds locally: binders of `forall`/`fun`/`exists`/`let`/`fix`, names of `{x | P}`,
//! Ltac pattern variables and hypothesis names, intro patterns (`intros`, `=>`, `as [..]`,
//! `eqn:`), and the names given by `set`/`pose`/`assert`/`have`/`rename ... into`.
//!
//! In a proof script the first word of each tactic is the tactic's name, never a reference
//! (so the tactic `symmetry` is not the lemma `symmetry`, while `apply symmetry` names it),
//! hint database names after `auto with` and hypothesis names after `in`, `clear` or
//! `revert` are not references either. Locals are collected without regard to order: a name
//! bound anywhere in a declaration hides the global of that name everywhere in it, which
//! is what proofs almost always mean. It does not read notations: `x + y` names no
//! declaration here, though coqc records the notation's use.

use std::collections::HashSet;

mod terms;
mod vocabulary;

pub use vocabulary::is_keyword;
use vocabulary::{is_tactical, names_after_head, takes_hint_databases, takes_hypotheses};

use super::lexer::{Token, TokenKind};
use crate::extract::RawReference;

/// What a scan found.
#[derive(Clone, Debug, Default)]
pub struct Scan {
    /// Identifier occurrences that may name globals, in order.
    pub refs: Vec<RawReference>,
    /// Names bound locally somewhere in the scanned text.
    pub bound: HashSet<String>,
    /// Hypothesis names written where no global can stand (`in H`, `clear H`, `revert H`):
    /// no references, but they tell which section variables a proof uses.
    pub hypotheses: Vec<String>,
}

impl Scan {
    /// The references whose name is not bound locally (in `self.bound` or `extra`).
    pub fn free_refs(&self, extra: &HashSet<String>) -> Vec<RawReference> {
        self.refs
            .iter()
            .filter(|r| !(self.bound.contains(&r.name) || extra.contains(&r.name)))
            .cloned()
            .collect()
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum BinderEnd {
    /// `forall x, ...`, `exists x, ...`
    Comma,
    /// `fun x => ...`
    Arrow,
    /// `let x := ...`, `fix f x := ...`
    Assign,
    /// A statement's binders before its `:`.
    Colon,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum BinderState {
    Names,
    /// Inside `( ... )` before its `:`; the group's depth.
    GroupNames(i32),
    /// Inside a group after its `:` (or a backquoted group without names).
    GroupType(i32),
    /// After a bare `:`.
    Type,
}

#[derive(Clone, Copy, Debug)]
enum Ctx {
    Binder {
        depth: i32,
        end: BinderEnd,
        state: BinderState,
    },
    Match {
        depth: i32,
        pattern: bool,
        /// An Ltac `match goal`: its branches are tactics.
        ltac: bool,
    },
}

/// The mode a scan starts in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// A term (a type or a body).
    Term,
    /// A statement: binders, then `:` and a type.
    Statement,
    /// A proof script: sentences of tactics.
    Tactics,
}

/// Scans `tokens` of `text` (one sentence, or a statement or body part of one) into `out`.
pub fn scan(tokens: &[Token], text: &str, mode: Mode, out: &mut Scan) {
    Scanner::new(tokens, text, mode, out).run();
}

struct Scanner<'a> {
    tokens: &'a [Token],
    text: &'a str,
    tactics: bool,
    out: &'a mut Scan,
    depth: i32,
    ctx: Vec<Ctx>,
    /// Depths of `let`s waiting for their `in`, and whether they are Ltac lets.
    lets: Vec<(i32, bool)>,
    // Tactic state.
    head: bool,
    tactic: Option<&'a str>,
    tactic_depth: i32,
    /// Tactic-level groups `( ... )`, `[ ... | ... ]`: the depth inside them.
    groups: Vec<i32>,
    /// Intro pattern mode: binds names; ends when the depth falls below the value.
    pattern: Option<i32>,
    /// The intro pattern is one bracketed group (`have [x Hx] := e`): it ends when the
    /// depth comes back to `pattern`.
    pattern_closes: bool,
    /// Inside a view `/( ... )` of an intro pattern: a term until the depth falls back.
    view: Option<i32>,
    hypotheses: bool,
    databases: bool,
}

impl<'a> Scanner<'a> {
    fn new(tokens: &'a [Token], text: &'a str, mode: Mode, out: &'a mut Scan) -> Scanner<'a> {
        let mut ctx = Vec::new();
        if mode == Mode::Statement {
            ctx.push(Ctx::Binder {
                depth: 0,
                end: BinderEnd::Colon,
                state: BinderState::Names,
            });
        }
        Scanner {
            tokens,
            text,
            tactics: mode == Mode::Tactics,
            out,
            depth: 0,
            ctx,
            lets: Vec::new(),
            head: mode == Mode::Tactics,
            tactic: None,
            tactic_depth: 0,
            groups: Vec::new(),
            pattern: None,
            pattern_closes: false,
            view: None,
            hypotheses: false,
            databases: false,
        }
    }

    fn text_of(&self, i: usize) -> &'a str {
        match self.tokens.get(i) {
            Some(t) => t.text(self.text),
            None => "",
        }
    }

    fn kind_of(&self, i: usize) -> Option<TokenKind> {
        self.tokens.get(i).map(|t| t.kind)
    }

    fn bind(&mut self, name: &str) {
        if name != "_" && !name.contains('.') {
            self.out.bound.insert(name.to_string());
        }
    }

    fn reference(&mut self, i: usize) {
        let t = self.tokens[i];
        let name = t.text(self.text);
        if is_keyword(name) {
            return;
        }
        self.out.refs.push(RawReference {
            name: name.to_string(),
            offset: t.start,
        });
    }

    /// At tactic level: no term construct is open at or above the tactic's depth, except an
    /// Ltac match whose branch body we are in.
    fn at_tactic_level(&self) -> bool {
        if !self.tactics {
            return false;
        }
        match self.ctx.last() {
            None => true,
            Some(Ctx::Match {
                ltac: true,
                pattern: false,
                ..
            }) => true,
            Some(_) => false,
        }
    }

    fn end_tactic(&mut self) {
        self.tactic = None;
        self.pattern = None;
        self.pattern_closes = false;
        self.view = None;
        self.hypotheses = false;
        self.databases = false;
    }

    /// Whether the group opened at token `i` has a `:` (or `:=`) at its own depth.
    fn group_has_colon(&self, i: usize) -> bool {
        let mut depth = 0;
        for j in i..self.tokens.len() {
            match self.text_of(j) {
                "(" | "[" | "{" | "{|" => depth += 1,
                ")" | "]" | "}" | "|}" => {
                    depth -= 1;
                    if depth <= 0 {
                        return false;
                    }
                }
                ":" | ":=" | ":>" if depth == 1 => return true,
                _ => {}
            }
        }
        false
    }

    fn run(&mut self) {
        let mut i = 0;
        while i < self.tokens.len() {
            i = self.step(i);
        }
    }

    /// Handles token `i`; returns the index of the next token to handle.
    fn step(&mut self, i: usize) -> usize {
        let s = self.text_of(i);
        let kind = self.kind_of(i);

        // Tactic position: tacticals, groups and selectors, then the tactic's name.
        if self.tactics && self.head {
            match s {
                "(" | "[" => {
                    self.depth += 1;
                    self.groups.push(self.depth);
                    return i + 1;
                }
                ":" | "-" | "," | "!" | "?" | ">" => return i + 1,
                "match" | "lazymatch" | "multimatch" => {
                    self.head = false;
                    self.ctx.push(Ctx::Match {
                        depth: self.depth,
                        pattern: false,
                        ltac: true,
                    });
                    return i + 1;
                }
                "let" => {
                    self.head = false;
                    self.lets.push((self.depth, true));
                    self.ctx.push(Ctx::Binder {
                        depth: self.depth,
                        end: BinderEnd::Assign,
                        state: BinderState::Names,
                    });
                    return i + 1;
                }
                _ => {}
            }
            if kind == Some(TokenKind::Number) {
                return i + 1;
            }
            if kind == Some(TokenKind::Ident) {
                if is_tactical(s) {
                    return i + 1;
                }
                self.head = false;
                self.end_tactic();
                self.tactic = Some(s);
                self.tactic_depth = self.depth;
                if matches!(s, "intros" | "intro" | "eintros") {
                    self.pattern = Some(self.depth);
                }
                if names_after_head(s) {
                    return self.names_after_head(i + 1);
                }
                return i + 1;
            }
            self.head = false;
        }

        // Tactic-level structure.
        if self.at_tactic_level() {
            let group = self.groups.last().copied();
            match s {
                ";" | "||" if self.depth <= self.tactic_depth || group == Some(self.depth) => {
                    self.end_tactic();
                    self.head = true;
                    return i + 1;
                }
                "|" if group == Some(self.depth)
                    && self.pattern.is_none()
                    && !self.match_at_depth() =>
                {
                    self.end_tactic();
                    self.head = true;
                    return i + 1;
                }
                ")" | "]" if group == Some(self.depth) => {
                    self.groups.pop();
                    self.depth -= 1;
                    self.end_tactic();
                    self.tactic_depth = self.depth;
                    return i + 1;
                }
                "by" => {
                    self.end_tactic();
                    self.head = true;
                    return i + 1;
                }
                "=>" => {
                    self.pattern = Some(self.depth);
                    self.hypotheses = false;
                    return i + 1;
                }
                "as" => {
                    self.pattern = Some(self.depth);
                    self.hypotheses = false;
                    return i + 1;
                }
                "in" => {
                    if let Some(&(d, ltac)) = self.lets.last() {
                        if d == self.depth {
                            self.lets.pop();
                            if ltac {
                                self.end_tactic();
                                self.head = true;
                            }
                            return i + 1;
                        }
                    }
                    self.pattern = None;
                    self.hypotheses = true;
                    return i + 1;
                }
                "at" | "using" | "eqn" => {
                    self.pattern = None;
                    self.hypotheses = false;
                    self.databases = false;
                    if s == "eqn" && self.text_of(i + 1) == ":" {
                        if self.kind_of(i + 2) == Some(TokenKind::Ident) {
                            let name = self.text_of(i + 2);
                            self.bind(name);
                            return i + 3;
                        }
                        return i + 2;
                    }
                    return i + 1;
                }
                "with" if self.tactic.is_some_and(takes_hint_databases) => {
                    self.databases = true;
                    return i + 1;
                }
                "into" => {
                    if self.kind_of(i + 1) == Some(TokenKind::Ident) {
                        let name = self.text_of(i + 1);
                        self.bind(name);
                        return i + 2;
                    }
                    return i + 1;
                }
                _ => {}
            }
            if kind == Some(TokenKind::Ident) {
                if self.databases {
                    return i + 1;
                }
                if self.hypotheses
                    || (self.pattern.is_none() && self.tactic.is_some_and(takes_hypotheses))
                {
                    self.out.hypotheses.push(s.to_string());
                    return i + 1;
                }
            }
        }

        // Intro patterns.
        if let Some(pd) = self.pattern {
            if self.depth < pd {
                self.pattern = None;
            } else if self.view.is_none() {
                match s {
                    "(" | "[" | "{" | "{|" => {
                        // `{H}` clears H; `/(...)` is a view term.
                        if s == "(" && self.text_of(i.wrapping_sub(1)) == "/" {
                            self.view = Some(self.depth + 1);
                        }
                        self.depth += 1;
                        return i + 1;
                    }
                    ")" | "]" | "}" | "|}" => {
                        self.depth -= 1;
                        if self.depth < pd || (self.pattern_closes && self.depth == pd) {
                            self.pattern = None;
                            self.pattern_closes = false;
                        }
                        return i + 1;
                    }
                    _ => {}
                }
                if kind == Some(TokenKind::Ident) {
                    let prev = self.text_of(i.wrapping_sub(1));
                    if prev == "/" || prev == "-/" || prev.ends_with('/') {
                        self.reference(i);
                    } else if prev == "{" {
                        // a clear: names a local
                    } else {
                        self.bind(s);
                    }
                    return i + 1;
                }
                return i + 1;
            }
        }
        if let Some(vd) = self.view {
            if s == ")" && self.depth == vd {
                self.view = None;
                self.depth -= 1;
                return i + 1;
            }
        }

        // Terms.
        self.term_step(i)
    }

    /// `have H x : P`, `set x := e`, `case E : x`, `have [x Hx] := e`: binds the names
    /// given right after the tactic's name (from token `i`).
    fn names_after_head(&mut self, i: usize) -> usize {
        if self.text_of(i) == "[" {
            self.pattern = Some(self.depth);
            self.pattern_closes = true;
            return i;
        }
        let mut j = i;
        while self.kind_of(j) == Some(TokenKind::Ident) && !is_keyword(self.text_of(j)) {
            j += 1;
        }
        if j > i && matches!(self.text_of(j), ":" | ":=") {
            for k in i..j {
                let name = self.text_of(k);
                self.bind(name);
            }
            return j + 1;
        }
        i
    }
}

#[cfg(test)]
mod tests;
