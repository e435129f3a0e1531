//! TREC run files and qrels, the standard formats of the trade, so anyone can check quarry's
//! figures with trec_eval.
//!
//! Takes evaluation queries and ranked lists; gives text in the formats trec_eval reads:
//! run lines `qid Q0 docno rank score tag` and qrels lines `qid 0 docno relevance`.
//! Document ids (and the query ids of statements) are fully qualified declaration names
//! (with `#<id>` appended to the rare name two declarations share); a goal state's query id
//! adds its line and ordinal. Scores are written strictly decreasing within a query,
//! because trec_eval orders by score (breaking ties by document id), not by the rank column.

use std::collections::HashMap;
use std::fmt::Write;

use super::queries::EvalQuery;
use super::QueryRun;
use crate::library::{DeclId, Library};

/// A TREC id for a name: TREC ids are white-space separated, so any white space becomes `_`.
pub fn trec_id(name: &str) -> String {
    name.chars()
        .map(|c| if c.is_whitespace() { '_' } else { c })
        .collect()
}

/// TREC ids of every declaration: the fully qualified name, made unique with `#<id>` when
/// two declarations share one (a module and its functor instance can), so that trec_eval
/// never merges two documents.
pub struct TrecIds {
    ids: Vec<String>,
}

impl TrecIds {
    /// The ids of `library`'s declarations.
    pub fn new(library: &Library) -> TrecIds {
        let mut count: HashMap<&str, u32> = HashMap::new();
        for d in &library.declarations {
            *count.entry(d.name.as_str()).or_default() += 1;
        }
        let ids = library
            .declarations
            .iter()
            .map(|d| {
                let base = trec_id(&d.name);
                if count[d.name.as_str()] > 1 {
                    format!("{base}#{}", d.id.0)
                } else {
                    base
                }
            })
            .collect();
        TrecIds { ids }
    }

    /// The id of `decl`.
    pub fn of(&self, decl: DeclId) -> &str {
        self.ids
            .get(decl.0 as usize)
            .map(String::as_str)
            .unwrap_or("")
    }
}

/// The qrels of `queries`: every premise a held-out proof used, relevance 1.
pub fn qrels(library: &Library, queries: &[EvalQuery]) -> String {
    let ids = TrecIds::new(library);
    let mut out = String::new();
    for q in queries {
        for r in &q.relevant {
            let _ = writeln!(out, "{} 0 {} 1", q.qid, ids.of(*r));
        }
    }
    out
}

/// A run file for the ranked lists `runs`, tagged `tag`.
pub fn run_file(library: &Library, runs: &[QueryRun], tag: &str) -> String {
    let ids = TrecIds::new(library);
    let mut out = String::new();
    let tag = trec_id(tag);
    for r in runs {
        let qid = &r.qid;
        let mut previous = f64::INFINITY;
        for (i, (doc, score)) in r.ranked.iter().enumerate() {
            // Keep the order trec_eval will see equal to ours: strictly decreasing scores.
            let mut s = *score as f64;
            if s >= previous {
                s = previous - 1e-6 * previous.abs().max(1.0);
            }
            previous = s;
            let _ = writeln!(out, "{qid} Q0 {} {} {:.9} {tag}", ids.of(*doc), i + 1, s);
        }
    }
    out
}
