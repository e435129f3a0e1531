//! Inputs no one would write on purpose: unterminated comments and strings, deep nesting,
//! random text, and the fixture library cut up at random. The frontend must keep what it
//! could read, warn where it stopped, and never panic.

use proptest::prelude::*;

use super::{names, read};
use crate::extract::FileExtraction;
use crate::library::Severity;

/// Checks what must hold of any extraction of `text`.
fn well_formed(text: &str, x: &FileExtraction) {
    let len = text.len() as u32;
    assert!(!x.scopes.is_empty(), "scopes[0] is the top level");
    for d in &x.declarations {
        assert!(
            d.scope < x.scopes.len(),
            "{}: scope {} of {}",
            d.name,
            d.scope,
            x.scopes.len()
        );
        for span in std::iter::once(d.statement_span).chain(d.proof_span) {
            assert!(
                span.start.byte <= span.end.byte && span.end.byte <= len,
                "{}: {span:?}",
                d.name
            );
            assert!(text.is_char_boundary(span.start.byte as usize));
        }
        for r in d.statement_refs.iter().chain(&d.proof_refs) {
            assert!(
                r.offset < len,
                "{}: reference `{}` at {}",
                d.name,
                r.name,
                r.offset
            );
            assert!(!r.name.is_empty());
        }
        assert!(!d.name.is_empty());
    }
    for i in &x.imports {
        assert!(i.line >= 1);
    }
}

#[test]
fn unterminated_comment_keeps_what_came_before() {
    let x = read("def kept : Nat := 0\n/- never closed\ndef lost : Nat := 1\n");
    assert_eq!(names(&x), ["kept"]);
    assert_eq!(x.diagnostics.len(), 1);
    let d = &x.diagnostics[0];
    assert_eq!((d.severity, d.line), (Severity::Warning, 2));
    assert!(
        d.message.contains("comment opened at line 2"),
        "{}",
        d.message
    );
}

#[test]
fn unterminated_strings_keep_what_came_before() {
    let x = read("def kept : Nat := 0\n\ndef label : String := \"open\ndef lost : Nat := 1\n");
    assert_eq!(names(&x), ["kept", "label"]);
    assert_eq!(x.diagnostics.len(), 1);
    assert_eq!(x.diagnostics[0].line, 3);
    assert!(x.diagnostics[0].message.contains("string opened at line 3"));
    let x = read("def kept : Nat := 0\ndef label : String := s!\"total {kept\n");
    assert_eq!(x.diagnostics.len(), 1);
    assert!(
        x.diagnostics[0].message.contains("interpolated string"),
        "{}",
        x.diagnostics[0].message
    );
}

#[test]
fn unbalanced_end_is_a_warning_not_a_failure() {
    let x = read("end Ledger\ndef still : Nat := 0\nnamespace A\nend B\n");
    assert_eq!(names(&x), ["still"]);
    assert_eq!(x.diagnostics.len(), 2, "{:?}", x.diagnostics);
    assert!(x
        .diagnostics
        .iter()
        .all(|d| d.severity == Severity::Warning));
}

#[test]
fn deep_nesting_does_not_exhaust_the_stack() {
    let inputs = [
        format!("theorem t : True := {}trivial", "(".repeat(60_000)),
        format!("def f := {}", "fun x => ".repeat(20_000)),
        format!("theorem t : True := {}simp", "by ".repeat(20_000)),
        format!(
            "theorem t : True := by\n{}",
            (0..3_000)
                .map(|i| format!("{}· simp\n", " ".repeat(i % 200)))
                .collect::<String>()
        ),
        format!("def g := {}", "⟨[{".repeat(30_000)),
        format!(
            "def h := match x with {}",
            "| a => match a with ".repeat(5_000)
        ),
        "theorem u : True := ".to_string() + &"| ".repeat(50_000),
    ];
    for text in &inputs {
        let x = read(text);
        well_formed(text, &x);
    }
}

/// Tokens Lean files are made of, for random but Lean-like input.
const PIECES: &[&str] = &[
    "theorem",
    "lemma",
    "def",
    "instance",
    "structure",
    "class",
    "inductive",
    "where",
    "namespace",
    "section",
    "end",
    "open",
    "in",
    "variable",
    "universe",
    "attribute",
    "@[simp]",
    "private",
    "protected",
    "mutual",
    "notation",
    "macro",
    "syntax",
    "macro_rules",
    "alias",
    "export",
    "by",
    "fun",
    "λ",
    "=>",
    ":=",
    ":",
    "(",
    ")",
    "{",
    "}",
    "[",
    "]",
    "⟨",
    "⟩",
    "⦃",
    "⦄",
    "|",
    ",",
    ".",
    "·",
    "<;>",
    "←",
    "∀",
    "∃",
    "match",
    "with",
    "have",
    "let",
    "show",
    "from",
    "calc",
    "_",
    "intro",
    "obtain",
    "rcases",
    "cases",
    "induction",
    "simp",
    "rw",
    "exact",
    "apply",
    "omega",
    "x",
    "h",
    "Ledger.total",
    "Nat.succ",
    "«a b»",
    "_root_.x",
    "\"s\"",
    "s!\"{x}\"",
    "'c'",
    "-- c\n",
    "/- c -/",
    "/-- d -/",
    "\n",
    "\n  ",
    " ",
    "0",
    "1.5",
    "deriving",
    "extends",
    "termination_by",
    "decreasing_by",
    "set_option",
    "#eval",
    "import",
    "`(",
    "$x",
    "?_",
    "@",
];

fn lean_like() -> impl Strategy<Value = String> {
    prop::collection::vec(prop::sample::select(PIECES), 0..300).prop_map(|parts| parts.join(" "))
}

/// The fixture library, to cut up.
const FIXTURE: &[&str] = &[
    include_str!("../../../../index_fixtures/lean/Ledger/Basic.lean"),
    include_str!("../../../../index_fixtures/lean/Ledger/Balance.lean"),
    include_str!("../../../../index_fixtures/lean/Ledger/Audit.lean"),
];

/// Cuts `text` at char boundaries near the given fractions and splices in `insert`.
fn mutate(text: &str, a: f64, b: f64, insert: &str) -> String {
    let boundary = |f: f64| {
        let mut i = ((text.len() as f64) * f).min(text.len() as f64) as usize;
        while !text.is_char_boundary(i) {
            i -= 1;
        }
        i
    };
    let (lo, hi) = (boundary(a.min(b)), boundary(a.max(b)));
    format!("{}{insert}{}", &text[..lo], &text[hi..])
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn any_text_extracts_without_panicking(text in "\\PC{0,400}") {
        let x = read(&text);
        well_formed(&text, &x);
    }

    #[test]
    fn lean_like_text_extracts_without_panicking(text in lean_like()) {
        let x = read(&text);
        well_formed(&text, &x);
    }

    #[test]
    fn mutated_fixture_extracts_without_panicking(
        file in 0..FIXTURE.len(),
        a in 0.0f64..1.0,
        b in 0.0f64..0.05,
        insert in prop::sample::select(PIECES),
    ) {
        let text = mutate(FIXTURE[file], a, a + b, insert);
        let x = read(&text);
        well_formed(&text, &x);
    }
}

#[test]
fn the_fixture_reads_cleanly() {
    for text in FIXTURE {
        let x = read(text);
        well_formed(text, &x);
        assert!(x.diagnostics.is_empty(), "{:?}", x.diagnostics);
    }
}
