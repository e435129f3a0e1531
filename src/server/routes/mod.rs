//! The router: endpoints, and the layers every request passes through.
//!
//! Takes the shared [`AppState`]; gives an axum `Router`. Outermost first, a request meets:
//! panic catching (a 500 JSON error, never a dropped connection), the access log and metrics,
//! CORS (only when origins were listed), the bearer-token check (every route but `/healthz`
//! and `/readyz`), then, for `/v1`, admission (at most `max_pending` requests admitted, the
//! rest get 503 at once) and the time limit (504). Handlers live in `rank.rs` (ranking) and
//! `info.rs` (declarations, status, health, metrics). It holds no ranking logic: it calls
//! `retrieve::rank` and converts to the wire types.

mod info;
mod rank;

/// Exposed for the fuzz target and its regression test: the checks a decoded body passes.
pub use rank::rank_request;
#[cfg(test)]
mod tests;

use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant, SystemTime};

use axum::extract::{MatchedPath, Request, State};
use axum::http::{HeaderName, HeaderValue, Method};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::Router;
use tokio::sync::Semaphore;
use tower_http::catch_panic::CatchPanicLayer;
use tower_http::cors::{AllowOrigin, CorsLayer};

use super::auth::BearerToken;
use super::errors::{ApiError, ErrorCode};
use super::metrics::Metrics;
use super::reload::{LiveIndex, Loaded};

/// The limits a server runs with.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Limits {
    /// Largest request body accepted, in bytes.
    pub max_body_bytes: usize,
    /// Longest a `/v1` request may take, from admission to response.
    pub request_timeout: Duration,
    /// Longest a request body may take to arrive in full (a slow sender is answered 408 and
    /// frees its admission slot); it runs inside `request_timeout`.
    pub body_timeout: Duration,
    /// Rankings computed at once (blocking threads in use).
    pub workers: usize,
    /// `/v1` requests admitted at once (running or waiting for a worker); more get 503.
    pub max_pending: usize,
}

impl Default for Limits {
    fn default() -> Limits {
        let cores = std::thread::available_parallelism().map_or(2, |n| n.get());
        Limits {
            max_body_bytes: 1024 * 1024,
            request_timeout: Duration::from_secs(5),
            body_timeout: Duration::from_secs(5),
            workers: cores,
            max_pending: 256,
        }
    }
}

/// Everything the handlers share. The server keeps no per-client state between requests.
pub struct AppState {
    /// The generation being served.
    pub live: Arc<LiveIndex>,
    /// Request counts and latencies.
    pub metrics: Metrics,
    /// The limits the server runs with.
    pub limits: Limits,
    /// The bearer token requests must carry, if any.
    pub token: Option<BearerToken>,
    /// Print one access-log line per request on stderr.
    pub log_requests: bool,
    /// Whether a folder watcher is running (reported by `/v1/status`).
    pub watching: AtomicBool,
    started: SystemTime,
    started_at: Instant,
    in_flight: AtomicU64,
    pending: Arc<Semaphore>,
    workers: Arc<Semaphore>,
}

impl AppState {
    /// State for a server over `live` with these limits and token.
    pub fn new(
        live: Arc<LiveIndex>,
        limits: Limits,
        token: Option<BearerToken>,
        log_requests: bool,
    ) -> AppState {
        AppState {
            live,
            metrics: Metrics::default(),
            pending: Arc::new(Semaphore::new(limits.max_pending.max(1))),
            workers: Arc::new(Semaphore::new(limits.workers.max(1))),
            limits,
            token,
            log_requests,
            watching: AtomicBool::new(false),
            started: SystemTime::now(),
            started_at: Instant::now(),
            in_flight: AtomicU64::new(0),
        }
    }

    /// Seconds since the state was made.
    pub fn uptime(&self) -> Duration {
        self.started_at.elapsed()
    }

    /// The generation to answer with, or 503 `not_ready` before the first load.
    fn loaded(&self) -> Result<Arc<Loaded>, ApiError> {
        self.live.current().ok_or_else(|| {
            ApiError::new(
                ErrorCode::NotReady,
                "the index is still loading; retry in a moment (GET /readyz says when)",
            )
        })
    }
}

/// Shared state as handlers receive it.
pub type Shared = Arc<AppState>;

/// The router with every endpoint and layer. `cors_origins` empty: no CORS headers at all.
pub fn router(state: Shared, cors_origins: &[HeaderValue]) -> Router {
    let v1 = Router::new()
        .route("/v1/rank", post(rank::rank_one))
        .route("/v1/rank/batch", post(rank::rank_batch))
        .route("/v1/declarations/{name}", get(info::declaration))
        .route("/v1/status", get(info::status))
        .route_layer(middleware::from_fn_with_state(state.clone(), admit));
    let guarded = Router::new()
        .merge(v1)
        .route("/metrics", get(info::metrics))
        .route_layer(middleware::from_fn_with_state(state.clone(), authenticate));
    let mut app = Router::new()
        .route("/healthz", get(info::healthz))
        .route("/readyz", get(info::readyz))
        .merge(guarded)
        .fallback(unknown_route)
        .method_not_allowed_fallback(wrong_method)
        .with_state(state.clone());
    if !cors_origins.is_empty() {
        app = app.layer(
            CorsLayer::new()
                .allow_origin(AllowOrigin::list(cors_origins.iter().cloned()))
                .allow_methods([Method::GET, Method::POST])
                .allow_headers([
                    HeaderName::from_static("content-type"),
                    HeaderName::from_static("authorization"),
                ])
                .max_age(Duration::from_secs(600)),
        );
    }
    // Panics are caught inside `observe`, so they are still counted and logged.
    app.layer(CatchPanicLayer::custom(
        |_panic: Box<dyn std::any::Any + Send>| {
            eprintln!("quarry: a request handler panicked; answered 500");
            ApiError::new(
                ErrorCode::Internal,
                "the server met an internal fault answering this request",
            )
            .into_response()
        },
    ))
    .layer(middleware::from_fn_with_state(state, observe))
}

async fn unknown_route(req: Request) -> ApiError {
    ApiError::new(
        ErrorCode::UnknownRoute,
        format!(
            "no endpoint `{} {}`; see GET /v1/status and docs/api.md",
            req.method(),
            req.uri().path()
        ),
    )
}

async fn wrong_method(req: Request) -> ApiError {
    ApiError::new(
        ErrorCode::MethodNotAllowed,
        format!("`{}` does not accept {}", req.uri().path(), req.method()),
    )
}

/// Access log, metrics and the in-flight gauge, around every request.
async fn observe(State(state): State<Shared>, req: Request, next: Next) -> Response {
    let started = Instant::now();
    let method = req.method().clone();
    let route = req
        .extensions()
        .get::<MatchedPath>()
        .map_or("unmatched", |p| p.as_str())
        .to_string();
    // Only the path is logged: never the query, headers (the token) or the body.
    let path = req.uri().path().to_string();
    state.in_flight.fetch_add(1, Ordering::Relaxed);
    let response = next.run(req).await;
    state.in_flight.fetch_sub(1, Ordering::Relaxed);
    let elapsed = started.elapsed();
    let status = response.status().as_u16();
    state
        .metrics
        .observe(&route, method.as_str(), status, elapsed);
    if state.log_requests {
        eprintln!(
            "quarry: {method} {} {status} {:.2}ms",
            path.escape_debug(),
            elapsed.as_secs_f64() * 1000.0
        );
    }
    response
}

/// The bearer-token check, when the server has a token.
async fn authenticate(State(state): State<Shared>, req: Request, next: Next) -> Response {
    if let Some(token) = &state.token {
        if let Err(e) = token.check(req.headers()) {
            return e.into_response();
        }
    }
    next.run(req).await
}

/// Admission (503 when `max_pending` requests are already admitted) and the time limit.
async fn admit(State(state): State<Shared>, req: Request, next: Next) -> Response {
    let Ok(_admitted) = state.pending.clone().try_acquire_owned() else {
        return ApiError::new(
            ErrorCode::Overloaded,
            format!(
                "the server is answering {} requests already; retry shortly",
                state.limits.max_pending
            ),
        )
        .into_response();
    };
    let limit = state.limits.request_timeout;
    let started = Instant::now();
    match tokio::time::timeout(limit, next.run(req)).await {
        // A ranking done on the thread that read the request cannot be interrupted by the
        // timer; one that ended after the limit is answered as the timer would have.
        Ok(response) if started.elapsed() <= limit => response,
        _ => ApiError::new(
            ErrorCode::Timeout,
            format!(
                "the request took longer than the server's limit of {} ms",
                limit.as_millis()
            ),
        )
        .into_response(),
    }
}

/// Runs `work` once a worker is free: on the thread that read the request when `short`,
/// else on a blocking thread.
///
/// Handing a ranking of a few hundred microseconds to a blocking thread and the answer back
/// cost more than the ranking: two thread switches per request. Ranked where it was read,
/// the stdlib load test went from 2,386 to 3,367 requests/s, medians of five runs
/// (docs/performance.md, "HTTP server"). Work that may be long (batches, long goals) still
/// goes to a blocking thread, so that the runtime's threads keep answering other
/// connections meanwhile. A panic in the work is answered 500 either way. The worker slot
/// is released when the work ends, even if the request gave up waiting for it (time limit).
async fn on_worker<T: Send + 'static>(
    state: &AppState,
    short: bool,
    work: impl FnOnce() -> T + Send + 'static,
) -> Result<T, ApiError> {
    let permit = state
        .workers
        .clone()
        .acquire_owned()
        .await
        .map_err(|_| ApiError::new(ErrorCode::Internal, "the server is shutting down"))?;
    let done = if short {
        let _held = permit;
        std::panic::catch_unwind(std::panic::AssertUnwindSafe(work))
            .map_err(|_| "a ranking panicked".to_string())
    } else {
        tokio::task::spawn_blocking(move || {
            let _held = permit;
            work()
        })
        .await
        .map_err(|e| format!("a ranking worker failed: {e}"))
    };
    done.map_err(|why| {
        eprintln!("quarry: {why}");
        ApiError::new(
            ErrorCode::Internal,
            "ranking met an internal fault; the server's log has the details",
        )
    })
}
