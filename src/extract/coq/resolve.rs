//! Coq's name resolution, as a user of coqc expects it.
//!
//! Takes one written name (`add_comm`, `Nat.add_comm`, `Coq.Lists.List.map`), the scope it
//! was written in and the library's name table; gives the declaration it names. A
//! declaration `L.M.x` (file module `L`, module `M` inside it) is reachable by a written
//! suffix `s` of its name when what is left in front of `s` is
//!
//! 1. a module enclosing the reference (innermost first): `x` inside `M`, `M.x` in `L`;
//! 2. a module opened by `Import`, `Require Import` or `Export` (later openings shadow
//!    earlier ones; `Local` declarations of other files are never opened), together with
//!    what that module's own `Export`s open, opened just before it;
//! 3. a proper prefix of the file module `L`: `s` names the library itself, as in
//!    `PeanoNat.Nat.add_comm` or `List.map` after a bare `Require` (coqc's rule that a
//!    library is reachable by any suffix of its logical path).
//!
//! The best rule wins; two different declarations under rule 3 are `Ambiguous`. Short
//! names of modules that are only `Require`d are not in scope: `Nat.add_0_r` after
//! `Require PeanoNat.` names nothing, as in coqc.

use super::super::resolve::{Resolution, ResolveEnv};
use super::super::{RawReference, Scope};
use crate::library::Visibility;

/// How a candidate is reachable; a greater value is a better match.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
enum Reach {
    /// By qualifying from the library's logical path.
    Qualified,
    /// Through an opened module, by the order of opening.
    Opened(usize),
    /// Through an enclosing module, by depth (innermost greatest).
    Enclosing(usize),
}

/// The text in front of `written` in `full` (without the dot), when `full` ends with it.
fn prefix_of<'a>(full: &'a str, written: &str) -> Option<&'a str> {
    if full == written {
        return Some("");
    }
    let cut = full.len().checked_sub(written.len() + 1)?;
    (full.ends_with(written) && full.as_bytes().get(cut) == Some(&b'.'))
        .then(|| full.get(..cut))
        .flatten()
}

/// The opened modules at a scope, in the order of opening: the file's imports with what
/// they re-export, then the `Import`s written in the scope, resolved to module paths. Each
/// module comes after the modules its `Export`s open (transitively), so that its own names
/// shadow theirs, as when its `Export` lines come first.
fn opened_modules(scope: &Scope, env: &ResolveEnv) -> Vec<String> {
    let mut opened: Vec<String> = Vec::new();
    for m in env.opened_modules() {
        push_with_exports(m, env, &mut opened, &mut Vec::new());
    }
    for directive in &scope.opened {
        if let Some(path) = resolve_module(&directive.target, scope, &opened, env) {
            push_with_exports(&path, env, &mut opened, &mut Vec::new());
        }
    }
    opened
}

/// Pushes what `path`'s `Export`s open, then `path`; `stack` holds the modules being
/// expanded, so a cycle of exports ends.
fn push_with_exports<'e>(
    path: &'e str,
    env: &'e ResolveEnv,
    opened: &mut Vec<String>,
    stack: &mut Vec<&'e str>,
) {
    if stack.contains(&path) {
        return;
    }
    stack.push(path);
    for e in env.exports_of(path) {
        push_with_exports(e, env, opened, stack);
    }
    stack.pop();
    opened.push(path.to_string());
}

/// The module a written module name means in `scope` (for an `Export` inside a module,
/// resolved once for the whole library).
pub fn resolve_module_in(written: &str, scope: &Scope, env: &ResolveEnv) -> Option<String> {
    let opened = opened_modules(scope, env);
    resolve_module(written, scope, &opened, env)
}

/// The module a written module name (`Nat`, `ListNotations`, `Coq.Lists.List`) names.
fn resolve_module(
    written: &str,
    scope: &Scope,
    opened: &[String],
    env: &ResolveEnv,
) -> Option<String> {
    let mut best: Option<(Reach, &str)> = None;
    let mut tie = false;
    for (path, file_module) in env.modules_by_suffix(written) {
        let Some(prefix) = prefix_of(path, written) else {
            continue;
        };
        let reach = if let Some(d) = scope.namespaces.iter().position(|n| n == prefix) {
            Reach::Enclosing(d)
        } else if let Some(o) = opened.iter().rposition(|n| n == prefix) {
            Reach::Opened(o)
        } else if prefix.len() < file_module.len() {
            Reach::Qualified
        } else {
            continue;
        };
        match best {
            // A library and a module inside it, both reachable by the written name: coqc
            // registers the module after its library, so the module shadows it (`bi.bi`
            // is iris's module `iris.bi.bi.bi`, not the library `iris.bi.bi`).
            Some((b, p)) if b == reach && inside(path, p) => {
                best = Some((reach, path));
            }
            Some((b, p)) if b == reach && inside(p, path) => {}
            Some((b, p)) if b == reach && p != path => tie = true,
            Some((b, _)) if b >= reach => {}
            _ => {
                best = Some((reach, path));
                tie = false;
            }
        }
    }
    match best {
        Some((_, path)) if !tie => Some(path.to_string()),
        _ => None,
    }
}

/// Whether module path `inner` lies inside module path `outer`.
fn inside(inner: &str, outer: &str) -> bool {
    inner.len() > outer.len() && inner.starts_with(outer) && inner.as_bytes()[outer.len()] == b'.'
}

/// Resolves one written name in a Coq scope (see the module documentation for the rules).
pub fn resolve(reference: &RawReference, scope: &Scope, env: &ResolveEnv) -> Resolution {
    let written = reference.name.as_str();
    let candidates = env.suffix(written, reference.offset);
    if candidates.is_empty() {
        return Resolution::Unresolved;
    }
    let mut opened: Option<std::rc::Rc<[String]>> = None;
    let mut best: Option<(Reach, u32)> = None;
    let mut tie = false;
    for c in candidates {
        let full = env.name(c);
        let Some(prefix) = prefix_of(full, written) else {
            continue;
        };
        let same_file = env.is_same_file(c);
        let reach = if let Some(d) = scope
            .namespaces
            .iter()
            .position(|n| n == prefix)
            .filter(|_| same_file)
        {
            Reach::Enclosing(d)
        } else if let Some(o) = (same_file || env.visibility(c) != Visibility::Local)
            .then(|| {
                opened
                    .get_or_insert_with(|| env.opened_in(scope, || opened_modules(scope, env)))
                    .iter()
                    .rposition(|n| n == prefix)
            })
            .flatten()
        {
            Reach::Opened(o)
        } else if prefix.len() < env.module_of(c).len() {
            Reach::Qualified
        } else {
            continue;
        };
        match best {
            Some((b, id)) if b == reach => {
                if env.name(id) == full && same_file && env.is_same_file(id) {
                    // The same name declared twice in one file: the later one counts.
                    best = Some((reach, c.max(id)));
                } else if id != c {
                    tie = true;
                }
            }
            Some((b, _)) if b > reach => {}
            _ => {
                best = Some((reach, c));
                tie = false;
            }
        }
    }
    match best {
        Some((_, id)) if !tie => Resolution::Resolved(id),
        Some(_) => Resolution::Ambiguous,
        None => Resolution::Unresolved,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefixes_stop_at_dots() {
        assert_eq!(
            prefix_of("Coq.Arith.PeanoNat.Nat.add_comm", "Nat.add_comm"),
            Some("Coq.Arith.PeanoNat")
        );
        assert_eq!(prefix_of("add_comm", "add_comm"), Some(""));
        assert_eq!(prefix_of("A.xadd_comm", "add_comm"), None);
    }
}
