//! `pim sweep TRACE... --emitters FILE`: every peak of an analyser trace of the receive
//! band at once: the floor, each peak classed as a listed emitter's carrier, an
//! intermodulation product (with the candidates `explain` would give) or unexplained, and
//! the emitter sets that explain several peaks.

use std::path::PathBuf;

use pim_core::freq::Hz;
use pim_core::intermod::SearchParams;
use pim_core::level::LevelModel;
use pim_core::trace::classify::ExplainRule;
use pim_core::trace::{analyse, MaxHold, SweepRule, Trace};
use pim_core::{Error, Place};
use pim_io::output::{check_output, write_file_atomically, Existing};
use pim_io::trace::read_trace_into;
use serde_json::json;

use crate::args::{ListingArgs, SearchArgs};
use crate::common::load_emitters;
use crate::common::{finish, open, stdout, whole, CliResult, ListFormat};
use pim_report::sweep::{
    picture_input, write_csv, write_json, write_markdown, write_table, SweepReport,
};
use pim_report::trace::trace_svg;

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Trace files: CSV with freq_hz, freq_khz or freq_mhz and level_dbm; several sweeps
    /// of the same grid are combined by maximum hold.
    #[arg(
        value_name = "TRACE",
        required_unless_present = "recording",
        conflicts_with = "recording"
    )]
    pub traces: Vec<PathBuf>,
    /// A recording instead of traces: a folder of trace files named by (or holding in a
    /// `time` column) their ISO 8601 times, or one CSV with a `time` column; each peak
    /// and each listed emitter in the span is followed sweep by sweep, and the product
    /// peaks' candidates are ordered by how their presence agrees with their emitters'.
    /// With --svg, the waterfall is drawn.
    #[arg(long, value_name = "DIR|FILE")]
    pub recording: Option<PathBuf>,
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    /// Least height of a peak above the noise floor, in dB.
    #[arg(long = "threshold-db", value_name = "DB", default_value = "10", value_parser = threshold_arg)]
    pub threshold_db: f64,
    /// Points in each window of the running-median floor (default: 25 receive channel
    /// widths, at least 101 points).
    #[arg(long = "floor-window", value_name = "POINTS", value_parser = whole::<u64>(3, 1_000_000))]
    pub floor_window: Option<u64>,
    /// Also draw the trace, its floor and its peaks into this SVG file (never one of the
    /// inputs; an existing file only with --force).
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
    /// Replace the file given by --svg when it exists.
    #[arg(long)]
    pub force: bool,
    /// Suspects listed at most (tables and Markdown; JSON and CSV list all).
    #[arg(long, value_name = "N", default_value_t = 10, value_parser = whole::<usize>(0, 1_000_000))]
    pub suspects: usize,
    #[command(flatten)]
    pub search: SearchArgs,
    #[command(flatten)]
    pub listing: ListingArgs,
    #[command(flatten)]
    pub columns: crate::args::ColumnsArgs,
}

/// Candidates found per peak unless `--limit` says otherwise (`--limit all`: every
/// one): each peak is explained by the pruned search of its first N, so the work and the
/// memory stay bounded against a long emitter list.
pub const SWEEP_CANDIDATES: usize = 20;

/// clap parser for the threshold: a finite number of dB above zero.
pub fn threshold_arg(text: &str) -> Result<f64, String> {
    let v = pim_io::text::parse_quantity(text, "dB")?;
    if !(v > 0.0 && v <= 100.0) {
        return Err(format!(
            "threshold {text} dB must be above 0 dB and at most 100 dB"
        ));
    }
    Ok(v)
}

/// The sweep's rule from the search options shared with `explain`.
pub fn sweep_rule(
    params: &SearchParams,
    placement: pim_core::rank::Placement,
    model: LevelModel,
    threshold_db: f64,
    floor_window: Option<u64>,
    keep: Option<usize>,
) -> SweepRule {
    SweepRule {
        threshold_db,
        floor_window_points: floor_window.map(|w| w as usize),
        explain: ExplainRule {
            rx_bandwidth: params.rx_bandwidth,
            tolerance: params.tolerance,
            max_order: params.max_order,
            max_emitters: params.max_emitters,
            placement,
            model,
            keep_candidates: keep,
        },
        threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
    }
}

/// Reads the traces into one by maximum hold.
pub fn load_traces(paths: &[PathBuf]) -> CliResult<Trace> {
    let mut hold = MaxHold::new();
    let mut seen: Vec<(PathBuf, &PathBuf)> = Vec::new();
    for path in paths {
        let source = path.display().to_string();
        // The same file given again is the same sweep held again: it adds nothing, and
        // the count of sweeps says so only with this note.
        if let Ok(real) = std::fs::canonicalize(path) {
            if let Some((_, first)) = seen.iter().find(|(r, _)| *r == real) {
                eprintln_safe!(
                    "pim: note: {source} is the same file as {}: the same sweep held again adds nothing to the maximum hold",
                    first.display()
                );
            } else {
                seen.push((real, path));
            }
        }
        let file = read_trace_into(&source, open(path)?, &mut hold)?;
        crate::common::note_unused(&source, &file.ignored_columns);
        if let Some(line) = file.torn_line {
            eprintln_safe!(
                "pim: note: {source}, line {line}: the last row has no line end: the trace may still be being written, or torn by an interrupted write, so it is left out"
            );
        }
    }
    hold.finish()
        .ok_or_else(|| Error::input(Place::new("trace"), "no trace read").into())
}

/// What a sweep's outputs are written from.
fn report<'a>(
    args: &Args,
    trace: &'a Trace,
    sweep: &'a pim_core::trace::Sweep,
    emitters: &'a [pim_core::Emitter],
    sources: String,
) -> SweepReport<'a> {
    SweepReport {
        trace,
        sweep,
        emitters,
        sources,
        emitters_source: args.emitters.display().to_string(),
        threshold_db: args.threshold_db,
        rx_bw: args.search.rx_bw,
        shown: args.listing.shown(3),
        suspects: args.suspects,
        wide: args.listing.wide,
    }
}

pub fn run(args: Args) -> CliResult {
    let mut inputs: Vec<&std::path::Path> = args.traces.iter().map(PathBuf::as_path).collect();
    inputs.extend(args.recording.as_deref());
    inputs.push(&args.emitters);
    let existing = if args.force {
        Existing::Replace
    } else {
        Existing::Refuse
    };
    if let Some(path) = &args.svg {
        check_output(path, &inputs, existing)?;
    }
    let columns = crate::common::Columns::new(&args.columns.columns)?;
    let emitters = load_emitters(&args.emitters, &columns)?;
    columns.check()?;
    let s = &args.search;
    if let Some(recording) = &args.recording {
        return run_recording(&args, recording, &emitters, &inputs, existing);
    }
    let trace = load_traces(&args.traces)?;
    let rule = sweep_rule(
        &s.params(Hz::ZERO, s.rx_bw),
        pim_core::rank::Placement::at(s.rx_site()),
        s.model()?,
        args.threshold_db,
        args.floor_window,
        args.listing.count_or(SWEEP_CANDIDATES),
    );
    let site = crate::common::budgeted(pim_core::Site::new(emitters))?;
    let sweep = analyse(&trace, &site, &rule).map_err(crate::common::listing_hint)?;
    let emitters = site.emitters();
    let sources = args
        .traces
        .iter()
        .map(|p| p.display().to_string())
        .collect::<Vec<_>>()
        .join(", ");

    if let Some(path) = &args.svg {
        let picture = picture_input(&trace, &sweep, emitters, args.threshold_db, &sources);
        write_file_atomically(path, trace_svg(&picture).into_bytes(), &inputs, existing)?;
    }
    let report = report(&args, &trace, &sweep, emitters, sources);
    let mut out = stdout();
    match args.listing.format {
        ListFormat::Table => write_table(&mut out, &report)?,
        ListFormat::Markdown => write_markdown(&mut out, &report)?,
        ListFormat::Csv => write_csv(&mut out, &report)?,
        ListFormat::Json => {
            let mut inputs = s.inputs_json();
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["threshold_db"] = json!(args.threshold_db);
            inputs["trace_files"] = json!(args
                .traces
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>());
            inputs["emitters_file"] = json!(report.emitters_source);
            inputs["emitter_count"] = json!(emitters.len());
            write_json(&mut out, &report, &inputs)?;
        }
    }
    finish(out)
}

/// `pim sweep --recording`: the maximum hold's sweep with the recording's presence and
/// evidence.
fn run_recording(
    args: &Args,
    path: &std::path::Path,
    emitters: &[pim_core::Emitter],
    inputs: &[&std::path::Path],
    existing: Existing,
) -> CliResult {
    let s = &args.search;
    let rule = sweep_rule(
        &s.params(Hz::ZERO, s.rx_bw),
        pim_core::rank::Placement::at(s.rx_site()),
        s.model()?,
        args.threshold_db,
        args.floor_window,
        None,
    );
    let r = crate::common::explain_recording(path, emitters, &rule, &[])?;
    let sources = path.display().to_string();
    if let Some(svg) = &args.svg {
        let picture = pim_report::recording::waterfall(&r, emitters, &sources);
        write_file_atomically(svg, picture.into_bytes(), inputs, existing)?;
    }
    let report = report(args, &r.trace, &r.sweep, emitters, sources.clone());
    let mut out = stdout();
    match args.listing.format {
        ListFormat::Json => {
            let mut inputs = s.inputs_json();
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["threshold_db"] = json!(args.threshold_db);
            inputs["recording"] = json!(sources);
            inputs["emitters_file"] = json!(report.emitters_source);
            inputs["emitter_count"] = json!(emitters.len());
            let mut buffer = Vec::new();
            let all = SweepReport {
                shown: None,
                ..report
            };
            write_json(&mut buffer, &all, &inputs)?;
            let mut doc: serde_json::Value = serde_json::from_slice(&buffer)
                .map_err(|e| Error::input(Place::new("sweep JSON"), e.to_string()))?;
            pim_report::recording::augment_json(&mut doc, &r, emitters, args.listing.shown(3));
            pim_io::precision::round_json(&mut doc);
            let text = serde_json::to_string_pretty(&doc)
                .map_err(|e| Error::input(Place::new("sweep JSON"), e.to_string()))?;
            std::io::Write::write_all(&mut out, text.as_bytes())?;
            std::io::Write::write_all(&mut out, b"\n")?;
        }
        ListFormat::Markdown => write_markdown(&mut out, &report)?,
        ListFormat::Csv => write_csv(&mut out, &report)?,
        ListFormat::Table => {
            write_table(&mut out, &report)?;
            let text = pim_report::recording::table(&r, emitters, args.listing.shown(3));
            std::io::Write::write_all(&mut out, text.as_bytes())?;
        }
    }
    finish(out)
}
