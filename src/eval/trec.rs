//! TREC run files and qrels, the standard formats of the trade, so anyone can check quarry's
//! figures with trec_eval.
//!
//! Takes evaluation queries and ranked lists; gives text in the formats trec_eval reads:
//! run lines `qid Q0 docno rank score tag` and qrels lines `qid 0 docno relevance`. Query
//! and document ids are fully qualified declaration names. Scores are written strictly
//! decreasing within a query, because trec_eval orders by score (breaking ties by document
//! id), not by the rank column.

use std::fmt::Write;

use super::queries::EvalQuery;
use super::QueryRun;
use crate::library::Library;

/// A TREC id for a name: TREC ids are white-space separated, so any white space becomes `_`.
pub fn trec_id(name: &str) -> String {
    name.chars()
        .map(|c| if c.is_whitespace() { '_' } else { c })
        .collect()
}

/// The qrels of `queries`: every premise a held-out proof used, relevance 1.
pub fn qrels(library: &Library, queries: &[EvalQuery]) -> String {
    let mut out = String::new();
    for q in queries {
        let qid = trec_id(&library.declaration(q.theorem).name);
        for r in &q.relevant {
            let _ = writeln!(out, "{qid} 0 {} 1", trec_id(&library.declaration(*r).name));
        }
    }
    out
}

/// A run file for the ranked lists `runs`, tagged `tag`.
pub fn run_file(library: &Library, runs: &[QueryRun], tag: &str) -> String {
    let mut out = String::new();
    let tag = trec_id(tag);
    for r in runs {
        let qid = trec_id(&library.declaration(r.theorem).name);
        let mut previous = f64::INFINITY;
        for (i, (doc, score)) in r.ranked.iter().enumerate() {
            // Keep the order trec_eval will see equal to ours: strictly decreasing scores.
            let mut s = *score as f64;
            if s >= previous {
                s = previous - 1e-6 * previous.abs().max(1.0);
            }
            previous = s;
            let _ = writeln!(
                out,
                "{qid} Q0 {} {} {:.9} {tag}",
                trec_id(&library.declaration(*doc).name),
                i + 1,
                s
            );
        }
    }
    out
}
