//! `quarry ask`: rank premises for a goal given as an argument or on stdin.

use std::io::{IsTerminal, Read, Write};
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context;
use clap::Args;
use quarry::index::OpenIndex;
use quarry::library::DeclKind;
use quarry::retrieve::accessible::{module_by_name, place_of_file, QueryPlace};
use quarry::retrieve::{rank, PremiseRanking, RankError, RankRequest, Signal};
use serde::Serialize;

/// Exit code when the goal cannot be ranked (empty, too large, nothing to search for).
pub const EXIT_BAD_GOAL: u8 = 3;

/// Arguments of `quarry ask`.
#[derive(Args, Debug)]
pub struct AskArgs {
    /// The index folder written by `quarry build` (not given with --server), then the goal:
    /// an editor's goal display, a statement, or a declaration header. A goal of `-` or
    /// none reads it from standard input.
    #[arg(value_name = "INDEX_DIR GOAL", num_args = 0..=2)]
    positional: Vec<String>,
    /// Ask a running `quarry serve` at this URL (`http://127.0.0.1:7341`) instead of
    /// opening an index.
    #[arg(long, value_name = "URL")]
    server: Option<String>,
    /// With --server: a file holding the server's bearer token.
    #[arg(long, value_name = "PATH", requires = "server")]
    token_file: Option<PathBuf>,
    /// How many premises to show (1 to 200).
    #[arg(long, default_value_t = quarry::retrieve::DEFAULT_LIMIT)]
    limit: usize,
    /// Print JSON instead of a table.
    #[arg(long)]
    json: bool,
    /// Only premises accessible from this module (its transitive imports and itself).
    #[arg(long, value_name = "MODULE", conflicts_with = "file")]
    module: Option<String>,
    /// Only premises accessible from this source file (its path as indexed, or an ending).
    #[arg(long, value_name = "PATH")]
    file: Option<String>,
    /// With --module or --file: the cursor's line; only earlier declarations of that file
    /// answer, and never the one being proved.
    #[arg(long)]
    line: Option<u32>,
    /// Only these kinds (comma separated: theorem, definition, instance, structure,
    /// inductive, constructor, field, axiom, notation).
    #[arg(long, value_delimiter = ',', value_parser = parse_kind)]
    kinds: Option<Vec<DeclKind>>,
    /// Only theorems (shorthand for --kinds theorem).
    #[arg(long, conflicts_with = "kinds")]
    theorems: bool,
    /// Which signals to use (comma separated).
    #[arg(long, value_delimiter = ',', value_parser = parse_signal)]
    signals: Option<Vec<Signal>>,
    /// Rank for every goal of a multi-goal display, not only the first.
    #[arg(long)]
    all_goals: bool,
    /// Show why each premise was ranked: per-signal ranks and matched terms.
    #[arg(long)]
    explain: bool,
    /// Show the goal as parsed and the tokens searched for, then rank.
    #[arg(long)]
    show_tokens: bool,
}

fn parse_kind(s: &str) -> Result<DeclKind, String> {
    DeclKind::parse(s.trim()).ok_or_else(|| {
        format!(
            "unknown kind `{s}`; kinds are {}",
            DeclKind::ALL.map(|k| k.as_str()).join(", ")
        )
    })
}

fn parse_signal(s: &str) -> Result<Signal, String> {
    Signal::parse(s.trim()).ok_or_else(|| {
        format!(
            "unknown signal `{s}`; signals are {}",
            Signal::ALL.map(|k| k.as_str()).join(", ")
        )
    })
}

/// Reads the goal from the argument or, for `-` or none, from stdin.
fn read_goal(arg: Option<&str>) -> anyhow::Result<String> {
    match arg {
        Some(g) if g != "-" => Ok(g.to_string()),
        _ => {
            let mut text = String::new();
            // Read at most a little past the goal size limit: the parser refuses the rest.
            std::io::stdin()
                .take((quarry::query::DEFAULT_MAX_GOAL_BYTES + 1) as u64)
                .read_to_string(&mut text)
                .context("cannot read the goal from standard input (is it UTF-8?)")?;
            Ok(text)
        }
    }
}

#[derive(Serialize)]
struct PremiseJson<'a> {
    rank: usize,
    name: &'a str,
    kind: &'a str,
    statement: &'a str,
    module: &'a str,
    path: String,
    line: u32,
    score: f32,
    signals: &'a [quarry::retrieve::SignalEvidence],
    #[serde(skip_serializing_if = "Option::is_none")]
    matched_terms: Option<&'a [String]>,
}

#[derive(Serialize)]
struct HypothesisJson<'a> {
    names: &'a [String],
    #[serde(rename = "type")]
    ty: &'a str,
}

#[derive(Serialize)]
struct GoalJson<'a> {
    case: Option<&'a str>,
    hypotheses: Vec<HypothesisJson<'a>>,
    conclusion: &'a str,
}

#[derive(Serialize)]
struct ParsedJson<'a> {
    format: &'a str,
    goals: Vec<GoalJson<'a>>,
}

#[derive(Serialize)]
struct AnswerJson<'a> {
    goal: ParsedJson<'a>,
    terms: Vec<(&'a str, f32)>,
    candidates: usize,
    elapsed_ms: f64,
    build_id: &'a str,
    premises: Vec<PremiseJson<'a>>,
}

fn absolute_path(index: &OpenIndex, id: quarry::library::DeclId) -> String {
    let lib = &index.library;
    let f = lib.file(lib.declaration(id).file);
    match lib.roots.get(f.root as usize) {
        Some(root) => format!("{root}/{}", f.path),
        None => f.path.clone(),
    }
}

/// Runs `quarry ask`.
pub fn run(args: AskArgs) -> anyhow::Result<ExitCode> {
    if let Some(url) = args.server.clone() {
        if args.positional.len() > 1 {
            anyhow::bail!("with --server, give only the goal (the server has its index)");
        }
        let goal = read_goal(args.positional.first().map(String::as_str))?;
        return run_remote(&url, &args, goal);
    }
    let Some(index_dir) = args.positional.first().map(PathBuf::from) else {
        anyhow::bail!("give the index folder (or --server URL) and the goal");
    };
    let goal = read_goal(args.positional.get(1).map(String::as_str))?;
    let index = OpenIndex::open(&index_dir)
        .with_context(|| format!("cannot open the index `{}`", index_dir.display()))?;
    let place = match (&args.module, &args.file) {
        (Some(m), _) => Some(QueryPlace {
            module: module_by_name(&index.library, m)?,
            line: args.line,
        }),
        (None, Some(f)) => Some(place_of_file(&index.library, f, args.line)?),
        (None, None) if args.line.is_some() => {
            anyhow::bail!("--line needs --module or --file to say which file it is in")
        }
        (None, None) => None,
    };
    let kinds = if args.theorems {
        Some(vec![DeclKind::Theorem])
    } else {
        args.kinds.clone()
    };
    let request = RankRequest {
        goal,
        limit: args.limit,
        place,
        kinds,
        signals: args.signals.clone(),
        all_goals: args.all_goals,
        explain: args.explain || args.json,
    };
    let ranking = match rank(&index, &request) {
        Ok(r) => r,
        Err(e) if e.is_user_error() => {
            eprintln!("error: {e}");
            return Ok(ExitCode::from(match e {
                RankError::Limit(_) | RankError::NoSignals => 2,
                _ => EXIT_BAD_GOAL,
            }));
        }
        Err(e) => return Err(e).context("ranking failed"),
    };
    let stdout = std::io::stdout();
    let terminal = stdout.is_terminal();
    let mut out = std::io::BufWriter::new(stdout.lock());
    if args.json {
        print_json(&mut out, &index, &ranking)?;
    } else {
        let style = Style {
            colour: terminal && std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty()),
            links: terminal,
        };
        if args.show_tokens {
            print_tokens(&mut out, &ranking, args.all_goals)?;
        }
        print_table(&mut out, &index, &ranking, &style, args.explain)?;
    }
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}

/// Sends the request to a running server and prints its answer.
fn run_remote(url: &str, args: &AskArgs, goal: String) -> anyhow::Result<ExitCode> {
    let token = match &args.token_file {
        Some(path) => Some(super::remote::token_from_file(path)?),
        None => None,
    };
    let kinds: Option<Vec<&str>> = if args.theorems {
        Some(vec!["theorem"])
    } else {
        args.kinds
            .as_ref()
            .map(|k| k.iter().map(|k| k.as_str()).collect())
    };
    let mut body = serde_json::json!({
        "goal": goal,
        "limit": args.limit,
        "explain": args.explain,
        "all_goals": args.all_goals,
    });
    let fields = [
        ("file", args.file.clone().map(serde_json::Value::from)),
        ("module", args.module.clone().map(serde_json::Value::from)),
        ("line", args.line.map(serde_json::Value::from)),
        ("kinds", kinds.map(|k| serde_json::json!(k))),
        (
            "signals",
            args.signals
                .as_ref()
                .map(|s| serde_json::json!(s.iter().map(|s| s.as_str()).collect::<Vec<_>>())),
        ),
    ];
    for (name, value) in fields {
        if let Some(v) = value {
            body[name] = v;
        }
    }
    let answer = match super::remote::ask_remote(url, &body, token.as_deref()) {
        Ok(a) => a,
        Err(super::remote::RemoteError::Refused { code, message, .. }) => {
            eprintln!("error: the server refused the request ({code}): {message}");
            let exit = if code.starts_with("goal_") || code == "no_goals" {
                EXIT_BAD_GOAL
            } else if code == "unknown_declaration" {
                super::EXIT_NOT_FOUND
            } else {
                super::EXIT_FAILURE
            };
            return Ok(ExitCode::from(exit));
        }
        Err(e) => return Err(e.into()),
    };
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::new(stdout.lock());
    if args.json {
        serde_json::to_writer_pretty(&mut out, &answer)?;
        writeln!(out)?;
    } else {
        print_remote_table(&mut out, &answer, args.explain)?;
    }
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}

/// The server's answer as the same table `ask` prints for a local index.
fn print_remote_table(
    out: &mut impl Write,
    answer: &serde_json::Value,
    explain: bool,
) -> std::io::Result<()> {
    let empty = Vec::new();
    let premises = answer["premises"].as_array().unwrap_or(&empty);
    if premises.is_empty() {
        return writeln!(
            out,
            "no premise matched (searched {} declarations)",
            answer["candidates"]
        );
    }
    let text = |v: &serde_json::Value| v.as_str().unwrap_or("").to_string();
    let name_width = premises
        .iter()
        .map(|p| text(&p["name"]).chars().count())
        .max()
        .unwrap_or(10)
        .clamp(10, 48);
    writeln!(
        out,
        "{:>3}  {:<name_width$}  {:<11}  {:<50}  where",
        "#", "premise", "kind", "statement"
    )?;
    for p in premises {
        writeln!(
            out,
            "{:>3}  {:<name_width$}  {:<11}  {:<50}  {}:{}",
            p["rank"].as_u64().unwrap_or(0),
            clip(&text(&p["name"]), name_width),
            text(&p["kind"]),
            clip(&text(&p["statement"]), 50),
            text(&p["file"]),
            p["line"].as_u64().unwrap_or(0)
        )?;
        if explain {
            let words = |key: &str| -> String {
                p[key]
                    .as_array()
                    .map(|a| a.iter().map(text).collect::<Vec<_>>().join(" "))
                    .unwrap_or_default()
            };
            writeln!(
                out,
                "     score {}; matched: {}; voters: {}",
                p["score"],
                words("matched_terms"),
                words("voters")
            )?;
        }
    }
    writeln!(
        out,
        "{} of {} candidate declarations in {:.2} ms (build {})",
        premises.len(),
        answer["candidates"],
        answer["elapsed_ms"].as_f64().unwrap_or(0.0),
        text(&answer["index"]["build_id"])
    )
}

fn print_json(
    out: &mut impl Write,
    index: &OpenIndex,
    ranking: &PremiseRanking,
) -> anyhow::Result<()> {
    let lib = &index.library;
    let premises = ranking
        .premises
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let d = lib.declaration(p.id);
            PremiseJson {
                rank: i + 1,
                name: &d.name,
                kind: d.kind.as_str(),
                statement: &d.statement,
                module: &lib.module(d.module).name,
                path: absolute_path(index, p.id),
                line: d.statement_span.start.line,
                score: p.score,
                signals: &p.evidence,
                matched_terms: Some(&p.matched_terms),
            }
        })
        .collect();
    let answer = AnswerJson {
        goal: ParsedJson {
            format: ranking.goal.format.as_str(),
            goals: ranking
                .goal
                .goals
                .iter()
                .map(|g| GoalJson {
                    case: g.case.as_deref(),
                    hypotheses: g
                        .hypotheses
                        .iter()
                        .map(|h| HypothesisJson {
                            names: &h.names,
                            ty: &h.ty,
                        })
                        .collect(),
                    conclusion: &g.conclusion,
                })
                .collect(),
        },
        terms: ranking
            .terms
            .iter()
            .map(|t| (t.text.as_str(), t.weight))
            .collect(),
        candidates: ranking.candidates,
        elapsed_ms: ranking.elapsed.as_secs_f64() * 1e3,
        build_id: index.build_id(),
        premises,
    };
    serde_json::to_writer_pretty(&mut *out, &answer)?;
    writeln!(out)?;
    Ok(())
}

struct Style {
    colour: bool,
    links: bool,
}

impl Style {
    fn paint(&self, code: &str, text: &str) -> String {
        if self.colour {
            format!("\x1b[{code}m{text}\x1b[0m")
        } else {
            text.to_string()
        }
    }

    /// An OSC 8 hyperlink to `path` at `line`, for terminals that support it.
    fn link(&self, path: &str, line: u32, text: &str) -> String {
        if self.links {
            format!("\x1b]8;;file://{path}#L{line}\x1b\\{text}\x1b]8;;\x1b\\")
        } else {
            text.to_string()
        }
    }
}

/// Shortens `text` to at most `width` characters, marking the cut with `…`.
fn clip(text: &str, width: usize) -> String {
    if text.chars().count() <= width {
        return text.to_string();
    }
    let mut s: String = text.chars().take(width.saturating_sub(1)).collect();
    s.push('…');
    s
}

fn print_tokens(out: &mut impl Write, ranking: &PremiseRanking, all: bool) -> std::io::Result<()> {
    let g = &ranking.goal;
    writeln!(out, "goal read as {}:", g.format.as_str())?;
    let shown = if all {
        g.goals.len()
    } else {
        g.goals.len().min(1)
    };
    for goal in g.goals.iter().take(shown) {
        for h in &goal.hypotheses {
            writeln!(out, "  hypothesis {} : {}", h.names.join(" "), h.ty)?;
        }
        writeln!(out, "  conclusion {}", goal.conclusion)?;
    }
    let terms: Vec<String> = ranking
        .terms
        .iter()
        .map(|t| format!("{}×{:.2}", t.text, t.weight))
        .collect();
    writeln!(out, "tokens: {}", terms.join(" "))?;
    writeln!(out)
}

fn print_table(
    out: &mut impl Write,
    index: &OpenIndex,
    ranking: &PremiseRanking,
    style: &Style,
    explain: bool,
) -> std::io::Result<()> {
    let lib = &index.library;
    if ranking.premises.is_empty() {
        writeln!(
            out,
            "no premise matched (searched {} declarations)",
            ranking.candidates
        )?;
        return Ok(());
    }
    let name_width = ranking
        .premises
        .iter()
        .map(|p| lib.declaration(p.id).name.chars().count())
        .max()
        .unwrap_or(10)
        .clamp(10, 48);
    writeln!(
        out,
        "{}",
        style.paint(
            "1",
            &format!(
                "{:>3}  {:<name_width$}  {:<11}  {:<50}  where",
                "#", "premise", "kind", "statement"
            )
        )
    )?;
    for (i, p) in ranking.premises.iter().enumerate() {
        let d = lib.declaration(p.id);
        let f = lib.file(d.file);
        let line = d.statement_span.start.line;
        let place = format!("{}:{}", f.path, line);
        let name = format!("{:<name_width$}", clip(&d.name, name_width));
        writeln!(
            out,
            "{:>3}  {}  {:<11}  {:<50}  {}",
            i + 1,
            style.paint("36", &name),
            d.kind.as_str(),
            clip(&d.statement, 50),
            style.link(&absolute_path(index, p.id), line, &place)
        )?;
        if explain {
            let ranks: Vec<String> = p
                .evidence
                .iter()
                .map(|e| format!("{} #{} ({:.3})", e.signal.as_str(), e.rank, e.score))
                .collect();
            writeln!(
                out,
                "     {}",
                style.paint(
                    "2",
                    &format!(
                        "score {:.4}; {}; matched: {}",
                        p.score,
                        ranks.join(", "),
                        p.matched_terms.join(" ")
                    )
                )
            )?;
            if !p.voters.is_empty() {
                let voters: Vec<&str> = p
                    .voters
                    .iter()
                    .take(5)
                    .map(|v| index.library.declaration(*v).name.as_str())
                    .collect();
                writeln!(
                    out,
                    "     {}",
                    style.paint("2", &format!("voted for by: {}", voters.join(", ")))
                )?;
            }
        }
    }
    writeln!(
        out,
        "{}",
        style.paint(
            "2",
            &format!(
                "{} of {} candidate declarations in {:.2} ms",
                ranking.premises.len(),
                ranking.candidates,
                ranking.elapsed.as_secs_f64() * 1e3
            )
        )
    )
}
