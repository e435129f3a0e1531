//! The operator table: which symbols are one token, and the words library names use for them.
//!
//! Takes the standard table below and, optionally, the notation declarations of a library;
//! gives longest-first symbol matching for the lexer and the words each symbol stands for.
//! It knows nothing of identifiers or of goals.
//!
//! The words are the naming convention of the trade (common practice, from the names of
//! Lean 4 core, Mathlib and the Coq standard library, written from memory): a lemma about
//! `a + b ≤ c` is called `add_le_…`, one about `x ∈ s ∪ t` `mem_union`, so `+` also gives
//! `add`, `≤` gives `le`, `∈` gives `mem`, `∪` gives `union`.
//!
//! Precedence, for a library's notations ([`SymbolTable::learn`]):
//! - matching is longest-first over the standard and the library's symbols together, so a
//!   library's `+++` is one token even though `++` and `+` exist;
//! - a symbol in both keeps its standard words first, then the library's in the order the
//!   notations were given, without repeats (the library adds, it never removes);
//! - a new symbol is defined by the library alone;
//! - grouping punctuation (`(`, `,`, `:`, ...) stays punctuation whatever a library says.

use std::collections::HashMap;

use super::identifiers::{
    component_body, components, for_each_part, is_identifier_continue, is_identifier_start,
    push_clean_component, push_lower,
};
use crate::library::NotationInfo;

/// Written but meaningless for retrieval: never a token. Grouping, separators, the
/// binder arrows `=>` `↦` and `λ`, Lean's `·` placeholder, `⋯` (an elided proof), the
/// `✝` of inaccessible names, quotes.
const SYNTAX: &[&str] = &[
    "(", ")", "[", "]", "{", "}", "⟨", "⟩", "⦃", "⦄", ",", ";", ":", ":=", ".", "..", "@", "=>",
    "↦", "λ", "«", "»", "\"", "`", "'", "·", "⋯", "✝",
];

/// The standard symbols and their words (see the module comment for the convention).
const STANDARD: &[(&str, &[&str])] = &[
    // ASCII arithmetic and order.
    ("+", &["add"]),
    ("-", &["sub", "neg"]),
    ("*", &["mul"]),
    ("/", &["div"]),
    ("^", &["pow"]),
    ("%", &["mod"]),
    ("<", &["lt"]),
    (">", &["gt"]),
    ("<=", &["le"]),
    (">=", &["ge"]),
    ("=", &["eq"]),
    ("<>", &["ne"]),
    ("!=", &["ne"]),
    ("==", &["beq"]),
    // ASCII logic (Coq's spelling).
    ("~", &["not"]),
    ("->", &["imp"]),
    ("<->", &["iff"]),
    ("<-", &[]),
    ("/\\", &["and"]),
    ("\\/", &["or"]),
    ("\\", &["sdiff"]),
    ("||", &["or"]),
    ("&&", &["and"]),
    ("=?", &["eqb"]),
    ("<=?", &["leb"]),
    ("<?", &["ltb"]),
    // Lists and monads.
    ("++", &["append"]),
    ("::", &["cons"]),
    ("[]", &["nil"]),
    (">>=", &["bind"]),
    ("<$>", &["map"]),
    ("<*>", &["seq"]),
    ("|>", &[]),
    ("<|", &[]),
    ("|", &["abs"]),
    ("!", &[]),
    // Unicode order and arithmetic.
    ("≤", &["le"]),
    ("≥", &["ge"]),
    ("≠", &["ne"]),
    ("∣", &["dvd"]),
    ("≡", &["modeq"]),
    ("•", &["smul"]),
    ("∘", &["comp"]),
    ("⁻¹", &["inv"]),
    ("√", &["sqrt"]),
    ("∞", &["top"]),
    ("⌊", &["floor"]),
    ("⌈", &["ceil"]),
    ("⋆", &["star"]),
    // Unicode logic.
    ("¬", &["not"]),
    ("∧", &["and"]),
    ("∨", &["or"]),
    ("↔", &["iff"]),
    ("→", &["imp"]),
    ("⟹", &["imp"]),
    // Isabelle's ASCII spelling of `⟹` and `⋀`.
    ("==>", &["imp"]),
    ("←", &[]),
    // A goal display's turnstile is removed by the goal parser; in a statement it is a
    // library's own derivability relation (`Γ ⊢ φ`), named by its notation if any.
    ("⊢", &[]),
    ("∀", &["forall"]),
    ("⋀", &["forall"]),
    ("!!", &["forall"]), // Isabelle ASCII `⋀`
    ("∃", &["exists"]),
    ("∃!", &["exists", "unique"]),
    // Sets and lattices.
    ("∈", &["mem"]),
    ("∉", &["not", "mem"]),
    ("∪", &["union"]),
    ("∩", &["inter"]),
    ("⊆", &["subset"]),
    ("⊂", &["ssubset"]),
    ("⊊", &["ssubset"]),
    ("⊇", &["superset"]),
    ("⊃", &["ssuperset"]),
    ("ᶜ", &["compl"]),
    ("∆", &["symmdiff"]),
    ("△", &["symmdiff"]),
    ("∅", &["empty"]),
    ("⊓", &["inf"]),
    ("⊔", &["sup"]),
    ("⊤", &["top"]),
    ("⊥", &["bot"]),
    ("⋃", &["iunion", "union"]),
    ("⋂", &["iinter", "inter"]),
    ("⨆", &["isup", "sup"]),
    ("⨅", &["iinf", "inf"]),
    ("⁻¹'", &["preimage"]),
    ("''", &["image"]),
    ("×ˢ", &["prod"]),
    // Big operators and analysis.
    ("∑", &["sum"]),
    ("∏", &["prod"]),
    ("∑'", &["tsum"]),
    ("∏'", &["tprod"]),
    ("∫", &["integral"]),
    ("‖", &["norm"]),
    // Types and structures.
    ("×", &["prod"]),
    ("⊕", &["sum"]),
    ("⊗", &["tensor"]),
    ("≃", &["equiv"]),
    ("≈", &["equiv"]),
    ("≅", &["iso"]),
    ("⟶", &["hom"]),
    ("≫", &["comp"]),
    ("↑", &["coe"]),
    ("⇑", &["coe"]),
    ("↥", &["coe"]),
    ("ᵀ", &["transpose"]),
    ("ᵒᵈ", &["orderdual"]),
    ("ᵐᵒᵖ", &["mulopposite"]),
    ("Π", &["pi"]),
    ("Σ", &["sigma"]),
    ("π", &["pi"]),
    ("ℕ", &["nat"]),
    ("ℤ", &["int"]),
    ("ℚ", &["rat"]),
    ("ℝ", &["real"]),
    ("ℂ", &["complex"]),
    ("ℝ≥0", &["nnreal"]),
    ("ℝ≥0∞", &["ennreal"]),
];

/// One symbol of the table.
#[derive(Clone, Debug)]
pub(crate) struct SymbolEntry {
    pub(crate) text: Box<str>,
    /// `text` lower-cased, as emitted (`Σ` → `σ`), computed once.
    pub(crate) lower: Box<str>,
    /// Words emitted after the symbol, lower-case, without repeats.
    pub(crate) words: Vec<Box<str>>,
    /// Punctuation: lexed as one piece, never emitted.
    pub(crate) syntax: bool,
}

/// The symbol table, indexed for longest-first matching at a position.
#[derive(Clone, Debug)]
pub(crate) struct SymbolTable {
    entries: Vec<SymbolEntry>,
    /// Entry ids by first byte for ASCII first characters, longest first.
    ascii: Vec<Vec<u32>>,
    /// Entry ids by first character for the others, sorted by character, longest first.
    other: Vec<(char, Vec<u32>)>,
    /// Every entry by its exact text: for superscript runs and for symbols spelled like an
    /// identifier (`π`, a library's `mod`), which the lexer reads as one identifier first.
    exact: HashMap<Box<str>, u32, BuildFnv>,
    /// First characters of the entries spelled like an identifier, sorted: most
    /// identifiers start with none of them and need no lookup.
    identifier_firsts: Vec<char>,
}

/// FNV-1a (Fowler, Noll, Vo; common practice for short keys): the table is looked up once
/// per identifier, and SipHash's protection against chosen keys buys nothing for a
/// table whose keys the library's own notations give.
#[derive(Clone, Copy, Debug, Default)]
struct BuildFnv;

struct Fnv(u64);

impl std::hash::BuildHasher for BuildFnv {
    type Hasher = Fnv;
    fn build_hasher(&self) -> Fnv {
        Fnv(0xcbf2_9ce4_8422_2325)
    }
}

impl std::hash::Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0 ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3);
        }
    }
}

impl SymbolTable {
    /// The standard table.
    pub(crate) fn standard() -> SymbolTable {
        let mut table = SymbolTable {
            entries: Vec::new(),
            ascii: vec![Vec::new(); 128],
            other: Vec::new(),
            exact: HashMap::default(),
            identifier_firsts: Vec::new(),
        };
        for s in SYNTAX {
            table.insert(s, &[], true);
        }
        for (s, words) in STANDARD {
            let words: Vec<Box<str>> = words.iter().map(|w| Box::from(*w)).collect();
            table.insert(s, &words, false);
        }
        table.reindex();
        table
    }

    /// Adds `text` with `words` (or adds the words to an existing entry), without reindexing.
    fn insert(&mut self, text: &str, words: &[Box<str>], syntax: bool) {
        if let Some(&id) = self.exact.get(text) {
            let entry = &mut self.entries[id as usize];
            if entry.syntax {
                return;
            }
            for w in words {
                if !entry.words.contains(w) {
                    entry.words.push(w.clone());
                }
            }
            return;
        }
        let mut unique: Vec<Box<str>> = Vec::with_capacity(words.len());
        for w in words {
            if !unique.contains(w) {
                unique.push(w.clone());
            }
        }
        let id = self.entries.len() as u32;
        let mut lower = String::new();
        push_lower(&mut lower, text);
        self.entries.push(SymbolEntry {
            text: Box::from(text),
            lower: lower.into_boxed_str(),
            words: unique,
            syntax,
        });
        self.exact.insert(Box::from(text), id);
    }

    /// Rebuilds the first-character index after inserts.
    fn reindex(&mut self) {
        for v in &mut self.ascii {
            v.clear();
        }
        let mut other: HashMap<char, Vec<u32>> = HashMap::new();
        self.identifier_firsts.clear();
        for (id, e) in self.entries.iter().enumerate() {
            let Some(first) = e.text.chars().next() else {
                continue;
            };
            // Spelled like an identifier: found through `exact` after the lexer reads it.
            if is_identifier_start(first) {
                self.identifier_firsts.push(first);
                continue;
            }
            if first.is_ascii() {
                self.ascii[first as usize].push(id as u32);
            } else {
                other.entry(first).or_default().push(id as u32);
            }
        }
        let entries = &self.entries;
        let by_len_desc = |v: &mut Vec<u32>| {
            v.sort_by(|a, b| {
                let (ta, tb) = (&entries[*a as usize].text, &entries[*b as usize].text);
                tb.len().cmp(&ta.len()).then_with(|| ta.cmp(tb))
            });
        };
        for v in &mut self.ascii {
            by_len_desc(v);
        }
        let mut other: Vec<(char, Vec<u32>)> = other.into_iter().collect();
        for (_, v) in &mut other {
            by_len_desc(v);
        }
        other.sort_by_key(|(c, _)| *c);
        self.other = other;
        self.identifier_firsts.sort_unstable();
        self.identifier_firsts.dedup();
    }

    /// The entry spelled exactly like the identifier `text` (`π`, a library's `mod`).
    #[inline]
    pub(crate) fn identifier_entry(&self, text: &str) -> Option<u32> {
        let first = text.chars().next()?;
        if self.identifier_firsts.binary_search(&first).is_err() {
            return None;
        }
        self.exact(text)
    }

    /// The longest symbol that `rest` starts with: its id and byte length.
    #[inline]
    pub(crate) fn longest_match(&self, rest: &str) -> Option<(u32, usize)> {
        let first = rest.chars().next()?;
        let candidates: &[u32] = if first.is_ascii() {
            &self.ascii[first as usize]
        } else {
            match self.other.binary_search_by_key(&first, |(c, _)| *c) {
                Ok(i) => &self.other[i].1,
                Err(_) => return None,
            }
        };
        let rest = rest.as_bytes();
        candidates.iter().find_map(|&id| {
            let text = self.entries[id as usize].text.as_bytes();
            // Symbols are a few bytes: a plain loop beats a call to `memcmp`.
            let hit = text.len() <= rest.len() && text.iter().zip(rest).all(|(a, b)| a == b);
            hit.then_some((id, text.len()))
        })
    }

    /// The entry whose text is exactly `text`.
    #[inline]
    pub(crate) fn exact(&self, text: &str) -> Option<u32> {
        self.exact.get(text).copied()
    }

    /// The entry with id `id` (ids come from this table).
    #[inline]
    pub(crate) fn entry(&self, id: u32) -> &SymbolEntry {
        &self.entries[id as usize]
    }

    /// Teaches the table the library's notations (precedence in the module comment).
    ///
    /// Every usable symbol of a notation becomes one token. The words go to the first of
    /// its symbols that is not punctuation: the name it unfolds to (`unfolds_to`, else
    /// `unfolds_to_written`), last component only, lower-cased, followed by its word parts
    /// when it has several (`Ledger.credit` → `credit`; `List.append_assoc` →
    /// `append_assoc`, `append`, `assoc`; single-letter parts are left out, as in names).
    /// Symbols that are empty, contain white space or control characters, start with a
    /// digit, or are longer than 32 characters are ignored; so are symbols that start like
    /// an identifier but are not one (`x⁺`), which the lexer can never see whole.
    pub(crate) fn learn<'a>(&mut self, notations: impl IntoIterator<Item = &'a NotationInfo>) {
        for n in notations {
            let words = notation_words(n);
            let mut words_given = false;
            for sym in &n.symbols {
                if !usable_symbol(sym) {
                    continue;
                }
                let is_syntax = self
                    .exact
                    .get(sym.as_str())
                    .is_some_and(|&id| self.entries[id as usize].syntax);
                if is_syntax {
                    continue;
                }
                if words_given {
                    self.insert(sym, &[], false);
                } else {
                    self.insert(sym, &words, false);
                    words_given = true;
                }
            }
        }
        self.reindex();
    }
}

/// See [`SymbolTable::learn`].
fn usable_symbol(sym: &str) -> bool {
    let Some(first) = sym.chars().next() else {
        return false;
    };
    if first.is_ascii_digit() || sym.chars().count() > 32 {
        return false;
    }
    if sym.chars().any(|c| c.is_whitespace() || c.is_control()) {
        return false;
    }
    if is_identifier_start(first) {
        return sym.chars().all(is_identifier_continue);
    }
    true
}

/// The words a notation teaches: see [`SymbolTable::learn`].
fn notation_words(n: &NotationInfo) -> Vec<Box<str>> {
    let Some(name) = n.unfolds_to.as_deref().or(n.unfolds_to_written.as_deref()) else {
        return Vec::new();
    };
    let Some((_, last)) = components(name).last() else {
        return Vec::new();
    };
    let body = component_body(last);
    let mut words: Vec<Box<str>> = Vec::new();
    let mut whole = String::new();
    if !push_clean_component(&mut whole, body) {
        return words;
    }
    words.push(whole.into_boxed_str());
    let mut parts: Vec<&str> = Vec::new();
    for_each_part(body, |p| parts.push(p));
    if parts.len() > 1 {
        for p in parts {
            if p.chars().count() == 1 && !p.starts_with(|c: char| c.is_ascii_digit()) {
                continue;
            }
            let mut w = String::new();
            push_lower(&mut w, p);
            let w = w.into_boxed_str();
            if !words.contains(&w) {
                words.push(w);
            }
        }
    }
    words
}

#[cfg(test)]
mod tests {
    use super::*;

    fn notation(symbols: &[&str], unfolds: Option<&str>) -> NotationInfo {
        NotationInfo {
            symbols: symbols.iter().map(|s| s.to_string()).collect(),
            unfolds_to: unfolds.map(str::to_string),
            unfolds_to_written: None,
        }
    }

    fn words_of(t: &SymbolTable, sym: &str) -> Vec<String> {
        let id = t.exact(sym).expect("symbol in table");
        t.entry(id).words.iter().map(|w| w.to_string()).collect()
    }

    #[test]
    fn longest_match_prefers_the_longer_operator() {
        let t = SymbolTable::standard();
        let text = |rest: &str| {
            t.longest_match(rest)
                .map(|(id, _)| t.entry(id).text.to_string())
        };
        assert_eq!(text("<-> q").as_deref(), Some("<->"));
        assert_eq!(text("<=? m").as_deref(), Some("<=?"));
        assert_eq!(text("<= m").as_deref(), Some("<="));
        assert_eq!(text("::xs").as_deref(), Some("::"));
        assert_eq!(text(":= 3").as_deref(), Some(":="));
        assert_eq!(text("ℝ≥0∞").as_deref(), Some("ℝ≥0∞"));
        assert_eq!(text("⁻¹' s").as_deref(), Some("⁻¹'"));
        assert_eq!(text("abc"), None);
    }

    #[test]
    fn every_standard_word_is_lower_case_and_non_empty() {
        for (s, words) in STANDARD {
            assert!(!s.is_empty());
            for w in *words {
                assert!(!w.is_empty() && w.to_lowercase() == *w, "{s}: {w}");
            }
        }
    }

    #[test]
    fn a_library_notation_defines_a_new_symbol() {
        let mut t = SymbolTable::standard();
        t.learn([&notation(&["⊞"], Some("Ledger.merge"))]);
        assert_eq!(words_of(&t, "⊞"), ["merge"]);
    }

    #[test]
    fn a_library_notation_adds_to_a_standard_symbol_after_its_words() {
        let mut t = SymbolTable::standard();
        t.learn([&notation(&["⊕"], Some("xor"))]);
        assert_eq!(words_of(&t, "⊕"), ["sum", "xor"]);
        // Repeats are not added twice.
        t.learn([&notation(&["⊕"], Some("Bool.xor"))]);
        assert_eq!(words_of(&t, "⊕"), ["sum", "xor"]);
    }

    #[test]
    fn notation_words_use_the_last_component_and_its_parts() {
        let words = |n: &NotationInfo| -> Vec<String> {
            notation_words(n).iter().map(|w| w.to_string()).collect()
        };
        assert_eq!(
            words(&notation(&["+++"], Some("Ring.Buffer.append_all"))),
            ["append_all", "append", "all"]
        );
        assert_eq!(words(&notation(&["+"], Some("HAdd.hAdd"))), ["hadd", "add"]);
        let written = NotationInfo {
            symbols: vec!["⊞".into()],
            unfolds_to: None,
            unfolds_to_written: Some("merge".into()),
        };
        assert_eq!(words(&written), ["merge"]);
        assert!(words(&notation(&["⊞"], None)).is_empty());
    }

    #[test]
    fn punctuation_stays_punctuation_and_words_go_to_the_first_real_symbol() {
        let mut t = SymbolTable::standard();
        t.learn([&notation(&["(", "⟪", "⟫", ")"], Some("Sched.slot"))]);
        assert!(t.entry(t.exact("(").unwrap()).syntax);
        assert_eq!(words_of(&t, "⟪"), ["slot"]);
        assert!(words_of(&t, "⟫").is_empty());
    }

    #[test]
    fn unusable_notation_symbols_are_ignored() {
        let mut t = SymbolTable::standard();
        let before = t.entries.len();
        t.learn([&notation(&["", "a b", "0x", "x⁺"], Some("f"))]);
        assert_eq!(t.entries.len(), before);
        // Spelled like an identifier: kept, found by exact lookup only.
        t.learn([&notation(&["mod"], Some("Nat.modulo"))]);
        assert_eq!(words_of(&t, "mod"), ["modulo"]);
        assert!(t.longest_match("mod x").is_none());
    }
}
