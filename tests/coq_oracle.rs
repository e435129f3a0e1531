//! The Coq frontend checked against Coq's own name resolution.
//!
//! Outside sources (Debian packages `coq` and `libcoq-stdlib`, version 8.16.1):
//! - the coqdoc HTML of the standard library: every declaration with source is an anchor
//!   `<a id="NAME" class="idref" ...><span class="id" title="KIND">`, `NAME` relative to the
//!   file's module (`Nat.add_wd` in `Coq.Arith.PeanoNat.html`);
//! - `.glob` files written by `coqc` for copies of stdlib files: `R<start>:<end> <library>
//!   <module path> <name> <kind>` for each name the file refers to (byte offsets, end
//!   inclusive), and `<kind> <start>:<end> <module path> <name>` for what it defines.
//!
//! Declarations: quarry's names for the stdlib against the anchors (recall of lemmas and
//! definitions, and names quarry would invent). Edges: quarry's proof edges against the
//! `.glob` references inside each proof span, counted on targets that have a source
//! declaration in quarry's model; references to names made by module functors or `Include`
//! (no source) are counted apart. Figures are printed; set `QUARRY_ORACLE_REPORT=<file>` to
//! also write every mismatch to that file.

mod support;

use std::collections::{BTreeMap, HashMap, HashSet};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

use quarry::extract::{build_library, BuildOptions};
use quarry::library::{DeclKind, Library, Visibility};
use support::debian::{coq_stdlib, coqc};
use support::glob::GlobRef;

fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| v == "true" || v == "1")
}

fn target_dir() -> PathBuf {
    match std::env::var_os("CARGO_TARGET_DIR") {
        Some(d) => PathBuf::from(d),
        None => Path::new(env!("CARGO_MANIFEST_DIR")).join("target"),
    }
}

/// Appends lines to the report file named by `QUARRY_ORACLE_REPORT`, if any.
fn report(lines: &[String]) {
    if let Some(path) = std::env::var_os("QUARRY_ORACLE_REPORT") {
        let mut old = std::fs::read_to_string(&path).unwrap_or_default();
        for l in lines {
            old.push_str(l);
            old.push('\n');
        }
        if let Err(e) = std::fs::write(&path, old) {
            eprintln!("cannot write the oracle report: {e}");
        }
    }
}

/// The standard library built by quarry, once per test run.
fn stdlib() -> Option<&'static (PathBuf, Library)> {
    static BUILT: OnceLock<Option<(PathBuf, Library)>> = OnceLock::new();
    BUILT
        .get_or_init(|| {
            let theories = coq_stdlib()?;
            let opts = support::debian::stdlib_options(&theories);
            match build_library(&opts) {
                Ok(l) => Some((theories, l)),
                Err(e) => panic!(
                    "quarry could not build the Coq stdlib at `{}`: {e}",
                    theories.display()
                ),
            }
        })
        .as_ref()
}

/// The coqdoc HTML folder of `libcoq-stdlib`: the installed one, else unpacked from the
/// package into `target/debian/` (Debian images often leave `/usr/share/doc` out).
fn coqdoc_html(theories: &Path) -> Option<PathBuf> {
    static FOUND: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    let found = FOUND.get_or_init(|| {
        let html_under = |root: &Path| root.join("usr/share/doc/libcoq-stdlib/html");
        // theories = <root>/usr/lib/ocaml/coq/theories
        let root = theories
            .ancestors()
            .nth(5)
            .map(Path::to_path_buf)
            .unwrap_or_default();
        for candidate in [html_under(&root), html_under(Path::new("/"))] {
            if candidate.join("Coq.Init.Prelude.html").is_file() {
                return Ok(candidate);
            }
        }
        let unpacked = target_dir().join("debian/libcoq-stdlib-doc");
        if html_under(&unpacked)
            .join("Coq.Init.Prelude.html")
            .is_file()
        {
            return Ok(html_under(&unpacked));
        }
        let downloads = target_dir().join("debian/downloads-doc");
        std::fs::create_dir_all(&downloads).map_err(|e| e.to_string())?;
        let out = Command::new("apt-get")
            .args(["download", "libcoq-stdlib"])
            .current_dir(&downloads)
            .output()
            .map_err(|e| format!("cannot run apt-get download: {e}"))?;
        if !out.status.success() {
            return Err(format!(
                "apt-get download libcoq-stdlib failed: {}",
                String::from_utf8_lossy(&out.stderr).trim()
            ));
        }
        let deb = std::fs::read_dir(&downloads)
            .map_err(|e| e.to_string())?
            .flatten()
            .map(|e| e.path())
            .find(|p| p.extension().is_some_and(|x| x == "deb"))
            .ok_or("apt-get download left no .deb")?;
        let out = Command::new("dpkg-deb")
            .arg("-x")
            .arg(&deb)
            .arg(&unpacked)
            .output()
            .map_err(|e| format!("cannot run dpkg-deb: {e}"))?;
        if !out.status.success() {
            return Err(format!(
                "dpkg-deb -x failed: {}",
                String::from_utf8_lossy(&out.stderr).trim()
            ));
        }
        let html = html_under(&unpacked);
        if html.join("Coq.Init.Prelude.html").is_file() {
            Ok(html)
        } else {
            Err("the libcoq-stdlib package holds no coqdoc HTML".into())
        }
    });
    match found {
        Ok(p) => Some(p.clone()),
        Err(why) if in_ci() => panic!("the coqdoc HTML of libcoq-stdlib is needed under CI: {why}"),
        Err(why) => {
            println!("skipped: no coqdoc HTML for the Coq stdlib ({why})");
            None
        }
    }
}

/// coqdoc anchors of one HTML file: (id, kind).
fn anchors(html: &str) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let open = "<a id=\"";
    let mut rest = html;
    while let Some(at) = rest.find(open) {
        rest = &rest[at + open.len()..];
        let Some(q) = rest.find('"') else { break };
        let id = &rest[..q];
        let after = &rest[q..];
        let head = "\" class=\"idref\" href=\"#";
        if !after.starts_with(head) {
            continue;
        }
        let Some(title_at) = after.find("title=\"") else {
            break;
        };
        if title_at > 200 + id.len() * 2 {
            continue;
        }
        let t = &after[title_at + 7..];
        let Some(tq) = t.find('"') else { break };
        out.push((id.to_string(), t[..tq].to_string()));
    }
    out
}

/// Decodes the HTML entities coqdoc writes in ids.
fn unescape(id: &str) -> String {
    id.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&")
        .replace("&quot;", "\"")
}

#[test]
fn declarations_match_coqdoc_anchors() {
    let Some((theories, library)) = stdlib() else {
        return;
    };
    let Some(html) = coqdoc_html(theories) else {
        return;
    };
    let modules: HashSet<&str> = library.modules.iter().map(|m| m.name.as_str()).collect();
    // name -> kind, for anchors of modules quarry read (files under theories/).
    let mut anchor: HashMap<String, String> = HashMap::new();
    let entries = std::fs::read_dir(&html)
        .unwrap_or_else(|e| panic!("cannot list `{}`: {e}", html.display()));
    for entry in entries.flatten() {
        let path = entry.path();
        let Some(stem) = path
            .file_stem()
            .and_then(|s| s.to_str())
            .map(str::to_string)
        else {
            continue;
        };
        if path.extension().is_none_or(|x| x != "html") || !modules.contains(stem.as_str()) {
            continue;
        }
        let Ok(text) = std::fs::read_to_string(&path) else {
            continue;
        };
        for (id, kind) in anchors(&text) {
            anchor.insert(format!("{stem}.{}", unescape(&id)), kind);
        }
    }
    assert!(
        anchor.len() > 10_000,
        "only {} anchors read from `{}`",
        anchor.len(),
        html.display()
    );
    let names: HashSet<&str> = library
        .declarations
        .iter()
        .map(|d| d.name.as_str())
        .collect();

    // Recall, per coqdoc kind.
    let mut per_kind: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    let mut missed = Vec::new();
    for (name, kind) in &anchor {
        if matches!(
            kind.as_str(),
            "binder" | "section" | "variable" | "module" | "notation"
        ) {
            continue;
        }
        let e = per_kind.entry(kind.as_str()).or_default();
        e.0 += 1;
        if names.contains(name.as_str()) {
            e.1 += 1;
        } else {
            missed.push(format!("missed {kind} {name}"));
        }
    }
    println!("coqdoc anchors found by quarry, per kind (found / anchors):");
    for (kind, (all, found)) in &per_kind {
        println!(
            "  {kind:<13} {found:>6} / {all:<6} {:6.2} %",
            100.0 * *found as f64 / (*all).max(1) as f64
        );
    }
    let (all, found) = ["lemma", "definition"]
        .iter()
        .filter_map(|k| per_kind.get(k))
        .fold((0, 0), |(a, f), (x, y)| (a + x, f + y));
    let recall = found as f64 / all.max(1) as f64;
    println!(
        "recall of lemma and definition anchors: {found} / {all} = {:.2} %",
        100.0 * recall
    );

    // Invented names: declarations that are no anchor. Counted apart, as coqdoc 8.16 writes
    // no anchor of that name for them although coqc declares them: record constructors
    // (`Build_R` and named ones alike), notations (anchored by a hash of their text, plus
    // the few abbreviations it leaves out) and `Local` declarations. quarry leaves out
    // `Notation old := new (only parsing)` aliases (coqdoc anchors them as abbreviations,
    // coqc's `.glob` records their uses as uses of `new`), so most abbreviation anchors
    // are not found: that figure is printed, not asserted.
    let mut invented = Vec::new();
    let (mut constructors_apart, mut notations_apart, mut local_apart) = (0, 0, 0);
    for d in &library.declarations {
        if anchor.contains_key(&d.name) {
            continue;
        }
        match d.kind {
            DeclKind::Notation => notations_apart += 1,
            DeclKind::Constructor if d.statement.starts_with('{') => constructors_apart += 1,
            _ if d.visibility == Visibility::Local => local_apart += 1,
            _ => invented.push(format!("invented {} {}", d.kind.as_str(), d.name)),
        }
    }
    let total = library.declarations.len();
    println!(
        "quarry declarations: {total}; not an anchor: {} ({:.2} %); apart: {constructors_apart} record constructors, {notations_apart} notations and abbreviations, {local_apart} Local declarations",
        invented.len(),
        100.0 * invented.len() as f64 / total.max(1) as f64
    );
    missed.sort();
    invented.sort();
    for line in invented.iter().take(15) {
        println!("  {line}");
    }
    report(&missed);
    report(&invented);
    assert!(
        recall >= 0.98,
        "recall of lemma/definition anchors {:.2} % < 98 %",
        100.0 * recall
    );
    // A few names coqdoc does not anchor though coqc defines them (e.g. declarations inside
    // `Module Type`s that coqdoc skips): at most 1 % of the declarations.
    assert!(
        invented.len() * 100 <= total,
        "{} of {total} quarry declarations are no coqdoc anchor",
        invented.len()
    );
}

/// Stdlib files compiled for the edge check: proof-heavy files from several folders.
const GLOB_FILES: &[&str] = &[
    "Arith/Between",
    "Arith/Factorial",
    "Arith/EqNat",
    "Arith/Wf_nat",
    "Arith/Compare_dec",
    "Arith/Peano_dec",
    "Arith/Cantor",
    "Arith/Euclid",
    "Bool/Bool",
    "Bool/BoolOrder",
    "Bool/Sumbool",
    "Bool/Zerob",
    "Bool/DecBool",
    "Bool/IfProp",
    "Lists/List",
    "Lists/ListDec",
    "Lists/ListSet",
    "Lists/ListTactics",
    "Lists/StreamMemo",
    "Lists/Streams",
    "Sorting/Permutation",
    "Sorting/Sorted",
    "Sorting/Heap",
    "Sorting/PermutEq",
    "Sorting/Mergesort",
    "ZArith/Zeven",
    "ZArith/Zbool",
    "ZArith/Zmin",
    "ZArith/Zmax",
    "ZArith/Zabs",
    "ZArith/Zorder",
    "ZArith/Zcompare",
    "ZArith/Zpow_def",
    "ZArith/Zcomplements",
    "ZArith/Zmisc",
    "ZArith/Zgcd_alt",
    "Relations/Relation_Operators",
    "Relations/Operators_Properties",
    "Logic/Decidable",
    "Logic/Eqdep_dec",
    "Wellfounded/Lexicographic_Product",
    "Wellfounded/Transitive_Closure",
    "Sets/Relations_1_facts",
    "Program/Subset",
];

/// Compiles copies of `GLOB_FILES` and reads their `.glob` references, per module name.
fn glob_references(theories: &Path, coqc: &Path) -> HashMap<String, Vec<GlobRef>> {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("no temporary folder: {e}"));
    let mut jobs: Vec<(String, PathBuf)> = Vec::new();
    for f in GLOB_FILES {
        let src = theories.join(format!("{f}.v"));
        let dst = dir.path().join(format!("{f}.v"));
        if let Some(parent) = dst.parent() {
            std::fs::create_dir_all(parent)
                .unwrap_or_else(|e| panic!("cannot create `{}`: {e}", parent.display()));
        }
        std::fs::copy(&src, &dst)
            .unwrap_or_else(|e| panic!("cannot copy `{}`: {e}", src.display()));
        jobs.push((format!("Coq.{}", f.replace('/', ".")), dst));
    }
    // The copies are the library `Copy`, compiled against the installed stdlib, so every
    // reference to another file names the installed `Coq.*` module.
    let results: Vec<(String, Result<String, String>)> = std::thread::scope(|s| {
        let chunks: Vec<&[(String, PathBuf)]> =
            jobs.chunks(jobs.len().div_ceil(2).max(1)).collect();
        let handles: Vec<_> = chunks
            .into_iter()
            .map(|chunk| {
                let root = dir.path();
                s.spawn(move || {
                    chunk
                        .iter()
                        .map(|(module, file)| {
                            let out = Command::new(coqc)
                                .arg("-q")
                                .arg("-Q")
                                .arg(root)
                                .arg("Copy")
                                .arg(file)
                                .output();
                            let r = match out {
                                Ok(o) if o.status.success() => {
                                    std::fs::read_to_string(file.with_extension("glob"))
                                        .map_err(|e| format!("no .glob: {e}"))
                                }
                                Ok(o) => Err(String::from_utf8_lossy(&o.stderr).trim().to_string()),
                                Err(e) => Err(format!("cannot run coqc: {e}")),
                            };
                            (module.clone(), r)
                        })
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        handles
            .into_iter()
            .flat_map(|h| h.join().unwrap_or_default())
            .collect()
    });
    let mut out = HashMap::new();
    for (module, result) in results {
        let glob = match result {
            Ok(g) => g,
            Err(e) => {
                println!("coqc could not compile the copy of {module}: {e}");
                continue;
            }
        };
        let refs = support::glob::references(&glob, |lib| match lib.strip_prefix("Copy.") {
            Some(rest) => format!("Coq.{rest}"),
            None => lib.to_string(),
        });
        out.insert(module, refs);
    }
    out
}

/// `.glob` kinds that name no declaration: bound variables, notations, modules, sections.
fn names_a_declaration(kind: &str) -> bool {
    !matches!(
        kind,
        "var" | "binder" | "not" | "lib" | "mod" | "modtype" | "sec" | "modparam"
    )
}

#[test]
fn proof_edges_match_coqc_glob() {
    let Some((theories, library)) = stdlib() else {
        return;
    };
    let Some(coqc) = coqc() else { return };
    let globs = glob_references(theories, &coqc);
    assert!(
        globs.len() >= 40,
        "only {} of the {} copies compiled",
        globs.len(),
        GLOB_FILES.len()
    );
    let by_name: HashMap<&str, usize> = library
        .declarations
        .iter()
        .enumerate()
        .map(|(i, d)| (d.name.as_str(), i))
        .collect();
    let last = |n: &str| n.rsplit('.').next().unwrap_or(n).to_string();
    let (mut tp, mut quarry_edges, mut glob_edges, mut no_source, mut aliases) =
        (0usize, 0usize, 0usize, 0usize, 0usize);
    let (mut s_tp, mut s_quarry, mut s_glob) = (0usize, 0usize, 0usize);
    let mut lines = Vec::new();
    for d in &library.declarations {
        let module = library.module(d.module).name.as_str();
        let Some(refs) = globs.get(module) else {
            continue;
        };
        let targets_in = |start: u32, end: u32| -> (HashSet<String>, HashSet<String>) {
            let mut with_source = HashSet::new();
            let mut without = HashSet::new();
            for r in refs
                .iter()
                .filter(|r| r.start >= start && r.start < end && names_a_declaration(&r.kind))
            {
                if r.target == d.name {
                    continue;
                }
                if by_name.contains_key(r.target.as_str()) {
                    with_source.insert(r.target.clone());
                } else {
                    without.insert(r.target.clone());
                }
            }
            (with_source, without)
        };
        if let Some(span) = d.proof_span {
            let (glob, without) = targets_in(span.start.byte, span.end.byte);
            no_source += without.len();
            let quarry: HashSet<String> = library
                .graph
                .premises(d.id)
                .map(|t| library.declaration(t).name.clone())
                .collect();
            let without_last: HashSet<String> = without.iter().map(|t| last(t)).collect();
            for q in &quarry {
                if glob.contains(q) {
                    tp += 1;
                    quarry_edges += 1;
                } else if without_last.contains(&last(q)) {
                    // coqc names the copy a functor or `Include` made; quarry the original.
                    aliases += 1;
                } else {
                    quarry_edges += 1;
                    lines.push(format!("extra-proof {} -> {q}", d.name));
                }
            }
            for g in &glob {
                glob_edges += 1;
                if !quarry.contains(g) {
                    lines.push(format!("missed-proof {} -> {g}", d.name));
                }
            }
        }
        let (glob, _) = targets_in(d.statement_span.start.byte, d.statement_span.end.byte);
        let quarry: HashSet<String> = library
            .graph
            .statement_uses
            .neighbours(d.id)
            .map(|t| library.declaration(t).name.clone())
            .collect();
        s_quarry += quarry.len();
        s_glob += glob.len();
        s_tp += quarry.intersection(&glob).count();
    }
    let precision = tp as f64 / quarry_edges.max(1) as f64;
    let recall = tp as f64 / glob_edges.max(1) as f64;
    println!("proof edges over {} compiled stdlib files:", globs.len());
    println!(
        "  precision {:.2} % ({tp} of {quarry_edges} quarry edges are coqc references)",
        100.0 * precision
    );
    println!(
        "  recall    {:.2} % ({tp} of {glob_edges} coqc references to declarations with source)",
        100.0 * recall
    );
    println!("  apart: {no_source} coqc references to names without source (functor, Include, Scheme); {aliases} quarry edges to the originals of such names");
    println!(
        "statement edges (not asserted): precision {:.2} %, recall {:.2} % ({s_tp} / {s_quarry} / {s_glob})",
        100.0 * s_tp as f64 / s_quarry.max(1) as f64,
        100.0 * s_tp as f64 / s_glob.max(1) as f64
    );
    lines.sort();
    report(&lines);
    assert!(
        precision >= 0.95,
        "proof edge precision {:.2} % < 95 %",
        100.0 * precision
    );
    assert!(
        recall >= 0.90,
        "proof edge recall {:.2} % < 90 %",
        100.0 * recall
    );
}

/// The demo library `index_fixtures/coq` compiles with coqc, and quarry's edges for it are
/// exactly coqc's `.glob` references (inside each proof and statement span) to its own
/// declarations.
#[test]
fn demo_fixture_edges_are_coqc_references() {
    let Some(coqc) = coqc() else { return };
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures/coq");
    let library = build_library(&BuildOptions {
        roots: vec![fixture.clone()],
        coq_prefixes: Vec::new(),
        threads: Some(2),
        progress: false,
    })
    .unwrap_or_else(|e| panic!("quarry could not build `{}`: {e}", fixture.display()));
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("no temporary folder: {e}"));
    let names: HashSet<&str> = library
        .declarations
        .iter()
        .map(|d| d.name.as_str())
        .collect();
    let mut mismatches = Vec::new();
    let mut agreed = 0;
    for file in ["Core", "Lemmas", "Queue"] {
        let src = fixture.join(format!("{file}.v"));
        let dst = dir.path().join(format!("{file}.v"));
        std::fs::copy(&src, &dst)
            .unwrap_or_else(|e| panic!("cannot copy `{}`: {e}", src.display()));
        let out = Command::new(&coqc)
            .current_dir(dir.path())
            .args(["-q", "-R", ".", "RingBuffer", &format!("{file}.v")])
            .output()
            .unwrap_or_else(|e| panic!("cannot run coqc: {e}"));
        assert!(
            out.status.success(),
            "coqc rejects the demo file {file}.v: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let glob = std::fs::read_to_string(dst.with_extension("glob"))
            .unwrap_or_else(|e| panic!("coqc wrote no {file}.glob: {e}"));
        let refs: Vec<(u32, String)> = glob
            .lines()
            .filter_map(|l| {
                let parts: Vec<&str> = l.strip_prefix('R')?.split_whitespace().collect();
                let [span, lib, path, name, kind] = parts[..] else {
                    return None;
                };
                if !names_a_declaration(kind) {
                    return None;
                }
                let start = span.split(':').next()?.parse().ok()?;
                let target = if path == "<>" {
                    format!("{lib}.{name}")
                } else {
                    format!("{lib}.{path}.{name}")
                };
                names.contains(target.as_str()).then_some((start, target))
            })
            .collect();
        let module = format!("RingBuffer.{file}");
        for d in library
            .declarations
            .iter()
            .filter(|d| library.module(d.module).name == module)
        {
            let spans = [
                ("proof", d.proof_span),
                ("statement", Some(d.statement_span)),
            ];
            for (part, span) in spans {
                let Some(span) = span else { continue };
                let glob: HashSet<&str> = refs
                    .iter()
                    .filter(|(at, t)| *at >= span.start.byte && *at < span.end.byte && *t != d.name)
                    .map(|(_, t)| t.as_str())
                    .collect();
                let ids: Vec<_> = if part == "proof" {
                    library.graph.premises(d.id).collect()
                } else {
                    library.graph.statement_uses.neighbours(d.id).collect()
                };
                let quarry: HashSet<&str> = ids
                    .into_iter()
                    .map(|t| library.declaration(t).name.as_str())
                    .collect();
                agreed += quarry.intersection(&glob).count();
                for t in quarry.symmetric_difference(&glob) {
                    let who = if quarry.contains(t) {
                        "quarry only"
                    } else {
                        "coqc only"
                    };
                    mismatches.push(format!("{part} {} -> {t} ({who})", d.name));
                }
            }
        }
    }
    println!(
        "demo library: {agreed} edges agree with coqc's .glob, {} differ",
        mismatches.len()
    );
    assert!(
        mismatches.is_empty(),
        "edges differ from coqc's .glob:\n  {}",
        mismatches.join("\n  ")
    );
    assert!(agreed >= 100, "only {agreed} edges compared");
}
