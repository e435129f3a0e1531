//! Reading the `.glob` files coqc writes beside a compiled file.
//!
//! Takes the text of a `.glob` file; gives its references: one per line
//! `R<start>:<end> <library> <module path> <name> <kind>` (byte offsets into the compiled
//! file, end inclusive; `<>` for an empty module path), as coqc 8.16 writes them. It keeps
//! only references to declarations (not to bound variables, notations, modules or sections)
//! and does not read the definition lines, which `harvest` has no use for.

/// One reference coqc resolved: where it is written and the declaration it names.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct GlobReference {
    /// Byte offset of the first byte of the written name, in the compiled file.
    pub start: u32,
    /// Byte offset of its last byte (inclusive, as coqc writes it).
    pub end: u32,
    /// The fully qualified name: library, module path (if any), name.
    pub target: String,
    /// coqc's kind (`thm`, `def`, `constr`, `ind`, ...).
    pub kind: String,
}

/// `.glob` kinds that name no declaration: bound variables, notations, modules, sections
/// (coqc 8.16's kinds, common practice of coqdoc's readers).
fn names_a_declaration(kind: &str) -> bool {
    !matches!(
        kind,
        "var" | "binder" | "not" | "lib" | "mod" | "modtype" | "sec" | "modparam"
    )
}

/// The references to declarations in a `.glob` file, in file order. Lines that are not
/// references, or that do not have the expected fields, are skipped.
///
/// ```
/// use quarry::harvest::glob::references;
/// let refs = references("DIGEST x\nR10:13 Coq.Init.Logic <> True ind\nR2:2 Top <> x var\n");
/// assert_eq!(refs.len(), 1);
/// assert_eq!(refs[0].target, "Coq.Init.Logic.True");
/// ```
pub fn references(glob: &str) -> Vec<GlobReference> {
    glob.lines().filter_map(reference).collect()
}

fn reference(line: &str) -> Option<GlobReference> {
    let rest = line.strip_prefix('R')?;
    let mut fields = rest.split_whitespace();
    let (start, end) = fields.next()?.split_once(':')?;
    let start: u32 = start.parse().ok()?;
    let end: u32 = end.parse().ok()?;
    let library = fields.next()?;
    let path = fields.next()?;
    let name = fields.next()?;
    let kind = fields.next()?;
    if !names_a_declaration(kind) {
        return None;
    }
    let target = if path == "<>" {
        format!("{library}.{name}")
    } else {
        format!("{library}.{path}.{name}")
    };
    Some(GlobReference {
        start,
        end,
        target,
        kind: kind.to_string(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_references_with_and_without_module_path() {
        // Lines as coqc 8.16 wrote them for a copy of Coq.Arith.PeanoNat (Debian's coq).
        let glob = "DIGEST 1\nFCopy.Arith.PeanoNat\nR343:345 Coq.Init.Nat <> add def\n\
                    R400:410 Copy.Arith.PeanoNat Nat add_comm thm\n\
                    R14:17 Coq.Init.Logic <> ::type_scope:x_'/\\'_x not\nthm 5:9 Nat x\n";
        let refs = references(glob);
        assert_eq!(refs.len(), 2);
        assert_eq!(refs[0].target, "Coq.Init.Nat.add");
        assert_eq!((refs[0].start, refs[0].end), (343, 345));
        assert_eq!(refs[1].target, "Copy.Arith.PeanoNat.Nat.add_comm");
        assert_eq!(refs[1].kind, "thm");
    }

    #[test]
    fn malformed_lines_are_skipped() {
        assert!(references("R12 Coq x\nRx:y A <> b def\nR1:2 A <>\n").is_empty());
    }
}
