(** A ledger entry whose proof coqc rejects: the harvest reports it and goes on. *)

From Coq Require Import PeanoNat.

Lemma broken_entry : forall n : nat, n = S n.
Proof.
  intro n.
  apply Nat.add_0_r.
Qed.
