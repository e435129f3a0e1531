//! Tests of the Lean frontend, set in our own stock-ledger scenario.
//!
//! Lean has no oracle on this machine: the expectations come from memory of Lean 4's
//! syntax and name-resolution rules, as each test says. `commands` covers the naming
//! context, `declarations` the declaration commands, `references` what statements and
//! proofs refer to, `resolution` Lean's resolution rules and whole-library assembly,
//! `robustness` diagnostics and inputs no one would write.

use super::extract;
use crate::extract::{FileExtraction, RawDeclaration, RawReference};
use crate::library::{Language, Library};

mod commands;
mod declarations;
mod references;
mod resolution;
mod robustness;

/// Extracts `text` as module `Demo`.
fn read(text: &str) -> FileExtraction {
    extract("Demo", text)
}

/// The names of all declarations read.
fn names(x: &FileExtraction) -> Vec<&str> {
    x.declarations.iter().map(|d| d.name.as_str()).collect()
}

/// The declaration named `name`.
fn decl<'a>(x: &'a FileExtraction, name: &str) -> &'a RawDeclaration {
    match x.declarations.iter().find(|d| d.name == name) {
        Some(d) => d,
        None => panic!("no declaration `{name}` among {:?}", names(x)),
    }
}

/// The written names of references.
fn written(refs: &[RawReference]) -> Vec<&str> {
    refs.iter().map(|r| r.name.as_str()).collect()
}

/// Assembles a library from in-memory Lean files `(module, text)`.
fn library(files: &[(&str, &str)]) -> Library {
    crate::extract::in_memory_library(Language::Lean, files)
}

/// The names the proof (or, with `statement`, the statement) of `from` has edges to.
fn edges(lib: &Library, from: &str, statement: bool) -> Vec<String> {
    let Some(d) = lib.declarations.iter().find(|d| d.name == from) else {
        panic!("no declaration `{from}` in the library");
    };
    let csr = if statement {
        &lib.graph.statement_uses
    } else {
        &lib.graph.proof_uses
    };
    let mut out: Vec<String> = csr
        .neighbours(d.id)
        .map(|t| lib.declaration(t).name.clone())
        .collect();
    out.sort();
    out
}
