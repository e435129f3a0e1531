//! Lean 4 lexer: from a file's text to tokens with byte offsets, lines and columns.
//!
//! Takes the text; gives the tokens, the byte ranges of comments (so statements can be
//! printed without them) and warnings for a comment or string that is never closed (what
//! came before it is kept). Comments nest (`/- /- -/ -/`); doc comments `/-- -/` and
//! `/-! -/` are comments too. Strings keep their escapes; the code inside an interpolated
//! string (`s!"{x.qty}"`) is lexed as code. It never fails and never panics; it does not
//! know which words start commands or tactics.

use super::names::{is_id_first, is_id_rest, is_keyword};
use crate::extract::text::LineIndex;
use crate::library::{Diagnostic, Severity};

/// What sort of token.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Kind {
    /// A possibly dotted name (`Nat.succ_le`, `«my name».x`, `h'`).
    Ident,
    /// An atomic name that is one of the reserved words (`theorem`, `fun`, `by`).
    Keyword,
    /// Any other symbol (`:=`, `(`, `→`, `⟨`, `@[`).
    Symbol,
    Number,
    /// A string literal, quotes included.
    Str,
    Char,
    /// A quoted name (`` `foo ``, ``` ``foo ```): not a reference to a premise.
    NameLiteral,
    /// `#eval`, `#check` and the other `#` commands.
    HashCommand,
}

/// One token.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) struct Token {
    pub kind: Kind,
    pub start: u32,
    pub end: u32,
    /// 1-based line.
    pub line: u32,
    /// 0-based column, in characters.
    pub col: u32,
    /// No other token comes before it on its line.
    pub first_on_line: bool,
}

/// A lexed file.
#[derive(Debug, Default)]
pub(super) struct Lexed {
    pub tokens: Vec<Token>,
    /// Byte ranges of comments, in order.
    pub comments: Vec<(u32, u32)>,
    pub diagnostics: Vec<Diagnostic>,
}

/// Symbols of more than one character, longest first where one is a prefix of another.
const SYMBOLS: &[&str] = &[
    "<;>", "<->", "<|>", "|>.", "...", ":=", "::", "=>", "->", "<-", "@[", "..", "%[", "#[", "`(",
    "<|", "|>", "∃!", "Σ'", "==", "!=", "&&", "||", "++", "<=", ">=", "//", "<$>", "<*>", ">>=",
];

struct Lexer<'a> {
    text: &'a str,
    pos: usize,
    /// Open interpolated strings: for each, the brace depth inside its current `{...}`
    /// and the byte where the string opened.
    interpolations: Vec<(u32, usize)>,
    raw: Vec<(Kind, usize, usize)>,
    out: Lexed,
    lines: LineIndex<'a>,
}

/// Lexes a whole file.
pub(super) fn lex(text: &str) -> Lexed {
    let mut lx = Lexer {
        text,
        pos: 0,
        interpolations: Vec::new(),
        raw: Vec::new(),
        out: Lexed::default(),
        lines: LineIndex::new(text),
    };
    lx.run();
    lx.finish()
}

impl<'a> Lexer<'a> {
    fn rest(&self) -> &'a str {
        self.text.get(self.pos..).unwrap_or("")
    }

    fn peek(&self) -> Option<char> {
        self.rest().chars().next()
    }

    fn peek_at(&self, n: usize) -> Option<char> {
        self.rest().chars().nth(n)
    }

    fn warn(&mut self, at: usize, message: String) {
        let p = self.lines.position(at);
        self.out.diagnostics.push(Diagnostic {
            severity: Severity::Warning,
            line: p.line,
            column: p.column,
            message,
        });
    }

    fn push(&mut self, kind: Kind, start: usize, end: usize) {
        self.raw.push((kind, start, end));
    }

    fn run(&mut self) {
        while let Some(c) = self.peek() {
            let start = self.pos;
            let rest = self.rest();
            if c.is_whitespace() {
                self.pos += c.len_utf8();
            } else if rest.starts_with("--") {
                let len = rest.find('\n').unwrap_or(rest.len());
                self.pos += len;
                self.out.comments.push((start as u32, self.pos as u32));
            } else if rest.starts_with("/-") {
                if !self.block_comment() {
                    return;
                }
            } else if c == '"' {
                self.pos += 1;
                if !self.string_body(start, false) {
                    return;
                }
            } else if c == 'r' && self.raw_string_start() {
                if !self.raw_string(start) {
                    return;
                }
            } else if c == '\'' {
                self.char_or_quote();
            } else if c == '`' {
                self.backtick();
            } else if c == '#' && self.peek_at(1).is_some_and(|n| n.is_ascii_alphabetic()) {
                self.pos += 1;
                while self
                    .peek()
                    .is_some_and(|n| n.is_ascii_alphanumeric() || n == '_')
                {
                    self.pos += 1;
                }
                self.push(Kind::HashCommand, start, self.pos);
            } else if is_id_first(c) || c == '«' {
                if !self.identifier() {
                    return;
                }
            } else if c.is_ascii_digit() {
                self.number();
            } else if c == '}' && self.interpolations.last().is_some_and(|&(d, _)| d == 0) {
                // The end of a `{...}` inside an interpolated string: back to the string.
                self.pos += 1;
                if let Some((_, opened)) = self.interpolations.pop() {
                    if !self.string_body(opened, true) {
                        return;
                    }
                }
            } else {
                if let Some(top) = self.interpolations.last_mut() {
                    match c {
                        '{' => top.0 += 1,
                        '}' => top.0 = top.0.saturating_sub(1),
                        _ => {}
                    }
                }
                let len = SYMBOLS
                    .iter()
                    .find(|s| rest.starts_with(**s))
                    .map_or(c.len_utf8(), |s| s.len());
                self.pos += len;
                self.push(Kind::Symbol, start, self.pos);
            }
        }
        if let Some(&(_, opened)) = self.interpolations.first() {
            let line = self.lines.line(opened);
            self.warn(
                opened,
                format!(
                    "unterminated interpolated string: the `{{` opened in the string at line \
                     {line} is never closed; the rest of the file was not read"
                ),
            );
        }
    }

    /// Skips a (nested) block comment; false when it never closes.
    fn block_comment(&mut self) -> bool {
        let start = self.pos;
        self.pos += 2;
        let mut depth = 1u32;
        let bytes = self.text.as_bytes();
        while self.pos < bytes.len() {
            if bytes[self.pos] == b'/' && bytes.get(self.pos + 1) == Some(&b'-') {
                depth += 1;
                self.pos += 2;
            } else if bytes[self.pos] == b'-' && bytes.get(self.pos + 1) == Some(&b'/') {
                depth -= 1;
                self.pos += 2;
                if depth == 0 {
                    self.out.comments.push((start as u32, self.pos as u32));
                    return true;
                }
            } else {
                self.pos += 1;
            }
        }
        self.out
            .comments
            .push((start as u32, self.text.len() as u32));
        let line = self.lines.line(start);
        self.warn(
            start,
            format!(
                "unterminated comment: the block comment opened at line {line} is never \
                 closed; the rest of the file was not read"
            ),
        );
        false
    }

    /// Reads a string body after its opening quote (or after a `}` of an interpolation).
    /// In an interpolated string a `{` hands back to code. False when it never closes.
    fn string_body(&mut self, opened: usize, interpolated: bool) -> bool {
        let body_start = self.pos;
        let mut chars = self.rest().char_indices();
        while let Some((i, c)) = chars.next() {
            match c {
                '\\' => {
                    chars.next();
                }
                '"' => {
                    self.pos = body_start + i + 1;
                    if !interpolated {
                        self.push(Kind::Str, opened, self.pos);
                    }
                    return true;
                }
                '{' if interpolated => {
                    self.pos = body_start + i + 1;
                    self.interpolations.push((0, opened));
                    return true;
                }
                _ => {}
            }
        }
        self.pos = self.text.len();
        let line = self.lines.line(opened);
        self.warn(
            opened,
            format!(
                "unterminated string literal: the string opened at line {line} is never \
                 closed; the rest of the file was not read"
            ),
        );
        false
    }

    fn raw_string_start(&self) -> bool {
        let after = self.rest().get(1..).unwrap_or("");
        after.trim_start_matches('#').starts_with('"')
            && (after.starts_with('"') || after.starts_with('#'))
    }

    /// Reads `r"..."` or `r#"..."#`; false when it never closes.
    fn raw_string(&mut self, start: usize) -> bool {
        let after = self.rest().get(1..).unwrap_or("");
        let hashes = after.len() - after.trim_start_matches('#').len();
        let body = start + 1 + hashes + 1;
        let closing = format!("\"{}", "#".repeat(hashes));
        match self.text.get(body..).and_then(|b| b.find(&closing)) {
            Some(i) => {
                self.pos = body + i + closing.len();
                self.push(Kind::Str, start, self.pos);
                true
            }
            None => {
                self.pos = self.text.len();
                let line = self.lines.line(start);
                self.warn(
                    start,
                    format!(
                        "unterminated string literal: the raw string opened at line {line} \
                         is never closed; the rest of the file was not read"
                    ),
                );
                false
            }
        }
    }

    /// `'a'`, `'\n'`, `'\''` are characters; any other `'` is a symbol (Mathlib's `f '' s`).
    fn char_or_quote(&mut self) {
        let start = self.pos;
        let rest = self.rest();
        let mut chars = rest.char_indices().skip(1);
        let len = match chars.next() {
            Some((_, '\\')) => rest
                .char_indices()
                .skip(3)
                .take(10)
                .take_while(|&(_, c)| c != '\n')
                .find(|&(_, c)| c == '\'')
                .map(|(i, _)| i + 1),
            Some((_, c)) if c != '\n' && c != '\'' => match chars.next() {
                Some((i, '\'')) => Some(i + 1),
                _ => None,
            },
            _ => None,
        };
        match len {
            Some(len) => {
                self.pos += len;
                self.push(Kind::Char, start, self.pos);
            }
            None => {
                self.pos += 1;
                self.push(Kind::Symbol, start, self.pos);
            }
        }
    }

    /// `` `name `` and ``` ``name ``` are name literals; `` `( `` opens a quotation.
    fn backtick(&mut self) {
        let start = self.pos;
        let ticks = if self.rest().starts_with("``") { 2 } else { 1 };
        let after = self.peek_at(ticks);
        if after.is_some_and(|c| is_id_first(c) || c == '«') {
            self.pos += ticks;
            let mark = self.raw.len();
            if self.identifier() {
                self.raw.truncate(mark);
                self.push(Kind::NameLiteral, start, self.pos);
            }
        } else if after == Some('(') && ticks == 1 {
            self.pos += 2;
            self.push(Kind::Symbol, start, self.pos);
        } else {
            self.pos += 1;
            self.push(Kind::Symbol, start, self.pos);
        }
    }

    /// Reads one component at `pos`: a plain one, or a guillemet-escaped one on one line.
    fn component(&mut self) -> bool {
        let rest = self.rest();
        if let Some(inner) = rest.strip_prefix('«') {
            match inner.find(['»', '\n']) {
                Some(i) if inner[i..].starts_with('»') => {
                    self.pos += '«'.len_utf8() + i + '»'.len_utf8();
                    true
                }
                _ => false,
            }
        } else {
            let len: usize = rest
                .char_indices()
                .find(|&(i, c)| {
                    if i == 0 {
                        !is_id_first(c)
                    } else {
                        !is_id_rest(c)
                    }
                })
                .map_or(rest.len(), |(i, _)| i);
            self.pos += len;
            len > 0
        }
    }

    /// Reads a dotted identifier (or a keyword, or an interpolated string `s!"..."`).
    /// False when the file ends inside an interpolated string.
    fn identifier(&mut self) -> bool {
        let start = self.pos;
        if !self.component() {
            // A lone `«` with no closing `»` on its line: a symbol.
            self.pos = start + '«'.len_utf8();
            self.push(Kind::Symbol, start, self.pos);
            return true;
        }
        loop {
            let rest = self.rest();
            let Some(after) = rest.strip_prefix('.') else {
                break;
            };
            match after.chars().next() {
                Some(c) if is_id_first(c) || c == '«' => {
                    let save = self.pos;
                    self.pos += 1;
                    if !self.component() {
                        self.pos = save;
                        break;
                    }
                }
                _ => break,
            }
        }
        let word = &self.text[start..self.pos];
        if word.ends_with('!') && self.peek() == Some('"') {
            self.pos += 1;
            return self.string_body(start, true);
        }
        let kind = if !word.contains('.') && is_keyword(word) {
            Kind::Keyword
        } else {
            Kind::Ident
        };
        self.push(kind, start, self.pos);
        true
    }

    /// Decimal, hexadecimal, binary, octal and scientific literals. After a `.` glued to
    /// the previous token (`x.1.2`), only the digits: that is a field index.
    fn number(&mut self) {
        let start = self.pos;
        let field_index = self
            .raw
            .last()
            .is_some_and(|&(k, s, e)| k == Kind::Symbol && e == start && &self.text[s..e] == ".");
        let rest = self.rest();
        let bytes = rest.as_bytes();
        let mut i = 0;
        let radix = rest
            .get(..2)
            .filter(|p| matches!(*p, "0x" | "0X" | "0b" | "0B" | "0o" | "0O"));
        if radix.is_some() && !field_index {
            i = 2;
            while i < bytes.len() && (bytes[i].is_ascii_hexdigit() || bytes[i] == b'_') {
                i += 1;
            }
        } else {
            while i < bytes.len() && bytes[i].is_ascii_digit() {
                i += 1;
            }
            if !field_index {
                if bytes.get(i) == Some(&b'.') && bytes.get(i + 1).is_some_and(u8::is_ascii_digit) {
                    i += 1;
                    while i < bytes.len() && bytes[i].is_ascii_digit() {
                        i += 1;
                    }
                }
                if matches!(bytes.get(i), Some(b'e' | b'E')) {
                    let mut j = i + 1;
                    if matches!(bytes.get(j), Some(b'+' | b'-')) {
                        j += 1;
                    }
                    if bytes.get(j).is_some_and(u8::is_ascii_digit) {
                        i = j;
                        while i < bytes.len() && bytes[i].is_ascii_digit() {
                            i += 1;
                        }
                    }
                }
            }
        }
        self.pos += i.max(1);
        self.push(Kind::Number, start, self.pos);
    }

    /// Adds lines and columns (in one pass, so a long line costs no more than its length).
    fn finish(mut self) -> Lexed {
        let text = self.text;
        let mut tokens = Vec::with_capacity(self.raw.len());
        let mut line = 1u32;
        let mut line_start = 0usize;
        let mut scan = 0usize;
        let mut col = 0u32;
        let mut last_line = 0u32;
        for &(kind, start, end) in &self.raw {
            while let Some(nl) = text.get(scan..start).and_then(|s| s.find('\n')) {
                line += 1;
                line_start = scan + nl + 1;
                scan = line_start;
                col = 0;
            }
            col += text
                .get(scan.max(line_start)..start)
                .map_or(0, |s| s.chars().count()) as u32;
            scan = start;
            tokens.push(Token {
                kind,
                start: start as u32,
                end: end as u32,
                line,
                col,
                first_on_line: line != last_line,
            });
            last_line = line;
        }
        self.out.tokens = tokens;
        self.out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn texts(src: &str) -> Vec<String> {
        lex(src)
            .tokens
            .iter()
            .map(|t| src[t.start as usize..t.end as usize].to_string())
            .collect()
    }

    #[test]
    fn names_symbols_and_keywords() {
        // From memory of Lean 4's lexer: dotted names are one token, `x.1` is a name, a
        // dot and a field index, and `h.trans` is one name.
        let src = "theorem Ledger.qty_le (h : a ≤ b) : x.1 = h.trans := by simp [«my lemma»]";
        assert_eq!(
            texts(src),
            [
                "theorem",
                "Ledger.qty_le",
                "(",
                "h",
                ":",
                "a",
                "≤",
                "b",
                ")",
                ":",
                "x",
                ".",
                "1",
                "=",
                "h.trans",
                ":=",
                "by",
                "simp",
                "[",
                "«my lemma»",
                "]"
            ]
        );
        let lexed = lex(src);
        assert_eq!(lexed.tokens[0].kind, Kind::Keyword);
        assert_eq!(lexed.tokens[1].kind, Kind::Ident);
        assert_eq!(lexed.tokens[12].kind, Kind::Number);
    }

    #[test]
    fn nested_comments_and_doc_comments_are_skipped() {
        let src = "/- outer /- inner -/ still -/ def a := 1 -- trailing\n/-- doc -/ def b := 2";
        assert_eq!(texts(src), ["def", "a", ":=", "1", "def", "b", ":=", "2"]);
        assert_eq!(lex(src).comments.len(), 3);
    }

    #[test]
    fn strings_chars_and_interpolation() {
        let src = r#"def s := s!"qty {l.qty} of {name}" ++ "a \" b" ++ toString 'x' ++ '\''"#;
        assert_eq!(
            texts(src),
            [
                "def",
                "s",
                ":=",
                "l.qty",
                "name",
                "++",
                r#""a \" b""#,
                "++",
                "toString",
                "'x'",
                "++",
                r"'\''"
            ]
        );
        assert_eq!(texts("f '' s"), ["f", "'", "'", "s"]);
        assert_eq!(
            texts(r##"r#"raw " here"# x"##),
            [r##"r#"raw " here"#"##, "x"]
        );
    }

    #[test]
    fn unterminated_comment_and_string_warn_with_their_line() {
        let lexed = lex("def a := 1\n\n/- never closed\ndef b := 2");
        assert_eq!(lexed.tokens.len(), 4);
        assert_eq!(lexed.diagnostics.len(), 1);
        assert_eq!(lexed.diagnostics[0].line, 3);
        assert!(lexed.diagnostics[0].message.contains("opened at line 3"));
        let lexed = lex("def a := 1\ndef b := \"open\nmore");
        assert_eq!(lexed.diagnostics.len(), 1);
        assert!(lexed.diagnostics[0]
            .message
            .contains("string opened at line 2"));
        assert_eq!(lexed.tokens.len(), 7);
    }

    #[test]
    fn lines_and_columns_count_characters() {
        let lexed = lex("def α :=\n  ⟨1, 2⟩");
        let t = &lexed.tokens;
        assert_eq!((t[1].line, t[1].col), (1, 4));
        assert_eq!((t[2].line, t[2].col), (1, 6));
        assert_eq!((t[3].line, t[3].col, t[3].first_on_line), (2, 2, true));
        assert_eq!((t[4].col, t[4].first_on_line), (3, false));
    }

    #[test]
    fn name_literals_and_quotations() {
        assert_eq!(
            lex("`foo ``Nat.succ")
                .tokens
                .iter()
                .map(|t| t.kind)
                .collect::<Vec<_>>(),
            [Kind::NameLiteral, Kind::NameLiteral]
        );
        assert_eq!(texts("`(tactic| simp)"), ["`(", "tactic", "|", "simp", ")"]);
        assert_eq!(texts("#eval 1"), ["#eval", "1"]);
    }
}
