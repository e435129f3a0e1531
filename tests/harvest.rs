//! `quarry harvest` end to end: the CLI binary replays the Coq fixture
//! `index_fixtures/coq-harvest` (a stock ledger) with a real coqc.
//!
//! Outside source: coqc 8.16.1 (Debian's `coq`). The expected goals are the displays
//! coqc's `Show.` prints for these proofs, worked out by hand from the proof scripts (the
//! hypotheses after `intro`/`intros`, the goal after `unfold` and `split`) and checked
//! against coqc 8.16.1's output; the premises are what coqc's `.glob` resolves each written
//! name to (`Nat.le_add_l` is `Coq.Arith.PeanoNat.Nat.le_add_l`). Under `CI=true` coqc
//! must be present (installed with apt-get by `support::debian::coqc`).

mod support;

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use support::debian::coqc;

fn fixture() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq-harvest")
}

/// Runs `quarry harvest` on `roots`; gives (exit success, stderr, records).
fn harvest(roots: &[&Path], coqc: &Path) -> (bool, String, Vec<Value>) {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("no temporary folder: {e}"));
    let out = dir.path().join("states.jsonl");
    let run = Command::new(env!("CARGO_BIN_EXE_quarry"))
        .arg("harvest")
        .args(roots)
        .arg("--out")
        .arg(&out)
        .arg("--coqc")
        .arg(coqc)
        .output()
        .unwrap_or_else(|e| panic!("cannot run quarry: {e}"));
    let stderr = String::from_utf8_lossy(&run.stderr).into_owned();
    let records = std::fs::read_to_string(&out)
        .unwrap_or_default()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("bad JSON line {l}: {e}")))
        .collect();
    (run.status.success(), stderr, records)
}

/// One expected record: (file, line, theorem, tactic, premises, goal hypotheses, goal
/// conclusion).
type Expected = (
    &'static str,
    u64,
    &'static str,
    &'static str,
    &'static [&'static str],
    &'static str,
    &'static str,
);

const EXPECTED: &[Expected] = &[
    (
        "Audit.v",
        12,
        "Ledger.Audit.audited_true",
        "unfold audited.",
        &["Ledger.Audit.audited"],
        "c : nat",
        "audited c = true",
    ),
    // `Nat.eqb` is printed with its notation `=?` once `audited` is unfolded.
    (
        "Audit.v",
        13,
        "Ledger.Audit.audited_true",
        "apply Nat.eqb_refl.",
        &["Coq.Arith.PeanoNat.Nat.eqb_refl"],
        "c : nat",
        "(c =? c) = true",
    ),
    (
        "Audit.v",
        26,
        "Ledger.Audit.audit_closed",
        "apply Nat.add_0_l.",
        &["Coq.Arith.PeanoNat.Nat.add_0_l"],
        "c : nat",
        "0 + c = c",
    ),
    (
        "Stock.v",
        12,
        "Ledger.Stock.receive_grows",
        "unfold receive.",
        &["Ledger.Stock.receive"],
        "n, s : nat",
        "s <= receive n s",
    ),
    (
        "Stock.v",
        13,
        "Ledger.Stock.receive_grows",
        "apply Nat.le_add_l.",
        &["Coq.Arith.PeanoNat.Nat.le_add_l"],
        "n, s : nat",
        "s <= n + s",
    ),
    // After `split` and the bullet, only the first conjunct is displayed.
    (
        "Stock.v",
        20,
        "Ledger.Stock.on_hand_le",
        "unfold on_hand.",
        &["Ledger.Stock.on_hand"],
        "r, s : nat",
        "on_hand r s <= r",
    ),
    (
        "Stock.v",
        20,
        "Ledger.Stock.on_hand_le",
        "apply Nat.le_sub_l.",
        &["Coq.Arith.PeanoNat.Nat.le_sub_l"],
        "r, s : nat",
        "r - s <= r",
    ),
    // Inside `{ }` after the second bullet: the second conjunct.
    (
        "Stock.v",
        21,
        "Ledger.Stock.on_hand_le",
        "apply Nat.le_0_l.",
        &["Coq.Arith.PeanoNat.Nat.le_0_l"],
        "r, s : nat",
        "0 <= on_hand r s",
    ),
];

/// The display coqc 8.16 prints for one goal with hypotheses `hyps` (one line).
fn display(hyps: &str, conclusion: &str) -> String {
    format!("1 goal\n  \n  {hyps}\n  ============================\n  {conclusion}")
}

#[test]
fn the_ledger_fixture_gives_exactly_the_expected_records() {
    let Some(coqc) = coqc() else { return };
    let (ok, stderr, records) = harvest(&[&fixture()], &coqc);
    assert!(ok, "quarry harvest failed: {stderr}");
    let got: Vec<(String, u64, String, String, Vec<String>, String)> = records
        .iter()
        .map(|r| {
            let s = |k: &str| r[k].as_str().unwrap_or_default().to_string();
            let premises = r["premises"]
                .as_array()
                .map(|a| {
                    a.iter()
                        .filter_map(|p| p.as_str().map(String::from))
                        .collect()
                })
                .unwrap_or_default();
            (
                s("file"),
                r["line"].as_u64().unwrap_or(0),
                s("theorem"),
                s("tactic"),
                premises,
                s("goal"),
            )
        })
        .collect();
    let want: Vec<(String, u64, String, String, Vec<String>, String)> = EXPECTED
        .iter()
        .map(|e| {
            (
                e.0.to_string(),
                e.1,
                e.2.to_string(),
                e.3.to_string(),
                e.4.iter().map(|p| p.to_string()).collect(),
                display(e.5, e.6),
            )
        })
        .collect();
    assert_eq!(got, want, "stderr: {stderr}");
}

#[test]
fn extra_output_and_unnumbered_proofs_do_not_shift_displays() {
    let Some(coqc) = coqc() else { return };
    let (_, stderr, records) = harvest(&[&fixture()], &coqc);
    // `audited_true` prints a message and a `Show.` of its own before `unfold audited`;
    // the record after them still carries the goal that tactic sees (coqc 8.16 output).
    let unfold = records
        .iter()
        .find(|r| r["tactic"] == "unfold audited.")
        .unwrap_or_else(|| panic!("no record for `unfold audited.`; stderr: {stderr}"));
    assert_eq!(unfold["goal"], display("c : nat", "audited c = true"));
    assert!(!records
        .iter()
        .any(|r| r["goal"].as_str().is_some_and(|g| g.contains("auditor"))));
    // `audit_pending` is aborted: coqc's .glob still names `Nat.le_refl` and
    // `Nat.add_0_r` there, but the proof declares nothing, gets no marker and no record,
    // and the proof after it is aligned with its own displays.
    assert!(!records
        .iter()
        .any(|r| r["tactic"] == "rewrite Nat.add_0_r."));
    let closed = records
        .iter()
        .find(|r| r["theorem"] == "Ledger.Audit.audit_closed")
        .unwrap_or_else(|| panic!("no record for audit_closed; stderr: {stderr}"));
    assert_eq!(closed["goal"], display("c : nat", "0 + c = c"));
}

#[test]
fn a_file_that_does_not_compile_is_reported_and_skipped() {
    let Some(coqc) = coqc() else { return };
    let (ok, stderr, records) = harvest(&[&fixture()], &coqc);
    assert!(ok, "the other files replayed: {stderr}");
    // coqc 8.16 rejects `apply Nat.add_0_r` on `n = S n` (Broken.v line 8).
    assert!(
        stderr.contains("did not compile: Broken.v: line 8: Error"),
        "stderr: {stderr}"
    );
    assert!(
        stderr.contains("2 files replayed, 1 failed to compile, 8 records"),
        "stderr: {stderr}"
    );
    assert!(records.iter().all(|r| r["file"] != "Broken.v"));
    assert!(records.iter().any(|r| r["file"] == "Stock.v"));
}

#[test]
fn a_missing_root_and_a_missing_coqc_are_clear_errors() {
    let missing = Path::new("/no/such/ledger");
    let (ok, stderr, _) = harvest(&[missing], Path::new("coqc"));
    if coqc().is_some() {
        assert!(!ok);
        assert!(
            stderr.contains("library root `/no/such/ledger` does not exist"),
            "{stderr}"
        );
    }
    let (ok, stderr, _) = harvest(&[&fixture()], Path::new("/no/such/coqc"));
    assert!(!ok);
    assert!(
        stderr.contains("coqc `/no/such/coqc` cannot be run"),
        "{stderr}"
    );
}
