//! Lean 4 frontend (being written).
use super::resolve::{Resolution, ResolveEnv};
use super::{FileExtraction, RawReference, Scope};

/// Reads one Lean 4 file.
pub fn extract(_module: &str, _text: &str) -> FileExtraction {
    FileExtraction::default()
}

/// Resolves one written name in a Lean scope.
pub fn resolve(_r: &RawReference, _s: &Scope, _env: &ResolveEnv) -> Resolution {
    Resolution::Unresolved
}
