//! The words and shapes of a bearing fix's output.

use pim_core::fix::{AccuracySource, Fix, Method, RegionKind, SigmaSource};
use pim_io::fieldlog::Correction;

use crate::readings::ReadingNames;
use crate::text_table::{Align, TextTable};

/// The estimator's name as a reader knows it.
/// The region a fix claims, in a few words: the ellipse with its semi-axes and
/// orientation, or the likelihood contour and how far it reaches when the ellipse does
/// not hold (`95% ellipse, semi-axes 30 × 18 m, at 31°`).
pub fn region_claimed(fix: &Fix) -> String {
    let e = &fix.ellipse;
    match fix.region_kind {
        RegionKind::Ellipse => format!(
            "{:.0}% ellipse, semi-axes {:.0} × {:.0} m, at {:.0}°",
            e.confidence * 100.0,
            e.semi_major_m,
            e.semi_minor_m,
            e.orientation_deg
        ),
        RegionKind::Likelihood if fix.open_towards_deg().is_some() => format!(
            "{:.0}% region open towards {:.0}° (the levels bound the junction on the walk's side only; no size)",
            e.confidence * 100.0,
            fix.open_towards_deg().unwrap_or_default()
        ),
        RegionKind::Likelihood => {
            let (along, across) = fix.reach_along_axes_m();
            format!(
                "{:.0}% region reaching {:.0} m along {:.0}° and {:.0} m across (the likelihood contour; the ellipse does not hold here)",
                e.confidence * 100.0,
                along,
                e.orientation_deg,
                across
            )
        }
    }
}

/// The bearing σ the region rests on and where it came from, in words (no statistics:
/// the laws behind the region are in the JSON and the README).
pub fn sigma_words(fix: &Fix) -> String {
    if let Some(words) = measurements_words(fix) {
        if fix.readings.is_empty() {
            return format!("fixed from {words}");
        }
        return format!("{}; fixed from {words}", bearing_sigma_words(fix));
    }
    bearing_sigma_words(fix)
}

fn bearing_sigma_words(fix: &Fix) -> String {
    match fix.sigma_source {
        SigmaSource::Given => format!("bearing σ {:.1}° as given", fix.sigma_deg_used),
        SigmaSource::Estimated => format!(
            "bearing σ {:.1}° estimated from the residuals (the region widened for the estimate)",
            fix.sigma_deg_used
        ),
        SigmaSource::Contradicted => format!(
            "bearing σ {:.1}° from the residuals, which contradict the σ given (the region widened)",
            fix.sigma_deg_used
        ),
        SigmaSource::Spots => format!(
            "bearing σ {:.1}° from the residuals, readings at one spot counted as sharing its error ({} spots)",
            fix.sigma_deg_used, fix.spots
        ),
    }
}

/// Where the observers' position accuracy came from, in words.
pub fn accuracy_words(fix: &Fix) -> String {
    let a = fix.position_accuracy.typical_m;
    match fix.position_accuracy.source {
        AccuracySource::Logged => format!("positions as logged (typically within {a:.0} m)"),
        AccuracySource::Stated => format!("positions within {a:.0} m as stated"),
        AccuracySource::LoggedAndStated => {
            format!("positions as logged, else as stated (typically within {a:.0} m)")
        }
        AccuracySource::Default => {
            format!("positions taken as within {a:.0} m (a handheld GPS; none logged or stated)")
        }
        AccuracySource::LoggedAndDefault => format!(
            "positions as logged, else taken as within {:.0} m (a handheld GPS)",
            pim_core::fix::variance::DEFAULT_POSITION_ACCURACY_M
        ),
    }
}

pub fn method_name(m: Method) -> &'static str {
    match m {
        Method::Ml => "maximum likelihood",
        Method::Ls => "least-squares intersection",
        Method::Robust => "robust M-estimate",
    }
}

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
    /// The reading's number in the log and its time ([`crate::readings`]), when named.
    #[serde(skip_serializing_if = "Option::is_none")]
    number: Option<usize>,
    #[serde(skip_serializing_if = "Option::is_none")]
    time: Option<String>,
    residual_deg: f64,
}

/// A reading's fit with its number and time beside its line, when named.
#[derive(serde::Serialize)]
struct ResidualJson<'a> {
    #[serde(flatten)]
    fit: &'a pim_core::fix::ReadingFit,
    #[serde(skip_serializing_if = "Option::is_none")]
    number: Option<usize>,
    #[serde(skip_serializing_if = "Option::is_none")]
    time: Option<String>,
}

/// The fix as the JSON object of the contract, serialised straight from the results
/// (no tree of values is built, so a long log costs no second copy).
#[derive(serde::Serialize)]
pub struct FixJson<'a> {
    lat_deg: f64,
    lon_deg: f64,
    method: pim_core::fix::Method,
    ellipse: EllipseJson,
    /// Null when the region is open (no size to speak of).
    cep_m: Option<f64>,
    sigma_deg_used: f64,
    sigma_source: SigmaSource,
    /// The region claimed, a closed ring of [lat, lon].
    region: Vec<[f64; 2]>,
    region_kind: RegionKind,
    /// How far the region reaches from the fix, m ([`Fix::reach_m`]); null when it is open.
    reach_m: Option<f64>,
    n_used: usize,
    /// How far the region reaches along the ellipse's major axis and across it, m; null
    /// when it is open.
    reach_along_axes_m: Option<[f64; 2]>,
    /// The direction the region stays open towards, degrees from north (only when it does
    /// not close: the ring is then drawn to the search's reach, no measurement).
    #[serde(skip_serializing_if = "Option::is_none")]
    region_open_towards_deg: Option<f64>,
    /// The laws behind the region: the degrees of freedom of the bearing σ (null when it
    /// is taken as known: χ² with 2) and the spots.
    sigma_dof: Option<f64>,
    spots: usize,
    position_accuracy: pim_core::fix::PositionAccuracy,
    offset: Option<pim_core::fix::Offset>,
    residuals: Vec<ResidualJson<'a>>,
    outliers: Vec<OutlierJson>,
    declination: &'a [Correction],
    warnings: Vec<String>,
    /// Which measurements made the fix.
    #[serde(skip_serializing_if = "Option::is_none")]
    measurements: Option<pim_core::fix::Measurements>,
    /// The level model (`exponent`, `l0_dbm`, `sigma_db`), when levels took part.
    #[serde(skip_serializing_if = "Option::is_none")]
    level_model: Option<&'a pim_core::fix::LevelModel>,
    /// Each level with its residual in dB, when levels took part.
    #[serde(skip_serializing_if = "<[_]>::is_empty")]
    level_residuals: &'a [pim_core::fix::LevelFit],
}

/// The fix as the JSON object of the contract.
pub fn fix_json<'a>(fix: &'a Fix, corrections: &'a [Correction]) -> FixJson<'a> {
    fix_json_named(fix, corrections, &ReadingNames::default())
}

/// The same, each residual and outlier with its reading's `number` and `time` beside
/// its `line` where `names` know the line.
pub fn fix_json_named<'a>(
    fix: &'a Fix,
    corrections: &'a [Correction],
    names: &ReadingNames,
) -> FixJson<'a> {
    let e = &fix.ellipse;
    let open = fix.open_towards_deg();
    FixJson {
        lat_deg: fix.position.lat_deg,
        lon_deg: fix.position.lon_deg,
        method: fix.method,
        ellipse: EllipseJson {
            semi_major_m: e.semi_major_m,
            semi_minor_m: e.semi_minor_m,
            orientation_deg: e.orientation_deg,
            confidence: e.confidence,
            area_m2: e.area_m2(),
        },
        cep_m: open.is_none().then_some(fix.cep_m),
        sigma_deg_used: fix.sigma_deg_used,
        sigma_source: fix.sigma_source,
        region: fix.region.iter().map(|p| [p.lat_deg, p.lon_deg]).collect(),
        region_kind: fix.region_kind,
        reach_m: open.is_none().then(|| fix.reach_m()),
        n_used: fix.n_used,
        reach_along_axes_m: open.is_none().then(|| {
            let (a, b) = fix.reach_along_axes_m();
            [a, b]
        }),
        region_open_towards_deg: open,
        sigma_dof: fix.sigma_dof,
        spots: fix.spots,
        position_accuracy: fix.position_accuracy,
        offset: fix.offset,
        residuals: fix
            .readings
            .iter()
            .map(|r| ResidualJson {
                fit: r,
                number: names.number(r.line),
                time: names.time_rfc3339(r.line),
            })
            .collect(),
        outliers: fix
            .readings
            .iter()
            .filter(|r| r.outlier)
            .map(|r| OutlierJson {
                line: r.line,
                number: names.number(r.line),
                time: names.time_rfc3339(r.line),
                residual_deg: r.residual_deg,
            })
            .collect(),
        declination: corrections,
        warnings: fix.warnings.iter().map(|w| w.to_string()).collect(),
        measurements: fix.measurements,
        level_model: fix.level_model.as_ref(),
        level_residuals: &fix.levels,
    }
}

/// The estimator's name, and the measurements it used when levels took part
/// (`robust M-estimate on bearings and levels`).
pub fn method_and_measurements(fix: &Fix) -> String {
    use pim_core::fix::Measurements;
    let name = method_name(fix.method);
    match fix.measurements {
        Some(Measurements::Levels) => format!("{name} on levels only"),
        Some(Measurements::Both) => format!("{name} on bearings and levels"),
        _ => name.to_string(),
    }
}

/// A level reading's part in a listing's status: its residual in dB, or why it counted
/// differently (set aside in the near field, a lower bound at saturation, an outlier).
pub fn level_status(l: &pim_core::fix::LevelFit) -> String {
    let mut s = format!(
        "level {} dBm, residual {} dB",
        pim_io::precision::fixed(l.level_dbm, 1),
        pim_io::precision::signed(l.residual_db, 1)
    );
    if l.near_field {
        s.push_str(" (near field: set aside)");
    } else if l.saturated {
        s.push_str(" (saturated: a lower bound)");
    } else if l.outlier {
        s.push_str(" (outlier)");
    }
    s
}

/// Which measurements made the fix, in words, with the level model when levels took part
/// (`bearings and levels (exponent 2.4 estimated, L₀ −31.2 dBm at 1 m, level σ 3.8 dB
/// estimated)`).
pub fn measurements_words(fix: &Fix) -> Option<String> {
    use pim_core::fix::levels::{ExponentSource, NearField};
    use pim_core::fix::Measurements;
    let which = match fix.measurements? {
        Measurements::Bearings => return None,
        Measurements::Levels => "levels only",
        Measurements::Both => "bearings and levels",
    };
    let m = fix.level_model.as_ref()?;
    let setups = if m.setups.len() > 1 {
        format!(" for the first of {} setups", m.setups.len())
    } else {
        String::new()
    };
    let near = match m.near_field {
        NearField::Wavelength { freq_hz } => {
            format!("λ/2π at {}", pim_core::freq::Hz(freq_hz).unit_text())
        }
        NearField::Fallback => "no frequency given".to_string(),
    };
    Some(format!(
        "{which} (path-loss exponent {:.2} {}, L₀ {:.1} dBm at 1 m{setups}, level σ {:.1} dB {}; levels within {} m of the fix set aside as near field, {near})",
        m.exponent,
        match m.exponent_source {
            ExponentSource::Given => "as given",
            ExponentSource::Estimated => "estimated",
            ExponentSource::AtBound => "held at its range's end",
        },
        m.l0_dbm,
        m.sigma_db,
        if m.sigma_given {
            "as given"
        } else {
            "estimated"
        },
        pim_io::precision::fixed(m.near_field_m, 2)
    ))
}

/// A few lines that state the fix for people.
pub fn fix_summary(fix: &Fix, source: &str, corrections: &[Correction]) -> String {
    let e = &fix.ellipse;
    let mut s = format!(
        "Fix by {} from {} of {} readings in {source}\n  {:.6}, {:.6}\n",
        method_name(fix.method),
        fix.n_used,
        fix.readings.len() + fix.levels.len(),
        fix.position.lat_deg,
        fix.position.lon_deg
    );
    match fix.region_kind {
        RegionKind::Ellipse => s.push_str(&format!(
            "  {:.0}% ellipse, semi-axes {:.1} × {:.1} m, major axis {:.0}° true; area {:.0} m²; CEP {:.1} m\n",
            e.confidence * 100.0,
            e.semi_major_m,
            e.semi_minor_m,
            e.orientation_deg,
            e.area_m2(),
            fix.cep_m
        )),
        RegionKind::Likelihood if fix.open_towards_deg().is_some() => s.push_str(&format!(
            "  {:.0}% region open towards {:.0}° true: the levels bound the junction on the walk's side only, so it has no size and no CEP\n",
            e.confidence * 100.0,
            fix.open_towards_deg().unwrap_or_default()
        )),
        RegionKind::Likelihood => {
            let (along, across) = fix.reach_along_axes_m();
            s.push_str(&format!(
                "  {:.0}% region reaches {:.1} m along {:.0}° true and {:.1} m across it (the likelihood contour: the ellipse does not hold in this geometry); CEP {:.1} m\n",
                e.confidence * 100.0,
                along,
                e.orientation_deg,
                across,
                fix.cep_m
            ));
        }
    }
    // the bearing σ and the measurements on lines of their own, within the terminal
    let sigma = format!(
        "  {}",
        sigma_words(fix).replace("; fixed from", "\n  fixed from")
    );
    s.push_str(&crate::text_table::wrap_lines(
        &sigma,
        crate::text_table::TERMINAL_WIDTH,
    ));
    s.push('\n');
    s.push_str(&format!("  {}\n", accuracy_words(fix)));
    if let Some(o) = &fix.offset {
        s.push_str(&format!(
            "  common bearing offset {}° ({:.0} %: {}° to {}°), allowed for in the fix\n",
            pim_io::precision::signed(o.offset_deg, 1),
            o.confidence * 100.0,
            pim_io::precision::signed(o.low_deg, 1),
            pim_io::precision::signed(o.high_deg, 1)
        ));
    }
    if !corrections.is_empty() {
        let mut sources: Vec<&str> = corrections.iter().map(|c| c.source.as_str()).collect();
        sources.dedup();
        let (lo, hi) = corrections.iter().fold((f64::MAX, f64::MIN), |(a, b), c| {
            (a.min(c.declination_deg), b.max(c.declination_deg))
        });
        let signed = |v: f64| pim_io::precision::signed(v, 1);
        let range = if (hi - lo).abs() < 0.05 {
            format!("{}°", signed(lo))
        } else {
            format!("{}° to {}°", signed(lo), signed(hi))
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

/// Each reading with its residual, range and weight, as a text table.
pub fn readings_table(fix: &Fix) -> String {
    readings_table_named(fix, &ReadingNames::default())
}

/// The same, each reading named first by its number and time (`#7 09:32`) where
/// `names` know its line, the log's line beside.
pub fn readings_table_named(fix: &Fix, names: &ReadingNames) -> String {
    // The reading column only where the readings have names.
    let skip = usize::from(names.is_empty());
    let mut t = TextTable::new(
        &[
            ("reading", Align::Left),
            ("line", Align::Right),
            ("bearing °", Align::Right),
            ("to fix °", Align::Right),
            ("residual °", Align::Right),
            ("range m", Align::Right),
            ("weight", Align::Right),
            ("status", Align::Left),
        ][skip..],
    );
    for r in &fix.readings {
        let mut flags = Vec::new();
        if r.outlier {
            flags.push("outlier");
        }
        if r.flipped {
            flags.push("taken reversed");
        }
        t.push(
            [
                names.name(r.line),
                r.line.to_string(),
                pim_io::precision::fixed(r.bearing_deg, 1),
                pim_io::precision::fixed(r.predicted_deg, 1),
                pim_io::precision::signed(r.residual_deg, 1),
                pim_io::precision::fixed(r.distance_m, 0),
                pim_io::precision::fixed(r.weight, 2),
                flags.join(", "),
            ][skip..]
                .to_vec(),
        );
    }
    if fix.levels.is_empty() {
        return t.render();
    }
    let mut l = TextTable::new(
        &[
            ("reading", Align::Left),
            ("line", Align::Right),
            ("level dBm", Align::Right),
            ("model dBm", Align::Right),
            ("residual dB", Align::Right),
            ("range m", Align::Right),
            ("weight", Align::Right),
            ("setup", Align::Left),
            ("status", Align::Left),
        ][skip..],
    );
    for r in &fix.levels {
        let mut flags = Vec::new();
        if r.near_field {
            flags.push("near field: set aside");
        }
        if r.saturated {
            flags.push("saturated: a lower bound");
        }
        if r.outlier {
            flags.push("outlier");
        }
        l.push(
            [
                names.name(r.line),
                r.line.to_string(),
                pim_io::precision::fixed(r.level_dbm, 1),
                pim_io::precision::fixed(r.predicted_dbm, 1),
                pim_io::precision::signed(r.residual_db, 1),
                pim_io::precision::fixed(r.distance_m, 0),
                pim_io::precision::fixed(r.weight, 2),
                r.setup.clone().unwrap_or_default(),
                flags.join(", "),
            ][skip..]
                .to_vec(),
        );
    }
    if fix.readings.is_empty() {
        return l.render();
    }
    format!("{}\n{}", t.render(), l.render())
}
