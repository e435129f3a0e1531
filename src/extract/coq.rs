//! Coq frontend (being written).
use super::resolve::{Resolution, ResolveEnv};
use super::{FileExtraction, RawReference, Scope};

/// Reads one Coq file.
pub fn extract(_module: &str, _text: &str) -> FileExtraction {
    FileExtraction::default()
}

/// Resolves one written name in a Coq scope.
pub fn resolve(_r: &RawReference, _s: &Scope, _env: &ResolveEnv) -> Resolution {
    Resolution::Unresolved
}
