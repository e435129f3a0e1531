//! Retrieval: from a parsed goal to ranked premises.
//!
//! Takes an opened index and a query; gives a ranking. It never reads source files.

pub mod accessible;
