//! Reading the `.glob` files coqc writes beside each compiled `.v` file: Coq's own
//! resolution of every name the file defines and refers to. Format (coqc 8.16, as written by
//! Debian's coq and seen in its packages): a line `F<module>`, then per reference
//! `R<start>:<end> <library> <module path> <name> <kind>` (byte offsets, end inclusive) and
//! per definition `<kind> <start>:<end> <module path> <name>`.

/// One reference of a `.glob` file.
pub struct GlobRef {
    /// Byte offset of its first character in the `.v` file.
    pub start: u32,
    /// The name referred to, fully qualified.
    pub target: String,
    /// coqc's kind of the target (`thm`, `def`, `var`, `not`, `abbrev`, ...).
    pub kind: String,
}

/// The module a `.glob` file is of (its `F` line).
pub fn module(text: &str) -> Option<&str> {
    text.lines()
        .find_map(|l| l.strip_prefix('F'))
        .map(str::trim)
}

/// The references of a `.glob` file's text, their library column mapped by `library` (the
/// identity, or a renaming for copies compiled under another logical name).
pub fn references(text: &str, library: impl Fn(&str) -> String) -> Vec<GlobRef> {
    let mut refs = Vec::new();
    for line in text.lines() {
        let Some(rest) = line.strip_prefix('R') else {
            continue;
        };
        let parts: Vec<&str> = rest.split_whitespace().collect();
        let [span, lib, path, name, kind] = parts[..] else {
            continue;
        };
        let Some(start) = span.split(':').next().and_then(|s| s.parse().ok()) else {
            continue;
        };
        let lib = library(lib);
        let target = if path == "<>" {
            format!("{lib}.{name}")
        } else {
            format!("{lib}.{path}.{name}")
        };
        refs.push(GlobRef {
            start,
            target,
            kind: kind.to_string(),
        });
    }
    refs
}
