//! The HTTP query server: the same ranking as `quarry ask`, over JSON, for editors and provers.
//!
//! Takes an index folder and a [`ServerConfig`]; gives a running server (axum on tokio)
//! that answers the `/v1` API described in `docs/api.md`, reloads the index when a new build
//! lands in the folder, and shuts down gracefully on SIGINT or SIGTERM, letting requests in
//! flight finish. Safe by default: it binds loopback, refuses any other address without a
//! bearer token (unless told `allow_no_auth`), sends no CORS headers unless origins are
//! listed, and never lets a request name a path on disk.
//!
//! Architecture invariant: `server/` holds no ranking logic; it converts wire types
//! (`wire.rs`, the only JSON shapes clients see) to `retrieve::RankRequest` and back. It is
//! stateless between requests: a request carries everything it needs.

pub mod auth;
pub mod body;
pub mod errors;
pub mod listen;
pub mod metrics;
pub mod reload;
pub mod routes;
pub mod wire;

use std::net::SocketAddr;
use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::sync::Arc;

use axum::http::HeaderValue;
use tokio::net::TcpListener;
use tokio::sync::Notify;

use auth::BearerToken;
use listen::ConnectionLimits;
use reload::{LiveIndex, ReloadOutcome};
use routes::{AppState, Limits};

/// The default listening address: loopback only, on quarry's own port.
pub const DEFAULT_LISTEN: &str = "127.0.0.1:7341";

/// How a server is run.
#[derive(Clone, Debug)]
pub struct ServerConfig {
    /// The index folder (with its `CURRENT` file) to serve and watch.
    pub index_dir: PathBuf,
    /// Where to listen; port 0 picks a free port.
    pub listen: SocketAddr,
    pub limits: Limits,
    /// The header-read timeout and the cap on open connections.
    pub connections: ConnectionLimits,
    /// The bearer token requests must carry; `None`: no authentication.
    pub token: Option<BearerToken>,
    /// Allow listening on a non-loopback address without a token.
    pub allow_no_auth: bool,
    /// Origins allowed by CORS (`https://editor.example`); empty: CORS off.
    pub cors_origins: Vec<String>,
    /// Watch the index folder for new builds (SIGHUP reloads in any case).
    pub watch: bool,
    /// One access-log line per request on stderr (path, status, time; never headers).
    pub log_requests: bool,
}

/// Why a server could not start or stopped with an error.
#[derive(Debug, thiserror::Error)]
pub enum ServerError {
    #[error(
        "refusing to listen on {0} without authentication: give --token-file FILE \
         (or --insecure-no-auth to accept anyone who can reach this address)"
    )]
    NeedsToken(SocketAddr),
    #[error("cannot listen on {addr}: {source}")]
    Bind {
        addr: SocketAddr,
        #[source]
        source: std::io::Error,
    },
    #[error("--cors-origin `{0}` is not an origin like `https://editor.example` or `http://localhost:8080`")]
    BadOrigin(String),
    #[error("cannot load the index `{dir}`: {why}")]
    Load { dir: PathBuf, why: String },
    #[error("cannot install the signal handlers: {0}")]
    Signals(#[source] std::io::Error),
    #[error("the server stopped: {0}")]
    Serve(#[source] std::io::Error),
}

/// What a running server reports to whoever started it (the CLI prints these).
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ServeEvent {
    /// The socket is bound (the real port, when 0 was asked for).
    Listening(SocketAddr),
    /// The index is loaded and requests are answered.
    Ready {
        addr: SocketAddr,
        build_id: String,
        declarations: u64,
        /// A goal taken from the index itself, for a ready-to-paste example request.
        example_goal: Option<String>,
    },
    /// The folder watcher could not start; reloads need SIGHUP.
    WatchUnavailable(String),
    /// A shutdown signal arrived; requests in flight are being finished.
    ShuttingDown,
}

/// Checks an origin given for CORS: `scheme://host[:port]`, nothing after.
fn parse_origin(origin: &str) -> Result<HeaderValue, ServerError> {
    let bad = || ServerError::BadOrigin(origin.to_string());
    let rest = origin
        .strip_prefix("http://")
        .or_else(|| origin.strip_prefix("https://"))
        .ok_or_else(bad)?;
    if rest.is_empty() || rest.contains(['/', '?', '#', ' ', '*']) {
        return Err(bad());
    }
    HeaderValue::from_str(origin).map_err(|_| bad())
}

/// The conclusion of the first theorem with one, for the start-up example.
fn example_goal(live: &LiveIndex) -> Option<String> {
    let loaded = live.current()?;
    loaded
        .index
        .library
        .declarations
        .iter()
        .filter(|d| d.kind == crate::library::DeclKind::Theorem)
        .find_map(|d| d.conclusion.clone().filter(|c| !c.trim().is_empty()))
}

/// Resolves on SIGINT or SIGTERM (`true`) or on `stop` (`false`). The handlers are
/// installed when this is called, so a signal that arrives before the future is first
/// polled is not lost.
fn shutdown_signal(
    stop: Arc<Notify>,
) -> std::io::Result<impl std::future::Future<Output = bool> + Send> {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        let mut term = signal(SignalKind::terminate())?;
        let mut int = signal(SignalKind::interrupt())?;
        Ok(async move {
            tokio::select! {
                _ = term.recv() => true,
                _ = int.recv() => true,
                _ = stop.notified() => false,
            }
        })
    }
    #[cfg(not(unix))]
    {
        Ok(async move {
            tokio::select! {
                _ = tokio::signal::ctrl_c() => true,
                _ = stop.notified() => false,
            }
        })
    }
}

/// Runs the server until SIGINT or SIGTERM. Must be called inside a multi-threaded tokio
/// runtime. `events` is told when it listens, when it is ready and when it stops.
pub async fn serve(
    config: ServerConfig,
    events: impl Fn(ServeEvent) + Send + Sync + 'static,
) -> Result<(), ServerError> {
    if !config.listen.ip().is_loopback() && config.token.is_none() && !config.allow_no_auth {
        return Err(ServerError::NeedsToken(config.listen));
    }
    let origins = config
        .cors_origins
        .iter()
        .map(|o| parse_origin(o))
        .collect::<Result<Vec<_>, _>>()?;
    let listener = TcpListener::bind(config.listen)
        .await
        .map_err(|source| ServerError::Bind {
            addr: config.listen,
            source,
        })?;
    let addr = listener.local_addr().map_err(|source| ServerError::Bind {
        addr: config.listen,
        source,
    })?;
    let events = Arc::new(events);
    events(ServeEvent::Listening(addr));

    let live = Arc::new(LiveIndex::new(&config.index_dir, config.log_requests));
    let state = Arc::new(AppState::new(
        live.clone(),
        config.limits.clone(),
        config.token.clone(),
        config.log_requests,
    ));
    let app = routes::router(state.clone(), &origins);
    let stop = Arc::new(Notify::new());
    // The handlers are installed before anything can take long, so a SIGTERM during the
    // first load is a clean stop.
    let signalled = shutdown_signal(stop.clone()).map_err(ServerError::Signals)?;
    let signal_task = {
        let events = events.clone();
        async move {
            if signalled.await {
                events(ServeEvent::ShuttingDown);
            }
        }
    };
    // hyper's own connection loop rather than `axum::serve`, which sets no header-read
    // timeout: a client that never finishes its request head would hold a connection.
    let server = tokio::spawn(listen::serve_connections(
        listener,
        app,
        config.connections.clone(),
        signal_task,
    ));

    match live.reload(true).await {
        ReloadOutcome::Swapped { .. } | ReloadOutcome::Unchanged => {}
        ReloadOutcome::Refused(why) => {
            stop.notify_one();
            let _ = server.await;
            return Err(ServerError::Load {
                dir: config.index_dir.clone(),
                why,
            });
        }
    }
    #[cfg(unix)]
    reload::reload_on_sighup(live.clone()).map_err(ServerError::Signals)?;
    let _watch_guard = if config.watch {
        match reload::watch(live.clone()) {
            Ok(guard) => {
                state.watching.store(true, Ordering::Relaxed);
                Some(guard)
            }
            Err(e) => {
                events(ServeEvent::WatchUnavailable(e.to_string()));
                None
            }
        }
    } else {
        None
    };
    if let Some(loaded) = live.current() {
        events(ServeEvent::Ready {
            addr,
            build_id: loaded.index.generation.manifest.build_id.clone(),
            declarations: loaded.index.generation.manifest.counts.declarations,
            example_goal: example_goal(&live),
        });
    }
    server
        .await
        .map_err(|join| ServerError::Serve(std::io::Error::other(join.to_string())))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn origins_must_be_scheme_host_and_port_only() {
        assert!(parse_origin("https://editor.example").is_ok());
        assert!(parse_origin("http://localhost:8080").is_ok());
        for bad in [
            "*",
            "editor.example",
            "https://",
            "https://a.example/path",
            "ftp://x",
        ] {
            assert!(parse_origin(bad).is_err(), "{bad}");
        }
    }
}
