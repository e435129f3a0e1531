(** A bounded ring buffer: stored items in arrival order and a fixed capacity.
    [push] refuses an item when the buffer is full; [pop] hands out the oldest. *)

From Coq Require Import Arith List.
Import ListNotations.

Record buffer (A : Type) := mk_buffer {
  capacity : nat;
  items : list A
}.
Arguments mk_buffer {A} _ _.
Arguments capacity {A} _.
Arguments items {A} _.

(** How full a buffer is. *)
Inductive status := Empty | Partial | Full.

Definition size {A} (b : buffer A) : nat := length (items b).

Definition is_full {A} (b : buffer A) : bool := capacity b <=? size b.

Definition is_empty {A} (b : buffer A) : bool := Nat.eqb (size b) 0.

Definition status_of {A} (b : buffer A) : status :=
  if is_empty b then Empty else if is_full b then Full else Partial.

Definition empty {A} (n : nat) : buffer A := mk_buffer n [].

Definition push {A} (x : A) (b : buffer A) : buffer A :=
  if is_full b then b else mk_buffer (capacity b) (items b ++ [x]).

Definition pop {A} (b : buffer A) : option (A * buffer A) :=
  match items b with
  | [] => None
  | x :: rest => Some (x, mk_buffer (capacity b) rest)
  end.

(* A buffer never holds more than its capacity. *)
Definition well_formed {A} (b : buffer A) : Prop := size b <= capacity b.

Definition room {A} (b : buffer A) : nat := capacity b - size b.

(** Two buffers side by side, as one buffer of both capacities. *)
Definition merge_buffers {A} (b c : buffer A) : buffer A :=
  mk_buffer (capacity b + capacity c) (items b ++ items c).

Infix "+++" := merge_buffers (at level 60, right associativity).

Notation "b ⊕ x" := (push x b) (at level 50, left associativity).

(** Pushing a list of items, oldest first. *)
Fixpoint push_all {A} (xs : list A) (b : buffer A) : buffer A :=
  match xs with
  | [] => b
  | x :: rest => push_all rest (push x b)
  end.

Definition resize {A} (n : nat) (b : buffer A) : buffer A :=
  mk_buffer (max n (size b)) (items b).
