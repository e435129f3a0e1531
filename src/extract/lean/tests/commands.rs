//! Commands that shape the naming context: namespaces, sections, `open`/`export`,
//! `variable`/`include`, attributes, modifiers, imports. Expectations are from memory of
//! Lean 4's syntax and naming rules.

use super::{decl, names, read, written};
use crate::extract::{OpenDirective, Scope};
use crate::library::{BinderStyle, DeclKind, Hypothesis, Visibility};

fn hyp(style: BinderStyle, names: &[&str], ty: &str) -> Hypothesis {
    Hypothesis {
        names: names.iter().map(|n| n.to_string()).collect(),
        ty: ty.to_string(),
        style,
    }
}

#[test]
fn names_are_qualified_by_the_namespace_chain() {
    // From memory of Lean 4: `theorem Foo.bar` inside `namespace Baz` is `Baz.Foo.bar`;
    // `_root_.x` is `x`; sections do not qualify; `private` keeps its written name.
    let x = read(
        "namespace Ledger\n\
         theorem Stock.nonneg : True := trivial\n\
         namespace Audit.Report\n\
         def total : Nat := 0\n\
         end Audit.Report\n\
         section Helpers\n\
         def helper : Nat := 1\n\
         end Helpers\n\
         theorem _root_.topLevel : True := trivial\n\
         private def secret : Nat := 2\n\
         protected def Stock.count : Nat := 3\n\
         end Ledger\n\
         def outside : Nat := 4\n",
    );
    assert_eq!(
        names(&x),
        [
            "Ledger.Stock.nonneg",
            "Ledger.Audit.Report.total",
            "Ledger.helper",
            "topLevel",
            "Ledger.secret",
            "Ledger.Stock.count",
            "outside"
        ]
    );
    assert_eq!(decl(&x, "Ledger.secret").visibility, Visibility::Private);
    assert_eq!(
        decl(&x, "Ledger.Stock.count").visibility,
        Visibility::Protected
    );
    assert_eq!(decl(&x, "Ledger.helper").visibility, Visibility::Public);
    assert!(x.diagnostics.is_empty(), "{:?}", x.diagnostics);

    let ns = |name: &str| x.scopes[decl(&x, name).scope].namespaces.clone();
    assert_eq!(x.scopes[0], Scope::default());
    // A dotted declaration name also opens its prefix while it is read (Lean elaborates
    // `def Stock.nonneg` inside `namespace Stock`).
    assert_eq!(ns("Ledger.Stock.nonneg"), ["Ledger", "Ledger.Stock"]);
    assert_eq!(
        ns("Ledger.Audit.Report.total"),
        ["Ledger", "Ledger.Audit", "Ledger.Audit.Report"]
    );
    assert_eq!(ns("Ledger.helper"), ["Ledger"]);
    assert_eq!(ns("topLevel"), ["Ledger"]);
    assert_eq!(decl(&x, "outside").scope, 0);
}

#[test]
fn opens_are_recorded_with_only_hiding_renaming_and_in() {
    // From memory of Lean 4's `open` forms; `open X renaming a → b` opens only `b`.
    let x = read(
        "open Nat\n\
         namespace Ledger\n\
         open List (map filter)\n\
         open Option hiding bind\n\
         open Function renaming comp → after\n\
         open scoped Classical\n\
         def a : Nat := 0\n\
         open Array in\n\
         def b : Nat := 1\n\
         def c : Nat := 2\n\
         end Ledger\n\
         def d : Nat := 3\n",
    );
    let opened = |name: &str| x.scopes[decl(&x, name).scope].opened.clone();
    let mut only = OpenDirective::all("List");
    only.only = Some(vec!["map".into(), "filter".into()]);
    let mut hiding = OpenDirective::all("Option");
    hiding.hiding = vec!["bind".into()];
    let mut renaming = OpenDirective::all("Function");
    renaming.only = Some(Vec::new());
    renaming.renaming = vec![("after".into(), "comp".into())];
    let in_ledger = vec![OpenDirective::all("Nat"), only, hiding, renaming];
    assert_eq!(opened("Ledger.a"), in_ledger);
    let mut with_array = in_ledger.clone();
    with_array.push(OpenDirective::all("Array"));
    assert_eq!(opened("Ledger.b"), with_array);
    assert_eq!(
        opened("Ledger.c"),
        in_ledger,
        "`open ... in` lasts one command"
    );
    assert_eq!(
        opened("d"),
        vec![OpenDirective::all("Nat")],
        "opens end with their namespace"
    );
    assert!(x.scopes[decl(&x, "d").scope].namespaces.is_empty());
}

#[test]
fn export_acts_like_an_open_of_the_listed_names() {
    let x =
        read("namespace Report\nexport Ledger (total credit)\ndef r : Nat := total\nend Report\n");
    let mut d = OpenDirective::all("Ledger");
    d.only = Some(vec!["total".into(), "credit".into()]);
    assert_eq!(x.scopes[decl(&x, "Report.r").scope].opened, vec![d]);
}

#[test]
fn variables_become_hypotheses_of_the_theorems_that_mention_them() {
    // From memory of Lean 4 (since variables stopped being included for proofs): a
    // theorem includes the variables its statement mentions, those their types mention,
    // instance binders all of whose variables are included, and `include`d ones; a
    // definition also those its body uses.
    let x = read(
        "section\n\
         variable {α : Type} [ToString α] (xs : List α) (n : Nat) {β : Type} [Inhabited β]\n\
         theorem uses_xs : xs.length = xs.length := rfl\n\
         theorem uses_n : n = n := rfl\n\
         theorem shadows (n : Nat) : n + 0 = n := rfl\n\
         def body_only : Nat := n + 1\n\
         theorem proof_only : True := by\n  have := n\n  trivial\n\
         end\n\
         theorem after_section (k : Nat) : k = k := rfl\n",
    );
    let d = decl(&x, "uses_xs");
    assert_eq!(
        d.hypotheses,
        [
            hyp(BinderStyle::Implicit, &["α"], "Type"),
            hyp(BinderStyle::Instance, &[], "ToString α"),
            hyp(BinderStyle::Explicit, &["xs"], "List α"),
        ]
    );
    assert_eq!(
        d.statement,
        "{α : Type} [ToString α] (xs : List α) : xs.length = xs.length"
    );
    assert_eq!(written(&d.statement_refs), ["ToString", "List"]);
    assert_eq!(
        decl(&x, "uses_n").hypotheses,
        [hyp(BinderStyle::Explicit, &["n"], "Nat")]
    );
    assert_eq!(decl(&x, "shadows").statement, "(n : Nat) : n + 0 = n");
    assert_eq!(decl(&x, "body_only").statement, "(n : Nat) : Nat");
    assert!(decl(&x, "proof_only").hypotheses.is_empty());
    assert_eq!(decl(&x, "after_section").statement, "(k : Nat) : k = k");
}

#[test]
fn variable_updates_and_include_are_followed() {
    let x = read(
        "variable (α : Type)\n\
         variable {α}\n\
         theorem same (a : α) : a = a := rfl\n\
         variable (n : Nat) (h : n > 0)\n\
         include h\n\
         theorem forced : True := trivial\n\
         omit h\n\
         theorem free : True := trivial\n",
    );
    assert_eq!(
        decl(&x, "same").hypotheses,
        [
            hyp(BinderStyle::Implicit, &["α"], "Type"),
            hyp(BinderStyle::Explicit, &["a"], "α")
        ]
    );
    assert_eq!(decl(&x, "forced").statement, "(n : Nat) (h : n > 0) : True");
    assert_eq!(decl(&x, "free").statement, ": True");
}

#[test]
fn attributes_from_brackets_and_attribute_commands() {
    let x = read(
        "@[simp, grind =] theorem a_simp : True := trivial\n\
         @[simp]\n\
         theorem b_simp : True := trivial\n\
         theorem c_plain : True := trivial\n\
         attribute [simp] c_plain\n\
         attribute [-simp] a_simp\n\
         attribute [local simp] b_simp in\n\
         theorem d_user : True := trivial\n\
         @[deprecated c_plain (since := \"2025-01-01\")] alias old_c := c_plain\n",
    );
    assert_eq!(decl(&x, "a_simp").attributes, ["grind ="]);
    assert_eq!(
        decl(&x, "b_simp").attributes,
        ["simp"],
        "`attribute ... in` is temporary"
    );
    assert_eq!(decl(&x, "c_plain").attributes, ["simp"]);
    let old = decl(&x, "old_c");
    assert_eq!(old.kind, DeclKind::Theorem);
    assert_eq!(
        old.attributes,
        ["deprecated c_plain (since := \"2025-01-01\")"]
    );
    assert_eq!(written(&old.proof_refs), ["c_plain"]);
}

#[test]
fn modifiers_do_not_hide_declarations() {
    let x = read(
        "noncomputable def nc : Nat := 0\n\
         partial def loop (n : Nat) : Nat := loop n\n\
         nonrec def nr : Nat := 0\n\
         unsafe def us : Nat := 0\n\
         @[inline] private def pi : Nat := 0\n\
         noncomputable section\n\
         def inside : Nat := 0\n\
         end\n",
    );
    assert_eq!(names(&x), ["nc", "loop", "nr", "us", "pi", "inside"]);
    assert_eq!(decl(&x, "pi").visibility, Visibility::Private);
    assert!(x.diagnostics.is_empty(), "{:?}", x.diagnostics);
}

#[test]
fn imports_with_module_system_forms() {
    let x = read(
        "module\n\
         prelude\n\
         import Ledger.Basic\n\
         public import Ledger.Balance\n\
         meta import Ledger.Macros\n\
         import all Ledger.Private\n\
         def after : Nat := 0\n",
    );
    let imports: Vec<(&str, bool, u32)> = x
        .imports
        .iter()
        .map(|i| (i.module.as_str(), i.export, i.line))
        .collect();
    assert_eq!(
        imports,
        [
            ("Ledger.Basic", false, 3),
            ("Ledger.Balance", true, 4),
            ("Ledger.Macros", false, 5),
            ("Ledger.Private", false, 6)
        ]
    );
    assert!(x.imports.iter().all(|i| i.opens && i.from.is_none()));
    assert_eq!(names(&x), ["after"]);
}

#[test]
fn doc_comments_and_module_docs_are_not_declarations() {
    let x = read(
        "/-! # Ledger\nThe module doc mentions `theorem fake`. -/\n\
         /-- The stock level. theorem not_real : False -/\n\
         def level : Nat := 0\n",
    );
    assert_eq!(names(&x), ["level"]);
    assert_eq!(decl(&x, "level").statement, ": Nat");
}

#[test]
fn iff_aliases_declare_both_directions() {
    // From memory of Batteries' `alias ⟨mp, mpr⟩ := h`: one declaration per named side.
    let x = read(
        "namespace Ledger\n\
         theorem stocked_iff : True ↔ True := Iff.rfl\n\
         alias ⟨stocked_of, of_stocked⟩ := stocked_iff\n\
         alias ⟨_, only_back⟩ := stocked_iff\n\
         end Ledger\n",
    );
    assert_eq!(
        names(&x),
        [
            "Ledger.stocked_iff",
            "Ledger.stocked_of",
            "Ledger.of_stocked",
            "Ledger.only_back"
        ]
    );
    for n in ["Ledger.stocked_of", "Ledger.of_stocked", "Ledger.only_back"] {
        assert_eq!(decl(&x, n).kind, DeclKind::Theorem);
        assert_eq!(written(&decl(&x, n).proof_refs), ["stocked_iff"]);
    }
}

#[test]
fn unknown_commands_at_column_zero_end_the_proof_before_them() {
    // Lean requires a command after a proof to start at column 0; an unknown one
    // (Mathlib's `assert_not_exists`, `deriving instance`) declares nothing here.
    let x = read(
        "theorem a : True := by\n  trivial\n\
         assert_not_exists Ledger.Unused\n\
         deriving instance Repr for Ledger.Movement\n\
         theorem b : True := Ledger.witness\n",
    );
    assert_eq!(names(&x), ["a", "b"]);
    assert!(
        decl(&x, "a").proof_refs.is_empty(),
        "{:?}",
        decl(&x, "a").proof_refs
    );
    assert_eq!(written(&decl(&x, "b").proof_refs), ["Ledger.witness"]);
}

#[test]
fn open_in_chains_and_prefixes_apply_to_the_next_command_only() {
    let x = read(
        "open Ledger in\n\
         open Audit in\n\
         set_option maxHeartbeats 400000 in\n\
         @[simp] theorem chained : True := trivial\n\
         theorem plain : True := trivial\n",
    );
    let opened = |n: &str| x.scopes[decl(&x, n).scope].opened.clone();
    assert_eq!(
        opened("chained"),
        [OpenDirective::all("Ledger"), OpenDirective::all("Audit")]
    );
    assert!(opened("plain").is_empty());
    assert_eq!(decl(&x, "chained").attributes, ["simp"]);
}
