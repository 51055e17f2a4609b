//! `pim log FILE`: add one bearing reading to a field log, safely, and show the running
//! fix.

use std::io::Write;
use std::path::{Path, PathBuf};

use pim_core::error::{Error, ErrorClass};
use pim_io::append::{append_row, read_locked, Appended};
use pim_io::fieldlog::{log_row, LogEntry, LOG_HEADER};
use pim_io::track::read_track;
use time::format_description::well_known::Rfc3339;

use crate::common::{finish, open, stdout, CliResult};
use crate::fix::{fix_from_log, FixArgs};

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum NorthArg {
    True,
    Magnetic,
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The field log to add to (created with its header when missing).
    #[arg(value_name = "FILE")]
    pub file: PathBuf,
    /// Latitude of the spot, WGS84 degrees.
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub lat: Option<String>,
    /// Longitude of the spot, WGS84 degrees.
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub lon: Option<String>,
    /// Take the position from the newest point of this GPS track instead.
    #[arg(long, value_name = "GPX", conflicts_with_all = ["lat", "lon"])]
    pub gps_from: Option<PathBuf>,
    /// The bearing read on the antenna, degrees clockwise from north.
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub bearing_deg: String,
    /// Which north the bearing is from.
    #[arg(long, value_enum, default_value_t = NorthArg::True)]
    pub north: NorthArg,
    /// This reading's standard deviation in degrees.
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub sigma_deg: Option<String>,
    /// Signal level seen, dBm.
    #[arg(long, value_name = "DBM", allow_hyphen_values = true)]
    pub level_dbm: Option<String>,
    /// A note (where, what was seen).
    #[arg(long)]
    pub note: Option<String>,
    /// When the reading was taken, ISO 8601 (default: now, UTC).
    #[arg(long, value_name = "TIME")]
    pub time: Option<String>,
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

/// One reading as typed: the text of each column, checked only by [`save_reading`].
#[derive(Clone, Debug)]
pub(crate) struct ReadingText {
    pub lat: Option<String>,
    pub lon: Option<String>,
    pub bearing_deg: String,
    pub north: NorthArg,
    pub sigma_deg: Option<String>,
    pub level_dbm: Option<String>,
    pub note: Option<String>,
    /// ISO 8601; now (UTC, whole seconds) when `None`.
    pub time: Option<String>,
}

/// Checks a reading exactly as the log reader will and appends it to the log under the
/// log's lock. A bad value's error is placed at `origin(column)` (an option name for
/// `pim log`, an input's name for the walk page).
pub(crate) fn save_reading(
    file: &Path,
    reading: &ReadingText,
    origin: &dyn Fn(&'static str) -> String,
) -> CliResult<Appended> {
    let now = time::OffsetDateTime::now_utc()
        .replace_nanosecond(0)
        .unwrap_or_else(|_| time::OffsetDateTime::now_utc());
    let time = reading
        .time
        .clone()
        .unwrap_or_else(|| now.format(&Rfc3339).unwrap_or_default());
    if let Some(note) = &reading.note {
        if note.contains(['\n', '\r']) {
            return Err(Error::argument(&origin("note"), "a note must fit on one line").into());
        }
    }
    let text = |v: &Option<String>| v.clone().unwrap_or_default();
    const COLUMNS: [&str; 8] = [
        "time",
        "lat",
        "lon",
        "bearing_deg",
        "north",
        "sigma_deg",
        "level_dbm",
        "note",
    ];
    let entry = LogEntry {
        fields: vec![
            ("time", time),
            ("lat", text(&reading.lat)),
            ("lon", text(&reading.lon)),
            ("bearing_deg", reading.bearing_deg.clone()),
            (
                "north",
                match reading.north {
                    NorthArg::True => "true",
                    NorthArg::Magnetic => "magnetic",
                }
                .to_string(),
            ),
            ("sigma_deg", text(&reading.sigma_deg)),
            ("level_dbm", text(&reading.level_dbm)),
            ("note", text(&reading.note)),
        ],
        origin: COLUMNS.iter().map(|&c| (c, origin(c))).collect(),
    };
    // The reading is checked exactly as the log reader will check it, before any write.
    let row = log_row(&entry, 0).map_err(as_argument)?;
    // A magnetic bearing the World Magnetic Model cannot turn true would block every
    // later fix of the log: refused before it is written.
    if row.north == pim_io::fieldlog::North::Magnetic {
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
            )
            .into());
        }
    }
    let source = file.display().to_string();
    // What the log may leave out when it has no column for it: a time the clock gave,
    // and true north (the reader's default).
    let mut droppable = Vec::new();
    if reading.time.is_none() {
        droppable.push("time");
    }
    if reading.north == NorthArg::True {
        droppable.push("north");
    }
    Ok(append_row(file, LOG_HEADER, &|header, _delimiter| {
        entry.cells_for_header(header, &source, &droppable)
    })?)
}

pub fn run(args: Args) -> CliResult {
    let (lat, lon, time) = match &args.gps_from {
        Some(gpx) => {
            let track = read_track(&gpx.display().to_string(), open(gpx)?)?;
            let (t, p) = track.newest().ok_or_else(|| {
                Error::input(
                    pim_core::Place::new(gpx.display().to_string()),
                    "no timed track point",
                )
            })?;
            let when = args.time.clone().or_else(|| t.format(&Rfc3339).ok());
            (
                Some(format!("{:.7}", p.lat_deg)),
                Some(format!("{:.7}", p.lon_deg)),
                when,
            )
        }
        None => (args.lat.clone(), args.lon.clone(), args.time.clone()),
    };
    if lat.is_none() || lon.is_none() {
        return Err(Error::argument(
            "--lat/--lon",
            "give the spot's position, or --gps-from a GPS track",
        )
        .into());
    }
    let reading = ReadingText {
        lat,
        lon,
        bearing_deg: args.bearing_deg.clone(),
        north: args.north,
        sigma_deg: args.sigma_deg.clone(),
        level_dbm: args.level_dbm.clone(),
        note: args.note.clone(),
        time,
    };
    let appended = save_reading(&args.file, &reading, &|column| {
        format!("--{}", column.replace('_', "-"))
    })?;
    let source = args.file.display().to_string();
    let mut out = stdout();
    writeln!(
        out,
        "Saved to {source}, line {}{}.",
        appended.line,
        if appended.created { " (new log)" } else { "" }
    )?;
    // The running fix, from the whole log as it now stands.
    let bytes = read_locked(&args.file)?;
    let text = String::from_utf8_lossy(&bytes);
    match fix_from_log(&args.file, Some(&text), &FixArgs::default()) {
        Ok((fix, _)) => {
            let e = &fix.ellipse;
            writeln!(
                out,
                "Running fix {:.6}, {:.6} from {} readings; {:.0}% ellipse {:.0} × {:.0} m at {:.0}°.",
                fix.position.lat_deg,
                fix.position.lon_deg,
                fix.n_used,
                e.confidence * 100.0,
                e.semi_major_m,
                e.semi_minor_m,
                e.orientation_deg
            )?;
        }
        Err(crate::common::CliError::Core(e)) if e.class == ErrorClass::Refused => {
            writeln!(out, "No fix yet: {}", e.message)?;
        }
        Err(crate::common::CliError::Core(e)) => {
            writeln!(out, "No fix yet: {e}")?;
        }
        Err(other) => return Err(other),
    }
    finish(out)
}
