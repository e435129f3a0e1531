(** Audits of the ledger: proofs that print on their own, and one left unfinished. *)

From Coq Require Import PeanoNat.

Definition audited (count : nat) : bool := Nat.eqb count count.

Lemma audited_true : forall c, audited c = true.
Proof.
  intro c.
  idtac "auditor: checking the count".
  Show.
  unfold audited.
  apply Nat.eqb_refl.
Qed.

Lemma audit_pending : forall c, c <= c + 0.
Proof.
  intro c.
  try (fail; apply Nat.le_refl).
  rewrite Nat.add_0_r.
Abort.

Lemma audit_closed : forall c, 0 + c = c.
Proof.
  intro c.
  apply Nat.add_0_l.
Qed.
