//! Lean names: which characters make an identifier, which words are reserved, how
//! `«guillemets»` are normalised, and the names Lean generates for declarations written
//! without one (anonymous instances, notations, macros).
//!
//! Takes written text; gives normalised names. It knows nothing of files or scopes, and it
//! does not check that a name exists.

/// Lean's `isLetterLike`: Greek (except `λ`, `Π`, `Σ`), Coptic, the letter-like block
/// (`ℕ`, `ℝ`) and the mathematical alphanumerics. From memory of Lean 4's
/// `Init/Meta.lean`.
fn is_letter_like(c: char) -> bool {
    let v = c as u32;
    ((0x3b1..=0x3c9).contains(&v) && v != 0x3bb)
        || ((0x391..=0x3a9).contains(&v) && v != 0x3a0 && v != 0x3a3)
        || (0x3ca..=0x3fb).contains(&v)
        || (0x1f00..=0x1ffe).contains(&v)
        || (0x2100..=0x214f).contains(&v)
        || (0x1d49c..=0x1d59f).contains(&v)
}

/// Lean's `isSubScriptAlnum`: subscript digits and letters (`x₁`, `aᵢ`).
fn is_subscript_alnum(c: char) -> bool {
    let v = c as u32;
    (0x2080..=0x2089).contains(&v)
        || (0x2090..=0x209c).contains(&v)
        || (0x1d62..=0x1d6a).contains(&v)
}

/// A character that may start an identifier component.
pub(super) fn is_id_first(c: char) -> bool {
    c.is_ascii_alphabetic() || c == '_' || is_letter_like(c)
}

/// A character that may continue an identifier component (`!` and `?` included, as in
/// `get!` and `exact?`).
pub(super) fn is_id_rest(c: char) -> bool {
    c.is_ascii_alphanumeric()
        || c == '_'
        || c == '\''
        || c == '!'
        || c == '?'
        || is_letter_like(c)
        || is_subscript_alnum(c)
}

/// Words the lexer reports as keywords rather than identifiers: command words, term
/// syntax, and the few tactic-argument words that are never names of declarations.
/// Tactic names are deliberately absent: Lean reads them as tactics only at the start of a
/// tactic, so `rfl` or `trivial` elsewhere are ordinary names.
const KEYWORDS: &[&str] = &[
    "Prop",
    "Sort",
    "Type",
    "abbrev",
    "alias",
    "at",
    "attribute",
    "axiom",
    "by",
    "calc",
    "catch",
    "class",
    "decreasing_by",
    "def",
    "deriving",
    "do",
    "elab",
    "elab_rules",
    "else",
    "end",
    "example",
    "export",
    "extends",
    "finally",
    "for",
    "from",
    "fun",
    "generalizing",
    "have",
    "haveI",
    "hiding",
    "if",
    "import",
    "in",
    "include",
    "inductive",
    "infix",
    "infixl",
    "infixr",
    "instance",
    "irreducible_def",
    "lemma",
    "let",
    "letI",
    "local",
    "macro",
    "macro_rules",
    "match",
    "mut",
    "mutual",
    "namespace",
    "nofun",
    "nomatch",
    "noncomputable",
    "nonrec",
    "notation",
    "omit",
    "only",
    "opaque",
    "open",
    "partial",
    "postfix",
    "prefix",
    "private",
    "protected",
    "renaming",
    "return",
    "scoped",
    "section",
    "set_option",
    "show",
    "sorry",
    "structure",
    "suffices",
    "syntax",
    "termination_by",
    "then",
    "theorem",
    "universe",
    "unless",
    "unsafe",
    "using",
    "variable",
    "where",
    "while",
    "with",
];

/// Whether `word` is one of [`KEYWORDS`].
pub(super) fn is_keyword(word: &str) -> bool {
    KEYWORDS.binary_search(&word).is_ok()
}

/// The components of a dotted name, keeping guillemets (`A.«b.c»` gives `A`, `«b.c»`).
pub(super) fn components(name: &str) -> Vec<&str> {
    let mut out = Vec::new();
    let mut depth = 0i32;
    let mut start = 0;
    for (i, c) in name.char_indices() {
        match c {
            '«' => depth += 1,
            '»' => depth -= 1,
            '.' if depth <= 0 => {
                out.push(&name[start..i]);
                start = i + 1;
            }
            _ => {}
        }
    }
    out.push(&name[start..]);
    out
}

/// The first component of a dotted name.
pub(super) fn head(name: &str) -> &str {
    components(name).first().copied().unwrap_or(name)
}

/// Whether a name has more than one component.
pub(super) fn is_dotted(name: &str) -> bool {
    components(name).len() > 1
}

/// Whether `s` can be written without guillemets.
fn is_plain_component(s: &str) -> bool {
    let mut chars = s.chars();
    match chars.next() {
        Some(c) if is_id_first(c) => chars.all(is_id_rest) && !is_keyword(s),
        _ => false,
    }
}

/// Writes one generated component, in guillemets when it is not a plain identifier.
pub(super) fn escape_component(s: &str) -> String {
    if is_plain_component(s) {
        s.to_string()
    } else {
        format!("«{s}»")
    }
}

/// The canonical spelling of a written name: guillemets removed from components that do
/// not need them (`«foo».bar` is `foo.bar`; `«term_+++_»` keeps them), since Lean treats
/// both spellings as the same name.
pub(super) fn normalize_name(written: &str) -> String {
    if !written.contains('«') {
        return written.to_string();
    }
    components(written)
        .into_iter()
        .map(
            |c| match c.strip_prefix('«').and_then(|c| c.strip_suffix('»')) {
                Some(inner) if is_plain_component(inner) => inner.to_string(),
                _ => c.to_string(),
            },
        )
        .collect::<Vec<_>>()
        .join(".")
}

/// Whether an unbound name in a signature is one Lean would bind automatically as an
/// implicit argument: a single letter (Latin or Greek) followed only by digits, subscripts
/// or primes (`α`, `n`, `x₁`, `β'`). This is Lean's strict rule; with the default
/// `relaxedAutoImplicit` Lean binds any unbound atomic name, which cannot be told apart
/// from a reference to a declaration outside the library. From memory of Lean 4's
/// `isValidAutoBoundImplicitName`.
pub(super) fn is_auto_bound_candidate(name: &str) -> bool {
    let mut chars = name.chars();
    let Some(first) = chars.next() else {
        return false;
    };
    (first.is_ascii_alphabetic() || is_letter_like(first))
        && chars.all(|c| c.is_ascii_digit() || is_subscript_alnum(c) || c == '\'')
}

/// Upper-cases the first character when it is an ASCII letter, as Lean's
/// `String.capitalize` does.
fn capitalize(s: &str) -> String {
    let mut chars = s.chars();
    match chars.next() {
        Some(c) => c.to_ascii_uppercase().to_string() + chars.as_str(),
        None => String::new(),
    }
}

/// The name Lean gives an anonymous instance: `inst` followed by the last component of
/// every constant of the instance type, capitalised (`instance : Repr Ledger` is
/// `instReprLedger`, `instance : ToString (List Sku)` is `instToStringListSku`). Bound
/// variables are skipped by the caller. From memory of Lean 4's `NameGen` for instances;
/// Lean works on the elaborated type, we on the written one.
pub(super) fn anonymous_instance_name(constants: &[String]) -> String {
    let mut name = String::from("inst");
    for c in constants {
        let last = components(c).last().copied().unwrap_or("");
        let bare = last
            .strip_prefix('«')
            .and_then(|l| l.strip_suffix('»'))
            .unwrap_or(last);
        name.push_str(&capitalize(bare));
    }
    escape_component(&name)
}

/// One item of a notation or syntax rule, for naming it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(super) enum SyntaxItem {
    /// A literal symbol (`" +++ "`, `"credit_simp"`).
    Atom(String),
    /// A place for a term or other category (`a`, `x:term`).
    Hole,
}

/// The name Lean gives a notation, macro or syntax rule written without `(name := ...)`:
/// the category followed by the atoms (trimmed, capitalised) with `_` for each hole
/// (`infixl " +++ "` is `«term_+++_»`, `macro "credit_simp" : tactic` is
/// `tacticCredit_simp`). From memory of Lean 4's `mkNameFromParserSyntax`.
pub(super) fn syntax_rule_name(category: &str, items: &[SyntaxItem]) -> String {
    let mut name = category.to_string();
    for item in items {
        match item {
            SyntaxItem::Atom(a) => name.push_str(&capitalize(a.trim())),
            SyntaxItem::Hole => name.push('_'),
        }
    }
    escape_component(&name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keywords_are_sorted_for_binary_search() {
        let mut sorted = KEYWORDS.to_vec();
        sorted.sort_unstable();
        assert_eq!(sorted, KEYWORDS);
        assert!(is_keyword("theorem") && is_keyword("fun") && !is_keyword("rfl"));
    }

    #[test]
    fn identifier_characters_follow_lean() {
        // From memory of Lean 4's identifier rules: `ℕ` and Greek letters are letters,
        // `λ` is not; `!`, `?`, `'` and subscripts may continue a name.
        assert!(is_id_first('ℕ') && is_id_first('α') && !is_id_first('λ'));
        assert!(!is_id_first('→') && !is_id_first('∀') && !is_id_first('1'));
        assert!(is_id_rest('₁') && is_id_rest('!') && is_id_rest('\''));
    }

    #[test]
    fn guillemets_are_dropped_only_where_unneeded() {
        assert_eq!(normalize_name("«credit»"), "credit");
        assert_eq!(normalize_name("Ledger.«term_+++_»"), "Ledger.«term_+++_»");
        assert_eq!(normalize_name("«a.b».c"), "«a.b».c");
        assert_eq!(normalize_name("«end»"), "«end»");
        assert_eq!(components("A.«b.c».d"), vec!["A", "«b.c»", "d"]);
    }

    #[test]
    fn auto_bound_names_are_single_letters() {
        for ok in ["α", "n", "x₁", "β'", "M2"] {
            assert!(is_auto_bound_candidate(ok), "{ok}");
        }
        for no in ["ab", "credit", "h_1", ""] {
            assert!(!is_auto_bound_candidate(no), "{no}");
        }
    }

    #[test]
    fn generated_names_follow_lean_conventions() {
        // From memory of the names Lean 4 gives: `instReprSku`, `«term_+++_»`,
        // `tacticCredit_simp`.
        let consts = vec!["Repr".to_string(), "Ledger.Sku".to_string()];
        assert_eq!(anonymous_instance_name(&consts), "instReprSku");
        let infix = [
            SyntaxItem::Hole,
            SyntaxItem::Atom(" +++ ".into()),
            SyntaxItem::Hole,
        ];
        assert_eq!(syntax_rule_name("term", &infix), "«term_+++_»");
        let tactic = [SyntaxItem::Atom("credit_simp".into())];
        assert_eq!(syntax_rule_name("tactic", &tactic), "tacticCredit_simp");
    }
}
