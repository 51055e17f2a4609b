//! `pim next --log FILE`: where the next bearing would shrink the ellipse most.

use std::io::Write;
use std::path::PathBuf;

use pim_core::walk::{rank_spots, ring, ScoredSpot};
use pim_io::fieldlog::read_spots;
use serde_json::json;

use crate::common::{finish, open, stdout, CliResult};
use crate::fix::{fix_from_log, FixArgs};
use pim_report::text_table::{Align, TextTable};

#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum NextFormat {
    Table,
    Json,
}

#[derive(clap::Args, Debug)]
#[command(group(clap::ArgGroup::new("spots").required(true).args(["candidates", "radius_m"])))]
pub struct Args {
    /// The field log so far.
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    /// Spots one can reach: CSV with lat, lon and an optional name.
    #[arg(long, value_name = "FILE")]
    pub candidates: Option<PathBuf>,
    /// Or a ring of spots at this distance around the fix.
    #[arg(long, value_name = "M", value_parser = positive_arg)]
    pub radius_m: Option<f64>,
    /// How many spots on the ring.
    #[arg(long, default_value_t = 16, value_parser = clap::value_parser!(u32).range(3..=360))]
    pub ring_spots: u32,
    /// Leave out spots closer than this to the fix (bearings that close are unreliable).
    #[arg(long, value_name = "M", default_value = "25", value_parser = positive_arg)]
    pub min_range_m: f64,
    /// How many alternatives to list after the best.
    #[arg(long, default_value_t = 4)]
    pub alternatives: usize,
    #[command(flatten)]
    pub fix: FixArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = NextFormat::Table)]
    pub format: NextFormat,
}

fn positive_arg(text: &str) -> Result<f64, String> {
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
        _ => Err(format!("`{text}` is not a positive distance in metres")),
    }
}

fn spot_json(s: &ScoredSpot) -> serde_json::Value {
    json!({
        "name": s.spot.name,
        "lat": s.spot.position.lat_deg,
        "lon": s.spot.position.lon_deg,
        "distance_m": s.distance_m,
        "bearing_to_fix_deg": s.bearing_to_fix_deg,
        "expected_semi_major_m": s.expected.semi_major_m,
        "expected_semi_minor_m": s.expected.semi_minor_m,
        "information_det": s.information_det,
    })
}

pub fn run(args: Args) -> CliResult {
    let (fix, _) = fix_from_log(&args.log, None, &args.fix)?;
    let spots = match (&args.candidates, args.radius_m) {
        (Some(path), _) => read_spots(&path.display().to_string(), open(path)?)?,
        (None, Some(r)) => ring(fix.position, r, args.ring_spots as usize),
        (None, None) => unreachable!("clap requires one of the two"),
    };
    let sigma = args.fix.sigma_deg.unwrap_or(fix.sigma_deg_used);
    let ranked = rank_spots(&fix, &spots, sigma, args.min_range_m)?;
    let Some(best) = ranked.first() else {
        return Err(pim_core::Error::refused(format!(
            "no candidate spot is at least {:.0} m from the fix",
            args.min_range_m
        ))
        .into());
    };
    let alternatives = &ranked[1..ranked.len().min(args.alternatives + 1)];
    let mut out = stdout();
    match args.format {
        NextFormat::Json => {
            let mut v = spot_json(best);
            v["current"] = json!({
                "semi_major_m": fix.ellipse.semi_major_m,
                "semi_minor_m": fix.ellipse.semi_minor_m,
                "orientation_deg": fix.ellipse.orientation_deg,
                "confidence": fix.ellipse.confidence,
            });
            v["sigma_deg_assumed"] = json!(sigma);
            v["alternatives"] = alternatives.iter().map(spot_json).collect();
            serde_json::to_writer_pretty(&mut out, &v).map_err(std::io::Error::from)?;
            writeln!(out)?;
        }
        NextFormat::Table => {
            let e = &fix.ellipse;
            writeln!(
                out,
                "Now: {:.0}% ellipse {:.0} × {:.0} m from {} readings; next bearing assumed σ {:.1}°.",
                e.confidence * 100.0,
                e.semi_major_m,
                e.semi_minor_m,
                fix.n_used,
                sigma
            )?;
            writeln!(
                out,
                "Go to {}: {:.6}, {:.6}, {:.0} m from the fix; expect the antenna to point {:.0}°.\n",
                best.spot.name.as_deref().unwrap_or("the spot"),
                best.spot.position.lat_deg,
                best.spot.position.lon_deg,
                best.distance_m,
                best.bearing_to_fix_deg
            )?;
            let mut t = TextTable::new(&[
                ("spot", Align::Left),
                ("lat", Align::Right),
                ("lon", Align::Right),
                ("range m", Align::Right),
                ("ellipse after m", Align::Right),
            ]);
            for s in std::iter::once(best).chain(alternatives) {
                t.push(vec![
                    s.spot.name.clone().unwrap_or_default(),
                    format!("{:.6}", s.spot.position.lat_deg),
                    format!("{:.6}", s.spot.position.lon_deg),
                    format!("{:.0}", s.distance_m),
                    format!(
                        "{:.0} × {:.0}",
                        s.expected.semi_major_m, s.expected.semi_minor_m
                    ),
                ]);
            }
            write!(out, "{}", t.render())?;
        }
    }
    finish(out)
}
