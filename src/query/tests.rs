//! `parse_goal` end to end: detection, errors, and properties over random and mutated
//! displays.
//!
//! The displays are written as Lean 4, Coq 8.16 and Isabelle print goals, from memory, in
//! our own scenarios (ring buffer, stock ledger, scheduler).

use super::*;
use crate::tokens::Tokenizer;
use proptest::prelude::*;

const LEAN: &str = "\
case succ
cap : ℕ
b : RingBuffer α cap
hcap : 0 < cap
n✝ : ℕ
ih : (b.pushN n✝ x).size ≤ cap
⊢ ((b.pushN n✝ x).push x).size ≤ cap";

const COQ: &str = "\
1 goal
  
  s : stock
  item : sku
  qty, extra : nat
  Hqty : level s item = qty
  ============================
  level (restock s item extra) item = qty + extra";

const ISABELLE: &str = "\
proof (prove)
goal (1 subgoal):
 1. ⋀q j. j ∈ set (jobs q) ⟹ j ∈ set (jobs (tick q))";

#[test]
fn each_format_is_detected() {
    let cases = [
        (LEAN, GoalFormat::Lean),
        (COQ, GoalFormat::Coq),
        (ISABELLE, GoalFormat::Isabelle),
        (
            "∀ b : Buffer, size (push b x) ≤ capacity b",
            GoalFormat::Statement,
        ),
        (
            "(l : Ledger) (h : l.balanced) : l.total = 0",
            GoalFormat::DeclarationHeader,
        ),
        (
            "theorem Sched.tick_idle (s : Sched) : s.tick.idle = s.idle := by simp",
            GoalFormat::DeclarationHeader,
        ),
        (
            "Lemma restock_level : forall s i n, level (restock s i n) i = level s i + n.",
            GoalFormat::DeclarationHeader,
        ),
    ];
    for (text, format) in cases {
        let state = parse_goal(text).unwrap_or_else(|e| panic!("{text}: {e}"));
        assert_eq!(state.format, format, "{text}");
        assert!(!state.goals.is_empty());
    }
}

#[test]
fn lean_display_end_to_end() {
    let state = parse_goal(LEAN).unwrap();
    let g = &state.goals[0];
    assert_eq!(g.case.as_deref(), Some("succ"));
    assert_eq!(g.hypotheses.len(), 5);
    assert_eq!(g.conclusion, "((b.pushN n✝ x).push x).size ≤ cap");
    let terms = state.query_terms(Tokenizer::standard(), GoalSelection::First);
    let texts: Vec<&str> = terms.iter().map(|t| t.text.as_str()).collect();
    assert!(texts.contains(&"pushn"));
    assert!(texts.contains(&"le"));
    for local in ["cap", "b", "hcap", "n", "ih", "x"] {
        assert!(!texts.contains(&local), "{local} in {texts:?}");
    }
}

#[test]
fn coq_display_end_to_end() {
    let state = parse_goal(COQ).unwrap();
    let g = &state.goals[0];
    assert_eq!(g.hypotheses[2].names, ["qty", "extra"]);
    assert_eq!(
        g.conclusion,
        "level (restock s item extra) item = qty + extra"
    );
    let terms = state.query_terms(Tokenizer::standard(), GoalSelection::First);
    let texts: Vec<&str> = terms.iter().map(|t| t.text.as_str()).collect();
    assert_eq!(
        texts,
        ["level", "restock", "=", "eq", "+", "add", "stock", "sku", "nat"]
    );
}

#[test]
fn isabelle_display_end_to_end() {
    let state = parse_goal(ISABELLE).unwrap();
    let g = &state.goals[0];
    assert_eq!(g.hypotheses[0].names, ["q", "j"]);
    assert_eq!(g.hypotheses[1].ty, "j ∈ set (jobs q)");
    assert_eq!(g.conclusion, "j ∈ set (jobs (tick q))");
}

#[test]
fn bound_names_come_from_the_parse() {
    let state = parse_goal("h : ∀ slot, free slot → ¬busy slot\n⊢ ∃ job, runs job").unwrap();
    assert_eq!(state.goals[0].bound_names, ["slot", "job"]);
    let drop = state.goals[0].names_to_drop();
    assert!(drop.contains("h") && drop.contains("slot") && drop.contains("job"));
}

#[test]
fn empty_text_is_refused() {
    assert_eq!(parse_goal(""), Err(GoalError::Empty));
    assert_eq!(parse_goal(" \n\t \u{3000}"), Err(GoalError::Empty));
}

#[test]
fn oversized_text_is_refused_before_any_work() {
    let big = "x".repeat(10 * 1024 * 1024);
    assert_eq!(
        parse_goal(&big),
        Err(GoalError::TooLarge {
            bytes: big.len(),
            limit: DEFAULT_MAX_GOAL_BYTES
        })
    );
    let small = ParseOptions { max_bytes: 4 };
    assert!(matches!(
        parse_goal_with("a = b", &small),
        Err(GoalError::TooLarge { bytes: 5, limit: 4 })
    ));
    let msg = parse_goal(&big).unwrap_err().to_string();
    assert!(
        msg.contains("10485760 bytes") && msg.contains("262144"),
        "{msg}"
    );
}

#[test]
fn contentless_text_has_nothing_to_rank() {
    for text in [
        "(( ,, ))",
        "\u{FEFF}\u{200B}",
        "⊢",
        "====\n",
        "\u{7}\u{1b}[0m",
        "goal (1 subgoal):\n 1.",
    ] {
        assert_eq!(parse_goal(text), Err(GoalError::NothingToRank), "{text:?}");
    }
}

#[test]
fn finished_proofs_say_so() {
    for text in [
        "No goals",
        "No more goals.",
        "No more subgoals.",
        "Goals accomplished 🎉",
        "No subgoals!",
    ] {
        assert!(
            matches!(parse_goal(text), Err(GoalError::NoGoals { .. })),
            "{text}"
        );
    }
    let msg = parse_goal("No more goals.").unwrap_err().to_string();
    assert!(msg.contains("No more goals."), "{msg}");
}

#[test]
fn a_large_goal_parses_in_one_pass() {
    // About 256 KiB of one wrapped conclusion, many hypotheses, and nested binders: a
    // quadratic pass would take minutes here (speed itself is measured by benches, not here).
    let mut text = String::new();
    for i in 0..3000 {
        text.push_str(&format!("h{i} : Buffer.size (b.push x) ≤ cap\n"));
    }
    text.push_str("⊢ ");
    while text.len() < 200 * 1024 {
        text.push_str("∀ (a : ∃ s, ");
    }
    text.push_str("True");
    assert!(text.len() <= DEFAULT_MAX_GOAL_BYTES);
    let state = parse_goal(&text).unwrap();
    assert_eq!(state.goals[0].hypotheses.len(), 3000);
    let terms = state.query_terms(Tokenizer::standard(), GoalSelection::All);
    assert!(!terms.is_empty());
}

/// A few realistic displays to mutate.
fn display() -> impl Strategy<Value = String> {
    prop_oneof![
        Just(LEAN.to_string()),
        Just(COQ.to_string()),
        Just(ISABELLE.to_string()),
        Just(
            "(l : Ledger) {e : Entry} [Fintype α] : (l.post e).total = l.total := by simp"
                .to_string()
        ),
        Just("Lemma x : forall (n : nat), n + 0 = n. Proof. auto. Qed.".to_string()),
    ]
}

/// Cuts, inserts and duplicates at random places (on char boundaries).
fn mutated() -> impl Strategy<Value = String> {
    let edit = (
        any::<prop::sample::Index>(),
        any::<prop::sample::Index>(),
        "\\PC{0,6}|[\\n ⊢:=(){}\\[\\]⟦⟧⋀⟹,.]{0,4}",
    );
    (display(), prop::collection::vec(edit, 0..8)).prop_map(|(mut text, edits)| {
        for (a, b, insert) in edits {
            let boundaries: Vec<usize> = text
                .char_indices()
                .map(|(i, _)| i)
                .chain([text.len()])
                .collect();
            let x = boundaries[a.index(boundaries.len())];
            let y = boundaries[b.index(boundaries.len())];
            let (lo, hi) = (x.min(y), x.max(y));
            if insert.is_empty() {
                text.replace_range(lo..hi, "");
            } else {
                text.insert_str(lo, &insert);
            }
        }
        text
    })
}

fn check_state(state: &GoalState) -> Result<(), TestCaseError> {
    prop_assert!(!state.goals.is_empty());
    for g in &state.goals {
        prop_assert_eq!(g.conclusion.trim(), g.conclusion.as_str());
        for h in &g.hypotheses {
            prop_assert_eq!(h.ty.trim(), h.ty.as_str());
        }
    }
    let terms = state.query_terms(Tokenizer::standard(), GoalSelection::All);
    for t in &terms {
        prop_assert!(!t.text.is_empty() && t.weight > 0.0);
    }
    Ok(())
}

proptest! {
    #[test]
    fn never_panics_on_arbitrary_text(text in "\\PC{0,200}") {
        if let Ok(state) = parse_goal(&text) {
            check_state(&state)?;
        }
    }

    #[test]
    fn never_panics_on_any_string(text in any::<String>()) {
        let _ = parse_goal(&text);
    }

    #[test]
    fn never_panics_on_mutated_displays(text in mutated()) {
        let first = parse_goal(&text);
        prop_assert_eq!(&first, &parse_goal(&text));
        if let Ok(state) = first {
            check_state(&state)?;
        }
    }
}
