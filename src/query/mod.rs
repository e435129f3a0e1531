//! The query: a goal pasted from the editor, parsed and turned into weighted terms.
//!
//! Takes the text a person pastes (a Lean 4, Coq or Isabelle goal display, a statement, a
//! declaration header); gives a [`GoalState`] ([`parse_goal`]) and, with the shared
//! [`Tokenizer`](crate::tokens::Tokenizer), the weighted [`QueryTerm`]s every signal asks
//! with ([`GoalState::query_terms`]). Parsing never fails on odd text — only on empty,
//! oversized or contentless text, with a [`GoalError`] a person can act on — and never
//! panics. It deliberately does not search or rank: `retrieve/` does that with these terms.
//!
//! - `goal.rs`: the types, format detection and the entry point;
//! - `lean.rs`, `coq.rs`, `isabelle.rs`: one goal-display format each, with
//!   `display.rs` for the hypothesis lines Lean and Coq share;
//! - `statement.rs`: plain statements and declaration headers;
//! - `binders.rs`: bracket matching, binder groups, bound variables, leading `∀`s;
//! - `terms.rs`: goals to weighted query terms.

mod binders;
mod coq;
mod display;
pub mod goal;
mod isabelle;
mod lean;
mod statement;
pub mod terms;

pub use goal::{
    parse_goal, parse_goal_with, Goal, GoalError, GoalFormat, GoalHypothesis, GoalState,
    ParseOptions, DEFAULT_MAX_GOAL_BYTES,
};
pub use terms::{GoalSelection, GoalTokens, QueryTerm, TermWeights};

#[cfg(test)]
mod tests;
