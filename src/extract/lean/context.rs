//! The naming context at a point of a Lean file, and what it makes of a declaration.
//!
//! Takes the state the command reader keeps (namespaces, `open`s, `variable`s, universes,
//! `include`s, and their one-command `... in` versions); gives the effect of `open`,
//! `export` and `variable` commands on it, and for a declaration: its fully qualified name,
//! the [`Scope`] it is read in, the `variable`s it includes as hypotheses, a walker with
//! the right names bound, an unused generated name, and the rewriting of the forward
//! references Lean allows inside `mutual` blocks and `where` clauses. It splits no
//! commands and reads no declarations.

use std::collections::{HashMap, HashSet};

use super::commands::FileReader;
use super::names::{components, normalize_name};
use super::terms::{Origin, Walker};
use crate::extract::{OpenDirective, RawReference, Scope};
use crate::library::{BinderStyle, Hypothesis};

/// One `variable` binder group.
#[derive(Clone, Debug)]
pub(super) struct VariableBinder {
    pub names: Vec<String>,
    pub style: BinderStyle,
    /// The type, whitespace normalised; empty when none was given.
    pub ty: String,
    /// References in the type.
    pub refs: Vec<RawReference>,
    /// Other variables its type mentions.
    pub mentions: Vec<String>,
}

impl<'s, 'a> FileReader<'s, 'a> {
    /// `open A B`, `open A (x y)`, `open A hiding x`, `open A renaming x → y`, `open scoped
    /// A` (which opens no names), `export A (x)`, each optionally followed by `in`.
    pub(super) fn open(&mut self, i: usize) -> usize {
        let src = self.src;
        let end = self.next_command(i + 1, true);
        let is_in = self.prefix_if_in(end);
        let hi = if is_in { end - 1 } else { end };
        let mut directives = Vec::new();
        let mut k = i + 1;
        if src.is(k, "scoped") {
            k = hi;
        }
        while k < hi {
            if !src.is_ident(k) {
                k += 1;
                continue;
            }
            let mut d = OpenDirective::all(normalize_name(src.text_of(k)));
            k += 1;
            if src.is(k, "(") {
                let c = src.closing(k, hi).unwrap_or(hi);
                d.only = Some(self.idents(k + 1, c));
                k = c + 1;
            } else if src.is(k, "hiding") {
                k += 1;
                while k < hi && src.is_ident(k) {
                    d.hiding.push(normalize_name(src.text_of(k)));
                    k += 1;
                }
            } else if src.is(k, "renaming") {
                k += 1;
                d.only = Some(Vec::new());
                while k + 2 < hi
                    && src.is_ident(k)
                    && matches!(src.text_of(k + 1), "→" | "->")
                    && src.is_ident(k + 2)
                {
                    d.renaming.push((
                        normalize_name(src.text_of(k + 2)),
                        normalize_name(src.text_of(k)),
                    ));
                    k += 3;
                    if src.is(k, ",") {
                        k += 1;
                    }
                }
            }
            directives.push(d);
        }
        if is_in {
            self.pending_opens.extend(directives);
        } else {
            self.opened.extend(directives);
        }
        end
    }

    pub(super) fn idents(&self, lo: usize, hi: usize) -> Vec<String> {
        (lo..hi)
            .filter(|&k| self.src.is_ident(k))
            .map(|k| normalize_name(self.src.text_of(k)))
            .collect()
    }

    /// `variable (l : Line) {n : Nat} [ToString α]`, and `variable {n}` which changes the
    /// binder style of an existing variable.
    pub(super) fn variable(&mut self, i: usize) -> usize {
        let src = self.src;
        let end = self.next_command(i + 1, true);
        let is_in = self.prefix_if_in(end);
        let hi = if is_in { end - 1 } else { end };
        let mut walker = self.walker();
        walker.auto_bound = true;
        let mut k = i + 1;
        let mut new = Vec::new();
        while k < hi {
            let Some(c) = src
                .closing(k, hi)
                .filter(|_| matches!(src.text_of(k), "(" | "{" | "[" | "⦃"))
            else {
                k += 1;
                continue;
            };
            let refs_before = walker.refs.len();
            let used_before = walker.used_variables.len();
            let b = walker.binder_group(k, c);
            let refs = walker.refs.split_off(refs_before);
            let mentions = walker.used_variables.split_off(used_before);
            for n in &b.names {
                walker.declare(n, Origin::Variable);
            }
            let no_type = b.ty.0 >= b.ty.1;
            let existing: Vec<VariableBinder> = b
                .names
                .iter()
                .filter_map(|n| {
                    self.visible_variables()
                        .into_iter()
                        .rev()
                        .find(|v| v.names.contains(n))
                        .cloned()
                })
                .collect();
            if no_type && !b.names.is_empty() && existing.len() == b.names.len() {
                for (n, old) in b.names.iter().zip(existing) {
                    new.push(VariableBinder {
                        names: vec![n.clone()],
                        style: b.style,
                        ..old
                    });
                }
            } else {
                new.push(VariableBinder {
                    names: b.names.clone(),
                    style: b.style,
                    ty: src.normalized(b.ty.0, b.ty.1),
                    refs,
                    mentions,
                });
            }
            k = c + 1;
        }
        if is_in {
            self.pending_variables.extend(new);
        } else {
            self.variables.extend(new);
        }
        end
    }

    /// The variables in scope, oldest first (a later group shadows an earlier one of the
    /// same name).
    pub(super) fn visible_variables(&self) -> Vec<&VariableBinder> {
        self.variables
            .iter()
            .chain(&self.pending_variables)
            .collect()
    }

    /// A walker with the universes and variables in scope bound.
    pub(super) fn walker(&self) -> Walker<'s, 'a> {
        let locals = self
            .universes
            .iter()
            .map(|u| (u.clone(), Origin::Universe))
            .chain(
                self.visible_variables()
                    .into_iter()
                    .flat_map(|v| v.names.iter().map(|n| (n.clone(), Origin::Variable))),
            );
        Walker::new(self.src, locals)
    }

    /// The scope for a declaration whose name adds `extra` namespaces (`theorem Book.x`
    /// inside `namespace Ledger` is read in `Ledger` and `Ledger.Book`).
    pub(super) fn scope_for(&mut self, extra: &[String]) -> usize {
        let mut namespaces = self.namespaces.clone();
        namespaces.extend(extra.iter().cloned());
        let mut opened = self.opened.clone();
        opened.extend(self.pending_opens.iter().cloned());
        let scope = Scope { namespaces, opened };
        let scopes = &mut self.out.scopes;
        if let Some(k) = (0..scopes.len())
            .rev()
            .take(8)
            .find(|&k| scopes[k] == scope)
        {
            return k;
        }
        scopes.push(scope);
        scopes.len() - 1
    }

    /// The fully qualified name of a declaration written `written` here, and the namespaces
    /// its own dotted name adds for reading it.
    pub(super) fn full_name(&self, written: &str) -> (String, Vec<String>) {
        let w = normalize_name(written);
        if let Some(rest) = w.strip_prefix("_root_.") {
            return (rest.to_string(), Vec::new());
        }
        let prefix = self.namespaces.last().cloned();
        let qualify = |n: &str| match &prefix {
            Some(p) => format!("{p}.{n}"),
            None => n.to_string(),
        };
        let parts = components(&w);
        let mut extra = Vec::new();
        for k in 1..parts.len() {
            extra.push(qualify(&parts[..k].join(".")));
        }
        (qualify(&w), extra)
    }

    /// A name not yet declared in this file: `name`, else `name_1`, `name_2`, ... (as Lean
    /// does for generated names).
    pub(super) fn unused_name(&mut self, name: String) -> String {
        for d in &self.out.declarations[self.taken_upto.min(self.out.declarations.len())..] {
            self.taken.insert(d.name.clone());
        }
        self.taken_upto = self.out.declarations.len();
        if !self.taken.contains(&name) {
            return name;
        }
        let next = self.suffixes.entry(name.clone()).or_insert(0);
        loop {
            *next += 1;
            let candidate = format!("{name}_{next}");
            if !self.taken.contains(&candidate) {
                return candidate;
            }
        }
    }

    /// The `variable`s a declaration includes: those it uses, those their types mention,
    /// those `include`d, and instance binders all of whose variables are included (Lean 4's
    /// rule since `variable`s stopped being included for being used only in a proof; from
    /// memory). Gives the hypotheses, their text for the statement, and their references.
    pub(super) fn included_variables(
        &self,
        used: &[String],
    ) -> (Vec<Hypothesis>, Vec<String>, Vec<RawReference>) {
        let vars = self.visible_variables();
        let mut last_group: HashMap<&str, usize> = HashMap::new();
        for (g, v) in vars.iter().enumerate() {
            for n in &v.names {
                last_group.insert(n, g);
            }
        }
        let mut inc: HashSet<String> = used.iter().cloned().collect();
        inc.extend(self.included.iter().cloned());
        inc.extend(self.pending_included.iter().cloned());
        let mut whole = vec![false; vars.len()];
        loop {
            let before = (inc.len(), whole.iter().filter(|w| **w).count());
            for (g, v) in vars.iter().enumerate() {
                let live: Vec<&String> = v
                    .names
                    .iter()
                    .filter(|n| last_group.get(n.as_str()) == Some(&g))
                    .collect();
                if live.iter().any(|n| inc.contains(*n)) || whole[g] {
                    inc.extend(v.mentions.iter().cloned());
                }
                if v.style == BinderStyle::Instance
                    && !whole[g]
                    && !v.mentions.is_empty()
                    && v.mentions.iter().all(|m| inc.contains(m))
                {
                    whole[g] = true;
                    inc.extend(live.iter().map(|n| n.to_string()));
                }
            }
            if before == (inc.len(), whole.iter().filter(|w| **w).count()) {
                break;
            }
        }
        let mut hyps = Vec::new();
        let mut texts = Vec::new();
        let mut refs = Vec::new();
        for (g, v) in vars.iter().enumerate() {
            let names: Vec<String> = v
                .names
                .iter()
                .filter(|n| last_group.get(n.as_str()) == Some(&g) && inc.contains(*n))
                .cloned()
                .collect();
            if names.is_empty() && !whole[g] {
                continue;
            }
            texts.push(binder_text(v.style, &names, &v.ty));
            refs.extend(v.refs.iter().cloned());
            hyps.push(Hypothesis {
                names,
                ty: v.ty.clone(),
                style: v.style,
            });
        }
        (hyps, texts, refs)
    }

    /// Rewrites the references of declarations `first..` that name one of them (a
    /// `mutual` sibling, or a `where` function of `parent`, written `aux` in its parent's
    /// body) to `_root_.Full.name`, which the resolver may look up ahead of the reference:
    /// Lean allows those forward references.
    pub(super) fn rewrite_forward_references(&mut self, first: usize, parent: Option<String>) {
        let members: HashSet<String> = self.out.declarations
            [first.min(self.out.declarations.len())..]
            .iter()
            .map(|d| d.name.clone())
            .collect();
        let scopes = &self.out.scopes;
        for d in self.out.declarations.iter_mut().skip(first) {
            let namespaces = scopes
                .get(d.scope)
                .map(|s| s.namespaces.clone())
                .unwrap_or_default();
            for r in d.statement_refs.iter_mut().chain(d.proof_refs.iter_mut()) {
                if r.name.starts_with("_root_.") {
                    continue;
                }
                let mut candidates: Vec<String> =
                    parent.iter().map(|p| format!("{p}.{}", r.name)).collect();
                candidates.extend(namespaces.iter().rev().map(|ns| format!("{ns}.{}", r.name)));
                candidates.push(r.name.clone());
                if let Some(c) = candidates.into_iter().find(|c| members.contains(c)) {
                    r.name = format!("_root_.{c}");
                }
            }
        }
    }
}

/// A binder written back: `(a b : T)`, `{n : Nat}`, `[ToString α]`, `[inst : C]`.
pub(super) fn binder_text(style: BinderStyle, names: &[String], ty: &str) -> String {
    let (open, close) = match style {
        BinderStyle::Explicit => ("(", ")"),
        BinderStyle::Implicit => ("{", "}"),
        BinderStyle::Instance => ("[", "]"),
        BinderStyle::Strict => ("⦃", "⦄"),
    };
    let inner = match (names.is_empty(), ty.is_empty()) {
        (true, _) => ty.to_string(),
        (false, true) => names.join(" "),
        (false, false) => format!("{} : {ty}", names.join(" ")),
    };
    format!("{open}{inner}{close}")
}
