//! Names in terms: binders of `forall`/`fun`/`exists`/`let`/`fix`, match patterns, and
//! the references left over. Part of the scanner of `mod.rs`; tactic structure is read there.

use super::vocabulary::{binds_parenthesised, is_keyword};
use super::{BinderEnd, BinderState, Ctx, Scanner};
use crate::extract::coq::lexer::TokenKind;

impl<'a> Scanner<'a> {
    pub(super) fn term_step(&mut self, i: usize) -> usize {
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
    pub(super) fn match_at_depth(&self) -> bool {
        matches!(self.ctx.last(), Some(Ctx::Match { depth, .. }) if *depth == self.depth)
    }

    pub(super) fn set_binder_state(&mut self, new: BinderState) {
        if let Some(Ctx::Binder { state, .. }) = self.ctx.last_mut() {
            *state = new;
        }
    }

    pub(super) fn set_match_pattern(&mut self, value: bool) {
        if let Some(Ctx::Match { pattern, .. }) = self.ctx.last_mut() {
            *pattern = value;
        }
    }
}
