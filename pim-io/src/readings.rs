//! The readings of a confirming test: CSV `step_db,level_dbm` with an optional `note`;
//! for power steps also `emitter`, so that the steps of several emitters share one file
//! (`emitter,step_db,level_dbm`).
//!
//! `step_db` is the attenuation inserted (attenuator test, 0 or more) or the change of
//! one emitter's power (power step, negative for a reduction); `level_dbm` is the level
//! of the interference read at that step. See [`pim_core::slope`] for the sign convention.

use std::io::Read;

use crate::table::{no_rows, parse_finite, Row, Table};
use pim_core::error::{Error, Result};
use pim_core::slope::StepKind;

/// Columns the readings reader understands.
pub const READING_COLUMNS: &[&str] = &["step_db", "level_dbm", "note"];

/// Columns of a power-step file: the readings' and the emitter stepped.
pub const POWER_STEP_COLUMNS: &[&str] = &["emitter", "step_db", "level_dbm", "note"];

/// The largest step accepted, in dB either way: beyond it the product sinks into any
/// receiver's noise floor, so the value is a typing error.
pub const MAX_STEP_DB: f64 = 100.0;

/// Levels outside this range (dBm) are not readings of a receiver.
pub const LEVEL_RANGE_DBM: (f64, f64) = (-200.0, 100.0);

/// One reading.
#[derive(Clone, Debug, PartialEq)]
pub struct LevelStep {
    /// The emitter stepped (power steps with an `emitter` column).
    pub emitter: Option<String>,
    pub step_db: f64,
    pub level_dbm: f64,
    pub note: Option<String>,
    /// The line it came from (header = line 1).
    pub line: u64,
}

/// Readings read from a file.
#[derive(Clone, Debug, Default)]
pub struct ReadingsFile {
    pub readings: Vec<LevelStep>,
    /// Columns present in the file that the tool does not use.
    pub ignored_columns: Vec<String>,
}

impl ReadingsFile {
    /// The readings grouped by emitter, in the order each first appears: `(id, points)`.
    /// Readings without an emitter belong to `unnamed`.
    pub fn series(&self, unnamed: &str) -> Vec<(String, Vec<(f64, f64)>)> {
        let mut out: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
        for r in &self.readings {
            let id = r.emitter.as_deref().unwrap_or(unnamed);
            match out.iter_mut().find(|(e, _)| e == id) {
                Some((_, points)) => points.push((r.step_db, r.level_dbm)),
                None => out.push((id.to_string(), vec![(r.step_db, r.level_dbm)])),
            }
        }
        out
    }

    /// Whether the file names the emitter of each reading.
    pub fn has_emitters(&self) -> bool {
        self.readings.iter().any(|r| r.emitter.is_some())
    }

    /// The readings as (step, level) points for [`pim_core::slope::judge`].
    pub fn points(&self) -> Vec<(f64, f64)> {
        self.readings
            .iter()
            .map(|r| (r.step_db, r.level_dbm))
            .collect()
    }
}

/// Reads the readings of a `kind` test; `source` names the file in messages.
/// A row's `level_dbm`: a finite number within [`LEVEL_RANGE_DBM`], or an error that
/// names the row and the field (shared by every file that logs levels).
pub fn level_field(row: &Row<'_>, level_col: usize) -> Result<f64> {
    let place = |f: &str| row.place(f);
    let level_text = row
        .text(Some(level_col))
        .ok_or_else(|| Error::input(place("level_dbm"), "missing level"))?;
    let level_dbm = parse_finite(|| place("level_dbm"), level_text)?;
    let (lowest, highest) = LEVEL_RANGE_DBM;
    if !(lowest..=highest).contains(&level_dbm) {
        return Err(Error::input(
            place("level_dbm"),
            format!("level {level_text} dBm is outside {lowest}…+{highest} dBm"),
        ));
    }
    Ok(level_dbm)
}

pub fn read_readings<R: Read>(source: &str, reader: R, kind: StepKind) -> Result<ReadingsFile> {
    let mut table = Table::open(source, reader)?;
    let step_col = table.require("step_db")?;
    let level_col = table.require("level_dbm")?;
    let note_col = table.column("note");
    let (emitter_col, known) = match kind {
        StepKind::Power => (table.column("emitter"), POWER_STEP_COLUMNS),
        StepKind::Attenuator => (None, READING_COLUMNS),
    };
    let mut file = ReadingsFile {
        ignored_columns: table.unknown_columns(known),
        ..Default::default()
    };
    while let Some(row) = table.next_row()? {
        let place = |f: &str| row.place(f);
        let emitter = match emitter_col {
            Some(col) => Some(
                row.text(Some(col))
                    .ok_or_else(|| Error::input(place("emitter"), "missing emitter"))?
                    .to_string(),
            ),
            None => None,
        };
        let step_text = row
            .text(Some(step_col))
            .ok_or_else(|| Error::input(place("step_db"), "missing step"))?;
        let step_db = parse_finite(|| place("step_db"), step_text)?;
        if step_db.abs() > MAX_STEP_DB {
            return Err(Error::input(
                place("step_db"),
                format!("step {step_text} dB is beyond ±{MAX_STEP_DB} dB"),
            ));
        }
        if kind == StepKind::Attenuator && step_db < 0.0 {
            return Err(Error::input(
                place("step_db"),
                format!(
                    "attenuation {step_text} dB is negative; give the attenuation inserted (0 for none)"
                ),
            ));
        }
        let level_dbm = level_field(&row, level_col)?;
        file.readings.push(LevelStep {
            emitter,
            step_db,
            level_dbm,
            note: row.text(note_col).map(str::to_string),
            line: row.line,
        });
    }
    if file.readings.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(file)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str, kind: StepKind) -> Result<ReadingsFile> {
        read_readings("r.csv", text.as_bytes(), kind)
    }

    #[test]
    fn reads_readings_with_notes() {
        let f = read(
            "step_db,level_dbm,note\n0,-92.5,no pad\n6,-98.4,\n",
            StepKind::Attenuator,
        )
        .unwrap();
        assert_eq!(f.readings.len(), 2);
        assert_eq!(f.readings[0].note.as_deref(), Some("no pad"));
        assert_eq!(f.readings[1].line, 3);
        assert_eq!(f.points(), vec![(0.0, -92.5), (6.0, -98.4)]);
    }

    #[test]
    fn power_steps_of_several_emitters_share_a_file() {
        let f = read(
            "emitter,step_db,level_dbm\nA,0,-90\nB,0,-90.1\nA,-2,-93.9\nB,-2,-92\n",
            StepKind::Power,
        )
        .unwrap();
        let s = f.series("X");
        assert_eq!(s.len(), 2);
        assert_eq!(s[0], ("A".to_string(), vec![(0.0, -90.0), (-2.0, -93.9)]));
        assert_eq!(s[1].1.len(), 2);
        let err = read("emitter,step_db,level_dbm\n,0,-90\n", StepKind::Power).unwrap_err();
        assert_eq!(
            err.to_string(),
            "r.csv, line 2, field `emitter`: missing emitter"
        );
        // An attenuator test has no emitter: the column is reported unused.
        let f = read("emitter,step_db,level_dbm\nA,0,-90\n", StepKind::Attenuator).unwrap();
        assert_eq!(f.ignored_columns, vec!["emitter".to_string()]);
        assert_eq!(f.series("X")[0].0, "X");
    }

    #[test]
    fn names_each_bad_value() {
        let cases = [
            ("step_db,level_dbm\n-3,-90\n", StepKind::Attenuator, "r.csv, line 2, field `step_db`: attenuation -3 dB is negative; give the attenuation inserted (0 for none)"),
            ("step_db,level_dbm\n0,loud\n", StepKind::Power, "r.csv, line 2, field `level_dbm`: `loud` is not a number"),
            ("step_db,level_dbm\n0,-90\n500,-90\n", StepKind::Power, "r.csv, line 3, field `step_db`: step 500 dB is beyond ±100 dB"),
            ("step_db,level_dbm\n0,-400\n", StepKind::Power, "r.csv, line 2, field `level_dbm`: level -400 dBm is outside -200…+100 dBm"),
            ("step_db,level_dbm\n0,\n", StepKind::Power, "r.csv, line 2, field `level_dbm`: missing level"),
            ("step_db\n0\n", StepKind::Power, "r.csv, line 1, field `level_dbm`: missing column; the header has: step_db"),
            ("step_db,level_dbm\n", StepKind::Power, "r.csv: no data rows after the header"),
        ];
        for (text, kind, want) in cases {
            assert_eq!(read(text, kind).unwrap_err().to_string(), want, "{text}");
        }
    }
}
