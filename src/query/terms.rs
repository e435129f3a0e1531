//! Query terms: a parsed goal turned into weighted tokens with the shared tokenizer.
//!
//! Takes a [`GoalState`] and a [`Tokenizer`]; gives [`QueryTerm`]s (one per distinct token
//! text, weights summed, in order of first appearance) for the lexical signal, and per-goal
//! conclusion and hypothesis [`Tokens`] for signals that want sequences. The goal's own
//! hypothesis names and bound variables are dropped (they are noise: a lemma never names
//! them). It does not rank or search.

use std::collections::HashMap;

use super::goal::{Goal, GoalState};
use crate::tokens::{NameSet, Tokenizer, Tokens};

/// Which goals of a display to ask about.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum GoalSelection {
    /// The first goal, the one a tactic acts on: the default.
    #[default]
    First,
    /// Every goal, each with its own hypotheses.
    All,
}

/// How much each part of a goal counts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TermWeights {
    /// Weight of each token of a conclusion.
    pub conclusion: f32,
    /// Weight of each token of a hypothesis type or let value.
    pub hypothesis: f32,
}

impl TermWeights {
    /// Conclusion 1.0, hypotheses 0.5: the conclusion says what the premise must prove,
    /// hypotheses only what it may use. Defaults chosen by judgement, to be tuned on the
    /// evaluation set.
    pub const DEFAULT: TermWeights = TermWeights {
        conclusion: 1.0,
        hypothesis: 0.5,
    };
}

impl Default for TermWeights {
    fn default() -> TermWeights {
        TermWeights::DEFAULT
    }
}

/// One query term: a token's text and its summed weight.
#[derive(Clone, Debug, PartialEq)]
pub struct QueryTerm {
    /// The token text, lower-case.
    pub text: String,
    /// The summed weight of its occurrences.
    pub weight: f32,
}

/// A goal's tokens, conclusion and hypotheses apart.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct GoalTokens {
    /// The tokens of the conclusion.
    pub conclusion: Tokens,
    /// The tokens of every hypothesis type and let value, in order.
    pub hypotheses: Tokens,
}

impl Goal {
    /// The names not to make tokens of: every hypothesis name and bound variable.
    pub fn names_to_drop(&self) -> NameSet {
        let mut names: NameSet = self.bound_names.iter().collect();
        for h in &self.hypotheses {
            names.extend(&h.names);
        }
        names
    }

    /// This goal's tokens, its own names dropped.
    pub fn tokens(&self, tokenizer: &Tokenizer) -> GoalTokens {
        let drop = self.names_to_drop();
        let mut out = GoalTokens::default();
        tokenizer.tokenize_into(&self.conclusion, Some(&drop), &mut out.conclusion);
        for h in &self.hypotheses {
            tokenizer.tokenize_into(&h.ty, Some(&drop), &mut out.hypotheses);
            if let Some(v) = &h.value {
                tokenizer.tokenize_into(v, Some(&drop), &mut out.hypotheses);
            }
        }
        out
    }
}

impl GoalState {
    /// The goals `which` selects.
    pub fn selected(&self, which: GoalSelection) -> &[Goal] {
        match which {
            GoalSelection::First => &self.goals[..self.goals.len().min(1)],
            GoalSelection::All => &self.goals,
        }
    }

    /// The weighted query terms of the selected goals, with [`TermWeights::DEFAULT`].
    ///
    /// ```
    /// use quarry::query::{parse_goal, GoalSelection};
    /// use quarry::tokens::Tokenizer;
    /// let state = parse_goal("buf : Buffer\nh : buf.size < cap\n⊢ (buf.push x).size ≤ cap").unwrap();
    /// let terms = state.query_terms(Tokenizer::standard(), GoalSelection::First);
    /// let le = terms.iter().find(|t| t.text == "le").unwrap();
    /// assert_eq!(le.weight, 1.0);
    /// let lt = terms.iter().find(|t| t.text == "lt").unwrap();
    /// assert_eq!(lt.weight, 0.5);
    /// assert!(terms.iter().all(|t| t.text != "buf" && t.text != "h"));
    /// ```
    pub fn query_terms(&self, tokenizer: &Tokenizer, which: GoalSelection) -> Vec<QueryTerm> {
        self.query_terms_weighted(tokenizer, which, TermWeights::DEFAULT)
    }

    /// The query terms of the selected goals: each token of a conclusion counts
    /// `weights.conclusion`, each of a hypothesis `weights.hypothesis`; a text that occurs
    /// more than once gets the sum (as BM25 counts a repeated query term).
    pub fn query_terms_weighted(
        &self,
        tokenizer: &Tokenizer,
        which: GoalSelection,
        weights: TermWeights,
    ) -> Vec<QueryTerm> {
        let mut terms: Vec<QueryTerm> = Vec::new();
        let mut index: HashMap<String, usize> = HashMap::new();
        let mut add = |tokens: &Tokens, weight: f32| {
            for text in tokens.texts() {
                match index.get(text) {
                    Some(&i) => terms[i].weight += weight,
                    None => {
                        index.insert(text.to_string(), terms.len());
                        terms.push(QueryTerm {
                            text: text.to_string(),
                            weight,
                        });
                    }
                }
            }
        };
        for goal in self.selected(which) {
            let tokens = goal.tokens(tokenizer);
            add(&tokens.conclusion, weights.conclusion);
            add(&tokens.hypotheses, weights.hypothesis);
        }
        terms
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::query::parse_goal;

    fn weight(terms: &[QueryTerm], text: &str) -> Option<f32> {
        terms.iter().find(|t| t.text == text).map(|t| t.weight)
    }

    #[test]
    fn conclusion_weighs_more_than_hypotheses_and_repeats_add_up() {
        let state = parse_goal(
            "l : Ledger\n\
             acct : Account\n\
             h : l.balance acct ≥ fee\n\
             ⊢ (l.debit acct fee).balance acct + fee = l.balance acct",
        )
        .unwrap();
        let terms = state.query_terms(Tokenizer::standard(), GoalSelection::First);
        assert_eq!(weight(&terms, "debit"), Some(1.0));
        assert_eq!(weight(&terms, "ge"), Some(0.5));
        // `balance` twice in the conclusion, once in a hypothesis.
        assert_eq!(weight(&terms, "balance"), Some(2.5));
        // Hypothesis names are dropped, but `fee` is free (a variable of the section).
        assert_eq!(weight(&terms, "acct"), None);
        assert_eq!(weight(&terms, "l"), None);
        assert_eq!(weight(&terms, "fee"), Some(2.5));
    }

    #[test]
    fn first_goal_by_default_all_on_request() {
        let state = parse_goal("⊢ Queue.size q = 0\n\n⊢ Queue.isEmpty q").unwrap();
        let first = state.query_terms(Tokenizer::standard(), GoalSelection::First);
        assert!(weight(&first, "isempty").is_none());
        let all = state.query_terms(Tokenizer::standard(), GoalSelection::All);
        assert_eq!(weight(&all, "isempty"), Some(1.0));
        assert_eq!(weight(&all, "queue"), Some(2.0));
        assert_eq!(GoalSelection::default(), GoalSelection::First);
    }

    #[test]
    fn bound_variables_are_dropped() {
        let state = parse_goal("⊢ ∀ item ∈ stock.items, stock.qty item ≤ stock.cap").unwrap();
        let terms = state.query_terms(Tokenizer::standard(), GoalSelection::First);
        assert!(weight(&terms, "item").is_none());
        assert!(weight(&terms, "qty").is_some());
    }

    #[test]
    fn custom_weights() {
        let state = parse_goal("h : a ∣ b\n⊢ a ∣ b * c").unwrap();
        let w = TermWeights {
            conclusion: 2.0,
            hypothesis: 0.0,
        };
        let terms = state.query_terms_weighted(Tokenizer::standard(), GoalSelection::First, w);
        assert_eq!(weight(&terms, "dvd"), Some(2.0));
        assert_eq!(weight(&terms, "mul"), Some(2.0));
    }

    #[test]
    fn goal_tokens_keep_the_parts_apart() {
        let state = parse_goal("s : Scheduler\nh : s.idle\n⊢ s.tick.idle").unwrap();
        let tokens = state.goals[0].tokens(Tokenizer::standard());
        assert_eq!(
            tokens.conclusion.to_string(),
            "tick.idle/ident tick/part idle/part"
        );
        assert_eq!(tokens.hypotheses.to_string(), "scheduler/ident idle/ident");
    }
}
