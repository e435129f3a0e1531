//! The goal-state parser: from text pasted from an editor to goals with hypotheses.
//!
//! Takes one text: a Lean 4, Coq or Isabelle goal display, a plain statement, or a
//! declaration header; gives a [`GoalState`] whose format is detected, never asked for.
//! Detection, in order: an Isabelle header or numbered subgoal first line; a Coq bar
//! (`====`, or CoqIDE's `____(1/2)`); a Lean turnstile `⊢`; a declaration keyword or
//! leading binder group followed by `:`; anything else is a statement. Each format has its
//! own file (`lean.rs`, `coq.rs`, `isabelle.rs`, `statement.rs`).
//!
//! It never panics and is linear in the text: line-based state machines plus the linear
//! lexeme passes of `binders.rs`. The size limit is checked before anything else. It does
//! not tokenize or weigh anything: that is `terms.rs`, with the shared tokenizer.

use super::binders::bound_names;
use super::{coq, isabelle, lean, statement};
use crate::tokens::{LexemeKind, Tokenizer};

/// The default size limit: 256 KiB, far beyond any real goal, small enough to parse in
/// milliseconds.
pub const DEFAULT_MAX_GOAL_BYTES: usize = 256 * 1024;

/// Where the text came from, as detected.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum GoalFormat {
    /// A Lean 4 goal display (`h : a ≤ b` lines, then `⊢ …`).
    Lean,
    /// A Coq goal display (hypotheses, a `====` bar, the conclusion).
    Coq,
    /// An Isabelle goal display (`goal (1 subgoal):`, ` 1. ⋀x. A x ⟹ B x`).
    Isabelle,
    /// A plain proposition: `∀ b : Buffer, size (push b x) ≤ capacity b`.
    Statement,
    /// Binders and a type, with or without the keyword, name and body:
    /// `(l : Ledger) (h : l.balanced) : l.total = 0`, `theorem t (x : T) : P := by …`.
    DeclarationHeader,
}

impl GoalFormat {
    /// Lower-case name used in JSON and on the command line.
    pub fn as_str(self) -> &'static str {
        match self {
            GoalFormat::Lean => "lean",
            GoalFormat::Coq => "coq",
            GoalFormat::Isabelle => "isabelle",
            GoalFormat::Statement => "statement",
            GoalFormat::DeclarationHeader => "declaration_header",
        }
    }
}

/// One hypothesis of a goal: `x y : Nat`, `h : a ≤ b`, Coq's let-bound `x := 3 : nat`,
/// an anonymous premise (Isabelle's `A ⟹ …`, an instance binder `[Monoid α]`).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct GoalHypothesis {
    /// The names it binds, as written (`inst✝`, `IHn`); empty for an anonymous premise.
    pub names: Vec<String>,
    /// Its type, white space normalised; empty when only names are given (`∀ x,`, `⋀x.`).
    pub ty: String,
    /// The value of a let-bound hypothesis (`x : ℕ := 3`, Coq `x := 3 : nat`).
    pub value: Option<String>,
}

/// One goal: what is known and what is to be proved.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Goal {
    /// Lean's `case` tag (`succ`, `inl.h`), when the display gives one.
    pub case: Option<String>,
    /// What is known, in display order (for statements and headers: the binders).
    pub hypotheses: Vec<GoalHypothesis>,
    /// What is to be proved, white space normalised.
    pub conclusion: String,
    /// Variables bound inside the hypotheses' types and the conclusion (`∀ x,`, `fun x =>`,
    /// `∃ x,`, `⋀x.`, `{x | …}`), in order of appearance, repeats kept out.
    pub bound_names: Vec<String>,
}

/// Every goal of the text, in display order, and the format it was read as.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct GoalState {
    /// Never empty when returned by [`parse_goal`].
    pub goals: Vec<Goal>,
    /// The format the text was detected as.
    pub format: GoalFormat,
}

/// Why a text gave no goal to rank premises for.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum GoalError {
    /// The text is empty or white space only.
    #[error(
        "the goal is empty: paste a goal display (the lines ending in `⊢ …`, or around the \
         `====` bar), a statement, or a declaration header"
    )]
    Empty,
    /// The text is longer than the limit; refused before any parsing.
    #[error(
        "the goal is {bytes} bytes, over the limit of {limit} bytes: paste one goal, not a \
         whole file or log"
    )]
    TooLarge {
        /// The text's length.
        bytes: usize,
        /// The limit it is over.
        limit: usize,
    },
    /// No goal holds a name, number or symbol (only punctuation, control characters).
    #[error(
        "the goal has nothing to rank premises by: it holds no name, number or \
         mathematical symbol, only punctuation or invisible characters"
    )]
    NothingToRank,
    /// The text is a finished proof's display ("No more goals.", "No goals").
    #[error("the display says no goals are left (`{said}`): there is nothing to prove")]
    NoGoals {
        /// The line that says so, as written.
        said: String,
    },
}

/// Options of [`parse_goal_with`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ParseOptions {
    /// Texts longer than this, in bytes, are refused with [`GoalError::TooLarge`].
    pub max_bytes: usize,
}

impl Default for ParseOptions {
    fn default() -> ParseOptions {
        ParseOptions {
            max_bytes: DEFAULT_MAX_GOAL_BYTES,
        }
    }
}

/// Parses a pasted goal, detecting its format, with the default size limit.
///
/// ```
/// use quarry::query::{parse_goal, GoalFormat};
/// let state = parse_goal("b : Buffer\nh : ¬b.full\n⊢ (b.push x).size = b.size + 1").unwrap();
/// assert_eq!(state.format, GoalFormat::Lean);
/// assert_eq!(state.goals[0].hypotheses[1].names, ["h"]);
/// assert_eq!(state.goals[0].conclusion, "(b.push x).size = b.size + 1");
/// ```
pub fn parse_goal(text: &str) -> Result<GoalState, GoalError> {
    parse_goal_with(text, &ParseOptions::default())
}

/// Parses a pasted goal, detecting its format.
pub fn parse_goal_with(text: &str, options: &ParseOptions) -> Result<GoalState, GoalError> {
    if text.len() > options.max_bytes {
        return Err(GoalError::TooLarge {
            bytes: text.len(),
            limit: options.max_bytes,
        });
    }
    if text.trim().is_empty() {
        return Err(GoalError::Empty);
    }
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(text);
    let (format, display) = detect(text);
    if matches!(
        format,
        GoalFormat::Statement | GoalFormat::DeclarationHeader
    ) {
        // "No goals" pasted alone reads like a statement; say what it is instead.
        let first_line = text.lines().find(|l| !l.trim().is_empty()).unwrap_or("");
        if let Some(said) = no_goals_phrase(first_line) {
            return Err(GoalError::NoGoals { said });
        }
    }
    let goals = match format {
        GoalFormat::Lean => lean::parse(text),
        GoalFormat::Coq => coq::parse(text),
        GoalFormat::Isabelle => isabelle::parse(text),
        GoalFormat::Statement | GoalFormat::DeclarationHeader => display,
    };
    let mut goals: Vec<Goal> = goals.into_iter().filter(has_content).collect();
    if goals.is_empty() {
        if let Some(said) = no_goals_phrase(text) {
            return Err(GoalError::NoGoals { said });
        }
        return Err(GoalError::NothingToRank);
    }
    for goal in &mut goals {
        goal.bound_names = goal_bound_names(goal);
    }
    Ok(GoalState { goals, format })
}

/// The format of `text`; for statements and headers, already parsed (detection is parsing).
fn detect(text: &str) -> (GoalFormat, Vec<Goal>) {
    if isabelle::looks_like(text) {
        return (GoalFormat::Isabelle, Vec::new());
    }
    if coq::looks_like(text) {
        return (GoalFormat::Coq, Vec::new());
    }
    if text.contains('⊢') {
        return (GoalFormat::Lean, Vec::new());
    }
    let (format, goal) = statement::parse(text);
    (format, vec![goal])
}

/// The "no goals" line of a finished proof's display, if the text has one.
fn no_goals_phrase(text: &str) -> Option<String> {
    const PHRASES: &[&str] = &[
        "no goals",
        "no more goals",
        "no more subgoals",
        "no subgoals",
        "goals accomplished",
        "proof completed",
        "this subproof is complete",
    ];
    text.lines().map(str::trim).find_map(|line| {
        let lower = line.to_lowercase();
        PHRASES
            .iter()
            .any(|p| lower.starts_with(p))
            .then(|| line.to_string())
    })
}

/// True when some part of the goal holds a name, number or symbol.
fn has_content(goal: &Goal) -> bool {
    let texts = goal
        .hypotheses
        .iter()
        .flat_map(|h| std::iter::once(h.ty.as_str()).chain(h.value.as_deref()))
        .chain(std::iter::once(goal.conclusion.as_str()));
    texts.into_iter().any(|t| {
        Tokenizer::standard()
            .lexemes(t)
            .any(|l| l.kind != LexemeKind::Punctuation)
    })
}

fn goal_bound_names(goal: &Goal) -> Vec<String> {
    let mut names = Vec::new();
    for h in &goal.hypotheses {
        bound_names(&h.ty, &mut names);
        if let Some(v) = &h.value {
            bound_names(v, &mut names);
        }
    }
    bound_names(&goal.conclusion, &mut names);
    let mut seen = std::collections::HashSet::new();
    names.retain(|n| seen.insert(n.clone()));
    names
}
