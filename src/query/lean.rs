//! Lean 4 goal displays.
//!
//! Takes the text of an infoview panel or an "unsolved goals" message; gives its goals.
//! Read line by line: `case tag` starts a goal; `names : type` lines are hypotheses
//! (wrapped types continue on indented lines); `⊢ conclusion` ends them, its wrapped lines
//! indented below it; a blank line, a new `case`, a second `⊢`, or a hypothesis line back at
//! the turnstile's indentation starts the next goal. Headers Lean or the editor print
//! around goals (`2 goals`, `unsolved goals`, `Tactic state`) are skipped. A one-line paste
//! `h : a ≤ b ⊢ a < b + 1` is split at its `⊢`.

use super::binders::normalize;
use super::display::{hypotheses_from_lines, indent, split_hypothesis_line};
use super::goal::Goal;

#[derive(Default)]
struct Builder<'a> {
    goals: Vec<Goal>,
    case: Option<String>,
    hypothesis_lines: Vec<(usize, &'a str)>,
    conclusion: Option<String>,
    turnstile_indent: usize,
}

impl<'a> Builder<'a> {
    fn end_goal(&mut self) {
        let hypotheses = hypotheses_from_lines(&self.hypothesis_lines);
        self.hypothesis_lines.clear();
        let conclusion = self
            .conclusion
            .take()
            .map(|c| normalize(&c))
            .unwrap_or_default();
        let case = self.case.take();
        if case.is_some() || !hypotheses.is_empty() || !conclusion.is_empty() {
            self.goals.push(Goal {
                case,
                hypotheses,
                conclusion,
                bound_names: Vec::new(),
            });
        }
    }

    fn turnstile(&mut self, rest: &str, ind: usize) {
        if self.conclusion.is_some() {
            self.end_goal();
        }
        self.conclusion = Some(rest.trim().to_string());
        self.turnstile_indent = ind;
    }

    fn line(&mut self, line: &'a str, ind: usize) {
        if let Some(conclusion) = &mut self.conclusion {
            let next_goal = ind <= self.turnstile_indent && split_hypothesis_line(line).is_some();
            if !next_goal {
                conclusion.push(' ');
                conclusion.push_str(line);
                return;
            }
            self.end_goal();
        }
        self.hypothesis_lines.push((ind, line));
    }
}

/// Lines Lean or the editor print around goals.
fn is_header(line: &str) -> bool {
    let lower = line.to_lowercase();
    if lower.ends_with("unsolved goals") || lower == "tactic state" || lower == "expected type" {
        return true;
    }
    if line.starts_with(['▶', '▼']) {
        return true;
    }
    // `1 goal`, `2 goals`.
    let rest = line.trim_start_matches(|c: char| c.is_ascii_digit());
    rest.len() < line.len() && matches!(rest, " goal" | " goals")
}

fn case_tag(line: &str) -> Option<&str> {
    let tag = line.strip_prefix("case")?;
    (tag.starts_with(char::is_whitespace) || tag.is_empty()).then(|| tag.trim())
}

/// The goals of a Lean 4 display.
pub(crate) fn parse(text: &str) -> Vec<Goal> {
    let mut b = Builder::default();
    for line in text.lines() {
        let t = line.trim();
        if t.is_empty() {
            if b.conclusion.is_some() {
                b.end_goal();
            }
            continue;
        }
        if is_header(t) {
            if b.conclusion.is_some() {
                b.end_goal();
            }
            continue;
        }
        let ind = indent(line);
        if let Some(tag) = case_tag(t) {
            b.end_goal();
            b.case = (!tag.is_empty()).then(|| tag.to_string());
            continue;
        }
        if let Some(rest) = t.strip_prefix('⊢') {
            b.turnstile(rest, ind);
            continue;
        }
        if let Some(at) = t.find('⊢') {
            let (before, after) = t.split_at(at);
            b.line(before.trim_end(), ind);
            b.turnstile(&after['⊢'.len_utf8()..], ind);
            continue;
        }
        b.line(t, ind);
    }
    b.end_goal();
    b.goals
}

#[cfg(test)]
mod tests {
    use super::*;

    // Displays written as Lean 4 prints them (infoview and `unsolved goals` messages),
    // from memory, in our own scenarios.

    #[test]
    fn one_goal_with_hypotheses() {
        let goals = parse(
            "b : RingBuffer α\n\
             x : α\n\
             h : ¬b.isFull\n\
             ⊢ (b.push x).size = b.size + 1",
        );
        assert_eq!(goals.len(), 1);
        let g = &goals[0];
        assert_eq!(g.hypotheses.len(), 3);
        assert_eq!(g.hypotheses[0].names, ["b"]);
        assert_eq!(g.hypotheses[0].ty, "RingBuffer α");
        assert_eq!(g.hypotheses[2].ty, "¬b.isFull");
        assert_eq!(g.conclusion, "(b.push x).size = b.size + 1");
        assert_eq!(g.case, None);
    }

    #[test]
    fn several_goals_with_case_tags() {
        let goals = parse(
            "unsolved goals\n\
             case nil\n\
             l : Ledger\n\
             ⊢ (Ledger.post [] l).total = l.total\n\
             \n\
             case cons\n\
             l : Ledger\n\
             e : Entry\n\
             es : List Entry\n\
             ih : (Ledger.post es l).total = l.total + (es.map Entry.amount).sum\n\
             ⊢ (Ledger.post (e :: es) l).total = l.total + ((e :: es).map Entry.amount).sum",
        );
        assert_eq!(goals.len(), 2);
        assert_eq!(goals[0].case.as_deref(), Some("nil"));
        assert_eq!(goals[1].case.as_deref(), Some("cons"));
        assert_eq!(goals[1].hypotheses.len(), 4);
        assert_eq!(goals[1].hypotheses[3].names, ["ih"]);
    }

    #[test]
    fn names_share_a_type_and_inaccessible_names_are_kept() {
        let goals = parse(
            "α : Type u_1\n\
             inst✝ : DecidableEq α\n\
             j k : Job α\n\
             ⊢ (Scheduler.enqueue j (Scheduler.enqueue k s)).length = s.length + 2",
        );
        let h = &goals[0].hypotheses;
        assert_eq!(h[1].names, ["inst✝"]);
        assert_eq!(h[2].names, ["j", "k"]);
    }

    #[test]
    fn wrapped_hypotheses_and_conclusion_continue_on_indented_lines() {
        let goals = parse(
            "s : Scheduler\n\
             hwf :\n  \
               ∀ j ∈ s.queue,\n    \
                 j.deadline ≥ s.clock\n\
             ⊢ ∀ j ∈ (s.tick).queue,\n    \
                 j.deadline ≥ (s.tick).clock",
        );
        let g = &goals[0];
        assert_eq!(g.hypotheses.len(), 2);
        assert_eq!(g.hypotheses[1].ty, "∀ j ∈ s.queue, j.deadline ≥ s.clock");
        assert_eq!(
            g.conclusion,
            "∀ j ∈ (s.tick).queue, j.deadline ≥ (s.tick).clock"
        );
    }

    #[test]
    fn goals_without_case_or_blank_line_are_split_at_the_next_hypothesis() {
        let goals = parse(
            "b : Buffer\n⊢ b.size ≤ b.capacity\nb : Buffer\nh : b.size = 0\n⊢ b.isEmpty\n⊢ True",
        );
        assert_eq!(goals.len(), 3);
        assert_eq!(goals[1].hypotheses.len(), 2);
        assert!(goals[2].hypotheses.is_empty());
    }

    #[test]
    fn let_values_and_headers() {
        let goals = parse(
            "2 goals\n\
             cap : ℕ := 16\n\
             ⊢ cap > 0\n\
             \n\
             ⊢ 16 ≠ 0",
        );
        assert_eq!(goals.len(), 2);
        assert_eq!(goals[0].hypotheses[0].ty, "ℕ");
        assert_eq!(goals[0].hypotheses[0].value.as_deref(), Some("16"));
    }

    #[test]
    fn one_line_paste_is_split_at_the_turnstile() {
        let goals = parse("h : stock.qty item ≤ 3 ⊢ stock.qty item < 4");
        assert_eq!(goals[0].hypotheses[0].names, ["h"]);
        assert_eq!(goals[0].hypotheses[0].ty, "stock.qty item ≤ 3");
        assert_eq!(goals[0].conclusion, "stock.qty item < 4");
    }
}
