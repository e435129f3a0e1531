//! Declarations: statements, hypotheses, spans, kinds, structures, inductives, `where`
//! functions, `mutual` blocks, notations. Expectations are from memory of Lean 4's syntax
//! and naming rules.

use super::{decl, names, read, written};
use crate::library::{BinderStyle, DeclKind, Hypothesis, ProofEnding};

fn hyp(style: BinderStyle, names: &[&str], ty: &str) -> Hypothesis {
    Hypothesis {
        names: names.iter().map(|n| n.to_string()).collect(),
        ty: ty.to_string(),
        style,
    }
}

#[test]
fn statements_keep_binder_styles_and_the_conclusion() {
    // From memory of Lean 4's binder brackets: `()` explicit, `{}` implicit, `[]`
    // instance (named or not), `⦃⦄` and `{{}}` strict implicit.
    let x = read(
        "theorem stock_bound {n : Nat} (l : List Nat) [inst : Inhabited Nat] ⦃k : Nat⦄\n    \
         [DecidableEq Nat] {{m : Nat}} (h : l.length ≤ n) :\n    l.length ≤ n + k + m := by omega\n",
    );
    let d = decl(&x, "stock_bound");
    assert_eq!(d.kind, DeclKind::Theorem);
    assert_eq!(
        d.hypotheses,
        [
            hyp(BinderStyle::Implicit, &["n"], "Nat"),
            hyp(BinderStyle::Explicit, &["l"], "List Nat"),
            hyp(BinderStyle::Instance, &["inst"], "Inhabited Nat"),
            hyp(BinderStyle::Strict, &["k"], "Nat"),
            hyp(BinderStyle::Instance, &[], "DecidableEq Nat"),
            hyp(BinderStyle::Strict, &["m"], "Nat"),
            hyp(BinderStyle::Explicit, &["h"], "l.length ≤ n"),
        ]
    );
    assert_eq!(d.conclusion.as_deref(), Some("l.length ≤ n + k + m"));
    assert_eq!(
        d.statement,
        "{n : Nat} (l : List Nat) [inst : Inhabited Nat] ⦃k : Nat⦄ [DecidableEq Nat] {{m : Nat}} \
         (h : l.length ≤ n) : l.length ≤ n + k + m"
    );
    assert_eq!(d.proof_ending, Some(ProofEnding::Term));
    assert_eq!(d.dot_on_local, 2);
}

#[test]
fn spans_point_at_the_statement_and_the_proof() {
    let text = "-- header\ntheorem first_line : True :=\n  trivial\n";
    let x = read(text);
    let d = decl(&x, "first_line");
    let s = d.statement_span;
    assert_eq!((s.start.line, s.start.column), (2, 1));
    assert_eq!(
        &text[s.start.byte as usize..s.end.byte as usize],
        "theorem first_line : True"
    );
    let p = d.proof_span.expect("a proof span");
    assert_eq!((p.start.line, p.start.column), (3, 3));
    assert_eq!(&text[p.start.byte as usize..p.end.byte as usize], "trivial");
}

#[test]
fn kinds_of_definitions_instances_axioms_and_examples() {
    // Anonymous instance names from memory of Lean 4's naming: `inst` then the
    // capitalised constants of the class application.
    let x = read(
        "lemma l1 : True := trivial\n\
         abbrev Qty := Nat\n\
         axiom supplier_honest : True\n\
         opaque secretCode : Nat\n\
         instance instNamed : Inhabited Qty := ⟨0⟩\n\
         instance : Inhabited (List Qty) := ⟨[]⟩\n\
         instance (priority := low) [Inhabited α] : Inhabited (Option α) := ⟨none⟩\n\
         instance : Inhabited (List Qty) := ⟨[0]⟩\n\
         example : True := trivial\n\
         #eval 1 + 1\n\
         #check l1\n\
         theorem admitted : False := by sorry\n",
    );
    let kinds: Vec<(&str, DeclKind)> = x
        .declarations
        .iter()
        .map(|d| (d.name.as_str(), d.kind))
        .collect();
    assert_eq!(
        kinds,
        [
            ("l1", DeclKind::Theorem),
            ("Qty", DeclKind::Definition),
            ("supplier_honest", DeclKind::Axiom),
            ("secretCode", DeclKind::Definition),
            ("instNamed", DeclKind::Instance),
            ("instInhabitedListQty", DeclKind::Instance),
            ("instInhabitedOption", DeclKind::Instance),
            ("instInhabitedListQty_1", DeclKind::Instance),
            ("admitted", DeclKind::Theorem),
        ]
    );
    assert_eq!(decl(&x, "supplier_honest").proof_span, None);
    assert_eq!(decl(&x, "supplier_honest").proof_ending, None);
    assert_eq!(
        decl(&x, "admitted").proof_ending,
        Some(ProofEnding::Admitted)
    );
    assert_eq!(
        decl(&x, "instInhabitedOption").statement,
        "[Inhabited α] : Inhabited (Option α)"
    );
}

#[test]
fn structures_give_constructor_fields_and_parent_projections() {
    let x = read(
        "structure Point where\n  x : Nat\n  y : Nat := 0\n  deriving Repr\n\
         structure Bin extends Point where\n  make ::\n  label : String\n  (w h : Nat)\n  \
         {tag : Nat}\n  x := 5\n\
         class Shelved (α : Type) extends Inhabited α where\n  shelf : α → Nat\n\
         class inductive Valid : Nat → Prop where\n  | zero : Valid 0\n",
    );
    assert_eq!(
        names(&x),
        [
            "Point",
            "Point.mk",
            "Point.x",
            "Point.y",
            "Bin",
            "Bin.make",
            "Bin.toPoint",
            "Bin.label",
            "Bin.w",
            "Bin.h",
            "Bin.tag",
            "Shelved",
            "Shelved.mk",
            "Shelved.toInhabited",
            "Shelved.shelf",
            "Valid",
            "Valid.zero"
        ]
    );
    assert_eq!(decl(&x, "Point").kind, DeclKind::Structure);
    assert_eq!(decl(&x, "Point.mk").kind, DeclKind::Constructor);
    assert_eq!(decl(&x, "Point.y").kind, DeclKind::Field);
    assert_eq!(decl(&x, "Point.y").statement, ": Nat");
    assert!(
        decl(&x, "Point.y").proof_span.is_some(),
        "the default value"
    );
    assert_eq!(
        decl(&x, "Point.mk").statement,
        "(x : Nat) (y : Nat) : Point"
    );
    assert_eq!(decl(&x, "Bin").statement, "extends Point");
    assert_eq!(
        decl(&x, "Bin.make").statement,
        "(toPoint : Point) (label : String) (w : Nat) (h : Nat) {tag : Nat} : Bin"
    );
    assert_eq!(decl(&x, "Shelved").kind, DeclKind::Structure);
    assert_eq!(decl(&x, "Shelved.toInhabited").statement, ": Inhabited α");
    assert_eq!(written(&decl(&x, "Shelved.shelf").statement_refs), ["Nat"]);
    assert_eq!(decl(&x, "Valid").kind, DeclKind::Inductive);
    assert_eq!(decl(&x, "Valid.zero").kind, DeclKind::Constructor);
}

#[test]
fn inductives_give_constructors() {
    let x = read(
        "inductive Slot (α : Type) where\n\
         \x20 /-- Nothing stored. -/\n\
         \x20 | empty : Slot α\n\
         \x20 | full (item : α) (count : Nat) : Slot α\n\
         \x20 deriving Repr\n\
         inductive Color | red | green\n",
    );
    assert_eq!(
        names(&x),
        [
            "Slot",
            "Slot.empty",
            "Slot.full",
            "Color",
            "Color.red",
            "Color.green"
        ]
    );
    let full = decl(&x, "Slot.full");
    assert_eq!(full.statement, "(item : α) (count : Nat) : Slot α");
    assert_eq!(full.conclusion.as_deref(), Some("Slot α"));
    assert_eq!(written(&full.statement_refs), ["Nat", "Slot"]);
    assert_eq!(decl(&x, "Slot").statement, "(α : Type)");
    assert_eq!(
        written(&decl(&x, "Slot").proof_refs),
        ["Slot", "Nat", "Slot"]
    );
}

#[test]
fn where_clauses_declare_auxiliary_definitions() {
    let x = read(
        "def total (xs : List Nat) : Nat := go 0 xs\n\
         where\n  go (acc : Nat) : List Nat → Nat\n    | [] => acc\n    | x :: rest => go (acc + x) rest\n\
         def countdown (n : Nat) : Nat :=\n  if h : n = 0 then 0 else countdown (n - 1)\n\
         termination_by n\n\
         decreasing_by omega\n",
    );
    assert_eq!(names(&x), ["total", "total.go", "countdown"]);
    // `go` in the body is the `where` function, which comes later in the file.
    assert_eq!(written(&decl(&x, "total").proof_refs), ["_root_.total.go"]);
    assert_eq!(
        written(&decl(&x, "total.go").proof_refs),
        ["_root_.total.go"]
    );
    assert_eq!(
        decl(&x, "total.go").statement,
        "(acc : Nat) : List Nat → Nat"
    );
    assert_eq!(written(&decl(&x, "countdown").proof_refs), ["countdown"]);
}

#[test]
fn set_option_in_and_mutual_blocks() {
    let x = read(
        "set_option maxRecDepth 1000 in\n\
         theorem deep : True := trivial\n\
         mutual\n  def isEven : Nat → Bool\n    | 0 => true\n    | n + 1 => isOdd n\n  \
         def isOdd : Nat → Bool\n    | 0 => false\n    | n + 1 => isEven n\n\
         end\n\
         def later : Bool := isEven 2\n",
    );
    assert_eq!(names(&x), ["deep", "isEven", "isOdd", "later"]);
    // `true` is the constant `Bool.true`, a reference like any other.
    assert_eq!(
        written(&decl(&x, "isEven").proof_refs),
        ["true", "_root_.isOdd"]
    );
    assert_eq!(
        written(&decl(&x, "isOdd").proof_refs),
        ["false", "_root_.isEven"]
    );
    assert_eq!(written(&decl(&x, "later").proof_refs), ["isEven"]);
    assert!(x.diagnostics.is_empty(), "{:?}", x.diagnostics);
}

#[test]
fn notations_macros_and_syntax_rules() {
    // Generated names from memory of Lean 4's `mkNameFromParserSyntax`.
    let x = read(
        "namespace Ledger\n\
         def credit (a b : Nat) : Nat := a + b\n\
         def debit (a b : Nat) : Nat := a - b\n\
         notation:65 a \" ⊕ \" b => credit a b\n\
         infixl:65 \" +++ \" => credit\n\
         infixr:70 \" ⊖ \" => debit\n\
         infix:50 \" ≈≈ \" => Eq\n\
         prefix:max \"√\" => Nat.sqrt\n\
         postfix:max \"‼\" => Nat.succ\n\
         notation (name := ledgerZero) \"𝟘\" => credit 0 0\n\
         local notation \"debit₀\" => debit 0\n\
         macro \"credit_simp\" : tactic => `(tactic| simp [credit])\n\
         macro \"twice \" x:term : term => `(credit $x $x)\n\
         syntax \"debit_simp\" : tactic\n\
         macro_rules\n  | `(tactic| debit_simp) => `(tactic| simp [debit])\n\
         end Ledger\n",
    );
    let info = |name: &str| {
        let d = decl(&x, name);
        assert_eq!(d.kind, DeclKind::Notation, "{name}");
        let n = d.notation.clone().expect("notation info");
        (n.symbols, n.unfolds_to_written)
    };
    let some = |s: &str| Some(s.to_string());
    assert_eq!(
        info("Ledger.«term_⊕_»"),
        (vec!["⊕".to_string()], some("credit"))
    );
    assert_eq!(
        info("Ledger.«term_+++_»"),
        (vec!["+++".to_string()], some("credit"))
    );
    assert_eq!(info("Ledger.«term_⊖_»").1, some("debit"));
    assert_eq!(info("Ledger.«term_≈≈_»").1, some("Eq"));
    assert_eq!(info("Ledger.«term√_»").1, some("Nat.sqrt"));
    assert_eq!(info("Ledger.«term_‼»").1, some("Nat.succ"));
    assert_eq!(
        info("Ledger.ledgerZero"),
        (vec!["𝟘".to_string()], some("credit"))
    );
    assert_eq!(info("Ledger.termDebit₀").1, some("debit"));
    assert_eq!(
        info("Ledger.tacticCredit_simp"),
        (vec!["credit_simp".to_string()], None)
    );
    assert_eq!(
        info("Ledger.termTwice_"),
        (vec!["twice".to_string()], some("credit"))
    );
    assert_eq!(info("Ledger.tacticDebit_simp").1, None);
    assert_eq!(
        written(&decl(&x, "Ledger.tacticCredit_simp").proof_refs),
        ["credit"]
    );
    assert_eq!(
        written(&decl(&x, "Ledger.tacticDebit_simp").proof_refs),
        ["debit"]
    );
    assert_eq!(
        written(&decl(&x, "Ledger.«term_⊕_»").proof_refs),
        ["credit"]
    );
    assert_eq!(
        decl(&x, "Ledger.«term_+++_»").statement,
        "infixl:65 \" +++ \" => credit"
    );
}

#[test]
fn guillemet_names_are_normalised() {
    let x = read(
        "def «stock level» : Nat := 0\n\
         theorem «stock level».nonneg : 0 ≤ «stock level» := Nat.zero_le _\n\
         def «plain» : Nat := «stock level»\n",
    );
    assert_eq!(
        names(&x),
        ["«stock level»", "«stock level».nonneg", "plain"]
    );
    assert_eq!(
        written(&decl(&x, "«stock level».nonneg").statement_refs),
        ["«stock level»"]
    );
    assert_eq!(written(&decl(&x, "plain").proof_refs), ["«stock level»"]);
}

#[test]
fn universes_are_not_references() {
    let x = read(
        "universe u v\n\
         def idU {α : Sort u} (a : α) : α := a\n\
         theorem pairU (α : Type u) (β : Type v) (γ : Type (max u w)) : True := trivial\n",
    );
    assert!(decl(&x, "idU").statement_refs.is_empty());
    assert_eq!(written(&decl(&x, "pairU").statement_refs), ["True"]);
}
