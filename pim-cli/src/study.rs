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
    let columns = crate::common::Columns::new(&args.columns)?;
    let site = crate::common::budgeted(Site::new(load_emitters(&args.emitters, &columns)?))?
        .shared_by(pim_core::study::listings_in_flight(threads));
    let emitters = site.emitters();
    let rx_source = args.receivers.display().to_string();
    let rx_file = crate::common::load_receivers(&args.receivers, &columns)?;
    columns.check()?;
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
        inputs["order"] = json!(match args.order {
            StudyOrder::Worst => "worst",
            StudyOrder::File => "file",
        });
        writeln!(
            out,
            "  \"inputs\": {},",
            serde_json::to_string(&inputs).map_err(std::io::Error::from)?
        )?;
        writeln!(out, "  \"receivers\": [")?;
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
    let mut write_one = |pos: usize, r: StudiedReceiver| -> CliResult {
        match format {
            ListFormat::Table => write!(
                out,
                "{}",
                r.table(emitters, &emitters_source, shown.unwrap_or(usize::MAX))
            )?,
            ListFormat::Markdown => {
                write!(out, "{}", r.markdown(emitters, shown.unwrap_or(usize::MAX)))?
            }
            ListFormat::Csv => r.write_csv(&mut out, emitters, shown, pos == 0)?,
            ListFormat::Json => {
                if pos > 0 {
                    writeln!(out, ",")?;
                }
                r.write_json(&mut out, emitters, shown)?;
            }
        }
        out.flush()?;
        Ok(())
    };
    let tick = || {
        if let Some(bar) = &progress {
            bar.inc(1);
        }
    };
    match args.order {
        StudyOrder::File => pim_core::study::in_order(receivers.len(), threads, work, |i, r| {
            tick();
            write_one(i, r?)
        })?,
        StudyOrder::Worst => {
            let mut done = Vec::with_capacity(receivers.len());
            pim_core::study::in_order(receivers.len(), threads, work, |_, r| {
                tick();
                done.push(r?);
                Ok::<(), crate::common::CliError>(())
            })?;
            done.sort_by(|a, b| {
                pim_core::study::worst_first(
                    (&a.answer.ranking, a.params.target),
                    (&b.answer.ranking, b.params.target),
                )
            });
            for (pos, r) in done.into_iter().enumerate() {
                write_one(pos, r)?;
            }
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
