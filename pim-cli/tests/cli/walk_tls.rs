//! `pim walk` on the site's network: bound to 0.0.0.0 it serves HTTPS only, with a
//! certificate it keeps between runs; the printed QR code is the printed address.
//! Reached here on 127.0.0.1 under a name given by `--name` (as a phone reaches the
//! machine by its network address), trusting the certificate the server kept.

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, ChildStderr, Command, Stdio};
use std::sync::Arc;
use std::time::Duration;

use rustls::pki_types::pem::PemObject;
use rustls::pki_types::{CertificateDer, ServerName};

use crate::support::{field_log, pim_bin, scratch};

struct Server {
    child: Child,
    url: String,
    port: u16,
    token: String,
    /// What the server printed on standard error up to the fingerprint's line.
    told: String,
    _stderr: BufReader<ChildStderr>,
}

impl Drop for Server {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn start(log: &Path, qr: &Path) -> Server {
    let mut child = Command::new(pim_bin())
        .args([
            "walk",
            "--listen",
            "0.0.0.0:0",
            "--name",
            "walk.test",
            "--log",
        ])
        .arg(log)
        .arg("--qr")
        .arg(qr)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut url = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut url)
        .unwrap();
    let url = url.trim().to_string();
    let mut stderr = BufReader::new(child.stderr.take().unwrap());
    let mut told = String::new();
    while !told.contains("Accept it once") {
        if stderr.read_line(&mut told).unwrap() == 0 {
            panic!("pim walk ended: {told}");
        }
    }
    let authority = url
        .trim_start_matches("https://")
        .split('/')
        .next()
        .unwrap();
    let port = authority.rsplit(':').next().unwrap().parse().unwrap();
    let token = url.split("token=").nth(1).unwrap().to_string();
    Server {
        child,
        url,
        port,
        token,
        told,
        _stderr: stderr,
    }
}

/// A GET of `/` over TLS to 127.0.0.1 as `walk.test`, trusting `cert` only; the
/// answer and the certificate the server showed.
fn https_get(port: u16, token: &str, cert: CertificateDer<'static>) -> (String, Vec<u8>) {
    let mut roots = rustls::RootCertStore::empty();
    roots.add(cert).unwrap();
    let provider = Arc::new(rustls::crypto::ring::default_provider());
    let config = rustls::ClientConfig::builder_with_provider(provider)
        .with_safe_default_protocol_versions()
        .unwrap()
        .with_root_certificates(roots)
        .with_no_client_auth();
    let name = ServerName::try_from("walk.test").unwrap();
    let connection = rustls::ClientConnection::new(Arc::new(config), name).unwrap();
    let tcp = TcpStream::connect(("127.0.0.1", port)).unwrap();
    tcp.set_read_timeout(Some(Duration::from_secs(30))).unwrap();
    let mut tls = rustls::StreamOwned::new(connection, tcp);
    write!(
        tls,
        "GET /?token={token} HTTP/1.1\r\nHost: walk.test:{port}\r\nConnection: close\r\n\r\n"
    )
    .unwrap();
    let mut answer = Vec::new();
    let _ = tls.read_to_end(&mut answer);
    let shown = tls.conn.peer_certificates().unwrap()[0].to_vec();
    (String::from_utf8_lossy(&answer).into_owned(), shown)
}

fn sha256_hex(der: &[u8]) -> String {
    let d = ring::digest::digest(&ring::digest::SHA256, der);
    d.as_ref()
        .iter()
        .map(|b| format!("{b:02X}"))
        .collect::<Vec<_>>()
        .join(":")
}

/// Reads the QR code printed on the terminal (one character per module across, two
/// modules down: U+2588 both dark, U+2580 upper, U+2584 lower) back into modules and
/// decodes it with rqrr (a QR decoder independent of the encoder).
fn decode_terminal_qr(told: &str) -> String {
    let rows: Vec<Vec<char>> = told
        .lines()
        .filter(|l| l.contains(['\u{2588}', '\u{2580}', '\u{2584}']))
        .map(|l| l.chars().collect())
        .collect();
    assert!(!rows.is_empty(), "no QR code printed: {told}");
    let width = rows.iter().map(Vec::len).max().unwrap();
    let mut modules = Vec::new();
    for row in &rows {
        let mut upper = vec![false; width];
        let mut lower = vec![false; width];
        for (i, c) in row.iter().enumerate() {
            upper[i] = matches!(c, '\u{2588}' | '\u{2580}');
            lower[i] = matches!(c, '\u{2588}' | '\u{2584}');
        }
        modules.push(upper);
        modules.push(lower);
    }
    // four light modules of margin around, four pixels a module
    let (scale, margin) = (4, 4);
    let (w, h) = (
        (width + 2 * margin) * scale,
        (modules.len() + 2 * margin) * scale,
    );
    let mut image = rqrr::PreparedImage::prepare_from_greyscale(w, h, |x, y| {
        let (mx, my) = (x / scale, y / scale);
        let dark = mx >= margin
            && my >= margin
            && modules
                .get(my - margin)
                .and_then(|r| r.get(mx - margin))
                .copied()
                .unwrap_or(false);
        if dark {
            0
        } else {
            255
        }
    });
    let grids = image.detect_grids();
    assert_eq!(grids.len(), 1, "one QR code expected");
    grids[0].decode().unwrap().1
}

#[test]
fn network_walk_serves_https_with_a_kept_certificate_and_a_qr_code() {
    let dir = scratch();
    let log = dir.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    let qr = dir.path().join("address.svg");
    let tls_dir = dir.path().join("pim-walk-tls");

    let first = start(&log, &qr);
    assert!(first.url.starts_with("https://"), "{}", first.url);
    assert!(first.told.contains("new: phones accept it again"));
    let cert_pem = std::fs::read(tls_dir.join("cert.pem")).unwrap();
    let cert = CertificateDer::from_pem_slice(&cert_pem).unwrap();
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let mode = std::fs::metadata(tls_dir.join("key.pem"))
            .unwrap()
            .permissions()
            .mode();
        assert_eq!(mode & 0o777, 0o600, "the private key is its owner's only");
    }

    // HTTPS to the page, by a name given with --name, trusting the kept certificate
    let (answer, shown) = https_get(first.port, &first.token, cert.clone());
    assert!(answer.starts_with("HTTP/1.1 200"), "{answer:.200}");
    assert!(answer.contains("<html"), "the page");
    let fingerprint = sha256_hex(&shown);
    assert!(
        first.told.contains(&fingerprint),
        "the printed fingerprint is the certificate's: {fingerprint} in {}",
        first.told
    );

    // plain HTTP to the same port: refused, no page
    let mut plain = TcpStream::connect(("127.0.0.1", first.port)).unwrap();
    plain
        .set_read_timeout(Some(Duration::from_secs(10)))
        .unwrap();
    // (the server may answer and close before the whole request is written: a write
    // error or an empty read is a refusal too, though its 400 is what a browser sees)
    let _ = write!(
        plain,
        "GET /?token={} HTTP/1.1\r\nHost: 127.0.0.1:{}\r\n\r\n",
        first.token, first.port
    );
    let mut answer = String::new();
    let _ = plain.read_to_string(&mut answer);
    assert!(!answer.contains("<html"), "{answer}");
    assert!(
        answer.is_empty() || (answer.starts_with("HTTP/1.1 400") && answer.contains("HTTPS only")),
        "{answer}"
    );

    // the QR code on the terminal, and the one written, are the address
    assert_eq!(decode_terminal_qr(&first.told), first.url);
    let svg = std::fs::read_to_string(&qr).unwrap();
    assert!(svg.contains("<svg"));
    drop(first);

    // a second run keeps the certificate
    let second = start(&log, &qr);
    assert!(!second.told.contains("new: phones accept it again"));
    assert_eq!(std::fs::read(tls_dir.join("cert.pem")).unwrap(), cert_pem);
    let (answer, shown_again) = https_get(second.port, &second.token, cert);
    assert!(answer.starts_with("HTTP/1.1 200"), "{answer:.200}");
    assert_eq!(shown_again, shown);
}

#[test]
fn a_name_that_is_not_a_host_name_is_refused() {
    let dir = scratch();
    let log = dir.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    let out = Command::new(pim_bin())
        .args([
            "walk",
            "--listen",
            "0.0.0.0:0",
            "--name",
            "bad name/",
            "--log",
        ])
        .arg(&log)
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--name"));
    assert!(!dir.path().join("pim-walk-tls").exists());
}
