//! `pim explain FREQ --emitters FILE`: which emitter combinations, at which order, make
//! a carrier heard on a receive channel, ranked by plausibility.

use std::io::Write;

use pim_core::{Query, Site};
use pim_report::candidates::{markdown_text, table_text, write_csv, Counts, Layout, Listing};
use pim_report::explain::{explain_preamble, write_explain_json, ExplainLines};
use serde_json::json;

use crate::args::{CalibrationArgs, EvidenceArgs, HeardArgs, ListingArgs, SearchArgs};
use crate::common::{budgeted, finish, listing_hint, load_emitters, stdout, CliResult, ListFormat};

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    #[command(flatten)]
    pub input: HeardArgs,
    #[command(flatten)]
    pub evidence: EvidenceArgs,
    #[command(flatten)]
    pub search: SearchArgs,
    /// Latitude of the junction when it lies apart from the receiver (a fix): the
    /// candidates are levelled there and heard at the receiver (--rx-lat/--rx-lon),
    /// without a whole ticket.
    #[arg(long, value_name = "DEG", value_parser = crate::common::lat_arg, allow_hyphen_values = true, requires = "junction_lon")]
    pub junction_lat: Option<f64>,
    /// Longitude of the junction apart from the receiver.
    #[arg(long, value_name = "DEG", value_parser = crate::common::lon_arg, allow_hyphen_values = true, requires = "junction_lat")]
    pub junction_lon: Option<f64>,
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    #[command(flatten)]
    pub listing: ListingArgs,
    /// Power steps done: CSV `step_db,level_dbm`, or `emitter,step_db,level_dbm` for
    /// several emitters (as `pim slope --kind power` reads it). Candidates they cleared
    /// rank after the others, marked; the drive exponent they measured levels the
    /// candidates unless --drive-exponent is given.
    #[arg(long, value_name = "FILE")]
    pub power_steps: Option<std::path::PathBuf>,
}

pub fn run(args: Args) -> CliResult {
    let columns = crate::common::Columns::new(&args.input.columns.columns)?;
    let site = budgeted(Site::new(load_emitters(&args.input.emitters, &columns)?))?;
    args.input
        .note_far_reading(site.emitters().iter().map(|e| e.freq));
    columns.check()?;
    let emitters = site.emitters();
    let source = args.input.emitters.display().to_string();
    let coefficients = args.evidence.coefficient_indices(&site, &source)?;
    let logbook = args.evidence.logbook(emitters)?;
    let s = &args.search;
    let params = s.params(args.input.freq(), s.rx_bw);
    // the junction apart from the receiver when given, else at the receiver
    let apart = args
        .junction_lat
        .zip(args.junction_lon)
        .map(|(lat, lon)| pim_core::geo::GeoPoint::new(lat, lon));
    let junction = apart.or(s.rx_site());
    let shown = args.listing.shown(20);
    let steps = args
        .power_steps
        .as_deref()
        .map(crate::ticket::power_step_test)
        .transpose()?;
    let mut model = args.calibration.weigh(s.model()?);
    if s.drive_exponent.is_none() {
        if let Some(alpha) = steps.as_ref().and_then(|t| t.measured_exponent()) {
            model.drive_exponent = alpha;
        }
    }
    let query = Query {
        params,
        junction,
        receiver: apart.and(s.rx_site()),
        heard: args.calibration.heard(),
        model,
        coefficients: coefficients.clone(),
        logbook,
        // what the steps clear ranks last, so the first N are taken after it is known
        limit: if steps.is_some() { None } else { shown },
        centred_within: None,
    };
    let mut answer = site.explain(&query).map_err(listing_hint)?;
    let cleared = steps.as_ref().map(|t| {
        let n = answer.ranking.demote_cleared(&t.findings(&site));
        if let Some(keep) = shown {
            answer.ranking.candidates.truncate(keep);
        }
        n
    });
    let (ranking, found, logbook) = (&answer.ranking, answer.found, query.logbook.as_ref());
    let listing = Listing {
        emitters,
        params: &params,
        ranking,
        co_channel: &answer.co_channel,
    };
    let mut out = stdout();
    let total = answer.ranking.total;
    let counts = Counts::of(&answer, shown);
    let n = shown.unwrap_or(usize::MAX);
    // the lines above the listing, the same in the table and in Markdown
    let preamble = explain_preamble(&ExplainLines {
        listing: &listing,
        emitters_source: &args.input.emitters.display().to_string(),
        junction,
        coefficients: &coefficients,
        found,
        kept: answer.kept,
        logbook,
        counts: &counts,
        shown,
        cleared: cleared.zip(args.power_steps.as_ref().map(|p| p.display().to_string())),
        heard_unused: args.calibration.heard_dbm.is_some() && !ranking.calibrated,
    });
    let layout = Layout::single(args.listing.wide);
    match args.listing.format {
        ListFormat::Table => {
            let width = pim_report::text_table::TERMINAL_WIDTH;
            writeln!(
                out,
                "{}",
                pim_report::text_table::wrap_lines(&preamble, width)
            )?;
            write!(out, "{}", table_text(&listing, n, layout))?;
        }
        ListFormat::Markdown => {
            for para in preamble.split("\n").filter(|p| !p.is_empty()) {
                writeln!(out, "{}\n", pim_report::document::md_text(para))?;
            }
            write!(out, "{}", markdown_text(&listing, n, layout))?;
        }
        ListFormat::Csv => {
            write_csv(&mut out, &listing, shown, None, true)?;
            if counts.shown < total || !answer.complete {
                eprintln!(
                    "pim: note: {} of {}{total} candidates written; --limit all writes every one",
                    counts.shown,
                    if answer.complete { "" } else { "at least " },
                );
            }
        }
        ListFormat::Json => {
            let mut inputs = s.inputs_json();
            inputs["target_mhz"] = json!(args.input.freq().mhz());
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["emitters_file"] = json!(args.input.emitters.display().to_string());
            inputs["emitter_count"] = json!(emitters.len());
            inputs["coefficients"] = json!(coefficients
                .iter()
                .map(|&(i, k)| (emitters[i].id.clone(), k))
                .collect::<std::collections::BTreeMap<_, _>>());
            let shown_path =
                |p: &Option<std::path::PathBuf>| p.as_ref().map(|p| p.display().to_string());
            inputs["on_air_file"] = json!(shown_path(&args.evidence.on_air));
            inputs["heard_file"] = json!(shown_path(&args.evidence.heard));
            inputs["heard_dbm"] = json!(args.calibration.heard_dbm);
            inputs["power_steps_file"] = json!(shown_path(&args.power_steps));
            inputs["cleared_by_steps"] = json!(cleared);
            inputs["drive_exponent"] = json!(query.model.drive_exponent);
            if let Some(book) = logbook {
                inputs["heard_times"] = json!(book.heard_count());
                inputs["silent_times"] = json!(book.observations.len() - book.heard_count());
            }
            write_explain_json(&mut out, &listing, &inputs, &counts, shown)?;
        }
    }
    finish(out)?;
    // Nothing credible: the listing above says what to check next; exit 5.
    match pim_report::candidates::nothing_explains_text(ranking, &params) {
        Some(statement) => Err(pim_core::Error::refused(statement).into()),
        None => Ok(()),
    }
}
