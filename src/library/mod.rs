//! The library model and its on-disk form.
//!
//! Takes what extraction produced; gives the declarations, modules, files and dependency
//! graph every later stage reads, and saves and loads them as part of an index folder
//! (`store`). It knows nothing of source syntax or of ranking.

pub mod graph;
pub mod model;
pub mod store;

pub use graph::{Csr, DependencyGraph};
pub use model::*;
