//! `pim demo`: the job on the built-in invented site (files from `field-logs/`, embedded
//! in the binary so it runs from any directory).

use std::io::Write;

use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::io::read_emitters;

use crate::common::{finish, stdout, CliResult};
use crate::explain::{channel_summary, co_channel_text, search_and_rank};
use crate::render::candidates::{table_text, Listing};

/// The invented demo site's emitters.
pub const EMITTERS_CSV: &str = include_str!("../../field-logs/emitters.csv");

/// The repeater input on which the mystery carrier is heard.
pub const HEARD: Hz = Hz(146_340_000);
/// The repeater site.
pub const RX_SITE: GeoPoint = GeoPoint {
    lat_deg: 45.103,
    lon_deg: -122.412,
};

#[derive(clap::Args, Debug)]
pub struct Args {}

pub fn run(_args: Args) -> CliResult {
    let file = read_emitters("demo emitters.csv", EMITTERS_CSV.as_bytes())?;
    let emitters = file.emitters;
    let params = pim_core::intermod::SearchParams {
        target: HEARD,
        rx_bandwidth: Hz(12_500),
        tolerance: Hz(0),
        max_order: 7,
        max_emitters: 3,
    };
    let model = pim_core::level::JunctionModel::default();
    let (ranking, co) = search_and_rank(&emitters, &params, Some(RX_SITE), &model);
    let listing = Listing {
        emitters: &emitters,
        params: &params,
        ranking: &ranking,
        co_channel: &co,
    };
    let mut out = stdout();
    writeln!(
        out,
        "Demo: an unexplained carrier on the Marrow Hill repeater input (an invented site).\n"
    )?;
    write!(
        out,
        "{}",
        channel_summary(&params, emitters.len(), "the demo site", Some(RX_SITE))
    )?;
    write!(out, "{}", co_channel_text(&listing))?;
    writeln!(
        out,
        "{} products land in the channel; {}.\n",
        ranking.candidates.len(),
        ranking.basis()
    )?;
    write!(out, "{}", table_text(&listing, 10))?;
    finish(out)
}
