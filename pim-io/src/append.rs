//! Appending one row to a CSV log so that nothing is lost or torn: the row goes down in a
//! single write under an exclusive lock, after a check that the file ends with a line end,
//! and is flushed to the disk before the caller reports success. A file that does not
//! exist yet is created with its header in the same write.
//!
//! Several writers at once interleave whole rows only (the lock serialises them); a writer
//! killed at any moment leaves either its whole row or none (one `write` of a short
//! buffer to a regular file is not split by a signal). Readers that share the file take a
//! shared lock while they read.
//!
//! Taking back the last row ([`remove_last_row`]) happens under the same lock and replaces
//! the file in one atomic rename of a synced copy in the same directory, so a crash leaves
//! either the old log or the new one. A writer that was waiting for the lock on the
//! replaced file notices that the path now names another file and starts again on it.
//!
//! A log must be a regular file named directly: a symbolic link is refused (appends
//! would go through it while an undo replaced the link itself, splitting the walk
//! between two files), and so are FIFOs, devices and directories (a FIFO would block
//! the reader for ever). The log is opened without following a link and without
//! blocking, and checked once open, so a link or a FIFO put in its place later is
//! refused too. Refusals name the path and never quote what another file holds.

use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::Path;

use pim_core::error::{Error, Place, Result};

/// What an append did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Appended {
    /// The file was created (with its header).
    pub created: bool,
    /// The line number the row went to (header = line 1).
    pub line: u64,
}

fn io_err(path: &Path, e: &std::io::Error) -> Error {
    Error::io(path.display().to_string(), e)
}

/// A log path refused for what it names (exit code 4, as a file that cannot be written).
fn not_a_log(path: &Path, what: &str) -> Error {
    Error {
        class: pim_core::ErrorClass::Io,
        place: Some(Place::new(path.display().to_string())),
        message: format!("{what}; a field log must be a regular file named directly"),
    }
}

/// Refuses a log path that is a symbolic link, or names a FIFO, a device, a directory
/// or anything else than a regular file. A path that names nothing yet is fine (the
/// first append creates the log).
pub fn check_log_path(path: &Path) -> Result<()> {
    match std::fs::symlink_metadata(path) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(io_err(path, &e)),
        Ok(m) => check_kind(path, &m),
    }
}

fn check_kind(path: &Path, m: &std::fs::Metadata) -> Result<()> {
    let t = m.file_type();
    if t.is_symlink() {
        return Err(not_a_log(
            path,
            "is a symbolic link: give the file it points to instead",
        ));
    }
    if t.is_dir() {
        return Err(not_a_log(path, "is a directory"));
    }
    if !t.is_file() {
        return Err(not_a_log(
            path,
            "is not a regular file (a FIFO, a socket or a device)",
        ));
    }
    Ok(())
}

/// Opens a log without following a symbolic link and without blocking on a FIFO, then
/// checks that what was opened is a regular file.
fn open_log(path: &Path, options: &mut OpenOptions) -> Result<File> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(libc::O_NOFOLLOW | libc::O_NONBLOCK);
    }
    let file = match options.open(path) {
        Ok(f) => f,
        Err(e) => {
            // O_NOFOLLOW on a link: ELOOP; say what it is.
            check_log_path(path)?;
            return Err(io_err(path, &e));
        }
    };
    let m = file.metadata().map_err(|e| io_err(path, &e))?;
    check_kind(path, &m)?;
    Ok(file)
}

/// What an existing log looks like: its header line (the first line that is neither
/// blank nor a `#` comment, without its line end), its dialect (delimiter and line end),
/// whether the file ends with a line end, and how many lines it has.
struct Shape {
    header: Option<String>,
    delimiter: u8,
    line_end: &'static str,
    ends_with_line_end: bool,
    lines: u64,
}

/// Reads the whole log under the caller's lock and describes it ([`Shape`]).
fn inspect(file: &mut File, path: &Path) -> Result<Shape> {
    let len = file.metadata().map_err(|e| io_err(path, &e))?.len();
    let mut shape = Shape {
        header: None,
        delimiter: b',',
        line_end: "\n",
        ends_with_line_end: true,
        lines: 0,
    };
    if len == 0 {
        return Ok(shape);
    }
    file.seek(SeekFrom::Start(0))
        .map_err(|e| io_err(path, &e))?;
    let mut text = Vec::with_capacity(len.min(1 << 20) as usize);
    file.read_to_end(&mut text).map_err(|e| io_err(path, &e))?;
    let body = text.strip_prefix(b"\xef\xbb\xbf").unwrap_or(&text);
    shape.ends_with_line_end = matches!(body.last(), Some(b'\n' | b'\r'));
    shape.lines = crate::text::count_line_ends(body) + u64::from(!shape.ends_with_line_end);
    // the first line end written decides the dialect's line end
    if let Some(i) = body.iter().position(|&b| b == b'\n' || b == b'\r') {
        shape.line_end = match (body[i], body.get(i + 1)) {
            (b'\r', Some(b'\n')) => "\r\n",
            (b'\r', _) => "\r",
            _ => "\n",
        };
    }
    let header = body.split(|&b| b == b'\n' || b == b'\r').find(|line| {
        let t = line.trim_ascii();
        !t.is_empty() && !t.starts_with(b"#")
    });
    if let Some(h) = header {
        shape.delimiter = crate::table::sniff_delimiter(h);
        shape.header = Some(String::from_utf8_lossy(h).to_string());
    }
    Ok(shape)
}

/// Appends one row to the log at `path` in the log's own dialect (its delimiter, quoting
/// and line end), creating the log with `header` (comma-separated, LF) when it is missing
/// or empty. `row_for_header` gives the row's cells in the column order of the log's
/// header (or refuses the row); it is called with that header and its delimiter.
pub fn append_row(
    path: &Path,
    header: &str,
    row_for_header: &dyn Fn(&str, u8) -> Result<Vec<String>>,
) -> Result<Appended> {
    let existed = path.exists();
    let mut file = open_locked(path, true)?;
    let shape = inspect(&mut file, path)?;
    let source = path.display().to_string();
    let record = |cells: &[String], delimiter: u8, line_end: &str| {
        let row = crate::text::csv_record(cells, delimiter, line_end == "\r\n");
        if line_end == "\r" {
            format!("{}\r", row.trim_end_matches('\n'))
        } else {
            row
        }
    };
    let (text, created, line) = match &shape.header {
        None if shape.lines == 0 || !existed => {
            let cells = row_for_header(header, b',')?;
            (format!("{header}\n{}", record(&cells, b',', "\n")), true, 2)
        }
        None => {
            return Err(Error::input(
                Place::new(source),
                "the log has no header line (only blank or comment lines); add one such as time,lat,lon,bearing_deg",
            ))
        }
        Some(head) => {
            if !shape.ends_with_line_end {
                return Err(Error::input(
                    Place::new(source).at_line(shape.lines),
                    "the last row has no line end: it may be torn by an interrupted write; end it with a line end if it is whole, or delete it, before adding readings",
                ));
            }
            let cells = row_for_header(head, shape.delimiter)?;
            (
                record(&cells, shape.delimiter, shape.line_end),
                false,
                shape.lines + 1,
            )
        }
    };
    // What the reader would refuse is never written.
    if let Some(long) = text
        .split(['\n', '\r'])
        .find(|l| l.len() > crate::table::MAX_LINE_BYTES)
    {
        return Err(Error::input(
            Place::new(source),
            format!(
                "the row would be {} bytes long, over the reader's limit of {} bytes a line; shorten its text",
                long.len(),
                crate::table::MAX_LINE_BYTES
            ),
        ));
    }
    let before = file.metadata().map_err(|e| io_err(path, &e))?.len();
    if let Err(e) = file
        .write_all(text.as_bytes())
        .and_then(|_| file.sync_data())
    {
        // A short write (a full disk) must not leave half a row behind.
        let _ = file.set_len(before);
        let _ = file.sync_data();
        return Err(io_err(path, &e));
    }
    if !existed {
        if let Some(dir) = path.parent() {
            let dir = if dir.as_os_str().is_empty() {
                Path::new(".")
            } else {
                dir
            };
            if let Ok(d) = File::open(dir) {
                let _ = d.sync_all();
            }
        }
    }
    let _ = file.unlock();
    Ok(Appended { created, line })
}

/// Opens `path` (for appending, creating it, when `append`; else for reading and
/// writing) and takes the exclusive lock, making sure the lock is held on the file the
/// path names now: a row taken back meanwhile replaced the file by a new one.
fn open_locked(path: &Path, append: bool) -> Result<File> {
    loop {
        let file = open_log(
            path,
            OpenOptions::new()
                .read(true)
                .write(!append)
                .append(append)
                .create(append),
        )?;
        file.lock().map_err(|e| io_err(path, &e))?;
        if same_file(&file, path)? {
            return Ok(file);
        }
    }
}

#[cfg(unix)]
fn same_file(file: &File, path: &Path) -> Result<bool> {
    use std::os::unix::fs::MetadataExt;
    let held = file.metadata().map_err(|e| io_err(path, &e))?;
    match std::fs::symlink_metadata(path) {
        Ok(now) => Ok(held.dev() == now.dev() && held.ino() == now.ino()),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(false),
        Err(e) => Err(io_err(path, &e)),
    }
}

#[cfg(not(unix))]
fn same_file(_file: &File, _path: &Path) -> Result<bool> {
    // Elsewhere a file open in another process cannot be renamed over.
    Ok(true)
}

/// The row a [`remove_last_row`] took out.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Removed {
    /// Its line number (header = line 1).
    pub line: u64,
    /// The row as it stood, without its line end.
    pub row: String,
    /// The row's exact bytes with its line end, as they stood in the file (what
    /// [`restore_row`] puts back).
    pub bytes: Vec<u8>,
}

/// Where the last row of a log's text lies: its index among the lines, its byte range
/// without the line end, and where the line after it starts. `None` when there is no
/// row under the header.
fn last_row_span(text: &[u8]) -> Option<(usize, usize, usize, usize)> {
    // Lines with their byte ranges, in any line end (LF, CRLF or a lone CR), and where
    // the next line starts.
    let mut lines: Vec<(usize, usize, usize)> = Vec::new();
    let mut start = 0;
    let mut i = 0;
    while i < text.len() {
        if matches!(text[i], b'\n' | b'\r') {
            let end = i;
            i += if text[i] == b'\r' && text.get(i + 1) == Some(&b'\n') {
                2
            } else {
                1
            };
            lines.push((start, end, i));
            start = i;
        } else {
            i += 1;
        }
    }
    if start < text.len() {
        lines.push((start, text.len(), text.len()));
    }
    let is_row = |&(a, b, _): &(usize, usize, usize)| {
        let t = text[a..b].trim_ascii();
        let t = t.strip_prefix(b"\xef\xbb\xbf").unwrap_or(t);
        !t.is_empty() && !t.starts_with(b"#")
    };
    // The header (the first line that is neither blank nor a comment) is never taken.
    let header = lines.iter().position(is_row);
    let last = lines.iter().rposition(is_row);
    match (header, last) {
        (Some(h), Some(l)) if l > h => Some((l, lines[l].0, lines[l].1, lines[l].2)),
        _ => None,
    }
}

/// The last row of a log's text (what [`remove_last_row`] would take), if any.
pub fn last_row(text: &[u8]) -> Option<Removed> {
    let (index, start, end, next) = last_row_span(text)?;
    Some(row_at(text, index, start, end, next))
}

fn row_at(text: &[u8], index: usize, start: usize, end: usize, next: usize) -> Removed {
    Removed {
        line: index as u64 + 1,
        row: String::from_utf8_lossy(&text[start..end]).to_string(),
        bytes: text[start..next].to_vec(),
    }
}

/// Takes the last row out of the log at `path` under the exclusive lock and returns it.
/// The rest of the file is written to a new file in the same directory, synced, and
/// renamed over the log, so the log is whole at every moment. Refuses a log whose last
/// row has no line end (it may be torn) and one with no row under its header.
pub fn remove_last_row(path: &Path) -> Result<Removed> {
    remove_last_row_if(path, None)
}

/// [`remove_last_row`], refused (and nothing changed) unless the last row is still
/// `expected` (its line and text, as seen when the walker asked): a second tap, or a
/// reading added meanwhile, takes nothing.
pub fn remove_last_row_if(path: &Path, expected: Option<(u64, &str)>) -> Result<Removed> {
    let mut file = open_locked(path, false)?;
    let source = path.display().to_string();
    let mut text = Vec::new();
    file.read_to_end(&mut text).map_err(|e| io_err(path, &e))?;
    if text.last().is_some_and(|&b| !matches!(b, b'\n' | b'\r')) {
        return Err(Error::input(
            Place::new(source).at_line(crate::text::count_line_ends(&text) + 1),
            "the last row has no line end: it may be torn by an interrupted write; mend it before taking a reading back",
        ));
    }
    let Some((index, start, end, after)) = last_row_span(&text) else {
        return Err(Error::refused(format!(
            "{source} has no reading to take back"
        )));
    };
    let removed = row_at(&text, index, start, end, after);
    if let Some((line, row)) = expected {
        if removed.line != line || removed.row != row {
            return Err(Error::refused(format!(
                "the last reading of {source} is no longer the one on line {line} (taken back already, or another reading was saved); nothing was taken back"
            )));
        }
    }
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let mut temp = tempfile::NamedTempFile::new_in(dir).map_err(|e| io_err(path, &e))?;
    let permissions = file.metadata().map_err(|e| io_err(path, &e))?.permissions();
    // blank and comment lines after the row stay
    temp.write_all(&text[..start])
        .and_then(|_| temp.write_all(&text[after..]))
        .and_then(|_| temp.as_file().set_permissions(permissions))
        .and_then(|_| temp.as_file().sync_all())
        .map_err(|e| io_err(path, &e))?;
    temp.persist(path).map_err(|e| io_err(path, &e.error))?;
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
    let _ = file.unlock();
    Ok(removed)
}

/// Puts a row taken back ([`Removed::bytes`]) at the end of the log again, byte for
/// byte, in one write under the exclusive lock, as [`append_row`] does. Refuses a log
/// that is missing, has no header or whose last row has no line end.
pub fn restore_row(path: &Path, bytes: &[u8]) -> Result<Appended> {
    let mut file = open_locked(path, false)?;
    let shape = inspect(&mut file, path)?;
    let source = path.display().to_string();
    if shape.header.is_none() {
        return Err(Error::input(
            Place::new(source),
            "the log has no header line; the reading cannot be put back",
        ));
    }
    if !shape.ends_with_line_end {
        return Err(Error::input(
            Place::new(source).at_line(shape.lines),
            "the last row has no line end: it may be torn by an interrupted write; mend it before putting a reading back",
        ));
    }
    let before = file.metadata().map_err(|e| io_err(path, &e))?.len();
    if let Err(e) = file
        .seek(SeekFrom::End(0))
        .and_then(|_| file.write_all(bytes))
        .and_then(|_| file.sync_data())
    {
        let _ = file.set_len(before);
        let _ = file.sync_data();
        return Err(io_err(path, &e));
    }
    let _ = file.unlock();
    Ok(Appended {
        created: false,
        line: shape.lines + 1,
    })
}

/// Reads a whole file under a shared lock, so that no half-written row is seen.
pub fn read_locked(path: &Path) -> Result<Vec<u8>> {
    let mut file = open_log(path, OpenOptions::new().read(true))?;
    file.lock_shared().map_err(|e| io_err(path, &e))?;
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes).map_err(|e| io_err(path, &e))?;
    let _ = file.unlock();
    Ok(bytes)
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "time,lat,lon,bearing_deg";

    fn append(path: &Path, row: &str) -> Appended {
        let cells: Vec<String> = row.split(',').map(str::to_string).collect();
        append_row(path, HEADER, &move |_, _| Ok(cells.clone())).unwrap()
    }

    /// A row goes down in the log's own delimiter, quoting and line end, after a comment.
    #[test]
    fn appends_in_the_logs_dialect() {
        let dir = tempfile::tempdir().unwrap();
        for (text, want) in [
            ("# walk\r\nlat;lon;note\r\n1;2;x\r\n", "1;2;\"a;b\"\r\n"),
            ("lat\tlon\tnote\n", "1\t2\ta;b\n"),
            ("lat,lon,note\r1,2,x\r", "1,2,a;b\r"),
        ] {
            let path = dir.path().join("walk.csv");
            std::fs::write(&path, text).unwrap();
            let cells = vec!["1".to_string(), "2".to_string(), "a;b".to_string()];
            append_row(&path, HEADER, &move |_, _| Ok(cells.clone())).unwrap();
            let got = std::fs::read_to_string(&path).unwrap();
            assert_eq!(&got[text.len()..], want, "{text:?}");
        }
    }

    #[test]
    fn the_last_row_is_taken_back_whole() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("walk.csv");
        append(&path, "2026-11-30T10:00:00Z,51.5,-2.6,10");
        append(&path, "2026-11-30T10:05:00Z,51.6,-2.6,20");
        let removed = remove_last_row(&path).unwrap();
        assert_eq!(
            removed,
            Removed {
                line: 3,
                row: "2026-11-30T10:05:00Z,51.6,-2.6,20".into(),
                bytes: b"2026-11-30T10:05:00Z,51.6,-2.6,20\n".to_vec(),
            }
        );
        assert_eq!(
            std::fs::read_to_string(&path).unwrap(),
            format!("{HEADER}\n2026-11-30T10:00:00Z,51.5,-2.6,10\n")
        );
        // The next append goes on the replaced file, to the line the undone row had.
        assert_eq!(append(&path, "2026-11-30T10:09:00Z,51.7,-2.6,30").line, 3);
        remove_last_row(&path).unwrap();
        remove_last_row(&path).unwrap();
        let err = remove_last_row(&path).unwrap_err();
        assert_eq!(err.class, pim_core::ErrorClass::Refused);
        assert_eq!(
            std::fs::read_to_string(&path).unwrap(),
            format!("{HEADER}\n")
        );
        // Nothing but the log is left in the directory.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    /// CRLF and lone-CR logs lose their last row and keep their line ends; a comment
    /// after the row stays.
    #[test]
    fn the_last_row_is_taken_back_in_any_line_end() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("walk.csv");
        for (text, row, left) in [
            ("h\r\n1,2\r\n3,4\r\n", "3,4", "h\r\n1,2\r\n"),
            ("h\r1,2\r3,4\r", "3,4", "h\r1,2\r"),
            ("h\n1,2\n3,4\n# end\n\n", "3,4", "h\n1,2\n# end\n\n"),
        ] {
            std::fs::write(&path, text).unwrap();
            let removed = remove_last_row(&path).unwrap();
            assert_eq!((removed.line, removed.row.as_str()), (3, row), "{text:?}");
            assert_eq!(std::fs::read_to_string(&path).unwrap(), left, "{text:?}");
        }
        std::fs::write(&path, "# walk\r\nh\r\n").unwrap();
        assert_eq!(
            remove_last_row(&path).unwrap_err().class,
            pim_core::ErrorClass::Refused
        );
    }

    #[test]
    fn a_torn_last_row_is_not_taken_back() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("walk.csv");
        std::fs::write(&path, format!("{HEADER}\n1,2,3,4\n5,6")).unwrap();
        let err = remove_last_row(&path).unwrap_err();
        assert_eq!(err.place.unwrap().line, Some(3));
        assert_eq!(
            std::fs::read_to_string(&path).unwrap(),
            format!("{HEADER}\n1,2,3,4\n5,6")
        );
    }

    /// Appends and undos from many threads at once: every append that reported a line
    /// is either in the file or was taken back; nothing is torn or lost to a replaced file.
    #[test]
    fn appends_and_undos_at_once_lose_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("walk.csv");
        append(&path, "first,0,0,0");
        let removed = std::sync::Mutex::new(Vec::new());
        std::thread::scope(|s| {
            for t in 0..4 {
                let path = &path;
                let removed = &removed;
                s.spawn(move || {
                    for i in 0..20 {
                        append(path, &format!("t{t}r{i},0,0,0"));
                        if i % 5 == 4 {
                            if let Ok(r) = remove_last_row(path) {
                                removed.lock().unwrap().push(r.row);
                            }
                        }
                    }
                });
            }
        });
        let text = std::fs::read_to_string(&path).unwrap();
        let kept = text.lines().skip(1).count();
        assert_eq!(kept + removed.lock().unwrap().len(), 81);
    }

    /// A row taken back goes back byte for byte; a stale undo (a second tap) takes
    /// nothing.
    #[test]
    fn a_row_taken_back_is_restored_byte_for_byte() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("walk.csv");
        let text = "h\r\n1,2\r\n3,\"a \"\"b\"\"\"\r\n";
        std::fs::write(&path, text).unwrap();
        let seen = last_row(text.as_bytes()).unwrap();
        assert_eq!(seen.line, 3);
        let removed = remove_last_row_if(&path, Some((seen.line, &seen.row))).unwrap();
        assert_eq!(removed, seen);
        let again = remove_last_row_if(&path, Some((seen.line, &seen.row))).unwrap_err();
        assert_eq!(again.class, pim_core::ErrorClass::Refused);
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "h\r\n1,2\r\n");
        assert_eq!(restore_row(&path, &removed.bytes).unwrap().line, 3);
        assert_eq!(std::fs::read_to_string(&path).unwrap(), text);
    }
}
