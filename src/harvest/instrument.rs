//! Instrumenting a Coq file so that coqc prints the goal before every tactic.
//!
//! Takes a file's text and its logical module; gives the instrumented text, the tactic
//! sentences it numbered (with the enclosing declaration) and an [`OffsetMap`] from the
//! instrumented file's bytes back to the original's. Before each tactic sentence of each
//! proof it inserts `idtac "<open N>". Show. idtac "<close N>".`: `idtac` with a string
//! prints the same in every proof state and notation scope, and once however many goals are
//! focused; the insertion goes right before the tactic, so after a bullet, inside `{ }`,
//! after `Proof using` and before an ssreflect `by` line it runs on the goal the tactic
//! sees. Sentences come from the Coq frontend's lexer, proofs and declaration names from its
//! extractor. It does not run coqc and does not judge whether the proof is correct.

use super::displays::marker_line;
use crate::extract::coq::{extract, sentence_spans};
use crate::extract::text::LineIndex;

/// One tactic sentence that was given a marker.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct TacticSentence {
    /// The marker number (0, 1, ... in file order).
    pub marker: usize,
    /// Byte range in the original file, up to and including the `.`.
    pub start: u32,
    pub end: u32,
    /// 1-based line of the sentence in the original file.
    pub line: u32,
    /// The enclosing declaration, fully qualified.
    pub theorem: String,
}

/// Maps byte offsets of the instrumented file back to the original file.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct OffsetMap {
    /// (original offset of an insertion, bytes inserted there), by original offset.
    insertions: Vec<(u32, u32)>,
}

impl OffsetMap {
    /// The original offset of instrumented offset `at`, or `None` when `at` falls inside
    /// inserted text.
    pub fn original(&self, at: u32) -> Option<u32> {
        let mut shift = 0u32;
        for &(orig, len) in &self.insertions {
            let new_start = orig + shift;
            if at < new_start {
                break;
            }
            if at < new_start + len {
                return None;
            }
            shift += len;
        }
        at.checked_sub(shift)
    }
}

/// An instrumented file.
#[derive(Clone, Debug, Default)]
pub struct Instrumented {
    pub text: String,
    pub sentences: Vec<TacticSentence>,
    pub offsets: OffsetMap,
}

/// Proof commands that are not tactics: the marker goes before none of them.
fn is_proof_command(first_word: &str) -> bool {
    // Vernacular commands start with a capital (`Proof`, `Qed`, `Show`, `Check`, `Fail`,
    // `Focus`, `Hint`...); tactics and goal selectors do not (common practice in Coq).
    first_word
        .chars()
        .next()
        .is_none_or(|c| c.is_ascii_uppercase())
}

/// The marker commands inserted before a tactic numbered `n`.
fn markers(n: usize) -> String {
    format!(
        "idtac \"{}\". Show. idtac \"{}\". ",
        marker_line(true, n),
        marker_line(false, n)
    )
}

/// Instruments the file `text` whose logical module is `module`.
///
/// ```
/// use quarry::harvest::instrument::instrument;
/// let src = "Lemma t : True.\nProof. exact I. Qed.\n";
/// let i = instrument("Demo.T", src);
/// assert_eq!(i.sentences.len(), 1);
/// assert_eq!(i.sentences[0].theorem, "Demo.T.t");
/// assert!(i.text.contains("Show. idtac"));
/// ```
pub fn instrument(module: &str, text: &str) -> Instrumented {
    let extraction = extract(module, text);
    let spans = sentence_spans(text);
    let index = LineIndex::new(text);
    let mut proofs: Vec<(u32, u32, String)> = Vec::new();
    for d in &extraction.declarations {
        if let Some(p) = d.proof_span {
            // Mutual blocks share one proof: number its tactics once.
            if proofs.last().is_some_and(|l| l.0 == p.start.byte) {
                continue;
            }
            proofs.push((p.start.byte, p.end.byte, d.name.clone()));
        }
    }
    let mut out = Instrumented::default();
    let mut copied = 0usize;
    for s in &spans {
        if s.bullet {
            continue;
        }
        let Some(theorem) = proofs
            .iter()
            .find(|p| p.0 <= s.start && s.end <= p.1)
            .map(|p| p.2.clone())
        else {
            continue;
        };
        let sentence = text.get(s.start as usize..s.end as usize).unwrap_or("");
        let first_word: String = sentence
            .chars()
            .take_while(|c| c.is_alphanumeric() || *c == '_')
            .collect();
        if !sentence.is_empty() && first_word.is_empty() {
            // Starts with punctuation (`[`, `(`): a tactic, e.g. `(split; auto).`.
        } else if is_proof_command(&first_word) {
            continue;
        }
        let n = out.sentences.len();
        let inserted = markers(n);
        let at = s.start as usize;
        out.text.push_str(text.get(copied..at).unwrap_or(""));
        out.text.push_str(&inserted);
        copied = at;
        out.offsets
            .insertions
            .push((s.start, inserted.len() as u32));
        out.sentences.push(TacticSentence {
            marker: n,
            start: s.start,
            end: s.end,
            line: index.position(at).line,
            theorem,
        });
    }
    out.text.push_str(text.get(copied..).unwrap_or(""));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markers_go_after_bullets_and_braces_and_before_tactics_only() {
        let src =
            "Lemma p : True /\\ True.\nProof using.\nsplit.\n- exact I.\n- { exact I. }\nQed.\n";
        let i = instrument("M", src);
        let texts: Vec<&str> = i
            .sentences
            .iter()
            .map(|s| &src[s.start as usize..s.end as usize])
            .collect();
        assert_eq!(texts, ["split.", "exact I.", "exact I."]);
        assert!(i.text.contains("- idtac \"<<quarry-goal-open 1>>\""));
        assert!(i.text.contains("{ idtac \"<<quarry-goal-open 2>>\""));
        assert!(i.text.contains("Proof using.\nidtac"));
        assert_eq!(i.sentences[1].line, 4);
    }

    #[test]
    fn offsets_map_back_to_the_original() {
        let src = "Lemma p : True.\nProof. exact I. Qed.\n";
        let i = instrument("M", src);
        let orig = src.find("I.").unwrap_or(0) as u32;
        let new = i.text.find("I. Qed").unwrap_or(0) as u32;
        assert_eq!(i.offsets.original(new), Some(orig));
        // Inside the inserted markers there is no original offset.
        let inside = i.text.find("Show").unwrap_or(0) as u32;
        assert_eq!(i.offsets.original(inside), None);
        assert_eq!(i.offsets.original(3), Some(3));
    }

    #[test]
    fn statements_and_definitions_get_no_marker() {
        let src = "Definition d := 1.\nLemma q : d = 1.\nProof. reflexivity. Qed.\n";
        let i = instrument("M", src);
        assert_eq!(i.sentences.len(), 1);
        assert_eq!(i.sentences[0].theorem, "M.q");
    }
}
