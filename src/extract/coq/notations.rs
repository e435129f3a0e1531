//! `Notation` and `Infix` sentences: the name quarry gives a notation (coqc's key, as in
//! `.glob` files: `x_'+'_x` for `"x + y"`), its symbols and the name it unfolds to.
//!
//! Takes the tokens after the keyword; gives one draft, or none for what is no declaration
//! (`(only parsing)` aliases). It does not parse notation grammar or levels.

use std::ops::Range;

use super::declarations::{Draft, Reader};
use super::lexer::TokenKind;
use crate::library::{DeclKind, NotationInfo};

/// Words of a notation string: `'x'`-quoted words are symbols, identifiers are variables.
fn notation_words(string: &str) -> Vec<(String, bool)> {
    string
        .split_whitespace()
        .map(|w| {
            if w.len() >= 2 && w.starts_with('\'') && w.ends_with('\'') {
                (w[1..w.len() - 1].to_string(), false)
            } else {
                let variable = w
                    .chars()
                    .next()
                    .is_some_and(|c| c.is_alphabetic() || c == '_')
                    && w.chars()
                        .all(|c| c.is_alphanumeric() || c == '_' || c == '\'');
                (w.to_string(), variable)
            }
        })
        .collect()
}

/// The content of a string token without its quotes, `""` unescaped.
fn string_content(token: &str) -> String {
    let inner = token
        .strip_prefix('"')
        .and_then(|t| t.strip_suffix('"'))
        .unwrap_or(token);
    inner.replace("\"\"", "\"")
}

/// `Notation "x ⊕ y" := (xor x y) (at level 50) : scope`, `Notation f := g`,
/// `Infix "+++" := merge`.
pub fn notation(r: &Reader, infix: bool, range: Range<usize>) -> Option<Draft> {
    let at = range.start;
    let first = r.tokens.get(at)?;
    let assign = r.find_top(at..range.end, |w| w == ":=")?;
    // The term ends at a modifier group `(at level ..)` or a `: scope`.
    let mut term_end = range.end;
    let mut i = assign + 1;
    let mut depth = 0;
    while i < range.end {
        match r.word(i) {
            "(" if depth == 0 && i > assign + 1 => {
                let close = r.matching(i, range.end).unwrap_or(range.end);
                let modifier = (i + 1..close).any(|k| {
                    matches!(
                        r.word(k),
                        "level"
                            | "parsing"
                            | "printing"
                            | "format"
                            | "associativity"
                            | "deprecated"
                            | "custom"
                            | "compat"
                            | "ident"
                            | "global"
                            | "bigint"
                            | "binder"
                            | "pattern"
                            | "constr"
                    )
                });
                if modifier {
                    term_end = i;
                    break;
                }
                depth += 1;
            }
            "(" | "[" | "{" | "{|" => depth += 1,
            ")" | "]" | "}" | "|}" => depth -= 1,
            ":" if depth == 0 => {
                term_end = i;
                break;
            }
            _ => {}
        }
        i += 1;
    }
    // `Notation old := new (only parsing)`, or an abbreviation of a term: not a
    // declaration here. It is never printed in a goal, and the kernel term of a proof
    // that uses it holds what it unfolds to; coqdoc anchors none. (coqc 8.16 does record
    // it in `.glob` as an `abbrev`, and its uses as uses of it: a use is an unresolved
    // reference for quarry.)
    let only_parsing =
        (term_end..range.end).any(|k| r.word(k) == "only" && r.word(k + 1) == "parsing");
    if first.kind == TokenKind::Ident && only_parsing {
        return None;
    }
    let (name, symbols, variables): (String, Vec<String>, Vec<String>) = match first.kind {
        TokenKind::Str => {
            let content = string_content(r.word(at));
            let words = if infix {
                vec![
                    ("x".to_string(), true),
                    (content.trim().to_string(), false),
                    ("y".to_string(), true),
                ]
            } else {
                notation_words(&content)
            };
            let key = words
                .iter()
                .map(|(w, var)| {
                    if *var {
                        "x".to_string()
                    } else {
                        format!("'{w}'")
                    }
                })
                .collect::<Vec<_>>()
                .join("_");
            let symbols = words
                .iter()
                .filter(|(_, v)| !v)
                .map(|(w, _)| w.clone())
                .collect();
            let variables = words
                .iter()
                .filter(|(_, v)| *v)
                .map(|(w, _)| w.clone())
                .collect();
            (key, symbols, variables)
        }
        TokenKind::Ident if !infix => {
            let name = r.word(at).to_string();
            let vars = (at + 1..assign)
                .filter(|&k| r.is_ident(k))
                .map(|k| r.word(k).to_string())
                .collect();
            (name.clone(), vec![name], vars)
        }
        _ => return None,
    };
    if name.is_empty() {
        return None;
    }
    let mut head = assign + 1;
    while matches!(r.word(head), "(" | "@") && head < term_end {
        head += 1;
    }
    let unfolds_to_written = (r.is_ident(head)
        && head < term_end
        && !variables.iter().any(|v| v == r.word(head))
        && !super::references::is_keyword(r.word(head)))
    .then(|| r.word(head).to_string());
    let mut d = Draft::new(name, DeclKind::Notation, at);
    d.statement = at..term_end;
    d.body = Some(assign + 1..term_end);
    d.locals = variables;
    d.notation = Some(NotationInfo {
        symbols,
        unfolds_to: None,
        unfolds_to_written,
    });
    Some(d)
}
