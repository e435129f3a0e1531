//! Unit tests of the Coq frontend: the forms users write, and no panic on any input.

use proptest::prelude::*;

use super::*;
use crate::extract::RawDeclaration;
use crate::library::BinderStyle;

fn names(e: &FileExtraction) -> Vec<(String, &'static str)> {
    e.declarations
        .iter()
        .map(|d| (d.name.clone(), d.kind.as_str()))
        .collect()
}

fn refs(d: &RawDeclaration) -> (Vec<&str>, Vec<&str>) {
    (
        d.statement_refs.iter().map(|r| r.name.as_str()).collect(),
        d.proof_refs.iter().map(|r| r.name.as_str()).collect(),
    )
}

#[test]
fn modules_qualify_names_and_sections_do_not() {
    let text = "Module Stock.\nSection S.\nVariable n : nat.\n\
                Lemma pos : n = n.\nProof. reflexivity. Qed.\nEnd S.\n\
                Module Type T.\nParameter Inline(10) t : Type.\nEnd T.\nEnd Stock.\n\
                Module M := Stock.\nDefinition after := 1.\n";
    let e = extract("Ledger.Basic", text);
    assert_eq!(
        names(&e),
        vec![
            ("Ledger.Basic.Stock.pos".to_string(), "theorem"),
            ("Ledger.Basic.Stock.T.t".to_string(), "axiom"),
            ("Ledger.Basic.after".to_string(), "definition"),
        ]
    );
    let pos = &e.declarations[0];
    assert_eq!(
        e.scopes[pos.scope].namespaces,
        ["Ledger.Basic", "Ledger.Basic.Stock"]
    );
    // The section variable the lemma mentions becomes its hypothesis.
    assert_eq!(pos.hypotheses[0].names, ["n"]);
    assert_eq!(pos.hypotheses[0].ty, "nat");
    assert_eq!(pos.conclusion.as_deref(), Some("n = n"));
    assert_eq!(pos.proof_ending, Some(ProofEnding::Qed));
    assert_eq!(
        e.scopes[e.declarations[2].scope].namespaces,
        ["Ledger.Basic"]
    );
}

#[test]
fn only_used_section_variables_become_hypotheses() {
    let text = "Section S.\nVariables (A : Type) (x y : A).\nHypothesis Hx : x = x.\n\
                Lemma uses_y : y = y.\nProof. reflexivity. Qed.\n\
                Lemma uses_h : True.\nProof. clear Hx. exact I. Qed.\nEnd S.\n";
    let e = extract("T", text);
    let hyps = |i: usize| -> Vec<Vec<String>> {
        e.declarations[i]
            .hypotheses
            .iter()
            .map(|h| h.names.clone())
            .collect()
    };
    assert_eq!(hyps(0), vec![vec!["A".to_string()], vec!["y".to_string()]]);
    assert_eq!(
        hyps(1),
        vec![
            vec!["A".to_string()],
            vec!["x".to_string()],
            vec!["Hx".to_string()]
        ]
    );
}

/// A projection `x.(f)` inside a constructor's type must not hide the constructors after
/// it. Found on iris 4.0's `heap_lang/lang.v` (Debian's libcoq-iris), whose `.glob`, written
/// by coqc, defines `FreeS`, `LoadS` and the rest after `AllocNS`'s `σ.(heap)`; quarry
/// lost them when `.(` was one token that no bracket counter opened.
#[test]
fn projections_keep_the_brackets_balanced() {
    let text = "Record ring := { cap : nat; used : nat }.\n\
                Inductive step : ring -> ring -> Prop :=\n\
                | PushS r : r.(used) < r.(cap) -> step r r\n\
                | PopS r : 0 < used r -> step r r.\n\
                Lemma room (r : ring) : r.(used) < r.(cap) -> 0 < cap r.\n\
                Proof. intros H. exact (PushS r H). Qed.\n";
    let e = extract("T", text);
    let got: Vec<&str> = e.declarations.iter().map(|d| d.name.as_str()).collect();
    assert_eq!(
        got,
        [
            "T.ring",
            "T.Build_ring",
            "T.cap",
            "T.used",
            "T.step",
            "T.PushS",
            "T.PopS",
            "T.room"
        ]
    );
    let room = &e.declarations[7];
    // The fields read by projection are references, and `r` stays a local after them.
    assert_eq!(refs(room).0, ["ring", "used", "cap", "cap"]);
    assert_eq!(refs(room).1, ["PushS"]);
}

#[test]
fn inductives_records_and_classes_declare_their_parts() {
    let text =
        "Inductive tree (A : Type) : Type := leaf | node (l : tree A) (x : A) (r : tree A)\n\
                with forest (A : Type) : Type := nil_f | cons_f : tree A -> forest A -> forest A.\n\
                Record slot := mk_slot { index : nat; #[canonical=no] taken :> bool }.\n\
                Structure pair_of := { first : nat ; second : nat }.\n\
                Class Default (A : Type) := default : A.\n";
    let e = extract("T", text);
    let got: Vec<&str> = e.declarations.iter().map(|d| d.name.as_str()).collect();
    assert_eq!(
        got,
        [
            "T.tree",
            "T.leaf",
            "T.node",
            "T.forest",
            "T.nil_f",
            "T.cons_f",
            "T.slot",
            "T.mk_slot",
            "T.index",
            "T.taken",
            "T.pair_of",
            "T.Build_pair_of",
            "T.first",
            "T.second",
            "T.Default",
            "T.default"
        ]
    );
    let node = &e.declarations[2];
    assert_eq!(node.kind, DeclKind::Constructor);
    // The parameter `A` is local to the constructors; `tree` is a reference.
    assert_eq!(refs(node).0, ["tree", "tree"]);
    // Mutual blocks see each other: `forest` starts where the block starts.
    assert_eq!(
        e.declarations[3].statement_span.start.byte,
        e.declarations[0].statement_span.start.byte
    );
    assert_eq!(e.declarations[9].kind, DeclKind::Field);
    assert_eq!(e.declarations[15].kind, DeclKind::Field);
}

#[test]
fn proofs_endings_and_bodies() {
    let text = "Theorem a : True. Proof. exact I. Qed.\n\
                Lemma b : True. exact I. Defined.\n\
                Lemma c : False. Admitted.\n\
                Lemma d : False. Proof. Abort.\n\
                Fact e : True. Proof I.\n\
                Definition f (n : nat) : nat := S n.\n\
                Goal True. exact I. Qed.\n\
                Fixpoint g (n : nat) {struct n} : nat := match n with O => O | S m => g m end\n\
                with h (n : nat) : nat := n.\n";
    let e = extract("T", text);
    let endings: Vec<(&str, Option<ProofEnding>)> = e
        .declarations
        .iter()
        .map(|d| (d.name.as_str(), d.proof_ending))
        .collect();
    assert_eq!(
        endings,
        [
            ("T.a", Some(ProofEnding::Qed)),
            ("T.b", Some(ProofEnding::Defined)),
            ("T.c", Some(ProofEnding::Admitted)),
            ("T.e", Some(ProofEnding::Term)),
            ("T.f", Some(ProofEnding::Term)),
            ("T.g", Some(ProofEnding::Term)),
            ("T.h", Some(ProofEnding::Term)),
        ]
    );
    let f = &e.declarations[4];
    assert_eq!(f.statement, "(n : nat) : nat");
    assert_eq!(f.hypotheses[0].style, BinderStyle::Explicit);
    assert_eq!(refs(f), (vec!["nat", "nat"], vec!["S"]));
    // `m` is a pattern variable, `g` the function itself.
    assert!(refs(&e.declarations[5]).1.contains(&"g"));
    let a = &e.declarations[0];
    let span = a.proof_span.expect("a proof span");
    assert_eq!(
        &text[span.start.byte as usize..span.end.byte as usize],
        "Proof. exact I. Qed."
    );
}

#[test]
fn proof_references_leave_out_tactics_and_locals() {
    let text = "Lemma l (n : nat) (H : n = 0) : n + 0 = n.\nProof.\n\
                intros m Hm. destruct (eq_dec n m) as [E|E] eqn:Heq.\n\
                - rewrite Nat.add_0_r. auto with arith.\n\
                - symmetry. apply (f_equal S) in Hm. exact (fun k => plus_n_O k).\n\
                Qed.\n";
    let e = extract("T", text);
    let (statement, proof) = refs(&e.declarations[0]);
    assert_eq!(statement, ["nat"]);
    assert_eq!(proof, ["eq_dec", "Nat.add_0_r", "f_equal", "S", "plus_n_O"]);
    let offset = e.declarations[0].proof_refs[1].offset as usize;
    assert_eq!(&text[offset..offset + 11], "Nat.add_0_r");
}

#[test]
fn imports_and_the_implicit_prelude() {
    let text = "Require Import Coq.Lists.List.\nFrom Coq Require Export Arith.\nRequire Bool.\n\
                Import ListNotations.\nModule Import M. Definition x := 1. End M.\n";
    let e = extract("Demo.A", text);
    let imports: Vec<(&str, Option<&str>, bool, bool, u32)> = e
        .imports
        .iter()
        .map(|i| {
            (
                i.module.as_str(),
                i.from.as_deref(),
                i.export,
                i.opens,
                i.line,
            )
        })
        .collect();
    assert_eq!(
        imports,
        [
            ("Coq.Init.Prelude", None, false, true, 1),
            ("Coq.Lists.List", None, false, true, 1),
            ("Arith", Some("Coq"), true, true, 2),
            ("Bool", None, false, false, 3),
        ]
    );
    let last = e.scopes.last().expect("a scope");
    let opened: Vec<&str> = last.opened.iter().map(|o| o.target.as_str()).collect();
    assert_eq!(opened, ["ListNotations", "Demo.A.M"]);
    assert!(extract("Coq.Init.Logic", "Definition x := 1.")
        .imports
        .is_empty());
}

#[test]
fn notations_give_symbols_and_what_they_unfold_to() {
    let text = "Infix \"+++\" := merge_buffers (at level 60).\n\
                Notation \"x ⊕ y\" := (xor x y) (at level 50) : type_scope.\n\
                Local Notation twice f := (fun x => f (f x)).\n\
                Reserved Notation \"a ** b\" (at level 40).\n";
    let e = extract("T", text);
    let info: Vec<(&str, Vec<String>, Option<&str>, Visibility)> = e
        .declarations
        .iter()
        .map(|d| {
            let n = d.notation.as_ref().expect("notation info");
            (
                d.name.as_str(),
                n.symbols.clone(),
                n.unfolds_to_written.as_deref(),
                d.visibility,
            )
        })
        .collect();
    assert_eq!(
        info,
        [
            (
                "T.x_'+++'_x",
                vec!["+++".to_string()],
                Some("merge_buffers"),
                Visibility::Public
            ),
            (
                "T.x_'⊕'_x",
                vec!["⊕".to_string()],
                Some("xor"),
                Visibility::Public
            ),
            (
                "T.twice",
                vec!["twice".to_string()],
                None,
                Visibility::Local
            ),
        ]
    );
    assert_eq!(refs(&e.declarations[1]).0, ["xor"]);
}

#[test]
fn where_clauses_declare_notations() {
    let text = "Reserved Notation \"a <+> b\" (at level 50).\n\
                Fixpoint join (a b : nat) : nat := match a with O => b | S k => S (k <+> b) end\n\
                where \"a <+> b\" := (join a b) : nat_scope.\n";
    let e = extract("T", text);
    let got: Vec<(&str, DeclKind)> = e
        .declarations
        .iter()
        .map(|d| (d.name.as_str(), d.kind))
        .collect();
    assert_eq!(
        got,
        [
            ("T.join", DeclKind::Definition),
            ("T.x_'<+>'_x", DeclKind::Notation)
        ]
    );
    let info = e.declarations[1].notation.as_ref().expect("notation info");
    assert_eq!(info.unfolds_to_written.as_deref(), Some("join"));
}

#[test]
fn attributes_and_visibility() {
    let text = "#[local] Instance i : Default nat := {}.\n\
                #[export, program] Instance j : Default bool.\n\
                Global Instance k : Default unit := tt.\n\
                Local Definition hidden := 0.\n";
    let e = extract("T", text);
    let got: Vec<(&str, Visibility, Vec<String>)> = e
        .declarations
        .iter()
        .map(|d| (d.name.as_str(), d.visibility, d.attributes.clone()))
        .collect();
    assert_eq!(
        got,
        [
            ("T.i", Visibility::Local, vec!["local".to_string()]),
            (
                "T.j",
                Visibility::Public,
                vec!["export".to_string(), "program".to_string()]
            ),
            ("T.k", Visibility::Public, vec!["global".to_string()]),
            ("T.hidden", Visibility::Local, vec!["local".to_string()]),
        ]
    );
}

#[test]
fn unterminated_comment_keeps_what_came_before() {
    let e = extract(
        "T",
        "Lemma a : True. Proof. exact I. Qed.\n(* left open\nLemma b : True.",
    );
    assert_eq!(names(&e), vec![("T.a".to_string(), "theorem")]);
    assert_eq!(e.diagnostics.len(), 1);
    assert_eq!(e.diagnostics[0].line, 2);
    assert_eq!(e.diagnostics[0].severity, Severity::Warning);
    let e = extract("T", "Definition s := \"open.\n");
    assert!(e.diagnostics[0].message.contains("string"));
}

const SAMPLE: &str = "Require Import List.\nModule M.\nSection S.\nVariable A : Type.\n\
    Inductive t := C (x : A) | D.\nRecord r := { f : nat; g : t }.\n\
    Lemma l : forall x : A, C x = C x.\nProof. intros x. - destruct x as [a|]; auto. { now apply eq_refl. } Qed.\n\
    Notation \"a <+> b\" := (plus a b) (at level 50).\nEnd S.\nEnd M.\n\
    (* (* nested *) \"*)\" *) Definition d := \"a\"\"b\".\n";

proptest! {
    #[test]
    fn never_panics_on_random_text(text in "\\PC{0,300}") {
        let _ = extract("P.Q", &text);
    }

    #[test]
    fn never_panics_on_mutated_sources(cut in 0usize..SAMPLE.len(), junk in "[ .(*)\"{}|:=a-z-]{0,8}") {
        let mut text = String::from(SAMPLE);
        let mut at = cut;
        while !text.is_char_boundary(at) {
            at -= 1;
        }
        text.insert_str(at, &junk);
        let e = extract("P.Q", &text);
        for d in &e.declarations {
            prop_assert!(d.scope < e.scopes.len());
            prop_assert!(d.statement_span.start.byte as usize <= text.len());
        }
        let _ = extract("P.Q", &text[..at]);
    }
}

/// Assembles a library from in-memory Coq files `(module, text)`.
fn library(files: &[(&str, &str)]) -> crate::library::Library {
    crate::extract::in_memory_library(crate::library::Language::Coq, files)
}

/// The names the proof of `from` has edges to.
fn proof_edges(lib: &crate::library::Library, from: &str) -> Vec<String> {
    let Some(d) = lib.declarations.iter().find(|d| d.name == from) else {
        panic!("no declaration `{from}` in the library");
    };
    let mut out: Vec<String> = lib
        .graph
        .premises(d.id)
        .map(|p| lib.declaration(p).name.clone())
        .collect();
    out.sort();
    out
}

/// Importing a module imports what its `Export`s name, and a library's `Require Export`s
/// are opened before its own names, which shadow theirs. The same shapes as iris 4.0's
/// `base_logic/base_logic.v` (`Module Import uPred. Export base_logic.bi.uPred. Export
/// derived.uPred. Export bi.bi. End uPred.`), whose `.glob` (Debian's libcoq-iris, written
/// by coqc) resolves `Import uPred` in a later file to base_logic's `uPred` and its lemmas
/// through those `Export`s.
#[test]
fn module_exports_are_followed_and_reexports_come_first() {
    let lib = library(&[
        (
            "Sched.Queue",
            "Module queue.\nLemma enqueue_grows : True.\nProof. exact I. Qed.\nEnd queue.\n",
        ),
        (
            "Sched.Timer",
            "Module queue.\nLemma tick_fires : True.\nProof. exact I. Qed.\nEnd queue.\n",
        ),
        (
            "Sched.All",
            "From Sched Require Export Queue Timer.\n\
             Module Import queue.\n  Export Queue.queue.\n  Export Timer.queue.\nEnd queue.\n",
        ),
        (
            "Sched.Use",
            "From Sched Require Import All.\nImport queue.\n\
             Lemma run : True.\nProof. pose proof enqueue_grows. exact tick_fires. Qed.\n",
        ),
    ]);
    assert_eq!(
        proof_edges(&lib, "Sched.Use.run"),
        [
            "Sched.Queue.queue.enqueue_grows",
            "Sched.Timer.queue.tick_fires"
        ]
    );
}
