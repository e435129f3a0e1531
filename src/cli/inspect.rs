//! `quarry inspect`: counts, one declaration, or every declaration as JSON lines.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context;
use clap::Args;
use quarry::library::{store, DeclId, Declaration, Library};
use serde::Serialize;

/// Arguments of `quarry inspect`.
#[derive(Args, Debug)]
pub struct InspectArgs {
    /// The index folder written by `quarry build`.
    #[arg(value_name = "INDEX_DIR")]
    index: PathBuf,
    /// A declaration's name, fully or partially qualified (`Nat.add_comm`).
    #[arg(value_name = "NAME")]
    name: Option<String>,
    /// Machine-readable output (schema in docs/index-format.md).
    #[arg(long)]
    json: bool,
    /// Every declaration, one JSON object per line (implies --json).
    #[arg(long, conflicts_with = "name")]
    all: bool,
    /// Check every part of the index against the manifest's checksums.
    #[arg(long, conflicts_with_all = ["name", "all"])]
    verify: bool,
}

/// One declaration as `inspect --json` and `--all` print it.
#[derive(Serialize)]
struct DeclarationJson<'a> {
    name: &'a str,
    kind: &'a str,
    module: &'a str,
    file: String,
    line: u32,
    column: u32,
    statement: &'a str,
    hypotheses: Vec<String>,
    conclusion: Option<&'a str>,
    visibility: quarry::library::Visibility,
    attributes: &'a [String],
    proof_premises: Vec<&'a str>,
    statement_references: Vec<&'a str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    dependents: Option<Vec<&'a str>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    notation: Option<&'a quarry::library::NotationInfo>,
    references: quarry::library::ReferenceCounts,
    unresolved_names: &'a [String],
}

fn file_path(library: &Library, d: &Declaration) -> String {
    let f = library.file(d.file);
    match library.roots.get(f.root as usize) {
        Some(root) => format!("{root}/{}", f.path),
        None => f.path.clone(),
    }
}

fn names(library: &Library, ids: impl Iterator<Item = DeclId>) -> Vec<&str> {
    ids.map(|id| library.declaration(id).name.as_str())
        .collect()
}

fn declaration_json<'a>(
    library: &'a Library,
    d: &'a Declaration,
    with_dependents: bool,
) -> DeclarationJson<'a> {
    DeclarationJson {
        name: &d.name,
        kind: d.kind.as_str(),
        module: &library.module(d.module).name,
        file: file_path(library, d),
        line: d.statement_span.start.line,
        column: d.statement_span.start.column,
        statement: &d.statement,
        hypotheses: d
            .hypotheses
            .iter()
            .map(|h| {
                if h.names.is_empty() {
                    h.ty.clone()
                } else if h.ty.is_empty() {
                    h.names.join(" ")
                } else {
                    format!("{} : {}", h.names.join(" "), h.ty)
                }
            })
            .collect(),
        conclusion: d.conclusion.as_deref(),
        visibility: d.visibility,
        attributes: &d.attributes,
        proof_premises: names(library, library.graph.premises(d.id)),
        statement_references: names(library, library.graph.statement_uses.neighbours(d.id)),
        dependents: with_dependents.then(|| names(library, library.graph.dependents(d.id))),
        notation: d.notation.as_ref(),
        references: d.references,
        unresolved_names: &d.unresolved_names,
    }
}

/// Runs `quarry inspect`.
pub fn run(args: InspectArgs) -> anyhow::Result<ExitCode> {
    let generation = store::open_generation(&args.index)
        .with_context(|| format!("cannot open the index `{}`", args.index.display()))?;
    if args.verify {
        let checked = generation.verify_all().context("the index is damaged")?;
        println!(
            "ok: {} parts of generation {} match the manifest ({})",
            checked.len(),
            generation.manifest.build_id,
            checked.join(", ")
        );
        return Ok(ExitCode::SUCCESS);
    }
    let library = generation
        .load_library()
        .with_context(|| format!("cannot load the index `{}`", args.index.display()))?;
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    if args.all {
        for d in &library.declarations {
            serde_json::to_writer(&mut out, &declaration_json(&library, d, false))?;
            writeln!(out)?;
        }
        out.flush()?;
        return Ok(ExitCode::SUCCESS);
    }
    if let Some(name) = &args.name {
        let mut hits = library.find_exact(name);
        if hits.is_empty() {
            hits = library.find_by_suffix(name);
        }
        match hits.as_slice() {
            [] => {
                eprintln!(
                    "error: no declaration named `{name}` in `{}`",
                    args.index.display()
                );
                return Ok(ExitCode::from(super::EXIT_NOT_FOUND));
            }
            [id] => {
                let d = library.declaration(*id);
                let j = declaration_json(&library, d, true);
                if args.json {
                    serde_json::to_writer_pretty(&mut out, &j)?;
                    writeln!(out)?;
                } else {
                    print_declaration(&mut out, &j)?;
                }
            }
            many => {
                eprintln!(
                    "error: `{name}` names {} declarations; give more of the name:",
                    many.len()
                );
                for id in many.iter().take(20) {
                    eprintln!("  {}", library.declaration(*id).name);
                }
                return Ok(ExitCode::from(super::EXIT_NOT_FOUND));
            }
        }
        out.flush()?;
        return Ok(ExitCode::SUCCESS);
    }
    print_summary(&mut out, &generation, &library, args.json)?;
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}

fn print_declaration(out: &mut impl Write, j: &DeclarationJson) -> std::io::Result<()> {
    writeln!(out, "{} ({})", j.name, j.kind)?;
    writeln!(
        out,
        "  at {}:{}:{}  module {}",
        j.file, j.line, j.column, j.module
    )?;
    writeln!(out, "  statement: {}", j.statement)?;
    if !j.attributes.is_empty() {
        writeln!(out, "  attributes: {}", j.attributes.join(", "))?;
    }
    let list = |out: &mut dyn Write, title: &str, v: &[&str]| -> std::io::Result<()> {
        writeln!(out, "  {title} ({}):", v.len())?;
        for n in v {
            writeln!(out, "    {n}")?;
        }
        Ok(())
    };
    list(out, "premises its proof uses", &j.proof_premises)?;
    list(out, "statement refers to", &j.statement_references)?;
    list(
        out,
        "used by the proofs of",
        j.dependents.as_deref().unwrap_or(&[]),
    )?;
    let r = j.references;
    if r.unresolved + r.ambiguous + r.dot_on_local > 0 {
        writeln!(
            out,
            "  references without an edge: {} unresolved, {} ambiguous, {} dot notation on a local: {}",
            r.unresolved,
            r.ambiguous,
            r.dot_on_local,
            j.unresolved_names.join(" ")
        )?;
    }
    Ok(())
}

#[derive(Serialize)]
struct FileProblems<'a> {
    path: &'a str,
    diagnostics: &'a [quarry::library::Diagnostic],
}

#[derive(Serialize)]
struct Summary<'a> {
    index: String,
    build_id: &'a str,
    created: &'a str,
    quarry_version: &'a str,
    format_version: u32,
    counts: &'a store::Counts,
    settings: &'a std::collections::BTreeMap<String, serde_json::Value>,
    files_with_problems: Vec<FileProblems<'a>>,
}

fn print_summary(
    out: &mut impl Write,
    generation: &store::Generation,
    library: &Library,
    json: bool,
) -> anyhow::Result<()> {
    let m = &generation.manifest;
    let problems: Vec<FileProblems> = library
        .files
        .iter()
        .filter(|f| !f.diagnostics.is_empty())
        .map(|f| FileProblems {
            path: &f.path,
            diagnostics: &f.diagnostics,
        })
        .collect();
    if json {
        let s = Summary {
            index: generation.dir.display().to_string(),
            build_id: &m.build_id,
            created: &m.created,
            quarry_version: &m.quarry_version,
            format_version: m.format_version,
            counts: &m.counts,
            settings: &m.settings,
            files_with_problems: problems,
        };
        serde_json::to_writer_pretty(&mut *out, &s)?;
        writeln!(out)?;
        return Ok(());
    }
    let c = &m.counts;
    writeln!(out, "index {}", generation.dir.display())?;
    writeln!(
        out,
        "  build {} created {} by quarry {} (format {})",
        m.build_id, m.created, m.quarry_version, m.format_version
    )?;
    writeln!(
        out,
        "  files {} ({} skipped, {} with warnings), modules {}",
        c.files, c.files_with_errors, c.files_with_warnings, c.modules
    )?;
    writeln!(out, "  declarations {}", c.declarations)?;
    for (kind, n) in &c.declarations_by_kind {
        if *n > 0 {
            writeln!(out, "    {kind:<12} {n}")?;
        }
    }
    writeln!(
        out,
        "  edges: {} proof, {} statement",
        c.proof_edges, c.statement_edges
    )?;
    writeln!(
        out,
        "  references: {} resolved, {} unresolved, {} ambiguous, {} dot notation on a local",
        c.references_resolved,
        c.references_unresolved,
        c.references_ambiguous,
        c.references_dot_on_local
    )?;
    print_learning(out, &m.settings)?;
    for p in problems.iter().take(20) {
        for d in p.diagnostics {
            writeln!(out, "  {}:{}: {}", p.path, d.line, d.message)?;
        }
    }
    Ok(())
}

/// The transformer encoder of the index: the model's identity and the embedding figures.
fn print_transformer(out: &mut impl Write, d: &serde_json::Value) -> anyhow::Result<()> {
    let m = &d["model"];
    writeln!(
        out,
        "  dense signal: transformer encoder `{}` ({}, {} layers), {} dimensions, {} pooling{}, \
         max {} tokens, {} vector index",
        m["name"].as_str().unwrap_or("?"),
        m["architecture"].as_str().unwrap_or("?"),
        m["layers"],
        m["dim"],
        m["pooling"].as_str().unwrap_or("?"),
        if m["normalize"] == true {
            ", normalised"
        } else {
            ""
        },
        m["max_seq_length"],
        d["vector_index"].as_str().unwrap_or("?")
    )?;
    writeln!(
        out,
        "    model fingerprint {}",
        m["fingerprint"].as_str().unwrap_or("?")
    )?;
    if let Some(files) = m["files"].as_object() {
        for (name, f) in files {
            writeln!(
                out,
                "    {name}: {} bytes, blake3 {}",
                f["bytes"],
                f["blake3"].as_str().unwrap_or("?")
            )?;
        }
    }
    writeln!(
        out,
        "    embedded {} declarations in batches of {}: {} texts re-used, {} computed in {:.2} s \
         (cache: {})",
        d["statements"],
        d["batch_size"],
        d["reused"],
        d["computed"],
        d["encode_seconds"].as_f64().unwrap_or(0.0),
        d["cache"].as_str().unwrap_or("?")
    )?;
    Ok(())
}

/// The learned parts of the index: what was learned from, the encoder and its training
/// figures, and the fusion weights with how they were chosen.
fn print_learning(
    out: &mut impl Write,
    settings: &std::collections::BTreeMap<String, serde_json::Value>,
) -> anyhow::Result<()> {
    use serde_json::Value;
    let num = |v: &Value| v.as_f64().map_or("?".to_string(), |x| format!("{x:.3}"));
    let list = |v: Option<&Value>| {
        v.and_then(Value::as_array)
            .map(|a| a.iter().map(num).collect::<Vec<_>>().join(", "))
            .unwrap_or_default()
    };
    if let Some(t) = settings.get("training") {
        writeln!(
            out,
            "  learned from {}: {} training theorems, {} held out for validation",
            t["learned_from"].as_str().unwrap_or("?"),
            t["training_theorems"],
            t["validation_theorems"]
        )?;
    }
    if let Some(d) = settings.get("dense") {
        if d["mode"] == "off" {
            writeln!(out, "  dense signal: off")?;
        } else if d["mode"] == "transformer" {
            print_transformer(out, d)?;
        } else {
            writeln!(
                out,
                "  dense signal: learned encoder ({}), {} buckets x {} dimensions, {} vector index",
                d["encoder"].as_str().unwrap_or("?"),
                d["buckets"],
                d["dim"],
                d["vector_index"].as_str().unwrap_or("?")
            )?;
            writeln!(
                out,
                "    trained on {} pairs of {} goals ({} hard negatives) in {} s",
                d["pairs"],
                d["goals"],
                d["hard_negatives"],
                num(&d["train_seconds"])
            )?;
            writeln!(out, "    loss per epoch: {}", list(d.get("epoch_loss")))?;
            writeln!(
                out,
                "    validation recall@10 ({} goals), before and after each epoch: {}",
                d["validation_goals"],
                list(d.get("validation_recall"))
            )?;
        }
    }
    if let Some(f) = settings.get("fusion") {
        let weights: Vec<String> = f["weights"]["weights"]
            .as_array()
            .map(|a| {
                a.iter()
                    .map(|p| format!("{}={}", p[0].as_str().unwrap_or("?"), num(&p[1])))
                    .collect()
            })
            .unwrap_or_default();
        let shown = if weights.is_empty() {
            "every signal 1".to_string()
        } else {
            weights.join(", ")
        };
        writeln!(
            out,
            "  fusion: reciprocal rank fusion, k = {}, weights {} ({})",
            num(&f["weights"]["k"]),
            shown,
            f["chosen"].as_str().unwrap_or("?")
        )?;
        if let Some(t) = f.get("tuning") {
            let per: Vec<String> = t["signal_recall"]
                .as_array()
                .map(|a| {
                    a.iter()
                        .map(|p| format!("{} {}", p[0].as_str().unwrap_or("?"), num(&p[1])))
                        .collect()
                })
                .unwrap_or_default();
            writeln!(
                out,
                "    validation recall@10 on {} queries: {}; fused {}",
                t["queries"],
                per.join(", "),
                num(&t["fused_recall"])
            )?;
            if let Some(a) = t["signal_recall_100"].as_array() {
                let per: Vec<String> = a
                    .iter()
                    .map(|p| format!("{} {}", p[0].as_str().unwrap_or("?"), num(&p[1])))
                    .collect();
                writeln!(
                    out,
                    "    validation recall@100: {}; fused {}",
                    per.join(", "),
                    num(&t["fused_recall_100"])
                )?;
            }
            if t["fell_back"] == true {
                writeln!(
                    out,
                    "    no weighting beat the best single signal: the fusion reproduces it"
                )?;
            }
        }
    }
    Ok(())
}
