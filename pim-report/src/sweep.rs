//! The outputs of a sweep of an analyser trace: the peaks table, the suspects, Markdown,
//! spreadsheet-safe CSV, streamed JSON, and what the trace picture shows.

use std::io::{self, Write};

use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::rank::formula;
use pim_core::trace::classify::{ExplainedPeak, Miss, PeakKind, Suspect};
use pim_core::trace::{Sweep, Trace};
use serde_json::json;

use crate::candidates::{
    count, markdown_text, model_text, table_text, write_json_array, Counts, Layout, Listing,
};
use crate::csv_out::write_row;
use crate::document::md_inline;
use crate::trace::{MarkKind, PeakMark, TraceInput};
use pim_io::precision::{fixed, json_text};

/// A sweep's results with what its outputs name.
pub struct SweepReport<'a> {
    /// The trace (held sweeps).
    pub trace: &'a Trace,
    /// The floor, peaks and suspects.
    pub sweep: &'a Sweep,
    /// The emitters, indexed as the results are.
    pub emitters: &'a [Emitter],
    /// The trace files, as named.
    pub sources: String,
    /// The emitter file, as named.
    pub emitters_source: String,
    /// The peak threshold above the floor, dB.
    pub threshold_db: f64,
    /// The receive channel width (the least peak separation).
    pub rx_bw: Hz,
    /// Candidates shown per peak (`None`: all).
    pub shown: Option<usize>,
    /// Suspects shown in tables and Markdown.
    pub suspects: usize,
    /// Every column of the candidates' tables (`--wide`).
    pub wide: bool,
}

/// What a peak's search counted, as every output of the sweep counts it.
pub fn peak_counts(p: &ExplainedPeak, shown: Option<usize>) -> Counts {
    Counts {
        found: p.found,
        products: p.kept,
        candidates: p.ranking.total,
        shown: p.ranking.candidates.len().min(shown.unwrap_or(usize::MAX)),
        complete: p.complete,
    }
}

/// The candidates column of the peaks' table, Markdown and CSV: the candidates of a
/// product peak, empty for the others.
fn candidates_cell(p: &ExplainedPeak) -> String {
    if p.kind == PeakKind::Product {
        p.ranking.total.to_string()
    } else {
        String::new()
    }
}

/// The text table: the trace line, the peaks, the suspects, each product peak's candidates.
pub fn write_table(out: &mut dyn Write, r: &SweepReport) -> io::Result<()> {
    crate::text_table::write_wrapped(out, |body| table_body(body, r))
}

fn table_body(out: &mut dyn Write, r: &SweepReport) -> io::Result<()> {
    write!(out, "{}", trace_line(r.trace, &r.sources, r.sweep))?;
    let (e, p, u) = counts(r.sweep);
    writeln!(
        out,
        "{} at least {} dB above the floor and {} kHz apart: {e} emitter, {p} product, {u} unexplained ({} from {}).\n",
        count(r.sweep.peaks.len(), "peak", "peaks"),
        r.threshold_db,
        r.rx_bw.khz_text(),
        count(r.emitters.len(), "emitter", "emitters"),
        r.emitters_source,
    )?;
    write!(out, "{}", peaks_table(r.sweep, r.emitters))?;
    writeln!(out)?;
    write!(out, "{}", suspects_text(r.sweep, r.emitters, r.suspects))?;
    let shown = r.shown.unwrap_or(usize::MAX);
    let model = each_product_peak(r, |head, listing| {
        let layout = Layout {
            wide: r.wide,
            legend: false,
        };
        write!(out, "\n{head}\n{}", table_text(listing, shown, layout))
    })?;
    // the level model, said once for every peak
    if let Some(m) = model {
        writeln!(out, "\n{}", model_text(&m, None, false).trim_end())?;
    }
    Ok(())
}

/// Calls `each` with every product peak's heading (its counts) and listing, in the
/// order of the peaks; returns the level model of the levelled ones.
fn each_product_peak(
    r: &SweepReport,
    mut each: impl FnMut(&str, &Listing) -> io::Result<()>,
) -> io::Result<Option<pim_core::level::LevelModel>> {
    let mut model = None;
    for (i, p) in r.sweep.peaks.iter().enumerate() {
        if p.kind != PeakKind::Product {
            continue;
        }
        let listing = Listing {
            emitters: r.emitters,
            params: &p.params,
            ranking: &p.ranking,
            co_channel: &p.co_channel,
        };
        let head = format!(
            "Peak {} at {:.4} MHz: {}; {}.",
            i + 1,
            p.peak.freq.mhz(),
            peak_counts(p, r.shown).text(),
            p.ranking.basis()
        );
        each(&head, &listing)?;
        if p.ranking.junction.is_some() {
            model = Some(p.ranking.model);
        }
    }
    Ok(model)
}

/// The peaks and the suspects as Markdown tables.
pub fn write_markdown(out: &mut dyn Write, r: &SweepReport) -> io::Result<()> {
    out.write_all(markdown(r.sweep, r.emitters, r.suspects).as_bytes())?;
    // each product peak's candidates, as the table gives them
    let shown = r.shown.unwrap_or(usize::MAX);
    let model = each_product_peak(r, |head, listing| {
        let layout = Layout {
            wide: true,
            legend: false,
        };
        write!(
            out,
            "\n{}\n\n{}",
            crate::document::md_text(head),
            markdown_text(listing, shown, layout)
        )
    })?;
    if let Some(m) = model {
        write!(
            out,
            "\n{}",
            crate::candidates::preformatted(&model_text(&m, None, false))
        )?;
    }
    Ok(())
}

/// One CSV row per peak, spreadsheet-safe.
pub fn write_csv(out: &mut dyn Write, r: &SweepReport) -> io::Result<()> {
    write_row(
        out,
        [
            "peak",
            "freq_mhz",
            "level_dbm",
            "floor_dbm",
            "above_floor_db",
            "kind",
            "emitters",
            "first_formula",
            "first_level_dbm",
            "candidates",
        ],
    )?;
    for (i, p) in r.sweep.peaks.iter().enumerate() {
        let first = p.ranking.candidates.first();
        write_row(
            out,
            [
                (i + 1).to_string(),
                p.peak.freq.mhz_text(),
                fixed(p.peak.level_dbm, 2),
                fixed(p.peak.floor_dbm, 2),
                fixed(p.peak.above_floor_db, 2),
                p.kind.name().to_string(),
                peak_emitters(p, r.emitters).join(";"),
                first
                    .map(|c| formula(&c.product, r.emitters))
                    .unwrap_or_default(),
                first
                    .and_then(|c| c.level_dbm)
                    .map(|v| fixed(v, 2))
                    .unwrap_or_default(),
                candidates_cell(p),
            ],
        )?;
    }
    Ok(())
}

/// The JSON document, streamed: `inputs` (as the caller gives them), the trace, the floor,
/// each peak with its candidates shaped as in `explain`, and the suspects.
pub fn write_json(
    out: &mut dyn Write,
    r: &SweepReport,
    inputs: &serde_json::Value,
) -> io::Result<()> {
    writeln!(out, "{{")?;
    writeln!(
        out,
        "  \"inputs\": {},",
        json_text(inputs, false).map_err(std::io::Error::from)?
    )?;
    let trace_json = json!({
        "start_mhz": r.trace.start.mhz(),
        "stop_mhz": r.trace.stop().mhz(),
        "step_khz": r.trace.step_hz / 1e3,
        "points": r.trace.levels_dbm.len(),
        "sweeps": r.trace.sweeps,
    });
    let floor_json = json!({
        "method": "running median",
        "window_points": r.sweep.floor.window_points,
        "window_khz": r.sweep.floor.window_points as f64 * r.trace.step_hz / 1e3,
        "typical_dbm": r.sweep.floor.typical_dbm(),
        "knots": r.sweep.floor.knots().map(|(i, l)| json!({
            "freq_mhz": r.trace.freq_hz_at(i) / 1e6,
            "level_dbm": l,
        })).collect::<Vec<_>>(),
    });
    writeln!(out, "  \"trace\": {},", json_text(&trace_json, false)?)?;
    writeln!(out, "  \"floor\": {},", json_text(&floor_json, false)?)?;
    writeln!(
        out,
        "  \"min_separation_points\": {},",
        r.sweep.min_distance_points
    )?;
    write!(out, "  \"peaks\": [")?;
    for (i, p) in r.sweep.peaks.iter().enumerate() {
        let mut head = json!({
            "freq_mhz": p.peak.freq.mhz(),
            "level_dbm": p.peak.level_dbm,
            "floor_dbm": p.peak.floor_dbm,
            "above_floor_db": p.peak.above_floor_db,
            "kind": p.kind.name(),
            "emitters": peak_emitters(p, r.emitters),
            "ranking_basis": p.ranking.basis(),
            "nearest": p.misses.iter().map(|(c, why)| json!({
                "formula": formula(&c.product, r.emitters),
                "mechanism": c.mechanism,
                "offset_khz": c.product.offset(p.params.target).khz(),
                "why": miss_name(*why),
            })).collect::<Vec<_>>(),
        });
        if let Some(m) = head.as_object_mut() {
            m.extend(peak_counts(p, r.shown).json());
        }
        let head = json_text(&head, false).map_err(std::io::Error::from)?;
        // The head's closing brace is replaced by the candidates.
        let head = head.strip_suffix('}').unwrap_or(&head);
        write!(
            out,
            "{}\n  {head},\"candidates\":",
            if i == 0 { "" } else { "," }
        )?;
        let listing = Listing {
            emitters: r.emitters,
            params: &p.params,
            ranking: &p.ranking,
            co_channel: &p.co_channel,
        };
        write_json_array(out, &listing, r.shown)?;
        write!(out, "}}")?;
    }
    writeln!(out, "\n  ],")?;
    let suspects: Vec<serde_json::Value> = r
        .sweep
        .suspects
        .iter()
        .enumerate()
        .map(|(k, x)| {
            json!({
                "rank": k + 1,
                "emitters": suspect_ids(x, r.emitters),
                "peaks": x.explains.len(),
                "explains": x.explains.iter().map(|(i, product, rank)| json!({
                    "freq_mhz": r.sweep.peaks[*i].peak.freq.mhz(),
                    "formula": formula(product, r.emitters),
                    "rank_at_peak": rank,
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    writeln!(
        out,
        "  \"suspects\": {}",
        json_text(&suspects, false).map_err(std::io::Error::from)?
    )?;
    writeln!(out, "}}")?;
    Ok(())
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
        PeakKind::Unexplained => match p.misses.first() {
            Some((c, why)) => format!(
                "(nearest: {}, {})",
                formula(&c.product, emitters),
                miss_text(p, c, *why)
            ),
            None => String::new(),
        },
    }
}

/// Why a near candidate does not explain its peak, in a few words.
fn miss_text(p: &ExplainedPeak, c: &pim_core::rank::Candidate, why: Miss) -> String {
    match why {
        Miss::OffCentre => format!(
            "centred {:.1} kHz off",
            c.product.offset(p.params.target).khz().abs()
        ),
        Miss::TooWeak => "too weak beside the other peaks".to_string(),
    }
}

fn miss_name(why: Miss) -> &'static str {
    match why {
        Miss::OffCentre => "off-centre",
        Miss::TooWeak => "too-weak",
    }
}

fn suspect_ids(s: &Suspect, emitters: &[Emitter]) -> Vec<String> {
    s.emitters.iter().map(|&i| emitters[i].id.clone()).collect()
}

/// Each peak an emitter set explains: its product and where the peak lies.
pub(crate) fn suspect_explains(s: &Suspect, sweep: &Sweep, emitters: &[Emitter]) -> Vec<String> {
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

fn peaks_table(sweep: &Sweep, emitters: &[Emitter]) -> String {
    use crate::text_table::{Align, TextTable};
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
            fixed(p.peak.freq.mhz(), 4),
            fixed(p.peak.level_dbm, 1),
            fixed(p.peak.above_floor_db, 1),
            p.kind.name().to_string(),
            peak_summary(p, emitters),
            candidates_cell(p),
        ]);
    }
    if t.is_empty() {
        return "No peak stands above the threshold.\n".to_string();
    }
    t.render_within(crate::text_table::TERMINAL_WIDTH)
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
            "  {}. {} — {}: {}\n",
            k + 1,
            suspect_ids(x, emitters).join(" + "),
            count(x.explains.len(), "peak", "peaks"),
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
            md_inline(&peak_summary(p, emitters)),
            candidates_cell(p)
        ));
    }
    out.push_str("\n| suspect | emitters | peaks | explains |\n|---:|---|---:|---|\n");
    for (k, x) in sweep.suspects.iter().take(limit).enumerate() {
        out.push_str(&format!(
            "| {} | {} | {} | {} |\n",
            k + 1,
            md_inline(&suspect_ids(x, emitters).join(" + ")),
            x.explains.len(),
            md_inline(&suspect_explains(x, sweep, emitters).join("; "))
        ));
    }
    out
}

/// What the trace picture shows.
pub fn picture_input(
    trace: &Trace,
    sweep: &Sweep,
    emitters: &[Emitter],
    threshold_db: f64,
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
            threshold_db,
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
        threshold_db,
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
