//! A synthetic Coq library in a warehouse-and-scheduler scenario, written as real `.v`
//! source files so that `quarry build` runs its real extraction on them.
//!
//! Takes a size (declarations), a seed and a folder; gives `Wh/Signature.v` (a random
//! signature of function and relation symbols over one type `item`), files of 500
//! declarations each under `Wh/Aisle###/Bay#####.v` (definitions and lemmas whose proofs
//! cite earlier declarations by qualified name), and `goals.txt`: fresh lemma statements,
//! one per line, built the same way but absent from the library (the latency goals).
//!
//! Popularity follows a power law by preferential attachment (the Yule–Simon process:
//! with probability `FRESH` a citation picks a uniformly random earlier declaration,
//! otherwise it copies a random earlier citation, so a declaration is picked in proportion
//! to how often it was already cited). Statements share symbols with the first premise
//! they cite, so retrieval has something to find. It does not check the files with coqc:
//! the lemmas are not provable, only well formed as text.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::Path;

use quarry::dense::seeded::SplitMix64;

/// Declarations per source file.
const PER_FILE: usize = 500;
/// Files per aisle folder.
const PER_AISLE: usize = 100;
/// Share of citations that pick a uniformly random earlier declaration (the rest copy an
/// earlier citation). 0.3 gives an in-degree tail exponent of 1 + 1/(1 − 0.3) ≈ 2.4
/// (Simon 1955), inside the 2–3 range measured for citation graphs (common practice).
const FRESH: f64 = 0.3;
/// Share of declarations that are definitions (the rest are lemmas).
const DEFINITIONS: f64 = 0.1;

const NOUNS: &[&str] = &[
    "stock", "bin", "pallet", "order", "shipment", "slot", "queue", "task", "shift", "crate",
    "dock", "route", "batch", "lot", "ledger", "rack", "aisle", "truck", "picker", "job", "quota",
    "manifest", "parcel", "carton", "window", "lane", "tote", "bay", "cycle", "lease",
];
const VERBS: &[&str] = &[
    "restock", "ship", "reserve", "release", "merge", "split", "assign", "defer", "pick", "pack",
    "load", "unload", "tally", "schedule", "cancel", "move", "audit", "settle", "drain", "rotate",
    "balance", "claim", "hold", "route", "stage", "return", "weigh",
];
const RELATIONS: &[&str] = &[
    "fits", "precedes", "covers", "within", "disjoint", "owns", "ready", "overdue", "matches",
    "blocks", "feeds", "outranks",
];

/// One symbol of the signature.
struct Symbol {
    name: String,
    arity: usize,
}

/// The random signature: function symbols (arity 1 or 2) and binary relation symbols.
struct Signature {
    functions: Vec<Symbol>,
    relations: Vec<String>,
}

impl Signature {
    /// A signature that grows with the library (as real libraries' vocabularies do, about
    /// with the square root of their size: Heaps' law with exponent 0.5, common practice).
    fn random(declarations: usize, rng: &mut SplitMix64) -> Signature {
        let root = (declarations as f64).sqrt();
        let n_functions = 150 + (3.0 * root) as usize;
        let n_relations = 24 + (root / 4.0) as usize;
        let mut functions = Vec::with_capacity(n_functions);
        for i in 0..n_functions {
            let verb = VERBS[rng.below(VERBS.len())];
            let noun = NOUNS[rng.below(NOUNS.len())];
            functions.push(Symbol {
                name: format!("{verb}_{noun}_{i}"),
                arity: 1 + rng.below(2),
            });
        }
        let relations = (0..n_relations)
            .map(|i| {
                let r = RELATIONS[rng.below(RELATIONS.len())];
                let noun = NOUNS[rng.below(NOUNS.len())];
                format!("{r}_{noun}_{i}")
            })
            .collect();
        Signature {
            functions,
            relations,
        }
    }

    fn source(&self) -> String {
        let mut out = String::from(
            "(** The signature of the synthetic warehouse library: one type of items, \
             its operations and relations. *)\n\nParameter item : Type.\n",
        );
        for f in &self.functions {
            let ty = vec!["item"; f.arity + 1].join(" -> ");
            let _ = writeln!(out, "Parameter {} : {ty}.", f.name);
        }
        for r in &self.relations {
            let _ = writeln!(out, "Parameter {r} : item -> item -> Prop.");
        }
        out
    }
}

/// What a later declaration needs to know of an earlier one.
#[derive(Clone, Copy)]
struct Earlier {
    file: u32,
    /// The topic: function symbols its statement uses.
    topic: [u16; 3],
}

/// The logical module of file number `file`, and its path below the root.
fn module_of(file: usize) -> (String, String) {
    let aisle = file / PER_AISLE;
    (
        format!("Wh.Aisle{aisle:03}.Bay{file:05}"),
        format!("Wh/Aisle{aisle:03}/Bay{file:05}.v"),
    )
}

/// A term over the variables, using the topic's symbols most of the time.
fn term(
    sig: &Signature,
    topic: &[u16; 3],
    vars: &[&str],
    depth: usize,
    rng: &mut SplitMix64,
) -> String {
    if depth == 0 || rng.next_f64() < 0.3 {
        return vars[rng.below(vars.len())].to_string();
    }
    let f = if rng.next_f64() < 0.8 {
        &sig.functions[topic[rng.below(3)] as usize % sig.functions.len()]
    } else {
        &sig.functions[rng.below(sig.functions.len())]
    };
    let args: Vec<String> = (0..f.arity)
        .map(|_| term(sig, topic, vars, depth - 1, rng))
        .collect();
    format!("({} {})", f.name, args.join(" "))
}

/// A statement `forall x y z : item, H -> R s t` over the topic.
fn statement(sig: &Signature, topic: &[u16; 3], rng: &mut SplitMix64) -> String {
    let vars = ["x", "y", "z"];
    let rel = |rng: &mut SplitMix64| sig.relations[rng.below(sig.relations.len())].as_str();
    let mut out = String::from("forall x y z : item, ");
    for _ in 0..rng.below(3) {
        let r = rel(rng);
        let _ = write!(
            out,
            "{r} {} {} -> ",
            term(sig, topic, &vars, 1, rng),
            term(sig, topic, &vars, 1, rng)
        );
    }
    let r = rel(rng);
    let _ = write!(
        out,
        "{r} {} {}",
        term(sig, topic, &vars, 3, rng),
        term(sig, topic, &vars, 3, rng)
    );
    out
}

/// The topic of a new declaration: two symbols of its first premise and one at random.
fn topic_after(first: Option<&Earlier>, sig: &Signature, rng: &mut SplitMix64) -> [u16; 3] {
    let random = |rng: &mut SplitMix64| rng.below(sig.functions.len()) as u16;
    match first {
        Some(e) => [e.topic[rng.below(3)], e.topic[rng.below(3)], random(rng)],
        None => [random(rng), random(rng), random(rng)],
    }
}

/// What `write_library` wrote.
pub struct Written {
    pub declarations: usize,
    pub files: usize,
    pub bytes: u64,
    pub goals: usize,
    /// Citations of the most cited declaration, and the mean over cited declarations:
    /// the heavy tail the popularity model promises, checked on what was written.
    pub most_cited: usize,
    pub mean_cited: f64,
}

/// Writes a library of `declarations` declarations (signature included) under `root`
/// (which must not exist yet, or be empty), with `goals` fresh goal statements.
pub fn write_library(
    root: &Path,
    declarations: usize,
    goals: usize,
    seed: u64,
) -> std::io::Result<Written> {
    let mut rng = SplitMix64::new(seed);
    let sig = Signature::random(declarations, &mut rng.fork(1));
    std::fs::create_dir_all(root.join("Wh"))?;
    let signature = sig.source();
    let mut bytes = signature.len() as u64;
    std::fs::write(root.join("Wh/Signature.v"), signature)?;
    // `item` and every symbol of the signature are declarations too.
    let mut total = 1 + sig.functions.len() + sig.relations.len();
    let mut earlier: Vec<Earlier> = Vec::with_capacity(declarations);
    let mut names: Vec<String> = Vec::with_capacity(declarations);
    let mut citations: Vec<u32> = Vec::new();
    let mut files = 1;
    let mut file = 0usize;
    while total < declarations {
        let (module, path) = module_of(file);
        let mut body = String::new();
        let mut required: Vec<u32> = Vec::new();
        let first_here = earlier.len();
        while total < declarations && earlier.len() - first_here < PER_FILE {
            let id = earlier.len() as u32;
            // Citations to earlier files only: a file cannot cite itself by its module
            // path, and Coq has no forward references.
            let citable = first_here;
            let n_cited = if citable == 0 {
                0
            } else {
                1 + (rng.next_gaussian().abs() * 2.0) as usize
            };
            let mut cited: Vec<u32> = Vec::with_capacity(n_cited);
            for _ in 0..n_cited {
                let pick = if citations.is_empty() || rng.next_f64() < FRESH {
                    rng.below(citable) as u32
                } else {
                    citations[rng.below(citations.len())]
                };
                if (pick as usize) < citable && !cited.contains(&pick) {
                    cited.push(pick);
                }
            }
            let topic = topic_after(cited.first().map(|&c| &earlier[c as usize]), &sig, &mut rng);
            let noun = NOUNS[rng.below(NOUNS.len())];
            if rng.next_f64() < DEFINITIONS {
                let name = format!("{noun}_step_{id}");
                let t = term(&sig, &topic, &["x", "y"], 3, &mut rng);
                let _ = writeln!(body, "Definition {name} (x y : item) : item := {t}.\n");
                names.push(name);
            } else {
                let verb = VERBS[rng.below(VERBS.len())];
                let name = format!("{verb}_{noun}_{id}");
                let s = statement(&sig, &topic, &mut rng);
                let _ = writeln!(body, "Lemma {name} : {s}.\nProof.\n  intros.");
                for &c in &cited {
                    let target = &earlier[c as usize];
                    let (m, _) = module_of(target.file as usize);
                    let short = m.rsplit('.').next().unwrap_or(&m);
                    let tactic = if rng.next_f64() < 0.5 {
                        "rewrite"
                    } else {
                        "apply"
                    };
                    let _ = writeln!(body, "  {tactic} {short}.{}.", names[c as usize]);
                    if !required.contains(&target.file) {
                        required.push(target.file);
                    }
                }
                body.push_str("  auto.\nQed.\n\n");
                names.push(name);
            }
            citations.extend_from_slice(&cited);
            earlier.push(Earlier {
                file: file as u32,
                topic,
            });
            total += 1;
        }
        required.sort_unstable();
        let mut source = format!(
            "(** {module}: synthetic warehouse lemmas. *)\n\nFrom Wh Require Import Signature.\n"
        );
        for r in required {
            let _ = writeln!(source, "Require {}.", module_of(r as usize).0);
        }
        source.push('\n');
        source.push_str(&body);
        let full = root.join(&path);
        if let Some(parent) = full.parent() {
            std::fs::create_dir_all(parent)?;
        }
        bytes += source.len() as u64;
        std::fs::write(full, source)?;
        files += 1;
        file += 1;
    }
    let mut out = std::io::BufWriter::new(std::fs::File::create(root.join("goals.txt"))?);
    for _ in 0..goals {
        let first = (!earlier.is_empty()).then(|| earlier[rng.below(earlier.len())]);
        let topic = topic_after(first.as_ref(), &sig, &mut rng);
        writeln!(out, "{}", statement(&sig, &topic, &mut rng))?;
    }
    out.flush()?;
    let mut counts = vec![0usize; earlier.len()];
    for &c in &citations {
        if let Some(n) = counts.get_mut(c as usize) {
            *n += 1;
        }
    }
    let cited = counts.iter().filter(|&&n| n > 0).count();
    Ok(Written {
        most_cited: counts.iter().copied().max().unwrap_or(0),
        mean_cited: citations.len() as f64 / cited.max(1) as f64,
        declarations: total,
        files,
        bytes,
        goals,
    })
}
