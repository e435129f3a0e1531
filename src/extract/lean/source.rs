//! A lexed Lean file with what every reader of it needs: token text, matching brackets,
//! and statement text printed without comments.
//!
//! Takes the file's text and its tokens; gives lookups by token index that never panic
//! (an index past the end reads as nothing). It does not interpret the tokens.

use super::lexer::{lex, Kind, Token};
use crate::extract::text::{normalize_whitespace, LineIndex};
use crate::library::{Diagnostic, Span};

/// One lexed file.
pub(super) struct Source<'a> {
    pub text: &'a str,
    pub tokens: Vec<Token>,
    comments: Vec<(u32, u32)>,
    /// For an opening bracket, the index of its closing bracket; `usize::MAX` otherwise.
    close: Vec<usize>,
    pub lines: LineIndex<'a>,
}

/// The closing bracket for an opening one.
fn closer_of(open: &str) -> Option<&'static str> {
    Some(match open {
        "(" | "`(" => ")",
        "[" | "@[" | "#[" | "%[" => "]",
        "{" => "}",
        "⟨" => "⟩",
        "⦃" => "⦄",
        "‹" => "›",
        _ => return None,
    })
}

impl<'a> Source<'a> {
    /// Lexes `text`; also returns the lexer's diagnostics.
    pub fn new(text: &'a str) -> (Source<'a>, Vec<Diagnostic>) {
        let lexed = lex(text);
        let mut src = Source {
            text,
            close: vec![usize::MAX; lexed.tokens.len()],
            tokens: lexed.tokens,
            comments: lexed.comments,
            lines: LineIndex::new(text),
        };
        src.match_brackets();
        (src, lexed.diagnostics)
    }

    /// Pairs brackets with a stack; a closer with no opener of its kind is left alone, and
    /// openers left open inside a pair are dropped.
    fn match_brackets(&mut self) {
        let mut stack: Vec<(usize, &'static str)> = Vec::new();
        for i in 0..self.tokens.len() {
            if self.tokens[i].kind != Kind::Symbol {
                continue;
            }
            let t = self.text_of(i);
            if let Some(closer) = closer_of(t) {
                stack.push((i, closer));
            } else if let Some(pos) = stack.iter().rposition(|&(_, c)| c == t) {
                self.close[stack[pos].0] = i;
                stack.truncate(pos);
            }
        }
    }

    /// Number of tokens.
    pub fn len(&self) -> usize {
        self.tokens.len()
    }

    /// The token at `i`.
    pub fn tok(&self, i: usize) -> Option<&Token> {
        self.tokens.get(i)
    }

    /// The text of token `i` (empty past the end).
    pub fn text_of(&self, i: usize) -> &'a str {
        self.tokens
            .get(i)
            .and_then(|t| self.text.get(t.start as usize..t.end as usize))
            .unwrap_or("")
    }

    /// Whether token `i` is `s`.
    pub fn is(&self, i: usize, s: &str) -> bool {
        i < self.tokens.len() && self.text_of(i) == s
    }

    /// The kind of token `i`.
    pub fn kind(&self, i: usize) -> Option<Kind> {
        self.tokens.get(i).map(|t| t.kind)
    }

    /// Whether token `i` is an identifier (not a keyword).
    pub fn is_ident(&self, i: usize) -> bool {
        self.kind(i) == Some(Kind::Ident)
    }

    /// Whether token `i` starts right where token `i - 1` ends.
    pub fn glued_to_prev(&self, i: usize) -> bool {
        i > 0 && i < self.tokens.len() && self.tokens[i - 1].end == self.tokens[i].start
    }

    /// The index of the bracket closing the one at `i`, if it closes before `hi`.
    pub fn closing(&self, i: usize, hi: usize) -> Option<usize> {
        self.close
            .get(i)
            .copied()
            .filter(|&c| c != usize::MAX && c < hi)
    }

    /// The index after the group starting at `i`: past its closing bracket when `i` opens a
    /// matched bracket, else `i + 1`; never past `hi`.
    pub fn skip_group(&self, i: usize, hi: usize) -> usize {
        match self.closing(i, hi) {
            Some(c) => c + 1,
            None => (i + 1).min(hi.max(i + 1)),
        }
    }

    /// The first index in `lo..hi` at bracket depth 0 whose text is one of `words`.
    pub fn find_at_depth0(&self, lo: usize, hi: usize, words: &[&str]) -> Option<usize> {
        let mut i = lo;
        while i < hi.min(self.len()) {
            if words.contains(&self.text_of(i)) {
                return Some(i);
            }
            i = self.skip_group(i, hi);
        }
        None
    }

    /// Splits `lo..hi` into items laid out one per line (structure fields, `where`
    /// clauses): a new item starts at each line whose first token is outside brackets and
    /// at or left of the items' column (the first item's, or the leftmost line start).
    pub fn items(&self, lo: usize, hi: usize) -> Vec<(usize, usize)> {
        let hi = hi.min(self.len());
        if lo >= hi {
            return Vec::new();
        }
        let mut line_starts = Vec::new();
        let mut i = self.skip_group(lo, hi);
        while i < hi {
            if self.tokens[i].first_on_line {
                line_starts.push(i);
            }
            i = self.skip_group(i, hi);
        }
        let col = if self.tokens[lo].first_on_line {
            self.tokens[lo].col
        } else {
            line_starts
                .iter()
                .map(|&k| self.tokens[k].col)
                .min()
                .unwrap_or(u32::MAX)
        };
        let mut starts = vec![lo];
        starts.extend(
            line_starts
                .into_iter()
                .filter(|&k| self.tokens[k].col <= col),
        );
        starts
            .iter()
            .enumerate()
            .map(|(n, &a)| (a, starts.get(n + 1).copied().unwrap_or(hi)))
            .collect()
    }

    /// The source of tokens `lo..hi` with comments removed and white space normalised.
    pub fn normalized(&self, lo: usize, hi: usize) -> String {
        let hi = hi.min(self.len());
        if lo >= hi {
            return String::new();
        }
        let start = self.tokens[lo].start;
        let end = self.tokens[hi - 1].end;
        let mut out = String::new();
        let mut at = start;
        let first = self.comments.partition_point(|&(_, e)| e <= start);
        for &(cs, ce) in &self.comments[first..] {
            if cs >= end {
                break;
            }
            if cs > at {
                out.push_str(self.text.get(at as usize..cs as usize).unwrap_or(""));
            }
            out.push(' ');
            at = at.max(ce);
        }
        if at < end {
            out.push_str(self.text.get(at as usize..end as usize).unwrap_or(""));
        }
        normalize_whitespace(&out)
    }

    /// The span from the start of token `lo` to the end of token `hi - 1`.
    pub fn span(&self, lo: usize, hi: usize) -> Span {
        let start = self
            .tokens
            .get(lo)
            .map_or(self.text.len() as u32, |t| t.start);
        let end = hi
            .checked_sub(1)
            .and_then(|h| self.tokens.get(h))
            .map_or(start, |t| t.end)
            .max(start);
        self.lines.span(start as usize, end as usize)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn brackets_match_and_stray_closers_are_ignored() {
        let (src, _) = Source::new("f (a [b) c] ⟨d⟩ )");
        // `(` at 1 is closed by the `)` at 5, dropping the unclosed `[`; the last `)` is
        // a stray closer.
        assert_eq!(src.closing(1, src.len()), Some(5));
        assert_eq!(src.closing(3, src.len()), None);
        assert_eq!(src.closing(8, src.len()), Some(10));
        assert_eq!(src.closing(1, 4), None);
    }

    #[test]
    fn normalized_text_drops_comments() {
        let (src, _) = Source::new("(n : Nat) -- the count\n  /- note -/ : n ≤ n");
        assert_eq!(src.normalized(0, src.len()), "(n : Nat) : n ≤ n");
        assert_eq!(src.normalized(3, 3), "");
    }
}
