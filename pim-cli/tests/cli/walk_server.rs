//! The walk page's server under a hostile client on the loopback: requests that claim a
//! huge body, bodies that never come, huge or many headers, idle connections and more
//! connections than it serves. After each, a legitimate request is answered within a
//! second; Ctrl-C stops the server within two seconds with the attackers' connections
//! still open; and nothing reaches the log. Every attack is bounded in count and time.

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use crate::support::{field_log, pim_bin};

/// `pim walk` on a copy of the demo walk, ended when the test ends.
struct Server {
    child: Child,
    port: u16,
    token: String,
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn start(log: &Path) -> Server {
    let mut child = Command::new(pim_bin())
        .args(["walk", "--log"])
        .arg(log)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    let address = first.trim();
    let port = address
        .trim_start_matches("http://127.0.0.1:")
        .split('/')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    let token = address.split("token=").nth(1).unwrap().to_string();
    let server = Server { child, port, token };
    server.warm();
    server
}

impl Server {
    fn connect(&self) -> TcpStream {
        let s = TcpStream::connect(("127.0.0.1", self.port)).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(3))).unwrap();
        s.set_write_timeout(Some(Duration::from_secs(3))).unwrap();
        s
    }

    /// Sends `head` (and nothing more) and returns the status of the answer, or `None`
    /// when the connection was closed without one.
    fn status_of(&self, head: &str) -> Option<u16> {
        let mut s = self.connect();
        let _ = s.write_all(head.as_bytes());
        status_line(&mut s)
    }

    /// Asks for the state once, untimed, so that the running fix is worked out (and
    /// cached for the log's version) before any attack: what the timed requests measure
    /// is the server under attack, not the first fix on a loaded machine.
    fn warm(&self) {
        let mut s = self.connect();
        s.set_read_timeout(Some(Duration::from_secs(30))).unwrap();
        let _ = write!(
            s,
            "GET /state?token={} HTTP/1.1\r\nHost: 127.0.0.1:{}\r\nConnection: close\r\n\r\n",
            self.token, self.port
        );
        let mut answer = String::new();
        let _ = s.read_to_string(&mut answer);
    }

    /// A legitimate request: the page's state, answered within a second.
    fn assert_serves(&self, after: &str) {
        let start = Instant::now();
        let mut s = self.connect();
        s.set_read_timeout(Some(Duration::from_secs(1))).unwrap();
        write!(
            s,
            "GET /state?token={} HTTP/1.1\r\nHost: 127.0.0.1:{}\r\nConnection: close\r\n\r\n",
            self.token, self.port
        )
        .unwrap();
        let mut answer = String::new();
        let _ = s.read_to_string(&mut answer);
        assert!(
            answer.starts_with("HTTP/1.1 200") && answer.contains("\"rows\":"),
            "after {after}: {answer:?}"
        );
        assert!(
            start.elapsed() < Duration::from_secs(1),
            "after {after}: {:?}",
            start.elapsed()
        );
    }

    fn host(&self) -> String {
        format!("127.0.0.1:{}", self.port)
    }
}

fn status_line(s: &mut TcpStream) -> Option<u16> {
    let mut buf = [0u8; 64];
    let mut got = Vec::new();
    while !got.windows(2).any(|w| w == b"\r\n") {
        match s.read(&mut buf) {
            Ok(0) | Err(_) => break,
            Ok(n) => got.extend_from_slice(&buf[..n]),
        }
    }
    let text = String::from_utf8_lossy(&got);
    text.strip_prefix("HTTP/1.1 ")?.get(..3)?.parse().ok()
}

fn demo_log(dir: &Path) -> std::path::PathBuf {
    let log = dir.join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    log
}

/// A huge declared body is refused before any of it is read or allocated, with or
/// without the token; the server goes on serving.
#[test]
fn a_huge_content_length_is_refused_unread() {
    let tmp = crate::support::scratch();
    let log = demo_log(tmp.path());
    let before = std::fs::read(&log).unwrap();
    let server = start(&log);
    let host = server.host();
    for (token, length, want) in [
        ("WRONG", "9223372036854775807", 403),
        ("WRONG", "18446744073709551615", 403),
        (server.token.as_str(), "9223372036854775807", 413),
        (server.token.as_str(), "18446744073709551615", 413),
    ] {
        let head = format!(
            "POST /reading?token={token} HTTP/1.1\r\nHost: {host}\r\nContent-Type: application/x-www-form-urlencoded\r\nContent-Length: {length}\r\n\r\n"
        );
        let status = server.status_of(&head);
        // (a length over u64 is refused by hyper's parser: 400 or 431)
        assert!(
            status == Some(want) || status == Some(400) || status == Some(431),
            "token {token}, length {length}: {status:?}"
        );
        server.assert_serves(&format!("Content-Length {length}"));
    }
    // a chunked body with a bad chunk size is malformed, not too large
    let head = format!(
        "POST /reading?token={} HTTP/1.1\r\nHost: {host}\r\nTransfer-Encoding: chunked\r\n\r\nzz\r\n",
        server.token
    );
    assert_eq!(server.status_of(&head), Some(400));
    assert_eq!(std::fs::read(&log).unwrap(), before);
}

/// Connections that send headers and then no body, or nothing at all, hold nothing:
/// refused ones are closed at once, the rest time out, and a legitimate request is
/// served meanwhile.
#[test]
fn stalled_bodies_and_idle_connections_block_nothing() {
    let tmp = crate::support::scratch();
    let log = demo_log(tmp.path());
    let before = std::fs::read(&log).unwrap();
    let server = start(&log);
    let host = server.host();
    let mut held = Vec::new();
    for i in 0..16 {
        let token = if i % 2 == 0 { "WRONG" } else { &server.token };
        let mut s = server.connect();
        write!(
            s,
            "POST /reading?token={token} HTTP/1.1\r\nHost: {host}\r\nContent-Length: 100000\r\n\r\nlat=4"
        )
        .unwrap();
        held.push(s);
    }
    for _ in 0..16 {
        held.push(server.connect());
    }
    // half a request line, never finished
    let mut s = server.connect();
    s.write_all(b"GET /state?tok").unwrap();
    held.push(s);
    server.assert_serves("32 stalled connections");
    // the refused ones were answered 403 without waiting for their bodies
    let mut s = server.connect();
    s.write_all(
        format!(
            "POST /undo?token=WRONG HTTP/1.1\r\nHost: {host}\r\nContent-Length: 100000\r\n\r\n"
        )
        .as_bytes(),
    )
    .unwrap();
    assert_eq!(status_line(&mut s), Some(403));
    // a body that never comes is refused once its time is up
    let mut s = server.connect();
    s.set_read_timeout(Some(Duration::from_secs(8))).unwrap();
    s.write_all(
        format!(
            "POST /reading?token={} HTTP/1.1\r\nHost: {host}\r\nContent-Length: 200\r\n\r\nbearing_deg=1",
            server.token
        )
        .as_bytes(),
    )
    .unwrap();
    assert_eq!(status_line(&mut s), Some(408));
    server.assert_serves("a body that timed out");
    // an idle connection is closed once the header timeout (10 s) has passed
    let mut idle = held.pop().unwrap();
    idle.set_read_timeout(Some(Duration::from_secs(15)))
        .unwrap();
    let start = Instant::now();
    let mut rest = Vec::new();
    let closed = match idle.read_to_end(&mut rest) {
        Ok(_) => true,
        Err(e) => !matches!(
            e.kind(),
            std::io::ErrorKind::WouldBlock | std::io::ErrorKind::TimedOut
        ),
    };
    assert!(
        closed && start.elapsed() < Duration::from_secs(12),
        "an idle connection stayed open {:?}",
        start.elapsed()
    );
    drop(held);
    assert_eq!(std::fs::read(&log).unwrap(), before);
}

/// Headers past the size or count caps are refused (431) without the server growing,
/// and a header that never ends is cut off.
#[test]
fn huge_and_many_headers_are_refused() {
    let tmp = crate::support::scratch();
    let log = demo_log(tmp.path());
    let server = start(&log);
    let host = server.host();
    // 4 MiB of one header, sent until the server stops reading
    for _ in 0..4 {
        let mut s = server.connect();
        let _ = write!(
            s,
            "GET /state?token={} HTTP/1.1\r\nHost: {host}\r\nX-Pad: ",
            server.token
        );
        let chunk = vec![b'a'; 64 * 1024];
        for _ in 0..64 {
            if s.write_all(&chunk).is_err() {
                break;
            }
        }
        let status = status_line(&mut s);
        assert!(matches!(status, None | Some(431)), "{status:?}");
        server.assert_serves("a 4 MiB header");
    }
    let many: String = (0..200).map(|i| format!("X-H{i}: v\r\n")).collect();
    let head = format!(
        "GET /state?token={} HTTP/1.1\r\nHost: {host}\r\n{many}\r\n",
        server.token
    );
    let status = server.status_of(&head);
    assert!(matches!(status, None | Some(431)), "{status:?}");
    server.assert_serves("200 headers");
}

/// More connections than the server takes: the extra ones are closed, and once the
/// crowd leaves a legitimate request is served.
#[test]
fn a_crowd_of_connections_is_bounded() {
    let tmp = crate::support::scratch();
    let log = demo_log(tmp.path());
    let server = start(&log);
    let crowd: Vec<TcpStream> = (0..100).map(|_| server.connect()).collect();
    std::thread::sleep(Duration::from_millis(200));
    drop(crowd);
    std::thread::sleep(Duration::from_millis(200));
    server.assert_serves("100 connections at once");
}

/// Ctrl-C stops the server within two seconds while attackers hold connections open
/// with stalled bodies and headers, and the log is left as it was.
#[cfg(unix)]
#[test]
fn ctrl_c_stops_the_server_whatever_is_open() {
    let tmp = crate::support::scratch();
    let log = demo_log(tmp.path());
    let before = std::fs::read(&log).unwrap();
    let mut server = start(&log);
    let host = server.host();
    let mut held = Vec::new();
    for i in 0..8 {
        let mut s = server.connect();
        let head = if i % 2 == 0 {
            format!(
                "POST /reading?token={} HTTP/1.1\r\nHost: {host}\r\nContent-Length: 100000\r\n\r\n",
                server.token
            )
        } else {
            "GET /state?token=".to_string()
        };
        s.write_all(head.as_bytes()).unwrap();
        held.push(s);
    }
    server.assert_serves("8 stalled connections");
    let pid = server.child.id().to_string();
    assert!(Command::new("kill")
        .args(["-INT", &pid])
        .status()
        .unwrap()
        .success());
    let start = Instant::now();
    let code = loop {
        if let Some(s) = server.child.try_wait().unwrap() {
            break s;
        }
        assert!(
            start.elapsed() < Duration::from_secs(2),
            "pim walk did not stop within 2 s"
        );
        std::thread::sleep(Duration::from_millis(20));
    };
    assert!(code.success(), "{code:?}");
    drop(held);
    assert_eq!(std::fs::read(&log).unwrap(), before);
}
