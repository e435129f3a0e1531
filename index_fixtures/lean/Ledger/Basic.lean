/-!
# Stock ledger: the vocabulary

Stock-keeping units, stock lines, the movements that change a quantity on hand, and the
books that record them. Core Lean 4 only.
-/

namespace Ledger

/-- A quantity of stock. -/
abbrev Qty := Nat

/-- A stock-keeping unit, identified by its code. -/
structure Sku where
  code : Nat
  deriving Repr, DecidableEq

/-- A stock line: an item and the quantity on hand. -/
structure Line where
  sku : Sku
  qty : Qty
  deriving Repr

/-- A line kept in a numbered storage bin. -/
structure Shelf extends Line where
  bin : Nat
  deriving Repr

/-- One movement of stock. -/
inductive Movement where
  /-- Goods received into stock. -/
  | receive (n : Nat)
  /-- Goods shipped out; stock never goes below zero. -/
  | ship (n : Nat)
  /-- A stock count: the quantity becomes what was counted. -/
  | audit (counted : Nat)
  deriving Repr, DecidableEq

namespace Movement

/-- The quantity after one movement. -/
def effect : Movement → Nat → Nat
  | receive n, q => q + n
  | ship n, q => q - n
  | audit c, _ => c

/-- How much a movement brings in. -/
def inbound : Movement → Nat
  | receive n => n
  | ship _ => 0
  | audit _ => 0

@[simp] theorem effect_receive (n q : Nat) : effect (receive n) q = q + n := rfl

@[simp] theorem effect_ship (n q : Nat) : effect (ship n) q = q - n := rfl

@[simp] theorem effect_audit (c q : Nat) : effect (audit c) q = c := rfl

end Movement

/-- A book: the opening line of one item and the movements since, oldest first. -/
structure Book where
  line : Line
  history : List Movement
  deriving Repr

/-- The quantity after replaying movements, oldest first, from `q`. -/
def replay (q : Nat) : List Movement → Nat
  | [] => q
  | m :: ms => replay (Movement.effect m q) ms

/-- The quantity on hand in a book. -/
def Book.onHand (b : Book) : Nat :=
  replay b.line.qty b.history

/-- Record one more movement. -/
def Book.record (b : Book) (m : Movement) : Book :=
  { b with history := b.history ++ [m] }

/-- An empty book for an item. -/
def Book.empty (s : Sku) : Book :=
  ⟨⟨s, 0⟩, []⟩

/-- Everything received in a list of movements. -/
def received : List Movement → Nat
  | [] => 0
  | m :: ms => Movement.inbound m + received ms

/-- Two histories, one after the other. -/
def merge (xs ys : List Movement) : List Movement := xs ++ ys

@[inherit_doc] infixl:65 " +++ " => merge

instance : Inhabited Sku := ⟨⟨0⟩⟩

instance : ToString Sku where
  toString s := "SKU-" ++ toString s.code

/-- Things that carry a stock-keeping unit. -/
class HasSku (α : Type) where
  sku : α → Sku

instance lineHasSku : HasSku Line := ⟨Line.sku⟩

/-- The name printed on reports; fixed by the deployment. -/
opaque warehouseName : String

end Ledger
