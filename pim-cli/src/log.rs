//! `pim log --log FILE`: add one reading (a bearing, a level or both) to a field log, safely, and show the
//! running fix; or take the last reading back (`--undo`), or list the readings with
//! their residuals at the running fix (`--list`).

use std::io::Write;
use std::path::PathBuf;

use pim_core::error::{Error, ErrorClass};
use pim_io::append::{read_locked, remove_last_row};
use pim_io::fieldlog::{read_field_log, save_reading, North, ReadingText};
use pim_io::text::{decimal_degrees, Axis};
use pim_io::track::read_track;
use time::format_description::well_known::Rfc3339;

use crate::common::{finish, open, stdout, CliResult, ListFormat};
use crate::fix::{fix_from_log, FixArgs};

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum NorthArg {
    True,
    Magnetic,
}

#[derive(clap::Args, Debug)]
#[command(group(clap::ArgGroup::new("field_log").required(true).args(["file", "log"])))]
pub struct Args {
    /// The field log (a shorthand for --log FILE).
    #[arg(value_name = "FILE")]
    pub file: Option<PathBuf>,
    /// The field log to add to (created with its header when missing).
    #[arg(long, value_name = "FILE")]
    pub log: Option<PathBuf>,
    /// Take back the last reading of the log (it is printed) instead of adding one.
    #[arg(long, conflicts_with_all = ["list", "lat", "lon", "bearing_deg", "reading_sigma_deg", "level_dbm", "setup", "note", "time", "accuracy_m"])]
    pub undo: bool,
    /// List the readings with their residuals at the running fix instead of adding one.
    #[arg(long, conflicts_with_all = ["lat", "lon", "bearing_deg", "reading_sigma_deg", "level_dbm", "setup", "note", "time", "accuracy_m"])]
    pub list: bool,
    /// Latitude of the spot: degrees (45.1046), degrees and minutes (45°06.275'N) or
    /// degrees, minutes and seconds (45 06 16.5 N).
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub lat: Option<String>,
    /// Longitude of the spot, in the notations of --lat with E or W.
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub lon: Option<String>,
    /// The bearing read on the antenna, degrees clockwise from north (may be left out
    /// when --level-dbm is given: a level heard with no bearing).
    #[arg(long, value_name = "DEG", allow_hyphen_values = true, required_unless_present_any = ["undo", "list", "level_dbm"])]
    pub bearing_deg: Option<String>,
    /// Which north the bearing is from.
    #[arg(long, value_enum, default_value_t = NorthArg::True)]
    pub north: NorthArg,
    /// This reading's standard deviation in degrees (the log's `sigma_deg` column;
    /// --sigma-deg overrides every reading's σ in the running fix, as in `pim fix`).
    #[arg(long, value_name = "DEG", allow_hyphen_values = true)]
    pub reading_sigma_deg: Option<String>,
    /// Signal level heard, dBm (used for the fix with the bearings, or alone).
    #[arg(long, value_name = "DBM", allow_hyphen_values = true)]
    pub level_dbm: Option<String>,
    /// The antenna and receiver setup the level was heard with (the log's `setup`
    /// column): levels of one setup share their level at 1 m, so a changed antenna,
    /// attenuator or gain gets a name of its own. A new log gets the column.
    #[arg(long, value_name = "NAME", requires = "level_dbm")]
    pub setup: Option<String>,
    /// The position's accuracy, metres (95 % radius, as a phone's geolocation gives it;
    /// the log's `accuracy_m` column, added to a new log).
    #[arg(long, value_name = "M", allow_hyphen_values = true)]
    pub accuracy_m: Option<String>,
    /// A note (where, what was seen).
    #[arg(long)]
    pub note: Option<String>,
    /// When the reading was taken, ISO 8601 (default: now, UTC; with --track and no
    /// --lat/--lon, the time of the track's newest point).
    #[arg(long, value_name = "TIME")]
    pub time: Option<String>,
    /// Format of the --list listing.
    #[arg(long, value_enum, default_value_t = ListFormat::Table)]
    pub format: ListFormat,
    /// Every column of the --list table, however wide (by default it keeps to 100
    /// characters, leaving out the time, which CSV, JSON and Markdown always have).
    #[arg(long, requires = "list")]
    pub wide: bool,
    /// The running fix's estimator; --track also gives the new reading its position when
    /// --lat/--lon are left out (at --time, else the track's newest point).
    #[command(flatten)]
    pub fix: FixArgs,
}

/// A typed quantity as the log stores it: its unit, when given and of the right kind
/// (`10°`, `-95dBm`), dropped; the number is checked by the log's own rules.
fn number_of(text: &Option<String>, unit: &str, option: &str) -> CliResult<Option<String>> {
    let Some(t) = text else { return Ok(None) };
    let (number, given) = pim_io::text::split_unit(t);
    if given.is_empty() {
        return Ok(Some(t.clone()));
    }
    pim_io::text::parse_quantity(t, unit).map_err(|m| Error::argument(option, m))?;
    Ok(Some(number.to_string()))
}

/// The option of `pim log` that fills a log column.
fn option_of(column: &str) -> String {
    match column {
        "sigma_deg" => "--reading-sigma-deg".to_string(),
        other => format!("--{}", other.replace('_', "-")),
    }
}

/// The new reading's position and time: as typed, or from the GPS track (at `--time`
/// when given, else its newest point).
type Spot = (Option<String>, Option<String>, Option<String>);

fn position_and_time(args: &Args) -> CliResult<Spot> {
    let (Some(gpx), None, None) = (&args.fix.track, &args.lat, &args.lon) else {
        if args.lat.is_none() || args.lon.is_none() {
            return Err(Error::argument(
                "--lat/--lon",
                "give the spot's position, or --track with a GPS track to take it from",
            )
            .into());
        }
        let typed = |text: &Option<String>, axis| text.as_deref().map(|t| decimal_degrees(t, axis));
        return Ok((
            typed(&args.lat, Axis::Latitude),
            typed(&args.lon, Axis::Longitude),
            args.time.clone(),
        ));
    };
    let source = gpx.display().to_string();
    let track = read_track(&source, open(gpx)?)?;
    let (when, p) = match &args.time {
        Some(text) => {
            let t = pim_io::fieldlog::parse_time(text).map_err(|m| Error::argument("--time", m))?;
            let p = track.position_at(t).ok_or_else(|| {
                Error::argument(
                    "--time",
                    format!("{text} is outside the track {source}; give --lat and --lon"),
                )
            })?;
            (text.clone(), p)
        }
        None => {
            let (t, p) = track.newest().ok_or_else(|| {
                Error::input(pim_core::Place::new(&source), "no timed track point")
            })?;
            (t.format(&Rfc3339).unwrap_or_default(), p)
        }
    };
    Ok((
        Some(format!("{:.7}", p.lat_deg)),
        Some(format!("{:.7}", p.lon_deg)),
        Some(when),
    ))
}

pub fn run(args: Args) -> CliResult {
    let Some(file) = args.log.clone().or(args.file.clone()) else {
        return Err(Error::argument("--log", "give the field log").into());
    };
    if args.format != ListFormat::Table && !args.list {
        return Err(Error::argument("--format", "only the --list listing has formats").into());
    }
    let source = file.display().to_string();
    let mut out = stdout();
    if args.undo {
        let removed = remove_last_row(&file)?;
        writeln!(
            out,
            "Took back line {} of {source}: {}",
            removed.line, removed.row
        )?;
    } else if !args.list {
        let (lat, lon, time) = position_and_time(&args)?;
        let reading = ReadingText {
            lat,
            lon,
            bearing_deg: number_of(&args.bearing_deg, "°", "--bearing-deg")?.unwrap_or_default(),
            north: match args.north {
                NorthArg::True => North::True,
                NorthArg::Magnetic => North::Magnetic,
            },
            sigma_deg: number_of(&args.reading_sigma_deg, "°", "--reading-sigma-deg")?,
            level_dbm: number_of(&args.level_dbm, "dBm", "--level-dbm")?,
            setup: args.setup.clone(),
            note: args.note.clone(),
            time,
            accuracy_m: number_of(&args.accuracy_m, "m", "--accuracy-m")?,
            accuracy_where_logged: false,
        };
        let appended = save_reading(&file, &reading, &option_of)?;
        writeln!(
            out,
            "Saved to {source}, line {}{}.",
            appended.line,
            if appended.created { " (new log)" } else { "" }
        )?;
    }
    // The running fix, from the whole log as it now stands.
    let bytes = read_locked(&file)?;
    let text = String::from_utf8_lossy(&bytes);
    match fix_from_log(&file, Some(&text), &args.fix) {
        Ok((fix, _)) if args.list => {
            use pim_report::walk as w;
            let rows = read_field_log(&source, text.as_bytes(), args.fix.track.is_some())?.rows;
            match args.format {
                ListFormat::Table => write!(out, "{}", w::log_listing(&fix, &rows, args.wide))?,
                ListFormat::Markdown => write!(out, "{}", w::log_listing_markdown(&fix, &rows))?,
                ListFormat::Csv => w::log_listing_csv(&mut out, &fix, &rows)?,
                ListFormat::Json => {
                    pim_io::precision::write_json(
                        &mut out,
                        &w::log_listing_json(&fix, &rows),
                        true,
                    )?;
                    writeln!(out)?;
                }
            }
        }
        Ok((fix, _)) => {
            write!(out, "{}", pim_report::walk::running_fix_line(&fix))?;
            for w in &fix.warnings {
                writeln!(out, "warning: {w}")?;
            }
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
