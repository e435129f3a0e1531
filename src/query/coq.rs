//! Coq goal displays.
//!
//! Takes the text of a coqtop / Proof General / CoqIDE goal panel; gives its goals. Read
//! line by line: counts (`2 goals`, `1 subgoal`, `1 focused goal (shelved: 1)`) are
//! skipped; hypotheses (`n, m : nat`, `H : …`, let-bound `x := 3 : nat`, wrapped onto
//! indented lines) come before the bar (four or more `=`, or CoqIDE's `____(1/2)`); the
//! conclusion follows it up to a blank line. `goal 2 is:` / `subgoal 2 (ID 13) is:` starts
//! a later goal, which coqtop prints as a conclusion alone; one that does have a bar is
//! read in full. A bar straight after a conclusion starts a goal without hypotheses
//! (CoqIDE prints later goals that way).

use super::binders::normalize;
use super::display::{hypotheses_from_lines, indent};
use super::goal::Goal;

/// True for a bar line: `====…` or `____…` (at least four), optionally numbered `(1/2)`.
fn is_bar(line: &str) -> bool {
    for bar in ['=', '_'] {
        let rest = line.trim_start_matches(bar);
        if line.len() - rest.len() >= 4 {
            let rest = rest.trim();
            return rest.is_empty() || is_numbering(rest);
        }
    }
    false
}

/// `(1/2)` or `(1 / 2)`.
fn is_numbering(text: &str) -> bool {
    let Some(inner) = text.strip_prefix('(').and_then(|t| t.strip_suffix(')')) else {
        return false;
    };
    let Some((a, b)) = inner.split_once('/') else {
        return false;
    };
    let digits = |s: &str| {
        let s = s.trim();
        !s.is_empty() && s.bytes().all(|c| c.is_ascii_digit())
    };
    digits(a) && digits(b)
}

/// True when some line of `text` is a Coq bar.
pub(crate) fn looks_like(text: &str) -> bool {
    text.lines().any(|l| is_bar(l.trim()))
}

/// `2 goals`, `1 subgoal`, `3 focused goals (shelved: 1)`, `1 goal (ID 12)`.
fn is_count(line: &str) -> bool {
    let rest = line.trim_start_matches(|c: char| c.is_ascii_digit());
    if rest.len() == line.len() || line.ends_with("is:") {
        return false;
    }
    let rest = rest.trim_start();
    ["goal", "subgoal", "focused goal", "focused subgoal"]
        .iter()
        .any(|w| rest.starts_with(w))
}

/// `goal 2 is:`, `subgoal 2 is:`, `goal 1 (ID 12) is:`.
fn is_goal_is(line: &str) -> bool {
    let Some(rest) = line
        .strip_prefix("goal ")
        .or_else(|| line.strip_prefix("subgoal "))
    else {
        return false;
    };
    rest.starts_with(|c: char| c.is_ascii_digit()) && rest.ends_with("is:")
}

/// Lines printed around goals that hold none.
fn is_remark(line: &str) -> bool {
    line.starts_with("(shelved")
        || line.starts_with("(dependent evars")
        || is_numbering(line)
        || line.starts_with("Focus next goal")
        || line.starts_with("No more")
        || line.starts_with("This subproof is complete")
        || line.starts_with("Proof completed")
}

#[derive(PartialEq, Eq)]
enum Phase {
    /// Before the bar: lines may be hypotheses, or a bar-less goal's conclusion.
    Hypotheses,
    Conclusion,
}

struct Builder<'a> {
    goals: Vec<Goal>,
    phase: Phase,
    lines: Vec<(usize, &'a str)>,
    hypotheses: Vec<super::goal::GoalHypothesis>,
    conclusion: String,
}

impl<'a> Builder<'a> {
    fn end_goal(&mut self) {
        let (hypotheses, conclusion) = match self.phase {
            // No bar: `goal 2 is:` followed by the conclusion alone.
            Phase::Hypotheses => {
                let joined: Vec<&str> = self.lines.iter().map(|(_, l)| *l).collect();
                (Vec::new(), normalize(&joined.join(" ")))
            }
            Phase::Conclusion => (
                std::mem::take(&mut self.hypotheses),
                normalize(&self.conclusion),
            ),
        };
        self.lines.clear();
        self.conclusion.clear();
        self.phase = Phase::Hypotheses;
        if !hypotheses.is_empty() || !conclusion.is_empty() {
            self.goals.push(Goal {
                case: None,
                hypotheses,
                conclusion,
                bound_names: Vec::new(),
            });
        }
    }

    fn bar(&mut self) {
        if self.phase == Phase::Conclusion {
            self.end_goal();
        }
        self.hypotheses = hypotheses_from_lines(&self.lines);
        self.lines.clear();
        self.phase = Phase::Conclusion;
    }
}

/// The goals of a Coq display.
pub(crate) fn parse(text: &str) -> Vec<Goal> {
    let mut b = Builder {
        goals: Vec::new(),
        phase: Phase::Hypotheses,
        lines: Vec::new(),
        hypotheses: Vec::new(),
        conclusion: String::new(),
    };
    for line in text.lines() {
        let t = line.trim();
        if t.is_empty() {
            if b.phase == Phase::Conclusion && !b.conclusion.is_empty() {
                b.end_goal();
            }
            continue;
        }
        if is_bar(t) {
            b.bar();
            continue;
        }
        if is_goal_is(t) || is_count(t) {
            b.end_goal();
            continue;
        }
        if is_remark(t) {
            continue;
        }
        match b.phase {
            Phase::Conclusion => {
                b.conclusion.push(' ');
                b.conclusion.push_str(t);
            }
            Phase::Hypotheses => b.lines.push((indent(line), t)),
        }
    }
    b.end_goal();
    b.goals
}

#[cfg(test)]
mod tests {
    use super::*;

    // Displays written as Coq 8.16 coqtop, Proof General and CoqIDE print them, from
    // memory, in our own scenarios.

    #[test]
    fn coqtop_display_with_later_goals() {
        let goals = parse(
            "2 goals\n\
             \x20 \n\
             \x20 q : queue\n\
             \x20 j, k : job\n\
             \x20 H : In j (jobs q)\n\
             \x20 ============================\n\
             \x20 In j (jobs (enqueue k q))\n\
             \n\
             goal 2 is:\n\
             \x20length (jobs (enqueue k q)) = S (length (jobs q))",
        );
        assert_eq!(goals.len(), 2);
        let g = &goals[0];
        assert_eq!(g.hypotheses.len(), 3);
        assert_eq!(g.hypotheses[1].names, ["j", "k"]);
        assert_eq!(g.hypotheses[1].ty, "job");
        assert_eq!(g.conclusion, "In j (jobs (enqueue k q))");
        assert!(goals[1].hypotheses.is_empty());
        assert_eq!(
            goals[1].conclusion,
            "length (jobs (enqueue k q)) = S (length (jobs q))"
        );
    }

    #[test]
    fn let_bound_hypotheses_and_wrapped_lines() {
        let goals = parse(
            "1 subgoal\n\
             \n\
             \x20 l : ledger\n\
             \x20 fee := 3 : nat\n\
             \x20 Hbal : forall a : account,\n\
             \x20          balance l a >= fee\n\
             \x20 ============================\n\
             \x20 total (post (debit fee) l) =\n\
             \x20 total l - fee * length (accounts l)\n",
        );
        let g = &goals[0];
        assert_eq!(g.hypotheses.len(), 3);
        assert_eq!(g.hypotheses[1].names, ["fee"]);
        assert_eq!(g.hypotheses[1].value.as_deref(), Some("3"));
        assert_eq!(g.hypotheses[1].ty, "nat");
        assert_eq!(g.hypotheses[2].ty, "forall a : account, balance l a >= fee");
        assert_eq!(
            g.conclusion,
            "total (post (debit fee) l) = total l - fee * length (accounts l)"
        );
    }

    #[test]
    fn coqide_numbered_bars() {
        let goals = parse(
            "2 subgoals\n\
             b : buffer\n\
             Hfull : full b = false\n\
             ______________________________________(1/2)\n\
             size (push b 0) = S (size b)\n\
             ______________________________________(2/2)\n\
             size b <= capacity b\n",
        );
        assert_eq!(goals.len(), 2);
        assert_eq!(goals[0].hypotheses.len(), 2);
        assert_eq!(goals[1].conclusion, "size b <= capacity b");
        assert!(goals[1].hypotheses.is_empty());
    }

    #[test]
    fn goal_ids_and_spaced_numbering() {
        let goals = parse(
            "goal 1 (ID 12) is:\n\
             \x20 n : nat\n\
             \x20 ============================ (1 / 2)\n\
             \x20 n + 0 = n\n\
             \n\
             subgoal 2 (ID 13) is:\n\
             \x20 0 + 0 = 0\n",
        );
        assert_eq!(goals.len(), 2);
        assert_eq!(goals[0].hypotheses[0].names, ["n"]);
        assert_eq!(goals[1].conclusion, "0 + 0 = 0");
    }

    #[test]
    fn bar_detection() {
        assert!(is_bar("===="));
        assert!(is_bar("============================"));
        assert!(is_bar("____(1/2)"));
        assert!(!is_bar("==="));
        assert!(!is_bar("==== x"));
        assert!(is_count("1 focused goal (shelved: 1)"));
        assert!(!is_count("1 + 1 = 2"));
        assert!(is_goal_is("subgoal 3 is:"));
    }
}
