//! Binders in terms: bracket matching, binder groups, bound variables, leading `∀`s.
//!
//! Takes one term's text (a hypothesis type, a conclusion, a statement); gives its lexemes
//! with matched brackets, the binder group at a bracket (`(x y : T)`, `[Monoid α]`), the
//! names its binders bind (`∀ x y,`, `fun x =>`, `∃ x,`, `⋀x.`, `{x | …}`), and the
//! hypotheses a leading `∀ (n : ℕ) (h : …),` stands for. Every pass is linear in the
//! lexemes: a bracket's partner is found once, up front, and scans never re-read a group.
//! It does not parse terms beyond that: no precedence, no application structure.

use crate::tokens::{Lexeme, LexemeKind, Tokenizer};

use super::goal::GoalHypothesis;

/// A term's lexemes and, for each opening bracket, the index of its closing one.
pub(crate) struct Lexed<'a> {
    pub(crate) text: &'a str,
    pub(crate) lx: Vec<Lexeme<'a>>,
    /// `close[i]` is the index of the bracket closing the one at `i`, if both match.
    close: Vec<Option<usize>>,
}

fn bracket(lx: &Lexeme<'_>) -> Option<(bool, char)> {
    if !matches!(lx.kind, LexemeKind::Punctuation | LexemeKind::Symbol) {
        return None;
    }
    let mut chars = lx.text.chars();
    let c = chars.next()?;
    if chars.next().is_some() {
        return None;
    }
    match c {
        '(' | '[' | '{' | '⟨' | '⦃' | '⟦' => Some((true, c)),
        ')' => Some((false, '(')),
        ']' => Some((false, '[')),
        '}' => Some((false, '{')),
        '⟩' => Some((false, '⟨')),
        '⦄' => Some((false, '⦃')),
        '⟧' => Some((false, '⟦')),
        _ => None,
    }
}

impl<'a> Lexed<'a> {
    /// Lexes `text` with the standard tokenizer's table and matches its brackets.
    pub(crate) fn new(text: &'a str) -> Lexed<'a> {
        let lx: Vec<Lexeme<'a>> = Tokenizer::standard().lexemes(text).collect();
        let mut close = vec![None; lx.len()];
        let mut stack: Vec<(usize, char)> = Vec::new();
        for (i, l) in lx.iter().enumerate() {
            match bracket(l) {
                Some((true, c)) => stack.push((i, c)),
                Some((false, c)) => {
                    // A closer that matches nothing open is ignored; one that matches an
                    // outer bracket closes the unclosed inner ones too.
                    if let Some(pos) = stack.iter().rposition(|&(_, o)| o == c) {
                        close[stack[pos].0] = Some(i);
                        stack.truncate(pos);
                    }
                }
                None => {}
            }
        }
        Lexed { text, lx, close }
    }

    pub(crate) fn len(&self) -> usize {
        self.lx.len()
    }

    /// The index of the bracket closing the one at `i`.
    pub(crate) fn close_of(&self, i: usize) -> Option<usize> {
        self.close.get(i).copied().flatten()
    }

    /// True when lexeme `i` is punctuation or a symbol written `text`.
    pub(crate) fn is(&self, i: usize, text: &str) -> bool {
        self.lx.get(i).is_some_and(|l| {
            matches!(l.kind, LexemeKind::Punctuation | LexemeKind::Symbol) && l.text == text
        })
    }

    /// True when lexeme `i` is an identifier of one component (a local name).
    pub(crate) fn is_local_name(&self, i: usize) -> bool {
        self.lx
            .get(i)
            .is_some_and(|l| l.kind == LexemeKind::Identifier && !l.text.contains('.'))
    }

    /// The text between lexemes `from` (inclusive) and `to` (exclusive), trimmed.
    pub(crate) fn slice(&self, from: usize, to: usize) -> &'a str {
        let start = self.lx.get(from).map_or(self.text.len(), |l| l.start);
        let end = self.lx.get(to).map_or(self.text.len(), |l| l.start);
        self.text[start..end.max(start)].trim()
    }

    /// The first index in `from..to` whose lexeme satisfies `pred`, outside any bracket
    /// group that starts in that range.
    pub(crate) fn find_top_level(
        &self,
        from: usize,
        to: usize,
        pred: impl Fn(&Lexeme<'a>) -> bool,
    ) -> Option<usize> {
        let mut i = from;
        while i < to.min(self.len()) {
            if pred(&self.lx[i]) {
                return Some(i);
            }
            i = match self.close_of(i) {
                Some(k) => k + 1,
                None => i + 1,
            };
        }
        None
    }
}

/// Joins white space runs into single spaces.
pub(crate) fn normalize(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for word in text.split_whitespace() {
        if !out.is_empty() {
            out.push(' ');
        }
        out.push_str(word);
    }
    out
}

fn punct(text: &'static str) -> impl Fn(&Lexeme<'_>) -> bool {
    move |l| l.kind == LexemeKind::Punctuation && l.text == text
}

/// The binder group whose opening bracket is at `open` (`(x y : T)`, `{α : Type}`,
/// `[Monoid α]`, `[inst : Monoid α]`, `⦃x⦄`, `(x : T := v)`), or `None` when the bracket
/// holds something else (`(a + b)`), and the index just past its closing bracket.
pub(crate) fn binder_group(lexed: &Lexed<'_>, open: usize) -> Option<(GoalHypothesis, usize)> {
    let close = lexed.close_of(open)?;
    let bracket = lexed.lx[open].text;
    if !matches!(bracket, "(" | "{" | "[" | "⦃") || close == open + 1 {
        return None;
    }
    let colon = lexed.find_top_level(open + 1, close, punct(":"));
    let hyp = match colon {
        Some(c) => {
            let names_ok = (open + 1..c).all(|i| lexed.is_local_name(i));
            if !names_ok || (c == open + 1 && bracket != "[") {
                return None;
            }
            let names = (open + 1..c)
                .map(|i| lexed.lx[i].text.to_string())
                .collect();
            let (ty, value) = match lexed.find_top_level(c + 1, close, punct(":=")) {
                Some(d) => (
                    lexed.slice(c + 1, d),
                    Some(normalize(lexed.slice(d + 1, close))),
                ),
                None => (lexed.slice(c + 1, close), None),
            };
            GoalHypothesis {
                names,
                ty: normalize(ty),
                value,
            }
        }
        None if bracket == "[" => GoalHypothesis {
            names: Vec::new(),
            ty: normalize(lexed.slice(open + 1, close)),
            value: None,
        },
        None => {
            if !(open + 1..close).all(|i| lexed.is_local_name(i)) {
                return None;
            }
            GoalHypothesis {
                names: (open + 1..close)
                    .map(|i| lexed.lx[i].text.to_string())
                    .collect(),
                ty: String::new(),
                value: None,
            }
        }
    };
    Some((hyp, close + 1))
}

/// True for a lexeme that binds the names after it.
fn is_binder(l: &Lexeme<'_>) -> bool {
    match l.kind {
        LexemeKind::Symbol => matches!(
            l.text,
            "∀" | "∃"
                | "∃!"
                | "⋀"
                | "!!"
                | "∑"
                | "∏"
                | "∑'"
                | "∏'"
                | "⋃"
                | "⋂"
                | "⨆"
                | "⨅"
                | "∫"
                | "Π"
                | "Σ"
        ),
        LexemeKind::Punctuation => l.text == "λ",
        LexemeKind::Identifier => matches!(l.text, "forall" | "exists" | "fun" | "let"),
        LexemeKind::Number => false,
    }
}

/// Appends the names bound inside `text` by `∀ ∃ ∃! λ fun let ⋀ Π Σ` and the big operators
/// (`∑ i ∈ s,`), and by set-builder braces (`{x | p x}`, `{x ∈ s | …}`), in order.
pub(crate) fn bound_names(text: &str, out: &mut Vec<String>) {
    let lexed = Lexed::new(text);
    let n = lexed.len();
    for i in 0..n {
        let l = &lexed.lx[i];
        if is_binder(l) {
            let mut j = i + 1;
            while j < n {
                if lexed.is_local_name(j) {
                    out.push(lexed.lx[j].text.to_string());
                    j += 1;
                } else if let Some(k) = lexed.close_of(j) {
                    group_names(&lexed, j, k, out);
                    j = k + 1;
                } else {
                    break;
                }
            }
        } else if lexed.is(i, "{") && lexed.is_local_name(i + 1) && is_set_builder(&lexed, i) {
            out.push(lexed.lx[i + 1].text.to_string());
        }
    }
}

/// True for set-builder braces at `open`: `{x | …}`, `{x ∈ s | …}`, `{x : T | …}` (the
/// `|` looked for within a few lexemes, so nested braces stay linear).
fn is_set_builder(lexed: &Lexed<'_>, open: usize) -> bool {
    const TYPE_REACH: usize = 64;
    if lexed.is(open + 2, "|") || lexed.is(open + 2, "∈") {
        return true;
    }
    let Some(close) = lexed.close_of(open) else {
        return false;
    };
    lexed.is(open + 2, ":")
        && lexed
            .find_top_level(open + 3, close.min(open + 3 + TYPE_REACH), |l| {
                l.text == "|"
            })
            .is_some()
}

/// The names of the group between brackets `open` and `close`: those before its top-level
/// `:` (`(x y : T)`), or every name when it is a bare list or pattern (`(x y)`, `⟨a, b⟩`).
/// An instance group without a colon (`[Monoid α]`) names nothing. Stops at the first
/// lexeme that is not a name, so a group is never read past its names.
fn group_names(lexed: &Lexed<'_>, open: usize, close: usize, out: &mut Vec<String>) {
    let is_instance = lexed.is(open, "[");
    let is_pattern = lexed.is(open, "⟨");
    let start = out.len();
    let mut j = open + 1;
    while j < close {
        if lexed.is_local_name(j) {
            out.push(lexed.lx[j].text.to_string());
        } else if lexed.is(j, ":") {
            return;
        } else if !(is_pattern && lexed.is(j, ",")) {
            break;
        }
        j += 1;
    }
    if is_instance || j < close {
        // No colon: `[Monoid α]` names no variable, and `(f x)` was not a binder group.
        out.truncate(start);
    }
}

/// The hypotheses that the leading `∀`/`forall` binders of `text` stand for, and the rest
/// of `text` after them: `∀ (b : Buffer) (h : full b), size b = cap` gives `b : Buffer`,
/// `h : full b` and `size b = cap`. `∀ x y : T,` and `∀ x,` are read too. A `∀` whose
/// binders are anything else (`∀ x ∈ s,`) stops the peeling and stays in the text.
pub(crate) fn peel_foralls(text: &str) -> (Vec<GoalHypothesis>, &str) {
    let lexed = Lexed::new(text);
    let n = lexed.len();
    let mut hyps = Vec::new();
    let mut i = 0;
    let mut rest = 0;
    while i < n {
        let l = &lexed.lx[i];
        let is_forall = (l.kind == LexemeKind::Symbol && l.text == "∀")
            || (l.kind == LexemeKind::Identifier && l.text == "forall");
        if !is_forall {
            break;
        }
        let mut group = Vec::new();
        let mut j = i + 1;
        let mut complete = false;
        while j < n {
            if lexed.is(j, ",") {
                complete = !group.is_empty();
                j += 1;
                break;
            }
            if let Some((hyp, next)) = binder_group(&lexed, j) {
                group.push(hyp);
                j = next;
                continue;
            }
            if !lexed.is_local_name(j) {
                break;
            }
            let mut names = Vec::new();
            while lexed.is_local_name(j) {
                names.push(lexed.lx[j].text.to_string());
                j += 1;
            }
            if lexed.is(j, ":") {
                let Some(comma) = lexed.find_top_level(j + 1, n, punct(",")) else {
                    break;
                };
                group.push(GoalHypothesis {
                    names,
                    ty: normalize(lexed.slice(j + 1, comma)),
                    value: None,
                });
                j = comma + 1;
                complete = true;
                break;
            }
            group.push(GoalHypothesis {
                names,
                ty: String::new(),
                value: None,
            });
        }
        if !complete || j >= n {
            break;
        }
        hyps.extend(group);
        i = j;
        rest = lexed.lx[j].start;
    }
    (hyps, text[rest..].trim())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bound(text: &str) -> Vec<String> {
        let mut v = Vec::new();
        bound_names(text, &mut v);
        v
    }

    fn hyp(names: &[&str], ty: &str) -> GoalHypothesis {
        GoalHypothesis {
            names: names.iter().map(|s| s.to_string()).collect(),
            ty: ty.to_string(),
            value: None,
        }
    }

    #[test]
    fn brackets_match_and_stray_closers_are_ignored() {
        let l = Lexed::new("(a [b) c]");
        // `)` closes `(` and the unclosed `[` inside it; `]` then matches nothing.
        assert_eq!(l.close_of(0), Some(4));
        assert_eq!(l.close_of(2), None);
        let l = Lexed::new(") (x)");
        assert_eq!(l.close_of(1), Some(3));
    }

    #[test]
    fn bound_names_of_every_binder() {
        assert_eq!(bound(":= ∀ buf cap, size buf ≤ cap"), ["buf", "cap"]);
        assert_eq!(bound("∀ (job : Job) {q : Queue}, mem job q"), ["job", "q"]);
        assert_eq!(bound("∃ slot, free slot"), ["slot"]);
        assert_eq!(bound("fun acct => balance acct"), ["acct"]);
        assert_eq!(bound("fun ⟨lo, hi⟩ => lo ≤ hi"), ["lo", "hi"]);
        assert_eq!(bound("⋀xs ys. P xs ys"), ["xs", "ys"]);
        assert_eq!(bound("forall (n m : nat), n <= m"), ["n", "m"]);
        assert_eq!(bound("∑ item ∈ stock, price item"), ["item"]);
        assert_eq!(bound("{entry | valid entry}"), ["entry"]);
        assert_eq!(bound("{slot : Slot | free slot}"), ["slot"]);
        assert!(bound("{cfg : Config}").is_empty());
        assert_eq!(bound("∀ [Monoid α] (a : α), a = a"), ["a"]);
        assert!(bound("size (push buf x) ≤ capacity buf").is_empty());
    }

    #[test]
    fn binder_groups() {
        let l = Lexed::new("(b c : Buffer) [Monoid α] {α} (x : ℕ := 3) (a + b) [inst : Ring R]");
        let (h, next) = binder_group(&l, 0).unwrap();
        assert_eq!(h, hyp(&["b", "c"], "Buffer"));
        let (h, next) = binder_group(&l, next).unwrap();
        assert_eq!(h, hyp(&[], "Monoid α"));
        let (h, next) = binder_group(&l, next).unwrap();
        assert_eq!(h, hyp(&["α"], ""));
        let (h, next) = binder_group(&l, next).unwrap();
        assert_eq!(h.value.as_deref(), Some("3"));
        assert!(binder_group(&l, next).is_none());
        let last = l.lx.iter().rposition(|x| x.text == "[").unwrap();
        assert_eq!(binder_group(&l, last).unwrap().0, hyp(&["inst"], "Ring R"));
    }

    #[test]
    fn leading_foralls_become_hypotheses() {
        let (hyps, rest) =
            peel_foralls("∀ (b : Buffer) (h : ¬full b), size (push b x) = size b + 1");
        assert_eq!(hyps, [hyp(&["b"], "Buffer"), hyp(&["h"], "¬full b")]);
        assert_eq!(rest, "size (push b x) = size b + 1");
        let (hyps, rest) = peel_foralls("forall n m : nat, forall k, n + m + k = k + m + n");
        assert_eq!(hyps, [hyp(&["n", "m"], "nat"), hyp(&["k"], "")]);
        assert_eq!(rest, "n + m + k = k + m + n");
        let (hyps, rest) = peel_foralls("∀ x ∈ s, p x");
        assert!(hyps.is_empty());
        assert_eq!(rest, "∀ x ∈ s, p x");
        let (hyps, rest) = peel_foralls("∀ x, ");
        assert!(hyps.is_empty());
        assert_eq!(rest, "∀ x,");
    }

    #[test]
    fn nested_binders_stay_linear() {
        // 20 000 nested groups, closed and unclosed: each is read once.
        let open = "∀ (a : ".repeat(20_000);
        let closed = format!("{open}P{}", ")".repeat(20_000));
        let mut v = Vec::new();
        bound_names(&closed, &mut v);
        assert_eq!(v.len(), 20_000);
        let (hyps, _) = peel_foralls(&closed);
        assert!(hyps.is_empty());
        v.clear();
        bound_names(&open, &mut v);
        assert!(v.is_empty());
        assert!(peel_foralls(&open).0.is_empty());
    }
}
