//! Accepting connections: HTTP/1.1 on each, with a header-read timeout, a cap on open
//! connections, and a graceful stop.
//!
//! Takes a bound listener, the router and the [`ConnectionLimits`]; gives a future that
//! serves until `shutdown` resolves, then stops accepting and waits for the requests in
//! flight. A client that does not send a whole request head within the header timeout
//! (slowly, or at all, including an idle keep-alive connection) is disconnected; connections
//! over the cap are closed as soon as they are accepted. It knows nothing of the routes: the
//! body timeout and every size limit on a request are the router's (`routes/`).

use std::future::Future;
use std::sync::Arc;
use std::time::Duration;

use axum::Router;
use hyper::server::conn::http1;
use hyper_util::rt::{TokioIo, TokioTimer};
use hyper_util::server::graceful::GracefulShutdown;
use hyper_util::service::TowerToHyperService;
use tokio::net::TcpListener;
use tokio::sync::Semaphore;

/// Limits on connections, before any request is read.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ConnectionLimits {
    /// Longest a client may take to send a whole request head (request line and headers).
    pub header_read_timeout: Duration,
    /// Connections open at once; more are closed when accepted.
    pub max_connections: usize,
}

impl Default for ConnectionLimits {
    fn default() -> ConnectionLimits {
        ConnectionLimits {
            header_read_timeout: Duration::from_secs(10),
            max_connections: 1024,
        }
    }
}

/// Whether an accept error concerns only the one connection being accepted.
fn is_connection_error(e: &std::io::Error) -> bool {
    use std::io::ErrorKind::*;
    matches!(
        e.kind(),
        ConnectionRefused | ConnectionAborted | ConnectionReset
    )
}

/// Serves `app` on `listener` until `shutdown` resolves, then lets every connection finish
/// the request it is answering (idle ones are closed) and returns.
pub async fn serve_connections(
    listener: TcpListener,
    app: Router,
    limits: ConnectionLimits,
    shutdown: impl Future<Output = ()> + Send,
) {
    let graceful = GracefulShutdown::new();
    let slots = Arc::new(Semaphore::new(limits.max_connections.max(1)));
    let mut builder = http1::Builder::new();
    builder
        .timer(TokioTimer::new())
        .header_read_timeout(limits.header_read_timeout);
    tokio::pin!(shutdown);
    loop {
        let stream = tokio::select! {
            accepted = listener.accept() => match accepted {
                Ok((stream, _peer)) => stream,
                Err(e) if is_connection_error(&e) => continue,
                Err(e) => {
                    // Out of file descriptors or memory: wait a little rather than spin,
                    // and keep serving the connections already open.
                    eprintln!("quarry: cannot accept a connection: {e}");
                    tokio::time::sleep(Duration::from_millis(100)).await;
                    continue;
                }
            },
            () = &mut shutdown => break,
        };
        let Ok(slot) = slots.clone().try_acquire_owned() else {
            drop(stream);
            continue;
        };
        let _ = stream.set_nodelay(true);
        let connection =
            builder.serve_connection(TokioIo::new(stream), TowerToHyperService::new(app.clone()));
        let watched = graceful.watch(connection);
        tokio::spawn(async move {
            // Errors here are one client's (a reset, a header timeout): nothing to report.
            let _ = watched.await;
            drop(slot);
        });
    }
    drop(listener);
    graceful.shutdown().await;
}
