//! What is written to a field log is what its reader accepts: notes with control
//! characters, text that is not UTF-8 or a note past the limit are refused before
//! writing, naming the field, by `pim log` and the walk page alike, and the log stays
//! readable. Logs that are links or not regular files are refused, and no message
//! quotes another file's content.

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use crate::support::{field_log, pim, pim_bin, stderr_of};

fn log_with_note(file: &Path, note: &str) -> std::process::Output {
    pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1025",
        "--lon",
        "-122.4132",
        "--bearing-deg",
        "347.1",
        "--time",
        "2026-11-28T10:40:00Z",
        "--note",
        note,
    ])
}

fn fix_reads(file: &Path) {
    let o = pim(&["fix", "--log", file.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr_of(&o));
}

/// `pim log` refuses a note the reader would refuse, naming --note, and writes nothing.
#[test]
fn pim_log_refuses_a_note_the_reader_would_refuse() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &file).unwrap();
    let before = std::fs::read(&file).unwrap();
    let long = "x".repeat(70_000);
    for (note, want) in [
        ("bell\u{7}", "U+0007"),
        ("esc\u{1b}[2J", "U+001B"),
        ("two\nlines", "one line"),
        ("c1\u{85}", "U+0085"),
        (long.as_str(), "at most 4096 bytes"),
    ] {
        let o = log_with_note(&file, note);
        assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
        let err = stderr_of(&o);
        assert!(err.contains("--note") && err.contains(want), "{err}");
        assert!(err.len() < 600, "the message does not repeat the note");
        assert_eq!(std::fs::read(&file).unwrap(), before);
        fix_reads(&file);
    }
    // a note at the limit is written and read back
    let o = log_with_note(&file, &"y".repeat(4096));
    assert!(o.status.success(), "{}", stderr_of(&o));
    fix_reads(&file);
}

/// The reader refuses a note with a control character in a file, naming the line and
/// the field, with the same words.
#[test]
fn the_reader_names_a_bad_note() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let mut text = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    text.push_str("2026-11-28T10:40:00Z,45.1025,-122.4132,347.1,true,,,bell\u{7}\n");
    std::fs::write(&file, &text).unwrap();
    let o = pim(&["fix", "--log", file.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    let err = stderr_of(&o);
    assert!(
        err.contains("line 10") && err.contains("field `note`") && err.contains("U+0007"),
        "{err}"
    );
}

#[cfg(unix)]
fn mkfifo(path: &Path) {
    assert!(Command::new("mkfifo").arg(path).status().unwrap().success());
}

/// A log that is a symbolic link, a FIFO or a directory is refused (exit 4) without
/// writing through it or blocking on it.
#[cfg(unix)]
#[test]
fn links_and_special_files_are_refused_as_logs() {
    let tmp = crate::support::scratch();
    let target = tmp.path().join("real.csv");
    std::fs::copy(field_log("walk.csv"), &target).unwrap();
    let before = std::fs::read(&target).unwrap();
    let link = tmp.path().join("walk.csv");
    std::os::unix::fs::symlink(&target, &link).unwrap();
    let o = log_with_note(&link, "through a link");
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("symbolic link"), "{}", stderr_of(&o));
    assert_eq!(std::fs::read(&target).unwrap(), before);

    let fifo = tmp.path().join("fifo.csv");
    mkfifo(&fifo);
    let start = Instant::now();
    let o = log_with_note(&fifo, "into a FIFO");
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("not a regular file"),
        "{}",
        stderr_of(&o)
    );
    assert!(start.elapsed() < Duration::from_secs(10));

    let o = log_with_note(tmp.path(), "into a directory");
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));

    for log in [&link, &fifo] {
        let o = pim(&["walk", "--log", log.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    }
}

struct Walk(Child);

impl Drop for Walk {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// One request to the walk server: (status, body).
fn request(port: u16, head_and_body: &str) -> (u16, String) {
    let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(20))).unwrap();
    s.write_all(head_and_body.as_bytes()).unwrap();
    let mut answer = String::new();
    let _ = s.read_to_string(&mut answer);
    let status = answer.get(9..12).and_then(|c| c.parse().ok()).unwrap_or(0);
    let body = answer
        .split_once("\r\n\r\n")
        .map(|(_, b)| b.to_string())
        .unwrap_or_default();
    (status, body)
}

/// The page refuses the same notes beside the note field (NUL, text that is not UTF-8,
/// a note past the limit), and the log stays readable; a log replaced by a link to a
/// private file while serving is refused without showing that file.
#[cfg(unix)]
#[test]
fn the_page_refuses_bad_notes_and_a_swapped_in_link() {
    let tmp = crate::support::scratch();
    let log = tmp.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    let before = std::fs::read(&log).unwrap();
    let mut child = Command::new(pim_bin())
        .args(["walk", "--log"])
        .arg(&log)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    let _walk = Walk(child);
    let address = first.trim();
    let port: u16 = address
        .trim_start_matches("http://127.0.0.1:")
        .split('/')
        .next()
        .unwrap()
        .parse()
        .unwrap();
    let token = address.split("token=").nth(1).unwrap();
    let post = |path: &str, body: &str| {
        request(
            port,
            &format!(
                "POST {path}?token={token} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nContent-Type: application/x-www-form-urlencoded\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{body}",
                body.len()
            ),
        )
    };
    let long = "n".repeat(5000);
    for (note, want) in [
        ("a%00b", "U+0000"),
        ("%ff%fe", "UTF-8"),
        ("a%0Db", "one line"),
        (long.as_str(), "4096 bytes"),
    ] {
        let (status, body) = post(
            "/reading",
            &format!("lat=45.1025&lon=-122.4132&bearing_deg=347.1&note={note}"),
        );
        assert_eq!(status, 422, "{note}: {body}");
        let v: serde_json::Value = serde_json::from_str(&body).unwrap();
        assert_eq!(v["error"]["field"], "note", "{body}");
        assert!(
            v["error"]["message"].as_str().unwrap().contains(want),
            "{body}"
        );
        assert_eq!(std::fs::read(&log).unwrap(), before);
    }
    fix_reads(&log);

    // the log replaced by a link to a private file
    let private = tmp.path().join("private.txt");
    std::fs::write(&private, "SECRET-FIRST-LINE\nmore\n").unwrap();
    std::fs::remove_file(&log).unwrap();
    std::os::unix::fs::symlink(&private, &log).unwrap();
    let (status, body) = request(
        port,
        &format!(
            "GET /state?token={token} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nConnection: close\r\n\r\n"
        ),
    );
    assert_eq!(status, 200, "{body}");
    assert!(
        body.contains("symbolic link") && !body.contains("SECRET"),
        "{body}"
    );
    let (status, body) = post("/reading", "lat=45.1025&lon=-122.4132&bearing_deg=10");
    assert_eq!(status, 500, "{body}");
    assert!(!body.contains("SECRET"), "{body}");
    let (status, body) = post("/undo", "line=2&row=x");
    assert_eq!(status, 409, "{body}");
    assert_eq!(
        std::fs::read_to_string(&private).unwrap(),
        "SECRET-FIRST-LINE\nmore\n"
    );
    assert!(std::fs::symlink_metadata(&log)
        .unwrap()
        .file_type()
        .is_symlink());
}

/// A sign together with a hemisphere letter is refused as contradictory on the command
/// line, in a field log and in an emitter file (common practice: a hemisphere letter
/// carries the sign, so `-45 06.152 S` says it twice or contradicts itself).
#[test]
fn a_sign_and_a_hemisphere_letter_are_refused() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    for (lat, lon) in [("-45 06.152 S", "-122.4132"), ("45.1025", "+122 24 47.5 W")] {
        let o = pim(&[
            "log",
            file.to_str().unwrap(),
            "--lat",
            lat,
            "--lon",
            lon,
            "--bearing-deg",
            "10",
        ]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
        assert!(
            stderr_of(&o).contains("both a sign and a hemisphere letter"),
            "{}",
            stderr_of(&o)
        );
        assert!(!file.exists());
    }
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45 06.152 S",
        "--lon",
        "-122.4132",
        "--bearing-deg",
        "10",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(std::fs::read_to_string(&file)
        .unwrap()
        .contains(",-45.1025333,"));

    let text = std::fs::read_to_string(field_log("walk.csv"))
        .unwrap()
        .replacen("45.102534", "\"-45 06.152 N\"", 1);
    std::fs::write(&file, text).unwrap();
    let o = pim(&["fix", "--log", file.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("line 2") && stderr_of(&o).contains("hemisphere letter"),
        "{}",
        stderr_of(&o)
    );

    let emitters = tmp.path().join("emitters.csv");
    let text = std::fs::read_to_string(field_log("emitters.csv"))
        .unwrap()
        .replacen("-122.414033", "\"-122 24 50.5 W\"", 1);
    std::fs::write(&emitters, text).unwrap();
    let o = pim(&[
        "explain",
        "146.34",
        "--emitters",
        emitters.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("hemisphere letter"),
        "{}",
        stderr_of(&o)
    );
}
