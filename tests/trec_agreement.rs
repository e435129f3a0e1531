//! quarry's evaluation metrics against trec_eval's own code: `quarry eval` writes TREC run
//! files and qrels for the Coq standard library (Debian's `libcoq-stdlib`), and the PyPI
//! package `pytrec-eval-terrier` (Python bindings to trec_eval; the maintained fork of
//! `pytrec_eval`, whose own PyPI sdist downloads trec_eval at build time and cannot build
//! offline) computes recall@10, MRR (`recip_rank`) and nDCG@10 (`ndcg_cut_10`) from them.
//! They must agree with quarry's report to 1e-6, for every system.

mod support;

use std::process::Command;

const PYTREC: &str = "pytrec-eval-terrier==0.5.11";

const SCRIPT: &str = r#"
import json, sys, collections
import pytrec_eval
qrels = collections.defaultdict(dict)
for line in open(sys.argv[1]):
    q, _, d, rel = line.split()
    qrels[q][d] = int(rel)
out = {}
for name in sys.argv[3:]:
    run = collections.defaultdict(dict)
    for line in open(f"{sys.argv[2]}/run.{name}.txt"):
        q, _, d, rank, score, tag = line.split()
        run[q][d] = float(score)
    ev = pytrec_eval.RelevanceEvaluator(dict(qrels), {"recall.10", "recip_rank", "ndcg_cut.10"})
    per_query = ev.evaluate(dict(run))
    n = len(qrels)
    # A query with an empty run is absent from per_query: it scores 0, as in quarry's mean.
    mean = lambda m: sum(per_query.get(q, {}).get(m, 0.0) for q in qrels) / n
    out[name] = {"recall_10": mean("recall_10"), "recip_rank": mean("recip_rank"),
                 "ndcg_cut_10": mean("ndcg_cut_10"), "queries": n}
print(json.dumps(out))
"#;

#[test]
fn metrics_agree_with_trec_eval_on_the_coq_standard_library() {
    let Some(theories) = support::debian::coq_stdlib() else {
        return;
    };
    let Some(python) = support::python::venv_with(&[PYTREC]) else {
        return;
    };
    let tmp = tempfile::tempdir().unwrap();
    let trec = tmp.path().join("trec");
    let report_dir = tmp.path().join("report");
    let prefix = format!("Coq={}", theories.display());
    let o = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("eval")
        .arg(&theories)
        .args([
            "--coq-prefix",
            &prefix,
            "--split",
            "random",
            "--signals",
            "lexical",
        ])
        .arg("--trec")
        .arg(&trec)
        .arg("--out")
        .arg(&report_dir)
        .output()
        .expect("quarry runs");
    assert!(
        o.status.success(),
        "quarry eval failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    for f in ["report.json", "report.md", "recall_at_k.svg"] {
        assert!(report_dir.join(f).is_file(), "{f} was not written");
    }
    let report: serde_json::Value =
        serde_json::from_slice(&std::fs::read(report_dir.join("report.json")).unwrap()).unwrap();
    let systems: Vec<String> = report["systems"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["system"].as_str().unwrap().to_string())
        .collect();
    assert!(systems.contains(&"lexical".to_string()));
    let script = tmp.path().join("agree.py");
    std::fs::write(&script, SCRIPT).unwrap();
    let out = Command::new(&python)
        .arg(&script)
        .arg(trec.join("qrels.txt"))
        .arg(&trec)
        .args(&systems)
        .output()
        .expect("python runs");
    assert!(
        out.status.success(),
        "the pytrec_eval script failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let theirs: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for s in report["systems"].as_array().unwrap() {
        let name = s["system"].as_str().unwrap();
        let t = &theirs[name];
        assert_eq!(
            t["queries"].as_u64().unwrap(),
            s["queries"].as_u64().unwrap()
        );
        for (ours, reference) in [
            (
                s["recall"]["10"].as_f64().unwrap(),
                t["recall_10"].as_f64().unwrap(),
            ),
            (
                s["mrr"].as_f64().unwrap(),
                t["recip_rank"].as_f64().unwrap(),
            ),
            (
                s["ndcg_10"].as_f64().unwrap(),
                t["ndcg_cut_10"].as_f64().unwrap(),
            ),
        ] {
            assert!(
                (ours - reference).abs() < 1e-6,
                "{name}: quarry {ours} vs trec_eval {reference}"
            );
        }
        println!(
            "{name}: {} queries; recall@10 {:.6}, MRR {:.6}, nDCG@10 {:.6} — equal to trec_eval's to 1e-6",
            s["queries"],
            s["recall"]["10"].as_f64().unwrap(),
            s["mrr"].as_f64().unwrap(),
            s["ndcg_10"].as_f64().unwrap()
        );
    }
}
