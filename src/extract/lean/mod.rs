//! Lean 4 frontend: reads `.lean` files into declarations, references and scopes, and
//! resolves written names by Lean 4's rules.
//!
//! Takes one file's text; gives a [`FileExtraction`]: the imports, every declaration with
//! its fully qualified name (namespaces applied, `_root_` removed), kind, statement,
//! hypotheses (including the `variable`s it uses), spans, attributes and the names its
//! statement and proof refer to, and the naming scope each was read in. [`resolve`] turns
//! one of those names into a declaration of the library.
//!
//! The flow inside: `lexer.rs` makes tokens; `source.rs` matches brackets; `commands.rs`
//! splits the file into commands; `context.rs` keeps the naming context (namespaces,
//! opens, variables) and what it makes of each declaration; `declarations.rs`,
//! `structures.rs` and `notation.rs` read declaration commands; `terms.rs`, `binders.rs`
//! and `tactics.rs` read statements and proofs for references, telling premises from
//! locals; `names.rs` knows Lean's identifiers and generated names; `resolve.rs` resolves.
//!
//! What it deliberately does not do: elaborate. It has no types, so dot notation on a
//! local (`h.trans`) is counted, not resolved; a leading-dot constructor (`.inl`) is not
//! a reference; instances found by type class search, notations used in a statement and
//! names inside other files' `export`s are not seen. It never fails on any input: what it
//! could not read it skips, and an unterminated comment or string is a warning.

mod binders;
mod commands;
mod context;
mod declarations;
mod lexer;
mod names;
mod notation;
mod resolve;
mod source;
mod structures;
mod tactics;
mod terms;

#[cfg(test)]
mod tests;

pub use resolve::resolve;

use super::FileExtraction;

/// Reads one Lean 4 file. Lean names do not start with the module's name, so `module`
/// (`Ledger.Basic`) only matters to imports, which name modules as written.
pub fn extract(module: &str, text: &str) -> FileExtraction {
    let _ = module;
    let (src, diagnostics) = source::Source::new(text);
    let mut out = commands::FileReader::new(&src).read();
    out.diagnostics.splice(0..0, diagnostics);
    out
}
