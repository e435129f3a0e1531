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

/// Words of Gallina and of the tactic language that never name a declaration.
pub fn is_keyword(word: &str) -> bool {
    matches!(
        word,
        "_" | "forall"
            | "fun"
            | "match"
            | "lazymatch"
            | "multimatch"
            | "with"
            | "end"
            | "as"
            | "in"
            | "return"
            | "let"
            | "if"
            | "then"
            | "else"
            | "is"
            | "isn't"
            | "fix"
            | "cofix"
            | "struct"
            | "measure"
            | "wf"
            | "for"
            | "Type"
            | "Prop"
            | "Set"
            | "SProp"
            | "exists"
            | "exists2"
            | "where"
            | "at"
            | "using"
            | "by"
            | "eqn"
            | "into"
            | "until"
            | "goal"
            | "context"
            | "reverse"
            | "fresh"
            | "ltac"
            | "constr"
            | "uconstr"
            | "open_constr"
            | "type"
            | "of"
            | "eval"
            | "beta"
            | "delta"
            | "iota"
            | "zeta"
            | "after"
            | "before"
            | "top"
            | "bottom"
            | "only"
            | "all"
            | "parsing"
            | "printing"
            | "level"
    )
}

/// Tactics whose argument is another tactic: the word after them is again a tactic name.
fn is_tactical(word: &str) -> bool {
    matches!(
        word,
        "try"
            | "repeat"
            | "do"
            | "progress"
            | "now"
            | "by"
            | "solve"
            | "first"
            | "abstract"
            | "time"
            | "timeout"
            | "once"
            | "exactly_once"
            | "unshelve"
            | "intuition"
            | "dintuition"
            | "assert_succeeds"
            | "assert_fails"
            | "infoH"
            | "Time"
            | "Fail"
            | "Succeed"
            | "Info"
            | "all"
            | "only"
            | "par"
            | "tryif"
            | "then"
            | "else"
            | "idtac"
            | "with_strategy"
    )
}

/// Tactics whose `with` is followed by hint database names.
fn takes_hint_databases(tactic: &str) -> bool {
    matches!(
        tactic,
        "auto"
            | "eauto"
            | "trivial"
            | "info_auto"
            | "info_eauto"
            | "debug"
            | "autorewrite"
            | "autounfold"
            | "typeclasses"
            | "firstorder"
            | "intuition"
            | "dintuition"
            | "tauto"
            | "new"
            | "autoapply"
            | "easy"
            | "eauto_with"
            | "auto_with"
    )
}

/// Tactics whose arguments are hypothesis names (never globals).
fn takes_hypotheses(tactic: &str) -> bool {
    matches!(
        tactic,
        "clear"
            | "clearbody"
            | "revert"
            | "subst"
            | "dependent"
            | "rename"
            | "intro"
            | "intros"
            | "move_hyp"
    )
}

/// Tactics whose parenthesised `(H : P)` or plain `x :=` names a new hypothesis.
fn binds_parenthesised(tactic: &str) -> bool {
    matches!(
        tactic,
        "assert"
            | "eassert"
            | "enough"
            | "eenough"
            | "evar"
            | "set"
            | "eset"
            | "pose"
            | "epose"
            | "remember"
            | "cut"
            | "specialize"
            | "have"
            | "suff"
            | "suffices"
            | "wlog"
            | "gen"
            | "without"
    )
}

/// ssreflect tactics that name what they introduce right after their name
/// (`have H : P`, `set x := e`, `case E : x`).
fn names_after_head(tactic: &str) -> bool {
    matches!(
        tactic,
        "have"
            | "suff"
            | "suffices"
            | "set"
            | "pose"
            | "wlog"
            | "gen"
            | "case"
            | "elim"
            | "without"
            | "remember"
    )
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

    fn term_step(&mut self, i: usize) -> usize {
        let s = self.text_of(i);
        let kind = self.kind_of(i);
        let depth = self.depth;

        // Binder lists.
        if let Some(Ctx::Binder {
            depth: bd,
            end,
            state,
        }) = self.ctx.last().copied()
        {
            let ends_here = depth == bd
                && match end {
                    BinderEnd::Comma => s == ",",
                    BinderEnd::Arrow => s == "=>",
                    BinderEnd::Assign => s == ":=",
                    BinderEnd::Colon => s == ":" || s == ":=",
                };
            if ends_here {
                self.ctx.pop();
                return i + 1;
            }
            match state {
                BinderState::Names => {
                    match s {
                        "(" | "{" | "[" | "{|" => {
                            let backquoted = self.text_of(i.wrapping_sub(1)) == "`";
                            self.depth += 1;
                            let g = self.depth;
                            let names = !backquoted || self.group_has_colon(i);
                            self.set_binder_state(if names {
                                BinderState::GroupNames(g)
                            } else {
                                BinderState::GroupType(g)
                            });
                            return i + 1;
                        }
                        ":" if depth == bd => {
                            self.set_binder_state(BinderState::Type);
                            return i + 1;
                        }
                        _ => {}
                    }
                    if kind == Some(TokenKind::Ident) && depth == bd {
                        if !is_keyword(s) {
                            self.bind(s);
                        }
                        return i + 1;
                    }
                    if depth == bd && matches!(s, "`" | "'" | "!" | "&" | "|" | ",") {
                        return i + 1;
                    }
                    // Anything else: the binder list was not one (e.g. `exists` used as a
                    // tactic argument); read on as a term.
                    if depth == bd && end != BinderEnd::Colon {
                        self.ctx.pop();
                        return i;
                    }
                    if depth == bd {
                        self.set_binder_state(BinderState::Type);
                        return i;
                    }
                }
                BinderState::GroupNames(g) => {
                    if depth == g {
                        match s {
                            ":" | ":=" | ":>" => {
                                self.set_binder_state(BinderState::GroupType(g));
                                return i + 1;
                            }
                            ")" | "}" | "]" | "|}" => {
                                self.depth -= 1;
                                self.set_binder_state(BinderState::Names);
                                return i + 1;
                            }
                            "(" | "[" | "{" => {
                                // A pattern binder `'(a, (b, c))`.
                                self.depth += 1;
                                return i + 1;
                            }
                            _ => {}
                        }
                        if kind == Some(TokenKind::Ident) {
                            if !is_keyword(s) {
                                self.bind(s);
                            }
                            return i + 1;
                        }
                        return i + 1;
                    }
                    if depth > g {
                        match s {
                            "(" | "[" | "{" => self.depth += 1,
                            ")" | "]" | "}" => self.depth -= 1,
                            _ if kind == Some(TokenKind::Ident) && !is_keyword(s) => self.bind(s),
                            _ => {}
                        }
                        return i + 1;
                    }
                }
                BinderState::GroupType(g) => {
                    if depth == g && matches!(s, ")" | "}" | "]" | "|}") {
                        self.depth -= 1;
                        self.set_binder_state(BinderState::Names);
                        return i + 1;
                    }
                }
                BinderState::Type => {}
            }
        }

        // Matches.
        if let Some(Ctx::Match {
            depth: md,
            pattern,
            ltac,
        }) = self.ctx.last().copied()
        {
            if depth == md {
                match s {
                    "with" if !pattern => {
                        self.set_match_pattern(true);
                        return i + 1;
                    }
                    "|" => {
                        self.set_match_pattern(true);
                        return i + 1;
                    }
                    "=>" if pattern => {
                        self.set_match_pattern(false);
                        if ltac && self.tactics {
                            self.end_tactic();
                            self.head = true;
                            self.tactic_depth = self.depth;
                        }
                        return i + 1;
                    }
                    "end" => {
                        self.ctx.pop();
                        if ltac && self.tactics {
                            self.end_tactic();
                            self.tactic_depth = self.depth;
                        }
                        return i + 1;
                    }
                    "as" | "in" if !pattern => {
                        if s == "as" && self.kind_of(i + 1) == Some(TokenKind::Ident) {
                            let name = self.text_of(i + 1);
                            self.bind(name);
                            return i + 2;
                        }
                        return i + 1;
                    }
                    _ => {}
                }
            }
            if pattern && kind == Some(TokenKind::Ident) {
                // Ltac: `H : type |- goal`.
                if self.text_of(i + 1) == ":" {
                    self.bind(s);
                    return i + 1;
                }
                if s == "as" {
                    if self.kind_of(i + 1) == Some(TokenKind::Ident) {
                        let name = self.text_of(i + 1);
                        self.bind(name);
                        return i + 2;
                    }
                    return i + 1;
                }
            }
        }

        // Term constructs.
        match s {
            "forall" | "∀" | "exists" | "∃" | "exists2" | "∃!" | "exists!" => {
                self.ctx.push(Ctx::Binder {
                    depth,
                    end: BinderEnd::Comma,
                    state: BinderState::Names,
                });
                return i + 1;
            }
            "fun" | "λ" => {
                self.ctx.push(Ctx::Binder {
                    depth,
                    end: BinderEnd::Arrow,
                    state: BinderState::Names,
                });
                return i + 1;
            }
            "let" | "fix" | "cofix" => {
                if s == "let" {
                    self.lets.push((depth, false));
                    // `let fix f ... :=`: one binder list.
                    if matches!(self.text_of(i + 1), "fix" | "cofix") {
                        self.ctx.push(Ctx::Binder {
                            depth,
                            end: BinderEnd::Assign,
                            state: BinderState::Names,
                        });
                        return i + 2;
                    }
                }
                self.ctx.push(Ctx::Binder {
                    depth,
                    end: BinderEnd::Assign,
                    state: BinderState::Names,
                });
                return i + 1;
            }
            "in" => {
                if let Some(&(d, _)) = self.lets.last() {
                    if d == depth {
                        self.lets.pop();
                    }
                }
                return i + 1;
            }
            "match" | "lazymatch" | "multimatch" => {
                self.ctx.push(Ctx::Match {
                    depth,
                    pattern: false,
                    ltac: self.tactics && self.text_of(i + 1) == "goal"
                        || self.text_of(i + 1) == "reverse",
                });
                return i + 1;
            }
            "(" => {
                self.depth += 1;
                // `(x := e)`: a named argument or a local definition.
                if self.kind_of(i + 1) == Some(TokenKind::Ident) && self.text_of(i + 2) == ":=" {
                    let name = self.text_of(i + 1);
                    self.bind(name);
                    return i + 3;
                }
                // `assert (H : P)`.
                if self.kind_of(i + 1) == Some(TokenKind::Ident)
                    && self.text_of(i + 2) == ":"
                    && self.depth == self.tactic_depth + 1
                    && self.tactic.is_some_and(binds_parenthesised)
                {
                    let name = self.text_of(i + 1);
                    self.bind(name);
                    return i + 3;
                }
                return i + 1;
            }
            "{" => {
                self.depth += 1;
                // `{x : A | P x}`, `{x | P}`, `{x & P}`.
                if self.kind_of(i + 1) == Some(TokenKind::Ident)
                    && matches!(self.text_of(i + 2), ":" | "|" | "&")
                {
                    let name = self.text_of(i + 1);
                    self.bind(name);
                    return i + 2;
                }
                return i + 1;
            }
            "[" | "{|" => {
                self.depth += 1;
                return i + 1;
            }
            ")" | "]" | "}" | "|}" => {
                self.depth -= 1;
                // A construct left open inside the closed group ends with it.
                while let Some(c) = self.ctx.last() {
                    let d = match c {
                        Ctx::Binder { depth, .. } | Ctx::Match { depth, .. } => *depth,
                    };
                    if d > self.depth {
                        self.ctx.pop();
                    } else {
                        break;
                    }
                }
                return i + 1;
            }
            "?" => {
                // Ltac pattern variables and evars: `?x`; but `rewrite ?foo` repeats foo.
                if self.kind_of(i + 1) == Some(TokenKind::Ident)
                    && self.tokens[i].end == self.tokens[i + 1].start
                {
                    let rewriting = self
                        .tactic
                        .is_some_and(|t| t.contains("rewrite") || t == "autorewrite");
                    if !rewriting {
                        let name = self.text_of(i + 1);
                        self.bind(name);
                        return i + 2;
                    }
                }
                return i + 1;
            }
            "%" => {
                // A scope delimiter: `x%nat`.
                if self.kind_of(i + 1) == Some(TokenKind::Ident) {
                    return i + 2;
                }
                return i + 1;
            }
            "eval" => {
                // `eval simpl in x`: the reduction's name.
                return i + 2;
            }
            _ => {}
        }
        if kind == Some(TokenKind::Ident) {
            // `x.(f)` and `x.1` project; the projection is still a reference.
            self.reference(i);
        }
        i + 1
    }

    /// Whether the innermost construct is a match opened at the current depth.
    fn match_at_depth(&self) -> bool {
        matches!(self.ctx.last(), Some(Ctx::Match { depth, .. }) if *depth == self.depth)
    }

    fn set_binder_state(&mut self, new: BinderState) {
        if let Some(Ctx::Binder { state, .. }) = self.ctx.last_mut() {
            *state = new;
        }
    }

    fn set_match_pattern(&mut self, value: bool) {
        if let Some(Ctx::Match { pattern, .. }) = self.ctx.last_mut() {
            *pattern = value;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::extract::coq::lexer::lex;

    fn run(text: &str, mode: Mode) -> (Vec<String>, Vec<String>) {
        let lx = lex(text);
        let mut out = Scan::default();
        for s in &lx.sentences {
            scan(&lx.tokens[s.tokens.clone()], text, mode, &mut out);
        }
        let free: Vec<String> = out
            .free_refs(&HashSet::new())
            .into_iter()
            .map(|r| r.name)
            .collect();
        let mut bound: Vec<String> = out.bound.into_iter().collect();
        bound.sort();
        (free, bound)
    }

    #[test]
    fn statement_binders_are_local() {
        let (free, bound) = run(
            "(n m : nat) {A : Type} `{Eq A} (l : list A) : forall k, n + k = plus m k.",
            Mode::Statement,
        );
        assert_eq!(free, ["nat", "Eq", "list", "plus"]);
        assert_eq!(bound, ["A", "k", "l", "m", "n"]);
    }

    #[test]
    fn tactic_names_are_not_references() {
        let (free, _) = run(
            "intros n m H. symmetry. apply symmetry. rewrite Nat.add_comm in H. \
             auto with arith. eauto using le_S. destruct (le_lt_dec n m) as [Hle|Hlt]; \
             [apply foo | exact (bar _ Hlt)]. clear H. f_equal. apply f_equal.",
            Mode::Tactics,
        );
        assert_eq!(
            free,
            [
                "symmetry",
                "Nat.add_comm",
                "le_S",
                "le_lt_dec",
                "foo",
                "bar",
                "f_equal"
            ]
        );
    }

    #[test]
    fn ssreflect_patterns_and_views() {
        let (free, bound) = run(
            "move=> x y /andP [Hx Hy]. rewrite -addnC /foo ?bar //=. apply/eqP. \
             case: n => [|n IH] //. have H2 : P x by apply: baz. exact: qux.",
            Mode::Tactics,
        );
        assert_eq!(
            free,
            ["andP", "addnC", "foo", "bar", "eqP", "P", "baz", "qux"]
        );
        assert!(bound.contains(&"H2".to_string()) && bound.contains(&"IH".to_string()));
    }

    #[test]
    fn term_binders_and_patterns() {
        let (free, bound) = run(
            "fun (x : nat) y => match x with | S p => let q := f p in g q y | O => h end.",
            Mode::Term,
        );
        assert_eq!(free, ["nat", "S", "p", "f", "p", "g", "O", "h"]);
        assert_eq!(bound, ["q", "x", "y"]);
    }

    #[test]
    fn ltac_match_binds_hypotheses() {
        let (free, bound) = run(
            "match goal with | [ H : context [plus ?a 0] |- _ ] => rewrite plus_0 in H end.",
            Mode::Tactics,
        );
        assert_eq!(free, ["plus", "plus_0"]);
        assert_eq!(bound, ["H", "a"]);
    }
}
