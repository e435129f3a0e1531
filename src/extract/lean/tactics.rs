//! Reading tactic proofs for references (the tactic half of [`Walker`]).
//!
//! Takes the token range after a `by`; gives references as `terms.rs` does. A tactic block
//! is laid out by columns as in Lean: a line starting at the block's column starts a new
//! tactic, a deeper one continues it, a shallower one ends the block; `;` and `<;>` also
//! separate tactics. The first name of a tactic is the tactic (never a reference); its
//! arguments are terms, except the names it introduces (`intro x`, `obtain ⟨a, b⟩ := h`,
//! `rcases h with ⟨x, hx⟩`, `cases h with | inl h => ...`, `induction n with | succ n ih
//! => ...`, `set x := e with hx`, `by_cases h : p`, `generalize h : e = x`, `next x =>`,
//! `case tag x =>`), which are bound, and simp-style erasures `simp [-foo]`, which name a
//! lemma the proof does not use. It does not know what each tactic does beyond that.

use super::lexer::Kind;
use super::terms::{Walker, MAX_DEPTH};

/// Tactics that take a tactic sequence after an optional count or `=>`.
const COMBINATORS: &[&str] = &[
    "all_goals",
    "any_goals",
    "classical",
    "fail_if_success",
    "focus",
    "iterate",
    "on_goal",
    "pick_goal",
    "repeat",
    "repeat'",
    "show_term",
    "solve",
    "success_if_fail",
    "try",
    "unhygienic",
    "with_reducible",
    "with_reducible_and_instances",
    "with_unfolding_all",
];

/// Tactics whose arguments are only the names of new hypotheses.
const INTRODUCING: &[&str] = &[
    "by_contra",
    "by_contra!",
    "by_contra'",
    "ext",
    "ext1",
    "funext",
    "intro",
    "intro!",
    "intros",
    "introv",
    "rename_i",
    "rintro",
    "rintros",
];

/// Tactics where `h : e` right after the name names a new hypothesis.
const NAMING_DISCRIMINANT: &[&str] = &[
    "by_cases",
    "cases",
    "cases'",
    "fun_cases",
    "fun_induction",
    "induction",
    "induction'",
    "injection",
    "injections",
    "interval_cases",
    "lift",
    "match",
    "peel",
    "rcases",
    "split_ifs",
    "wlog",
];

/// Tactics taking a simp-style rule list, where `-foo` erases a lemma.
const SIMP_LIKE: &[&str] = &[
    "aesop",
    "dsimp",
    "dsimp?",
    "field_simp",
    "grind",
    "grind?",
    "norm_cast",
    "norm_num",
    "push_cast",
    "simp",
    "simp!",
    "simp?",
    "simp_all",
    "simp_all!",
    "simp_all?",
    "simp_arith",
    "simp_wf",
    "simpa",
    "simpa!",
    "simpa?",
];

impl<'s, 'a> Walker<'s, 'a> {
    /// Reads a tactic block starting at `lo`; returns where it ends (at `hi`, at a line
    /// left of its column, or at a `,` when `cut_comma`, as in `⟨by simp, by omega⟩`).
    pub fn tactic_block(&mut self, lo: usize, hi: usize, cut_comma: bool) -> usize {
        let hi = hi.min(self.src.len());
        if lo >= hi {
            return hi.max(lo);
        }
        if self.depth >= MAX_DEPTH {
            self.flat(lo, hi);
            return hi;
        }
        self.depth += 1;
        let col = self.src.tok(lo).map_or(0, |t| t.col);
        let mut i = lo;
        let stop = loop {
            if i >= hi {
                break hi;
            }
            let Some(t) = self.src.tok(i) else { break hi };
            if i > lo && t.first_on_line && t.col < col {
                break i;
            }
            let s = self.src.text_of(i);
            if cut_comma && s == "," {
                break i;
            }
            if matches!(s, ";" | "<;>") {
                i += 1;
                continue;
            }
            let end = self.tactic_end(i, hi, col, cut_comma);
            self.tactic(i, end);
            i = end.max(i + 1);
        };
        self.depth -= 1;
        stop
    }

    /// Where the tactic starting at `i` ends.
    fn tactic_end(&self, i: usize, hi: usize, col: u32, cut_comma: bool) -> usize {
        let mut k = self.src.skip_group(i, hi);
        while k < hi {
            let s = self.src.text_of(k);
            let new_line = self
                .src
                .tok(k)
                .is_some_and(|t| t.first_on_line && t.col <= col);
            if new_line || matches!(s, ";" | "<;>") || (cut_comma && s == ",") {
                return k;
            }
            k = self.src.skip_group(k, hi);
        }
        hi
    }

    /// Reads one tactic.
    fn tactic(&mut self, lo: usize, hi: usize) {
        if lo >= hi {
            return;
        }
        let s = self.src.text_of(lo);
        match self.src.kind(lo) {
            Some(Kind::Symbol) => match s {
                "·" | "•" | "." => {
                    let r = self.tactic_block(lo + 1, hi, false);
                    if r < hi {
                        self.term(r, hi);
                    }
                }
                "(" => match self.src.closing(lo, hi) {
                    Some(c) => {
                        self.tactic_block(lo + 1, c, false);
                        self.tactic_args(c + 1, hi, false);
                    }
                    None => self.term(lo + 1, hi),
                },
                "|" => self.tactic_alternative(lo, hi, true),
                _ => self.term(lo, hi),
            },
            Some(Kind::Keyword) => match s {
                "open" | "set_option" => {
                    if let Some(k) = self.src.find_at_depth0(lo + 1, hi, &["in"]) {
                        self.tactic_block(k + 1, hi, false);
                    }
                }
                "match" => {
                    let after = self.match_discriminants(lo, hi);
                    self.tactic_alternatives(after, hi, false);
                }
                _ => self.term(lo, hi),
            },
            Some(Kind::Ident) => self.named_tactic(lo, hi),
            _ => self.term(lo, hi),
        }
    }

    /// A tactic starting with its name at `lo`.
    fn named_tactic(&mut self, lo: usize, hi: usize) {
        let name = self.src.text_of(lo);
        let src = self.src;
        if name == "first" {
            let mut start = lo + 1;
            while start < hi {
                if src.is(start, "|") {
                    start += 1;
                    continue;
                }
                let end = src.find_at_depth0(start, hi, &["|"]).unwrap_or(hi);
                self.tactic_block(start, end, false);
                start = end;
            }
        } else if COMBINATORS.contains(&name) {
            let mut j = lo + 1;
            while j < hi && (src.kind(j) == Some(Kind::Number) || src.is(j, "=>")) {
                j += 1;
            }
            self.tactic_block(j, hi, false);
        } else if matches!(name, "case" | "case'" | "next") {
            let arrow = src.find_at_depth0(lo + 1, hi, &["=>"]).unwrap_or(hi);
            let mut j = lo + 1;
            if name != "next" {
                while j < arrow && (src.is_ident(j) || src.is(j, "_")) {
                    j += 1;
                    if src.is(j, "|") {
                        j += 1;
                    } else {
                        break;
                    }
                }
            }
            self.pattern(j, arrow, false);
            self.tactic_block(arrow + 1, hi, false);
        } else if INTRODUCING.contains(&name) {
            self.pattern(lo + 1, hi, false);
        } else if name == "obtain" {
            let k = src.find_at_depth0(lo + 1, hi, &[":=", ":"]).unwrap_or(hi);
            self.pattern(lo + 1, k, false);
            self.term(k + 1, hi);
        } else if matches!(name, "choose" | "choose!") {
            let k = src.find_at_depth0(lo + 1, hi, &["using"]).unwrap_or(hi);
            self.pattern(lo + 1, k, false);
            self.term(k + 1, hi);
        } else if name == "generalize" {
            let mut j = lo + 1;
            if src.is_ident(j) && src.is(j + 1, ":") {
                self.bind(src.text_of(j));
                j += 2;
            }
            match src.find_at_depth0(j, hi, &["="]) {
                Some(eq) => {
                    self.term(j, eq);
                    self.pattern(eq + 1, hi, false);
                }
                None => self.term(j, hi),
            }
        } else if matches!(name, "set" | "set!") {
            if src.is_ident(lo + 1) {
                self.bind(src.text_of(lo + 1));
            }
            self.tactic_args(lo + 2, hi, false);
        } else if NAMING_DISCRIMINANT.contains(&name) {
            let mut j = lo + 1;
            if src.is_ident(j) && src.is(j + 1, ":") {
                self.bind(src.text_of(j));
                j += 2;
            }
            self.tactic_args(j, hi, false);
        } else if matches!(name, "conv" | "conv_lhs" | "conv_rhs") {
            match src.find_at_depth0(lo + 1, hi, &["=>"]) {
                Some(a) => {
                    self.tactic_args(lo + 1, a, false);
                    self.tactic_block(a + 1, hi, false);
                }
                None => self.tactic_args(lo + 1, hi, false),
            }
        } else {
            self.tactic_args(lo + 1, hi, SIMP_LIKE.contains(&name));
        }
    }

    /// The arguments of a tactic: terms, with `with` (new names or alternatives), `at` and
    /// `generalizing` (existing hypotheses), and rule lists `[a, ← b, -c]`.
    fn tactic_args(&mut self, lo: usize, hi: usize, simp_like: bool) {
        let src = self.src;
        let mut i = lo;
        if simp_like {
            // Configuration written `simp +arith -zeta`.
            while i + 1 < hi
                && matches!(src.text_of(i), "+" | "-")
                && src.is_ident(i + 1)
                && src.glued_to_prev(i + 1)
            {
                i += 2;
            }
        }
        while i < hi {
            match src.text_of(i) {
                "with" if src.kind(i) == Some(Kind::Keyword) => {
                    if src.is(i + 1, "|") {
                        self.tactic_alternatives(i + 1, hi, true);
                        return;
                    }
                    let k = src
                        .find_at_depth0(i + 1, hi, &["using", "generalizing"])
                        .unwrap_or(hi);
                    self.pattern(i + 1, k, false);
                    i = k;
                }
                "at" | "generalizing" if src.kind(i) == Some(Kind::Keyword) => {
                    i += 1;
                    while i < hi && (src.is_ident(i) || matches!(src.text_of(i), "⊢" | "*" | "|-"))
                    {
                        i += 1;
                    }
                }
                "[" => match src.closing(i, hi) {
                    Some(c) => {
                        self.rule_list(i + 1, c, simp_like);
                        i = c + 1;
                    }
                    None => i += 1,
                },
                _ => i = self.term_step(i, hi).max(i + 1),
            }
        }
    }

    /// `[foo, ← bar, -baz, *]`: each rule is a term; an erased one (`-baz`, when
    /// `erasable`) is not a reference.
    fn rule_list(&mut self, lo: usize, hi: usize, erasable: bool) {
        self.brackets += 1;
        let mut start = lo;
        while start < hi {
            let end = self.src.find_at_depth0(start, hi, &[","]).unwrap_or(hi);
            let mut a = start;
            let erased = erasable && self.src.is(a, "-");
            while a < end && matches!(self.src.text_of(a), "←" | "<-" | "↑" | "↓" | "=" | "*")
            {
                a += 1;
            }
            if !erased {
                self.term(a, end);
            }
            start = end + 1;
        }
        self.brackets -= 1;
    }

    /// Alternatives `| tag x y => tactics` (or `| pattern => tactics` after a tactic
    /// `match`, when `tags` is false).
    fn tactic_alternatives(&mut self, lo: usize, hi: usize, tags: bool) {
        let src = self.src;
        let first_on_line = src.tok(lo).is_some_and(|t| t.first_on_line);
        let mut starts = Vec::new();
        let mut k = lo;
        while k < hi {
            if src.is(k, "|")
                && (k == lo || !first_on_line || src.tok(k).is_some_and(|t| t.first_on_line))
            {
                starts.push(k);
            }
            k = src.skip_group(k, hi);
        }
        if starts.first() != Some(&lo) {
            self.term(lo, starts.first().copied().unwrap_or(hi));
        }
        for (n, &a) in starts.iter().enumerate() {
            let b = starts.get(n + 1).copied().unwrap_or(hi);
            self.tactic_alternative(a, b, tags);
        }
    }

    /// One alternative starting at its `|`.
    fn tactic_alternative(&mut self, lo: usize, hi: usize, tags: bool) {
        match self.src.find_at_depth0(lo + 1, hi, &["=>"]) {
            Some(arrow) => {
                // `| succ n ih =>` names a constructor and its new hypotheses; anything
                // else (`| j + 1 =>`, from a tactic `match` laid out at the block's
                // column) is a pattern.
                let src = self.src;
                let tag_form = tags && (lo + 1..arrow).all(|t| src.is_ident(t) || src.is(t, "@"));
                if tag_form {
                    let mut j = lo + 1;
                    if src.is(j, "@") {
                        j += 1;
                    }
                    self.pattern(j + 1, arrow, false);
                } else {
                    self.pattern(lo + 1, arrow, true);
                }
                self.tactic_block(arrow + 1, hi, false);
            }
            None => self.term(lo + 1, hi),
        }
    }
}
