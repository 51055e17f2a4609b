//! `pim sweep TRACE... --emitters FILE`: every peak of an analyser trace of the receive
//! band at once: the floor, each peak classed as a listed emitter's carrier, an
//! intermodulation product (with the candidates `explain` would give) or unexplained, and
//! the emitter sets that explain several peaks.

use std::io::Write;
use std::path::PathBuf;

use pim_core::emitter::Emitter;
use pim_core::rank::formula;
use pim_core::trace::classify::{ExplainRule, ExplainedPeak, PeakKind, Suspect};
use pim_core::trace::{analyse, MaxHold, Sweep, SweepRule, Trace};
use pim_core::{Error, Place};
use pim_io::trace::read_trace_into;
use serde_json::json;

use crate::args::{ListingArgs, SearchArgs};
use crate::common::load_emitters;
use crate::common::{finish, finite_arg, open, stdout, CliResult, ListFormat};
use pim_report::candidates::{r2, table_text, write_json_array, Listing};
use pim_report::trace::{trace_svg, MarkKind, PeakMark, TraceInput};

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Trace files: CSV with freq_hz, freq_khz or freq_mhz and level_dbm; several sweeps
    /// of the same grid are combined by maximum hold.
    #[arg(value_name = "TRACE", required = true)]
    pub traces: Vec<PathBuf>,
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    /// Least height of a peak above the noise floor, in dB.
    #[arg(long = "threshold-db", value_name = "DB", default_value = "10", value_parser = threshold_arg)]
    pub threshold_db: f64,
    /// Points in each window of the running-median floor (default: 25 receive channel
    /// widths, at least 101 points).
    #[arg(long = "floor-window", value_name = "POINTS", value_parser = clap::value_parser!(u64).range(3..=1_000_000))]
    pub floor_window: Option<u64>,
    /// Also draw the trace, its floor and its peaks into this SVG file.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
    /// Suspects listed at most (tables and Markdown; JSON and CSV list all).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub suspects: usize,
    #[command(flatten)]
    pub search: SearchArgs,
    #[command(flatten)]
    pub listing: ListingArgs,
}

/// clap parser for the threshold: a finite number of dB above zero.
fn threshold_arg(text: &str) -> Result<f64, String> {
    let v = finite_arg(text)?;
    if !(v > 0.0 && v <= 100.0) {
        return Err(format!(
            "threshold {text} dB must be above 0 dB and at most 100 dB"
        ));
    }
    Ok(v)
}

/// Reads the traces into one by maximum hold.
pub fn load_traces(paths: &[PathBuf]) -> CliResult<Trace> {
    let mut hold = MaxHold::new();
    for path in paths {
        let source = path.display().to_string();
        let file = read_trace_into(&source, open(path)?, &mut hold)?;
        if !file.ignored_columns.is_empty() {
            eprintln!(
                "pim: note: {source}: column{} {} not used",
                if file.ignored_columns.len() == 1 {
                    ""
                } else {
                    "s"
                },
                file.ignored_columns
                    .iter()
                    .map(|c| format!("`{c}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            );
        }
    }
    hold.finish()
        .ok_or_else(|| Error::input(Place::new("trace"), "no trace read").into())
}

fn kind_mark(kind: PeakKind) -> MarkKind {
    match kind {
        PeakKind::Emitter => MarkKind::Emitter,
        PeakKind::Product => MarkKind::Product,
        PeakKind::Unexplained => MarkKind::Unexplained,
    }
}

/// The emitter ids a peak is put down to: its own carrier's, or the first candidate's.
fn peak_emitters(p: &ExplainedPeak, emitters: &[Emitter]) -> Vec<String> {
    match p.kind {
        PeakKind::Emitter => p
            .co_channel
            .iter()
            .map(|&i| emitters[i].id.clone())
            .collect(),
        PeakKind::Product => p
            .ranking
            .candidates
            .first()
            .map(|c| {
                pim_core::rank::display_terms(&c.product, emitters)
                    .iter()
                    .map(|t| emitters[t.emitter].id.clone())
                    .collect()
            })
            .unwrap_or_default(),
        PeakKind::Unexplained => Vec::new(),
    }
}

/// What the peak is put down to, in a few words.
fn peak_summary(p: &ExplainedPeak, emitters: &[Emitter]) -> String {
    match p.kind {
        PeakKind::Emitter => peak_emitters(p, emitters).join(", "),
        PeakKind::Product => p
            .ranking
            .candidates
            .first()
            .map(|c| formula(&c.product, emitters))
            .unwrap_or_default(),
        PeakKind::Unexplained => String::new(),
    }
}

fn suspect_ids(s: &Suspect, emitters: &[Emitter]) -> Vec<String> {
    s.emitters.iter().map(|&i| emitters[i].id.clone()).collect()
}

fn suspect_explains(s: &Suspect, sweep: &Sweep, emitters: &[Emitter]) -> Vec<String> {
    s.explains
        .iter()
        .map(|(i, product, _)| {
            format!(
                "{} at {:.4} MHz",
                formula(product, emitters),
                sweep.peaks[*i].peak.freq.mhz()
            )
        })
        .collect()
}

/// The trace's grid and floor in one line.
fn trace_line(trace: &Trace, sources: &str, sweep: &Sweep) -> String {
    format!(
        "Trace {sources}: {} points, {:.4}–{:.4} MHz in {:.3} kHz steps, {}.\nFloor: running median over {} points ({:.1} kHz), typically {:.1} dBm.\n",
        trace.levels_dbm.len(),
        trace.start.mhz(),
        trace.stop().mhz(),
        trace.step_hz / 1e3,
        sweeps_text(trace.sweeps),
        sweep.floor.window_points,
        sweep.floor.window_points as f64 * trace.step_hz / 1e3,
        sweep.floor.typical_dbm(),
    )
}

fn sweeps_text(sweeps: usize) -> String {
    if sweeps == 1 {
        "one sweep".to_string()
    } else {
        format!("{sweeps} sweeps combined by maximum hold")
    }
}

fn counts(sweep: &Sweep) -> (usize, usize, usize) {
    let n = |k| sweep.peaks.iter().filter(|p| p.kind == k).count();
    (
        n(PeakKind::Emitter),
        n(PeakKind::Product),
        n(PeakKind::Unexplained),
    )
}

/// A CSV text cell: quoted when needed, and a leading `=`, `+`, `-`, `@`, tab or CR made
/// harmless with an apostrophe (OWASP, CSV injection).
fn csv_text(text: &str) -> String {
    let t = if text.starts_with(['=', '+', '-', '@', '\t', '\r']) {
        format!("'{text}")
    } else {
        text.to_string()
    };
    if t.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", t.replace('"', "\"\""))
    } else {
        t
    }
}

/// Text from input files made literal inside a Markdown table cell (CommonMark's
/// backslash escapes for the characters that open emphasis, code, links, HTML, entities
/// and cells; a cell never starts a line, so line-start markers need none).
fn md_text(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        if "\\`*_[]<>|~&!".contains(c) {
            out.push('\\');
        }
        if c == '\n' || c == '\r' {
            out.push(' ');
        } else {
            out.push(c);
        }
    }
    out
}

pub fn run(args: Args) -> CliResult {
    let emitters = load_emitters(&args.emitters)?;
    let trace = load_traces(&args.traces)?;
    let s = &args.search;
    let rule = SweepRule {
        threshold_db: args.threshold_db,
        floor_window_points: args.floor_window.map(|w| w as usize),
        explain: ExplainRule {
            rx_bandwidth: s.rx_bw,
            tolerance: s.tol,
            max_order: s.max_order,
            max_emitters: s.max_emitters,
            junction: s.rx_site(),
            model: s.junction_model(),
            keep_candidates: args.listing.count(),
        },
        threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
    };
    let sweep = analyse(&trace, &emitters, &rule);
    let sources = args
        .traces
        .iter()
        .map(|p| p.display().to_string())
        .collect::<Vec<_>>()
        .join(", ");
    let emitters_source = args.emitters.display().to_string();

    if let Some(path) = &args.svg {
        let svg = trace_svg(&picture_input(&trace, &sweep, &emitters, &rule, &sources));
        std::fs::write(path, svg).map_err(|e| Error::io(path.display().to_string(), &e))?;
    }

    let mut out = stdout();
    let shown = args.listing.shown(3);
    match args.listing.format {
        ListFormat::Table => {
            write!(out, "{}", trace_line(&trace, &sources, &sweep))?;
            let (e, p, u) = counts(&sweep);
            writeln!(
                out,
                "{} peak{} at least {} dB above the floor and {} kHz apart: {e} emitter, {p} product, {u} unexplained ({} emitters from {emitters_source}).\n",
                sweep.peaks.len(),
                if sweep.peaks.len() == 1 { "" } else { "s" },
                args.threshold_db,
                s.rx_bw.khz_text(),
                emitters.len(),
            )?;
            write!(out, "{}", peaks_table(&sweep, &emitters))?;
            writeln!(out)?;
            write!(out, "{}", suspects_text(&sweep, &emitters, args.suspects))?;
            for (i, p) in sweep.peaks.iter().enumerate() {
                if p.kind != PeakKind::Product {
                    continue;
                }
                let listing = Listing {
                    emitters: &emitters,
                    params: &p.params,
                    ranking: &p.ranking,
                    co_channel: &p.co_channel,
                };
                writeln!(
                    out,
                    "\nPeak {} at {:.4} MHz: {} candidate{}; {}.",
                    i + 1,
                    p.peak.freq.mhz(),
                    p.found,
                    if p.found == 1 { "" } else { "s" },
                    p.ranking.basis()
                )?;
                write!(out, "{}", table_text(&listing, shown.unwrap_or(usize::MAX)))?;
            }
        }
        ListFormat::Markdown => {
            write!(out, "{}", markdown(&sweep, &emitters, args.suspects))?;
        }
        ListFormat::Csv => {
            writeln!(out, "peak,freq_mhz,level_dbm,floor_dbm,above_floor_db,kind,emitters,first_formula,first_level_dbm,candidates")?;
            for (i, p) in sweep.peaks.iter().enumerate() {
                let first = p.ranking.candidates.first();
                writeln!(
                    out,
                    "{},{},{:.2},{:.2},{:.2},{},{},{},{},{}",
                    i + 1,
                    p.peak.freq.mhz_text(),
                    p.peak.level_dbm,
                    p.peak.floor_dbm,
                    p.peak.above_floor_db,
                    p.kind.name(),
                    csv_text(&peak_emitters(p, &emitters).join(";")),
                    csv_text(
                        &first
                            .map(|c| formula(&c.product, &emitters))
                            .unwrap_or_default()
                    ),
                    first
                        .and_then(|c| c.level_dbm)
                        .map(|v| format!("{v:.2}"))
                        .unwrap_or_default(),
                    p.found,
                )?;
            }
        }
        ListFormat::Json => {
            let mut inputs = s.inputs_json();
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["threshold_db"] = json!(args.threshold_db);
            inputs["trace_files"] = json!(args
                .traces
                .iter()
                .map(|p| p.display().to_string())
                .collect::<Vec<_>>());
            inputs["emitters_file"] = json!(emitters_source);
            inputs["emitter_count"] = json!(emitters.len());
            writeln!(out, "{{")?;
            writeln!(
                out,
                "  \"inputs\": {},",
                serde_json::to_string(&inputs).map_err(std::io::Error::from)?
            )?;
            let trace_json = json!({
                "start_mhz": trace.start.mhz(),
                "stop_mhz": trace.stop().mhz(),
                "step_khz": trace.step_hz / 1e3,
                "points": trace.levels_dbm.len(),
                "sweeps": trace.sweeps,
            });
            writeln!(out, "  \"trace\": {trace_json},")?;
            let floor_json = json!({
                "method": "running median",
                "window_points": sweep.floor.window_points,
                "window_khz": sweep.floor.window_points as f64 * trace.step_hz / 1e3,
                "typical_dbm": r2(sweep.floor.typical_dbm()),
                "knots": sweep.floor.knots().map(|(i, l)| json!({
                    "freq_mhz": (trace.freq_hz_at(i) / 1e3).round() / 1e3,
                    "level_dbm": r2(l),
                })).collect::<Vec<_>>(),
            });
            writeln!(out, "  \"floor\": {floor_json},")?;
            writeln!(
                out,
                "  \"min_separation_points\": {},",
                sweep.min_distance_points
            )?;
            write!(out, "  \"peaks\": [")?;
            for (i, p) in sweep.peaks.iter().enumerate() {
                let head = json!({
                    "freq_mhz": p.peak.freq.mhz(),
                    "level_dbm": r2(p.peak.level_dbm),
                    "floor_dbm": r2(p.peak.floor_dbm),
                    "above_floor_db": r2(p.peak.above_floor_db),
                    "kind": p.kind.name(),
                    "emitters": peak_emitters(p, &emitters),
                    "ranking_basis": p.ranking.basis(),
                    "found": p.found,
                    "total": p.ranking.candidates.len(),
                });
                let head = serde_json::to_string(&head).map_err(std::io::Error::from)?;
                // The head's closing brace is replaced by the candidates.
                let head = head.strip_suffix('}').unwrap_or(&head);
                write!(
                    out,
                    "{}\n  {head},\"candidates\":",
                    if i == 0 { "" } else { "," }
                )?;
                let listing = Listing {
                    emitters: &emitters,
                    params: &p.params,
                    ranking: &p.ranking,
                    co_channel: &p.co_channel,
                };
                write_json_array(&mut out, &listing, shown)?;
                write!(out, "}}")?;
            }
            writeln!(out, "\n  ],")?;
            let suspects: Vec<serde_json::Value> = sweep
                .suspects
                .iter()
                .enumerate()
                .map(|(k, x)| {
                    json!({
                        "rank": k + 1,
                        "emitters": suspect_ids(x, &emitters),
                        "peaks": x.explains.len(),
                        "explains": x.explains.iter().map(|(i, product, rank)| json!({
                            "freq_mhz": sweep.peaks[*i].peak.freq.mhz(),
                            "formula": formula(product, &emitters),
                            "rank_at_peak": rank,
                        })).collect::<Vec<_>>(),
                    })
                })
                .collect();
            writeln!(
                out,
                "  \"suspects\": {}",
                serde_json::to_string(&suspects).map_err(std::io::Error::from)?
            )?;
            writeln!(out, "}}")?;
        }
    }
    finish(out)
}

fn peaks_table(sweep: &Sweep, emitters: &[Emitter]) -> String {
    use pim_report::text_table::{Align, TextTable};
    let mut t = TextTable::new(&[
        ("#", Align::Right),
        ("MHz", Align::Right),
        ("level dBm", Align::Right),
        ("above floor dB", Align::Right),
        ("kind", Align::Left),
        ("put down to", Align::Left),
        ("candidates", Align::Right),
    ]);
    for (i, p) in sweep.peaks.iter().enumerate() {
        t.push(vec![
            (i + 1).to_string(),
            format!("{:.4}", p.peak.freq.mhz()),
            format!("{:.1}", p.peak.level_dbm),
            format!("{:.1}", p.peak.above_floor_db),
            p.kind.name().to_string(),
            peak_summary(p, emitters),
            if p.kind == PeakKind::Product {
                p.found.to_string()
            } else {
                String::new()
            },
        ]);
    }
    if t.is_empty() {
        return "No peak stands above the threshold.\n".to_string();
    }
    t.render()
}

fn suspects_text(sweep: &Sweep, emitters: &[Emitter], limit: usize) -> String {
    if sweep.suspects.is_empty() {
        return "Suspects: no emitter set explains more than one peak.\n".to_string();
    }
    let mut s = format!(
        "Suspects: emitter sets whose products explain several peaks (a junction fed by them makes them all), most peaks first{}:\n",
        if sweep.suspects.len() > limit {
            format!("; the first {limit} of {}", sweep.suspects.len())
        } else {
            String::new()
        }
    );
    for (k, x) in sweep.suspects.iter().take(limit).enumerate() {
        s.push_str(&format!(
            "  {}. {} — {} peaks: {}\n",
            k + 1,
            suspect_ids(x, emitters).join(" + "),
            x.explains.len(),
            suspect_explains(x, sweep, emitters).join("; ")
        ));
    }
    s
}

fn markdown(sweep: &Sweep, emitters: &[Emitter], limit: usize) -> String {
    let mut out = String::from(
        "| # | MHz | level dBm | above floor dB | kind | put down to | candidates |\n|---:|---:|---:|---:|---|---|---:|\n",
    );
    for (i, p) in sweep.peaks.iter().enumerate() {
        out.push_str(&format!(
            "| {} | {:.4} | {:.1} | {:.1} | {} | {} | {} |\n",
            i + 1,
            p.peak.freq.mhz(),
            p.peak.level_dbm,
            p.peak.above_floor_db,
            p.kind.name(),
            md_text(&peak_summary(p, emitters)),
            if p.kind == PeakKind::Product {
                p.found.to_string()
            } else {
                String::new()
            }
        ));
    }
    out.push_str("\n| suspect | emitters | peaks | explains |\n|---:|---|---:|---|\n");
    for (k, x) in sweep.suspects.iter().take(limit).enumerate() {
        out.push_str(&format!(
            "| {} | {} | {} | {} |\n",
            k + 1,
            md_text(&suspect_ids(x, emitters).join(" + ")),
            x.explains.len(),
            md_text(&suspect_explains(x, sweep, emitters).join("; "))
        ));
    }
    out
}

/// What the trace picture shows.
pub fn picture_input(
    trace: &Trace,
    sweep: &Sweep,
    emitters: &[Emitter],
    rule: &SweepRule,
    sources: &str,
) -> TraceInput {
    let (e, p, u) = counts(sweep);
    TraceInput {
        title: format!("Receive band trace: {sources}"),
        subtitle: format!(
            "{:.4}–{:.4} MHz, {} points, {} · median floor over {} points · {} peaks ≥ {} dB above it: {e} emitter, {p} product, {u} unexplained",
            trace.start.mhz(),
            trace.stop().mhz(),
            trace.levels_dbm.len(),
            sweeps_text(trace.sweeps),
            sweep.floor.window_points,
            sweep.peaks.len(),
            rule.threshold_db,
        ),
        points: trace
            .levels_dbm
            .iter()
            .enumerate()
            .map(|(i, &l)| (trace.freq_hz_at(i as f64) / 1e6, l))
            .collect(),
        floor: sweep
            .floor
            .knots()
            .map(|(i, l)| (trace.freq_hz_at(i) / 1e6, l))
            .collect(),
        threshold_db: rule.threshold_db,
        peaks: sweep
            .peaks
            .iter()
            .map(|x| PeakMark {
                freq_mhz: x.peak.freq.mhz(),
                level_dbm: x.peak.level_dbm,
                above_floor_db: x.peak.above_floor_db,
                kind: kind_mark(x.kind),
                label: peak_summary(x, emitters),
            })
            .collect(),
    }
}
