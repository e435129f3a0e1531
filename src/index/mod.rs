//! The index: the parts built from the library model that retrieval reads.
//!
//! Takes a [`Library`](crate::library::Library); gives, inside a generation folder, the
//! lexical index (tantivy). It reads no source files and ranks nothing.

pub mod lexical;
