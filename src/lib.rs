//! quarry: premise retrieval for Lean 4 and Coq/Rocq libraries.
//!
//! The data flows one way, one folder per arrow:
//!
//! ```text
//! sources ──extract──▶ library model ──build──▶ index ──▶ ranked premises ──▶ CLI · HTTP · eval
//! ```
//!
//! - [`extract`] reads `.lean` and `.v` files into the [`library`] model;
//! - [`library`] is the model (declarations, modules, dependency graph) and its on-disk form;
//! - [`tokens`] is the math-aware tokenizer every retrieval signal shares;
//! - [`query`] parses a pasted goal (Lean, Coq, Isabelle display, statement or header).

pub mod dense;
pub mod eval;
pub mod extract;
pub mod harvest;
pub mod index;
pub mod library;
pub mod query;
pub mod retrieve;
pub mod server;
pub mod tokens;
