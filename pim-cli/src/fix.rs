//! `pim fix --log FILE`: the junction's location from a bearing walk, with its ellipse.

use std::io::Write;
use std::path::{Path, PathBuf};

use pim_core::fix::{locate, Fix, FixOptions, FixRefusal, Loss, Method, RegionKind, SigmaSource};
use pim_io::export::{fix_geojson, fix_kml};
use pim_io::fieldlog::{prepare, read_field_log, Correction, Prepared};
use pim_io::track::read_track;

use crate::common::{finish, finite_arg, open, stdout, CliResult};
use pim_report::text_table::{Align, TextTable};

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
    let v = finite_arg(text)?;
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
    let v = finite_arg(text)?;
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
        }
    }
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Field log: CSV with lat, lon, bearing_deg (and time, north, sigma_deg, level_dbm, note).
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    #[command(flatten)]
    pub fix: FixArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FixFormat::Table)]
    pub format: FixFormat,
}

/// Reads a field log (and a track), applies declination, and fixes.
pub fn fix_from_log(
    log_path: &Path,
    log_text: Option<&str>,
    args: &FixArgs,
) -> CliResult<(Fix, Prepared)> {
    let source = log_path.display().to_string();
    let log = match log_text {
        Some(text) => read_field_log(&source, text.as_bytes(), args.track.is_some())?,
        None => read_field_log(&source, open(log_path)?, args.track.is_some())?,
    };
    if !log.ignored_columns.is_empty() {
        eprintln_safe!(
            "pim: note: {source}: columns not used: {}",
            log.ignored_columns.join(", ")
        );
    }
    let track = match &args.track {
        Some(p) => Some(read_track(&p.display().to_string(), open(p)?)?),
        None => None,
    };
    let today = time::OffsetDateTime::now_utc().date();
    let prepared = prepare(&log, track.as_ref(), args.declination_deg, today)?;
    for note in &prepared.notes {
        eprintln_safe!("pim: note: {note}");
    }
    let fix = locate(&prepared.readings, &args.options()).map_err(refusal_error)?;
    Ok((fix, prepared))
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

pub use pim_report::fix::method_name;

#[derive(serde::Serialize)]
struct EllipseJson {
    semi_major_m: f64,
    semi_minor_m: f64,
    orientation_deg: f64,
    confidence: f64,
    area_m2: f64,
}

#[derive(serde::Serialize)]
struct OutlierJson {
    line: u64,
    residual_deg: f64,
}

/// The fix as the JSON object of the contract, serialised straight from the results
/// (no tree of values is built, so a long log costs no second copy).
#[derive(serde::Serialize)]
pub struct FixJson<'a> {
    lat: f64,
    lon: f64,
    method: pim_core::fix::Method,
    ellipse: EllipseJson,
    cep_m: f64,
    sigma_deg_used: f64,
    sigma_source: SigmaSource,
    /// The region claimed, a closed ring of [lat, lon].
    region: Vec<[f64; 2]>,
    region_kind: RegionKind,
    n_used: usize,
    residuals: &'a [pim_core::fix::ReadingFit],
    outliers: Vec<OutlierJson>,
    declination: &'a [Correction],
    warnings: Vec<String>,
}

pub fn fix_json<'a>(fix: &'a Fix, corrections: &'a [Correction]) -> FixJson<'a> {
    let e = &fix.ellipse;
    FixJson {
        lat: fix.position.lat_deg,
        lon: fix.position.lon_deg,
        method: fix.method,
        ellipse: EllipseJson {
            semi_major_m: e.semi_major_m,
            semi_minor_m: e.semi_minor_m,
            orientation_deg: e.orientation_deg,
            confidence: e.confidence,
            area_m2: e.area_m2(),
        },
        cep_m: fix.cep_m,
        sigma_deg_used: fix.sigma_deg_used,
        sigma_source: fix.sigma_source,
        region: fix.region.iter().map(|p| [p.lat_deg, p.lon_deg]).collect(),
        region_kind: fix.region_kind,
        n_used: fix.n_used,
        residuals: &fix.readings,
        outliers: fix
            .readings
            .iter()
            .filter(|r| r.outlier)
            .map(|r| OutlierJson {
                line: r.line,
                residual_deg: r.residual_deg,
            })
            .collect(),
        declination: corrections,
        warnings: fix.warnings.iter().map(|w| w.to_string()).collect(),
    }
}

/// A few lines that state the fix for people.
pub fn fix_summary(fix: &Fix, source: &str, corrections: &[Correction]) -> String {
    let e = &fix.ellipse;
    let mut s = format!(
        "Fix by {} from {} of {} readings in {source}\n  {:.6}, {:.6}\n",
        method_name(fix.method),
        fix.n_used,
        fix.readings.len(),
        fix.position.lat_deg,
        fix.position.lon_deg
    );
    s.push_str(&format!(
        "  {:.0}% ellipse {:.1} m × {:.1} m (semi-axes), major axis {:.0}° true; area {:.0} m²; CEP {:.1} m\n",
        e.confidence * 100.0,
        e.semi_major_m,
        e.semi_minor_m,
        e.orientation_deg,
        e.area_m2(),
        fix.cep_m
    ));
    s.push_str(&match fix.sigma_source {
        SigmaSource::Given => format!("  bearing σ {:.1}° as given (ellipse from χ² with 2 degrees of freedom)\n", fix.sigma_deg_used),
        SigmaSource::Estimated => format!(
            "  bearing σ {:.1}° estimated from the residuals (ellipse from F with 2 and {} degrees of freedom)\n",
            fix.sigma_deg_used,
            fix.readings.len().saturating_sub(2)
        ),
        SigmaSource::Contradicted => format!(
            "  bearing σ {:.1}° from the residuals, which contradict the σ given (region widened; F with 2 and {} degrees of freedom)\n",
            fix.sigma_deg_used,
            fix.readings.len().saturating_sub(2)
        ),
    });
    if fix.region_kind == RegionKind::Likelihood {
        s.push_str(
            "  region: the likelihood contour (the ellipse does not hold in this geometry)\n",
        );
    }
    if !corrections.is_empty() {
        let mut sources: Vec<&str> = corrections.iter().map(|c| c.source.as_str()).collect();
        sources.dedup();
        let (lo, hi) = corrections.iter().fold((f64::MAX, f64::MIN), |(a, b), c| {
            (a.min(c.declination_deg), b.max(c.declination_deg))
        });
        let range = if (hi - lo).abs() < 0.05 {
            format!("{lo:+.1}°")
        } else {
            format!("{lo:+.1}° to {hi:+.1}°")
        };
        s.push_str(&format!(
            "  {} magnetic reading{} turned to true north by {range} ({})\n",
            corrections.len(),
            if corrections.len() == 1 { "" } else { "s" },
            sources.join(", ")
        ));
    }
    s
}

fn readings_table(fix: &Fix) -> String {
    let mut t = TextTable::new(&[
        ("line", Align::Right),
        ("bearing °", Align::Right),
        ("to fix °", Align::Right),
        ("residual °", Align::Right),
        ("range m", Align::Right),
        ("weight", Align::Right),
        ("", Align::Left),
    ]);
    for r in &fix.readings {
        let mut flags = Vec::new();
        if r.outlier {
            flags.push("outlier");
        }
        if r.flipped {
            flags.push("taken reversed");
        }
        t.push(vec![
            r.line.to_string(),
            format!("{:.1}", r.bearing_deg),
            format!("{:.1}", r.predicted_deg),
            format!("{:+.1}", r.residual_deg),
            format!("{:.0}", r.distance_m),
            format!("{:.2}", r.weight),
            flags.join(", "),
        ]);
    }
    t.render()
}

pub fn run(args: Args) -> CliResult {
    let (fix, prepared) = fix_from_log(&args.log, None, &args.fix)?;
    let mut out = stdout();
    match args.format {
        FixFormat::Table => {
            write!(
                out,
                "{}",
                fix_summary(&fix, &args.log.display().to_string(), &prepared.corrections)
            )?;
            writeln!(out)?;
            write!(out, "{}", readings_table(&fix))?;
            for w in &fix.warnings {
                writeln!(out, "warning: {w}")?;
            }
        }
        FixFormat::Json => {
            serde_json::to_writer_pretty(&mut out, &fix_json(&fix, &prepared.corrections))
                .map_err(std::io::Error::from)?;
            writeln!(out)?;
        }
        FixFormat::Geojson => {
            serde_json::to_writer_pretty(&mut out, &fix_geojson(&fix))
                .map_err(std::io::Error::from)?;
            writeln!(out)?;
        }
        FixFormat::Kml => {
            write!(
                out,
                "{}",
                fix_kml(&fix, &format!("Fix from {}", args.log.display()))
            )?;
        }
    }
    finish(out)
}
