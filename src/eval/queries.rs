//! Evaluation queries: held-out theorems turned into goals, with the premises their proofs
//! used as the answers.
//!
//! Takes the library model and the held-out theorem ids; gives [`EvalQuery`]s whose goal
//! text is the theorem's statement as a declaration header (binders as hypotheses, the
//! conclusion as the target), whose answers are its proof's premises (of the kinds that can
//! answer: not notations), and whose place is
//! the theorem's own position, so only premises accessible there (imported modules and
//! earlier in its file, never itself) may answer.

use crate::library::{BinderStyle, DeclId, Library};
use crate::retrieve::accessible::QueryPlace;
use crate::retrieve::DEFAULT_KINDS;

use super::trec::TrecIds;

/// One query of an evaluation.
#[derive(Clone, Debug, PartialEq)]
pub struct EvalQuery {
    /// The query's TREC id: the held-out theorem's [`TrecIds`] id for a statement, with the
    /// goal state's line and ordinal appended for a harvested goal state.
    pub qid: String,
    /// The held-out theorem whose statement or proof the query comes from.
    pub theorem: DeclId,
    /// The goal text given to the ranker.
    pub goal: String,
    /// The premises its proof used (TREC qrels).
    pub relevant: Vec<DeclId>,
    /// Where the theorem is: the candidates are what is accessible there.
    pub place: QueryPlace,
}

/// The statement of `id` as a declaration header: `(n m : nat) {A : Type} [Ring R] : concl`.
pub fn statement_goal(library: &Library, id: DeclId) -> String {
    let d = library.declaration(id);
    let Some(conclusion) = d.conclusion.as_deref().filter(|c| !c.trim().is_empty()) else {
        return d.statement.clone();
    };
    let mut out = String::new();
    for h in &d.hypotheses {
        let (open, close) = match h.style {
            BinderStyle::Explicit => ('(', ')'),
            BinderStyle::Implicit => ('{', '}'),
            BinderStyle::Instance => ('[', ']'),
            BinderStyle::Strict => ('⦃', '⦄'),
        };
        out.push(open);
        match (h.names.is_empty(), h.ty.is_empty()) {
            (true, _) => out.push_str(&h.ty),
            (false, true) => out.push_str(&h.names.join(" ")),
            (false, false) => {
                out.push_str(&h.names.join(" "));
                out.push_str(" : ");
                out.push_str(&h.ty);
            }
        }
        out.push(close);
        out.push(' ');
    }
    out.push_str(": ");
    out.push_str(conclusion);
    out
}

/// The premises of `id`'s proof that can answer a query: those of the default kinds
/// (notations are syntax a proof writes, not premises a retriever should return).
pub fn answer_premises(library: &Library, id: DeclId) -> Vec<DeclId> {
    library
        .graph
        .premises(id)
        .filter(|&p| DEFAULT_KINDS.contains(&library.declaration(p).kind))
        .collect()
}

/// The queries for the theorems `ids`.
pub fn statement_queries(library: &Library, ids: &[DeclId]) -> Vec<EvalQuery> {
    let trec = TrecIds::new(library);
    ids.iter()
        .map(|&id| {
            let d = library.declaration(id);
            EvalQuery {
                qid: trec.of(id).to_string(),
                theorem: id,
                goal: statement_goal(library, id),
                relevant: answer_premises(library, id),
                place: QueryPlace {
                    module: d.module,
                    line: Some(d.statement_span.start.line),
                },
            }
        })
        .collect()
}
