(** A stock ledger: the quantity on hand after receipts and shipments. *)

From Coq Require Import PeanoNat.

Definition on_hand (received shipped : nat) : nat := received - shipped.

Definition receive (n stock : nat) : nat := n + stock.

Lemma receive_grows : forall n s, s <= receive n s.
Proof.
  intros n s.
  unfold receive.
  apply Nat.le_add_l.
Qed.

Lemma on_hand_le : forall r s, on_hand r s <= r /\ 0 <= on_hand r s.
Proof.
  intros r s.
  split.
  - unfold on_hand. apply Nat.le_sub_l.
  - { apply Nat.le_0_l. }
Qed.
