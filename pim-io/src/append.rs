//! Appending one row to a CSV log so that nothing is lost or torn: the row goes down in a
//! single write under an exclusive lock, after a check that the file ends with a line end,
//! and is flushed to the disk before the caller reports success. A file that does not
//! exist yet is created with its header in the same write.
//!
//! Several writers at once interleave whole rows only (the lock serialises them); a writer
//! killed at any moment leaves either its whole row or none (one `write` of a short
//! buffer to a regular file is not split by a signal). Readers that share the file take a
//! shared lock while they read.

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

/// The header line of an existing log (without its line end), or `None` for an empty
/// file, and whether the file ends with a line end. Reads under the caller's lock.
fn inspect(file: &mut File, path: &Path) -> Result<(Option<String>, bool, u64)> {
    let len = file.metadata().map_err(|e| io_err(path, &e))?.len();
    if len == 0 {
        return Ok((None, true, 0));
    }
    file.seek(SeekFrom::Start(0))
        .map_err(|e| io_err(path, &e))?;
    let mut text = Vec::with_capacity(len.min(1 << 20) as usize);
    file.read_to_end(&mut text).map_err(|e| io_err(path, &e))?;
    let ends_with_newline = text.last() == Some(&b'\n');
    let lines = text.iter().filter(|&&b| b == b'\n').count() as u64;
    let head_end = text.iter().position(|&b| b == b'\n').unwrap_or(text.len());
    let head = String::from_utf8_lossy(&text[..head_end])
        .trim_start_matches('\u{feff}')
        .trim_end_matches('\r')
        .to_string();
    Ok((Some(head), ends_with_newline, lines))
}

/// Appends `row` (one CSV line without its line end) to the log at `path`, creating it
/// with `header` when missing or empty. `row_for_header` turns the row into the column
/// order of an existing file's header (or refuses it); it is called with that header.
pub fn append_row(
    path: &Path,
    header: &str,
    row_for_header: &dyn Fn(&str) -> Result<String>,
) -> Result<Appended> {
    let existed = path.exists();
    let mut file = OpenOptions::new()
        .read(true)
        .append(true)
        .create(true)
        .open(path)
        .map_err(|e| io_err(path, &e))?;
    file.lock().map_err(|e| io_err(path, &e))?;
    let (head, ends_with_newline, lines) = inspect(&mut file, path)?;
    let source = path.display().to_string();
    let (text, created, line) = match head {
        None => {
            let row = row_for_header(header)?;
            (format!("{header}\n{row}\n"), true, 2)
        }
        Some(head) => {
            if !ends_with_newline {
                return Err(Error::input(
                    Place::new(source).at_line(lines + 1),
                    "the last row has no line end: it may be torn by an interrupted write; mend it before adding readings",
                ));
            }
            let row = row_for_header(&head)?;
            (format!("{row}\n"), false, lines + 1)
        }
    };
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

/// Reads a whole file under a shared lock, so that no half-written row is seen.
pub fn read_locked(path: &Path) -> Result<Vec<u8>> {
    let mut file = File::open(path).map_err(|e| io_err(path, &e))?;
    file.lock_shared().map_err(|e| io_err(path, &e))?;
    let mut bytes = Vec::new();
    file.read_to_end(&mut bytes).map_err(|e| io_err(path, &e))?;
    let _ = file.unlock();
    Ok(bytes)
}
