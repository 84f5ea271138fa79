//! The accept loop: each connection served by hyper with an HTTP/1 header-read timeout,
//! so a client that opens connections and sends its headers slowly (or never) cannot
//! hold them open; the 30 s request timeout only starts once the headers are in.
//!
//! `axum::serve` offers no such setting, so this is its loop in small: accept, attach
//! the peer address (`ConnectInfo`), serve; on shutdown stop accepting, let every
//! connection finish its request, then return.

use std::time::Duration;

use axum::Router;
use axum::extract::{ConnectInfo, Request};
use hyper::body::Incoming;
use hyper_util::rt::{TokioIo, TokioTimer};
use hyper_util::service::TowerToHyperService;
use tokio::net::TcpListener;
use tokio::sync::watch;
use tower::ServiceExt;

/// How long a client may take to send a request's headers.
pub const HEADER_READ_TIMEOUT: Duration = Duration::from_secs(10);

/// Serves `app` on `listener` until `shutdown` resolves, then waits for open connections.
pub async fn serve(
    listener: TcpListener,
    app: Router,
    shutdown: impl std::future::Future<Output = ()> + Send + 'static,
    header_read_timeout: Duration,
) -> std::io::Result<()> {
    let (stop_tx, stop_rx) = watch::channel(false);
    let (done_tx, done_rx) = watch::channel(());
    let mut shutdown = std::pin::pin!(shutdown);
    loop {
        let (stream, peer) = tokio::select! {
            accepted = listener.accept() => match accepted {
                Ok(a) => a,
                Err(e) => {
                    // Out of file descriptors and the like: wait a moment rather than spin.
                    tracing::warn!(error = %e, "accepting a connection failed");
                    tokio::time::sleep(Duration::from_millis(50)).await;
                    continue;
                }
            },
            () = &mut shutdown => break,
        };
        let svc = app.clone().map_request(move |mut req: Request<Incoming>| {
            req.extensions_mut().insert(ConnectInfo(peer));
            req.map(axum::body::Body::new)
        });
        let conn_stop = stop_rx.clone();
        let conn_done = done_rx.clone();
        tokio::spawn(async move {
            serve_connection(stream, svc, conn_stop, header_read_timeout).await;
            drop(conn_done);
        });
    }
    drop(listener);
    let _ = stop_tx.send(true);
    drop(done_rx);
    // Resolves once every connection task has dropped its receiver.
    done_tx.closed().await;
    Ok(())
}

async fn serve_connection<S>(
    stream: tokio::net::TcpStream,
    svc: S,
    mut stop: watch::Receiver<bool>,
    header_read_timeout: Duration,
) where
    S: tower::Service<
            Request<Incoming>,
            Response = axum::response::Response,
            Error = std::convert::Infallible,
        > + Clone
        + Send
        + 'static,
    S::Future: Send + 'static,
{
    let mut builder = hyper::server::conn::http1::Builder::new();
    builder
        .timer(TokioTimer::new())
        .header_read_timeout(header_read_timeout);
    let io = TokioIo::new(stream);
    let conn = builder
        .serve_connection(io, TowerToHyperService::new(svc))
        .with_upgrades();
    let mut conn = std::pin::pin!(conn);
    loop {
        tokio::select! {
            result = conn.as_mut() => {
                if let Err(e) = result {
                    tracing::debug!(error = %e, "connection ended with an error");
                }
                break;
            }
            changed = stop.changed() => {
                if changed.is_err() || *stop.borrow() {
                    conn.as_mut().graceful_shutdown();
                    // Keep polling the connection until it has finished.
                    let _ = conn.as_mut().await;
                    break;
                }
            }
        }
    }
}
