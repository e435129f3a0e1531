//! Setup shared by the integration tests: outside tools and reference packages, fetched by
//! the tests themselves.

#![allow(dead_code)]

pub mod debian;
pub mod glob;
pub mod python;
