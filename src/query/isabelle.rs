//! Isabelle goal displays.
//!
//! Takes the text of an Isabelle/jEdit output panel; gives one goal per numbered subgoal.
//! `proof (prove)` lines are skipped; facts after `using this:` become anonymous
//! hypotheses of every subgoal; each ` N. ` line starts a subgoal, continued on the lines
//! below. In a subgoal, `⋀x y.` (or `!!x y.`) gives a hypothesis naming the bound
//! variables, each premise before a top-level `⟹` (or `==>`) an anonymous hypothesis
//! (`⟦A; B⟧ ⟹ C` gives two), and what is left is the conclusion.

use super::binders::{normalize, Lexed};
use super::display::indent;
use super::goal::{Goal, GoalHypothesis};
use crate::tokens::LexemeKind;

/// `goal (2 subgoals):`, `goal (1 subgoal):`, `goal:`.
fn is_goal_header(line: &str) -> bool {
    line == "goal:"
        || (line.starts_with("goal (") && line.ends_with("):") && line.contains("subgoal"))
}

/// The text after a subgoal number: ` 1. A ⟹ B` gives `A ⟹ B`.
fn numbered(line: &str) -> Option<&str> {
    let rest = line.trim_start_matches(|c: char| c.is_ascii_digit());
    if rest.len() == line.len() {
        return None;
    }
    let rest = rest.strip_prefix('.')?;
    (rest.is_empty() || rest.starts_with(char::is_whitespace)).then(|| rest.trim())
}

/// True when `text` starts like an Isabelle display.
pub(crate) fn looks_like(text: &str) -> bool {
    let mut lines = text.lines().map(str::trim).filter(|l| !l.is_empty());
    let Some(first) = lines.next() else {
        return false;
    };
    first.starts_with("proof (")
        || first == "using this:"
        || is_goal_header(first)
        || (numbered(first).is_some() && first.starts_with("1."))
}

/// The goals of an Isabelle display.
pub(crate) fn parse(text: &str) -> Vec<Goal> {
    #[derive(PartialEq)]
    enum Mode {
        Start,
        Facts,
        Subgoals,
    }
    let mut mode = Mode::Start;
    let mut facts: Vec<String> = Vec::new();
    let mut fact_indent = usize::MAX;
    let mut subgoals: Vec<String> = Vec::new();
    for line in text.lines() {
        let t = line.trim();
        if t.is_empty() || t.starts_with("proof (") || t.starts_with("No subgoals") {
            continue;
        }
        if t == "using this:" {
            mode = Mode::Facts;
            continue;
        }
        if is_goal_header(t) {
            mode = Mode::Subgoals;
            continue;
        }
        if mode != Mode::Facts {
            if let Some(rest) = numbered(t) {
                subgoals.push(rest.to_string());
                mode = Mode::Subgoals;
                continue;
            }
        }
        match mode {
            Mode::Facts => {
                let ind = indent(line);
                match facts.last_mut() {
                    Some(fact) if ind > fact_indent => {
                        fact.push(' ');
                        fact.push_str(t);
                    }
                    _ => {
                        fact_indent = fact_indent.min(ind);
                        facts.push(t.to_string());
                    }
                }
            }
            Mode::Start | Mode::Subgoals => match subgoals.last_mut() {
                Some(s) => {
                    s.push(' ');
                    s.push_str(t);
                }
                None => subgoals.push(t.to_string()),
            },
        }
    }
    let facts: Vec<GoalHypothesis> = facts
        .iter()
        .map(|f| GoalHypothesis {
            names: Vec::new(),
            ty: normalize(f),
            value: None,
        })
        .collect();
    subgoals
        .iter()
        .map(|s| {
            let mut goal = subgoal(s);
            goal.hypotheses.splice(0..0, facts.iter().cloned());
            goal
        })
        .collect()
}

fn is_implication(l: &crate::tokens::Lexeme<'_>) -> bool {
    l.kind == LexemeKind::Symbol && matches!(l.text, "⟹" | "==>")
}

/// One subgoal: bound variables, premises and conclusion.
fn subgoal(text: &str) -> Goal {
    let lexed = Lexed::new(text);
    let n = lexed.len();
    let mut hypotheses = Vec::new();
    let mut i = 0;
    loop {
        if lexed.is(i, "⋀") || lexed.is(i, "!!") {
            let mut j = i + 1;
            let mut names = Vec::new();
            while lexed.is_local_name(j) {
                names.push(lexed.lx[j].text.to_string());
                j += 1;
            }
            if names.is_empty() || !lexed.is(j, ".") {
                break;
            }
            hypotheses.push(GoalHypothesis {
                names,
                ty: String::new(),
                value: None,
            });
            i = j + 1;
            continue;
        }
        let Some(arrow) = lexed.find_top_level(i, n, is_implication) else {
            break;
        };
        // `⟦A; B⟧ ⟹ C`: two premises.
        let bracketed = lexed.is(i, "⟦") && lexed.close_of(i) == Some(arrow.wrapping_sub(1));
        if bracketed {
            let close = arrow - 1;
            let mut from = i + 1;
            while from < close {
                let to = lexed
                    .find_top_level(from, close, |l| {
                        l.kind == LexemeKind::Punctuation && l.text == ";"
                    })
                    .unwrap_or(close);
                push_premise(&mut hypotheses, lexed.slice(from, to));
                from = to + 1;
            }
        } else {
            push_premise(&mut hypotheses, lexed.slice(i, arrow));
        }
        i = arrow + 1;
    }
    Goal {
        case: None,
        hypotheses,
        conclusion: normalize(lexed.slice(i, n)),
        bound_names: Vec::new(),
    }
}

fn push_premise(hypotheses: &mut Vec<GoalHypothesis>, text: &str) {
    let ty = normalize(text);
    if !ty.is_empty() {
        hypotheses.push(GoalHypothesis {
            names: Vec::new(),
            ty,
            value: None,
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Displays written as Isabelle2023/jEdit prints them, from memory, in our scenarios.

    #[test]
    fn numbered_subgoals_with_bound_variables_and_premises() {
        let goals = parse(
            "proof (prove)\n\
             goal (2 subgoals):\n\
             \x201. ⋀b x. ¬ full b ⟹ size (push b x) = Suc (size b)\n\
             \x202. ⋀b. size b ≤ capacity b ⟹\n\
             \x20      size (pop b) ≤ capacity b",
        );
        assert_eq!(goals.len(), 2);
        let g = &goals[0];
        assert_eq!(g.hypotheses[0].names, ["b", "x"]);
        assert_eq!(g.hypotheses[1].ty, "¬ full b");
        assert_eq!(g.conclusion, "size (push b x) = Suc (size b)");
        assert_eq!(goals[1].conclusion, "size (pop b) ≤ capacity b");
    }

    #[test]
    fn bracketed_premises_and_facts() {
        let goals = parse(
            "proof (prove)\n\
             using this:\n\
             \x20 balanced l\n\
             goal (1 subgoal):\n\
             \x201. ⟦balanced l; valid e⟧ ⟹ total (post e l) = total l",
        );
        let g = &goals[0];
        let tys: Vec<&str> = g.hypotheses.iter().map(|h| h.ty.as_str()).collect();
        assert_eq!(tys, ["balanced l", "balanced l", "valid e"]);
        assert_eq!(g.conclusion, "total (post e l) = total l");
    }

    #[test]
    fn ascii_syntax_and_nested_binders() {
        let g = subgoal("!!q. q ~= [] ==> !!j. j : set q ==> deadline j >= now");
        assert_eq!(g.hypotheses.len(), 4);
        assert_eq!(g.hypotheses[2].names, ["j"]);
        assert_eq!(g.conclusion, "deadline j >= now");
    }

    #[test]
    fn detection() {
        assert!(looks_like("goal (1 subgoal):\n 1. True"));
        assert!(looks_like(" 1. A ⟹ A"));
        assert!(!looks_like("1 goal\n====\nTrue"));
    }
}
