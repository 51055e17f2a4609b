//! `pim walk --log FILE`: the bearing walk on a phone. A small HTTP server (tiny_http,
//! synchronous) serves one self-contained page and saves each reading through the same
//! check and locked append as `pim log`, so the log stays the one `pim fix` and
//! `pim ticket` read and several phones may log to one walk at once.
//!
//! Every request needs the random token printed with the page's address (compared in
//! constant time); every request's Host must name this server by address, and a write's
//! Origin, when sent, must be the page's own. Bodies are capped. Nothing but the log is
//! written and nothing but the page is served. Ctrl-C lets the request in hand finish,
//! so the log is always whole.

use std::io::{Read, Write};
use std::net::SocketAddr;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;

use pim_core::emitter::Emitter;
use pim_core::error::{Error, ErrorClass};
use pim_core::geo::GeoPoint;
use pim_core::ticket::{nearby, Structure};
use pim_core::walk::{rank_spots, walk_ring, Spot, MIN_SPOT_RANGE_M};
use pim_io::append::{read_locked, remove_last_row};
use pim_io::fieldlog::read_spots;
use pim_io::text::{decimal_degrees, Axis};
use serde_json::{json, Value};
use subtle::ConstantTimeEq;
use tiny_http::{Header, Method, Request, Response, Server};

use crate::common::{open, CliError, CliResult};
use crate::fix::{fix_from_log, fix_json, FixArgs};
use pim_io::fieldlog::{save_reading, North, ReadingText};
use pim_report::map::map_svg;
use pim_report::ticket::fix_map_input;
use pim_report::walk::{form_error_json, page_next_json};

/// The page: one HTML document with its style, script and pictures inline.
const PAGE: &str = include_str!("walk_page.html");
/// The largest request body accepted (a reading is a few hundred bytes).
const MAX_BODY_BYTES: usize = 8 * 1024;
/// Threads answering requests (phones of one walk team and a laptop).
const WORKERS: usize = 4;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The field log to add readings to (created with its header when missing).
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    /// Address and port to listen on; 0.0.0.0:PORT serves phones on the same network.
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:0")]
    pub listen: SocketAddr,
    /// Site structures (CSV) to show on the map.
    #[arg(long, value_name = "FILE")]
    pub structures: Option<PathBuf>,
    /// Emitters (CSV) to show on the map.
    #[arg(long, value_name = "FILE")]
    pub emitters: Option<PathBuf>,
    /// Spots one can reach (CSV with lat, lon and an `id` or `name`) to suggest the next one from; by
    /// default a ring around the fix at the walk's typical range.
    #[arg(long, value_name = "FILE")]
    pub candidates: Option<PathBuf>,
    /// The running fix's estimator, as in `pim fix`.
    #[command(flatten)]
    pub fix: FixArgs,
    #[command(flatten)]
    pub columns: crate::args::ColumnsArgs,
}

/// What every request handler reads.
struct Walk {
    log: PathBuf,
    fix: FixArgs,
    token: String,
    port: u16,
    structures: Vec<Structure>,
    emitters: Vec<Emitter>,
    candidates: Option<Vec<Spot>>,
}

pub fn run(args: Args) -> CliResult {
    let columns = crate::common::Columns::new(&args.columns)?;
    let structures = match &args.structures {
        Some(p) => crate::common::load_structures(p, &columns)?,
        None => Vec::new(),
    };
    let emitters = match &args.emitters {
        Some(p) => crate::common::load_emitters(p, &columns)?,
        None => Vec::new(),
    };
    columns.check()?;
    let candidates = match &args.candidates {
        Some(p) => Some(read_spots(&p.display().to_string(), open(p)?)?),
        None => None,
    };
    let server = Server::http(args.listen).map_err(|e| {
        Error::argument("--listen", format!("cannot listen on {}: {e}", args.listen))
    })?;
    let port = server
        .server_addr()
        .to_ip()
        .map(|a| a.port())
        .unwrap_or(args.listen.port());
    let walk = Arc::new(Walk {
        log: args.log.clone(),
        fix: args.fix.clone(),
        token: new_token()?,
        port,
        structures,
        emitters,
        candidates,
    });
    let shown = if args.listen.ip().is_unspecified() {
        "127.0.0.1".to_string()
    } else {
        match args.listen {
            SocketAddr::V4(a) => a.ip().to_string(),
            SocketAddr::V6(a) => format!("[{}]", a.ip()),
        }
    };
    // The address alone on standard output (for scripts); the rest is for the walker.
    {
        let mut out = std::io::stdout().lock();
        writeln!(out, "http://{shown}:{port}/?token={}", walk.token)?;
        out.flush()?;
    }
    eprintln_safe!(
        "pim: saving readings to {}. Open the address above on the phone; Ctrl-C stops.",
        args.log.display()
    );
    if args.listen.ip().is_unspecified() {
        eprintln_safe!(
            "pim: from other devices, use this machine's address on the network instead of 127.0.0.1."
        );
    }
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        ctrlc::set_handler(move || stop.store(true, Ordering::SeqCst))
            .map_err(|e| CliError::Core(Error::refused(format!("cannot catch Ctrl-C: {e}"))))?;
    }
    let server = Arc::new(server);
    let workers: Vec<_> = (0..WORKERS)
        .map(|_| {
            let (server, walk, stop) = (server.clone(), walk.clone(), stop.clone());
            std::thread::spawn(move || {
                while !stop.load(Ordering::SeqCst) {
                    match server.recv_timeout(Duration::from_millis(200)) {
                        Ok(Some(request)) => handle(&walk, request),
                        Ok(None) => {}
                        Err(_) => break,
                    }
                }
            })
        })
        .collect();
    for w in workers {
        let _ = w.join();
    }
    eprintln_safe!("pim: walk stopped; {} is whole.", args.log.display());
    Ok(())
}

/// A fresh 128-bit token from the system's random source, as hex.
fn new_token() -> CliResult<String> {
    let mut bytes = [0u8; 16];
    getrandom::fill(&mut bytes).map_err(|e| {
        CliError::Core(Error::refused(format!(
            "no random source for the access token: {e}"
        )))
    })?;
    Ok(bytes.iter().map(|b| format!("{b:02x}")).collect())
}

/// The value of `name` in a query string or form body (`a=1&b=2`), percent-decoded.
fn form_value(text: &str, name: &str) -> Option<String> {
    form_urlencoded::parse(text.as_bytes())
        .find(|(k, _)| k == name)
        .map(|(_, v)| v.into_owned())
}

fn header_value<'a>(request: &'a Request, name: &'static str) -> Option<&'a str> {
    request
        .headers()
        .iter()
        .find(|h| h.field.equiv(name))
        .map(|h| h.value.as_str())
}

/// Whether a Host header names this server: an address literal or `localhost`, with
/// this port (a name that resolves here by DNS is refused: no rebinding).
fn host_is_ours(host: &str, port: u16) -> bool {
    let Some((name, p)) = host.rsplit_once(':') else {
        return false;
    };
    if p.parse::<u16>() != Ok(port) {
        return false;
    }
    let name = name.trim_start_matches('[').trim_end_matches(']');
    name.eq_ignore_ascii_case("localhost") || name.parse::<std::net::IpAddr>().is_ok()
}

fn respond(request: Request, status: u16, content_type: &str, body: Vec<u8>) {
    let mut response = Response::from_data(body).with_status_code(status);
    for (k, v) in [
        ("Content-Type", content_type),
        ("Cache-Control", "no-store"),
        ("X-Content-Type-Options", "nosniff"),
        ("X-Frame-Options", "DENY"),
        ("Referrer-Policy", "no-referrer"),
        (
            "Content-Security-Policy",
            "default-src 'none'; style-src 'unsafe-inline'; script-src 'unsafe-inline'; img-src data:; connect-src 'self'; form-action 'none'; frame-ancestors 'none'; base-uri 'none'",
        ),
    ] {
        if let Ok(h) = Header::from_bytes(k.as_bytes(), v.as_bytes()) {
            response.add_header(h);
        }
    }
    let _ = request.respond(response);
}

fn respond_json(request: Request, status: u16, value: &Value) {
    respond(
        request,
        status,
        "application/json; charset=utf-8",
        value.to_string().into_bytes(),
    );
}

fn refuse(request: Request, status: u16, message: &str) {
    respond(
        request,
        status,
        "text/plain; charset=utf-8",
        format!("{message}\n").into_bytes(),
    );
}

fn handle(walk: &Walk, mut request: Request) {
    let url = request.url().to_string();
    let (path, query) = url.split_once('?').unwrap_or((&url, ""));
    let given = form_value(query, "token").unwrap_or_default();
    if !bool::from(given.as_bytes().ct_eq(walk.token.as_bytes())) {
        return refuse(request, 403, "refused: this address needs the walk's token");
    }
    if !header_value(&request, "Host").is_some_and(|h| host_is_ours(h, walk.port)) {
        return refuse(request, 403, "refused: the Host does not name this server");
    }
    let write = *request.method() == Method::Post;
    if write {
        let host = header_value(&request, "Host").unwrap_or_default();
        let origin_ok = match header_value(&request, "Origin") {
            None => true,
            Some(o) => o == format!("http://{host}") || o == format!("https://{host}"),
        };
        if !origin_ok {
            return refuse(request, 403, "refused: written from another page");
        }
    }
    match (request.method(), path) {
        (Method::Get, "/") => respond(
            request,
            200,
            "text/html; charset=utf-8",
            PAGE.as_bytes().to_vec(),
        ),
        (Method::Get, "/state") => {
            let state = walk_state(walk);
            respond_json(request, 200, &state)
        }
        (Method::Post, "/reading") => {
            if request.body_length().is_some_and(|n| n > MAX_BODY_BYTES) {
                return refuse(request, 413, "refused: the body is too large");
            }
            let mut body = Vec::new();
            let read = request
                .as_reader()
                .take(MAX_BODY_BYTES as u64 + 1)
                .read_to_end(&mut body);
            if read.is_err() || body.len() > MAX_BODY_BYTES {
                return refuse(request, 413, "refused: the body is too large");
            }
            let (status, value) = save(walk, &String::from_utf8_lossy(&body));
            respond_json(request, status, &value)
        }
        (Method::Post, "/undo") => {
            let (status, value) = match remove_last_row(&walk.log) {
                Ok(removed) => (
                    200,
                    json!({"removed": {"line": removed.line, "row": removed.row},
                           "state": walk_state(walk)}),
                ),
                Err(e) => (409, json!({"error": form_error_json(&e)})),
            };
            respond_json(request, status, &value)
        }
        _ => refuse(request, 404, "not here"),
    }
}

/// Saves one reading from the page's form body; the reply carries the new state or the
/// error beside its field.
fn save(walk: &Walk, body: &str) -> (u16, Value) {
    let get = |name: &str| {
        form_value(body, name)
            .map(|v| v.trim().to_string())
            .filter(|v| !v.is_empty())
    };
    let missing =
        |field: &str, message: &str| (422, json!({"error": {"field": field, "message": message}}));
    let Some(bearing_deg) = get("bearing_deg") else {
        return missing("bearing_deg", "missing bearing");
    };
    let north = match get("north").as_deref() {
        None | Some("true") => North::True,
        Some("magnetic") => North::Magnetic,
        Some(_) => return missing("north", "north is either `true` or `magnetic`"),
    };
    let reading = ReadingText {
        // Both empty: a row for `pim fix --track` to place by its time.
        lat: get("lat").map(|t| decimal_degrees(&t, Axis::Latitude)),
        lon: get("lon").map(|t| decimal_degrees(&t, Axis::Longitude)),
        bearing_deg,
        north,
        sigma_deg: get("sigma_deg"),
        level_dbm: get("level_dbm"),
        note: get("note"),
        time: get("time"),
    };
    match save_reading(&walk.log, &reading, &|column| column.to_string()) {
        Ok(appended) => (
            200,
            json!({"saved": {"line": appended.line, "created": appended.created},
                   "state": walk_state(walk)}),
        ),
        Err(e) => (
            if e.class == ErrorClass::Io { 500 } else { 422 },
            json!({"error": form_error_json(&e)}),
        ),
    }
}

/// Everything the page shows after a save: the running fix, the map, each reading's
/// residual and the suggested next spot; or why there is no fix yet.
fn walk_state(walk: &Walk) -> Value {
    let text = match read_locked(&walk.log) {
        Ok(bytes) => String::from_utf8_lossy(&bytes).into_owned(),
        Err(e) if e.class == ErrorClass::Io && !walk.log.exists() => {
            return json!({"rows": 0, "no_fix": "no reading yet"})
        }
        Err(e) => return json!({"rows": 0, "no_fix": e.to_string()}),
    };
    let rows = text
        .lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .count();
    let last_spot = last_position(&walk.log, &text);
    let (fix, prepared) = match fix_from_log(&walk.log, Some(&text), &walk.fix) {
        Ok(v) => v,
        Err(CliError::Core(e)) => {
            return json!({"rows": rows, "no_fix": if e.class == ErrorClass::Refused { e.message } else { e.to_string() }})
        }
        Err(CliError::BrokenPipe) => return json!({"rows": rows, "no_fix": "unreadable"}),
    };
    let near = nearby(&fix, &walk.structures, &walk.emitters, 30.0);
    let map = map_svg(&fix_map_input(
        &fix,
        &walk.structures,
        &walk.emitters,
        &near,
        format!("Bearing walk: {}", file_name(&walk.log)),
    ));
    let next = next_spot(walk, &fix, last_spot);
    json!({
        "rows": rows,
        "fix": fix_json(&fix, &prepared.corrections),
        "map_svg": map,
        "next": next,
    })
}

fn file_name(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string())
}

/// The position of the newest reading that has one.
fn last_position(path: &Path, text: &str) -> Option<GeoPoint> {
    let log = pim_io::fieldlog::read_field_log(&path.display().to_string(), text.as_bytes(), true)
        .ok()?;
    log.rows.iter().rev().find_map(|r| r.position)
}

/// The next spot as `pim next` gives it (D-optimal among the candidates, or a ring at
/// the walk's median range), with the walk to it from the newest reading's spot.
fn next_spot(walk: &Walk, fix: &pim_core::fix::Fix, from: Option<GeoPoint>) -> Value {
    let spots = match &walk.candidates {
        Some(c) => c.clone(),
        None => walk_ring(fix),
    };
    match rank_spots(fix, &spots, fix.sigma_deg_used, MIN_SPOT_RANGE_M) {
        Ok(ranked) => page_next_json(ranked.first(), from),
        Err(e) => json!({"none": e.to_string()}),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn form_values_are_decoded() {
        let body = "lat=51.5&note=gate+post%2C%20east&token=ab";
        assert_eq!(form_value(body, "note").as_deref(), Some("gate post, east"));
        assert_eq!(form_value(body, "lat").as_deref(), Some("51.5"));
        assert_eq!(form_value(body, "lon"), None);
        assert_eq!(form_value("q=%e2%80%99", "q").as_deref(), Some("\u{2019}"));
    }

    #[test]
    fn hosts() {
        assert!(host_is_ours("127.0.0.1:8080", 8080));
        assert!(host_is_ours("localhost:8080", 8080));
        assert!(host_is_ours("[::1]:8080", 8080));
        assert!(host_is_ours("192.168.43.1:8080", 8080));
        assert!(!host_is_ours("evil.example:8080", 8080));
        assert!(!host_is_ours("127.0.0.1:8081", 8080));
        assert!(!host_is_ours("127.0.0.1", 8080));
    }
}
