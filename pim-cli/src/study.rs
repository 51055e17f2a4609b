//! `pim study --emitters TX --receivers RX`: the forward audit of a site, every product
//! that lands on each receiver, worst first.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;

use pim_io::read_receivers;
use serde_json::json;

use crate::args::{ListingArgs, SearchArgs};
use crate::common::load_emitters;
use crate::common::{finish, open, stdout, CliResult, ListFormat};
use pim_core::{Query, Site};
use pim_report::candidates::{channel_summary, co_channel_text};
use pim_report::candidates::{
    co_channel_json, markdown_text, outlook_json, table_text, write_csv, write_json_array, Listing,
};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    /// Receiver file: CSV with `id`, `freq_mhz`, optional `bw_khz`, `lat`, `lon`.
    #[arg(long, value_name = "FILE")]
    pub receivers: PathBuf,
    #[command(flatten)]
    pub search: SearchArgs,
    #[command(flatten)]
    pub listing: ListingArgs,
}

pub fn run(args: Args) -> CliResult {
    let site = crate::common::budgeted(Site::new(load_emitters(&args.emitters)?))?;
    let emitters = site.emitters();
    let rx_source = args.receivers.display().to_string();
    let rx_file = read_receivers(&rx_source, open(&args.receivers)?)?;
    crate::common::note_unused(&rx_source, &rx_file.ignored_columns);
    let s = &args.search;
    let model = s.junction_model();
    let progress = if std::io::stderr().is_terminal() && rx_file.receivers.len() > 1 {
        let bar = indicatif::ProgressBar::new(rx_file.receivers.len() as u64);
        bar.set_style(
            indicatif::ProgressStyle::with_template("studying {pos}/{len} receivers {wide_bar}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        Some(bar)
    } else {
        None
    };
    let mut out = stdout();
    let format = args.listing.format;
    let shown = args.listing.shown(10);
    if format == ListFormat::Json {
        writeln!(out, "{{")?;
        let mut inputs = s.inputs_json();
        inputs["emitters_file"] = json!(args.emitters.display().to_string());
        inputs["receivers_file"] = json!(rx_source);
        writeln!(
            out,
            "  \"inputs\": {},",
            serde_json::to_string(&inputs).map_err(std::io::Error::from)?
        )?;
        writeln!(out, "  \"receivers\": [")?;
    }
    let receivers = &rx_file.receivers;
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    // Each receiver on its own thread, written in file order as soon as it and every
    // earlier one are done.
    let work = |i: usize| {
        let rx = &receivers[i];
        let params = s.params(rx.freq, rx.bandwidth.unwrap_or(s.rx_bw));
        let junction = rx.position.or(s.rx_site());
        let answer = site
            .explain(&Query {
                params,
                junction,
                model,
                limit: shown,
                ..Query::new(rx.freq)
            })
            .map_err(crate::common::listing_hint);
        (params, junction, answer)
    };
    let write_one = |i: usize,
                     (params, junction, answer): (
        pim_core::intermod::SearchParams,
        Option<pim_core::geo::GeoPoint>,
        pim_core::Result<pim_core::Explanation>,
    )|
     -> CliResult {
        let answer = answer?;
        let rx = &receivers[i];
        let ranking = &answer.ranking;
        let listing = Listing {
            emitters,
            params: &params,
            ranking,
            co_channel: &answer.co_channel,
        };
        let total = ranking.total;
        let at_least = if answer.complete { "" } else { "at least " };
        match format {
            ListFormat::Table => {
                writeln!(
                    out,
                    "━━ {} ━━ {at_least}{} product{}; {}.",
                    rx.id,
                    total,
                    if total == 1 { "" } else { "s" },
                    ranking.basis()
                )?;
                write!(
                    out,
                    "{}",
                    channel_summary(
                        &params,
                        emitters.len(),
                        &args.emitters.display().to_string(),
                        junction
                    )
                )?;
                write!(out, "{}", co_channel_text(&listing))?;
                write!(out, "{}", table_text(&listing, shown.unwrap_or(usize::MAX)))?;
                writeln!(out)?;
            }
            ListFormat::Markdown => {
                writeln!(out, "## {} ({} MHz)\n", rx.id, rx.freq.mhz_text())?;
                write!(
                    out,
                    "{}",
                    markdown_text(&listing, shown.unwrap_or(usize::MAX))
                )?;
                writeln!(out)?;
            }
            ListFormat::Csv => write_csv(
                &mut out,
                &listing,
                shown,
                Some(("receiver", &rx.id)),
                i == 0,
            )?,
            ListFormat::Json => {
                if i > 0 {
                    writeln!(out, ",")?;
                }
                write!(
                    out,
                    "  {{\"id\": {}, \"freq_mhz\": {}, \"bw_khz\": {}, \"co_channel\": {}, \"ranking_basis\": {}, \"outlook\": {}, \"next_steps\": {}, \"total\": {}, \"counted_all\": {}, \"shown\": {}, \"candidates\": ",
                    json!(rx.id),
                    json!(rx.freq.mhz()),
                    json!(params.rx_bandwidth.khz()),
                    co_channel_json(&listing),
                    json!(ranking.basis()),
                    outlook_json(ranking)["outlook"],
                    outlook_json(ranking)["next_steps"],
                    total,
                    answer.complete,
                    ranking.candidates.len()
                )?;
                write_json_array(&mut out, &listing, shown)?;
                write!(out, "}}")?;
            }
        }
        out.flush()?;
        if let Some(bar) = &progress {
            bar.inc(1);
        }
        Ok(())
    };
    pim_core::study::in_order(receivers.len(), threads, work, write_one)?;
    if let Some(bar) = &progress {
        bar.finish_and_clear();
    }
    if format == ListFormat::Json {
        writeln!(out, "\n  ]\n}}")?;
    }
    finish(out)
}
