//! `pim study --emitters TX --receivers RX`: the forward audit of a site, every product
//! that lands on each receiver, worst first (`--order file`: in file order, each written
//! as soon as it is ready).

use std::io::{IsTerminal, Write};
use std::path::PathBuf;

use serde_json::json;

use crate::args::{ListingArgs, SearchArgs};
use crate::common::load_emitters;
use crate::common::{finish, stdout, CliResult, ListFormat};
use pim_core::{Query, Site};
use pim_report::study::StudiedReceiver;

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
    /// Order of the receivers: `worst` first by their first candidate's level (written
    /// when the last is done), or `file` order, each written as soon as it is ready.
    #[arg(long, value_enum, default_value_t = StudyOrder::Worst)]
    pub order: StudyOrder,
    #[command(flatten)]
    pub columns: crate::args::ColumnsArgs,
}

/// The order receivers are written in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum StudyOrder {
    Worst,
    File,
}

pub fn run(args: Args) -> CliResult {
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    // the budget holds for the whole study: shared among the listings in flight
    let columns = crate::common::Columns::new(&args.columns.columns)?;
    let site = crate::common::budgeted(Site::new(load_emitters(&args.emitters, &columns)?))?
        .shared_by(pim_core::study::listings_in_flight(threads));
    let emitters = site.emitters();
    let rx_source = args.receivers.display().to_string();
    let rx_file = crate::common::load_receivers(&args.receivers, &columns)?;
    columns.check()?;
    let s = &args.search;
    let model = s.model()?;
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
        inputs["order"] = json!(match args.order {
            StudyOrder::Worst => "worst",
            StudyOrder::File => "file",
        });
        writeln!(
            out,
            "  \"inputs\": {},",
            pim_io::precision::json_text(&inputs, false).map_err(std::io::Error::from)?
        )?;
        writeln!(out, "  \"receivers\": [")?;
    }
    // the explanation every receiver shares, once, above them
    let legend = pim_report::study::study_legend(&model, false, false);
    match format {
        ListFormat::Table => writeln!(out, "{legend}")?,
        ListFormat::Markdown => write!(out, "{}", pim_report::candidates::preformatted(&legend))?,
        ListFormat::Csv | ListFormat::Json => {}
    }
    let receivers = &rx_file.receivers;
    // Each receiver on its own thread, written in file order as soon as it and every
    // earlier one are done.
    let work = |i: usize| -> CliResult<StudiedReceiver> {
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
            .map_err(crate::common::listing_hint)?;
        Ok(StudiedReceiver {
            receiver: rx,
            params,
            junction,
            answer,
        })
    };
    let emitters_source = args.emitters.display().to_string();
    // One receiver rendered as it is written; `first` writes the CSV header (and no
    // comma before a JSON object).
    let render = |out: &mut dyn Write, first: bool, r: &StudiedReceiver| -> std::io::Result<()> {
        match format {
            ListFormat::Table => write!(
                out,
                "{}",
                r.table(
                    emitters,
                    &emitters_source,
                    shown.unwrap_or(usize::MAX),
                    args.listing.wide
                )
            ),
            ListFormat::Markdown => {
                write!(out, "{}", r.markdown(emitters, shown.unwrap_or(usize::MAX)))
            }
            ListFormat::Csv => r.write_csv(out, emitters, shown, first),
            ListFormat::Json => {
                if !first {
                    writeln!(out, ",")?;
                }
                r.write_json(out, emitters, shown)
            }
        }
    };
    let tick = || {
        if let Some(bar) = &progress {
            bar.inc(1);
        }
    };
    match args.order {
        StudyOrder::File => pim_core::study::in_order(receivers.len(), threads, work, |i, r| {
            tick();
            render(&mut out, i == 0, &r?)?;
            out.flush()?;
            Ok::<(), crate::common::CliError>(())
        })?,
        StudyOrder::Worst => {
            // Each receiver is rendered as soon as it is done and spilled to a temporary
            // file; memory keeps only its place there and its sort key, so the study
            // holds its budget in this order too.
            let mut spill = pim_io::spill::Spill::new()?;
            let mut header = Vec::new();
            pim_core::study::in_order(receivers.len(), threads, work, |i, r| {
                tick();
                let r = r?;
                let mut bytes = Vec::new();
                // rendered as the first: no comma before a JSON object, and the CSV
                // header, cut off below
                render(&mut bytes, true, &r)?;
                if format == ListFormat::Csv {
                    // the header line, kept once
                    let cut = bytes.iter().position(|&b| b == b'\n').map_or(0, |p| p + 1);
                    if i == 0 {
                        header = bytes[..cut].to_vec();
                    }
                    bytes.drain(..cut);
                }
                let key = pim_core::study::WorstKey::of(&r.answer.ranking, r.params.target);
                spill.put(key, &bytes)?;
                Ok::<(), crate::common::CliError>(())
            })?;
            out.write_all(&header)?;
            spill.write_sorted(&mut out, format == ListFormat::Json)?;
        }
    }
    if let Some(bar) = &progress {
        bar.finish_and_clear();
    }
    if format == ListFormat::Json {
        writeln!(out, "\n  ]\n}}")?;
    }
    finish(out)
}
