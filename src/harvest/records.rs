//! Goal-state records: one harvested goal, the premises its tactic names, where it is.
//!
//! Takes an instrumented file's numbered tactic sentences, the displays coqc printed (by
//! marker number) and the `.glob` references (in the instrumented file's offsets); gives
//! one [`GoalRecord`] per tactic sentence that printed a display and names at least one
//! declaration. Premises are the references written inside the sentence, mapped back to
//! the original file and renamed as quarry names them. It does not decide which names are
//! premises beyond coqc's own resolution.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::glob::GlobReference;
use super::instrument::Instrumented;

/// One harvested goal state, written as one JSON line (docs/evaluation.md).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct GoalRecord {
    /// The goal display coqc printed before the tactic (`Show.`), as printed.
    pub goal: String,
    /// Fully qualified names of the declarations the tactic names, in first-use order.
    pub premises: Vec<String>,
    /// The declaration whose proof holds the tactic, fully qualified.
    pub theorem: String,
    /// The file, relative to its library root, with `/`.
    pub file: String,
    /// 1-based line of the tactic in the original file.
    pub line: u32,
    /// The tactic sentence as written, up to and including its `.`.
    pub tactic: String,
}

/// Builds the records of one file. `rename` turns a name as coqc wrote it for the compiled
/// copy into quarry's name (e.g. `Copy.Arith.X` back to `Coq.Arith.X`).
pub fn file_records(
    file: &str,
    original: &str,
    instrumented: &Instrumented,
    displays: &BTreeMap<usize, String>,
    references: &[GlobReference],
    rename: &dyn Fn(&str) -> String,
) -> Vec<GoalRecord> {
    let mut mapped: Vec<(u32, String)> = references
        .iter()
        .filter_map(|r| {
            let at = instrumented.offsets.original(r.start)?;
            Some((at, rename(&r.target)))
        })
        .collect();
    mapped.sort_by_key(|m| m.0);
    let mut out = Vec::new();
    for s in &instrumented.sentences {
        let Some(goal) = displays.get(&s.marker) else {
            continue;
        };
        let from = mapped.partition_point(|m| m.0 < s.start);
        let mut premises: Vec<String> = Vec::new();
        for (at, name) in mapped.get(from..).unwrap_or(&[]) {
            if *at >= s.end {
                break;
            }
            if !premises.contains(name) {
                premises.push(name.clone());
            }
        }
        if premises.is_empty() {
            continue;
        }
        out.push(GoalRecord {
            goal: goal.clone(),
            premises,
            theorem: s.theorem.clone(),
            file: file.to_string(),
            line: s.line,
            tactic: original
                .get(s.start as usize..s.end as usize)
                .unwrap_or("")
                .to_string(),
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::harvest::instrument::instrument;

    #[test]
    fn references_inside_a_tactic_become_its_premises() {
        let src = "Lemma t : True.\nProof. idtac. exact I. Qed.\n";
        let i = instrument("M", src);
        let at = i.text.find("I. Qed").unwrap_or(0) as u32;
        let refs = vec![GlobReference {
            start: at,
            end: at,
            target: "Copy.Init.Logic.I".into(),
            kind: "constr".into(),
        }];
        let mut d = BTreeMap::new();
        d.insert(0, "1 goal\n  True".to_string());
        d.insert(1, "1 goal\n  True".to_string());
        let rename = |n: &str| n.replacen("Copy.", "Coq.", 1);
        let r = file_records("T.v", src, &i, &d, &refs, &rename);
        assert_eq!(r.len(), 1, "idtac names nothing: no record");
        assert_eq!(r[0].premises, ["Coq.Init.Logic.I"]);
        assert_eq!(r[0].tactic, "exact I.");
        assert_eq!(r[0].theorem, "M.t");
        assert_eq!(r[0].line, 2);
        // Without its display the tactic gives no record, and nothing shifts.
        d.remove(&1);
        assert!(file_records("T.v", src, &i, &d, &refs, &rename).is_empty());
    }
}
