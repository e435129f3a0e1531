//! The math-aware tokenizer shared by every retrieval signal.
//!
//! Takes a statement, a goal or a name, optionally with the names to drop (a goal's own
//! hypotheses and bound variables); gives [`Tokens`]: lower-case strings with a
//! [`TokenKind`], in text order, the same for BM25 indexing, the dense encoder, the query
//! and evaluation. It is deterministic, never fails, and is linear in the text; all tokens
//! of one call share one string buffer, so tokenizing allocates per call, not per token.
//! It deliberately knows nothing of goal displays (`query/` parses those) or of indexes.
//!
//! The rules, each with a test in `tests.rs`:
//! - an identifier gives its whole (lower-cased) and its parts: `Nat.add_comm` gives
//!   `nat.add_comm`, `nat`, `add_comm`, `add`, `comm`; parts split at `.`, `_`, camelCase
//!   and letter/digit boundaries ([`identifiers`]); a part equal to one already given for
//!   the same identifier is not repeated;
//! - the decorations `'`, `?`, `!` and subscripts are stripped from identifier tokens
//!   (`add_comm'` → `add_comm`, `getElem?` → `getelem`, `x₁` → `x`): variants of one name
//!   are one word for retrieval;
//! - a bare single-letter identifier (`x`, `α`, `S`, also `x₁` and `h'`) is dropped: it is
//!   a variable; so are Lean's auto-bound universe names `u_1`, `u_2`. A component of a qualified name is not (`Z.of_nat` keeps `z`); a
//!   single-letter part inside one component is (`mul2x` gives `mul`, `2`);
//! - names given to drop are dropped, bare or as the head of dot notation (`l.balanced`
//!   with `l` dropped gives `balanced`); `_root_.` is dropped the same way;
//! - syntax keywords (`fun`, `let`, `in`, `match`, `with`, `end`, `then`, `else`, `do`,
//!   `by`, `return`, `as`, `where`, `show`, `from`, `have`) give nothing; `forall` and
//!   `exists` give the same word as `∀` and `∃`;
//! - each symbol is one token, longest match first (`<->` before `<-`), and is followed by
//!   the words library names use for it ([`symbols`]): `≤` gives `≤`, `le`;
//! - a number is a token (`add_zero` is about `0`); `0`, `1`, `2` are also followed by
//!   `zero`, `one`, `two`, the words Lean names use for them (Coq names use the digit);
//! - punctuation (brackets, `,`, `:`, `=>`, ...) gives nothing.
//!
//! ```
//! use quarry::tokens::Tokenizer;
//! let tokens = Tokenizer::standard().tokenize("Nat.add_comm n 0 ≤ m");
//! let texts: Vec<&str> = tokens.texts().collect();
//! assert_eq!(texts, ["nat.add_comm", "nat", "add_comm", "add", "comm", "0", "zero", "≤", "le"]);
//! ```

pub mod identifiers;
pub mod lexer;
pub mod symbols;

use std::collections::HashSet;
use std::fmt;
use std::ops::Range;
use std::sync::OnceLock;

pub use lexer::{Lexeme, LexemeKind, Lexemes};

use crate::library::NotationInfo;
use identifiers::{component_body, components, for_each_part, push_clean_component, push_lower};
use symbols::SymbolTable;

/// What a token is. All kinds go into one BM25 field; the kind is there for display, for
/// the dense encoder's hashing, and for signals that want to weigh kinds differently.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum TokenKind {
    /// A whole identifier, qualified: `nat.add_comm`.
    Identifier,
    /// A component or word part of an identifier: `nat`, `add_comm`, `add`.
    IdentifierPart,
    /// An operator or mathematical symbol as written: `≤`, `<->`, `⁻¹`.
    Symbol,
    /// The word library names use for the symbol or numeral before it: `le`, `iff`, `zero`.
    SymbolWord,
    /// A numeral: `0`, `42`, `3.14`.
    Number,
}

impl TokenKind {
    /// Short name used when tokens are shown (`quarry ask --show-tokens`).
    pub fn as_str(self) -> &'static str {
        match self {
            TokenKind::Identifier => "ident",
            TokenKind::IdentifierPart => "part",
            TokenKind::Symbol => "sym",
            TokenKind::SymbolWord => "word",
            TokenKind::Number => "num",
        }
    }
}

impl fmt::Display for TokenKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One token, owned.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct Token {
    /// Lower-case, never empty.
    pub text: String,
    /// What the token was made from.
    pub kind: TokenKind,
}

impl fmt::Display for Token {
    /// `text/kind`, e.g. `nat.add_comm/ident`, `≤/sym`, `le/word`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.text, self.kind)
    }
}

/// One token borrowed from [`Tokens`].
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct TokenRef<'a> {
    /// Lower-case, never empty.
    pub text: &'a str,
    /// What the token was made from.
    pub kind: TokenKind,
    /// Byte range, in the text given to the call that produced the token, of what it was
    /// made from (for highlighting; a symbol word has its symbol's range).
    pub source: Range<usize>,
}

impl TokenRef<'_> {
    /// The owned token.
    pub fn to_token(&self) -> Token {
        Token {
            text: self.text.to_string(),
            kind: self.kind,
        }
    }
}

impl fmt::Display for TokenRef<'_> {
    /// `text/kind`, as for [`Token`].
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.text, self.kind)
    }
}

#[derive(Clone, Debug, PartialEq, Eq)]
struct Entry {
    start: usize,
    end: usize,
    kind: TokenKind,
    source: Range<usize>,
}

/// The tokens of one or more texts, in order, sharing one string buffer.
///
/// Reuse one with [`Tokenizer::tokenize_into`] to tokenize many texts without allocating.
#[derive(Clone, Debug, Default)]
pub struct Tokens {
    text: String,
    entries: Vec<Entry>,
    /// Component ranges of the identifier being split; kept to reuse its allocation.
    scratch: Vec<(usize, usize)>,
    /// Word-part ranges of the component being split, likewise.
    parts: Vec<(usize, usize)>,
}

impl PartialEq for Tokens {
    fn eq(&self, other: &Tokens) -> bool {
        self.len() == other.len() && self.iter().zip(other.iter()).all(|(a, b)| a == b)
    }
}

impl Eq for Tokens {}

impl Tokens {
    /// No tokens.
    pub fn new() -> Tokens {
        Tokens::default()
    }

    /// Number of tokens.
    pub fn len(&self) -> usize {
        self.entries.len()
    }

    /// True when there are no tokens.
    pub fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }

    /// Removes every token, keeping the buffers.
    pub fn clear(&mut self) {
        self.text.clear();
        self.entries.clear();
    }

    /// The token at `index`.
    pub fn get(&self, index: usize) -> Option<TokenRef<'_>> {
        self.entries.get(index).map(|e| self.token(e))
    }

    fn token(&self, e: &Entry) -> TokenRef<'_> {
        TokenRef {
            text: &self.text[e.start..e.end],
            kind: e.kind,
            source: e.source.clone(),
        }
    }

    /// The tokens in order.
    pub fn iter(&self) -> impl Iterator<Item = TokenRef<'_>> + '_ {
        self.entries.iter().map(|e| self.token(e))
    }

    /// The tokens' texts in order.
    pub fn texts(&self) -> impl Iterator<Item = &str> + '_ {
        self.entries.iter().map(|e| &self.text[e.start..e.end])
    }

    /// The tokens, owned.
    pub fn to_vec(&self) -> Vec<Token> {
        self.iter().map(|t| t.to_token()).collect()
    }

    /// Keeps what was written to the buffer since `start` as a token of `kind`, unless it
    /// is empty or repeats a token at index `dedup_from` or later.
    fn commit(&mut self, start: usize, kind: TokenKind, source: Range<usize>, dedup_from: usize) {
        let bytes = self.text.as_bytes();
        let new = &bytes[start..];
        let repeated = new.is_empty()
            || self.entries[dedup_from..]
                .iter()
                .any(|e| e.end - e.start == new.len() && bytes[e.start..e.end] == *new);
        if repeated {
            self.text.truncate(start);
            return;
        }
        let end = self.text.len();
        self.entries.push(Entry {
            start,
            end,
            kind,
            source,
        });
    }

    /// Adds `text`, already lower-case, as a token (see [`Tokens::commit`]).
    fn push_verbatim(
        &mut self,
        text: &str,
        kind: TokenKind,
        source: Range<usize>,
        dedup_from: usize,
    ) {
        let start = self.text.len();
        self.text.push_str(text);
        self.commit(start, kind, source, dedup_from);
    }

    /// Adds `text` lower-cased as a token (see [`Tokens::commit`]).
    fn push_lowered(
        &mut self,
        text: &str,
        kind: TokenKind,
        source: Range<usize>,
        dedup_from: usize,
    ) {
        let start = self.text.len();
        push_lower(&mut self.text, text);
        self.commit(start, kind, source, dedup_from);
    }
}

impl fmt::Display for Tokens {
    /// Space-separated `text/kind` pairs: `nat.add_comm/ident nat/part ≤/sym le/word`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, t) in self.iter().enumerate() {
            if i > 0 {
                f.write_str(" ")?;
            }
            write!(f, "{t}")?;
        }
        Ok(())
    }
}

/// Names not to make tokens of: a goal's hypotheses and bound variables.
///
/// Names are compared as written (case matters: `H` and `h` are different hypotheses);
/// Lean's inaccessible mark is removed on insert (`inst✝¹` is stored as `inst`, which is
/// how the lexer reads it back).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct NameSet {
    names: HashSet<String>,
}

impl NameSet {
    /// The empty set.
    pub fn new() -> NameSet {
        NameSet::default()
    }

    /// Adds `name` (trimmed; `✝` and what follows it removed; nothing if that is empty).
    pub fn insert(&mut self, name: &str) {
        let name = name.split('✝').next().unwrap_or("").trim();
        if !name.is_empty() && !self.names.contains(name) {
            self.names.insert(name.to_string());
        }
    }

    /// True when `name` (as written) is in the set.
    pub fn contains(&self, name: &str) -> bool {
        self.names.contains(name)
    }

    /// Number of names.
    pub fn len(&self) -> usize {
        self.names.len()
    }

    /// True when there are no names.
    pub fn is_empty(&self) -> bool {
        self.names.is_empty()
    }

    /// The names, in no particular order.
    pub fn iter(&self) -> impl Iterator<Item = &str> + '_ {
        self.names.iter().map(String::as_str)
    }
}

impl<S: AsRef<str>> FromIterator<S> for NameSet {
    fn from_iter<I: IntoIterator<Item = S>>(iter: I) -> NameSet {
        let mut set = NameSet::new();
        set.extend(iter);
        set
    }
}

impl<S: AsRef<str>> Extend<S> for NameSet {
    fn extend<I: IntoIterator<Item = S>>(&mut self, iter: I) {
        for name in iter {
            self.insert(name.as_ref());
        }
    }
}

/// Keywords that are syntax only: they give no token. `forall` and `exists` are not among
/// them: names say `forall_mem_cons`, `not_exists`, so they carry meaning like `∀`, `∃`.
const DROPPED_KEYWORDS: &[&str] = &[
    "fun", "let", "in", "match", "with", "end", "then", "else", "do", "by", "return", "as",
    "where", "show", "from", "have",
];

/// The tokenizer: the operator table, standard or taught a library's notations.
#[derive(Clone, Debug)]
pub struct Tokenizer {
    table: SymbolTable,
}

impl Default for Tokenizer {
    fn default() -> Tokenizer {
        Tokenizer::new()
    }
}

impl Tokenizer {
    /// A tokenizer with the standard operator table.
    pub fn new() -> Tokenizer {
        Tokenizer {
            table: SymbolTable::standard(),
        }
    }

    /// The shared standard tokenizer, built once.
    pub fn standard() -> &'static Tokenizer {
        static STANDARD: OnceLock<Tokenizer> = OnceLock::new();
        STANDARD.get_or_init(Tokenizer::new)
    }

    /// A tokenizer whose operator table also knows the library's notations: a notation
    /// `x ⊕ y := xor x y` (symbols `["⊕"]`, unfolding to `xor`) makes `⊕` also give
    /// `xor`. Precedence and what is ignored: see [`symbols`].
    ///
    /// ```
    /// use quarry::library::NotationInfo;
    /// use quarry::tokens::Tokenizer;
    /// let xor = NotationInfo {
    ///     symbols: vec!["⊕".into()],
    ///     unfolds_to: Some("Buffer.xor".into()),
    ///     unfolds_to_written: Some("xor".into()),
    /// };
    /// let t = Tokenizer::with_notations([&xor]);
    /// assert!(t.tokenize("a ⊕ b").texts().any(|w| w == "xor"));
    /// ```
    pub fn with_notations<'a>(notations: impl IntoIterator<Item = &'a NotationInfo>) -> Tokenizer {
        let mut t = Tokenizer::new();
        t.learn_notations(notations);
        t
    }

    /// Teaches this tokenizer more notations (see [`Tokenizer::with_notations`]).
    pub fn learn_notations<'a>(&mut self, notations: impl IntoIterator<Item = &'a NotationInfo>) {
        self.table.learn(notations);
    }

    /// The lexemes of `text`, before any token rule applies.
    pub fn lexemes<'a>(&'a self, text: &'a str) -> Lexemes<'a> {
        Lexemes::new(text, &self.table)
    }

    /// The tokens of `text`.
    pub fn tokenize(&self, text: &str) -> Tokens {
        let mut out = Tokens::new();
        self.tokenize_into(text, None, &mut out);
        out
    }

    /// The tokens of `text`, leaving out the names in `drop`.
    pub fn tokenize_dropping(&self, text: &str, drop: &NameSet) -> Tokens {
        let mut out = Tokens::new();
        self.tokenize_into(text, Some(drop), &mut out);
        out
    }

    /// Appends the tokens of `text` to `out`, leaving out the names in `drop`.
    pub fn tokenize_into(&self, text: &str, drop: Option<&NameSet>, out: &mut Tokens) {
        for lx in self.lexemes(text) {
            let span = lx.start..lx.end();
            let first = out.entries.len();
            match lx.kind {
                LexemeKind::Punctuation => {}
                LexemeKind::Number => {
                    out.push_lowered(lx.text, TokenKind::Number, span.clone(), first);
                    let word = match lx.text {
                        "0" => Some("zero"),
                        "1" => Some("one"),
                        "2" => Some("two"),
                        _ => None,
                    };
                    if let Some(w) = word {
                        out.push_verbatim(w, TokenKind::SymbolWord, span, first);
                    }
                }
                LexemeKind::Symbol => self.emit_symbol(lx.text, lx.entry, span, out),
                LexemeKind::Identifier => {
                    let mut comps = std::mem::take(&mut out.scratch);
                    comps.clear();
                    comps.extend(components(lx.text).map(|(at, c)| (at, at + c.len())));
                    self.emit_identifier(&lx, &comps, drop, out);
                    out.scratch = comps;
                }
            }
        }
    }

    fn emit_symbol(&self, text: &str, entry: Option<u32>, span: Range<usize>, out: &mut Tokens) {
        let first = out.entries.len();
        let Some(id) = entry else {
            out.push_lowered(text, TokenKind::Symbol, span, first);
            return;
        };
        // The table holds the symbol lower-cased and its words, lower-case already.
        let entry = self.table.entry(id);
        out.push_verbatim(&entry.lower, TokenKind::Symbol, span.clone(), first);
        for w in &entry.words {
            out.push_verbatim(w, TokenKind::SymbolWord, span.clone(), first);
        }
    }

    /// The tokens of one identifier whose components are at `comps` (byte ranges in it).
    fn emit_identifier(
        &self,
        lx: &Lexeme<'_>,
        comps: &[(usize, usize)],
        drop: Option<&NameSet>,
        out: &mut Tokens,
    ) {
        let raw = lx.text;
        let dropped = |name: &str| drop.is_some_and(|d| d.contains(name));
        let first = out.entries.len();
        if comps.len() == 1 {
            if raw.len() <= 6 && DROPPED_KEYWORDS.contains(&raw) {
                return;
            }
            if raw == "forall" || raw == "exists" {
                out.push_verbatim(raw, TokenKind::SymbolWord, lx.start..lx.end(), first);
                return;
            }
            if let Some(id) = lx.entry {
                self.emit_symbol(raw, Some(id), lx.start..lx.end(), out);
                return;
            }
            if is_auto_universe(raw) {
                return;
            }
        }
        // `_root_.x` is `x`; `l.balanced` with `l` a local is `balanced`.
        let mut skip = 0;
        while comps.len() - skip > 1 {
            let (s, e) = comps[skip];
            if &raw[s..e] == "_root_" || dropped(&raw[s..e]) {
                skip += 1;
            } else {
                break;
            }
        }
        let kept = &comps[skip..];
        if let [(s, e)] = kept {
            let comp = &raw[*s..*e];
            if dropped(comp) || is_single_letter(component_body(comp)) {
                return;
            }
        }

        let whole_start = out.text.len();
        let mut any_word = false;
        for (i, &(s, e)) in kept.iter().enumerate() {
            if i > 0 {
                out.text.push('.');
            }
            any_word |= push_clean_component(&mut out.text, component_body(&raw[s..e]));
        }
        if !any_word {
            out.text.truncate(whole_start);
            return;
        }
        let whole_source = lx.start + kept[0].0..lx.end();
        out.commit(whole_start, TokenKind::Identifier, whole_source, first);

        for &(s, e) in kept {
            let comp = &raw[s..e];
            let body = component_body(comp);
            if kept.len() > 1 {
                let start = out.text.len();
                push_clean_component(&mut out.text, body);
                out.commit(
                    start,
                    TokenKind::IdentifierPart,
                    lx.start + s..lx.start + e,
                    first,
                );
            }
            let mut parts = std::mem::take(&mut out.parts);
            parts.clear();
            // `part` is a slice of `raw`: its offset is the distance between them.
            for_each_part(body, |part| {
                let at = part.as_ptr() as usize - raw.as_ptr() as usize;
                parts.push((at, at + part.len()));
            });
            if parts.len() > 1 {
                for &(ps, pe) in &parts {
                    let part = &raw[ps..pe];
                    if !is_single_letter(part) {
                        out.push_lowered(
                            part,
                            TokenKind::IdentifierPart,
                            lx.start + ps..lx.start + pe,
                            first,
                        );
                    }
                }
            }
            out.parts = parts;
        }
    }
}

/// Lean's auto-bound universe names, `u_1`, `u_2`, ... (`Type u_1` in every display of a
/// polymorphic goal): variables, like single letters.
fn is_auto_universe(raw: &str) -> bool {
    raw.strip_prefix("u_")
        .is_some_and(|n| !n.is_empty() && n.bytes().all(|b| b.is_ascii_digit()))
}

/// One letter once decorations are gone (`x`, `α`, `x₁`, `h'`); a lone digit is not.
fn is_single_letter(body: &str) -> bool {
    let mut letters = body
        .chars()
        .filter(|&c| !identifiers::is_decoration(c) && c != '_');
    matches!((letters.next(), letters.next()), (Some(c), None) if c.is_alphabetic())
}

#[cfg(test)]
mod tests;
