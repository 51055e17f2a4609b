//! Writing a set of files into a directory all or nothing (a ticket: ticket.md, the
//! pictures, the exports), safe in a directory other people can write to.
//!
//! - Each file is first written under a random name created with create-new semantics
//!   (the tempfile crate: `O_CREAT | O_EXCL`, so no existing path and no planted link is
//!   ever opened), synced, then renamed into place. A rename replaces a link planted at
//!   the final name; it never writes through it.
//! - No file of the set may be one of the inputs (the same file by device and inode, or
//!   by canonical path): refused before anything is written.
//! - Files that already exist are replaced only when the caller allows it (`--force`);
//!   otherwise the refusal names them and nothing is written.
//! - All or nothing: the files being replaced are first moved aside; if any file cannot
//!   be written or renamed, the new files are removed, the old ones moved back, and no
//!   staging file is left behind.
//! - One writer per directory at a time: a lock file ([`LOCK_NAME`], created new, so
//!   only one process can make it) is held from the check of what exists to the last
//!   rename; a second writer is refused (exit code 4) rather than mixing its files with
//!   the first's. A lock left by a process that no longer runs is taken over.
//! - Files get the mode the user's umask gives a new file (0644 under umask 022), as
//!   any program's would: the staging file is created with 0666 less the umask.
//!
//! [`write_file_atomically`] gives one output file (a picture given by `--svg`) the
//! same protection.

use std::io::Write;
use std::path::{Path, PathBuf};

use pim_core::{Error, ErrorClass, Place};

/// The lock file a writer holds in the directory it writes into.
pub const LOCK_NAME: &str = ".pim-writing.lock";

/// The lock of a directory being written into: removed when dropped.
struct DirLock(PathBuf);

impl Drop for DirLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// Whether the process that wrote a lock (its id, the lock's content) still runs.
fn holder_runs(content: &str) -> bool {
    let Ok(pid) = content.trim().parse::<i32>() else {
        // a lock being written this instant, or not ours: taken as held
        return true;
    };
    #[cfg(unix)]
    {
        // SAFETY: kill with signal 0 only asks whether the process exists.
        let r = unsafe { libc::kill(pid, 0) };
        r == 0 || std::io::Error::last_os_error().raw_os_error() != Some(libc::ESRCH)
    }
    #[cfg(not(unix))]
    {
        let _ = pid;
        true
    }
}

/// Takes the directory's lock (create-new), or refuses naming the directory.
fn lock_dir(dir: &Path) -> Result<DirLock, Error> {
    let path = dir.join(LOCK_NAME);
    for _ in 0..2 {
        match std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&path)
        {
            Ok(mut f) => {
                let _ = write!(f, "{}", std::process::id());
                return Ok(DirLock(path));
            }
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                let content = std::fs::read_to_string(&path).unwrap_or_default();
                if holder_runs(&content) {
                    break;
                }
                // left by a process that ended: taken over
                let _ = std::fs::remove_file(&path);
            }
            Err(e) => return Err(Error::io(path.display().to_string(), &e)),
        }
    }
    Err(write_refused(
        dir.display().to_string(),
        format!(
            "another pim is writing into this directory (it holds {LOCK_NAME}); nothing was written: try again when it has finished"
        ),
    ))
}

/// Whether files that already exist may be replaced.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Existing {
    /// Refuse, naming the files that exist (the default).
    Refuse,
    /// Replace them (`--force`, or a folder the tool itself wrote and marked).
    Replace,
}

/// True when `a` and `b` are the same file: same device and inode, or same canonical path.
fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(ma), Ok(mb)) = (std::fs::metadata(a), std::fs::metadata(b)) {
            if ma.dev() == mb.dev() && ma.ino() == mb.ino() {
                return true;
            }
        }
    }
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(ca), Ok(cb)) => ca == cb,
        _ => false,
    }
}

fn write_refused(place: impl Into<String>, message: impl Into<String>) -> Error {
    Error {
        class: ErrorClass::Io,
        place: Some(Place::new(place)),
        message: message.into(),
    }
}

/// Checks, before anything is written, that no file of the set is one of `inputs` and,
/// under [`Existing::Refuse`], that none exists yet.
pub fn check_targets(
    dir: &Path,
    names: &[&str],
    inputs: &[&Path],
    existing: Existing,
) -> Result<(), Error> {
    let mut present = Vec::new();
    for name in names {
        let path = dir.join(name);
        if let Some(input) = inputs.iter().find(|i| same_file(&path, i)) {
            return Err(write_refused(
                path.display().to_string(),
                format!(
                    "is the input {}; choose another output directory, an input is never overwritten",
                    input.display()
                ),
            ));
        }
        if std::fs::symlink_metadata(&path).is_ok() {
            present.push(path.display().to_string());
        }
    }
    if existing == Existing::Refuse && !present.is_empty() {
        return Err(write_refused(
            dir.display().to_string(),
            format!(
                "a ticket is already there ({}); nothing was written: give --force to replace it, or another directory",
                present.join(", ")
            ),
        ));
    }
    Ok(())
}

/// A staging file's name pattern, and the mode a new file gets (`mode` less the umask:
/// 0666 for outputs, 0600 for a private key).
fn staging_builder(prefix: &str, mode: u32) -> tempfile::Builder<'_, 'static> {
    let mut b = tempfile::Builder::new();
    b.prefix(prefix).suffix(".part");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        b.permissions(std::fs::Permissions::from_mode(mode));
    }
    #[cfg(not(unix))]
    let _ = mode;
    b
}

/// Writes one output file (a picture given by `--svg`) with the protection of a set:
/// never one of `inputs` (even with `--force`), never through a link, staged and
/// renamed, an existing file replaced only under [`Existing::Replace`].
pub fn write_file_atomically(
    path: &Path,
    bytes: Vec<u8>,
    inputs: &[&Path],
    existing: Existing,
) -> Result<PathBuf, Error> {
    let (dir, name) = check_output(path, inputs, existing)?;
    let mut written = write_files_atomically(dir, &[(name, bytes)], inputs, Existing::Replace)?;
    Ok(written.pop().unwrap_or_else(|| path.to_path_buf()))
}

/// The checks of [`write_file_atomically`], to make before the work whose result it
/// writes: the path names a file, is none of `inputs`, and does not exist under
/// [`Existing::Refuse`]. Gives the directory and the file name.
pub fn check_output<'p>(
    path: &'p Path,
    inputs: &[&Path],
    existing: Existing,
) -> Result<(&'p Path, &'p str), Error> {
    let shown = path.display().to_string();
    let name = path
        .file_name()
        .and_then(|n| n.to_str())
        .ok_or_else(|| Error::refused(format!("{shown} names no file")))?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if let Some(input) = inputs.iter().find(|i| same_file(path, i)) {
        return Err(write_refused(
            shown,
            format!(
                "is the input {}; choose another name, an input is never overwritten",
                input.display()
            ),
        ));
    }
    if existing == Existing::Refuse && std::fs::symlink_metadata(path).is_ok() {
        return Err(write_refused(
            shown,
            "already exists; nothing was written: give --force to replace it, or another name",
        ));
    }
    Ok((dir, name))
}

/// A file staged under a random name, or a replaced file moved aside.
struct Moved {
    target: PathBuf,
    backup: Option<PathBuf>,
}

/// Writes `files` (name, content) into `dir` (created when missing) all or nothing, as
/// the module docs say; returns the paths written, in order.
pub fn write_files_atomically(
    dir: &Path,
    files: &[(&str, Vec<u8>)],
    inputs: &[&Path],
    existing: Existing,
) -> Result<Vec<PathBuf>, Error> {
    write_files_with_mode(dir, files, inputs, existing, 0o666)
}

/// [`write_files_atomically`] for files only their owner may read (a private key): each
/// is staged with mode 0600, so it is never readable by others, not even for a moment.
pub fn write_private_files_atomically(
    dir: &Path,
    files: &[(&str, Vec<u8>)],
    inputs: &[&Path],
    existing: Existing,
) -> Result<Vec<PathBuf>, Error> {
    write_files_with_mode(dir, files, inputs, existing, 0o600)
}

fn write_files_with_mode(
    dir: &Path,
    files: &[(&str, Vec<u8>)],
    inputs: &[&Path],
    existing: Existing,
    mode: u32,
) -> Result<Vec<PathBuf>, Error> {
    for (name, _) in files {
        if name.is_empty() || name.contains(['/', '\\']) || *name == "." || *name == ".." {
            return Err(Error::refused(format!("`{name}` is not a plain file name")));
        }
    }
    let names: Vec<&str> = files.iter().map(|(n, _)| *n).collect();
    check_targets(dir, &names, inputs, existing)?;
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir.display().to_string(), &e))?;
    // held to the last rename; checked again under it
    let _lock = lock_dir(dir)?;
    check_targets(dir, &names, inputs, existing)?;
    // 1. stage every file under a random, never-existing name
    let mut staged = Vec::new();
    for (name, bytes) in files {
        let prefix = format!(".{name}.");
        let made = staging_builder(&prefix, mode)
            .tempfile_in(dir)
            .and_then(|mut f| {
                f.write_all(bytes)?;
                f.as_file().sync_all()?;
                Ok(f.into_temp_path())
            });
        match made {
            Ok(tmp) => staged.push((tmp, dir.join(name))),
            // dropping `staged` removes the files staged so far
            Err(e) => return Err(Error::io(dir.join(name).display().to_string(), &e)),
        }
    }
    // 2. move each old file aside, then the new one into place; undo all on a failure
    let mut done: Vec<Moved> = Vec::new();
    let mut failure = None;
    for (tmp, target) in &staged {
        let backup = if std::fs::symlink_metadata(target).is_ok() {
            let aside = tempfile::Builder::new()
                .prefix(".replaced.")
                .suffix(".part")
                .tempfile_in(dir)
                .map(|f| f.into_temp_path());
            match aside.and_then(|reserved| {
                std::fs::rename(target, &reserved)?;
                // the old file now lives at the reserved name; keep it past this scope
                reserved.keep().map_err(|e| e.error)
            }) {
                Ok(path) => Some(path),
                Err(e) => {
                    failure = Some(Error::io(target.display().to_string(), &e));
                    break;
                }
            }
        } else {
            None
        };
        let moved = Moved {
            target: target.clone(),
            backup,
        };
        if let Err(e) = std::fs::rename(tmp, target) {
            failure = Some(Error::io(target.display().to_string(), &e));
            done.push(moved);
            break;
        }
        done.push(moved);
    }
    if let Some(err) = failure {
        for m in done.iter().rev() {
            match &m.backup {
                Some(b) => {
                    let _ = std::fs::rename(b, &m.target);
                }
                None => {
                    let _ = std::fs::remove_file(&m.target);
                }
            }
        }
        // `staged` is dropped here: the staging files not yet renamed are removed
        return Err(err);
    }
    for m in &done {
        if let Some(b) = &m.backup {
            let _ = std::fs::remove_file(b);
        }
    }
    // the staged paths are renamed away; dropping them finds nothing to remove
    drop(staged);
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    Ok(done.into_iter().map(|m| m.target).collect())
}

/// An input as the ticket names it: relative to the ticket's folder, so that the ticket
/// travels without the home folder's or the machine's paths and its commands run from
/// its folder (`walk.csv`, `../logs/walk.csv`); by its file name alone when the two
/// share no folder below the root, or only through more than three levels up.
pub fn name_for_ticket(input: &Path, out: &Path) -> String {
    let whole = |p: &Path| -> PathBuf {
        let p = std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
        // the nearest existing ancestor resolved (links and `..`), the rest kept as given
        let mut rest = Vec::new();
        let mut base = p.as_path();
        loop {
            if let Ok(real) = base.canonicalize() {
                return rest.iter().rev().fold(real, |acc: PathBuf, c| acc.join(c));
            }
            match (base.parent(), base.file_name()) {
                (Some(parent), Some(name)) => {
                    rest.push(name.to_os_string());
                    base = parent;
                }
                _ => return p,
            }
        }
    };
    let file_name = || {
        input
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| input.display().to_string())
    };
    let (input_abs, out_abs) = (whole(input), whole(out));
    let a: Vec<_> = input_abs.components().collect();
    let b: Vec<_> = out_abs.components().collect();
    let common = a.iter().zip(&b).take_while(|(x, y)| x == y).count();
    let ups = b.len() - common;
    if common <= 1 || ups > 3 {
        return file_name();
    }
    let mut rel = PathBuf::new();
    for _ in 0..ups {
        rel.push("..");
    }
    for c in &a[common..] {
        rel.push(c.as_os_str());
    }
    rel.display().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn files() -> Vec<(&'static str, Vec<u8>)> {
        vec![
            ("a.md", b"new a".to_vec()),
            ("b.svg", b"new b".to_vec()),
            ("c.csv", b"new c".to_vec()),
        ]
    }

    fn listing(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_and_replaces_only_when_allowed() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("t");
        write_files_atomically(&dir, &files(), &[], Existing::Refuse).unwrap();
        assert_eq!(listing(&dir), ["a.md", "b.svg", "c.csv"]);
        let err = write_files_atomically(&dir, &files(), &[], Existing::Refuse).unwrap_err();
        assert!(err.message.contains("a.md") && err.message.contains("--force"));
        write_files_atomically(&dir, &files(), &[], Existing::Replace).unwrap();
        assert_eq!(listing(&dir), ["a.md", "b.svg", "c.csv"]);
    }

    #[test]
    fn an_input_is_never_overwritten() {
        let tmp = tempfile::tempdir().unwrap();
        let input = tmp.path().join("b.svg");
        std::fs::write(&input, "input").unwrap();
        let err =
            write_files_atomically(tmp.path(), &files(), &[&input], Existing::Replace).unwrap_err();
        assert!(err.message.contains("is the input"), "{err}");
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "input");
        assert_eq!(listing(tmp.path()), ["b.svg"]);
    }

    #[cfg(unix)]
    #[test]
    fn a_planted_link_is_replaced_never_written_through() {
        let tmp = tempfile::tempdir().unwrap();
        let victim = tmp.path().join("victim");
        std::fs::write(&victim, "keep").unwrap();
        let dir = tmp.path().join("shared");
        std::fs::create_dir(&dir).unwrap();
        std::os::unix::fs::symlink(&victim, dir.join("a.md")).unwrap();
        write_files_atomically(&dir, &files(), &[], Existing::Replace).unwrap();
        assert_eq!(std::fs::read_to_string(&victim).unwrap(), "keep");
        assert_eq!(std::fs::read_to_string(dir.join("a.md")).unwrap(), "new a");
        assert!(!std::fs::symlink_metadata(dir.join("a.md"))
            .unwrap()
            .file_type()
            .is_symlink());
    }

    #[test]
    fn a_failed_rename_leaves_the_old_set_whole() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path();
        std::fs::write(dir.join("a.md"), "old a").unwrap();
        // c.csv is a non-empty directory: it cannot be moved over a file
        std::fs::create_dir(dir.join("c.csv")).unwrap();
        std::fs::write(dir.join("c.csv").join("x"), "x").unwrap();
        let err = write_files_atomically(dir, &files(), &[], Existing::Replace).unwrap_err();
        assert_eq!(err.class, ErrorClass::Io);
        assert_eq!(std::fs::read_to_string(dir.join("a.md")).unwrap(), "old a");
        assert_eq!(listing(dir), ["a.md", "c.csv"]);
    }
}
