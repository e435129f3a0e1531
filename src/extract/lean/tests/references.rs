//! What statements and proofs refer to: premises, not locals, tactic names or keywords.
//! Expectations are from memory of Lean 4's tactic and term syntax.

use super::{decl, read, written};

#[test]
fn tactic_proofs_name_their_premises() {
    let x = read(
        "theorem stock_le (a b c : Nat) (h : a ≤ b) (h' : b ≤ c) : a ≤ c := by\n\
         \x20 rw [Nat.add_comm, ← Nat.mul_comm] at h\n\
         \x20 simp [Nat.le_refl, -Nat.le_antisymm] at h ⊢\n\
         \x20 simp only [Nat.succ_le] at *\n\
         \x20 exact Nat.le_trans h _\n\
         \x20 apply Nat.le_of_lt\n\
         \x20 refine Nat.lt_of_lt_of_le ?_ h'\n\
         \x20 grind [Nat.lt_irrefl]\n\
         \x20 · omega\n\
         \x20 · decide\n\
         \x20 constructor <;> simp [Nat.zero_le]\n\
         \x20 calc a ≤ b := h\n\
         \x20   _ ≤ c := Nat.le_of_eq rfl\n",
    );
    let d = decl(&x, "stock_le");
    // `-Nat.le_antisymm` erases a lemma: the proof does not use it.
    assert_eq!(
        written(&d.proof_refs),
        [
            "Nat.add_comm",
            "Nat.mul_comm",
            "Nat.le_refl",
            "Nat.succ_le",
            "Nat.le_trans",
            "Nat.le_of_lt",
            "Nat.lt_of_lt_of_le",
            "Nat.lt_irrefl",
            "Nat.zero_le",
            "Nat.le_of_eq",
            "rfl"
        ]
    );
    assert_eq!(written(&d.statement_refs), ["Nat"]);
}

#[test]
fn term_proofs_name_their_premises() {
    let x = read(
        "theorem term_style (n : Nat) (h : 0 < n) : ∃ m, m < n ∧ True :=\n\
         \x20 ⟨0, (Nat.lt_of_lt_of_le h (Nat.le_refl n)), trivial⟩\n\
         def term_match (m : Movement) : Nat :=\n\
         \x20 match m with\n\
         \x20 | Movement.receive k => k + Ledger.bonus\n\
         \x20 | .ship k => k\n\
         \x20 | audit => 0\n\
         def term_fun : Nat → Nat := fun x => Nat.succ x\n\
         def term_lambda : Nat → Nat := λ x ↦ Nat.pred x\n\
         def term_at : Nat := @Nat.add 1 2\n\
         theorem term_dot (h : 1 = 1) : 1 = 1 := (Eq.refl 1).trans h.symm\n\
         theorem term_field_of_constant : 2 ≤ 2 := Nat.le_refl.trans (Nat.le_refl 2)\n",
    );
    let refs = |name: &str| written(&decl(&x, name).proof_refs).join(" ");
    assert_eq!(
        written(&decl(&x, "term_style").statement_refs),
        ["Nat", "True"]
    );
    assert_eq!(refs("term_style"), "Nat.lt_of_lt_of_le Nat.le_refl trivial");
    // `.ship` needs the expected type and a bare `audit` reads as a variable.
    assert_eq!(refs("term_match"), "Movement.receive Ledger.bonus");
    assert_eq!(refs("term_fun"), "Nat.succ");
    assert_eq!(refs("term_lambda"), "Nat.pred");
    assert_eq!(refs("term_at"), "Nat.add");
    assert_eq!(refs("term_dot"), "Eq.refl");
    assert_eq!(decl(&x, "term_dot").dot_on_local, 1);
    // Field notation on a constant is written as one dotted name; resolution drops the
    // field.
    assert_eq!(
        refs("term_field_of_constant"),
        "Nat.le_refl.trans Nat.le_refl"
    );
}

#[test]
fn locals_bound_by_tactics_are_not_premises() {
    let x = read(
        "theorem locals_demo (xs : List Nat) : ∀ n ∈ xs, ∃ k, k = n := by\n\
         \x20 intro n hn\n\
         \x20 intros\n\
         \x20 rintro ⟨a, b⟩ | c\n\
         \x20 obtain ⟨w, hw⟩ : ∃ w, w = n := ⟨n, rfl⟩\n\
         \x20 rcases hw with ⟨u, rfl⟩ | v\n\
         \x20 cases xs with\n\
         \x20 | nil => exact absurd hn (List.not_mem_nil n)\n\
         \x20 | cons y ys => exact ⟨y, rfl⟩\n\
         \x20 induction n with\n\
         \x20 | zero => simp\n\
         \x20 | succ m ih => exact ih\n\
         \x20 have hk : n = n := rfl\n\
         \x20 let z := n + 1\n\
         \x20 set s := z + 1 with hs\n\
         \x20 by_cases hc : n = 0\n\
         \x20 generalize hg : n + 1 = g\n\
         \x20 next p q => exact p\n\
         \x20 case inl r => exact r\n\
         \x20 match n with\n\
         \x20 | 0 => rfl\n\
         \x20 | j + 1 => exact j\n\
         \x20 exact ⟨hk, hs, z, s, a, b, c, w, u, v, y, ys, m, ih, hc, hg, g⟩\n",
    );
    let d = decl(&x, "locals_demo");
    assert_eq!(
        written(&d.proof_refs),
        ["rfl", "absurd", "List.not_mem_nil", "rfl", "rfl"]
    );
    assert_eq!(written(&d.statement_refs), ["List", "Nat"]);
}

#[test]
fn term_binders_are_not_premises() {
    let x = read(
        "theorem binders_demo : ∀ (x : Nat) {y : Nat}, ∃ z : Nat, x + y = z ∧ ∀ w > z, w ≠ x :=\n\
         \x20 fun x => fun {y} => ⟨x + y, rfl, fun w hw => Nat.ne_of_gt (Nat.lt_trans (by omega) hw)⟩\n\
         def sets_demo : Nat → Prop := fun n => n ∈ {m : Nat | m ≤ Ledger.cap} ∧ ∃ p : {q : Nat // q > 0}, p.1 = n\n\
         def let_demo (n : Nat) : Nat :=\n\
         \x20 let twice := n + n\n\
         \x20 have h : twice = n + n := rfl\n\
         \x20 let ⟨a, b⟩ := (twice, h)\n\
         \x20 if hz : n = 0 then a else Ledger.scale a\n",
    );
    let refs = |name: &str| written(&decl(&x, name).proof_refs).join(" ");
    assert_eq!(
        written(&decl(&x, "binders_demo").statement_refs),
        ["Nat", "Nat", "Nat"]
    );
    assert_eq!(refs("binders_demo"), "rfl Nat.ne_of_gt Nat.lt_trans");
    assert_eq!(refs("sets_demo"), "Nat Ledger.cap Nat");
    assert_eq!(refs("let_demo"), "rfl Ledger.scale");
}

#[test]
fn auto_bound_implicits_are_locals() {
    // From memory of Lean 4's auto-bound implicits: an unbound single letter in a
    // signature is bound automatically; a longer unbound name is a constant.
    let x = read(
        "theorem auto_demo (x : α) (f : α → β) : f x = f x := rfl\n\
         theorem not_auto (x : Elem) : x = x := rfl\n",
    );
    assert!(decl(&x, "auto_demo").statement_refs.is_empty());
    assert_eq!(written(&decl(&x, "not_auto").statement_refs), ["Elem"]);
}

#[test]
fn dot_notation_on_locals_is_counted_not_referenced() {
    let x = read(
        "theorem dots (l : List Nat) (h : l.length = 0) : l.length + 0 = 0 := by\n\
         \x20 simp [h.symm, l.length_cons]\n\
         \x20 exact this.elim\n",
    );
    let d = decl(&x, "dots");
    assert!(d.proof_refs.is_empty(), "{:?}", d.proof_refs);
    assert_eq!(d.dot_on_local, 5);
}

#[test]
fn comments_strings_and_characters_hide_names() {
    let x = read(
        "def label (n : Nat) : String :=\n\
         \x20 -- Nat.fake_in_comment\n\
         \x20 /- Nat.also_fake /- nested -/ -/\n\
         \x20 \"Nat.fake_in_string\" ++ s!\"{Nat.toDigits 10 n}\" ++ toString 'N' ++ toString '\\''\n",
    );
    assert_eq!(
        written(&decl(&x, "label").proof_refs),
        ["Nat.toDigits", "toString", "toString"]
    );
}

#[test]
fn keywords_and_tactic_names_are_not_references() {
    let x = read(
        "def k : Type → Prop := fun _ => True\n\
         theorem tac : True := by\n\
         \x20 first | trivial | exact True.intro\n\
         \x20 try simp\n\
         \x20 all_goals omega\n\
         \x20 repeat constructor\n\
         \x20 open Nat in exact trivial\n\
         \x20 show True\n\
         \x20 exact?\n",
    );
    assert!(decl(&x, "k").statement_refs.is_empty());
    assert_eq!(written(&decl(&x, "k").proof_refs), ["True"]);
    assert_eq!(
        written(&decl(&x, "tac").proof_refs),
        ["True.intro", "trivial", "True"]
    );
}

#[test]
fn field_names_and_named_arguments_are_not_references() {
    let x = read(
        "def point : Point := { x := Ledger.origin, y := 0 }\n\
         def moved (p : Point) : Point := { p with x := Ledger.shift p.x }\n\
         def named : Nat := Nat.add (n := 1) (m := 2)\n\
         instance : ToString Point where\n\
         \x20 toString p := Ledger.render p\n",
    );
    assert_eq!(written(&decl(&x, "point").proof_refs), ["Ledger.origin"]);
    assert_eq!(written(&decl(&x, "moved").proof_refs), ["Ledger.shift"]);
    assert_eq!(written(&decl(&x, "named").proof_refs), ["Nat.add"]);
    let inst = decl(&x, "instToStringPoint");
    assert_eq!(written(&inst.proof_refs), ["Ledger.render"]);
    assert_eq!(written(&inst.statement_refs), ["ToString", "Point"]);
}

#[test]
fn equation_bodies_bind_their_pattern_variables() {
    let x = read(
        "def pick : Nat → List Nat → Nat\n\
         \x20 | 0, l => List.length l\n\
         \x20 | n + 1, x :: rest => pick n rest + x\n\
         \x20 | _, [] => Ledger.fallback\n",
    );
    assert_eq!(
        written(&decl(&x, "pick").proof_refs),
        ["List.length", "pick", "Ledger.fallback"]
    );
}

#[test]
fn references_carry_the_offset_of_the_name() {
    let text = "theorem at_offset : True := Ledger.witness\n";
    let x = read(text);
    let r = &decl(&x, "at_offset").proof_refs[0];
    assert_eq!(
        &text[r.offset as usize..r.offset as usize + r.name.len()],
        "Ledger.witness"
    );
}

#[test]
fn interpolation_with_nested_braces_and_strings() {
    let x = read(
        "def line (l : Nat) : String :=\n\
         \x20 s!\"{ {x := Ledger.origin}.x } and {\"inner }\" ++ Ledger.tag} done\" ++ Ledger.suffix\n",
    );
    assert_eq!(
        written(&decl(&x, "line").proof_refs),
        ["Ledger.origin", "Ledger.tag", "Ledger.suffix"]
    );
    assert!(x.diagnostics.is_empty(), "{:?}", x.diagnostics);
}
