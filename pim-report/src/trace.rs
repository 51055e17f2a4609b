//! `trace.svg`: an analyser trace of the receive band with its noise floor and every peak
//! marked by what it is: a listed emitter's carrier (a green triangle), an
//! intermodulation product (a rust dot, labelled with its first formula) or unexplained
//! (a hollow grey diamond, labelled with its frequency).
//!
//! Drawn with plotters' SVG backend in the style of the ticket's spectrum: axes, grid and
//! tick labels by the chart mesh, marks at pixel positions from the chart's own mapping
//! so the label placer works in pixels. A long trace is drawn as the lowest and highest
//! level of each pixel column, which keeps every peak and the file small.

use plotters::element::DashedPathElement;
use plotters::prelude::*;

use crate::picture::{
    axis_font, draw_header, draw_labels, finished_svg_cut, framed_plot, px, text_style, Area,
    DrawResult, LabelJob, LabelPlacer, Look, Rect, GRID, INK, MOSS, MUTED, OCHRE_DARK, PAPER, RUST,
    SLATE, STONE, WIDE,
};

/// Size of the picture in pixels.
pub const TRACE_WIDTH_PX: u32 = 1040;
pub const TRACE_HEIGHT_PX: u32 = 560;
/// Peaks labelled, strongest above the floor first.
pub const LABELLED_PEAKS: usize = 16;
/// Peaks labelled on a phone, whose plot is a third as wide.
const PHONE_LABELLED_PEAKS: usize = 6;
/// The canvas a phone's trace is drawn on; its viewBox is cut to the height used.
const PHONE_CANVAS_PX: u32 = 900;
/// The plot's part of a phone's trace, pixels high.
const PHONE_PLOT_PX: u32 = 320;

/// What a peak is, for its mark.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MarkKind {
    Emitter,
    Product,
    Unexplained,
}

/// One peak.
#[derive(Clone, Debug, PartialEq)]
pub struct PeakMark {
    pub freq_mhz: f64,
    pub level_dbm: f64,
    pub above_floor_db: f64,
    pub kind: MarkKind,
    /// The emitter's id or the first formula; empty for an unexplained peak.
    pub label: String,
}

/// Everything the trace picture shows.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct TraceInput {
    pub title: String,
    pub subtitle: String,
    /// The trace as (MHz, dBm), in frequency order.
    pub points: Vec<(f64, f64)>,
    /// The floor as (MHz, dBm) knots, in frequency order.
    pub floor: Vec<(f64, f64)>,
    /// Least height of a peak above the floor, dB.
    pub threshold_db: f64,
    pub peaks: Vec<PeakMark>,
}

/// The trace picture as an SVG document, drawn for a screen or paper.
pub fn trace_svg(input: &TraceInput) -> String {
    trace_svg_at(input, &WIDE)
}

/// The trace picture drawn at `look` ([`crate::picture::PHONE`] for a phone: 360 px
/// wide, the legend beneath, the strongest few peaks labelled).
pub fn trace_svg_at(input: &TraceInput, look: &Look) -> String {
    let mut svg = String::new();
    let canvas = if look.stacked() {
        (look.width_px, PHONE_CANVAS_PX)
    } else {
        (TRACE_WIDTH_PX, TRACE_HEIGHT_PX)
    };
    let drawn = {
        let root = SVGBackend::with_string(&mut svg, canvas).into_drawing_area();
        draw_trace_on(&root, input, look).and_then(|used| root.present().map(|_| used))
    };
    finished_svg_cut(drawn, svg, canvas, "The trace")
}

/// The lowest and highest level in each of `columns` equal frequency slices, as a path
/// that visits both in frequency order.
fn column_envelope(points: &[(f64, f64)], lo: f64, hi: f64, columns: usize) -> Vec<(f64, f64)> {
    if points.len() <= 2 * columns || hi <= lo {
        return points.to_vec();
    }
    let width = (hi - lo) / columns as f64;
    let mut out = Vec::with_capacity(2 * columns);
    let mut i = 0;
    while i < points.len() {
        let col = (((points[i].0 - lo) / width) as usize).min(columns - 1);
        let (mut min, mut max) = (points[i], points[i]);
        let mut j = i;
        while j < points.len() && (((points[j].0 - lo) / width) as usize).min(columns - 1) == col {
            if points[j].1 < min.1 {
                min = points[j];
            }
            if points[j].1 > max.1 {
                max = points[j];
            }
            j += 1;
        }
        if min.0 <= max.0 {
            out.extend([min, max]);
        } else {
            out.extend([max, min]);
        }
        i = j;
    }
    out
}

/// Draws the trace; returns the height used.
fn draw_trace_on(root: &Area, input: &TraceInput, look: &Look) -> DrawResult<u32> {
    root.fill(&PAPER)?;
    let title = if input.title.trim().is_empty() {
        "Receive band trace".to_string()
    } else {
        input.title.clone()
    };
    let header_px = look.header_px(&title, &input.subtitle);
    let (header, rest) = root.split_vertically(header_px);
    let (body, side) = look.split_body(&rest, PHONE_PLOT_PX);
    draw_header(&header, look, title, input.subtitle.clone())?;
    let full = if look.stacked() {
        header_px + PHONE_PLOT_PX
    } else {
        TRACE_HEIGHT_PX
    };

    let finite: Vec<(f64, f64)> = input
        .points
        .iter()
        .copied()
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .collect();
    let (Some(first), Some(last)) = (finite.first(), finite.last()) else {
        root.draw(&Text::new(
            "No trace points.",
            (look.margin_px as i32, header_px as i32 + 20),
            text_style(look.label_px, MUTED),
        ))?;
        return Ok(full);
    };
    let (x0, mut x1) = (first.0, last.0);
    if x1 <= x0 {
        x1 = x0 + 1e-3;
    }
    let lo = finite.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
    let hi = finite.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
    let y0 = ((lo - 5.0) / 10.0).floor() * 10.0;
    let y1 = ((hi + 8.0) / 10.0).ceil() * 10.0;

    let mut chart = ChartBuilder::on(&body)
        .margin(look.margin_px)
        .margin_right(look.margin_right_px())
        .x_label_area_size(look.x_label_area_px)
        .y_label_area_size(look.y_label_area_px)
        .build_cartesian_2d(x0..x1, y0..y1)?;
    let span = x1 - x0;
    let decimals = match span {
        s if s < 0.05 => 4,
        s if s < 0.5 => 3,
        s if s < 5.0 => 2,
        _ => 1,
    };
    let x_tick = move |v: &f64| format!("{v:.decimals$}");
    let y_tick = |v: &f64| format!("{v:.0}");
    chart
        .configure_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .max_light_lines(0)
        .axis_style(MUTED.stroke_width(1))
        .label_style(axis_font(look.tick_px, MUTED))
        .axis_desc_style(axis_font(look.label_px, MUTED))
        .x_desc("frequency, MHz")
        .y_desc("level, dBm")
        .x_labels(if look.stacked() { 3 } else { 8 })
        .y_labels(if look.stacked() { 5 } else { 8 })
        .x_label_formatter(&x_tick)
        .y_label_formatter(&y_tick)
        .draw()?;
    let plot = framed_plot(root, chart.plotting_area().get_pixel_range())?;
    let to_px = |f: f64, l: f64| -> (f64, f64) {
        let (x, y) = chart.backend_coord(&(f.clamp(x0, x1), l.clamp(y0, y1)));
        (x as f64, y as f64)
    };

    // The trace, then the floor and the threshold over it.
    let columns = (plot.x1 - plot.x0).max(1.0) as usize;
    let envelope = column_envelope(&finite, x0, x1, columns);
    root.draw(&PathElement::new(
        envelope
            .iter()
            .map(|p| px(to_px(p.0, p.1)))
            .collect::<Vec<_>>(),
        SLATE.mix(0.85).stroke_width(1),
    ))?;
    let floor: Vec<(f64, f64)> = input
        .floor
        .iter()
        .copied()
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .collect();
    if !floor.is_empty() {
        let mut line: Vec<(f64, f64)> = Vec::with_capacity(floor.len() + 2);
        line.push((x0, floor[0].1));
        line.extend(floor.iter().copied());
        line.push((x1, floor[floor.len() - 1].1));
        root.draw(&PathElement::new(
            line.iter().map(|p| px(to_px(p.0, p.1))).collect::<Vec<_>>(),
            OCHRE_DARK.stroke_width(2),
        ))?;
        if input.threshold_db.is_finite() && input.threshold_db > 0.0 {
            root.draw(&DashedPathElement::new(
                line.iter()
                    .map(|p| px(to_px(p.0, p.1 + input.threshold_db)))
                    .collect::<Vec<_>>(),
                5,
                4,
                OCHRE_DARK.mix(0.6).stroke_width(1),
            ))?;
        }
    }

    // The peaks.
    let peaks: Vec<&PeakMark> = input
        .peaks
        .iter()
        .filter(|p| p.freq_mhz.is_finite() && p.level_dbm.is_finite())
        .collect();
    let spots: Vec<(f64, f64)> = peaks
        .iter()
        .map(|p| {
            let (x, y) = to_px(p.freq_mhz, p.level_dbm);
            (x, y - 7.0)
        })
        .collect();
    for (p, &at) in peaks.iter().zip(&spots) {
        draw_mark(root, p.kind, at)?;
    }
    let mut placer = LabelPlacer::new(plot.inset(2.0));
    for s in &spots {
        placer.block(Rect::around(*s, 6.0));
    }
    let mut order: Vec<usize> = (0..peaks.len()).collect();
    order.sort_by(|&a, &b| {
        let rank = |k: MarkKind| match k {
            MarkKind::Product => 0,
            MarkKind::Unexplained => 1,
            MarkKind::Emitter => 2,
        };
        rank(peaks[a].kind)
            .cmp(&rank(peaks[b].kind))
            .then(peaks[b].above_floor_db.total_cmp(&peaks[a].above_floor_db))
    });
    let jobs: Vec<LabelJob> = order
        .iter()
        .take(if look.stacked() {
            PHONE_LABELLED_PEAKS
        } else {
            LABELLED_PEAKS
        })
        .map(|&i| {
            let p = peaks[i];
            let text = match p.kind {
                MarkKind::Unexplained => format!("? {:.4}", p.freq_mhz),
                _ if p.label.trim().is_empty() => format!("{:.4}", p.freq_mhz),
                _ => p.label.trim().to_string(),
            };
            LabelJob {
                at: spots[i],
                text,
                colour: match p.kind {
                    MarkKind::Emitter => MOSS,
                    MarkKind::Product => RUST,
                    MarkKind::Unexplained => INK,
                },
                gap: 8.0,
            }
        })
        .collect();
    draw_labels(root, &mut placer, &jobs, look.label_px)?;

    // The legend.
    let (sx, sy) = side.get_base_pixel();
    let margin = look.margin_px as f64;
    let (x, mut y) = (sx as f64 + margin, sy as f64 + margin + 8.0);
    let entries: [(Option<MarkKind>, &str); 6] = [
        (None, "trace"),
        (None, "noise floor (running median)"),
        (None, "floor + threshold"),
        (Some(MarkKind::Emitter), "emitter: a listed carrier"),
        (Some(MarkKind::Product), "product: first formula shown"),
        (Some(MarkKind::Unexplained), "unexplained"),
    ];
    for (i, (kind, text)) in entries.iter().enumerate() {
        match (kind, i) {
            (Some(k), _) => draw_mark(root, *k, (x + 11.0, y))?,
            (None, 0) => root.draw(&PathElement::new(
                vec![px((x + 2.0, y)), px((x + 20.0, y))],
                SLATE.stroke_width(1),
            ))?,
            (None, 1) => root.draw(&PathElement::new(
                vec![px((x + 2.0, y)), px((x + 20.0, y))],
                OCHRE_DARK.stroke_width(2),
            ))?,
            (None, _) => root.draw(&DashedPathElement::new(
                vec![px((x + 2.0, y)), px((x + 20.0, y))],
                5,
                4,
                OCHRE_DARK.mix(0.6).stroke_width(1),
            ))?,
        }
        root.draw(&Text::new(
            text.to_string(),
            px((x + 28.0, y - (look.label_px / 2.0).round())),
            text_style(look.label_px, INK),
        ))?;
        y += look.row_px.max(22.0);
    }
    Ok(if look.stacked() {
        (y + margin).ceil() as u32
    } else {
        full
    })
}

/// A peak's mark, centred at `p`.
fn draw_mark(area: &Area, kind: MarkKind, p: (f64, f64)) -> DrawResult<()> {
    match kind {
        MarkKind::Emitter => area.draw(&Polygon::new(
            vec![
                px((p.0 - 5.0, p.1 - 5.0)),
                px((p.0 + 5.0, p.1 - 5.0)),
                px((p.0, p.1 + 4.0)),
            ],
            MOSS.filled(),
        )),
        MarkKind::Product => {
            area.draw(&Circle::new(px(p), 5, RUST.filled()))?;
            area.draw(&Circle::new(px(p), 5, PAPER.stroke_width(1)))
        }
        MarkKind::Unexplained => {
            let pts = vec![
                px((p.0, p.1 - 5.0)),
                px((p.0 + 5.0, p.1)),
                px((p.0, p.1 + 5.0)),
                px((p.0 - 5.0, p.1)),
            ];
            area.draw(&Polygon::new(pts.clone(), PAPER.filled()))?;
            let mut edge = pts.clone();
            edge.push(pts[0]);
            area.draw(&PathElement::new(edge, STONE.stroke_width(2)))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> TraceInput {
        let points: Vec<(f64, f64)> = (0..5_000)
            .map(|i| {
                let f = 144.0 + i as f64 * 0.0032;
                let bump = |c: f64, l: f64| l - 12.0 * ((f - c) / 0.008).powi(2);
                let v = [(146.34, -86.0), (152.84, -31.0), (149.117, -92.0)]
                    .iter()
                    .map(|&(c, l)| bump(c, l))
                    .fold(-108.0 + ((i * 7919) % 13) as f64 * 0.3, f64::max);
                (f, v)
            })
            .collect();
        TraceInput {
            title: "Marrow Hill (invented): receive band".into(),
            subtitle: "144.0000–159.9968 MHz".into(),
            points,
            floor: vec![(144.5, -106.0), (159.5, -105.0)],
            threshold_db: 10.0,
            peaks: vec![
                PeakMark {
                    freq_mhz: 146.34,
                    level_dbm: -86.0,
                    above_floor_db: 20.0,
                    kind: MarkKind::Product,
                    label: "2·SKP-152 − FIRE-DSP".into(),
                },
                PeakMark {
                    freq_mhz: 152.84,
                    level_dbm: -31.0,
                    above_floor_db: 75.0,
                    kind: MarkKind::Emitter,
                    label: "SKP-152".into(),
                },
                PeakMark {
                    freq_mhz: 149.117,
                    level_dbm: -92.0,
                    above_floor_db: 14.0,
                    kind: MarkKind::Unexplained,
                    label: String::new(),
                },
            ],
        }
    }

    #[test]
    fn the_trace_parses_and_names_every_peak() {
        let svg = trace_svg(&sample());
        pim_tests::assert_xml_well_formed(&svg, "trace.svg");
        assert!(svg.contains("2·SKP-152 − FIRE-DSP"));
        assert!(svg.contains("SKP-152"));
        assert!(svg.contains("? 149.1170"));
        assert!(svg.contains("noise floor (running median)"));
        // Drawn by pixel column, not point by point.
        assert!(svg.len() < 200_000, "{} bytes", svg.len());
    }

    #[test]
    fn empty_and_odd_inputs_still_draw() {
        let svg = trace_svg(&TraceInput::default());
        pim_tests::assert_xml_well_formed(&svg, "empty trace.svg");
        let mut odd = sample();
        odd.points.push((f64::NAN, 1.0));
        odd.peaks[0].level_dbm = f64::INFINITY;
        odd.threshold_db = f64::NAN;
        pim_tests::assert_xml_well_formed(&trace_svg(&odd), "odd trace.svg");
    }

    #[test]
    fn envelope_keeps_the_extremes_of_each_column() {
        let pts: Vec<(f64, f64)> = (0..1000).map(|i| (i as f64, (i % 10) as f64)).collect();
        let e = column_envelope(&pts, 0.0, 999.0, 10);
        assert!(e.len() <= 22);
        assert!(e.iter().any(|p| p.1 == 9.0) && e.iter().any(|p| p.1 == 0.0));
    }
}
