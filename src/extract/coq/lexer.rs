//! Coq's lexical layer: tokens and sentences.
//!
//! Takes a file's text; gives its tokens (identifiers, qualified names, numbers, strings,
//! punctuation) grouped into sentences, the byte ranges of its comments, and a diagnostic
//! for an unterminated comment or string. A sentence ends at a `.` followed by white space
//! or the end of the file, as coqc reads it; bullets (`-`, `+`, `*`, `--`, ...) and the
//! braces `{` `}` that open and close a focused goal are sentences of their own. It knows
//! no vernacular: what a sentence means is for `sentences.rs`.

use std::ops::Range;

/// What a token is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TokenKind {
    /// An identifier or a qualified name (`x`, `Nat.add_comm`, `α'`), also `_`.
    Ident,
    /// A numeral (`0`, `42`, `0x1F`, `1.5`).
    Number,
    /// A string literal, quotes included.
    Str,
    /// Punctuation: a bracket, `,`, `;`, `.`, `..`, `.(`, `{|`, `|}`, or a run of symbol
    /// characters (`:=`, `=>`, `->`, `/\`, `≤`).
    Punct,
}

/// One token: its kind and byte range in the file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Token {
    pub kind: TokenKind,
    pub start: u32,
    pub end: u32,
}

impl Token {
    /// The token's text.
    pub fn text<'t>(&self, text: &'t str) -> &'t str {
        text.get(self.start as usize..self.end as usize)
            .unwrap_or("")
    }
}

/// One sentence: a range of tokens and the bytes it covers (up to and including its `.`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Sentence {
    pub tokens: Range<usize>,
    pub start: u32,
    pub end: u32,
    /// A bullet or a focusing brace, not ended by a `.`.
    pub bullet: bool,
}

/// The lexed file.
#[derive(Clone, Debug, Default)]
pub struct Lexed {
    pub tokens: Vec<Token>,
    pub sentences: Vec<Sentence>,
    /// Byte ranges of comments (outermost only).
    pub comments: Vec<Range<u32>>,
    /// An unterminated comment or string: what it is and the byte where it opened.
    /// Lexing stops there; the sentences before it are kept.
    pub unterminated: Option<(&'static str, u32)>,
}

fn is_ident_start(c: char) -> bool {
    c == '_' || c.is_alphabetic()
}

fn is_ident_continue(c: char) -> bool {
    c == '_' || c == '\'' || c.is_alphanumeric()
}

fn is_bracket(c: char) -> bool {
    matches!(c, '(' | ')' | '[' | ']' | '{' | '}' | ',' | ';')
}

/// A character that may be part of a run of symbol characters.
fn is_symbol_char(c: char) -> bool {
    !(c.is_whitespace() || is_ident_continue(c) || is_bracket(c) || c == '"' || c == '.')
}

/// Bullets (`-`, `--`, `+`, `*`, ...) and focusing braces, which form sentences on their own
/// when they start one.
fn is_bullet(text: &str) -> bool {
    text == "{"
        || text == "}"
        || (!text.is_empty()
            && (text.bytes().all(|b| b == b'-')
                || text.bytes().all(|b| b == b'+')
                || text.bytes().all(|b| b == b'*')))
}

/// Lexes a whole file.
pub fn lex(text: &str) -> Lexed {
    let mut lx = Lexed::default();
    let bytes = text.as_bytes();
    let mut i = 0usize;
    let mut sentence_first = 0usize;
    let char_at = |i: usize| text.get(i..).and_then(|s| s.chars().next());
    while i < bytes.len() {
        let Some(c) = char_at(i) else { break };
        if c.is_whitespace() {
            i += c.len_utf8();
            continue;
        }
        if bytes[i] == b'(' && bytes.get(i + 1) == Some(&b'*') {
            match skip_comment(text, i) {
                Some(end) => {
                    lx.comments.push(i as u32..end as u32);
                    i = end;
                    continue;
                }
                None => {
                    lx.unterminated = Some(("comment", i as u32));
                    break;
                }
            }
        }
        let start = i;
        let kind;
        if c == '"' {
            match skip_string(text, i) {
                Some(end) => {
                    i = end;
                    kind = TokenKind::Str;
                }
                None => {
                    lx.unterminated = Some(("string", i as u32));
                    break;
                }
            }
        } else if is_ident_start(c) {
            i = scan_qualified(text, i);
            kind = TokenKind::Ident;
        } else if c.is_ascii_digit() {
            i += 1;
            while let Some(d) = char_at(i) {
                if d.is_ascii_alphanumeric() || d == '_' {
                    i += 1;
                } else if d == '.' && bytes.get(i + 1).is_some_and(|b| b.is_ascii_digit()) {
                    i += 2;
                } else {
                    break;
                }
            }
            kind = TokenKind::Number;
        } else if c == '.' {
            let next = char_at(i + 1);
            if next.is_none_or(char::is_whitespace) {
                // End of a sentence.
                i += 1;
                if lx.tokens.len() > sentence_first {
                    let first = lx.tokens[sentence_first].start;
                    lx.sentences.push(Sentence {
                        tokens: sentence_first..lx.tokens.len(),
                        start: first,
                        end: i as u32,
                        bullet: false,
                    });
                }
                sentence_first = lx.tokens.len();
                continue;
            }
            // `..` and longer runs are one token. The `.(` of a projection `x.(f)` is two,
            // `.` and `(`, so that every bracket counter sees the `(` its `)` closes.
            i += 1;
            while bytes.get(i) == Some(&b'.') {
                i += 1;
            }
            kind = TokenKind::Punct;
        } else if (c == '{' && bytes.get(i + 1) == Some(&b'|'))
            || (c == '|' && bytes.get(i + 1) == Some(&b'}'))
        {
            // `{|` and `|}` of record values.
            i += 2;
            kind = TokenKind::Punct;
        } else if is_bracket(c) {
            i += 1;
            kind = TokenKind::Punct;
        } else {
            i += c.len_utf8();
            while let Some(d) = char_at(i) {
                if !is_symbol_char(d) {
                    break;
                }
                // `(*` opens a comment even right after a symbol.
                if d == '(' {
                    break;
                }
                if d == '|' && bytes.get(i + 1) == Some(&b'}') {
                    break;
                }
                i += d.len_utf8();
            }
            kind = TokenKind::Punct;
        }
        let token = Token {
            kind,
            start: start as u32,
            end: i as u32,
        };
        let at_sentence_start = lx.tokens.len() == sentence_first;
        let focus_after_selector = token.text(text) == "{" && {
            // `2: {` and `all: {` focus a goal: the brace ends the sentence.
            let so_far = &lx.tokens[sentence_first..];
            so_far.len() == 2
                && so_far[1].text(text) == ":"
                && (so_far[0].kind == TokenKind::Number || so_far[0].text(text) == "all")
        };
        lx.tokens.push(token);
        if (at_sentence_start && kind == TokenKind::Punct && is_bullet(token.text(text)))
            || focus_after_selector
        {
            let first = lx.tokens[sentence_first].start;
            lx.sentences.push(Sentence {
                tokens: sentence_first..lx.tokens.len(),
                start: first,
                end: token.end,
                bullet: true,
            });
            sentence_first = lx.tokens.len();
        }
    }
    lx
}

/// Scans an identifier and the `.ident` parts of a qualified name after it.
fn scan_qualified(text: &str, mut i: usize) -> usize {
    let bytes = text.as_bytes();
    let char_at = |i: usize| text.get(i..).and_then(|s| s.chars().next());
    loop {
        while let Some(d) = char_at(i) {
            if is_ident_continue(d) {
                i += d.len_utf8();
            } else {
                break;
            }
        }
        if bytes.get(i) == Some(&b'.') && char_at(i + 1).is_some_and(is_ident_start) {
            i += 1;
        } else {
            return i;
        }
    }
}

/// Skips a comment opened at `start` (`(*`), nested comments and strings inside it
/// included. Returns the byte after its `*)`, or `None` when it never closes.
fn skip_comment(text: &str, start: usize) -> Option<usize> {
    let bytes = text.as_bytes();
    let mut depth = 0usize;
    let mut i = start;
    while i < bytes.len() {
        match bytes[i] {
            b'(' if bytes.get(i + 1) == Some(&b'*') => {
                depth += 1;
                i += 2;
            }
            b'*' if bytes.get(i + 1) == Some(&b')') => {
                depth -= 1;
                i += 2;
                if depth == 0 {
                    return Some(i);
                }
            }
            // Coq lexes strings inside comments, so `(* "*)" *)` is one comment.
            b'"' => i = skip_string(text, i)?,
            _ => i += 1,
        }
    }
    None
}

/// Skips a string opened at `start`; `""` inside is an escaped quote. Returns the byte after
/// the closing quote.
fn skip_string(text: &str, start: usize) -> Option<usize> {
    let bytes = text.as_bytes();
    let mut i = start + 1;
    while i < bytes.len() {
        if bytes[i] == b'"' {
            if bytes.get(i + 1) == Some(&b'"') {
                i += 2;
                continue;
            }
            return Some(i + 1);
        }
        i += 1;
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sentences(text: &str) -> Vec<Vec<String>> {
        let lx = lex(text);
        lx.sentences
            .iter()
            .map(|s| {
                lx.tokens[s.tokens.clone()]
                    .iter()
                    .map(|t| t.text(text).to_string())
                    .collect()
            })
            .collect()
    }

    #[test]
    fn sentences_end_at_dot_and_blank() {
        let s = sentences("Lemma a : Nat.add_comm = x.(f) .. y.\nProof. auto. Qed.");
        assert_eq!(s.len(), 4);
        assert_eq!(
            s[0],
            [
                "Lemma",
                "a",
                ":",
                "Nat.add_comm",
                "=",
                "x",
                ".",
                "(",
                "f",
                ")",
                "..",
                "y"
            ]
        );
        assert_eq!(s[3], ["Qed"]);
    }

    #[test]
    fn comments_nest_and_hold_strings() {
        let text = "(* a (* b *) \"*)\" c *) Definition x := \"a\"\"b\". (* . *)";
        let s = sentences(text);
        assert_eq!(s, vec![vec!["Definition", "x", ":=", "\"a\"\"b\""]]);
        assert_eq!(lex(text).comments.len(), 2);
    }

    #[test]
    fn bullets_and_braces_are_sentences() {
        let s = sentences("split. - auto. + { exact I. } * apply/andP. 2: { auto. } -- now.");
        let firsts: Vec<&str> = s.iter().map(|t| t[0].as_str()).collect();
        assert_eq!(
            firsts,
            [
                "split", "-", "auto", "+", "{", "exact", "}", "*", "apply", "2", "auto", "}", "--",
                "now"
            ]
        );
    }

    #[test]
    fn unterminated_comment_and_string_are_reported() {
        let lx = lex("Lemma a : True.\n(* open");
        assert_eq!(lx.sentences.len(), 1);
        assert_eq!(lx.unterminated, Some(("comment", 16)));
        let lx = lex("Definition s := \"abc.\nLemma b : True.");
        assert_eq!(lx.unterminated.map(|u| u.0), Some("string"));
        assert!(lx.sentences.is_empty());
    }
}
