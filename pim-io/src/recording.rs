//! Recordings: repeated sweeps of one grid, each with its time, as receivers and analysers
//! log them. Two layouts:
//!
//! - **one long CSV** with a `time` column (ISO 8601) beside the frequency and level
//!   columns a trace has (see [`crate::trace`]): the rows of one sweep share a time, and a
//!   new time starts the next sweep;
//! - **a folder of trace files**, one sweep each, read in the order of their names; each
//!   file's time is its `time` column, or else its name without the extension
//!   (`2026-12-01T10-05-00Z.csv`: dashes stand for the colons a file name cannot hold
//!   everywhere).
//!
//! Read as a stream: one sweep is held at a time (its frequencies and levels, at most
//! [`pim_core::trace::MAX_POINTS`] of each) and handed to the caller, which keeps what it
//! needs; nothing else grows with the recording's length.

use std::io::Read;
use std::path::{Path, PathBuf};

use crate::readings::level_field;
use crate::table::{no_rows, Table};
use crate::text::parse_time;
use crate::trace::{frequency_column, trace_frequency};
use pim_core::error::{Error, Place, Result};
use pim_core::freq::Hz;
use pim_core::time::OffsetDateTime;
use pim_core::trace::MAX_POINTS;

/// One sweep of a recording, as read.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RecordedSweep {
    /// When it was taken.
    pub at: Option<OffsetDateTime>,
    /// Its points' frequencies, rising.
    pub freqs: Vec<Hz>,
    /// Its points' levels, dBm.
    pub levels_dbm: Vec<f64>,
    /// Where it starts: the file and its first row's line.
    pub place: Option<Place>,
}

/// The files of a recording folder, in name order: regular files not hidden.
pub fn recording_files(dir: &Path) -> Result<Vec<PathBuf>> {
    let source = dir.display().to_string();
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| Error::io(source.clone(), &e))?
        .filter_map(|entry| entry.ok())
        .filter(|entry| entry.file_type().is_ok_and(|t| t.is_file()))
        .filter(|entry| !entry.file_name().to_string_lossy().starts_with('.'))
        .map(|entry| entry.path())
        .collect();
    files.sort();
    if files.is_empty() {
        return Err(Error::input(
            Place::new(source),
            "no trace files in the recording folder",
        ));
    }
    Ok(files)
}

/// The time a file's name gives: its stem as ISO 8601, dashes allowed for the colons.
pub fn time_from_name(path: &Path) -> Option<OffsetDateTime> {
    let stem = path.file_stem()?.to_str()?;
    if let Ok((t, _)) = parse_time(stem) {
        return Some(t);
    }
    let (date, rest) = stem.split_once('T')?;
    let mut clock: Vec<char> = rest.chars().collect();
    // HH-MM or HH-MM-SS after the date: the dashes at 2 and 5 are the colons.
    for i in [2, 5] {
        if clock.get(i) == Some(&'-') {
            clock[i] = ':';
        }
    }
    let text = format!("{date}T{}", clock.into_iter().collect::<String>());
    parse_time(&text).ok().map(|(t, _)| t)
}

/// Reads the sweeps of one recording file from `reader`, handing each to `visit` as it
/// ends. Without a `time` column every row is one sweep at `file_time` (a folder's file
/// named by its time). Returns the sweeps read.
pub fn read_recording_file<R: Read>(
    source: &str,
    reader: R,
    file_time: Option<OffsetDateTime>,
    visit: &mut dyn FnMut(&RecordedSweep) -> Result<()>,
) -> Result<usize> {
    let mut table = Table::open(source, reader)?;
    let (freq_name, scale) = frequency_column(&table, source)?;
    let freq_col = table.require(freq_name)?;
    let level_col = table.require("level_dbm")?;
    let time_col = table.column("time");
    if time_col.is_none() && file_time.is_none() {
        return Err(Error::input(
            Place::new(source).at_line(1).at_field("time"),
            "missing time column: a recording gives each sweep's time (ISO 8601) in a `time` column, or names each file of a folder by its time",
        ));
    }
    let mut sweep = RecordedSweep {
        at: file_time,
        ..RecordedSweep::default()
    };
    let mut sweeps = 0usize;
    let mut current_text = String::new();
    while let Some(row) = table.next_row()? {
        if row.unterminated {
            break; // a recording still being written: its last row is left out
        }
        let place = |f: &str| row.place(f);
        if let Some(col) = time_col {
            let text = row
                .text(Some(col))
                .ok_or_else(|| Error::input(place("time"), "missing time"))?;
            if text != current_text {
                let (at, _) = parse_time(text).map_err(|m| Error::input(place("time"), m))?;
                if !sweep.freqs.is_empty() {
                    visit(&sweep)?;
                    sweeps += 1;
                }
                sweep.freqs.clear();
                sweep.levels_dbm.clear();
                sweep.at = Some(at);
                sweep.place = Some(Place::new(source).at_line(row.line));
                current_text.clear();
                current_text.push_str(text);
            }
        } else if sweep.place.is_none() {
            sweep.place = Some(Place::new(source).at_line(row.line));
        }
        let freq_text = row
            .text(Some(freq_col))
            .ok_or_else(|| Error::input(place(freq_name), "missing frequency"))?;
        let freq = trace_frequency(|| place(freq_name), freq_text, scale)?;
        if sweep.freqs.len() >= MAX_POINTS {
            return Err(Error::input(
                place(freq_name),
                format!("more than {MAX_POINTS} points in one sweep; split the band"),
            ));
        }
        if let Some(&previous) = sweep.freqs.last() {
            if freq <= previous {
                return Err(Error::input(
                    place(freq_name),
                    format!(
                        "{} MHz is not above the previous point's {} MHz; within a sweep points must rise in frequency (a sweep is the rows that share a time)",
                        freq.mhz_text(),
                        previous.mhz_text()
                    ),
                ));
            }
        }
        sweep.freqs.push(freq);
        sweep.levels_dbm.push(level_field(&row, level_col)?);
    }
    if !sweep.freqs.is_empty() {
        visit(&sweep)?;
        sweeps += 1;
    }
    if sweeps == 0 {
        return Err(no_rows(source, "trace points"));
    }
    Ok(sweeps)
}

/// Reads a recording, a folder or one file, handing each sweep to `visit` in order.
/// Returns the sweeps read.
pub fn read_recording(
    path: &Path,
    visit: &mut dyn FnMut(&RecordedSweep) -> Result<()>,
) -> Result<usize> {
    let files = if path.is_dir() {
        recording_files(path)?
    } else {
        vec![path.to_path_buf()]
    };
    let folder = path.is_dir();
    let mut sweeps = 0;
    for file in files {
        let source = file.display().to_string();
        let reader = std::fs::File::open(&file).map_err(|e| Error::io(source.clone(), &e))?;
        let file_time = if folder { time_from_name(&file) } else { None };
        sweeps += read_recording_file(&source, std::io::BufReader::new(reader), file_time, visit)?;
    }
    Ok(sweeps)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Vec<RecordedSweep>> {
        let mut out = Vec::new();
        read_recording_file("r.csv", text.as_bytes(), None, &mut |s| {
            out.push(s.clone());
            Ok(())
        })?;
        Ok(out)
    }

    #[test]
    fn a_new_time_starts_a_sweep() {
        let s = read("time,freq_mhz,level_dbm\n2026-12-01T10:00:00Z,146.3,-100\n2026-12-01T10:00:00Z,146.31,-90\n2026-12-01T10:00:10Z,146.3,-101\n2026-12-01T10:00:10Z,146.31,-99\n").unwrap();
        assert_eq!(s.len(), 2);
        assert_eq!(s[1].levels_dbm, vec![-101.0, -99.0]);
        assert_eq!(s[1].place.as_ref().and_then(|p| p.line), Some(4));
    }

    #[test]
    fn names_each_bad_value() {
        let e = read("freq_mhz,level_dbm\n146.3,-100\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with("r.csv, line 1, field `time`: missing time column"),
            "{e}"
        );
        let e = read("time,freq_mhz,level_dbm\nsoon,146.3,-100\n")
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with("r.csv, line 2, field `time`: `soon` is not an ISO 8601"),
            "{e}"
        );
        let e = read(
            "time,freq_mhz,level_dbm\n2026-12-01T10:00Z,146.3,-100\n2026-12-01T10:00Z,146.2,-100\n",
        )
        .unwrap_err()
        .to_string();
        assert!(
            e.contains("line 3, field `freq_mhz`: 146.2 MHz is not above"),
            "{e}"
        );
    }

    #[test]
    fn file_names_carry_times() {
        let t = time_from_name(Path::new("d/2026-12-01T10-05-30Z.csv")).unwrap();
        assert_eq!(t.unix_timestamp() % 3600, 330);
        assert!(time_from_name(Path::new("d/sweep.csv")).is_none());
    }
}
