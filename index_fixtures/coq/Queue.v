(** A queue of jobs held in a bounded ring buffer, with a count of refused jobs. *)

From Coq Require Import Arith List Lia.
From RingBuffer Require Import Core Lemmas.

Record queue (A : Type) := {
  store : buffer A;
  refused : nat
}.
Arguments Build_queue {A} _ _.
Arguments store {A} _.
Arguments refused {A} _.

Definition new_queue {A} (n : nat) : queue A := Build_queue (empty n) 0.

Definition enqueue {A} (x : A) (q : queue A) : queue A :=
  if is_full (store q)
  then Build_queue (store q) (S (refused q))
  else Build_queue (push x (store q)) (refused q).

Definition dequeue {A} (q : queue A) : option (A * queue A) :=
  match pop (store q) with
  | None => None
  | Some (x, b) => Some (x, Build_queue b (refused q))
  end.

Definition queue_ok {A} (q : queue A) : Prop := well_formed (store q).

Lemma new_queue_ok {A} (n : nat) : queue_ok (@new_queue A n).
Proof. unfold queue_ok, new_queue. simpl. apply empty_well_formed. Qed.

Lemma enqueue_ok {A} (x : A) (q : queue A) : queue_ok q -> queue_ok (enqueue x q).
Proof.
  unfold queue_ok, enqueue. intros H.
  destruct (is_full (store q)); simpl.
  - exact H.
  - apply push_well_formed. exact H.
Qed.

Lemma dequeue_ok {A} (q : queue A) x q' :
  queue_ok q -> dequeue q = Some (x, q') -> queue_ok q'.
Proof.
  unfold queue_ok, dequeue. intros H.
  destruct (pop (store q)) as [[y b] |] eqn:Hpop; [| discriminate].
  intros E. injection E as _ E. subst q'. simpl.
  exact (pop_well_formed (store q) y b H Hpop).
Qed.

Lemma enqueue_refused {A} (x : A) (q : queue A) :
  is_full (store q) = true -> refused (enqueue x q) = S (refused q).
Proof. intros H. unfold enqueue. rewrite H. reflexivity. Qed.

Lemma enqueue_size {A} (x : A) (q : queue A) :
  size (store (enqueue x q)) <= S (size (store q)).
Proof.
  unfold enqueue. destruct (is_full (store q)) eqn:Hfull; simpl.
  - apply Nat.le_succ_diag_r.
  - apply size_push_le.
Qed.

Section Fairness.
  Context {A : Type}.
  Variable q : queue A.

  Theorem refused_only_when_full (x : A) :
    refused (enqueue x q) <> refused q -> is_full (store q) = true.
  Proof.
    unfold enqueue. destruct (is_full (store q)) eqn:Hfull.
    - reflexivity.
    - simpl. intros H. exfalso. apply H. reflexivity.
  Qed.
End Fairness.

Example two_pushes : size (store (enqueue 2 (enqueue 1 (@new_queue nat 5)))) = 2.
Proof. reflexivity. Qed.
