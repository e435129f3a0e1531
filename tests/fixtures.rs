//! The demo library in `index_fixtures/` gives exactly the declarations and edges written in
//! its golden files, which were checked by hand against the sources (and, for Coq, against
//! coqc's `.glob` output); and extraction gives the same library whatever the thread count.

use std::path::{Path, PathBuf};

use quarry::extract::{build_library, BuildOptions};
use quarry::library::Library;

fn fixture(lang: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("index_fixtures")
        .join(lang)
}

fn build(root: &Path, threads: usize) -> Library {
    let opts = BuildOptions {
        roots: vec![root.to_path_buf()],
        coq_prefixes: Vec::new(),
        threads: Some(threads),
        progress: false,
    };
    match build_library(&opts) {
        Ok(l) => l,
        Err(e) => panic!("building `{}` failed: {e}", root.display()),
    }
}

/// The golden format: `declaration <kind> <name>` lines sorted, then `proof <from> <to>` and
/// `statement <from> <to>` lines sorted.
fn render(library: &Library) -> Vec<String> {
    let mut decls: Vec<String> = library
        .declarations
        .iter()
        .map(|d| format!("declaration {} {}", d.kind.as_str(), d.name))
        .collect();
    decls.sort();
    let mut edges = Vec::new();
    for d in &library.declarations {
        for p in library.graph.premises(d.id) {
            edges.push(format!("proof {} {}", d.name, library.declaration(p).name));
        }
        for s in library.graph.statement_uses.neighbours(d.id) {
            edges.push(format!(
                "statement {} {}",
                d.name,
                library.declaration(s).name
            ));
        }
    }
    edges.sort();
    decls.extend(edges);
    decls
}

fn check_golden(lang: &str) {
    let root = fixture(lang);
    let golden_path = root.join("golden.txt");
    let golden = std::fs::read_to_string(&golden_path)
        .unwrap_or_else(|e| panic!("cannot read `{}`: {e}", golden_path.display()));
    let expected: Vec<String> = golden
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .map(String::from)
        .collect();
    let library = build(&root, 2);
    let actual = render(&library);
    let missing: Vec<&String> = expected.iter().filter(|l| !actual.contains(l)).collect();
    let extra: Vec<&String> = actual.iter().filter(|l| !expected.contains(l)).collect();
    assert!(
        missing.is_empty() && extra.is_empty(),
        "{lang} fixture differs from {}:\nmissing (expected, not produced):\n  {}\nextra (produced, not expected):\n  {}",
        golden_path.display(),
        missing.iter().map(|s| s.as_str()).collect::<Vec<_>>().join("\n  "),
        extra.iter().map(|s| s.as_str()).collect::<Vec<_>>().join("\n  "),
    );
    let decls = library.declarations.len();
    assert!(
        decls >= 40,
        "the {lang} demo library should have about 60 declarations, has {decls}"
    );
}

#[test]
fn lean_fixture_matches_golden() {
    check_golden("lean");
}

#[test]
fn coq_fixture_matches_golden() {
    check_golden("coq");
}

#[test]
fn extraction_is_the_same_whatever_the_thread_count() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let one = build(&root, 1);
    let two = build(&root, 2);
    assert_eq!(one, two);
    assert!(!one.declarations.is_empty());
}
