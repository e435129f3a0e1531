//! `quarry serve`: run the HTTP query server on an index folder (or on the demo library).
//!
//! Takes the command line; gives a running server (see `quarry::server`) and, on stdout, the
//! address and a ready-to-paste `curl` request. With no index folder it serves the bundled
//! demo library (`index_fixtures/`), building its index into a cache folder the first time
//! and again whenever the demo sources change. It holds no server logic of its own.

use std::collections::BTreeMap;
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Duration;

use anyhow::Context;
use clap::Args;
use quarry::extract::{build_library, BuildOptions};
use quarry::library::store;
use quarry::server::auth::BearerToken;
use quarry::server::listen::ConnectionLimits;
use quarry::server::routes::Limits;
use quarry::server::{serve, ServeEvent, ServerConfig, DEFAULT_LISTEN};

/// Arguments of `quarry serve`.
#[derive(Args, Debug)]
pub struct ServeArgs {
    /// The index folder written by `quarry build` (default: the bundled demo library).
    #[arg(value_name = "INDEX_DIR")]
    index: Option<PathBuf>,
    /// Address to listen on: `HOST:PORT`, `[::1]:PORT` or `:PORT` (loopback); port 0 picks a
    /// free port and prints it.
    #[arg(long, default_value = DEFAULT_LISTEN, value_name = "ADDR", value_parser = parse_listen)]
    listen: SocketAddr,
    /// A file holding the bearer token every request must carry (required to listen on a
    /// non-loopback address). The token is never accepted on the command line.
    #[arg(long, value_name = "FILE")]
    token_file: Option<PathBuf>,
    /// Listen on a non-loopback address without a token: anyone who can reach it may query.
    #[arg(long)]
    insecure_no_auth: bool,
    /// Allow browser requests from this origin (`https://editor.example`); repeatable.
    /// Without it no CORS headers are sent.
    #[arg(long = "cors-origin", value_name = "ORIGIN")]
    cors_origins: Vec<String>,
    /// Largest request body accepted (`1MiB`, `512KiB`, `65536`).
    #[arg(long, default_value = "1MiB", value_name = "SIZE", value_parser = parse_size)]
    max_body: usize,
    /// Longest a request may take before it is answered 504 (`5s`, `500ms`).
    #[arg(long, default_value = "5s", value_name = "DURATION", value_parser = parse_duration)]
    request_timeout: Duration,
    /// Longest a request body may take to arrive in full (`5s`); a slower sender is answered
    /// 408 `body_timeout`. It counts within --request-timeout.
    #[arg(long, default_value = "5s", value_name = "DURATION", value_parser = parse_duration)]
    body_timeout: Duration,
    /// Longest a client may take to send a whole request head (`10s`); a slower client, or
    /// a keep-alive connection idle that long, is disconnected.
    #[arg(long, default_value = "10s", value_name = "DURATION", value_parser = parse_duration)]
    header_timeout: Duration,
    /// Connections open at once; more are closed as soon as they are accepted.
    #[arg(long, default_value_t = 1024, value_name = "N")]
    max_connections: usize,
    /// Rankings computed at once (default: one per core).
    #[arg(long, value_name = "N")]
    workers: Option<usize>,
    /// Requests admitted at once, running or waiting; more are answered 503.
    #[arg(long, default_value_t = 256, value_name = "N")]
    max_pending: usize,
    /// Do not watch the index folder for new builds (SIGHUP still reloads).
    #[arg(long)]
    no_watch: bool,
    /// No access log on stderr.
    #[arg(long, short)]
    quiet: bool,
}

/// Parses `HOST:PORT`, `[V6]:PORT`, `localhost:PORT` or `:PORT` (loopback).
fn parse_listen(text: &str) -> Result<SocketAddr, String> {
    let spelled = if let Some(port) = text.strip_prefix(':') {
        format!("127.0.0.1:{port}")
    } else if let Some(port) = text.strip_prefix("localhost:") {
        format!("127.0.0.1:{port}")
    } else {
        text.to_string()
    };
    spelled
        .parse()
        .map_err(|_| format!("`{text}` is not an address like 127.0.0.1:7341, [::1]:7341 or :0"))
}

/// Parses a byte size: a number with an optional `B`, `KiB`, `MiB` or `GiB`.
fn parse_size(text: &str) -> Result<usize, String> {
    let t = text.trim();
    let split = t.find(|c: char| !c.is_ascii_digit()).unwrap_or(t.len());
    let (digits, unit) = t.split_at(split);
    let n: usize = digits
        .parse()
        .map_err(|_| format!("`{text}` is not a size like 1MiB, 512KiB or 65536"))?;
    let factor: usize = match unit.trim() {
        "" | "B" => 1,
        "KiB" => 1 << 10,
        "MiB" => 1 << 20,
        "GiB" => 1 << 30,
        other => {
            return Err(format!(
                "unknown size unit `{other}` (use B, KiB, MiB or GiB)"
            ))
        }
    };
    let size = n
        .checked_mul(factor)
        .ok_or_else(|| format!("`{text}` is too large"))?;
    if size == 0 {
        return Err("the size must be at least 1 byte".to_string());
    }
    Ok(size)
}

fn parse_duration(text: &str) -> Result<Duration, String> {
    let d = humantime::parse_duration(text).map_err(|e| format!("`{text}`: {e}"))?;
    if d.is_zero() {
        return Err("the time limit must be more than zero".to_string());
    }
    Ok(d)
}

/// Where the demo library's index is cached: `$XDG_CACHE_HOME/quarry/demo-index`, else
/// `~/.cache/quarry/demo-index`, else `target/demo-index` beside the crate.
fn demo_cache_candidates() -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Some(xdg) = std::env::var_os("XDG_CACHE_HOME").map(PathBuf::from) {
        if xdg.is_absolute() {
            out.push(xdg.join("quarry").join("demo-index"));
        }
    }
    if let Some(home) = std::env::var_os("HOME").map(PathBuf::from) {
        if home.is_absolute() {
            out.push(home.join(".cache").join("quarry").join("demo-index"));
        }
    }
    out.push(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("target")
            .join("demo-index"),
    );
    out
}

/// The demo library's index, built (or rebuilt, when the demo sources changed) on demand.
fn demo_index() -> anyhow::Result<PathBuf> {
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let library = build_library(&BuildOptions {
        roots: vec![fixtures.clone()],
        coq_prefixes: Vec::new(),
        threads: None,
        progress: false,
    })
    .with_context(|| format!("cannot read the demo library `{}`", fixtures.display()))?;
    let wanted: Vec<(&str, &str)> = library
        .files
        .iter()
        .map(|f| (f.path.as_str(), f.content_hash.as_str()))
        .collect();
    let mut last_error = None;
    for dir in demo_cache_candidates() {
        if let Ok(generation) = store::open_generation(&dir) {
            let cached: Vec<(&str, &str)> = generation
                .manifest
                .files
                .iter()
                .map(|f| (f.path.as_str(), f.blake3.as_str()))
                .collect();
            if cached == wanted {
                return Ok(dir);
            }
        }
        let mut settings = BTreeMap::new();
        settings.insert(
            "roots".to_string(),
            serde_json::json!(library.roots.clone()),
        );
        settings.insert("demo".to_string(), serde_json::json!(true));
        match quarry::index::build_index(&dir, &library, settings) {
            Ok(_) => {
                eprintln!(
                    "quarry: built the demo index in {}",
                    super::display_path(&dir)
                );
                return Ok(dir);
            }
            Err(e) => last_error = Some(format!("{}: {e}", dir.display())),
        }
    }
    anyhow::bail!(
        "cannot write the demo index anywhere ({})",
        last_error.unwrap_or_default()
    )
}

/// Warns when the token file can be read by users other than its owner.
fn warn_if_others_can_read(path: &Path) {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        if let Ok(meta) = std::fs::metadata(path) {
            if meta.permissions().mode() & 0o077 != 0 {
                eprintln!(
                    "quarry: warning: the token file `{}` can be read by other users; \
                     `chmod 600` it",
                    path.display()
                );
            }
        }
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Quotes `text` for a POSIX shell.
fn shell_quote(text: &str) -> String {
    format!("'{}'", text.replace('\'', r"'\''"))
}

/// The `curl` line printed at start-up.
fn curl_example(addr: SocketAddr, goal: &str, token_file: Option<&Path>) -> String {
    let body = serde_json::json!({ "goal": goal, "limit": 5 }).to_string();
    let auth = match token_file {
        Some(f) => format!(
            " -H \"Authorization: Bearer $(cat {})\"",
            shell_quote(&f.display().to_string())
        ),
        None => String::new(),
    };
    format!(
        "curl -s http://{addr}/v1/rank -H 'Content-Type: application/json'{auth} -d {}",
        shell_quote(&body)
    )
}

/// Runs `quarry serve`.
pub fn run(args: ServeArgs) -> anyhow::Result<ExitCode> {
    let token = match &args.token_file {
        Some(path) => {
            warn_if_others_can_read(path);
            Some(BearerToken::from_file(path)?)
        }
        None => None,
    };
    let index_dir = match &args.index {
        Some(dir) => dir.clone(),
        None => demo_index()?,
    };
    let defaults = Limits::default();
    let config = ServerConfig {
        index_dir: index_dir.clone(),
        listen: args.listen,
        limits: Limits {
            max_body_bytes: args.max_body,
            request_timeout: args.request_timeout,
            body_timeout: args.body_timeout,
            workers: args.workers.unwrap_or(defaults.workers).max(1),
            max_pending: args.max_pending.max(1),
        },
        connections: ConnectionLimits {
            header_read_timeout: args.header_timeout,
            max_connections: args.max_connections.max(1),
        },
        token,
        allow_no_auth: args.insecure_no_auth,
        cors_origins: args.cors_origins.clone(),
        watch: !args.no_watch,
        log_requests: !args.quiet,
    };
    let token_file = args.token_file.clone();
    let shown_dir = super::display_path(&index_dir);
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .thread_name("quarry-http")
        .build()
        .context("cannot start the async runtime")?;
    runtime.block_on(serve(config, move |event| match event {
        ServeEvent::Listening(addr) => {
            println!("quarry: listening on http://{addr} (loading {shown_dir})");
        }
        ServeEvent::Ready {
            addr,
            build_id,
            declarations,
            example_goal,
        } => {
            println!(
                "quarry: ready on http://{addr} (index {build_id}, {declarations} declarations)"
            );
            let goal = example_goal.unwrap_or_else(|| "n + 0 = n".to_string());
            println!(
                "try:\n  {}",
                curl_example(addr, &goal, token_file.as_deref())
            );
        }
        ServeEvent::WatchUnavailable(why) => {
            eprintln!("quarry: not watching the index folder ({why}); send SIGHUP to reload");
        }
        ServeEvent::ShuttingDown => {
            eprintln!("quarry: shutting down after the requests in flight");
        }
    }))?;
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn listen_addresses_default_to_loopback_when_no_host_is_given() {
        assert_eq!(parse_listen(":0").unwrap().to_string(), "127.0.0.1:0");
        assert_eq!(
            parse_listen("localhost:7341").unwrap().to_string(),
            "127.0.0.1:7341"
        );
        assert_eq!(parse_listen("[::1]:80").unwrap().to_string(), "[::1]:80");
        assert!(parse_listen("0.0.0.0:8080").unwrap().ip().is_unspecified());
        assert!(parse_listen("nowhere").is_err());
    }

    #[test]
    fn sizes_take_binary_units() {
        assert_eq!(parse_size("1MiB").unwrap(), 1_048_576);
        assert_eq!(parse_size("512KiB").unwrap(), 524_288);
        assert_eq!(parse_size("65536").unwrap(), 65_536);
        assert!(parse_size("1MB").is_err());
        assert!(parse_size("0").is_err());
        assert!(parse_size("99999999999999999999GiB").is_err());
    }

    #[test]
    fn the_curl_example_survives_quotes_in_the_goal() {
        let goal = "pick (push t q) = Some (t, q')";
        let line = curl_example("127.0.0.1:7341".parse().unwrap(), goal, None);
        assert!(line.starts_with("curl -s http://127.0.0.1:7341/v1/rank"));
        // The POSIX shell reads the quoted body back as it was (common practice: sh -c).
        let (_, body_arg) = line.rsplit_once(" -d ").unwrap();
        let out = std::process::Command::new("sh")
            .arg("-c")
            .arg(format!("printf %s {body_arg}"))
            .output()
            .unwrap();
        let body: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        assert_eq!(body["goal"], goal);
        assert_eq!(body["limit"], 5);
    }
}
