//! Evaluation queries from harvested goal states: what Coq displayed before a tactic, with
//! the declarations that tactic named as the answers.
//!
//! Takes a `STATES.jsonl` file written by `quarry harvest` (one [`GoalRecord`] a line) and
//! the library it was harvested from; gives [`EvalQuery`]s for the records whose enclosing
//! theorem is on the wanted side of a split, and the count of records that could not become
//! queries, by reason. A query's place is its file with the enclosing theorem's first line
//! as the cursor, so the theorem itself and everything after it are not accessible. Records
//! are held out by theorem: a split of theorems decides for all records of one theorem at
//! once. It ranks nothing and never reads the library's sources.

use std::collections::HashMap;
use std::io::{BufRead, Read};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::harvest::GoalRecord;
use crate::library::{DeclId, Library};
use crate::retrieve::accessible::{accessible_premises, file_by_path, QueryPlace};
use crate::retrieve::DEFAULT_KINDS;

use super::queries::EvalQuery;
use super::trec::TrecIds;

/// The longest record line read (a goal display of a few hundred hypotheses fits easily).
pub const MAX_RECORD_BYTES: usize = 4 << 20;

/// Why a goal-state file cannot be read.
#[derive(Debug, thiserror::Error)]
pub enum StatesError {
    #[error("cannot read goal states `{path}`: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("goal states `{path}` line {line}: not a goal-state record: {message}")]
    Record {
        path: PathBuf,
        line: usize,
        message: String,
    },
    #[error("goal states `{path}` line {line}: {bytes} bytes, over the {MAX_RECORD_BYTES}-byte limit of a record")]
    TooLong {
        path: PathBuf,
        line: usize,
        bytes: usize,
    },
    #[error("goal states `{0}` hold no record")]
    Empty(PathBuf),
}

/// Reads every record of a `STATES.jsonl` file; blank lines are skipped, any other line
/// that is not a record is an error naming its line.
pub fn read_states(path: &Path) -> Result<Vec<GoalRecord>, StatesError> {
    let io = |source| StatesError::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = std::fs::File::open(path).map_err(io)?;
    let mut reader = std::io::BufReader::new(file);
    let mut records = Vec::new();
    let mut buffer = Vec::new();
    let mut line = 0usize;
    loop {
        buffer.clear();
        line += 1;
        // Read at most one byte past the limit, so a huge line is refused, not held.
        let read = (&mut reader)
            .take(MAX_RECORD_BYTES as u64 + 1)
            .read_until(b'\n', &mut buffer)
            .map_err(io)?;
        if read == 0 {
            break;
        }
        if buffer.len() > MAX_RECORD_BYTES && buffer.last() != Some(&b'\n') {
            return Err(StatesError::TooLong {
                path: path.to_path_buf(),
                line,
                bytes: buffer.len(),
            });
        }
        let text = std::str::from_utf8(&buffer).map_err(|e| StatesError::Record {
            path: path.to_path_buf(),
            line,
            message: format!("not UTF-8 ({e})"),
        })?;
        if text.trim().is_empty() {
            continue;
        }
        let record: GoalRecord =
            serde_json::from_str(text.trim_end()).map_err(|e| StatesError::Record {
                path: path.to_path_buf(),
                line,
                message: e.to_string(),
            })?;
        records.push(record);
    }
    if records.is_empty() {
        return Err(StatesError::Empty(path.to_path_buf()));
    }
    Ok(records)
}

/// Records that did not become queries, by reason.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct StateCounts {
    /// Records read.
    pub records: usize,
    /// Records whose theorem is on the wanted side of the split: the queries, and those
    /// dropped below.
    pub selected: usize,
    /// Records whose theorem is not a declaration of the library.
    pub unknown_theorem: usize,
    /// Records whose file is not a file of the library, or not the theorem's file.
    pub unknown_file: usize,
    /// Records none of whose named declarations can answer (all outside the library, of a
    /// kind that cannot answer such as notations, or not accessible before the theorem).
    pub no_answer: usize,
    /// Named declarations dropped from otherwise kept records for the same reasons.
    pub dropped_premises: usize,
    /// Queries made.
    pub queries: usize,
}

/// Finds declarations by fully qualified name (a name two declarations share maps to both).
struct NameLookup<'a> {
    by_name: HashMap<&'a str, Vec<DeclId>>,
}

impl<'a> NameLookup<'a> {
    fn new(library: &'a Library) -> NameLookup<'a> {
        let mut by_name: HashMap<&str, Vec<DeclId>> = HashMap::new();
        for d in &library.declarations {
            by_name.entry(d.name.as_str()).or_default().push(d.id);
        }
        NameLookup { by_name }
    }

    fn get(&self, name: &str) -> &[DeclId] {
        self.by_name.get(name).map(Vec::as_slice).unwrap_or(&[])
    }
}

/// The enclosing theorem of `record`: the declaration of that name in the record's file
/// whose span holds the record's line (the first of that name in the file otherwise).
fn enclosing_theorem(
    library: &Library,
    names: &NameLookup,
    record: &GoalRecord,
    file: crate::library::FileId,
) -> Option<DeclId> {
    let in_file: Vec<DeclId> = names
        .get(&record.theorem)
        .iter()
        .copied()
        .filter(|&id| library.declaration(id).file == file)
        .collect();
    let holds_line = |id: &DeclId| {
        let d = library.declaration(*id);
        let end = d.proof_span.as_ref().unwrap_or(&d.statement_span).end.line;
        d.statement_span.start.line <= record.line && record.line <= end
    };
    in_file
        .iter()
        .copied()
        .find(holds_line)
        .or_else(|| in_file.first().copied())
}

/// The queries of the records whose enclosing theorem is in `theorems` (sorted), in file
/// order, with the counts of what was dropped and why.
pub fn state_queries(
    library: &Library,
    records: &[GoalRecord],
    theorems: &[DeclId],
) -> (Vec<EvalQuery>, StateCounts) {
    let names = NameLookup::new(library);
    let trec = TrecIds::new(library);
    let mut counts = StateCounts {
        records: records.len(),
        ..StateCounts::default()
    };
    let mut queries = Vec::new();
    let mut ordinal: HashMap<DeclId, usize> = HashMap::new();
    let mut cached: Option<(DeclId, crate::retrieve::accessible::PremiseFilter)> = None;
    for record in records {
        let Ok(file) = file_by_path(library, &record.file) else {
            // Unknown files cannot say which side their theorem is on: count them all.
            counts.unknown_file += 1;
            continue;
        };
        let Some(theorem) = enclosing_theorem(library, &names, record, file) else {
            if names.get(&record.theorem).is_empty() {
                counts.unknown_theorem += 1;
            } else {
                // The theorem exists, but not in the file the record names.
                counts.unknown_file += 1;
            }
            continue;
        };
        if theorems.binary_search(&theorem).is_err() {
            continue;
        }
        counts.selected += 1;
        let d = library.declaration(theorem);
        let place = QueryPlace {
            module: d.module,
            line: Some(d.statement_span.start.line),
        };
        // Records come grouped by theorem: one filter per theorem, not per record.
        if cached.as_ref().map(|c| c.0) != Some(theorem) {
            let filter = accessible_premises(library, Some(&place), Some(&DEFAULT_KINDS));
            cached = Some((theorem, filter));
        }
        let Some((_, accessible)) = cached.as_ref() else {
            continue;
        };
        let mut relevant: Vec<DeclId> = Vec::new();
        for name in &record.premises {
            match names
                .get(name)
                .iter()
                .copied()
                .find(|&p| accessible.contains(p))
            {
                Some(p) if !relevant.contains(&p) => relevant.push(p),
                Some(_) => {}
                None => counts.dropped_premises += 1,
            }
        }
        if relevant.is_empty() {
            counts.no_answer += 1;
            continue;
        }
        let n = ordinal.entry(theorem).or_default();
        *n += 1;
        queries.push(EvalQuery {
            qid: format!("{}@{}.{}", trec.of(theorem), record.line, n),
            theorem,
            goal: record.goal.clone(),
            relevant,
            place,
        });
    }
    counts.queries = queries.len();
    (queries, counts)
}

/// The queries of a side of a split: its theorems' statements or, with goal-state
/// records, the goal states harvested from their proofs (with the counts of those dropped).
pub fn side_queries(
    records: Option<&[GoalRecord]>,
    library: &Library,
    theorems: &[DeclId],
) -> (Vec<EvalQuery>, StateCounts) {
    match records {
        Some(records) => {
            let mut sorted = theorems.to_vec();
            sorted.sort_unstable();
            state_queries(library, records, &sorted)
        }
        None => (
            super::queries::statement_queries(library, theorems),
            StateCounts::default(),
        ),
    }
}

/// The goal states of `records` whose theorems are among `theorems`, as training states
/// for the learned encoder.
pub fn training_states(
    library: &Library,
    records: &[GoalRecord],
    theorems: &[DeclId],
) -> Vec<crate::index::dense::TrainingState> {
    side_queries(Some(records), library, theorems)
        .0
        .into_iter()
        .map(|q| crate::index::dense::TrainingState {
            theorem: q.theorem,
            goal: q.goal,
            premises: q.relevant,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file_with(bytes: &[u8]) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("states.jsonl");
        std::fs::write(&path, bytes).unwrap();
        (dir, path)
    }

    const RECORD: &str = r#"{"goal":"1 goal\n  s : nat\n  ============================\n  s <= s","premises":["Ledger.Stock.le_refl"],"theorem":"Ledger.Stock.t","file":"Stock.v","line":3,"tactic":"apply le_refl."}"#;

    #[test]
    fn records_are_read_and_blank_lines_skipped() {
        let (_d, path) = file_with(format!("{RECORD}\n\n{RECORD}").as_bytes());
        let records = read_states(&path).unwrap();
        assert_eq!(records.len(), 2);
        assert_eq!(records[1].premises, ["Ledger.Stock.le_refl"]);
    }

    #[test]
    fn bad_lines_are_refused_with_their_line() {
        let (_d, path) = file_with(format!("{RECORD}\n{{\"goal\": 1}}\n").as_bytes());
        let e = read_states(&path).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("states.jsonl"), "{e}");
        let (_d, path) = file_with(b"\xff\xfe\n");
        let e = read_states(&path).unwrap_err().to_string();
        assert!(e.contains("line 1") && e.contains("UTF-8"), "{e}");
        let (_d, path) = file_with(b"\n \n");
        assert!(matches!(read_states(&path), Err(StatesError::Empty(_))));
        let (_d, path) = file_with(&vec![b'x'; MAX_RECORD_BYTES + 10]);
        assert!(matches!(
            read_states(&path),
            Err(StatesError::TooLong { line: 1, .. })
        ));
        let missing = std::path::Path::new("/nonexistent/states.jsonl");
        assert!(matches!(read_states(missing), Err(StatesError::Io { .. })));
    }
}
