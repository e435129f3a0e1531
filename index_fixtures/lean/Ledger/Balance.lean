import Ledger.Basic

/-!
# Balances: replaying a history

How the quantity on hand moves as a book's movements are replayed.
-/

namespace Ledger

open Movement

section Replay

variable (q : Nat) (ms : List Movement)

@[simp] theorem replay_nil : replay q [] = q := rfl

@[simp] theorem replay_cons (m : Movement) :
    replay q (m :: ms) = replay (effect m q) ms := rfl

/-- Replaying two histories in turn is replaying them one after the other. -/
theorem replay_append (xs ys : List Movement) :
    replay q (xs ++ ys) = replay (replay q xs) ys := by
  induction xs generalizing q with
  | nil => rfl
  | cons m rest ih => simp only [List.cons_append, replay_cons, ih]

theorem replay_receive (n : Nat) :
    replay q (receive n :: ms) = replay (q + n) ms := by
  rw [replay_cons, effect_receive]

theorem replay_audit (c : Nat) : replay q (audit c :: ms) = replay c ms := by
  simp only [replay_cons, effect_audit]

/-- Shipping alone never raises the quantity on hand. -/
theorem replay_ships_le (ns : List Nat) : replay q (ns.map Movement.ship) ≤ q := by
  induction ns generalizing q with
  | nil => exact Nat.le_refl q
  | cons n rest ih =>
    simp only [List.map_cons, replay_cons, effect_ship]
    exact Nat.le_trans (ih (q - n)) (Nat.sub_le q n)

end Replay

private theorem effect_audit_ignores (c q r : Nat) :
    effect (audit c) q = effect (audit c) r := by
  simp only [effect_audit]

/-- After a count, what was on hand before it no longer matters. -/
theorem replay_audit_forgets (c q r : Nat) (ms : List Movement) :
    replay q (audit c :: ms) = replay r (audit c :: ms) := by
  rw [replay_cons, replay_cons, effect_audit_ignores c q r]

theorem received_append (xs ys : List Movement) :
    received (xs ++ ys) = received xs + received ys := by
  induction xs with
  | nil => simp [received]
  | cons m rest ih =>
    simp only [List.cons_append, received, ih]
    omega

attribute [simp] received_append

/-- Everything received, computed with an accumulator. -/
def receivedFast (ms : List Movement) : Nat :=
  go 0 ms
where
  -- The running total `acc` plus what the rest brings in.
  go (acc : Nat) : List Movement → Nat
    | [] => acc
    | m :: rest => go (acc + Movement.inbound m) rest

theorem receivedFast_go (acc : Nat) (ms : List Movement) :
    receivedFast.go acc ms = acc + received ms := by
  induction ms generalizing acc with
  | nil => simp [receivedFast.go, received]
  | cons m rest ih =>
    simp only [receivedFast.go, received, ih]
    omega

theorem receivedFast_eq (ms : List Movement) : receivedFast ms = received ms := by
  simp [receivedFast, receivedFast_go]

theorem Book.onHand_record (b : Book) (m : Movement) :
    (b.record m).onHand = effect m b.onHand := by
  simp only [Book.onHand, Book.record, replay_append, replay_cons, replay_nil]

namespace Book

/-- Two books agree when they show the same quantity on hand. -/
protected def Agree (b c : Book) : Prop := b.onHand = c.onHand

protected theorem Agree.refl (b : Book) : b.Agree b := rfl

theorem agree_record {b c : Book} (h : Book.Agree b c) (m : Movement) :
    Book.Agree (b.record m) (c.record m) := by
  unfold Book.Agree at *
  rw [onHand_record, onHand_record, h]

end Book

theorem replay_merge (q : Nat) (xs ys : List Movement) :
    replay q (xs +++ ys) = replay (replay q xs) ys := by
  unfold merge
  exact replay_append q xs ys

end Ledger
