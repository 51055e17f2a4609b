//! `pim walk --log FILE`: the bearing walk on a phone. A small HTTP server serves one
//! self-contained page and saves each reading through the same check and locked append
//! as `pim log`, so the log stays the one `pim fix` and `pim ticket` read and several
//! phones may log to one walk at once.
//!
//! Every request needs the random token printed with the page's address (compared in
//! constant time); every request's Host must name this server by address (or a name
//! given by `--name`), and a write's Origin, when sent, must be the page's own.
//!
//! On a loopback address the page is served over plain HTTP; on any other (the site's
//! network) over HTTPS only, with a certificate the server makes and keeps (`tls`),
//! since browsers give geolocation only to a secure context. The address is printed
//! first on standard output, and as a QR code on the terminal (and `--qr FILE.svg`). Nothing but the log is written and nothing
//! but the page is served. The HTTP layer and its limits are in `http`; what the page
//! asks for in `state`. Ctrl-C lets the requests in hand finish (for at most
//! `http::SHUTDOWN_GRACE`), so the log is always whole.

mod http;
mod state;
mod tls;

use std::io::{IsTerminal, Write};
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use axum::body::Body;
use axum::extract::State;
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::Router;
use pim_core::emitter::Emitter;
use pim_core::error::Error;
use pim_core::fix::Fix;
use pim_core::ticket::Structure;
use pim_core::walk::Spot;
use serde_json::Value;

use state::Walk;

/// `eprintln!` for the walker's notes, with text from files escaped
/// (`pim_io::text::terminal_escape`) so no input can drive the terminal.
macro_rules! note {
    ($($arg:tt)*) => {{
        let text = format!($($arg)*);
        eprintln!("{}", pim_io::text::terminal_escape(&text, true));
    }};
}

/// The page: one HTML document with its style, script and pictures inline.
const PAGE: &str = include_str!("page.html");
/// Threads writing the log and working out fixes (a fix of a long walk takes a while;
/// the network is served meanwhile, and requests for the same version of the log wait
/// for the one fix, so a save finds a thread free).
const WORKERS: usize = 8;

/// How the running fix is worked out from the log's text: the fix and its JSON as
/// `pim fix --format json` writes it, or why there is none (a refusal's message is
/// shown on the page as it is). The caller's estimator options live inside it.
pub type Fixer = dyn Fn(&Path, &str) -> Result<(Fix, Value), Error> + Send + Sync;

/// A walk to serve.
pub struct Config {
    /// The field log readings are added to (created with its header when missing).
    pub log: PathBuf,
    /// Address and port; any address but loopback is served over HTTPS only.
    pub listen: SocketAddr,
    /// Host names phones may use (Host check and certificate), checked by [`serve`].
    pub names: Vec<String>,
    /// Folder the certificate is kept in (default `pim-walk-tls` beside the log).
    pub tls_dir: Option<PathBuf>,
    /// Also write the address as a QR code to this SVG file.
    pub qr: Option<PathBuf>,
    /// The files read (never written: the QR code and the certificate may not replace
    /// one).
    pub inputs: Vec<PathBuf>,
    /// Site structures and emitters for the map.
    pub structures: Vec<Structure>,
    pub emitters: Vec<Emitter>,
    /// Spots one can reach, to suggest the next one from (else a ring around the fix).
    pub candidates: Option<Vec<Spot>>,
}

/// Serves the walk until Ctrl-C: prints the address (first line of standard output),
/// its QR code and, over HTTPS, the certificate's fingerprint.
pub fn serve(args: Config, fixer: Box<Fixer>) -> Result<(), Error> {
    pim_io::append::check_log_path(&args.log)?;
    let walk = Arc::new(Walk::new(
        args.log.clone(),
        fixer,
        args.structures,
        args.emitters,
        args.candidates,
    ));
    for name in &args.names {
        check_name(name)?;
    }
    let token = new_token()?;
    let secure = !args.listen.ip().is_loopback();
    let lan = if args.listen.ip().is_unspecified() {
        tls::lan_address()
    } else {
        None
    };
    let inputs: Vec<&Path> = args.inputs.iter().map(PathBuf::as_path).collect();
    let identity = if secure {
        let mut names: Vec<String> = vec!["localhost".into(), "127.0.0.1".into(), "::1".into()];
        if !args.listen.ip().is_unspecified() {
            names.push(args.listen.ip().to_string());
        }
        names.extend(lan.map(|ip| ip.to_string()));
        names.extend(args.names.iter().map(|n| n.to_ascii_lowercase()));
        let dir = args
            .tls_dir
            .clone()
            .unwrap_or_else(|| tls::default_dir(&args.log));
        Some(tls::load_or_make(&dir, &names, &inputs)?)
    } else {
        None
    };
    let tls_config = identity.as_ref().map(tls::server_config).transpose()?;
    if let Some(qr) = &args.qr {
        pim_io::output::check_output(qr, &inputs, pim_io::output::Existing::Replace)?;
    }
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .max_blocking_threads(WORKERS)
        .enable_all()
        .build()
        .map_err(|e| Error::refused(format!("cannot start the server: {e}")))?;
    runtime.block_on(async {
        let listener = tokio::net::TcpListener::bind(args.listen)
            .await
            .map_err(|e| {
                Error::argument("--listen", format!("cannot listen on {}: {e}", args.listen))
            })?;
        let port = listener
            .local_addr()
            .map(|a| a.port())
            .unwrap_or(args.listen.port());
        let stop = http::ctrl_c().map_err(|e| {
            Error::refused(format!("cannot catch Ctrl-C: {e}"))
        })?;
        let ip = match (args.listen.ip().is_unspecified(), lan) {
            (true, Some(ip)) => ip,
            (true, None) => std::net::IpAddr::from([127, 0, 0, 1]),
            (false, _) => args.listen.ip(),
        };
        let shown = match ip {
            std::net::IpAddr::V4(a) => a.to_string(),
            std::net::IpAddr::V6(a) => format!("[{a}]"),
        };
        let scheme = if secure { "https" } else { "http" };
        let url = format!("{scheme}://{shown}:{port}/?token={token}");
        // The address alone on standard output (for scripts); the rest is for the walker.
        {
            let mut out = std::io::stdout().lock();
            writeln!(out, "{url}")
                .and_then(|()| out.flush())
                .map_err(|e| Error::io("standard output", &e))?;
        }
        let code = qrcode::QrCode::new(url.as_bytes())
            .map_err(|e| Error::refused(format!("cannot make the QR code: {e}")))?;
        if let Some(path) = &args.qr {
            let svg = code
                .render::<qrcode::render::svg::Color>()
                .min_dimensions(256, 256)
                .build();
            pim_io::output::write_file_atomically(
                path,
                svg.into_bytes(),
                &inputs,
                pim_io::output::Existing::Replace,
            )?;
            note!("pim: the address as a QR code: {}", path.display());
        }
        note!(
            "pim: saving readings to {}. Open the address above on the phone; Ctrl-C stops.",
            args.log.display()
        );
        if let Some(identity) = &identity {
            // The QR code is ours (block characters only), printed unescaped.
            eprintln!("{}", terminal_qr(&code, std::io::stderr().is_terminal()));
            note!(
                "pim: HTTPS with the certificate in {}{}; SHA-256 fingerprint\n     {}\n     Accept it once on the phone after checking this fingerprint.",
                identity.dir.display(),
                if identity.made { " (new: phones accept it again)" } else { "" },
                identity.fingerprint
            );
            if args.listen.ip().is_unspecified() && lan.is_none() {
                note!(
                    "pim: this machine's address on the network was not found: on the phone, use it in place of 127.0.0.1."
                );
            }
        }
        let guard = http::Guard {
            token,
            port,
            names: args.names.iter().map(|n| n.to_ascii_lowercase()).collect(),
        };
        let app = http::guarded(routes(walk), Arc::new(guard));
        http::serve(listener, app, tls_config, stop).await;
        Ok::<(), Error>(())
    })?;
    runtime.shutdown_timeout(std::time::Duration::from_millis(300));
    note!("pim: walk stopped; {} is whole.", args.log.display());
    Ok(())
}

/// The page's routes: the page, its state, its map, a save and an undo.
fn routes(walk: Arc<Walk>) -> Router {
    Router::new()
        .route("/", get(page))
        .route("/state", get(get_state))
        .route("/map", get(get_map))
        .route("/reading", post(post_reading))
        .route("/undo", post(post_undo))
        .route("/redo", post(post_redo))
        .route("/toward", get(get_toward))
        .fallback(|| async { http::plain(StatusCode::NOT_FOUND, "not here") })
        .with_state(walk)
}

async fn page() -> Response {
    ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], PAGE).into_response()
}

fn json_response(status: u16, value: &Value) -> Response {
    (
        StatusCode::from_u16(status).unwrap_or(StatusCode::INTERNAL_SERVER_ERROR),
        [(header::CONTENT_TYPE, "application/json; charset=utf-8")],
        value.to_string(),
    )
        .into_response()
}

/// Runs `work` on a worker thread (fixes and file locks block).
async fn blocking<T: Send + 'static>(
    work: impl FnOnce() -> T + Send + 'static,
) -> Result<T, Response> {
    tokio::task::spawn_blocking(work).await.map_err(|_| {
        http::plain(
            StatusCode::INTERNAL_SERVER_ERROR,
            "the request failed on the server",
        )
    })
}

async fn get_state(State(walk): State<Arc<Walk>>) -> Response {
    match blocking(move || state::state(&walk)).await {
        Ok(v) => json_response(200, &v),
        Err(r) => r,
    }
}

/// The walker's position from the request's query, or why it is refused.
fn here(uri: &axum::http::Uri) -> Result<Option<state::Here>, String> {
    state::here_of(uri.query().unwrap_or_default())
}

async fn get_map(State(walk): State<Arc<Walk>>, uri: axum::http::Uri) -> Response {
    let here = match here(&uri) {
        Ok(h) => h,
        Err(why) => return http::plain(StatusCode::UNPROCESSABLE_ENTITY, &why),
    };
    match blocking(move || state::map(&walk, here)).await {
        Ok(Some(svg)) => (
            [(header::CONTENT_TYPE, "image/svg+xml; charset=utf-8")],
            svg,
        )
            .into_response(),
        Ok(None) => http::plain(StatusCode::NOT_FOUND, "no fix yet"),
        Err(r) => r,
    }
}

/// A form POST: its body read within the limits, then `work` on a worker thread; its
/// status and JSON answered.
async fn form_post(
    walk: Arc<Walk>,
    body: Body,
    work: fn(&Walk, &[u8]) -> (u16, Value),
) -> Response {
    let bytes = match http::read_body(body).await {
        Ok(b) => b,
        Err(r) => return r,
    };
    match blocking(move || work(&walk, &bytes)).await {
        Ok((status, v)) => json_response(status, &v),
        Err(r) => r,
    }
}

async fn post_reading(State(walk): State<Arc<Walk>>, body: Body) -> Response {
    form_post(walk, body, state::save).await
}

/// The walk from the walker's position (`lat`, `lon` of the query) to the next spot.
async fn get_toward(State(walk): State<Arc<Walk>>, uri: axum::http::Uri) -> Response {
    let here = match here(&uri) {
        Ok(Some(h)) => h,
        Ok(None) => return http::plain(StatusCode::UNPROCESSABLE_ENTITY, "give `lat` and `lon`"),
        Err(why) => return http::plain(StatusCode::UNPROCESSABLE_ENTITY, &why),
    };
    match blocking(move || state::walk_to_next(&walk, here)).await {
        Ok(Some(v)) => json_response(200, &v),
        Ok(None) => http::plain(StatusCode::NOT_FOUND, "no next spot near this position"),
        Err(r) => r,
    }
}

async fn post_undo(State(walk): State<Arc<Walk>>, body: Body) -> Response {
    form_post(walk, body, state::undo).await
}

async fn post_redo(State(walk): State<Arc<Walk>>, body: Body) -> Response {
    form_post(walk, body, state::redo).await
}

/// The QR code for a terminal: block characters for the dark modules, two modules a
/// character down, with its quiet zone. On a terminal each line is drawn black on white
/// (ANSI SGR 30 and 107), so it scans the same on a dark or a light background;
/// elsewhere (a file, a pipe) it is plain text, dark modules as blocks, for a light
/// background.
fn terminal_qr(code: &qrcode::QrCode, colour: bool) -> String {
    let plain = code
        .render::<qrcode::render::unicode::Dense1x2>()
        .quiet_zone(true)
        .build();
    if !colour {
        return plain;
    }
    plain
        .lines()
        .map(|l| format!("\x1b[30;107m{l}\x1b[0m"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// A `--name` is a DNS host name (letters, digits, `-` and `.`), not an address.
fn check_name(name: &str) -> Result<(), Error> {
    let ok = !name.is_empty()
        && name.len() <= 253
        && name.parse::<std::net::IpAddr>().is_err()
        && name.split('.').all(|label| {
            !label.is_empty()
                && label.len() <= 63
                && !label.starts_with('-')
                && !label.ends_with('-')
                && label
                    .bytes()
                    .all(|b| b.is_ascii_alphanumeric() || b == b'-')
        });
    if ok {
        Ok(())
    } else {
        Err(Error::argument(
            "--name",
            format!("`{name}` is not a host name (letters, digits, `-` and `.`)"),
        ))
    }
}

/// A fresh 128-bit token from the system's random source, as hex.
fn new_token() -> Result<String, Error> {
    let mut bytes = [0u8; 16];
    getrandom::fill(&mut bytes)
        .map_err(|e| Error::refused(format!("no random source for the access token: {e}")))?;
    Ok(bytes.iter().map(|b| format!("{b:02x}")).collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// On a terminal every line of the code is black on white and ends with a reset;
    /// the modules are the plain rendering's.
    #[test]
    fn the_terminal_qr_code_is_dark_on_light() {
        let code = qrcode::QrCode::new(b"https://192.0.2.7:8765/?token=00").unwrap();
        let plain = terminal_qr(&code, false);
        let coloured = terminal_qr(&code, true);
        assert!(!plain.contains('\x1b'));
        assert_eq!(coloured.lines().count(), plain.lines().count());
        for (c, p) in coloured.lines().zip(plain.lines()) {
            assert_eq!(c, format!("\x1b[30;107m{p}\x1b[0m"));
        }
    }
}
