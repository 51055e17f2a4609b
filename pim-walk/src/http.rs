//! The walk page's HTTP layer: HTTP/1.1 by hyper on tokio, routed by axum, with every
//! limit set by the stack before a handler runs and before a byte of a body is read.
//!
//! - a request line and headers of at most [`MAX_HEADER_BYTES`] in at most
//!   [`MAX_HEADERS`] fields (hyper answers 431 and closes);
//! - headers that do not arrive within [`HEADER_TIMEOUT`], and a connection idle that
//!   long between requests, are closed (hyper's header read timeout, which runs while a
//!   kept-alive connection waits for its next request);
//! - at most [`MAX_CONNECTIONS`] connections at once: one more is closed unanswered;
//! - every request is checked (token, Host, Origin: [`Guard`]) before its body is
//!   touched; a refused request's body is never read, and hyper closes the connection
//!   rather than drain it;
//! - a body's declared length is checked against [`MAX_READ_BYTES`] before it is read
//!   (tower-http's body limit, 413, and the connection closed unread); a body is read
//!   whole within [`BODY_TIMEOUT`] or refused (408), and one over [`MAX_BODY_BYTES`] is
//!   refused (413) once read, so that a client still sending it sees the answer
//!   ([`read_body`]);
//! - a request is answered within [`REQUEST_TIMEOUT`] (tower-http's timeout, 503);
//! - Ctrl-C stops accepting at once, lets the requests in hand finish for at most
//!   [`SHUTDOWN_GRACE`], then ends every connection.
//!
//! - over TLS, the handshake must end within [`HEADER_TIMEOUT`] (its connection counts
//!   against the limit meanwhile); a plain HTTP request to the TLS port is answered 400
//!   with the `https://` address to use, and closed.
//!
//! Nothing here knows what the page does: [`serve`] takes any axum router. A connection
//! is served over any byte stream ([`serve_connection`]): TLS wraps the accepted stream
//! and changes nothing else.

use std::future::Future;
use std::sync::Arc;
use std::time::Duration;

use axum::body::{Body, Bytes};
use axum::extract::Request;
use axum::http::{header, HeaderValue, Method, StatusCode};
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use axum::Router;
use hyper_util::rt::{TokioIo, TokioTimer};
use hyper_util::server::graceful::GracefulShutdown;
use subtle::ConstantTimeEq;
use tokio::io::{AsyncRead, AsyncWrite};
use tokio::net::TcpListener;
use tokio::sync::Semaphore;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::timeout::TimeoutLayer;

/// The largest request body accepted (a reading is a few hundred bytes).
pub const MAX_BODY_BYTES: usize = 8 * 1024;
/// The largest body read at all (and discarded when over [`MAX_BODY_BYTES`]); a larger
/// declared length is refused before a byte is read.
pub const MAX_READ_BYTES: usize = 64 * 1024;
/// The largest request line and headers together.
pub const MAX_HEADER_BYTES: usize = 16 * 1024;
/// The most header fields in one request.
pub const MAX_HEADERS: usize = 32;
/// How long a request's headers may take to arrive, and how long a kept-alive
/// connection may wait for its next request.
pub const HEADER_TIMEOUT: Duration = Duration::from_secs(10);
/// How long a request's body may take to arrive.
pub const BODY_TIMEOUT: Duration = Duration::from_secs(5);
/// How long a request may take to be answered (a fix of a very long walk included).
pub const REQUEST_TIMEOUT: Duration = Duration::from_secs(60);
/// Connections served at once (the phones of a walk team and a laptop, with room).
pub const MAX_CONNECTIONS: usize = 64;
/// How long Ctrl-C lets the requests in hand finish.
pub const SHUTDOWN_GRACE: Duration = Duration::from_millis(1000);

/// Who may use the server: the token of its address, and the Host and Origin of a
/// browser that opened that address.
#[derive(Clone, Debug)]
pub struct Guard {
    pub token: String,
    pub port: u16,
    /// Host names (not address literals) this server answers to (`--name`).
    pub names: Vec<String>,
}

impl Guard {
    /// Why a request is refused, if it is; only its line and headers are looked at.
    pub fn refusal(&self, request: &Request) -> Option<&'static str> {
        let given = request
            .uri()
            .query()
            .and_then(|q| query_value(q, "token"))
            .unwrap_or_default();
        if !bool::from(given.as_bytes().ct_eq(self.token.as_bytes())) {
            return Some("refused: this address needs the walk's token");
        }
        let host = request
            .headers()
            .get(header::HOST)
            .and_then(|h| h.to_str().ok());
        let Some(host) = host.filter(|h| host_is_ours(h, self.port, &self.names)) else {
            return Some("refused: the Host does not name this server");
        };
        if request.method() != Method::GET {
            let origin = request.headers().get(header::ORIGIN);
            let origin_ok = match origin.map(|o| o.to_str()) {
                None => true,
                Some(Ok(o)) => o == format!("http://{host}") || o == format!("https://{host}"),
                Some(Err(_)) => false,
            };
            if !origin_ok {
                return Some("refused: written from another page");
            }
        }
        None
    }
}

/// The value of `name` in a query string (`a=1&b=2`), percent-decoded.
pub fn query_value(query: &str, name: &str) -> Option<String> {
    form_urlencoded::parse(query.as_bytes())
        .find(|(k, _)| k == name)
        .map(|(_, v)| v.into_owned())
}

/// Whether a Host header names this server: an address literal, `localhost` or one of
/// `names`, with this port (any other name that resolves here by DNS is refused: no
/// rebinding).
pub fn host_is_ours(host: &str, port: u16, names: &[String]) -> bool {
    let Some((name, p)) = host.rsplit_once(':') else {
        return false;
    };
    if p.parse::<u16>() != Ok(port) {
        return false;
    }
    let name = name.trim_start_matches('[').trim_end_matches(']');
    name.eq_ignore_ascii_case("localhost")
        || name.parse::<std::net::IpAddr>().is_ok()
        || names.iter().any(|n| n.eq_ignore_ascii_case(name))
}

/// A plain-text answer (refusals and errors).
pub fn plain(status: StatusCode, message: &str) -> Response {
    (
        status,
        [(header::CONTENT_TYPE, "text/plain; charset=utf-8")],
        format!("{message}\n"),
    )
        .into_response()
}

/// Reads a request's body whole: at most [`MAX_BODY_BYTES`] (413), within
/// [`BODY_TIMEOUT`] (408); a malformed body (a bad chunk size) is a 400.
pub async fn read_body(body: Body) -> Result<Bytes, Response> {
    let too_large = || {
        plain(
            StatusCode::PAYLOAD_TOO_LARGE,
            "refused: the body is too large",
        )
    };
    match tokio::time::timeout(BODY_TIMEOUT, axum::body::to_bytes(body, MAX_READ_BYTES)).await {
        Err(_) => Err(plain(
            StatusCode::REQUEST_TIMEOUT,
            "refused: the body did not arrive in time",
        )),
        Ok(Ok(bytes)) if bytes.len() > MAX_BODY_BYTES => Err(too_large()),
        Ok(Ok(bytes)) => Ok(bytes),
        Ok(Err(e)) => {
            let mut source: Option<&(dyn std::error::Error + 'static)> = Some(&e);
            while let Some(s) = source {
                if s.is::<http_body_util::LengthLimitError>() {
                    return Err(too_large());
                }
                source = s.source();
            }
            Err(plain(StatusCode::BAD_REQUEST, "refused: a malformed body"))
        }
    }
}

/// The guard, then the body limit and the request timeout, around `routes`; every
/// answer (refusals too) carries the page's security headers.
pub fn guarded(routes: Router, guard: Arc<Guard>) -> Router {
    routes
        .layer(RequestBodyLimitLayer::new(MAX_READ_BYTES))
        .layer(axum::middleware::from_fn(
            move |request: Request, next: Next| {
                let guard = guard.clone();
                async move {
                    match guard.refusal(&request) {
                        Some(why) => plain(StatusCode::FORBIDDEN, why),
                        None => next.run(request).await,
                    }
                }
            },
        ))
        .layer(TimeoutLayer::with_status_code(
            StatusCode::SERVICE_UNAVAILABLE,
            REQUEST_TIMEOUT,
        ))
        .layer(axum::middleware::map_response(security_headers))
}

async fn security_headers(mut response: Response) -> Response {
    let headers = response.headers_mut();
    for (k, v) in [
        (header::CACHE_CONTROL, "no-store"),
        (header::X_CONTENT_TYPE_OPTIONS, "nosniff"),
        (header::X_FRAME_OPTIONS, "DENY"),
        (header::REFERRER_POLICY, "no-referrer"),
        (
            header::CONTENT_SECURITY_POLICY,
            "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data:; connect-src 'self'; form-action 'none'; frame-ancestors 'none'; base-uri 'none'",
        ),
    ] {
        headers.insert(k, HeaderValue::from_static(v));
    }
    response
}

/// hyper's HTTP/1.1 connection settings: the header caps and timeouts above.
fn http1() -> hyper::server::conn::http1::Builder {
    let mut builder = hyper::server::conn::http1::Builder::new();
    builder
        .timer(TokioTimer::new())
        .header_read_timeout(HEADER_TIMEOUT)
        .max_buf_size(MAX_HEADER_BYTES)
        .max_header_size(MAX_HEADER_BYTES)
        .max_headers(MAX_HEADERS)
        .keep_alive(true);
    builder
}

/// Serves one connection over any byte stream (a TCP stream here; a TLS stream would
/// do as well), ended early by `graceful`'s shutdown.
fn serve_connection<I>(
    builder: &hyper::server::conn::http1::Builder,
    graceful: &GracefulShutdown,
    io: I,
    app: Router,
) -> impl Future<Output = ()> + Send + 'static
where
    I: AsyncRead + AsyncWrite + Unpin + Send + 'static,
{
    let service = hyper_util::service::TowerToHyperService::new(app);
    let connection = builder.serve_connection(TokioIo::new(io), service);
    let connection = graceful.watch(connection);
    async move {
        let _ = connection.await;
    }
}

/// The TLS handshake of an accepted connection, within [`HEADER_TIMEOUT`]; a client
/// speaking plain HTTP (its first byte is not a TLS handshake record's, 0x16) gets a
/// 400 naming the `https://` address, and `None`.
async fn handshake(
    stream: tokio::net::TcpStream,
    acceptor: tokio_rustls::TlsAcceptor,
) -> Option<tokio_rustls::server::TlsStream<tokio::net::TcpStream>> {
    use tokio::io::AsyncWriteExt;
    tokio::time::timeout(HEADER_TIMEOUT, async move {
        let mut first = [0u8; 1];
        let mut stream = stream;
        if stream.peek(&mut first).await.ok()? == 0 {
            return None;
        }
        if first[0] != 0x16 {
            let body = "refused: this server speaks HTTPS only; open the https:// address printed by pim walk\n";
            let answer = format!(
                "HTTP/1.1 400 Bad Request\r\ncontent-type: text/plain; charset=utf-8\r\ncontent-length: {}\r\nconnection: close\r\n\r\n{body}",
                body.len()
            );
            let _ = stream.write_all(answer.as_bytes()).await;
            let _ = stream.shutdown().await;
            return None;
        }
        acceptor.accept(stream).await.ok()
    })
    .await
    .ok()
    .flatten()
}

/// Accepts connections on `listener` and serves `app` on each (over TLS when `tls` is
/// given) until `stop` completes; then stops accepting and lets the requests in hand
/// finish for at most [`SHUTDOWN_GRACE`].
pub async fn serve(
    listener: TcpListener,
    app: Router,
    tls: Option<Arc<rustls::ServerConfig>>,
    stop: impl Future<Output = ()>,
) {
    let acceptor = tls.map(tokio_rustls::TlsAcceptor::from);
    let permits = Arc::new(Semaphore::new(MAX_CONNECTIONS));
    let graceful = GracefulShutdown::new();
    let builder = http1();
    tokio::pin!(stop);
    loop {
        let accepted = tokio::select! {
            accepted = listener.accept() => accepted,
            () = &mut stop => break,
        };
        let stream = match accepted {
            Ok((stream, _)) => stream,
            // Out of file descriptors, or a connection reset before it was accepted:
            // wait a moment rather than spin.
            Err(_) => {
                tokio::time::sleep(Duration::from_millis(50)).await;
                continue;
            }
        };
        // Over the connection limit: closed unanswered.
        let Ok(permit) = permits.clone().try_acquire_owned() else {
            drop(stream);
            continue;
        };
        let _ = stream.set_nodelay(true);
        match &acceptor {
            None => {
                let connection = serve_connection(&builder, &graceful, stream, app.clone());
                tokio::spawn(async move {
                    connection.await;
                    drop(permit);
                });
            }
            Some(acceptor) => {
                let (acceptor, builder, app) = (acceptor.clone(), builder.clone(), app.clone());
                let watcher = graceful.watcher();
                tokio::spawn(async move {
                    if let Some(tls) = handshake(stream, acceptor).await {
                        let service = hyper_util::service::TowerToHyperService::new(app);
                        let connection = builder.serve_connection(TokioIo::new(tls), service);
                        let _ = watcher.watch(connection).await;
                    }
                    drop(permit);
                });
            }
        }
    }
    drop(listener);
    let _ = tokio::time::timeout(SHUTDOWN_GRACE, graceful.shutdown()).await;
}

/// Completes at the first Ctrl-C (SIGINT), or never when it cannot be caught. The
/// handler is in place when this returns, before the future is first polled.
pub fn ctrl_c() -> std::io::Result<impl Future<Output = ()>> {
    #[cfg(unix)]
    {
        let mut signal = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::interrupt())?;
        Ok(async move {
            signal.recv().await;
        })
    }
    #[cfg(not(unix))]
    {
        Ok(async move {
            let _ = tokio::signal::ctrl_c().await;
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hosts() {
        let none: &[String] = &[];
        let named = &["walk.test".to_string()];
        assert!(host_is_ours("127.0.0.1:8080", 8080, none));
        assert!(host_is_ours("localhost:8080", 8080, none));
        assert!(host_is_ours("[::1]:8080", 8080, none));
        assert!(host_is_ours("192.168.43.1:8080", 8080, none));
        assert!(!host_is_ours("evil.example:8080", 8080, none));
        assert!(!host_is_ours("walk.test:8080", 8080, none));
        assert!(host_is_ours("WALK.test:8080", 8080, named));
        assert!(!host_is_ours("evil.example:8080", 8080, named));
        assert!(!host_is_ours("127.0.0.1:8081", 8080, none));
        assert!(!host_is_ours("127.0.0.1", 8080, none));
    }

    #[test]
    fn query_values_are_decoded() {
        assert_eq!(
            query_value("token=ab%20c&x=1", "token").as_deref(),
            Some("ab c")
        );
        assert_eq!(query_value("x=1", "token"), None);
    }
}
