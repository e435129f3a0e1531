//! Unit tests of the Coq frontend: extraction of the forms users write, and no panics.

use super::*;

#[test]
fn placeholder() {
    let e = extract("T", "Lemma a : True. Proof. exact I. Qed.");
    assert_eq!(e.declarations.len(), 1);
}
