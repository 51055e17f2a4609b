//! `pim fix --log FILE`: the junction's location from a bearing walk, with its ellipse.

use std::io::Write;
use std::path::{Path, PathBuf};

use pim_core::fix::{
    locate_with_levels, Exponent, Fix, FixOptions, FixRefusal, LevelOptions, Loss, Method,
    OffsetChoice,
};
use pim_io::export::{site_geojson, site_kml, SiteItems};
use pim_io::fieldlog::{prepare, read_field_log, FieldLog, Prepared};
use pim_io::track::read_track;

use crate::common::{finish, finite_arg, open, stdout, CliResult};

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum FixFormat {
    Table,
    Json,
    Geojson,
    Kml,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum MethodArg {
    /// maximum likelihood (nonlinear least squares on the bearing residuals)
    Ml,
    /// closed-form least-squares intersection of the lines
    Ls,
    /// M-estimate that down-weights readings that disagree
    Robust,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum OffsetArg {
    /// when the walk surrounds the junction and the offset is significant (5 % test)
    Auto,
    /// whenever the walk surrounds the junction
    Estimate,
    /// never
    None,
}

/// Which measurements of the log make the fix.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum UseArg {
    /// the bearings only
    Bearings,
    /// the levels only (at least four spots, not on one line)
    Levels,
    /// bearings and levels in one likelihood
    Both,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum LossArg {
    Huber,
    Andrews,
}

/// Options that choose and tune the fix; shared with the ticket and the walk commands.
#[derive(clap::Args, Clone, Debug)]
pub struct FixArgs {
    /// Estimator.
    #[arg(long, value_enum, default_value_t = MethodArg::Robust)]
    pub method: MethodArg,
    /// Weight function of the robust estimator.
    #[arg(long, value_enum, default_value_t = LossArg::Huber)]
    pub loss: LossArg,
    /// Probability that the ellipse holds the junction.
    #[arg(long, default_value = "0.95", value_parser = confidence_arg, allow_hyphen_values = true)]
    pub confidence: f64,
    /// Standard deviation of every bearing in degrees (overrides the log's sigma_deg).
    #[arg(long, value_name = "DEG", value_parser = sigma_arg, allow_hyphen_values = true)]
    pub sigma_deg: Option<f64>,
    /// GPS track (GPX) that places readings lacking lat/lon by their time.
    #[arg(long, value_name = "GPX")]
    pub track: Option<PathBuf>,
    /// Declination (east positive) for magnetic readings instead of the World Magnetic Model.
    #[arg(long, value_name = "DEG", value_parser = declination_arg, allow_hyphen_values = true)]
    pub declination_deg: Option<f64>,
    /// Readings may point either way (antenna with a front/back ambiguity).
    #[arg(long)]
    pub ambiguous: bool,
    /// 95 % radius of the observers' positions in metres, for readings whose log has no
    /// accuracy_m (0: surveyed spots; default 12 m, a handheld GPS).
    #[arg(long, value_name = "M", value_parser = accuracy_arg, allow_hyphen_values = true)]
    pub position_accuracy_m: Option<f64>,
    /// Estimate a common offset on every bearing (antenna mounting, compass).
    #[arg(long, value_enum, default_value_t = OffsetArg::Auto)]
    pub offset: OffsetArg,
    /// Which measurements make the fix (default: both when at least three rows have a
    /// level_dbm, else bearings; with --ambiguous, bearings unless asked: each front/back
    /// reading is then taken the way nearer the joint fix).
    #[arg(long = "use", value_enum, value_name = "WHICH")]
    pub use_: Option<UseArg>,
    /// Standard deviation of every level in dB (shadowing and multipath; default:
    /// estimated from the residuals).
    #[arg(long, value_name = "DB", value_parser = level_sigma_arg, allow_hyphen_values = true)]
    pub level_sigma_db: Option<f64>,
    /// The receiver's saturation: a level at or above it is a lower bound.
    #[arg(long, value_name = "DBM", value_parser = level_max_arg, allow_hyphen_values = true)]
    pub level_max_dbm: Option<f64>,
    /// Path-loss exponent: a number (2 in free space) fixes it, LOW..HIGH bounds its
    /// estimate (default 2..4).
    #[arg(long, value_name = "N", value_parser = exponent_arg)]
    pub level_exponent: Option<Exponent>,
    /// The frequency heard (a bare number is MHz): levels within λ/2π of the fix, in the
    /// near field, are set aside (without it, within 1 m).
    #[arg(long = "freq", id = "level_freq", value_name = "FREQ", value_parser = crate::common::frequency_arg)]
    pub freq: Option<pim_core::freq::Hz>,
}

fn level_sigma_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "dB")?;
    if (0.1..=30.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("level σ {text} dB must lie within 0.1–30 dB"))
    }
}

fn level_max_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "dBm")?;
    if (-250.0..=100.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("saturation {text} dBm is absurd"))
    }
}

/// The physical range of a path-loss exponent: below 1.5 only a guided path (a corridor,
/// a cable run), above 6 only a heavily obstructed one (Rappaport, *Wireless
/// Communications*, Table 4.2).
const EXPONENT_LIMITS: std::ops::RangeInclusive<f64> = 1.5..=6.0;

fn exponent_arg(text: &str) -> Result<Exponent, String> {
    let check = |t: &str| -> Result<f64, String> {
        let v = finite_arg(t.trim())?;
        if EXPONENT_LIMITS.contains(&v) {
            Ok(v)
        } else {
            Err(format!(
                "path-loss exponent {t} is outside {}–{} (2 in free space)",
                EXPONENT_LIMITS.start(),
                EXPONENT_LIMITS.end()
            ))
        }
    };
    match text.split_once("..") {
        Some((low, high)) => {
            let (low, high) = (check(low)?, check(high)?);
            if low >= high {
                return Err(format!("exponent range {text}: LOW must be below HIGH"));
            }
            Ok(Exponent::Within { low, high })
        }
        None => check(text).map(|value| Exponent::Given { value }),
    }
}

fn accuracy_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "m")?;
    if (0.0..=pim_io::fieldlog::MAX_ACCURACY_M).contains(&v) {
        Ok(v)
    } else {
        Err(format!(
            "position accuracy {text} m must lie within 0–{} m",
            pim_io::fieldlog::MAX_ACCURACY_M
        ))
    }
}

/// The confidence levels a region is drawn for: below one half a region says less than
/// a coin toss; above 0.9999 the χ² and F quantiles rest on the far tail of a model no
/// bearing walk follows that closely.
pub const CONFIDENCE_RANGE: std::ops::RangeInclusive<f64> = 0.5..=0.9999;

fn confidence_arg(text: &str) -> Result<f64, String> {
    let v = finite_arg(text)?;
    if CONFIDENCE_RANGE.contains(&v) {
        Ok(v)
    } else {
        Err(format!(
            "confidence {text} is outside {}–{} (0.95 is usual)",
            CONFIDENCE_RANGE.start(),
            CONFIDENCE_RANGE.end()
        ))
    }
}

fn sigma_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "°")?;
    if v > 0.0 && v < pim_io::fieldlog::MIN_SIGMA_DEG {
        return Err(format!(
            "σ {text}° is below {}°, finer than any bearing taken by hand; give the spread of the antenna's bearings",
            pim_io::fieldlog::MIN_SIGMA_DEG
        ));
    }
    if v > 0.0 && v <= 90.0 {
        Ok(v)
    } else {
        Err(format!("σ {text}° must be above 0 and at most 90"))
    }
}

fn declination_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "°")?;
    if (-180.0..=180.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("declination {text}° is outside −180…180"))
    }
}

impl Default for FixArgs {
    /// Robust M-estimate, 95 %, σ from the log, no track, declination from the WMM.
    fn default() -> Self {
        FixArgs {
            method: MethodArg::Robust,
            loss: LossArg::Huber,
            confidence: 0.95,
            sigma_deg: None,
            track: None,
            declination_deg: None,
            ambiguous: false,
            position_accuracy_m: None,
            offset: OffsetArg::Auto,
            use_: None,
            level_sigma_db: None,
            level_max_dbm: None,
            level_exponent: None,
            freq: None,
        }
    }
}

impl FixArgs {
    pub fn options(&self) -> FixOptions {
        FixOptions {
            method: match self.method {
                MethodArg::Ml => Method::Ml,
                MethodArg::Ls => Method::Ls,
                MethodArg::Robust => Method::Robust,
            },
            confidence: self.confidence,
            sigma_deg: self.sigma_deg,
            ambiguous: self.ambiguous,
            loss: match self.loss {
                LossArg::Huber => Loss::Huber,
                LossArg::Andrews => Loss::Andrews,
            },
            position_accuracy_m: self.position_accuracy_m,
            offset: match self.offset {
                OffsetArg::Auto => OffsetChoice::Auto,
                OffsetArg::Estimate => OffsetChoice::Estimate,
                OffsetArg::None => OffsetChoice::None,
            },
        }
    }

    /// How levels are used.
    pub fn level_options(&self) -> LevelOptions {
        LevelOptions {
            exponent: self.level_exponent.unwrap_or_default(),
            sigma_db: self.level_sigma_db,
            max_dbm: self.level_max_dbm,
            freq: self.freq,
        }
    }

    /// Which measurements of `prepared` make the fix: as asked, else both when at least
    /// three rows have a level (levels alone when no row has a bearing).
    pub fn measurements(&self, prepared: &Prepared) -> CliResult<UseArg> {
        let levels = prepared.levels.len();
        let chosen = match self.use_ {
            Some(u) => u,
            None if levels >= pim_core::fix::levels::LEVELS_FOR_DEFAULT && !self.ambiguous => {
                if prepared.readings.is_empty() {
                    UseArg::Levels
                } else {
                    UseArg::Both
                }
            }
            None => UseArg::Bearings,
        };
        if chosen != UseArg::Bearings && levels == 0 {
            return Err(pim_core::Error::argument(
                "--use",
                "the log has no level_dbm: give levels, or --use bearings",
            )
            .into());
        }
        Ok(chosen)
    }
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Field log: CSV with lat, lon, bearing_deg and/or level_dbm (and time, north, sigma_deg, accuracy_m, setup, note).
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    #[command(flatten)]
    pub fix: FixArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FixFormat::Table)]
    pub format: FixFormat,
    /// Site structures (CSV) to put beside the fix in GeoJSON and KML.
    #[arg(long, value_name = "FILE")]
    pub structures: Option<PathBuf>,
    /// Emitters (CSV or JSON) to put beside the fix in GeoJSON and KML.
    #[arg(long, value_name = "FILE")]
    pub emitters: Option<PathBuf>,
    #[command(flatten)]
    pub columns: crate::args::ColumnsArgs,
}

/// Reads a field log (and a track), applies declination, and fixes.
pub fn fix_from_log(
    log_path: &Path,
    log_text: Option<&str>,
    args: &FixArgs,
) -> CliResult<(Fix, Prepared)> {
    fix_and_log(log_path, log_text, args).map(|(fix, prepared, _)| (fix, prepared))
}

/// The same, with the log as read (for naming its readings by number and time).
pub fn fix_and_log(
    log_path: &Path,
    log_text: Option<&str>,
    args: &FixArgs,
) -> CliResult<(Fix, Prepared, FieldLog)> {
    let source = log_path.display().to_string();
    let log = match log_text {
        Some(text) => read_field_log(&source, text.as_bytes(), args.track.is_some())?,
        None => read_field_log(&source, open(log_path)?, args.track.is_some())?,
    };
    crate::common::note_unused(&source, &log.ignored_columns);
    let track = match &args.track {
        Some(p) => Some(read_track(&p.display().to_string(), open(p)?)?),
        None => None,
    };
    let today = time::OffsetDateTime::now_utc().date();
    let prepared = prepare(&log, track.as_ref(), args.declination_deg, today)?;
    for note in &prepared.notes {
        eprintln_safe!("pim: note: {note}");
    }
    let fix = match args.measurements(&prepared)? {
        UseArg::Bearings => locate_with_levels(
            &prepared.readings,
            &[],
            &args.options(),
            &args.level_options(),
        ),
        UseArg::Levels => locate_with_levels(
            &[],
            &prepared.levels,
            &args.options(),
            &args.level_options(),
        ),
        UseArg::Both => locate_with_levels(
            &prepared.readings,
            &prepared.levels,
            &args.options(),
            &args.level_options(),
        ),
    }
    .map_err(refusal_error)?;
    Ok((fix, prepared, log))
}

/// The engine's refusal in the command line's words: where the remedy is an option or a
/// log column, it is named.
pub fn refusal_error(r: FixRefusal) -> pim_core::Error {
    let message = match &r {
        FixRefusal::TwoBearingsWithoutSigma => "two bearings without σ fix a point but say nothing of its uncertainty: give sigma_deg in the log or --sigma-deg, or take a third bearing".to_string(),
        FixRefusal::TooFewForScatter { .. } => "too few agreeing readings to estimate the bearing scatter: give --sigma-deg".to_string(),
        FixRefusal::ConfidenceOutOfRange { .. } => {
            return pim_core::Error::argument("--confidence", "must lie strictly between 0 and 1")
        }
        other => other.to_string(),
    };
    let mut e = pim_core::Error::from(r);
    e.message = message;
    e
}

pub use pim_report::fix::{fix_json, fix_json_named, fix_summary, readings_table_named};

pub fn run(args: Args) -> CliResult {
    let no_map = matches!(args.format, FixFormat::Table | FixFormat::Json);
    if no_map && (args.structures.is_some() || args.emitters.is_some()) {
        return Err(pim_core::Error::argument(
            "--structures/--emitters",
            "are shown in --format geojson and kml only",
        )
        .into());
    }
    let (structures, emitters) = crate::common::load_site_items(
        args.structures.as_deref(),
        args.emitters.as_deref(),
        &args.columns,
    )?;
    let (fix, prepared, log) = fix_and_log(&args.log, None, &args.fix)?;
    // Readings named by number and time in UTC, as the log's times are read.
    let names = pim_report::readings::ReadingNames::new(&log, None);
    let items = SiteItems {
        structures: &structures,
        emitters: &emitters,
    };
    let mut out = stdout();
    match args.format {
        FixFormat::Table => {
            write!(
                out,
                "{}",
                fix_summary(&fix, &args.log.display().to_string(), &prepared.corrections)
            )?;
            writeln!(out)?;
            write!(out, "{}", readings_table_named(&fix, &names))?;
            for w in &fix.warnings {
                let line = format!("warning: {w}");
                writeln!(
                    out,
                    "{}",
                    pim_report::text_table::wrap_lines(
                        &line,
                        pim_report::text_table::TERMINAL_WIDTH
                    )
                )?;
            }
        }
        FixFormat::Json => {
            let json = fix_json_named(&fix, &prepared.corrections, &names);
            pim_io::precision::write_json(&mut out, &json, true)?;
            writeln!(out)?;
        }
        FixFormat::Geojson => {
            pim_io::precision::write_json(&mut out, &site_geojson(&fix, &items), true)?;
            writeln!(out)?;
        }
        FixFormat::Kml => {
            write!(
                out,
                "{}",
                site_kml(&fix, &items, &format!("Fix from {}", args.log.display()))
            )?;
        }
    }
    finish(out)
}
