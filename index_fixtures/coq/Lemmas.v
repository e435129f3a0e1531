(** Facts about single buffers: sizes, fullness, the invariant [well_formed]. *)

From Coq Require Import Arith List Lia.
From RingBuffer Require Import Core.
Import ListNotations.

Lemma size_empty {A} (n : nat) : size (@empty A n) = 0.
Proof. reflexivity. Qed.

Lemma empty_well_formed {A} (n : nat) : well_formed (@empty A n).
Proof. unfold well_formed. rewrite size_empty. apply Nat.le_0_l. Qed.

Lemma is_full_true {A} (b : buffer A) : is_full b = true -> capacity b <= size b.
Proof. unfold is_full. intros H. apply Nat.leb_le. exact H. Qed.

Lemma is_full_false {A} (b : buffer A) : is_full b = false -> size b < capacity b.
Proof. unfold is_full. intros H. apply Nat.leb_gt. exact H. Qed.

Lemma push_full {A} (x : A) (b : buffer A) : is_full b = true -> push x b = b.
Proof. intros H. unfold push. rewrite H. reflexivity. Qed.

Lemma size_push_not_full {A} (x : A) (b : buffer A) :
  is_full b = false -> size (push x b) = S (size b).
Proof.
  intros H. unfold push. rewrite H. unfold size. simpl.
  rewrite app_length. simpl. lia.
Qed.

Lemma capacity_push {A} (x : A) (b : buffer A) : capacity (b ⊕ x) = capacity b.
Proof. unfold push. destruct (is_full b); reflexivity. Qed.

Theorem push_well_formed {A} (x : A) (b : buffer A) :
  well_formed b -> well_formed (push x b).
Proof.
  intros Hwf. unfold well_formed in *.
  destruct (is_full b) eqn:Hfull.
  - rewrite (push_full x b Hfull). exact Hwf.
  - rewrite (size_push_not_full x b Hfull), capacity_push.
    apply is_full_false in Hfull. lia.
Qed.

Lemma size_push_le {A} (x : A) (b : buffer A) : size (push x b) <= S (size b).
Proof.
  destruct (is_full b) eqn:Hfull.
  - rewrite push_full by exact Hfull. apply Nat.le_succ_diag_r.
  - rewrite size_push_not_full by exact Hfull. apply le_n.
Qed.

Lemma is_empty_size {A} (b : buffer A) : is_empty b = true <-> size b = 0.
Proof. unfold is_empty. apply Nat.eqb_eq. Qed.

Lemma status_empty {A} (n : nat) : status_of (@empty A n) = Empty.
Proof. reflexivity. Qed.

Lemma pop_empty {A} (n : nat) : pop (@empty A n) = None.
Proof. reflexivity. Qed.

Lemma capacity_merge {A} (b c : buffer A) : capacity (b +++ c) = capacity b + capacity c.
Proof. reflexivity. Qed.

Lemma size_merge {A} (b c : buffer A) : size (b +++ c) = size b + size c.
Proof. unfold merge_buffers, size. simpl. apply app_length. Qed.

Corollary merge_well_formed {A} (b c : buffer A) :
  well_formed b -> well_formed c -> well_formed (b +++ c).
Proof.
  unfold well_formed. intros Hb Hc.
  rewrite size_merge, capacity_merge. lia.
Qed.

Lemma room_full {A} (b : buffer A) : is_full b = true -> room b = 0.
Proof. intros H. apply is_full_true in H. unfold room. lia. Qed.

Section Invariant.
  Variable A : Type.
  Variable b : buffer A.
  Hypothesis Hwf : well_formed b.

  Lemma room_size : room b + size b = capacity b.
  Proof. unfold room. unfold well_formed in Hwf. lia. Qed.

  Lemma full_no_room : is_full b = true -> size b = capacity b.
  Proof.
    intros H. apply is_full_true in H. unfold well_formed in Hwf. lia.
  Qed.

  Lemma push_all_well_formed (xs : list A) : well_formed (push_all xs b).
  Proof.
    revert b Hwf. induction xs as [| x rest IH]; intros c Hc; simpl.
    - exact Hc.
    - apply IH. apply push_well_formed. exact Hc.
  Qed.
End Invariant.

Module Occupancy.
  (** Counting the stored items that satisfy a test. *)
  Fixpoint count_in {A} (p : A -> bool) (l : list A) : nat :=
    match l with
    | [] => 0
    | x :: rest => (if p x then 1 else 0) + count_in p rest
    end.

  Definition count {A} (p : A -> bool) (b : buffer A) : nat := count_in p (items b).

  Lemma count_in_le {A} (p : A -> bool) (l : list A) : count_in p l <= length l.
  Proof.
    induction l as [| x rest IH]; simpl.
    - apply le_n.
    - destruct (p x); simpl; lia.
  Qed.

  Lemma count_le_size {A} (p : A -> bool) (b : buffer A) : count p b <= size b.
  Proof. unfold count, size. apply count_in_le. Qed.

  Lemma count_well_formed {A} (p : A -> bool) (b : buffer A) :
    well_formed b -> count p b <= capacity b.
  Proof.
    unfold well_formed. intros H.
    apply Nat.le_trans with (size b); [apply count_le_size | exact H].
  Qed.
End Occupancy.

Lemma resize_well_formed {A} (n : nat) (b : buffer A) : well_formed (resize n b).
Proof. unfold well_formed, resize, size. simpl. apply Nat.le_max_r. Qed.

Lemma resize_keeps_size {A} (n : nat) (b : buffer A) : size (resize n b) = size b.
Proof. reflexivity. Qed.

Lemma pop_size {A} (b : buffer A) x c :
  pop b = Some (x, c) -> S (size c) = size b.
Proof.
  unfold pop, size. destruct (items b) as [| y rest]; intros H.
  - discriminate.
  - injection H as Hx Hc. subst. reflexivity.
Qed.

Lemma pop_well_formed {A} (b : buffer A) x c :
  well_formed b -> pop b = Some (x, c) -> well_formed c.
Proof.
  unfold well_formed. intros Hwf Hpop.
  pose proof (pop_size b x c Hpop) as Hsize.
  unfold pop in Hpop. destruct (items b); [discriminate |].
  injection Hpop as _ Hc. subst c. simpl. lia.
Qed.
