//! Analyser traces: CSV with a header holding one frequency column (`freq_hz`,
//! `freq_khz` or `freq_mhz`) and `level_dbm`, other columns ignored, in any dialect the
//! table reader accepts. Read as a stream into a [`MaxHold`]: one file is one sweep, and
//! several files are combined by maximum hold (see [`pim_core::trace`] for the grid rule).
//!
//! Frequencies are read from their decimal text exactly; digits below the hertz, which an
//! analyser writes for bins off the hertz grid, are rounded to the nearest hertz.

use std::io::Read;

use crate::readings::level_field;
use crate::table::{decimal_comma_hint, no_rows, parse_finite, Table};
use pim_core::error::{Error, Place, Result};
use pim_core::freq::{parse_scaled_decimal, DecimalError, Hz, MAX_FREQUENCY};
use pim_core::trace::MaxHold;

/// The frequency columns a trace may use, with the power of ten of their unit.
pub const FREQUENCY_COLUMNS: &[(&str, i32)] = &[("freq_hz", 0), ("freq_khz", 3), ("freq_mhz", 6)];

/// Columns the trace reader understands.
pub const TRACE_COLUMNS: &[&str] = &["freq_hz", "freq_khz", "freq_mhz", "level_dbm"];

/// What reading one trace file found besides its points.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct TraceFile {
    /// Points read.
    pub points: usize,
    /// Columns present in the file that the tool does not use.
    pub ignored_columns: Vec<String>,
    /// The line of a last row left out because it had no line end (a trace still being
    /// written, or torn by an interrupted write).
    pub torn_line: Option<u64>,
}

/// A trace frequency in whole hertz: exact decimal text, sub-hertz digits rounded.
pub(crate) fn trace_frequency(place: impl Fn() -> Place, text: &str, scale: i32) -> Result<Hz> {
    let hz = match parse_scaled_decimal(text, scale) {
        Ok(v) => v,
        Err(DecimalError::TooFine(_)) => {
            // Millihertz are exact enough for any grid; round them to the hertz.
            let mhz = match parse_scaled_decimal(text, scale + 3) {
                Ok(v) => v,
                Err(_) => parse_finite(&place, text)
                    .map(|v| (v * 10f64.powi(scale + 3)).round() as i64)?,
            };
            (mhz as f64 / 1e3).round() as i64
        }
        Err(e) => {
            return Err(Error::input(
                place(),
                format!("{e}{}", decimal_comma_hint(text)),
            ))
        }
    };
    if hz <= 0 {
        return Err(Error::input(
            place(),
            format!("frequency {text} must be above zero"),
        ));
    }
    if Hz(hz) > MAX_FREQUENCY {
        return Err(Error::input(
            place(),
            format!("frequency {text} is above 300 GHz; is the column's unit right?"),
        ));
    }
    Ok(Hz(hz))
}

/// The one frequency column of `table` and its power of ten.
pub(crate) fn frequency_column<R: Read>(
    table: &Table<R>,
    source: &str,
) -> Result<(&'static str, i32)> {
    let present: Vec<(&str, i32)> = FREQUENCY_COLUMNS
        .iter()
        .copied()
        .filter(|(name, _)| table.column(name).is_some())
        .collect();
    match present.as_slice() {
        [one] => Ok(*one),
        [] => Err(Error::input(
            Place::new(source).at_line(1).at_field("freq_mhz"),
            format!(
                "missing frequency column (freq_hz, freq_khz or freq_mhz); the header has: {}",
                table
                    .headers()
                    .iter()
                    .filter(|h| !h.is_empty())
                    .cloned()
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        )),
        several => Err(Error::input(
            Place::new(source).at_line(1).at_field(several[1].0),
            format!(
                "{} frequency columns ({}); keep one",
                several.len(),
                several
                    .iter()
                    .map(|(n, _)| *n)
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        )),
    }
}

/// Reads one trace (one sweep) from `reader` into `hold`; `source` names the file in
/// messages. A last row without a line end is left out and its line kept in
/// [`TraceFile::torn_line`], as a field log's is.
pub fn read_trace_into<R: Read>(source: &str, reader: R, hold: &mut MaxHold) -> Result<TraceFile> {
    let mut table = Table::open(source, reader)?;
    let (freq_name, scale) = frequency_column(&table, source)?;
    let freq_col = table.require(freq_name)?;
    let level_col = table.require("level_dbm")?;
    let mut file = TraceFile {
        points: 0,
        ignored_columns: table.unknown_columns(TRACE_COLUMNS),
        torn_line: None,
    };
    while let Some(row) = table.next_row()? {
        if row.unterminated {
            // a trace still being written, or torn: left out with a note, whatever it holds
            file.torn_line = Some(row.line);
            break;
        }
        let place = |f: &str| row.place(f);
        let freq_text = row
            .text(Some(freq_col))
            .ok_or_else(|| Error::input(place(freq_name), "missing frequency"))?;
        let freq = trace_frequency(|| place(freq_name), freq_text, scale)?;
        let level_dbm = level_field(&row, level_col)?;
        hold.push(freq, level_dbm)
            .map_err(|r| Error::input(place(freq_name), r.message(freq)))?;
        file.points += 1;
    }
    if file.points == 0 {
        return Err(no_rows(source, "trace points"));
    }
    hold.end_sweep()
        .map_err(|r| Error::input(Place::new(source), r.message()))?;
    Ok(file)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<pim_core::trace::Trace> {
        let mut hold = MaxHold::new();
        read_trace_into("t.csv", text.as_bytes(), &mut hold)?;
        Ok(hold.finish().unwrap_or_else(|| unreachable!()))
    }

    #[test]
    fn reads_each_unit_and_dialect() {
        let t = read("freq_mhz,level_dbm\n146.3,-100\n146.31,-90.5\n146.32,-101\n").unwrap();
        assert_eq!((t.start, t.step_hz), (Hz(146_300_000), 10_000.0));
        assert_eq!(t.levels_dbm[1], -90.5);
        let t = read("Freq_Hz;Level_dBm;note\n1.463E8;-100;a\n146310000.4;-90;\n146320000;-99;\n")
            .unwrap();
        assert_eq!(t.start, Hz(146_300_000));
        let t = read("freq_khz\tlevel_dbm\n146300\t-100\n146310\t-90\n146320\t-99\n").unwrap();
        assert_eq!(t.stop(), Hz(146_320_000));
    }

    #[test]
    fn names_each_bad_value() {
        let cases = [
            ("freq_mhz,level_dbm\n146.3,-100\n146.31,loud\n146.32,-99\n", "t.csv, line 3, field `level_dbm`: `loud` is not a number"),
            ("freq_mhz,level_dbm\n146.3,-100\n146.29,-90\n", "t.csv, line 3, field `freq_mhz`: 146.29 MHz is not above the previous point's 146.3 MHz; trace points must rise in frequency"),
            ("freq_mhz,level_dbm\n146.3,-100\n146.31,-300\n", "t.csv, line 3, field `level_dbm`: level -300 dBm is outside -200…+100 dBm"),
            ("freq_mhz,level_dbm\n146.3,-100\n146.31,-100\n146.35,-100\n", "t.csv, line 4, field `freq_mhz`: 146.35 MHz is off the uniform grid of the trace (expected 146.320000 MHz, step 10.000 kHz); traces combined by maximum hold must share start, step and point count"),
            ("freq_mhz,level_dbm\n146.3,-100\n", "t.csv: 1 point in the trace; a trace needs at least 3"),
            ("freq_mhz,level_dbm\n", "t.csv: no trace points after the header"),
            ("f,level_dbm\n1,2\n", "t.csv, line 1, field `freq_mhz`: missing frequency column (freq_hz, freq_khz or freq_mhz); the header has: f, level_dbm"),
            ("freq_hz,freq_mhz,level_dbm\n1,2,3\n", "t.csv, line 1, field `freq_mhz`: 2 frequency columns (freq_hz, freq_mhz); keep one"),
            ("freq_mhz,level_dbm\n146.3,-100\n,-90\n", "t.csv, line 3, field `freq_mhz`: missing frequency"),
            ("freq_mhz,level_dbm\n-146.3,-100\n", "t.csv, line 2, field `freq_mhz`: frequency -146.3 must be above zero"),
            ("freq_mhz,level_dbm\n146,3,-100\n", "t.csv, line 2: 3 fields, but the header has 2 columns (a decimal comma? write numbers with a point, or separate the columns with `;`)"),
        ];
        for (text, want) in cases {
            assert_eq!(read(text).unwrap_err().to_string(), want, "{text}");
        }
    }

    #[test]
    fn second_trace_on_another_grid_is_refused_by_name() {
        let mut hold = MaxHold::new();
        read_trace_into(
            "a.csv",
            "freq_mhz,level_dbm\n146.3,-100\n146.31,-90\n146.32,-99\n".as_bytes(),
            &mut hold,
        )
        .unwrap();
        let e = read_trace_into(
            "b.csv",
            "freq_mhz,level_dbm\n146.3,-100\n146.31,-90\n".as_bytes(),
            &mut hold,
        )
        .unwrap_err();
        assert_eq!(e.to_string(), "b.csv: 2 points, but the first trace has 3; traces combined by maximum hold must share start, stop and point count");
    }
}
