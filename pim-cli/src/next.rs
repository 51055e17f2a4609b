//! `pim next --log FILE`: where the next bearing would shrink the ellipse most.

use std::io::Write;
use std::path::PathBuf;

use pim_core::walk::{rank_spots, ring};
use pim_io::fieldlog::read_spots;

use crate::common::{finish, open, positive, stdout, whole, CliResult, ListFormat};
use crate::fix::{fix_from_log, FixArgs};
use pim_report::walk::{next_csv, next_json, next_markdown, next_text};

#[derive(clap::Args, Debug)]
#[command(group(clap::ArgGroup::new("spots").required(true).args(["candidates", "radius_m"])))]
pub struct Args {
    /// The field log so far.
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    /// Spots one can reach: CSV with lat, lon and an optional `id` or `name` (a structures
    /// file will do); a spot without one is called by its coordinates.
    #[arg(long, value_name = "FILE")]
    pub candidates: Option<PathBuf>,
    /// Or a ring of spots at this distance around the fix.
    #[arg(long, value_name = "M", value_parser = positive("m"))]
    pub radius_m: Option<f64>,
    /// How many spots on the ring.
    #[arg(long, default_value_t = 16, value_parser = whole::<u32>(3, 360))]
    pub ring_spots: u32,
    /// Leave out spots closer than this to the fix (bearings that close are unreliable).
    #[arg(long, value_name = "M", default_value_t = pim_core::walk::MIN_SPOT_RANGE_M, value_parser = positive("m"))]
    pub min_range_m: f64,
    /// How many spots to list, the best first (the others are the alternatives).
    #[arg(long, value_name = "N", default_value_t = 5, value_parser = whole::<usize>(1, 1000))]
    pub limit: usize,
    #[command(flatten)]
    pub fix: FixArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ListFormat::Table)]
    pub format: ListFormat,
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
    let alternatives = &ranked[1..ranked.len().min(args.limit)];
    let mut out = stdout();
    match args.format {
        ListFormat::Json => {
            let v = next_json(&fix, sigma, best, alternatives);
            pim_io::precision::write_json(&mut out, &v, true)?;
            writeln!(out)?;
        }
        ListFormat::Table => write!(out, "{}", next_text(&fix, sigma, best, alternatives))?,
        ListFormat::Markdown => write!(out, "{}", next_markdown(&fix, sigma, best, alternatives))?,
        ListFormat::Csv => next_csv(&mut out, best, alternatives)?,
    }
    finish(out)
}
