//! The lexer: cuts text into identifiers, numbers, symbols and punctuation.
//!
//! Takes any text and a symbol table; gives [`Lexeme`]s in order, each a slice of the text.
//! White space, control and invisible characters and lone combining marks give nothing.
//! It never fails and looks back at most one lexeme, so it is linear in the text. It does
//! not lower-case, split or drop anything: that is the tokenizer's job. The goal parser
//! reads lexemes too, to find bound variables and binder groups.

use super::identifiers::{is_identifier_continue, is_identifier_start, is_superscript};

use super::symbols::SymbolTable;

/// What a lexeme is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum LexemeKind {
    /// A possibly qualified name: `Nat.add_comm`, `h'`, `getElem?`, `Foo.«bar baz»`.
    Identifier,
    /// A run of ASCII digits, with a decimal part when one follows (`3.14`).
    Number,
    /// An operator or mathematical symbol, longest match first (`<->`, `⁻¹`, `∑'`).
    Symbol,
    /// Punctuation that carries no meaning for retrieval (brackets, `,`, `:`, `:=`, `=>`,
    /// `λ`, Lean's `inst✝¹` marks, metavariables `?m.12`, the `*` of `Type*`, Coq's
    /// scope key `%nat`).
    Punctuation,
}

/// One lexeme: a slice of the text with its kind.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Lexeme<'a> {
    /// What the lexeme is.
    pub kind: LexemeKind,
    /// The text as written.
    pub text: &'a str,
    /// Byte offset of `text` in the lexed text.
    pub start: usize,
    /// The symbol table entry, for symbols and identifiers spelled like one (`π`).
    pub(crate) entry: Option<u32>,
}

impl Lexeme<'_> {
    /// Byte offset just past the lexeme.
    pub fn end(&self) -> usize {
        self.start + self.text.len()
    }
}

/// Iterator over the lexemes of a text; see [`Tokenizer::lexemes`](super::Tokenizer::lexemes).
#[derive(Clone, Debug)]
pub struct Lexemes<'a> {
    text: &'a str,
    pos: usize,
    table: &'a SymbolTable,
    /// The previous lexeme, for the two rules that look back (`Type*`, `(x)%nat`).
    prev: Option<Lexeme<'a>>,
    /// `(from, stop)`: the first `»` or newline at or after byte `from` is at `stop` (the
    /// text's length if none). Searches only move forward, so all of them together read
    /// the text once, however many `«` it holds.
    guillemet_stop: Option<(usize, usize)>,
}

/// How far a `«` looks for its `»`: names never span lines or get this long, and the bound
/// keeps a text full of unmatched `«` linear.
const GUILLEMET_WINDOW: usize = 512;

impl<'a> Lexemes<'a> {
    pub(crate) fn new(text: &'a str, table: &'a SymbolTable) -> Lexemes<'a> {
        Lexemes {
            text,
            pos: 0,
            table,
            prev: None,
            guillemet_stop: None,
        }
    }

    /// Byte length of a `«…»` component starting at `at`, if it is closed on its line
    /// within [`GUILLEMET_WINDOW`] bytes.
    fn guillemet_len(&mut self, at: usize) -> Option<usize> {
        if !self.text[at..].starts_with('«') {
            return None;
        }
        let from = at + '«'.len_utf8();
        let stop = match self.guillemet_stop {
            Some((f, stop)) if f <= from && from <= stop => stop,
            _ => {
                let stop = self.text[from..]
                    .find(['»', '\n'])
                    .map_or(self.text.len(), |i| from + i);
                self.guillemet_stop = Some((from, stop));
                stop
            }
        };
        let closed = self.text[stop..].starts_with('»') && stop - from <= GUILLEMET_WINDOW;
        closed.then(|| stop + '»'.len_utf8() - at)
    }

    /// End of the identifier starting at `start` (its first character already checked).
    fn identifier_end(&mut self, start: usize) -> usize {
        let bytes = self.text.as_bytes();
        let mut pos = start;
        loop {
            // One component.
            if let Some(len) = self.guillemet_len(pos) {
                pos += len;
            } else {
                // The first character was checked by the caller or the `.` rule below.
                pos += self.text[pos..].chars().next().map_or(0, char::len_utf8);
                while pos < bytes.len() {
                    let b = bytes[pos];
                    if b < 0x80 {
                        // ASCII without decoding: most identifiers are all ASCII.
                        if b.is_ascii_alphanumeric() || matches!(b, b'_' | b'\'' | b'!' | b'?') {
                            pos += 1;
                            continue;
                        }
                        break;
                    }
                    match self.text[pos..].chars().next() {
                        Some(c) if is_identifier_continue(c) => pos += c.len_utf8(),
                        _ => break,
                    }
                }
            }
            // `.` joins a further component only when one follows at once.
            if pos < bytes.len() && bytes[pos] == b'.' {
                let joins = match self.text[pos + 1..].chars().next() {
                    Some('«') => self.guillemet_len(pos + 1).is_some(),
                    Some(c) => is_identifier_start(c),
                    None => false,
                };
                if joins {
                    pos += 1;
                    continue;
                }
            }
            return pos;
        }
    }

    fn number_end(&self, start: usize) -> usize {
        let bytes = self.text.as_bytes();
        let mut pos = start;
        while pos < bytes.len() && bytes[pos].is_ascii_digit() {
            pos += 1;
        }
        // `3.14`, but not the `1.2` of `p.1.2`.
        let after_dot = start > 0 && bytes[start - 1] == b'.';
        if !after_dot
            && pos + 1 < bytes.len()
            && bytes[pos] == b'.'
            && bytes[pos + 1].is_ascii_digit()
        {
            pos += 1;
            while pos < bytes.len() && bytes[pos].is_ascii_digit() {
                pos += 1;
            }
        }
        pos
    }

    fn lexeme(
        &mut self,
        kind: LexemeKind,
        start: usize,
        end: usize,
        entry: Option<u32>,
    ) -> Lexeme<'a> {
        self.pos = end;
        let lx = Lexeme {
            kind,
            text: &self.text[start..end],
            start,
            entry,
        };
        self.prev = Some(lx);
        lx
    }

    /// The previous lexeme, when it ends exactly at `at` (nothing in between).
    fn glued_to_prev(&self, at: usize) -> Option<Lexeme<'a>> {
        self.prev.filter(|p| p.end() == at)
    }
}

/// Characters that print as nothing: zero-width spaces and joiners, direction marks,
/// the byte-order mark, variation selectors, and combining marks with no base.
fn is_invisible(c: char) -> bool {
    matches!(
        c,
        '\u{200B}'..='\u{200F}'
            | '\u{2028}'..='\u{202E}'
            | '\u{2060}'..='\u{2064}'
            | '\u{FEFF}'
            | '\u{FE00}'..='\u{FE0F}'
            | '\u{0300}'..='\u{036F}'
            | '\u{20D0}'..='\u{20FF}'
    )
}

impl<'a> Iterator for Lexemes<'a> {
    type Item = Lexeme<'a>;

    fn next(&mut self) -> Option<Lexeme<'a>> {
        use LexemeKind::*;
        loop {
            let bytes = self.text.as_bytes();
            while self.pos < bytes.len() && matches!(bytes[self.pos], b' ' | b'\n' | b'\t' | b'\r')
            {
                self.pos += 1;
            }
            let start = self.pos;
            let rest = &self.text[start..];
            let c = rest.chars().next()?;
            let clen = c.len_utf8();
            // A terminal colour code (`ESC [ 0 m`), pasted from a terminal: skipped whole.
            if c == '\u{1b}' && rest[1..].starts_with('[') {
                let params = rest[2..]
                    .find(|p: char| !(p.is_ascii_digit() || p == ';'))
                    .unwrap_or(rest.len() - 2);
                let finished = rest[2 + params..].starts_with(|f: char| f.is_ascii_alphabetic());
                self.pos += 2 + params + usize::from(finished);
                continue;
            }
            if c.is_whitespace() || c.is_control() || is_invisible(c) {
                self.pos += clen;
                continue;
            }
            if is_identifier_start(c) || (c == '«' && self.guillemet_len(start).is_some()) {
                let end = self.identifier_end(start);
                let entry = self.table.identifier_entry(&self.text[start..end]);
                return Some(self.lexeme(Identifier, start, end, entry));
            }
            if c.is_ascii_digit() {
                let end = self.number_end(start);
                return Some(self.lexeme(Number, start, end, None));
            }
            match c {
                // A metavariable: `?m.12`, `?u`, `?_`.
                '?' if rest[1..].starts_with(is_identifier_start) => {
                    let bytes = self.text.as_bytes();
                    let mut end = self.identifier_end(start + 1);
                    while end + 1 < bytes.len()
                        && bytes[end] == b'.'
                        && bytes[end + 1].is_ascii_digit()
                    {
                        end += 1;
                        while end < bytes.len() && bytes[end].is_ascii_digit() {
                            end += 1;
                        }
                    }
                    return Some(self.lexeme(Punctuation, start, end, None));
                }
                // `Type*`, `Sort*`: a universe placeholder, not a product.
                '*' if self
                    .glued_to_prev(start)
                    .is_some_and(|p| p.kind == Identifier && matches!(p.text, "Type" | "Sort")) =>
                {
                    return Some(self.lexeme(Punctuation, start, start + 1, None));
                }
                // Coq's scope key `(n + 0)%nat`: glued on both sides, unlike `a % b`.
                '%' if rest[1..].starts_with(|n: char| n.is_ascii_alphabetic())
                    && self.glued_to_prev(start).is_some_and(|p| {
                        matches!(p.kind, Identifier | Number) || p.text == ")"
                    }) =>
                {
                    return Some(self.lexeme(Punctuation, start, start + 1, None));
                }
                // `inst✝¹`: the mark and its number.
                '✝' => {
                    let mut end = start + clen;
                    for s in self.text[end..].chars() {
                        if !is_superscript(s) {
                            break;
                        }
                        end += s.len_utf8();
                    }
                    return Some(self.lexeme(Punctuation, start, end, None));
                }
                _ => {}
            }
            let matched = self.table.longest_match(rest);
            if is_superscript(c) {
                // A run of superscripts is one symbol (`ᵒᵈ`, `⁻¹`), unless a table symbol
                // reaches further (`⁻¹'`).
                let run = rest
                    .char_indices()
                    .find(|(_, s)| !is_superscript(*s))
                    .map_or(rest.len(), |(i, _)| i);
                return Some(match matched {
                    Some((id, len)) if len >= run => {
                        self.lexeme(Symbol, start, start + len, Some(id))
                    }
                    _ => {
                        let entry = self.table.exact(&rest[..run]);
                        self.lexeme(Symbol, start, start + run, entry)
                    }
                });
            }
            if let Some((id, len)) = matched {
                let kind = if self.table.entry(id).syntax {
                    Punctuation
                } else {
                    Symbol
                };
                return Some(self.lexeme(kind, start, start + len, Some(id)));
            }
            return Some(self.lexeme(Symbol, start, start + clen, None));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::LexemeKind::*;
    use super::*;

    fn lex(text: &str) -> Vec<(LexemeKind, &str)> {
        let table = SymbolTable::standard();
        let spans: Vec<_> = Lexemes::new(text, &table)
            .map(|l| (l.kind, l.start, l.end()))
            .collect();
        spans
            .into_iter()
            .map(|(k, s, e)| (k, &text[s..e]))
            .collect()
    }

    #[test]
    fn qualified_names_are_one_identifier() {
        assert_eq!(
            lex("Nat.add_comm n.succ"),
            [(Identifier, "Nat.add_comm"), (Identifier, "n.succ")]
        );
        assert_eq!(lex("Foo.«bar baz».x"), [(Identifier, "Foo.«bar baz».x")]);
        // A trailing or spaced dot does not join.
        assert_eq!(
            lex("⋀x. P x."),
            [
                (Symbol, "⋀"),
                (Identifier, "x"),
                (Punctuation, "."),
                (Identifier, "P"),
                (Identifier, "x"),
                (Punctuation, ".")
            ]
        );
    }

    #[test]
    fn numbers_and_projections() {
        assert_eq!(lex("3.14"), [(Number, "3.14")]);
        assert_eq!(
            lex("p.1.2"),
            [
                (Identifier, "p"),
                (Punctuation, "."),
                (Number, "1"),
                (Punctuation, "."),
                (Number, "2")
            ]
        );
    }

    #[test]
    fn unclosed_guillemet_is_punctuation() {
        assert_eq!(lex("«ab"), [(Punctuation, "«"), (Identifier, "ab")]);
        assert_eq!(
            lex("«a\n»"),
            [(Punctuation, "«"), (Identifier, "a"), (Punctuation, "»")]
        );
    }

    #[test]
    fn display_marks_are_punctuation() {
        assert_eq!(lex("inst✝¹"), [(Identifier, "inst"), (Punctuation, "✝¹")]);
        assert_eq!(lex("?m.12"), [(Punctuation, "?m.12")]);
        assert_eq!(lex("Type*"), [(Identifier, "Type"), (Punctuation, "*")]);
        assert_eq!(
            lex("a * b"),
            [(Identifier, "a"), (Symbol, "*"), (Identifier, "b")]
        );
        assert_eq!(
            lex("(n + 0)%nat"),
            [
                (Punctuation, "("),
                (Identifier, "n"),
                (Symbol, "+"),
                (Number, "0"),
                (Punctuation, ")"),
                (Punctuation, "%"),
                (Identifier, "nat")
            ]
        );
        assert_eq!(
            lex("a % b"),
            [(Identifier, "a"), (Symbol, "%"), (Identifier, "b")]
        );
    }

    #[test]
    fn superscript_runs_are_one_symbol() {
        assert_eq!(lex("αᵒᵈ"), [(Identifier, "α"), (Symbol, "ᵒᵈ")]);
        assert_eq!(lex("x⁻¹"), [(Identifier, "x"), (Symbol, "⁻¹")]);
        assert_eq!(
            lex("f ⁻¹' s"),
            [(Identifier, "f"), (Symbol, "⁻¹'"), (Identifier, "s")]
        );
    }

    #[test]
    fn invisible_characters_give_nothing() {
        assert!(lex("\u{FEFF}\u{200B} \t\u{0301}\u{7}").is_empty());
        assert_eq!(lex("\u{1b}[1;31msize\u{1b}[0m"), [(Identifier, "size")]);
        assert!(lex("\u{1b}[").is_empty());
    }
}
