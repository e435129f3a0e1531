import Ledger.Balance

/-!
# Audits: counting stock and reconciling the book
-/

namespace Ledger.Audit

open Ledger

/-- What a physical count says about the book. -/
inductive Finding where
  | balanced
  | surplus (extra : Nat)
  | shortfall (missing : Nat)
  deriving Repr, DecidableEq

/-- Compare a count with the quantity on the book. -/
def reconcile (counted onBook : Nat) : Finding :=
  if counted = onBook then Finding.balanced
  else if onBook < counted then Finding.surplus (counted - onBook)
  else Finding.shortfall (onBook - counted)

theorem reconcile_self (n : Nat) : reconcile n n = Finding.balanced := by
  simp [reconcile]

theorem reconcile_surplus {counted onBook : Nat} (h : onBook < counted) :
    reconcile counted onBook = Finding.surplus (counted - onBook) := by
  have hne : counted ≠ onBook := by omega
  simp [reconcile, hne, h]

theorem reconcile_shortfall {counted onBook : Nat} (h : counted < onBook) :
    reconcile counted onBook = Finding.shortfall (onBook - counted) := by
  have hne : counted ≠ onBook := by omega
  have hlt : ¬ onBook < counted := by omega
  simp [reconcile, hne, hlt]

/-- Count a book: what the count found, and the book with the count recorded. -/
def check (b : Book) (counted : Nat) : Finding × Book :=
  (reconcile counted b.onHand, b.record (Movement.audit counted))

theorem check_book (b : Book) (counted : Nat) :
    (check b counted).2.onHand = counted := by
  simp [check, Book.onHand_record]

theorem check_balanced (b : Book) : (check b b.onHand).1 = Finding.balanced := by
  simp [check, reconcile_self]

section Reports

variable {α : Type} [ToString α]

/-- A one-line report of a labelled value. -/
def report (label : String) (a : α) : String :=
  s!"{label}: {a} at {warehouseName}"

end Reports

mutual
  /-- Whether a history has an even number of shipments. -/
  def evenShips : List Movement → Bool
    | [] => true
    | Movement.ship _ :: ms => oddShips ms
    | _ :: ms => evenShips ms

  /-- Whether a history has an odd number of shipments. -/
  def oddShips : List Movement → Bool
    | [] => false
    | Movement.ship _ :: ms => evenShips ms
    | _ :: ms => oddShips ms
end

/-- A movement a count would have to explain: anything but a count itself. -/
def needsExplaining : Movement → Bool
  | Movement.audit _ => false
  | _ => true

open Movement in
theorem needsExplaining_receive (n : Nat) : needsExplaining (receive n) = true := rfl

set_option linter.unusedVariables false in
/-- A shipment needs explaining, whatever its amount. -/
theorem needsExplaining_ship (n : Nat) : needsExplaining (Movement.ship n) = true := rfl

end Ledger.Audit
