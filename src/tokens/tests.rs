//! One test per tokenizer rule, then properties over arbitrary text.

use super::*;
use proptest::prelude::*;

fn texts(text: &str) -> Vec<String> {
    Tokenizer::standard()
        .tokenize(text)
        .texts()
        .map(str::to_string)
        .collect()
}

fn texts_dropping(text: &str, drop: &[&str]) -> Vec<String> {
    let drop: NameSet = drop.iter().collect();
    Tokenizer::standard()
        .tokenize_dropping(text, &drop)
        .texts()
        .map(str::to_string)
        .collect()
}

fn kinds(text: &str) -> Vec<(String, TokenKind)> {
    Tokenizer::standard()
        .tokenize(text)
        .iter()
        .map(|t| (t.text.to_string(), t.kind))
        .collect()
}

#[test]
fn qualified_identifier_gives_whole_components_and_parts() {
    use TokenKind::*;
    assert_eq!(
        kinds("Nat.add_comm"),
        [
            ("nat.add_comm".to_string(), Identifier),
            ("nat".to_string(), IdentifierPart),
            ("add_comm".to_string(), IdentifierPart),
            ("add".to_string(), IdentifierPart),
            ("comm".to_string(), IdentifierPart),
        ]
    );
    assert_eq!(texts("Z.of_nat"), ["z.of_nat", "z", "of_nat", "of", "nat"]);
}

#[test]
fn camel_case_and_digits_split() {
    assert_eq!(texts("getElem?"), ["getelem", "get", "elem"]);
    assert_eq!(texts("mul2x"), ["mul2x", "mul", "2"]);
    assert_eq!(
        texts("RingBuffer.pushBack"),
        [
            "ringbuffer.pushback",
            "ringbuffer",
            "ring",
            "buffer",
            "pushback",
            "push",
            "back"
        ]
    );
    assert_eq!(
        texts("Nat.add_0_r"),
        ["nat.add_0_r", "nat", "add_0_r", "add", "0"]
    );
}

#[test]
fn a_part_is_not_repeated_within_one_identifier() {
    assert_eq!(
        texts("Nat.nat_add"),
        ["nat.nat_add", "nat", "nat_add", "add"]
    );
    // ... but repeats across identifiers are kept: term frequency counts.
    assert_eq!(texts("size size"), ["size", "size"]);
}

#[test]
fn decorations_are_stripped() {
    assert_eq!(texts("add_comm'"), ["add_comm", "add", "comm"]);
    assert_eq!(texts("List.get!"), ["list.get", "list", "get"]);
    assert_eq!(texts("hx₁₂"), ["hx"]);
}

#[test]
fn unicode_and_greek_letters_are_identifier_characters() {
    assert_eq!(texts("αβ"), ["αβ"]);
    assert_eq!(texts("Größe"), ["größe"]);
}

#[test]
fn guillemet_names_are_one_identifier() {
    assert_eq!(
        texts("Sched.«run queue»"),
        ["sched.run queue", "sched", "run queue", "run", "queue"]
    );
}

#[test]
fn single_letter_variables_are_dropped() {
    assert!(texts("x y α S x₁ h'").is_empty());
    assert_eq!(texts("Sort u_1 u_12 u_x"), ["sort", "u_x"]);
    assert_eq!(texts("f x = g x"), ["=", "eq"]);
}

#[test]
fn hypothesis_and_bound_names_are_dropped() {
    assert_eq!(
        texts_dropping("hcap ∧ buf.size ≤ cap", &["hcap", "buf", "cap"]),
        ["∧", "and", "size", "≤", "le"]
    );
    // Case matters: `Hfull` is not `hfull`.
    assert_eq!(texts_dropping("Hfull", &["hfull"]), ["hfull"]);
    // Lean's inaccessible names are dropped by their base name.
    assert_eq!(
        texts_dropping("inst✝¹ ih✝", &["inst✝¹", "ih✝"]),
        Vec::<String>::new()
    );
}

#[test]
fn root_prefix_is_removed() {
    assert_eq!(
        texts("_root_.Ledger.total"),
        ["ledger.total", "ledger", "total"]
    );
}

#[test]
fn syntax_keywords_give_nothing_and_quantifier_keywords_give_words() {
    assert!(texts("fun let in match with end then else by").is_empty());
    assert_eq!(texts("forall"), ["forall"]);
    assert_eq!(texts("∀"), ["∀", "forall"]);
    assert_eq!(texts("exists"), ["exists"]);
    // `Forall` is Coq's list predicate, a name like any other.
    assert_eq!(texts("Forall"), ["forall"]);
    assert_eq!(kinds("Forall")[0].1, TokenKind::Identifier);
}

#[test]
fn symbols_are_tokens_followed_by_their_words() {
    assert_eq!(texts("≤"), ["≤", "le"]);
    assert_eq!(texts("a ∣ b"), ["∣", "dvd"]);
    assert_eq!(texts("s ⊆ t"), ["⊆", "subset"]);
    assert_eq!(texts("∉"), ["∉", "not", "mem"]);
    assert_eq!(texts("x⁻¹"), ["⁻¹", "inv"]);
    assert_eq!(texts("f ∘ g"), ["∘", "comp"]);
    assert_eq!(texts("∑ i, f i"), ["∑", "sum"]);
    assert_eq!(texts("A ⟹ B"), ["⟹", "imp"]);
    assert_eq!(texts("Γ ⊢ φ"), ["⊢"]);
    assert_eq!(texts("ℝ≥0∞"), ["ℝ≥0∞", "ennreal"]);
    assert_eq!(texts("(2 : ℕ)"), ["2", "two", "ℕ", "nat"]);
    assert_eq!(texts("π"), ["π", "pi"]);
    assert_eq!(texts("sᶜ"), ["ᶜ", "compl"]);
    assert_eq!(texts("🎉"), ["🎉"]);
    let kinds = kinds("≤");
    assert_eq!(kinds[0].1, TokenKind::Symbol);
    assert_eq!(kinds[1].1, TokenKind::SymbolWord);
}

#[test]
fn ascii_operators_are_taken_longest_first() {
    assert_eq!(texts("p <-> q"), ["<->", "iff"]);
    assert_eq!(texts("p -> q"), ["->", "imp"]);
    assert_eq!(texts("a <= b"), ["<=", "le"]);
    assert_eq!(texts("a <=? b"), ["<=?", "leb"]);
    assert_eq!(texts("a =? b"), ["=?", "eqb"]);
    assert_eq!(texts("xs ++ ys"), ["xs", "++", "append", "ys"]);
    assert_eq!(texts("a :: xs"), ["::", "cons", "xs"]);
    assert_eq!(texts("P /\\ Q \\/ R"), ["/\\", "and", "\\/", "or"]);
    assert_eq!(texts("a <> b"), ["<>", "ne"]);
    assert_eq!(texts("~ P"), ["~", "not"]);
    // No space needed.
    assert_eq!(texts("n<=m"), ["<=", "le"]);
}

#[test]
fn numerals_are_kept_and_small_ones_named() {
    assert_eq!(texts("n + 0"), ["+", "add", "0", "zero"]);
    assert_eq!(texts("1 2 42"), ["1", "one", "2", "two", "42"]);
    assert_eq!(kinds("42")[0].1, TokenKind::Number);
}

#[test]
fn punctuation_gives_nothing() {
    assert!(texts("( ) [ ] { } ⟨ ⟩ , ; : := . => ↦ λ ⋯ ·").is_empty());
    assert_eq!(texts("[]"), ["[]", "nil"]);
}

#[test]
fn dot_notation_on_a_dropped_name_keeps_the_field() {
    assert_eq!(texts_dropping("l.balanced", &["l"]), ["balanced"]);
    assert_eq!(texts_dropping("hle.trans", &["hle"]), ["trans"]);
    assert_eq!(texts_dropping("b.size", &["b"]), ["size"]);
}

#[test]
fn display_artifacts_give_nothing() {
    assert_eq!(
        texts("Type* ?m.12 (n + 0)%nat"),
        ["type", "+", "add", "0", "zero", "nat"]
    );
}

#[test]
fn a_library_notation_teaches_its_symbol() {
    let xor = NotationInfo {
        symbols: vec!["⊕".into()],
        unfolds_to: Some("Buffer.xor".into()),
        unfolds_to_written: Some("xor".into()),
    };
    let append = NotationInfo {
        symbols: vec!["+++".into()],
        unfolds_to: None,
        unfolds_to_written: Some("Ledger.appendAll".into()),
    };
    let t = Tokenizer::with_notations([&xor, &append]);
    let got: Vec<String> = t
        .tokenize("a ⊕ b +++ c")
        .texts()
        .map(String::from)
        .collect();
    assert_eq!(
        got,
        ["⊕", "sum", "xor", "+++", "appendall", "append", "all"]
    );
    // The standard tokenizer reads `+++` as `++` then `+`.
    assert_eq!(texts("+++"), ["++", "append", "+", "add"]);
}

#[test]
fn sources_point_at_the_text() {
    let text = "h : Nat.succ n ≤ m";
    let tokens = Tokenizer::standard().tokenize(text);
    for t in tokens.iter() {
        let src = &text[t.source.clone()];
        assert!(!src.is_empty(), "{t}");
    }
    let succ = tokens.iter().find(|t| t.text == "succ").unwrap();
    assert_eq!(&text[succ.source], "succ");
    let le = tokens.iter().find(|t| t.text == "le").unwrap();
    assert_eq!(&text[le.source], "≤");
}

#[test]
fn display_renders_text_and_kind() {
    let tokens = Tokenizer::standard().tokenize("Nat.succ ≤ 0");
    assert_eq!(
        tokens.to_string(),
        "nat.succ/ident nat/part succ/part ≤/sym le/word 0/num zero/word"
    );
    assert_eq!(tokens.to_vec()[0].to_string(), "nat.succ/ident");
}

#[test]
fn tokenize_into_appends_and_reuses() {
    let t = Tokenizer::standard();
    let mut out = Tokens::new();
    t.tokenize_into("size", None, &mut out);
    t.tokenize_into("capacity", None, &mut out);
    assert_eq!(out.texts().collect::<Vec<_>>(), ["size", "capacity"]);
    out.clear();
    assert!(out.is_empty());
    t.tokenize_into("push", None, &mut out);
    assert_eq!(out.len(), 1);
}

fn is_lower_case(s: &str) -> bool {
    s.chars().flat_map(char::to_lowercase).eq(s.chars())
}

/// Text made of the pieces goals are made of, to reach the interesting paths more often
/// than uniform Unicode does.
fn goalish() -> impl Strategy<Value = String> {
    let piece = prop_oneof![
        Just("Nat.add_comm".to_string()),
        Just("«a b»".to_string()),
        Just("«".to_string()),
        Just("inst✝¹".to_string()),
        Just("?m.3".to_string()),
        Just("x⁻¹'".to_string()),
        Just("ℝ≥0∞".to_string()),
        Just("_root_.".to_string()),
        Just(".".to_string()),
        Just("%".to_string()),
        Just("Type*".to_string()),
        "[a-zA-Z0-9_'!?.]{1,6}",
        "[≤≥→↔∀∃∑∏⁻¹ᶜᵒᵈ₀₁«»✝⊢∘∣⊆⟹<>=:|/\\\\+*-]{1,4}",
        any::<char>().prop_map(|c| c.to_string()),
        Just(" ".to_string()),
    ];
    prop::collection::vec(piece, 0..24).prop_map(|v| v.concat())
}

proptest! {
    #[test]
    fn never_panics_and_tokens_are_non_empty_lower_case(text in "\\PC*") {
        let tokens = Tokenizer::standard().tokenize(&text);
        for t in tokens.iter() {
            prop_assert!(!t.text.is_empty());
            prop_assert!(is_lower_case(t.text), "{:?}", t.text);
            prop_assert!(t.source.end <= text.len());
            prop_assert!(text.is_char_boundary(t.source.start) && text.is_char_boundary(t.source.end));
        }
    }

    #[test]
    fn any_string_including_controls(text in any::<String>()) {
        let tokens = Tokenizer::standard().tokenize(&text);
        for t in tokens.iter() {
            prop_assert!(!t.text.is_empty());
            prop_assert!(is_lower_case(t.text), "{:?}", t.text);
        }
    }

    #[test]
    fn goal_like_text_is_deterministic(text in goalish(), drop in prop::collection::vec("[a-z]{1,3}", 0..4)) {
        let drop: NameSet = drop.iter().collect();
        let t = Tokenizer::standard();
        let a = t.tokenize_dropping(&text, &drop);
        let b = t.tokenize_dropping(&text, &drop);
        prop_assert_eq!(&a, &b);
        for tok in a.iter() {
            prop_assert!(!tok.text.is_empty());
            prop_assert!(is_lower_case(tok.text), "{:?}", tok.text);
        }
        // Appending into a used buffer gives the same tokens after the old ones.
        let mut out = t.tokenize("size");
        t.tokenize_into(&text, Some(&drop), &mut out);
        prop_assert_eq!(out.len(), a.len() + 1);
        for (x, y) in out.iter().skip(1).zip(a.iter()) {
            prop_assert_eq!(x, y);
        }
    }
}
