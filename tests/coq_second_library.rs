//! The Coq frontend on libraries it was not written against: stdpp 1.8 and iris 4.0.
//!
//! Outside source: Debian's packages `libcoq-stdpp` and `libcoq-iris` (built with coqc 8.16)
//! ship each `.v` file with the `.glob` file coqc wrote when Debian compiled it. A `.glob`
//! records what its file defines, one line `<kind> <start>:<end> <section path> <name>`
//! after the file's `F<module>` line, by Coq's own name resolution. These libraries are
//! written in a style the standard library is not: sections with `Context`, type classes
//! with single-method classes, `x.(f)` projections, Unicode notations.
//!
//! Checked: every name coqc says a file defines, of the kinds quarry models as
//! declarations, is a declaration of quarry with the same qualified name; and every
//! declaration quarry adds beyond them (notations aside) is a constructor, which coqc 8.16's
//! `.glob` does not list for records and classes (`Build_seal` of `Record seal`). Names only:
//! what coqc calls `constr` quarry may call a field (the method of a single-method class),
//! a modelling choice. Not checked: only-parsing notations, which quarry leaves out (see
//! `src/extract/coq/notations.rs`), and notation keys, which coqc prefixes with their scope.

mod support;

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Path, PathBuf};

use quarry::extract::{build_library, BuildOptions, CoqPrefix};
use quarry::library::DeclKind;
use support::debian::coq_user_contrib;

/// The `.glob` kinds of what quarry models as a declaration (theorems, definitions,
/// instances, inductives, records, constructors, projections, axioms).
const DECLARING: [&str; 8] = ["prf", "def", "inst", "ind", "rec", "constr", "proj", "ax"];

/// Every `.glob` file under `dir`.
fn globs(dir: &Path, out: &mut Vec<PathBuf>) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    for e in entries.flatten() {
        let p = e.path();
        if p.is_dir() {
            globs(&p, out);
        } else if p.extension().is_some_and(|x| x == "glob") {
            out.push(p);
        }
    }
}

/// (qualified name, kind) of every declaring line of a `.glob` file.
fn defined(glob: &Path) -> Vec<(String, String)> {
    let text = std::fs::read_to_string(glob)
        .unwrap_or_else(|e| panic!("cannot read `{}`: {e}", glob.display()));
    let mut module = None;
    let mut out = Vec::new();
    for line in text.lines() {
        if let Some(m) = line.strip_prefix('F') {
            module = Some(m.trim().to_string());
            continue;
        }
        let parts: Vec<&str> = line.split_whitespace().collect();
        let (Some(module), [kind, _, path, name]) = (&module, parts.as_slice()) else {
            continue;
        };
        if !DECLARING.contains(kind) {
            continue;
        }
        let qualified = if *path == "<>" {
            format!("{module}.{name}")
        } else {
            format!("{module}.{path}.{name}")
        };
        out.push((qualified, kind.to_string()));
    }
    out
}

#[test]
fn stdpp_and_iris_declarations_match_coqc_glob() {
    let Some(stdpp) = coq_user_contrib("libcoq-stdpp", "stdpp") else {
        return;
    };
    let Some(iris) = coq_user_contrib("libcoq-iris", "iris") else {
        return;
    };
    let opts = BuildOptions {
        roots: vec![stdpp.clone(), iris.clone()],
        coq_prefixes: vec![
            CoqPrefix {
                logical: "stdpp".into(),
                dir: stdpp.clone(),
            },
            CoqPrefix {
                logical: "iris".into(),
                dir: iris.clone(),
            },
        ],
        threads: None,
        progress: false,
    };
    let library = build_library(&opts).unwrap_or_else(|e| panic!("stdpp and iris: {e}"));
    let ours: HashMap<&str, DeclKind> = library
        .declarations
        .iter()
        .map(|d| (d.name.as_str(), d.kind))
        .collect();

    let mut files = Vec::new();
    globs(&stdpp, &mut files);
    globs(&iris, &mut files);
    assert!(
        files.len() >= 200,
        "expected the packages' .glob files, found {}",
        files.len()
    );
    let mut theirs: BTreeMap<String, String> = BTreeMap::new();
    for f in &files {
        for (name, kind) in defined(f) {
            theirs.entry(name).or_insert(kind);
        }
    }
    let mut by_kind: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    let mut missing = Vec::new();
    for (name, kind) in &theirs {
        let row = by_kind.entry(kind).or_default();
        row.0 += 1;
        if ours.contains_key(name.as_str()) {
            row.1 += 1;
        } else {
            missing.push(format!("{kind} {name}"));
        }
    }
    println!(
        "stdpp + iris: {} .glob files, {} names coqc defines",
        files.len(),
        theirs.len()
    );
    for (kind, (n, found)) in &by_kind {
        println!("  {kind:6} {found:6} of {n:6} are quarry declarations");
    }
    let found = theirs.len() - missing.len();
    let recall = found as f64 / theirs.len() as f64;
    println!(
        "  recall {:.2} % ({found} of {})",
        100.0 * recall,
        theirs.len()
    );
    for m in missing.iter().take(20) {
        println!("  missing {m}");
    }
    assert!(
        theirs.len() > 10_000,
        "too few names in the .glob files: {}",
        theirs.len()
    );
    // Every one, as when written (4 December 2026, Debian 12's stdpp 1.8.0 and iris 4.0.0):
    // the projection bug this caught lost 9 constructors of 547.
    assert!(
        missing.is_empty(),
        "{} of coqc's names are not quarry declarations, first: {:?}",
        missing.len(),
        &missing[..missing.len().min(5)]
    );

    let glob_names: HashSet<&str> = theirs.keys().map(String::as_str).collect();
    let added: Vec<(&str, DeclKind)> = library
        .declarations
        .iter()
        .filter(|d| d.kind != DeclKind::Notation && !glob_names.contains(d.name.as_str()))
        .map(|d| (d.name.as_str(), d.kind))
        .collect();
    println!(
        "  quarry adds {} declarations coqc does not list (notations aside)",
        added.len()
    );
    let not_constructors: Vec<_> = added
        .iter()
        .filter(|(_, k)| *k != DeclKind::Constructor)
        .take(20)
        .collect();
    assert!(
        not_constructors.is_empty(),
        "declarations coqc does not know: {not_constructors:?}"
    );
}
