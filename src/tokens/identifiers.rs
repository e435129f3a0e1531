//! Identifier characters of Lean 4 and Coq, and how one identifier splits into parts.
//!
//! Takes single characters or one identifier as the lexer found it; gives character classes,
//! the identifier's dot-separated components, and each component's word parts
//! (`getElem?` → `get`, `elem`). It does not decide which parts become tokens: that is the
//! tokenizer's job (`mod.rs`).
//!
//! The character classes follow Lean 4's rules (`Lean.isLetterLike`, `isSubScriptAlnum`, from
//! memory) widened to every Unicode letter, since Coq accepts those too, with three
//! exceptions that are notation in practice rather than names: `λ`, `Π`, `Σ` (as in Lean),
//! and the double-struck capitals `ℕ ℤ ℚ ℝ ℂ ℍ ℙ`, which every library uses as notation for
//! its number types.

/// True for a character that may start an identifier: any Unicode letter or `_`, except
/// `λ Π Σ`, the double-struck capitals, and superscript or subscript letters.
pub fn is_identifier_start(c: char) -> bool {
    if c.is_ascii() {
        return c.is_ascii_alphabetic() || c == '_';
    }
    // Arrows, mathematical operators, technical and other symbol blocks: never letters for
    // us (the circled letters `Ⓐ` in there are symbols too). Checked first because most
    // non-ASCII characters of a goal are here, and `is_alphabetic` is a table search.
    if ('\u{2190}'..='\u{2BFF}').contains(&c) {
        return false;
    }
    if matches!(c, 'λ' | 'Π' | 'Σ' | 'ℂ' | 'ℍ' | 'ℕ' | 'ℙ' | 'ℚ' | 'ℝ' | 'ℤ')
        || is_subscript(c)
        || is_superscript(c)
    {
        return false;
    }
    // Latin-1 and Greek letters without the table search (same answer as `is_alphabetic`).
    match c {
        'ª' | 'µ' | 'º' | 'À'..='Ö' | 'Ø'..='ö' | 'ø'..='ÿ' => true,
        '\u{0080}'..='\u{00FF}' => false,
        // Greek, less the unassigned U+038B, U+038D, U+03A2.
        '\u{0388}'..='\u{03F5}' => !matches!(c, '\u{038B}' | '\u{038D}' | '\u{03A2}'),
        _ => c.is_alphabetic(),
    }
}

/// True for a character that may continue an identifier: a start character, an ASCII
/// digit, a subscript (`x₁`), or Lean's `'`, `!`, `?` (`h'`, `get!`, `getElem?`).
pub fn is_identifier_continue(c: char) -> bool {
    is_identifier_start(c) || c.is_ascii_digit() || is_subscript(c) || matches!(c, '\'' | '!' | '?')
}

/// Subscript digits and letters (`₀`–`₉`, `ₐ`–`ₜ`, `ᵢ`–`ᵪ`, `ⱼ`): Lean allows them in names.
pub fn is_subscript(c: char) -> bool {
    matches!(c, '\u{2080}'..='\u{209C}' | '\u{1D62}'..='\u{1D6A}' | '\u{2C7C}')
}

/// Superscript digits, signs and modifier letters (`¹ ² ⁻ ᶜ ᵀ ᵒ ᵈ`): always notation
/// (`x⁻¹`, `sᶜ`, `αᵒᵈ`), never part of a name.
pub fn is_superscript(c: char) -> bool {
    matches!(
        c,
        '\u{00B2}'
            | '\u{00B3}'
            | '\u{00B9}'
            | '\u{02B0}'..='\u{02B8}'
            | '\u{1D2C}'..='\u{1D61}'
            | '\u{1D78}'
            | '\u{1D9B}'..='\u{1DBF}'
            | '\u{2070}'..='\u{207F}'
    )
}

/// Decorations stripped from every token made of an identifier: `'`, `?`, `!` and
/// subscripts. `add_comm'` and `add_comm`, `x₁` and `x` are the same word for retrieval,
/// and `getElem?` is `getelem` (so the whole identifier a query writes matches the one the
/// library declares whichever variant either side names).
pub(crate) fn is_decoration(c: char) -> bool {
    matches!(c, '\'' | '?' | '!') || is_subscript(c)
}

/// A character that belongs to a word part of an identifier: a letter or an ASCII digit.
/// Everything else (`_`, decorations, spaces inside `«»`) separates parts.
fn is_word_char(c: char) -> bool {
    (is_identifier_start(c) && c != '_') || c.is_ascii_digit()
}

/// The dot-separated components of an identifier as the lexer found it, `«»` kept, each
/// with its byte offset in `raw` (`Foo.«a.b».c` gives `Foo`, `«a.b»`, `c`).
pub(crate) fn components(raw: &str) -> Components<'_> {
    Components { raw, pos: 0 }
}

/// Iterator returned by [`components`].
pub(crate) struct Components<'a> {
    raw: &'a str,
    pos: usize,
}

impl<'a> Iterator for Components<'a> {
    type Item = (usize, &'a str);

    fn next(&mut self) -> Option<(usize, &'a str)> {
        let rest = &self.raw[self.pos..];
        if rest.is_empty() {
            return None;
        }
        let len = if rest.starts_with('«') {
            rest.find('»').map_or(rest.len(), |i| i + '»'.len_utf8())
        } else {
            rest.bytes().position(|b| b == b'.').unwrap_or(rest.len())
        };
        let at = self.pos;
        self.pos += len;
        if self.raw.as_bytes().get(self.pos) == Some(&b'.') {
            self.pos += 1;
        }
        Some((at, &rest[..len]))
    }
}

/// A component without its `«»`.
pub(crate) fn component_body(comp: &str) -> &str {
    let inner = comp.strip_prefix('«').unwrap_or(comp);
    inner.strip_suffix('»').unwrap_or(inner)
}

/// Appends `c` lower-cased. Char by char (so `Σ` is always `σ`, never the final `ς`
/// `str::to_lowercase` would give): the result does not depend on the neighbours.
#[inline]
pub(crate) fn push_lower_char(out: &mut String, c: char) {
    if c.is_ascii() {
        out.push(c.to_ascii_lowercase());
    } else {
        out.extend(c.to_lowercase());
    }
}

/// Appends `s` lower-cased (see [`push_lower_char`]).
pub(crate) fn push_lower(out: &mut String, s: &str) {
    if s.is_ascii() {
        let start = out.len();
        out.push_str(s);
        out[start..].make_ascii_lowercase();
    } else {
        for c in s.chars() {
            push_lower_char(out, c);
        }
    }
}

/// Appends the component body lower-cased, without decorations and without leading or
/// trailing `_` (`add_comm'` → `add_comm`, `_x` → `x`). Returns whether anything that is a
/// letter or digit was written.
pub(crate) fn push_clean_component(out: &mut String, body: &str) -> bool {
    if body.is_ascii() {
        // Fast path for the usual case: byte by byte, no char decoding.
        let bytes = body.as_bytes();
        let trim = |b: &u8| matches!(b, b'_' | b'\'' | b'?' | b'!');
        let start = bytes.iter().position(|b| !trim(b)).unwrap_or(bytes.len());
        let end = bytes
            .iter()
            .rposition(|b| !trim(b))
            .map_or(start, |e| e + 1);
        let kept = &body[start..end];
        let any_word = kept.bytes().any(|b| b.is_ascii_alphanumeric());
        if kept.bytes().any(|b| matches!(b, b'\'' | b'?' | b'!')) {
            for b in kept.bytes().filter(|b| !matches!(b, b'\'' | b'?' | b'!')) {
                out.push(b.to_ascii_lowercase() as char);
            }
        } else {
            let at = out.len();
            out.push_str(kept);
            out[at..].make_ascii_lowercase();
        }
        return any_word;
    }
    let trimmed = body.trim_matches(|c: char| c == '_' || is_decoration(c));
    let mut any_word = false;
    for c in trimmed.chars() {
        if is_decoration(c) {
            continue;
        }
        any_word |= is_word_char(c);
        push_lower_char(out, c);
    }
    any_word
}

/// Character class for the camelCase and digit boundaries.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Class {
    Upper,
    Lower,
    Digit,
}

fn class(c: char) -> Class {
    if c.is_ascii_digit() {
        Class::Digit
    } else if c.is_uppercase() {
        Class::Upper
    } else {
        Class::Lower
    }
}

/// Calls `f` with each word part of a component body, in order: split at `_`, decorations
/// and other non-word characters, at lower→Upper (`getElem` → `get`, `Elem`), before the
/// last capital of a capital run followed by a lower-case letter (`HTTPServer` → `HTTP`,
/// `Server`; `HAdd` → `H`, `Add`), and between letters and digits (`mul2x` → `mul`, `2`,
/// `x`; `H0` → `H`, `0`).
pub(crate) fn for_each_part<'a>(body: &'a str, mut f: impl FnMut(&'a str)) {
    if body.is_ascii() {
        return for_each_ascii_part(body, f);
    }
    let mut start: Option<usize> = None;
    let mut prev: Option<Class> = None;
    let mut iter = body.char_indices().peekable();
    while let Some((i, c)) = iter.next() {
        if !is_word_char(c) {
            if let Some(s) = start.take() {
                f(&body[s..i]);
            }
            prev = None;
            continue;
        }
        let cls = class(c);
        let boundary = match (prev, cls) {
            (None, _) => false,
            (Some(Class::Lower), Class::Upper) => true,
            (Some(Class::Digit), Class::Upper | Class::Lower) => true,
            (Some(Class::Upper | Class::Lower), Class::Digit) => true,
            // `HTTPServer`: split before `S` because `e` follows.
            (Some(Class::Upper), Class::Upper) => {
                matches!(iter.peek(), Some(&(_, n)) if is_word_char(n) && class(n) == Class::Lower)
            }
            _ => false,
        };
        if boundary {
            if let Some(s) = start {
                f(&body[s..i]);
            }
            start = Some(i);
        } else if start.is_none() {
            start = Some(i);
        }
        prev = Some(cls);
    }
    if let Some(s) = start {
        f(&body[s..]);
    }
}

/// [`for_each_part`] on ASCII text, byte by byte: the same rules without decoding.
fn for_each_ascii_part<'a>(body: &'a str, mut f: impl FnMut(&'a str)) {
    let bytes = body.as_bytes();
    let class = |b: u8| {
        if b.is_ascii_digit() {
            Class::Digit
        } else if b.is_ascii_uppercase() {
            Class::Upper
        } else {
            Class::Lower
        }
    };
    let mut start: Option<usize> = None;
    let mut prev: Option<Class> = None;
    for (i, &b) in bytes.iter().enumerate() {
        if !b.is_ascii_alphanumeric() {
            if let Some(s) = start.take() {
                f(&body[s..i]);
            }
            prev = None;
            continue;
        }
        let cls = class(b);
        let boundary = match (prev, cls) {
            (None, _) => false,
            (Some(Class::Lower), Class::Upper) => true,
            (Some(Class::Digit), Class::Upper | Class::Lower) => true,
            (Some(Class::Upper | Class::Lower), Class::Digit) => true,
            (Some(Class::Upper), Class::Upper) => {
                bytes.get(i + 1).is_some_and(|n| n.is_ascii_lowercase())
            }
            _ => false,
        };
        if boundary {
            if let Some(s) = start {
                f(&body[s..i]);
            }
            start = Some(i);
        } else if start.is_none() {
            start = Some(i);
        }
        prev = Some(cls);
    }
    if let Some(s) = start {
        f(&body[s..]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parts(body: &str) -> Vec<&str> {
        let mut v = Vec::new();
        for_each_part(body, |p| v.push(p));
        v
    }

    #[test]
    fn lean_identifier_characters() {
        for c in ['a', 'Z', '_', 'α', 'β', 'Γ', 'ω', 'ℓ', 'ж', 'é', 'ß'] {
            assert!(is_identifier_start(c), "{c}");
        }
        for c in [
            'λ', 'Π', 'Σ', 'ℕ', 'ℝ', '1', '\'', '₁', 'ᶜ', '≤', '.', '«', 'Ⓐ', '→', '¬', '×', '·',
            '΅',
        ] {
            assert!(!is_identifier_start(c), "{c}");
        }
        for c in ['1', '\'', '!', '?', '₁', 'ₐ'] {
            assert!(is_identifier_continue(c), "{c}");
        }
        for c in ['¹', '⁻', 'ᵀ', '.', ' '] {
            assert!(!is_identifier_continue(c), "{c}");
        }
    }

    #[test]
    fn fast_paths_agree_with_the_unicode_tables() {
        for c in ('\u{80}'..='\u{3FF}').chain('\u{2190}'..='\u{2BFF}') {
            let expected = c.is_alphabetic()
                && !is_subscript(c)
                && !is_superscript(c)
                && !matches!(c, 'λ' | 'Π' | 'Σ')
                && !('\u{2190}'..='\u{2BFF}').contains(&c);
            assert_eq!(is_identifier_start(c), expected, "{c:?}");
        }
    }

    #[test]
    fn components_respect_guillemets() {
        let comps: Vec<_> = components("Foo.«a.b».c").collect();
        assert_eq!(comps, [(0, "Foo"), (4, "«a.b»"), (12, "c")]);
        assert_eq!(component_body("«a.b»"), "a.b");
        assert_eq!(components("Nat").collect::<Vec<_>>(), [(0, "Nat")]);
    }

    #[test]
    fn parts_split_underscores_camel_case_and_digits() {
        assert_eq!(parts("add_comm"), ["add", "comm"]);
        assert_eq!(parts("getElem?"), ["get", "Elem"]);
        assert_eq!(parts("HTTPServer"), ["HTTP", "Server"]);
        assert_eq!(parts("HAdd"), ["H", "Add"]);
        assert_eq!(parts("mul2x"), ["mul", "2", "x"]);
        assert_eq!(parts("add_0_r"), ["add", "0", "r"]);
        assert_eq!(parts("x₁'"), ["x"]);
        assert_eq!(parts("foo bar"), ["foo", "bar"]);
        assert!(parts("__").is_empty());
    }

    #[test]
    fn the_ascii_path_splits_like_the_general_one() {
        for body in [
            "add_comm",
            "getElem?",
            "HTTPServer",
            "HAdd",
            "mul2x",
            "add_0_r",
            "x'",
            "ABC",
            "aB1cD__e",
            "_",
            "Z9z",
        ] {
            let mut general = Vec::new();
            // A non-ASCII word char at the end forces the general path; drop its part.
            let forced = format!("{body}_é");
            for_each_part(&forced, |p| general.push(p.to_string()));
            general.pop();
            assert_eq!(parts(body), general, "{body}");
        }
    }

    #[test]
    fn clean_component_strips_decorations() {
        let mut s = String::new();
        assert!(push_clean_component(&mut s, "add_comm'"));
        assert_eq!(s, "add_comm");
        s.clear();
        assert!(push_clean_component(&mut s, "getElem?"));
        assert_eq!(s, "getelem");
        s.clear();
        assert!(!push_clean_component(&mut s, "_"));
        assert_eq!(s, "");
        s.clear();
        assert!(push_clean_component(&mut s, "_Größe'₁"));
        assert_eq!(s, "größe");
        s.clear();
        assert!(push_clean_component(&mut s, "'_Ab?c!_"));
        assert_eq!(s, "abc");
    }
}
