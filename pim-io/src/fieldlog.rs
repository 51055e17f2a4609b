//! The field log of a bearing walk: CSV with a header. Required columns `lat`, `lon`
//! (WGS84 degrees) and `bearing_deg` (clockwise from north, 0–360 inclusive) or
//! `level_dbm` (the level heard) or both; optional `time` (ISO 8601; without an offset it
//! is taken as UTC), `north` (`true` or `magnetic`, default true), `sigma_deg`,
//! `accuracy_m` (the position's 95 % radius in metres, as the W3C Geolocation API reports
//! it), `setup` or `antenna` (the antenna and receiver settings the level was heard with:
//! each setup has its own level at 1 m), `note`. A row may leave `lat` and `lon` empty
//! when a GPS track is given to place it by its time, and leave `bearing_deg` empty when
//! it has a level, or `level_dbm` when it has a bearing.

use std::io::Read;
use std::path::Path;

use serde::Serialize;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

use crate::append::{append_row, Appended};
use crate::emitters::position_fields;
use crate::table::{no_rows, parse_finite, Fields, Table};
use crate::track::Track;
use pim_core::declination::{declination_deg, model_name};
use pim_core::error::{Error, ErrorClass, Place, Result};
use pim_core::fix::{LevelReading, Reading};
use pim_core::geo::{normalize_bearing_deg, GeoPoint};

/// Columns the field-log reader understands.
pub const LOG_COLUMNS: &[&str] = &[
    "lat",
    "lon",
    "bearing_deg",
    "time",
    "north",
    "sigma_deg",
    "accuracy_m",
    "level_dbm",
    "setup",
    "antenna",
    "note",
];

/// The coarsest position accuracy accepted, metres (95 % radius): a position worse than
/// this places no bearing (a phone without satellites reports its cell's size).
pub const MAX_ACCURACY_M: f64 = 1000.0;

/// The finest bearing σ accepted (degrees): a hand-held directional antenna does not
/// resolve a bearing to better than about a degree (common practice); 0.1° leaves room
/// for a fixed array and refuses a σ that is a typing error and would make a region of
/// centimetres.
pub const MIN_SIGMA_DEG: f64 = 0.1;

/// The header `pim log` writes.
pub const LOG_HEADER: &str = "time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,note";

/// The header of a log whose first reading names its setup.
pub const LOG_HEADER_WITH_SETUP: &str =
    "time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,setup,note";

/// The header a new log gets when its first reading has a position accuracy.
pub const LOG_HEADER_WITH_ACCURACY: &str =
    "time,lat,lon,accuracy_m,bearing_deg,north,sigma_deg,level_dbm,note";

/// The header a new log gets when its first reading has both.
const LOG_HEADER_WITH_ACCURACY_AND_SETUP: &str =
    "time,lat,lon,accuracy_m,bearing_deg,north,sigma_deg,level_dbm,setup,note";

/// Which north a bearing is measured from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum North {
    True,
    Magnetic,
}

/// One row of a field log, validated.
#[derive(Clone, Debug, PartialEq)]
pub struct LogRow {
    pub line: u64,
    pub position: Option<GeoPoint>,
    /// `None` on a row that logs a level only.
    pub bearing_deg: Option<f64>,
    pub north: North,
    pub time: Option<OffsetDateTime>,
    pub sigma_deg: Option<f64>,
    /// The position's 95 % radius, metres.
    pub accuracy_m: Option<f64>,
    pub level_dbm: Option<f64>,
    /// The `setup` (or `antenna`) column: levels of one setup share their level at 1 m.
    pub setup: Option<String>,
    pub note: Option<String>,
}

/// A field log as read.
#[derive(Clone, Debug, Default)]
pub struct FieldLog {
    pub source: String,
    pub rows: Vec<LogRow>,
    /// The line of a last row left out because it had no line end (torn by an
    /// interrupted write, perhaps).
    pub torn_line: Option<u64>,
    pub ignored_columns: Vec<String>,
}

/// Parses an ISO 8601 time (the grammar of [`crate::text::parse_time`]); one without an
/// offset is taken as UTC.
pub fn parse_time(text: &str) -> std::result::Result<OffsetDateTime, String> {
    crate::text::parse_time(text).map(|(t, _)| t)
}

/// Validates one row of a field log (shared with `pim log`, which checks a reading the
/// same way before appending it).
pub fn log_row(record: &dyn Fields, line: u64) -> Result<LogRow> {
    let place = |f: &str| record.place(f);
    let bearing_deg = match record.field("bearing_deg") {
        Some(bearing_text) => {
            let b = parse_finite(|| place("bearing_deg"), bearing_text)?;
            if !(0.0..=360.0).contains(&b) {
                return Err(Error::input(
                    place("bearing_deg"),
                    format!("bearing {bearing_text} is outside 0–360°"),
                ));
            }
            Some(b)
        }
        None if record.field("level_dbm").is_some() => None,
        None => {
            return Err(Error::input(
                place("bearing_deg"),
                "missing bearing (a row without one needs a level_dbm)",
            ))
        }
    };
    let north = match record
        .field("north")
        .map(str::to_ascii_lowercase)
        .as_deref()
    {
        None | Some("true") => North::True,
        Some("magnetic") => North::Magnetic,
        Some(other) => {
            return Err(Error::input(
                place("north"),
                format!("`{other}` is neither `true` nor `magnetic`"),
            ))
        }
    };
    let time = match record.field("time") {
        Some(t) => Some(parse_time(t).map_err(|m| Error::input(place("time"), m))?),
        None => None,
    };
    let sigma_deg = match record.field("sigma_deg") {
        Some(t) => {
            let s = parse_finite(|| place("sigma_deg"), t)?;
            if s <= 0.0 {
                return Err(Error::input(
                    place("sigma_deg"),
                    format!("σ {t}° must be above zero"),
                ));
            }
            if s < MIN_SIGMA_DEG {
                return Err(Error::input(
                    place("sigma_deg"),
                    format!("σ {t}° is below {MIN_SIGMA_DEG}°, finer than any bearing taken by hand; give the spread of the antenna's bearings"),
                ));
            }
            if s > 90.0 {
                return Err(Error::input(
                    place("sigma_deg"),
                    format!("σ {t}° is absurd for a bearing"),
                ));
            }
            Some(s)
        }
        None => None,
    };
    let accuracy_m = match record.field("accuracy_m") {
        Some(t) => {
            let a = parse_finite(|| place("accuracy_m"), t)?;
            if a < 0.0 {
                return Err(Error::input(
                    place("accuracy_m"),
                    format!("accuracy {t} m must not be negative"),
                ));
            }
            if a > MAX_ACCURACY_M {
                return Err(Error::input(
                    place("accuracy_m"),
                    format!("accuracy {t} m is coarser than {MAX_ACCURACY_M} m: the position places no bearing; wait for a satellite fix"),
                ));
            }
            Some(a)
        }
        None => None,
    };
    let level_dbm = match record.field("level_dbm") {
        Some(t) => {
            let l = parse_finite(|| place("level_dbm"), t)?;
            if !(-250.0..=100.0).contains(&l) {
                return Err(Error::input(
                    place("level_dbm"),
                    format!("level {t} dBm is absurd"),
                ));
            }
            Some(l)
        }
        None => None,
    };
    Ok(LogRow {
        line,
        position: position_fields(record)?,
        bearing_deg,
        north,
        time,
        sigma_deg,
        accuracy_m,
        level_dbm,
        setup: match ["setup", "antenna"]
            .into_iter()
            .find_map(|c| record.field(c).map(|v| (c, v)))
        {
            Some((column, text)) => {
                if let Some(why) = crate::text::free_text_problem(text, crate::text::MAX_NOTE_BYTES)
                {
                    return Err(Error::input(place(column), format!("the {column} {why}")));
                }
                Some(text.to_string())
            }
            None => None,
        },
        note: match record.field("note") {
            Some(note) => {
                if let Some(why) = crate::text::free_text_problem(note, crate::text::MAX_NOTE_BYTES)
                {
                    return Err(Error::input(place("note"), format!("the note {why}")));
                }
                Some(note.to_string())
            }
            None => None,
        },
    })
}

/// Reads a field log. With `positions_from_track`, `lat` and `lon` may be absent. A last
/// row without a line end (torn by an interrupted write, perhaps) is left out and its
/// line kept in [`FieldLog::torn_line`]; the rest of the log is used.
pub fn read_field_log<R: Read>(
    source: &str,
    mut reader: R,
    positions_from_track: bool,
) -> Result<FieldLog> {
    let mut bytes = Vec::new();
    reader
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(source, &e))?;
    let torn = crate::text::torn_tail(&bytes);
    let body = match torn {
        Some((keep, _)) => &bytes[..keep],
        None => &bytes[..],
    };
    let mut table = Table::open(source, body)?;
    if table.column("level_dbm").is_none() {
        table.require("bearing_deg")?;
    }
    if !positions_from_track {
        table.require("lat")?;
        table.require("lon")?;
    }
    let mut log = FieldLog {
        source: source.to_string(),
        torn_line: torn.map(|(_, line)| line),
        ignored_columns: table.unknown_columns(LOG_COLUMNS),
        ..Default::default()
    };
    let mut last_line = 0;
    while let Some(row) = table.next_row()? {
        last_line = row.line;
        log.rows.push(log_row(&row, row.line)?);
    }
    if table.ended_mid_line() && last_line > 0 {
        return Err(Error::input(
            Place::new(source).at_line(last_line),
            "the last row has no line end: it may be torn by an interrupted write; check it and end it with a newline",
        ));
    }
    if log.rows.is_empty() {
        return Err(no_rows(source, "readings"));
    }
    Ok(log)
}

/// One reading as typed, before it joins a log: the text of each column by name.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LogEntry {
    pub fields: Vec<(&'static str, String)>,
    /// Where a bad value came from, by column (an option name for `pim log`).
    pub origin: Vec<(&'static str, String)>,
}

impl Fields for LogEntry {
    fn field(&self, name: &str) -> Option<&str> {
        self.fields
            .iter()
            .find(|(k, _)| *k == name)
            .map(|(_, v)| v.as_str())
            .filter(|v| !v.is_empty())
    }
    fn place(&self, name: &str) -> Place {
        let origin = self
            .origin
            .iter()
            .find(|(k, _)| *k == name)
            .map(|(_, v)| v.clone())
            .unwrap_or_else(|| name.to_string());
        Place::new(origin)
    }
}

impl LogEntry {
    /// The entry's cells in the column order of `header` (an existing log's header line,
    /// in any delimiter the table reader knows). Refuses a header that lacks the required columns,
    /// and a value the log has no column for unless its column is `droppable` (a time
    /// taken from the clock, `north` = true), naming `source`, so that nothing typed is
    /// lost silently.
    pub fn cells_for_header(
        &self,
        header: &str,
        source: &str,
        droppable: &[&str],
    ) -> Result<Vec<String>> {
        let table = Table::open(source, header.as_bytes())?;
        table.require("bearing_deg")?;
        table.require("lat")?;
        table.require("lon")?;
        // a log may name the setup column `antenna`
        let column_of = |name: &'static str| -> &'static str {
            match name {
                "setup" if table.column("setup").is_none() && table.column("antenna").is_some() => {
                    "antenna"
                }
                other => other,
            }
        };
        for (name, value) in &self.fields {
            if !value.is_empty()
                && table.column(column_of(name)).is_none()
                && !droppable.contains(name)
            {
                let origin = self.place(name).source;
                return Err(Error::input(
                    Place::new(source).at_line(1).at_field(*name),
                    format!(
                        "the log has no `{name}` column, so {origin} would be lost; add the column (a `{name}` cell at the end of the header line and an empty cell at the end of every row), or leave {origin} out"
                    ),
                ));
            }
        }
        Ok(table
            .headers()
            .iter()
            .map(|h| {
                let name = if h == "antenna" && table.column("setup").is_none() {
                    "setup"
                } else {
                    h.as_str()
                };
                self.field(name).unwrap_or_default().to_string()
            })
            .collect())
    }
}

/// A bad value typed on the command line: the option is named, exit code 2.
fn as_argument(e: Error) -> Error {
    if e.class == ErrorClass::Input && e.place.as_ref().is_some_and(|p| p.line.is_none()) {
        Error {
            class: ErrorClass::Argument,
            ..e
        }
    } else {
        e
    }
}

/// One reading as typed (`pim log`, the walk page): the text of each column, checked
/// only by [`save_reading`].
#[derive(Clone, Debug)]
pub struct ReadingText {
    pub lat: Option<String>,
    pub lon: Option<String>,
    pub bearing_deg: String,
    pub north: North,
    pub sigma_deg: Option<String>,
    pub level_dbm: Option<String>,
    /// The antenna and receiver setup the level was heard with (the `setup` column, or
    /// `antenna` where the log names it so).
    pub setup: Option<String>,
    pub note: Option<String>,
    /// ISO 8601; now (UTC, whole seconds) when `None`.
    pub time: Option<String>,
    /// The position's 95 % radius in metres (the W3C Geolocation API's `accuracy`); a
    /// new log given one gets an `accuracy_m` column.
    pub accuracy_m: Option<String>,
    /// The accuracy is saved only where the log has an `accuracy_m` column (or is new),
    /// and left out of a log without one (the walk page, which measures it unasked);
    /// when false such a log refuses it, naming the column (`pim log --accuracy-m`).
    pub accuracy_where_logged: bool,
}

/// Checks a reading exactly as the log reader will and appends it to the log under the
/// log's lock. A bad value's error is placed at `origin(column)` (an option name for
/// `pim log`, an input's name for the walk page).
pub fn save_reading(
    file: &Path,
    reading: &ReadingText,
    origin: &dyn Fn(&'static str) -> String,
) -> Result<Appended> {
    let now = time::OffsetDateTime::now_utc()
        .replace_nanosecond(0)
        .unwrap_or_else(|_| time::OffsetDateTime::now_utc());
    let time = reading
        .time
        .clone()
        .unwrap_or_else(|| now.format(&Rfc3339).unwrap_or_default());
    let text = |v: &Option<String>| v.clone().unwrap_or_default();
    const COLUMNS: [&str; 10] = [
        "time",
        "lat",
        "lon",
        "accuracy_m",
        "bearing_deg",
        "north",
        "sigma_deg",
        "level_dbm",
        "setup",
        "note",
    ];
    let entry = LogEntry {
        fields: vec![
            ("time", time),
            ("lat", text(&reading.lat)),
            ("lon", text(&reading.lon)),
            ("accuracy_m", text(&reading.accuracy_m)),
            ("bearing_deg", reading.bearing_deg.clone()),
            (
                "north",
                match reading.north {
                    North::True => "true",
                    North::Magnetic => "magnetic",
                }
                .to_string(),
            ),
            ("sigma_deg", text(&reading.sigma_deg)),
            ("level_dbm", text(&reading.level_dbm)),
            ("setup", text(&reading.setup)),
            ("note", text(&reading.note)),
        ],
        origin: COLUMNS.iter().map(|&c| (c, origin(c))).collect(),
    };
    // The reading is checked exactly as the log reader will check it, before any write.
    let row = log_row(&entry, 0).map_err(as_argument)?;
    // A magnetic bearing the World Magnetic Model cannot turn true would block every
    // later fix of the log: refused before it is written.
    if row.north == North::Magnetic {
        let date = row.time.unwrap_or(now).date();
        let at = row
            .position
            .unwrap_or(pim_core::geo::GeoPoint::new(0.0, 0.0));
        if let Err(why) = pim_core::declination::declination_deg(at, date) {
            return Err(Error::argument(
                &origin("time"),
                format!(
                    "the World Magnetic Model cannot turn a magnetic bearing of this date true ({why}), so the log could not be fixed; apply the declination yourself and log the bearing as true north"
                ),
            ));
        }
    }
    let source = file.display().to_string();
    // What the log may leave out when it has no column for it: a time the clock gave,
    // and true north (the reader's default).
    let mut droppable = Vec::new();
    if reading.time.is_none() {
        droppable.push("time");
    }
    if reading.north == North::True {
        droppable.push("north");
    }
    if reading.accuracy_where_logged {
        droppable.push("accuracy_m");
    }
    // a new log has the setup and accuracy columns when its first reading has them
    let new_header = match (reading.accuracy_m.is_some(), reading.setup.is_some()) {
        (false, false) => LOG_HEADER,
        (false, true) => LOG_HEADER_WITH_SETUP,
        (true, false) => LOG_HEADER_WITH_ACCURACY,
        (true, true) => LOG_HEADER_WITH_ACCURACY_AND_SETUP,
    };
    append_row(file, new_header, &|header, _delimiter| {
        entry.cells_for_header(header, &source, &droppable)
    })
}

/// A declination applied to a magnetic reading.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Correction {
    pub line: u64,
    pub declination_deg: f64,
    /// `WMM2025`, `WMM2020` or `given`.
    pub source: String,
}

/// Readings ready for the fix, with the corrections applied and notes on the way.
#[derive(Clone, Debug, Default)]
pub struct Prepared {
    pub readings: Vec<Reading>,
    /// The rows' levels, placed like their bearings.
    pub levels: Vec<LevelReading>,
    pub corrections: Vec<Correction>,
    pub notes: Vec<String>,
}

/// Places rows on the track where they lack a position and turns magnetic bearings into
/// true ones (`declination` given, else the World Magnetic Model at the row's place and
/// date; today's date when the row has no time).
pub fn prepare(
    log: &FieldLog,
    track: Option<&Track>,
    declination: Option<f64>,
    today: time::Date,
) -> Result<Prepared> {
    let mut out = Prepared::default();
    if let Some(line) = log.torn_line {
        out.notes.push(format!(
            "{}, line {line}: the last row has no line end: it may be torn by an interrupted write, so it is left out; check it and end it with a line end",
            log.source
        ));
    }
    let mut undated = Vec::new();
    // A reading logged again (same place, time, bearing and north) is not new evidence:
    // counted once, or a walk logged twice over would claim half its real uncertainty.
    let mut first_of: std::collections::HashMap<_, u64> = std::collections::HashMap::new();
    let mut repeats = Vec::new();
    for row in &log.rows {
        let key = (
            row.position
                .map(|p| (p.lat_deg.to_bits(), p.lon_deg.to_bits())),
            row.time.map(|t| t.unix_timestamp_nanos()),
            row.bearing_deg.map(f64::to_bits),
            row.level_dbm.map(f64::to_bits),
            row.north,
        );
        if let Some(first) = first_of.get(&key) {
            repeats.push(format!("{} (= {first})", row.line));
            continue;
        }
        first_of.insert(key, row.line);
        let place = |f: &str| Place::new(&log.source).at_line(row.line).at_field(f);
        let position = match (row.position, track) {
            (Some(p), _) => p,
            (None, Some(track)) => {
                let t = row.time.ok_or_else(|| {
                    Error::input(place("time"), "no position and no time to find it on the track")
                })?;
                track.position_at(t).ok_or_else(|| {
                    Error::input(
                        place("time"),
                        format!(
                            "{} is outside the track ({} to {})",
                            t.format(&Rfc3339).unwrap_or_default(),
                            track.first_time().and_then(|x| x.format(&Rfc3339).ok()).unwrap_or_default(),
                            track.last_time().and_then(|x| x.format(&Rfc3339).ok()).unwrap_or_default(),
                        ),
                    )
                })?
            }
            (None, None) => {
                return Err(Error::input(
                    place("lat"),
                    "no position: give lat and lon, or a GPS track (--track) to place the reading by its time",
                ))
            }
        };
        if let Some(level_dbm) = row.level_dbm {
            out.levels.push(LevelReading {
                line: row.line,
                observer: position,
                level_dbm,
                setup: row.setup.clone(),
                position_accuracy_m: row.accuracy_m,
            });
        }
        let Some(mut bearing) = row.bearing_deg else {
            continue;
        };
        if row.north == North::Magnetic {
            let (d, source) = match declination {
                Some(d) => (d, "given".to_string()),
                None => {
                    let date = match row.time {
                        Some(t) => t.date(),
                        None => {
                            undated.push(row.line.to_string());
                            today
                        }
                    };
                    let d = declination_deg(position, date).map_err(|m| {
                        Error::input(
                            place("time"),
                            format!("the World Magnetic Model cannot answer: {m}; give --declination-deg"),
                        )
                    })?;
                    (d, model_name(date).to_string())
                }
            };
            bearing = normalize_bearing_deg(bearing + d);
            out.corrections.push(Correction {
                line: row.line,
                declination_deg: d,
                source,
            });
        }
        out.readings.push(Reading {
            line: row.line,
            observer: position,
            bearing_deg: normalize_bearing_deg(bearing),
            sigma_deg: row.sigma_deg,
            position_accuracy_m: row.accuracy_m,
        });
    }
    if !repeats.is_empty() {
        out.notes.push(format!(
            "{}: line{} {} repeat{} an earlier reading (same place, time and bearing), counted once: a reading logged again is not new evidence",
            log.source,
            if repeats.len() == 1 { "" } else { "s" },
            repeats.join(", "),
            if repeats.len() == 1 { "s" } else { "" },
        ));
    }
    if !undated.is_empty() {
        out.notes.push(format!(
            "magnetic reading{} without a time (line {}): declination for today's date",
            if undated.len() == 1 { "" } else { "s" },
            undated.join(", ")
        ));
    }
    Ok(out)
}

/// Reads candidate spots for the next bearing: CSV with `lat`, `lon` (any notation of
/// [`crate::text::parse_coordinate`]) and an optional `name` or `id` (gates, road bends,
/// a walkable path; a structures file, whose column is `id`, will do).
pub fn read_spots<R: Read>(source: &str, reader: R) -> Result<Vec<pim_core::walk::Spot>> {
    let mut table = Table::open(source, reader)?;
    table.require("lat")?;
    table.require("lon")?;
    let mut spots = Vec::new();
    while let Some(row) = table.next_row()? {
        let position = position_fields(&row)?
            .ok_or_else(|| Error::input(row.place("lat"), "missing position"))?;
        spots.push(pim_core::walk::Spot {
            name: match ["name", "id"]
                .into_iter()
                .find_map(|c| row.get(c).map(|v| (c, v)))
            {
                Some((column, name)) => {
                    crate::emitters::checked_id(row.place(column), name)?;
                    Some(name.to_string())
                }
                None => None,
            },
            position,
        });
    }
    if spots.is_empty() {
        return Err(no_rows(source, "spots"));
    }
    Ok(spots)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<FieldLog> {
        read_field_log("walk.csv", text.as_bytes(), false)
    }

    #[test]
    fn reads_rows_and_names_bad_values() {
        let log = read(
            "lat,lon,bearing_deg,north,sigma_deg\n45.1,-122.4,360,magnetic,4\n45.2,-122.4,12.5,,\n",
        )
        .unwrap();
        assert_eq!(log.rows.len(), 2);
        assert_eq!(log.rows[0].north, North::Magnetic);
        assert_eq!(log.rows[1].sigma_deg, None);
        for (text, want) in [
            (
                "lat,lon,bearing_deg\n45,-122,400\n",
                "walk.csv, line 2, field `bearing_deg`: bearing 400 is outside 0–360°",
            ),
            (
                "lat,lon,bearing_deg\n45,-122,NaN\n",
                "walk.csv, line 2, field `bearing_deg`: `NaN` is not a finite number",
            ),
            (
                "lat,lon,bearing_deg,sigma_deg\n45,-122,10,-2\n",
                "walk.csv, line 2, field `sigma_deg`: σ -2° must be above zero",
            ),
            (
                "lat,lon,bearing_deg,accuracy_m\n45,-122,10,-3\n",
                "walk.csv, line 2, field `accuracy_m`: accuracy -3 m must not be negative",
            ),
            (
                "lon,bearing_deg\n-122,10\n",
                "walk.csv, line 1, field `lat`: missing column",
            ),
            (
                "lat,lon,bearing_deg,time\n45,-122,10,yesterday\n",
                "walk.csv, line 2, field `time`: `yesterday` is not an ISO 8601 date and time",
            ),
        ] {
            let e = read(text).unwrap_err().to_string();
            assert!(e.starts_with(want), "{e}");
        }
    }

    /// A torn last row, even one with all its fields, is left out and reported; the
    /// rest of the log is used. Comment lines and CR line ends are read as usual.
    #[test]
    fn a_torn_last_row_is_left_out() {
        let log = read("lat,lon,bearing_deg\n45,-122,10\n45,-122,1").unwrap();
        assert_eq!(log.rows.len(), 1);
        assert_eq!(log.torn_line, Some(3));
        let prepared = prepare(&log, None, None, time::macros::date!(2026 - 12 - 01)).unwrap();
        assert!(prepared.notes[0].starts_with("walk.csv, line 3: the last row has no line end"));
        let log = read("# walk of 1 Dec\rlat,lon,bearing_deg\r45,-122,10\r45.1,-122,20\r").unwrap();
        assert_eq!(log.rows.len(), 2);
        assert_eq!(log.torn_line, None);
        assert_eq!(log.rows[1].line, 4);
    }

    /// A walk logged three times over is the walk once: the same readings, the same fix.
    #[test]
    fn repeated_readings_count_once() {
        let rows = "45.1025,-122.4132,347.1\n45.1033,-122.4107,296.6\n45.1018,-122.4095,318.0\n";
        let once = read(&format!("lat,lon,bearing_deg\n{rows}")).unwrap();
        let thrice = read(&format!("lat,lon,bearing_deg\n{rows}{rows}{rows}")).unwrap();
        let today = time::macros::date!(2026 - 12 - 01);
        let a = prepare(&once, None, None, today).unwrap();
        let b = prepare(&thrice, None, None, today).unwrap();
        assert_eq!(a.readings, b.readings);
        assert!(
            b.notes[0].contains("lines 5 (= 2), 6 (= 3)"),
            "{:?}",
            b.notes
        );
    }

    /// Positions in degrees and minutes or degrees, minutes and seconds read as decimal
    /// degrees; a bad one names its line and field.
    #[test]
    fn positions_in_any_notation() {
        let log =
            read("lat;lon;bearing_deg\n45°06.275'N;122 24 50.5 W;10\nN45 06 16.5;-122.414;20\n")
                .unwrap();
        let p = log.rows[0].position.unwrap();
        assert!((p.lat_deg - 45.104_583_333).abs() < 1e-8);
        assert!((p.lon_deg + 122.414_027_778).abs() < 1e-8);
        assert!((log.rows[1].position.unwrap().lat_deg - 45.104_583_333).abs() < 1e-8);
        for (text, want) in [
            (
                "lat;lon;bearing_deg\n45 75 N;-122;10\n",
                "walk.csv, line 2, field `lat`: `45 75 N`: minutes and seconds must be below 60",
            ),
            (
                "lat;lon;bearing_deg\n45,1;-122;10\n",
                "walk.csv, line 2, field `lat`: `45,1` is not a number (a decimal comma?",
            ),
            (
                "lat,lon,bearing_deg\n45,122 24 50 N,10\n",
                "walk.csv, line 2, field `lon`: `122 24 50 N` is not a longitude",
            ),
            (
                "lat,lon,bearing_deg\n91,0,10\n",
                "walk.csv, line 2, field `lat`: latitude 91 is outside −90…90",
            ),
        ] {
            let e = read(text).unwrap_err().to_string();
            assert!(e.starts_with(want), "{e}");
        }
    }

    #[test]
    fn times_without_offset_are_utc() {
        let a = parse_time("2026-11-30T14:05:00").unwrap();
        let b = parse_time("2026-11-30T14:05:00Z").unwrap();
        assert_eq!(a, b);
        assert_eq!(parse_time("2026-11-30T15:05:00+01:00").unwrap(), b);
    }
}

#[cfg(test)]
mod note_round_trip {
    use super::*;
    use crate::text::{csv_record, free_text_problem, MAX_NOTE_BYTES};

    /// A note that passes the shared check is written in every dialect and read back
    /// as it was (less surrounding blanks); one that fails is refused by the reader too.
    #[test]
    fn what_is_written_is_what_is_read() {
        let long = "\"".repeat(MAX_NOTE_BYTES);
        let notes = [
            "gate post, east",
            "\"quoted\"; and\ttabbed",
            "# not a comment",
            "  padded  ",
            "ünïcödé \u{202e} bidi",
            long.as_str(),
        ];
        for note in notes {
            assert!(
                free_text_problem(note, MAX_NOTE_BYTES).is_none(),
                "{note:?}"
            );
            for (delimiter, crlf) in [(b',', false), (b';', true), (b'\t', false)] {
                let header: Vec<&str> = LOG_HEADER.split(',').collect();
                let mut log = csv_record(&header, delimiter, crlf);
                log.push_str(&csv_record(
                    ["", "45.1", "-122.4", "10", "true", "", "", note],
                    delimiter,
                    crlf,
                ));
                let read = read_field_log("t.csv", log.as_bytes(), false).unwrap();
                assert_eq!(
                    read.rows[0].note.as_deref(),
                    Some(note.trim_matches(|c| c == ' ' || c == '\t')),
                    "{note:?} {delimiter}"
                );
            }
        }
        let log = format!("{LOG_HEADER}\n,45.1,-122.4,10,true,,,bell\u{7}\n");
        let e = read_field_log("t.csv", log.as_bytes(), false).unwrap_err();
        assert_eq!(e.place.unwrap().field.as_deref(), Some("note"));
    }
}

#[cfg(test)]
mod accuracy_tests {
    use super::*;

    fn reading(accuracy: Option<&str>, where_logged: bool) -> ReadingText {
        ReadingText {
            lat: Some("45.1".into()),
            lon: Some("-122.4".into()),
            bearing_deg: "10".into(),
            north: North::True,
            sigma_deg: None,
            level_dbm: None,
            setup: None,
            note: None,
            time: Some("2026-11-28T09:10:00Z".into()),
            accuracy_m: accuracy.map(str::to_string),
            accuracy_where_logged: where_logged,
        }
    }

    /// A new log given an accuracy gets the column and reads it back; a log without the
    /// column leaves it out only where asked, and otherwise refuses it naming the column.
    #[test]
    fn the_accuracy_goes_where_the_log_has_its_column() {
        let dir = tempfile::tempdir().unwrap();
        let new = dir.path().join("new.csv");
        save_reading(&new, &reading(Some("4.5"), true), &|c| c.to_string()).unwrap();
        let text = std::fs::read_to_string(&new).unwrap();
        assert_eq!(
            text,
            format!(
                "{LOG_HEADER_WITH_ACCURACY}\n2026-11-28T09:10:00Z,45.1,-122.4,4.5,10,true,,,\n"
            )
        );
        let log = read_field_log("new.csv", text.as_bytes(), false).unwrap();
        assert_eq!(log.rows[0].accuracy_m, Some(4.5));

        let old = dir.path().join("old.csv");
        std::fs::write(&old, format!("{LOG_HEADER}\n")).unwrap();
        save_reading(&old, &reading(Some("4.5"), true), &|c| c.to_string()).unwrap();
        assert_eq!(
            std::fs::read_to_string(&old).unwrap(),
            format!("{LOG_HEADER}\n2026-11-28T09:10:00Z,45.1,-122.4,10,true,,,\n")
        );
        let e =
            save_reading(&old, &reading(Some("4.5"), false), &|c| format!("--{c}")).unwrap_err();
        assert!(e.to_string().contains("no `accuracy_m` column"), "{e}");
        // checked as the reader checks it
        let e = save_reading(&new, &reading(Some("-1"), true), &|c| c.to_string()).unwrap_err();
        assert!(e.to_string().contains("must not be negative"), "{e}");
    }

    /// A new log whose first reading has both an accuracy and a level's setup gets both
    /// columns, and reads them back.
    #[test]
    fn a_new_log_gets_the_accuracy_and_setup_columns_together() {
        let dir = tempfile::tempdir().unwrap();
        let new = dir.path().join("both.csv");
        let both = ReadingText {
            level_dbm: Some("-120".into()),
            setup: Some("yagi-20dB".into()),
            ..reading(Some("4.5"), false)
        };
        save_reading(&new, &both, &|c| c.to_string()).unwrap();
        let text = std::fs::read_to_string(&new).unwrap();
        assert_eq!(
            text,
            format!(
                "{LOG_HEADER_WITH_ACCURACY_AND_SETUP}\n2026-11-28T09:10:00Z,45.1,-122.4,4.5,10,true,,-120,yagi-20dB,\n"
            )
        );
        let log = read_field_log("both.csv", text.as_bytes(), false).unwrap();
        assert_eq!(log.rows[0].accuracy_m, Some(4.5));
    }
}
