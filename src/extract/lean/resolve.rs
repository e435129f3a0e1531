//! Lean 4 name resolution: from a written name and its scope to one declaration.
//!
//! Takes a [`RawReference`], the [`Scope`] it was read in and the library's [`ResolveEnv`];
//! gives a [`Resolution`]. The rules follow Lean 4's `resolveGlobalName` (from memory):
//!
//! 1. `_root_.x` is exactly `x` (and, for references the frontend marked that way, `x`
//!    may be declared later in the same file: a `mutual` sibling or `where` function);
//! 2. `ns.name` for each enclosing namespace, innermost first: the first level with a
//!    match wins; a `protected` declaration is not reached by its last component alone;
//! 3. the name from the root together with every `open` (`open X` makes `X.name` reachable
//!    as `name`, respecting `(only)`, `hiding` and `renaming`; `export` acts the same);
//!    several matches at this level are ambiguous, as in Lean without types to choose;
//! 4. if nothing matched and the name is dotted, the same again without its last
//!    component: generalized field notation on a constant (`le_refl.trans` uses `le_refl`);
//! 5. quarry's own fallback, not Lean's: a dotted name that still matches nothing is looked
//!    up by suffix (`Balance.replay_nil` for `Ledger.Balance.replay_nil`), which recovers
//!    names reached through `export`s of other files; unique or nothing. Atomic names are
//!    never looked up by suffix: an unbound `h` or `id` is far likelier a local or a
//!    declaration outside the library than some `Foo.h`.
//!
//! It does not read files and knows nothing of types, so `h.trans` on a local is left to
//! the frontend (counted, not resolved).

use super::names::components;
use crate::extract::resolve::{split_last_dot, Resolution, ResolveEnv};
use crate::extract::{OpenDirective, RawReference, Scope};
use crate::library::Visibility;

/// Resolves one written name in a Lean scope.
pub fn resolve(reference: &RawReference, scope: &Scope, env: &ResolveEnv) -> Resolution {
    let at = reference.offset;
    let name = reference.name.as_str();
    if let Some(rooted) = name.strip_prefix("_root_.") {
        let mut current = rooted;
        loop {
            let hits = env.exact(current, at);
            if !hits.is_empty() {
                return decide(hits);
            }
            let ahead = env.exact_in_file(current);
            if !ahead.is_empty() {
                return decide(ahead);
            }
            match split_last_dot(current) {
                Some((head, _)) => current = head,
                None => return Resolution::Unresolved,
            }
        }
    }
    let mut current = name;
    loop {
        if let Some(found) = resolve_level(current, scope, env, at) {
            return found;
        }
        match split_last_dot(current) {
            Some((head, _)) => current = head,
            None => break,
        }
    }
    let mut current = name;
    while split_last_dot(current).is_some() {
        let hits: Vec<u32> = env
            .suffix(current, at)
            .into_iter()
            .filter(|&i| env.name(i) != current)
            .collect();
        if !hits.is_empty() {
            return decide(hits);
        }
        current = split_last_dot(current).map_or(current, |(head, _)| head);
    }
    Resolution::Unresolved
}

fn decide(mut hits: Vec<u32>) -> Resolution {
    hits.sort_unstable();
    hits.dedup();
    match hits.as_slice() {
        [] => Resolution::Unresolved,
        [one] => Resolution::Resolved(*one),
        _ => Resolution::Ambiguous,
    }
}

fn is_atomic(name: &str) -> bool {
    components(name).len() == 1
}

/// `full` if it exists and may be reached from a name written `written`.
fn qualified(env: &ResolveEnv, full: &str, written_atomic: bool, at: u32) -> Vec<u32> {
    env.exact(full, at)
        .into_iter()
        .filter(|&i| !(written_atomic && env.visibility(i) == Visibility::Protected))
        .collect()
}

/// Steps 2 and 3 for one form of the name.
fn resolve_level(name: &str, scope: &Scope, env: &ResolveEnv, at: u32) -> Option<Resolution> {
    let atomic = is_atomic(name);
    for ns in scope.namespaces.iter().rev() {
        let hits = qualified(env, &format!("{ns}.{name}"), atomic, at);
        if !hits.is_empty() {
            return Some(decide(hits));
        }
    }
    let mut hits = env.exact(name, at);
    for open in &scope.opened {
        hits.extend(open_hits(open, name, atomic, scope, env, at));
    }
    (!hits.is_empty()).then(|| decide(hits))
}

/// What `open` directive `open` makes `name` stand for. The target is as written, so it
/// is tried inside each enclosing namespace and from the root, as Lean resolves the
/// namespace of an `open`.
fn open_hits(
    open: &OpenDirective,
    name: &str,
    atomic: bool,
    scope: &Scope,
    env: &ResolveEnv,
    at: u32,
) -> Vec<u32> {
    let renamed = open
        .renaming
        .iter()
        .find(|(new, _)| new == name)
        .map(|(_, old)| old.as_str());
    let explicit = renamed.or_else(|| {
        open.only
            .as_ref()
            .and_then(|only| only.iter().find(|n| *n == name).map(String::as_str))
    });
    let member = match explicit {
        Some(m) => m,
        None if open.only.is_some() || open.hiding.iter().any(|h| h == name) => return Vec::new(),
        None => name,
    };
    // An explicitly listed name may be protected; an atomic one reached by a plain open
    // may not.
    let skip_protected = atomic && explicit.is_none();
    let mut targets: Vec<String> = scope
        .namespaces
        .iter()
        .rev()
        .map(|ns| format!("{ns}.{}", open.target))
        .collect();
    targets.push(open.target.clone());
    targets
        .iter()
        .flat_map(|t| qualified(env, &format!("{t}.{member}"), skip_protected, at))
        .collect()
}
