//! The walk server's own certificate, so that a phone on the site's network gets a
//! secure context (browsers give geolocation and the compass only to HTTPS or loopback).
//!
//! The certificate is made once (rcgen, an ECDSA P-256 key) and kept in a folder
//! ([`default_dir`]: `pim-walk-tls` beside the log, or `--tls-dir`), so that a phone
//! that accepted it once accepts it on the next run too. It is made again only when it
//! does not name an address or name the server is asked to serve, or is near its end.
//! The folder holds `cert.pem`, `key.pem` (mode 0600) and `cert.txt` (its end and the
//! names it covers); each is written through the project's protected writer.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use pim_core::error::Error;
use pim_io::output::{write_private_files_atomically, Existing};
use rustls::pki_types::pem::PemObject;
use rustls::pki_types::{CertificateDer, PrivateKeyDer};

/// How long a certificate is valid: under the 825 days some phones accept for a server
/// certificate (common practice for self-made certificates).
const VALID_DAYS: i64 = 800;
/// A certificate is made again this many days before its end.
const RENEW_DAYS: i64 = 30;
/// The largest stored file read.
const MAX_FILE_BYTES: u64 = 64 * 1024;

/// The server's certificate and key, and what to tell the walker about them.
pub struct Identity {
    pub cert: CertificateDer<'static>,
    pub key: PrivateKeyDer<'static>,
    /// SHA-256 of the certificate (DER), as colon-separated hex.
    pub fingerprint: String,
    /// The folder it is kept in.
    pub dir: PathBuf,
    /// Whether it was made on this run (a phone must accept it again).
    pub made: bool,
}

/// The folder a walk's certificate is kept in by default: `pim-walk-tls` beside the log.
pub fn default_dir(log: &Path) -> PathBuf {
    match log.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.join("pim-walk-tls"),
        _ => PathBuf::from("pim-walk-tls"),
    }
}

/// SHA-256 of `der` as `AB:CD:…`, as browsers show a certificate's fingerprint.
pub fn fingerprint(der: &[u8]) -> String {
    let digest = ring::digest::digest(&ring::digest::SHA256, der);
    digest
        .as_ref()
        .iter()
        .map(|b| format!("{b:02X}"))
        .collect::<Vec<_>>()
        .join(":")
}

/// The kept certificate when it names every one of `names` and is not near its end;
/// otherwise a new one naming them (and the names the old one had), kept in `dir`.
pub fn load_or_make(dir: &Path, names: &[String], inputs: &[&Path]) -> Result<Identity, Error> {
    let now = time::OffsetDateTime::now_utc();
    let mut known = Vec::new();
    if let Some((until, stored)) = read_manifest(dir)? {
        if until - now > time::Duration::days(RENEW_DAYS)
            && names.iter().all(|n| stored.contains(n))
        {
            let cert = CertificateDer::from_pem_slice(&read_small(&dir.join("cert.pem"))?)
                .map_err(|e| stored_error(&dir.join("cert.pem"), &e))?;
            let key = PrivateKeyDer::from_pem_slice(&read_small(&dir.join("key.pem"))?)
                .map_err(|e| stored_error(&dir.join("key.pem"), &e))?;
            return Ok(Identity {
                fingerprint: fingerprint(&cert),
                cert,
                key,
                dir: dir.to_path_buf(),
                made: false,
            });
        }
        known = stored;
    }
    for n in names {
        if !known.contains(n) {
            known.push(n.clone());
        }
    }
    make(dir, &known, now, inputs)
}

fn make(
    dir: &Path,
    names: &[String],
    now: time::OffsetDateTime,
    inputs: &[&Path],
) -> Result<Identity, Error> {
    let failed = |e: rcgen::Error| Error::refused(format!("cannot make the certificate: {e}"));
    let mut params = rcgen::CertificateParams::new(names.to_vec()).map_err(failed)?;
    params
        .distinguished_name
        .push(rcgen::DnType::CommonName, "pim walk");
    params.not_before = now - time::Duration::days(1);
    params.not_after = now + time::Duration::days(VALID_DAYS);
    params.extended_key_usages = vec![rcgen::ExtendedKeyUsagePurpose::ServerAuth];
    let until = params.not_after.unix_timestamp();
    let key = rcgen::KeyPair::generate().map_err(failed)?;
    let cert = params.self_signed(&key).map_err(failed)?;
    let mut manifest = format!(
        "# pim walk: this folder's certificate, its end (Unix seconds) and the names it covers\nuntil {}\n",
        until
    );
    for n in names {
        manifest.push_str(n);
        manifest.push('\n');
    }
    // The folder only its owner may enter (made here when missing); the writer then
    // stages every file 0600 and renames it into place.
    #[cfg(unix)]
    if std::fs::symlink_metadata(dir).is_err() {
        use std::os::unix::fs::DirBuilderExt;
        std::fs::DirBuilder::new()
            .recursive(true)
            .mode(0o700)
            .create(dir)
            .map_err(|e| Error::io(dir.display().to_string(), &e))?;
    }
    write_private_files_atomically(
        dir,
        &[
            ("key.pem", key.serialize_pem().into_bytes()),
            ("cert.pem", cert.pem().into_bytes()),
            ("cert.txt", manifest.into_bytes()),
        ],
        inputs,
        Existing::Replace,
    )?;
    let der = cert.der().clone();
    Ok(Identity {
        fingerprint: fingerprint(&der),
        cert: der,
        key: PrivateKeyDer::Pkcs8(key.serialize_der().into()),
        dir: dir.to_path_buf(),
        made: true,
    })
}

/// The stored certificate's end and names, when the folder has one.
fn read_manifest(dir: &Path) -> Result<Option<(time::OffsetDateTime, Vec<String>)>, Error> {
    let path = dir.join("cert.txt");
    if std::fs::symlink_metadata(&path).is_err() {
        return Ok(None);
    }
    let text = String::from_utf8(read_small(&path)?)
        .map_err(|_| stored_error(&path, &"not UTF-8 text"))?;
    let mut until = None;
    let mut names = Vec::new();
    for line in text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.is_empty())
    {
        match line.strip_prefix("until ") {
            Some(t) => {
                let t = t
                    .trim()
                    .parse::<i64>()
                    .ok()
                    .and_then(|s| time::OffsetDateTime::from_unix_timestamp(s).ok())
                    .ok_or_else(|| stored_error(&path, &"field `until`: not a time"))?;
                until = Some(t);
            }
            None => names.push(line.trim().to_string()),
        }
    }
    let until = until.ok_or_else(|| stored_error(&path, &"no `until` line"))?;
    Ok(Some((until, names)))
}

fn read_small(path: &Path) -> Result<Vec<u8>, Error> {
    use std::io::Read;
    let shown = path.display().to_string();
    let file = std::fs::File::open(path).map_err(|e| Error::io(shown.clone(), &e))?;
    let mut bytes = Vec::new();
    file.take(MAX_FILE_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(shown.clone(), &e))?;
    if bytes.len() as u64 > MAX_FILE_BYTES {
        return Err(stored_error(path, &"larger than a certificate"));
    }
    Ok(bytes)
}

fn stored_error(path: &Path, why: &dyn std::fmt::Display) -> Error {
    Error::refused(format!(
        "{}: {why}; remove the folder {} to make a new certificate (phones must accept it again)",
        path.display(),
        path.parent().unwrap_or(Path::new(".")).display()
    ))
}

/// rustls's server settings for `identity`: TLS 1.2 and 1.3 by the `ring` provider,
/// HTTP/1.1 offered by ALPN.
pub fn server_config(identity: &Identity) -> Result<Arc<rustls::ServerConfig>, Error> {
    let failed = |e: rustls::Error| Error::refused(format!("cannot serve HTTPS: {e}"));
    let provider = Arc::new(rustls::crypto::ring::default_provider());
    let mut config = rustls::ServerConfig::builder_with_provider(provider)
        .with_safe_default_protocol_versions()
        .map_err(failed)?
        .with_no_client_auth()
        .with_single_cert(vec![identity.cert.clone()], identity.key.clone_key())
        .map_err(failed)?;
    config.alpn_protocols = vec![b"http/1.1".to_vec()];
    Ok(Arc::new(config))
}

/// This machine's address on the network that reaches outside, found by "connecting" a
/// UDP socket (which sends nothing) to a documentation address (RFC 5737 TEST-NET-1)
/// and reading the local address chosen; `None` when there is no such route. Done by
/// hand: the standard library has no interface listing, and a crate for it would
/// call system libraries.
pub fn lan_address() -> Option<std::net::IpAddr> {
    let socket = std::net::UdpSocket::bind(("0.0.0.0", 0)).ok()?;
    socket.connect(("192.0.2.1", 9)).ok()?;
    let ip = socket.local_addr().ok()?.ip();
    (!ip.is_unspecified() && !ip.is_loopback()).then_some(ip)
}
