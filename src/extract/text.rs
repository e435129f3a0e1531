//! Text helpers shared by the frontends: byte offsets to line/column positions, and
//! whitespace normalisation of statements.
//!
//! Takes a file's text; gives [`Position`]s and normalised strings. Knows no proof language.

use crate::library::{Position, Span};

/// Maps byte offsets of one text to 1-based line and column positions.
#[derive(Clone, Debug)]
pub struct LineIndex<'a> {
    text: &'a str,
    /// Byte offset at which each line starts.
    line_starts: Vec<u32>,
}

impl<'a> LineIndex<'a> {
    /// Indexes the line starts of `text`.
    pub fn new(text: &'a str) -> LineIndex<'a> {
        let mut line_starts = vec![0u32];
        for (i, b) in text.bytes().enumerate() {
            if b == b'\n' {
                line_starts.push(i as u32 + 1);
            }
        }
        LineIndex { text, line_starts }
    }

    /// The position of byte offset `byte` (clamped to the text; moved back to a char boundary).
    pub fn position(&self, byte: usize) -> Position {
        let mut byte = byte.min(self.text.len());
        while !self.text.is_char_boundary(byte) {
            byte -= 1;
        }
        let line = match self.line_starts.binary_search(&(byte as u32)) {
            Ok(i) => i,
            Err(i) => i - 1,
        };
        let start = self.line_starts[line] as usize;
        let column = self.text[start..byte].chars().count() as u32 + 1;
        Position {
            line: line as u32 + 1,
            column,
            byte: byte as u32,
        }
    }

    /// The span of bytes `start..end`.
    pub fn span(&self, start: usize, end: usize) -> Span {
        Span {
            start: self.position(start),
            end: self.position(end),
        }
    }

    /// The 1-based line of byte offset `byte`.
    pub fn line(&self, byte: usize) -> u32 {
        self.position(byte).line
    }
}

/// Collapses every run of white space (spaces, tabs, newlines) into one space and trims.
pub fn normalize_whitespace(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for word in text.split_whitespace() {
        if !out.is_empty() {
            out.push(' ');
        }
        out.push_str(word);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_count_lines_and_chars() {
        let text = "ab\n≤c\n\nd";
        let idx = LineIndex::new(text);
        assert_eq!(
            idx.position(0),
            Position {
                line: 1,
                column: 1,
                byte: 0
            }
        );
        assert_eq!(
            idx.position(3),
            Position {
                line: 2,
                column: 1,
                byte: 3
            }
        );
        // `c` follows the three-byte `≤`: column 2, byte 6.
        assert_eq!(
            idx.position(6),
            Position {
                line: 2,
                column: 2,
                byte: 6
            }
        );
        assert_eq!(idx.position(9).line, 4);
        // inside `≤` moves back to its first byte
        assert_eq!(idx.position(4).byte, 3);
        assert_eq!(idx.position(999).line, 4);
    }

    #[test]
    fn whitespace_collapses() {
        assert_eq!(normalize_whitespace("  a\n\t b  c \n"), "a b c");
        assert_eq!(normalize_whitespace(""), "");
    }
}
