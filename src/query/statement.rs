//! Plain statements and declaration headers.
//!
//! Takes text that is no goal display; gives one goal. A declaration header — optional
//! attributes (`@[simp]`, `#[local]`) and modifiers (`private`, `Local`), an optional
//! keyword (`theorem`, `lemma`, `Lemma`, `Goal`, ...) and name, binder groups (`(x : T)`,
//! `{α : Type}`, `[Monoid α]`, `⦃x⦄`; bare names after a Coq keyword), then a top-level `:`
//! — gives its binders as hypotheses and the type as the conclusion, the body cut off at
//! the first top-level `:=` or sentence-ending `.`. Anything else is a statement, whole.
//! In both, leading `∀`/`forall` binders become hypotheses too (what `intro` would make):
//! evaluation asks with declaration statements, and a goal display would show them so.
//! Comments (`--`, `/- -/`, `(* *)`) are removed first.

use super::binders::{binder_group, normalize, peel_foralls, Lexed};
use super::goal::{Goal, GoalFormat, GoalHypothesis};
use crate::tokens::LexemeKind;

/// Keywords that open a declaration, and whether a name follows them.
const KEYWORDS: &[(&str, bool)] = &[
    ("theorem", true),
    ("lemma", true),
    ("def", true),
    ("abbrev", true),
    ("instance", true),
    ("axiom", true),
    ("opaque", true),
    ("example", false),
    ("Theorem", true),
    ("Lemma", true),
    ("Remark", true),
    ("Fact", true),
    ("Corollary", true),
    ("Proposition", true),
    ("Property", true),
    ("Example", true),
    ("Definition", true),
    ("Fixpoint", true),
    ("CoFixpoint", true),
    ("Instance", true),
    ("Axiom", true),
    ("Conjecture", true),
    ("Parameter", true),
    ("Hypothesis", true),
    ("Variable", true),
    ("Let", true),
    ("Goal", false),
];

const MODIFIERS: &[&str] = &[
    "private",
    "protected",
    "noncomputable",
    "nonrec",
    "partial",
    "unsafe",
    "Local",
    "Global",
    "Program",
    "Polymorphic",
    "Monomorphic",
];

/// `text` without Lean and Coq comments (nested block comments included), in one pass.
fn strip_comments(text: &str) -> String {
    let bytes = text.as_bytes();
    let mut out = String::with_capacity(text.len());
    let mut i = 0;
    let mut copied = 0;
    while i < bytes.len() {
        let rest = &bytes[i..];
        let (open, close): (&[u8], &[u8]) = if rest.starts_with(b"/-") {
            (b"/-", b"-/")
        } else if rest.starts_with(b"(*") {
            (b"(*", b"*)")
        } else if rest.starts_with(b"--") {
            out.push_str(&text[copied..i]);
            let end = text[i..].find('\n').map_or(text.len(), |e| i + e);
            out.push(' ');
            i = end;
            copied = end;
            continue;
        } else {
            i += 1;
            continue;
        };
        out.push_str(&text[copied..i]);
        let mut depth = 0usize;
        let mut j = i;
        while j < bytes.len() {
            if bytes[j..].starts_with(open) {
                depth += 1;
                j += 2;
            } else if bytes[j..].starts_with(close) {
                depth -= 1;
                j += 2;
                if depth == 0 {
                    break;
                }
            } else {
                j += 1;
            }
        }
        out.push(' ');
        i = j;
        copied = j;
    }
    // `copied` only ever lands on ASCII delimiters or the end, so it is a char boundary.
    out.push_str(&text[copied.min(text.len())..]);
    out
}

fn is_identifier(lexed: &Lexed<'_>, i: usize, text: &str) -> bool {
    lexed
        .lx
        .get(i)
        .is_some_and(|l| l.kind == LexemeKind::Identifier && l.text == text)
}

/// The statement or header `text` as one goal, and which of the two it was.
pub(crate) fn parse(text: &str) -> (GoalFormat, Goal) {
    let text = strip_comments(text);
    let lexed = Lexed::new(&text);
    let n = lexed.len();
    let mut i = 0;
    let mut keyword = false;
    // Attributes and modifiers.
    loop {
        if (lexed.is(i, "@") || lexed.is(i, "#")) && lexed.is(i + 1, "[") {
            match lexed.close_of(i + 1) {
                Some(k) => i = k + 1,
                None => break,
            }
        } else if MODIFIERS.iter().any(|m| is_identifier(&lexed, i, m)) {
            i += 1;
        } else {
            break;
        }
    }
    // Bare names are binders only after a declaration's name (`Lemma size_push b x : …`).
    let mut bare_binders = false;
    if let Some(&(_, named)) = KEYWORDS.iter().find(|(k, _)| is_identifier(&lexed, i, k)) {
        keyword = true;
        i += 1;
        if named
            && lexed
                .lx
                .get(i)
                .is_some_and(|l| l.kind == LexemeKind::Identifier)
        {
            i += 1;
            bare_binders = true;
        }
    }
    let after_keyword = i;
    let mut hypotheses = Vec::new();
    loop {
        if let Some((hyp, next)) = binder_group(&lexed, i) {
            hypotheses.push(hyp);
            i = next;
        } else if bare_binders
            && lexed.is_local_name(i)
            && !matches!(lexed.lx[i].text, "forall" | "exists" | "fun")
        {
            hypotheses.push(GoalHypothesis {
                names: vec![lexed.lx[i].text.to_string()],
                ty: String::new(),
                value: None,
            });
            i += 1;
        } else {
            break;
        }
    }
    let (format, start) = if lexed.is(i, ":") {
        (GoalFormat::DeclarationHeader, i + 1)
    } else if keyword {
        // `Goal P.`, or a header whose binders could not be read: keep what follows them.
        hypotheses.clear();
        (GoalFormat::DeclarationHeader, after_keyword)
    } else {
        hypotheses.clear();
        (GoalFormat::Statement, 0)
    };
    let end = body_start(&lexed, start).unwrap_or(n);
    let conclusion = lexed.slice(start, end);
    let (peeled, conclusion) = peel_foralls(conclusion);
    hypotheses.extend(peeled);
    let goal = Goal {
        case: None,
        hypotheses,
        conclusion: normalize(conclusion),
        bound_names: Vec::new(),
    };
    (format, goal)
}

/// The index of the top-level `:=` or sentence-ending `.` (followed by white space or the
/// end) at or after `from`: where the proof or body starts.
fn body_start(lexed: &Lexed<'_>, from: usize) -> Option<usize> {
    lexed.find_top_level(from, lexed.len(), |l| {
        l.kind == LexemeKind::Punctuation
            && (l.text == ":="
                || (l.text == "."
                    && lexed.text[l.end()..]
                        .chars()
                        .next()
                        .is_none_or(char::is_whitespace)))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hyp(names: &[&str], ty: &str) -> GoalHypothesis {
        GoalHypothesis {
            names: names.iter().map(|s| s.to_string()).collect(),
            ty: ty.to_string(),
            value: None,
        }
    }

    #[test]
    fn a_plain_statement_with_leading_binders() {
        let (format, g) = parse("∀ b : Buffer, size (push b x) ≤ capacity b");
        assert_eq!(format, GoalFormat::Statement);
        assert_eq!(g.hypotheses, [hyp(&["b"], "Buffer")]);
        assert_eq!(g.conclusion, "size (push b x) ≤ capacity b");
        let (format, g) = parse("(a + b) * c = a * c + b * c");
        assert_eq!(format, GoalFormat::Statement);
        assert!(g.hypotheses.is_empty());
        assert_eq!(g.conclusion, "(a + b) * c = a * c + b * c");
    }

    #[test]
    fn a_header_with_every_binder_style() {
        let (format, g) =
            parse("{α : Type*} [DecidableEq α] ⦃j k : Job α⦄ (s : Scheduler α) (h : j ∈ s) : k ∈ s.enqueue k");
        assert_eq!(format, GoalFormat::DeclarationHeader);
        assert_eq!(
            g.hypotheses,
            [
                hyp(&["α"], "Type*"),
                hyp(&[], "DecidableEq α"),
                hyp(&["j", "k"], "Job α"),
                hyp(&["s"], "Scheduler α"),
                hyp(&["h"], "j ∈ s"),
            ]
        );
        assert_eq!(g.conclusion, "k ∈ s.enqueue k");
    }

    #[test]
    fn a_full_lean_theorem_loses_keyword_name_and_proof() {
        let (format, g) = parse(
            "/-- Posting a balanced entry keeps the total. -/\n\
             @[simp] protected theorem Ledger.post_total (l : Ledger) (e : Entry)\n    \
             (h : e.balanced) : (l.post e).total = l.total := by\n  \
             simp [Ledger.post, h]",
        );
        assert_eq!(format, GoalFormat::DeclarationHeader);
        assert_eq!(g.hypotheses.len(), 3);
        assert_eq!(g.conclusion, "(l.post e).total = l.total");
    }

    #[test]
    fn a_coq_lemma_with_forall() {
        let (format, g) = parse(
            "Lemma enqueue_length : forall (q : queue) (j : job),\n  \
             length (jobs (enqueue j q)) = S (length (jobs q)).\nProof. intros. simpl. auto. Qed.",
        );
        assert_eq!(format, GoalFormat::DeclarationHeader);
        assert_eq!(g.hypotheses, [hyp(&["q"], "queue"), hyp(&["j"], "job")]);
        assert_eq!(
            g.conclusion,
            "length (jobs (enqueue j q)) = S (length (jobs q))"
        );
        let (_, g) =
            parse("Lemma size_push b x : size (push b x) = S (size b). (* by induction *)");
        assert_eq!(g.hypotheses, [hyp(&["b"], ""), hyp(&["x"], "")]);
        let (format, g) = parse("Goal forall n : nat, n + 0 = n.");
        assert_eq!(format, GoalFormat::DeclarationHeader);
        assert_eq!(g.conclusion, "n + 0 = n");
    }

    #[test]
    fn an_anonymous_lean_instance_and_example() {
        let (_, g) = parse("instance [Monoid α] : Inhabited (Buffer α) := ⟨Buffer.empty⟩");
        assert_eq!(g.hypotheses, [hyp(&[], "Monoid α")]);
        assert_eq!(g.conclusion, "Inhabited (Buffer α)");
        let (_, g) = parse("example (s : Stock) : s.restock 0 = s := rfl");
        assert_eq!(g.conclusion, "s.restock 0 = s");
    }

    #[test]
    fn comments_are_removed() {
        assert_eq!(strip_comments("a -- b\nc"), "a  \nc");
        assert_eq!(strip_comments("a (* b (* c *) d *) e"), "a   e");
        assert_eq!(strip_comments("a /- b -/ c"), "a   c");
        assert_eq!(strip_comments("(*"), " ");
    }
}
