//! Tests of the reference scanner on statements, terms and proof scripts.

use super::*;
use crate::extract::coq::lexer::lex;

fn run(text: &str, mode: Mode) -> (Vec<String>, Vec<String>) {
    let lx = lex(text);
    let mut out = Scan::default();
    for s in &lx.sentences {
        scan(&lx.tokens[s.tokens.clone()], text, mode, &mut out);
    }
    let free: Vec<String> = out
        .free_refs(&HashSet::new())
        .into_iter()
        .map(|r| r.name)
        .collect();
    let mut bound: Vec<String> = out.bound.into_iter().collect();
    bound.sort();
    (free, bound)
}

#[test]
fn statement_binders_are_local() {
    let (free, bound) = run(
        "(n m : nat) {A : Type} `{Eq A} (l : list A) : forall k, n + k = plus m k.",
        Mode::Statement,
    );
    assert_eq!(free, ["nat", "Eq", "list", "plus"]);
    assert_eq!(bound, ["A", "k", "l", "m", "n"]);
}

#[test]
fn tactic_names_are_not_references() {
    let (free, _) = run(
        "intros n m H. symmetry. apply symmetry. rewrite Nat.add_comm in H. \
         auto with arith. eauto using le_S. destruct (le_lt_dec n m) as [Hle|Hlt]; \
         [apply foo | exact (bar _ Hlt)]. clear H. f_equal. apply f_equal.",
        Mode::Tactics,
    );
    assert_eq!(
        free,
        [
            "symmetry",
            "Nat.add_comm",
            "le_S",
            "le_lt_dec",
            "foo",
            "bar",
            "f_equal"
        ]
    );
}

#[test]
fn ssreflect_patterns_and_views() {
    let (free, bound) = run(
        "move=> x y /andP [Hx Hy]. rewrite -addnC /foo ?bar //=. apply/eqP. \
         case: n => [|n IH] //. have H2 : P x by apply: baz. exact: qux.",
        Mode::Tactics,
    );
    assert_eq!(
        free,
        ["andP", "addnC", "foo", "bar", "eqP", "P", "baz", "qux"]
    );
    assert!(bound.contains(&"H2".to_string()) && bound.contains(&"IH".to_string()));
}

#[test]
fn term_binders_and_patterns() {
    let (free, bound) = run(
        "fun (x : nat) y => match x with | S p => let q := f p in g q y | O => h end.",
        Mode::Term,
    );
    assert_eq!(free, ["nat", "S", "p", "f", "p", "g", "O", "h"]);
    assert_eq!(bound, ["q", "x", "y"]);
}

#[test]
fn ltac_match_binds_hypotheses() {
    let (free, bound) = run(
        "match goal with | [ H : context [plus ?a 0] |- _ ] => rewrite plus_0 in H end.",
        Mode::Tactics,
    );
    assert_eq!(free, ["plus", "plus_0"]);
    assert_eq!(bound, ["H", "a"]);
}
