//! What Lean and Coq goal displays share: hypothesis lines and their continuations.
//!
//! Takes the lines of a display's hypothesis part; gives [`GoalHypothesis`]es. A line that
//! starts with names and a colon (`x y : Nat`, `n, m : nat`, `inst✝ : Foo α`, Coq's
//! `x := 3 : nat`) at or left of the first hypothesis' indentation starts a hypothesis;
//! any other line continues the one before (both systems indent a wrapped type).

use super::binders::{normalize, Lexed};
use super::goal::GoalHypothesis;
use crate::tokens::identifiers::{is_identifier_continue, is_identifier_start, is_superscript};
use crate::tokens::LexemeKind;

/// Leading white space, in characters.
pub(crate) fn indent(line: &str) -> usize {
    line.chars().take_while(|c| c.is_whitespace()).count()
}

/// Byte length of the hypothesis name at the start of `text` (`h'`, `inst✝¹`, `IHn`), or 0.
fn name_len(text: &str) -> usize {
    let mut chars = text.char_indices();
    match chars.next() {
        Some((_, c)) if is_identifier_start(c) => {}
        _ => return 0,
    }
    for (i, c) in chars {
        if !(is_identifier_continue(c) || c == '✝' || is_superscript(c)) {
            return i;
        }
    }
    text.len()
}

/// The names of a hypothesis line and the rest of it from its `:` or `:=` on, or `None`
/// when the line does not start like a hypothesis.
pub(crate) fn split_hypothesis_line(line: &str) -> Option<(Vec<String>, &str)> {
    let mut names = Vec::new();
    let mut rest = line.trim_start();
    loop {
        let len = name_len(rest);
        if len == 0 {
            return None;
        }
        names.push(rest[..len].to_string());
        let after_name = &rest[len..];
        let after = after_name.trim_start();
        if after.starts_with("::") {
            return None;
        }
        if after.starts_with(':') {
            return Some((names, after));
        }
        if let Some(more) = after.strip_prefix(',') {
            rest = more.trim_start();
            continue;
        }
        if after.len() < after_name.len() && !after.is_empty() {
            rest = after;
            continue;
        }
        return None;
    }
}

/// The hypotheses of `lines` (each with its indentation, already trimmed).
pub(crate) fn hypotheses_from_lines(lines: &[(usize, &str)]) -> Vec<GoalHypothesis> {
    let mut hyps = Vec::new();
    let mut current: Option<(Vec<String>, String)> = None;
    let base = lines.first().map_or(0, |(i, _)| *i);
    for &(ind, line) in lines {
        let start = if ind <= base {
            split_hypothesis_line(line)
        } else {
            None
        };
        match (start, &mut current) {
            (Some((names, body)), _) => {
                if let Some((n, b)) = current.take() {
                    hyps.push(finish_hypothesis(n, &b));
                }
                current = Some((names, body.to_string()));
            }
            (None, Some((_, body))) => {
                body.push(' ');
                body.push_str(line);
            }
            (None, None) => {
                // Text before any named hypothesis: keep it as an anonymous premise.
                current = Some((Vec::new(), format!(": {line}")));
            }
        }
    }
    if let Some((n, b)) = current {
        hyps.push(finish_hypothesis(n, &b));
    }
    hyps
}

fn is_punct(text: &'static str) -> impl Fn(&crate::tokens::Lexeme<'_>) -> bool {
    move |l| l.kind == LexemeKind::Punctuation && l.text == text
}

/// A hypothesis from its names and the text from its `:` (Lean `: T` or `: T := v`) or
/// `:=` (Coq `:= v : T`) on.
fn finish_hypothesis(names: Vec<String>, body: &str) -> GoalHypothesis {
    let lexed = Lexed::new(body);
    let n = lexed.len();
    let starts_with = |text: &str| {
        lexed
            .lx
            .first()
            .is_some_and(|l| l.kind == LexemeKind::Punctuation && l.text == text)
    };
    let (ty, value) = if starts_with(":=") {
        match lexed.find_top_level(1, n, is_punct(":")) {
            Some(c) => (lexed.slice(c + 1, n), Some(lexed.slice(1, c))),
            None => ("", Some(lexed.slice(1, n))),
        }
    } else if starts_with(":") {
        match lexed.find_top_level(1, n, is_punct(":=")) {
            Some(d) => (lexed.slice(1, d), Some(lexed.slice(d + 1, n))),
            None => (lexed.slice(1, n), None),
        }
    } else {
        (lexed.slice(0, n), None)
    };
    GoalHypothesis {
        names,
        ty: normalize(ty),
        value: value.map(normalize),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hypothesis_lines_of_both_systems() {
        let (names, body) = split_hypothesis_line("x y : Nat").unwrap();
        assert_eq!(
            (names, body),
            (vec!["x".to_string(), "y".to_string()], ": Nat")
        );
        let (names, _) = split_hypothesis_line("n, m : nat").unwrap();
        assert_eq!(names, ["n", "m"]);
        let (names, _) = split_hypothesis_line("inst✝¹ : Monoid α").unwrap();
        assert_eq!(names, ["inst✝¹"]);
        let (names, body) = split_hypothesis_line("x := 3 : nat").unwrap();
        assert_eq!((names, body), (vec!["x".to_string()], ":= 3 : nat"));
        assert!(split_hypothesis_line("size b ≤ capacity b").is_none());
        assert!(split_hypothesis_line("(x : T)").is_none());
        assert!(split_hypothesis_line("a :: l = l'").is_none());
        assert!(split_hypothesis_line("Nat.succ n : T").is_none());
    }

    #[test]
    fn continuation_lines_join_the_hypothesis_above() {
        let lines = [
            (0, "b : Buffer"),
            (0, "h :"),
            (2, "∀ (i : ℕ),"),
            (4, "i < b.size → b.get i ≠ none"),
            (0, "x : ℕ := 3"),
            (0, "y := 4 : nat"),
        ];
        let hyps = hypotheses_from_lines(&lines);
        assert_eq!(hyps.len(), 4);
        assert_eq!(hyps[1].ty, "∀ (i : ℕ), i < b.size → b.get i ≠ none");
        assert_eq!(
            (hyps[2].ty.as_str(), hyps[2].value.as_deref()),
            ("ℕ", Some("3"))
        );
        assert_eq!(
            (hyps[3].ty.as_str(), hyps[3].value.as_deref()),
            ("nat", Some("4"))
        );
    }
}
