//! quarry's BM25 (tantivy with quarry's tokens) against a reference implementation: the
//! Python package `bm25s` (PyPI, version pinned below), method "lucene", k1 = 1.2,
//! b = 0.75, on the same exported tokens of the Coq standard library's declarations
//! (Debian's `libcoq-stdlib`) and 200 goals drawn from its theorems.
//!
//! tantivy stores field lengths in one byte (exact for short fields, bucketed above), so
//! small score differences are expected; the test prints the largest. Its scores carry the
//! constant factor (k1 + 1) of Robertson & Zaragoza's formula, which bm25s's "lucene"
//! variant omits: it does not change the order, and scores are compared after dividing.

mod support;

use std::sync::Arc;

use quarry::extract::build_library;
use quarry::index::lexical::{self, FieldBoosts, LexicalIndex};
use quarry::index::{library_tokenizer, tokenize_fn};
use quarry::library::DeclKind;
use quarry::query::QueryTerm;

const BM25S: &str = "bm25s==0.3.16";
const QUERIES: usize = 200;
const TOP: usize = 10;

const SCRIPT: &str = r#"
import json, sys
import numpy as np
import bm25s
data = json.load(open(sys.argv[1]))
retriever = bm25s.BM25(method="lucene", k1=1.2, b=0.75)
retriever.index(data["corpus"], show_progress=False)
out = []
for q, theirs in zip(data["queries"], data["quarry_top"]):
    scores = np.asarray(retriever.get_scores(q), dtype=np.float64)
    order = np.argsort(-scores, kind="stable")[: data["top"]]
    out.append({
        "top": [int(i) for i in order],
        "top_scores": [float(scores[i]) for i in order],
        "scores_of_quarry_top": [float(scores[i]) for i in theirs],
    })
json.dump(out, open(sys.argv[2], "w"))
"#;

#[test]
fn bm25_agrees_with_bm25s_on_the_coq_standard_library() {
    let Some(theories) = support::debian::coq_stdlib() else {
        return;
    };
    let Some(python) = support::python::venv_with(&[BM25S, "numpy"]) else {
        return;
    };
    let library = build_library(&support::debian::stdlib_options(&theories))
        .expect("the standard library builds");
    assert!(
        library.declarations.len() > 10_000,
        "too few declarations extracted"
    );
    let tokenizer = Arc::new(library_tokenizer(&library));
    let tokenize = tokenize_fn(tokenizer.clone());
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("lexical");
    lexical::build(&library, tokenize.clone(), &dir).unwrap();
    let index = LexicalIndex::open(&dir, tokenize.clone(), library.declarations.len()).unwrap();

    // The `text` field's tokens, exactly as quarry indexes them.
    let corpus: Vec<Vec<String>> = library
        .declarations
        .iter()
        .map(|d| {
            let text = format!("{}\n{}", lexical::local_name(&library, d.id), d.statement);
            let mut toks = Vec::new();
            tokenize(&text, &mut toks);
            toks
        })
        .collect();
    // 200 goals: the statements of evenly spaced theorems, as unique tokens.
    let theorems: Vec<_> = library
        .declarations
        .iter()
        .filter(|d| d.kind == DeclKind::Theorem)
        .collect();
    let step = (theorems.len() / QUERIES).max(1);
    let queries: Vec<Vec<String>> = theorems
        .iter()
        .step_by(step)
        .take(QUERIES)
        .map(|d| {
            let mut toks = Vec::new();
            tokenize(&d.statement, &mut toks);
            let mut seen = std::collections::HashSet::new();
            toks.retain(|t| seen.insert(t.clone()));
            toks
        })
        .filter(|q| !q.is_empty())
        .collect();
    assert!(queries.len() >= QUERIES * 9 / 10);
    let ours: Vec<Vec<(u32, f32)>> = queries
        .iter()
        .map(|q| {
            let terms: Vec<QueryTerm> = q
                .iter()
                .map(|t| QueryTerm {
                    text: t.clone(),
                    weight: 1.0,
                })
                .collect();
            index
                .search(&terms, &FieldBoosts::text_only(), None, TOP)
                .unwrap()
                .into_iter()
                .map(|(id, s)| (id.0, s))
                .collect()
        })
        .collect();

    let input = tmp.path().join("input.json");
    let output = tmp.path().join("output.json");
    let script = tmp.path().join("reference.py");
    std::fs::write(&script, SCRIPT).unwrap();
    std::fs::write(
        &input,
        serde_json::to_vec(&serde_json::json!({
            "corpus": corpus,
            "queries": queries,
            "top": TOP,
            "quarry_top": ours.iter().map(|o| o.iter().map(|x| x.0).collect::<Vec<_>>()).collect::<Vec<_>>(),
        }))
        .unwrap(),
    )
    .unwrap();
    let status = std::process::Command::new(&python)
        .arg(&script)
        .arg(&input)
        .arg(&output)
        .status()
        .expect("python runs");
    assert!(status.success(), "the bm25s script failed");
    let theirs: Vec<serde_json::Value> =
        serde_json::from_slice(&std::fs::read(&output).unwrap()).unwrap();

    let mut overlap_sum = 0.0;
    let mut tie_aware_sum = 0.0;
    let mut largest_rel_diff = 0.0f64;
    for (o, t) in ours.iter().zip(&theirs) {
        let top: Vec<u32> = t["top"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_u64().unwrap() as u32)
            .collect();
        let top_scores: Vec<f64> = t["top_scores"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let of_ours: Vec<f64> = t["scores_of_quarry_top"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let k = top.len().clamp(1, TOP) as f64;
        overlap_sum += o.iter().filter(|(id, _)| top.contains(id)).count() as f64 / k;
        // Documents tied with bm25s's k-th score are equally correct answers.
        let kth = top_scores.last().copied().unwrap_or(0.0);
        tie_aware_sum += of_ours
            .iter()
            .filter(|&&s| s >= kth - 1e-9 * kth.abs())
            .count() as f64
            / k;
        for ((_, ours_score), reference) in o.iter().zip(&of_ours) {
            let ours_lucene = *ours_score as f64 / 2.2;
            if *reference > 0.0 {
                largest_rel_diff =
                    largest_rel_diff.max((ours_lucene - reference).abs() / reference);
            }
        }
    }
    let n = ours.len() as f64;
    let overlap = overlap_sum / n;
    let tie_aware = tie_aware_sum / n;
    println!(
        "BM25 vs {BM25S} on {} declarations, {} goals: mean top-{TOP} overlap {overlap:.4} \
         ({tie_aware:.4} counting ties at the cut as agreement); largest relative score \
         difference {:.4}%",
        library.declarations.len(),
        ours.len(),
        largest_rel_diff * 100.0
    );
    assert!(overlap >= 0.9, "mean top-{TOP} overlap {overlap:.4} < 0.9");
}
