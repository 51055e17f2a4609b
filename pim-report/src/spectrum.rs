//! `spectrum.svg`: the receive channel and the intermodulation products that land in
//! it. The frequency axis spans a window around the heard frequency; the receive
//! channel is a shaded band, the heard frequency a dashed line, each product a stem at
//! its frequency whose height is its level in the receive channel at the receiver, in dB
//! relative to the first candidate, or in dBm once a heard level calibrates the model
//! (its rank when no level is known); products more than [`LEVEL_DEPTH_DB`] below the
//! strongest sit in a band under the axis with those that have no level, with a thin bar for the bandwidth it occupies and a label giving its order
//! (and formula, for the top few). The emitters that make the products usually lie far
//! outside the window, so a strip under the chart shows them on a logarithmic
//! frequency scale.
//!
//! Drawn with plotters' SVG backend: axes, grid and tick labels by its chart mesh; the
//! marks as plotters elements at pixel positions from the chart's own coordinate
//! mapping, so that the label placer can work in pixels. The strip is drawn directly in
//! pixels: plotters' chart axes would add nothing to a single labelled line.

use std::ops::Range;

use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::picture::{
    axis_font, bold_style, draw_header, draw_label, draw_labels, finished_svg_cut, framed_plot,
    label_size_px, px, text_height_px, text_style, text_width_px, wrap, Area, DrawResult, LabelJob,
    LabelPlacer, Look, PlacedLabel, Rect, GRID, HEADER_PX, INK, LABEL_PAD_PX, LABEL_PX, MOSS,
    MUTED, OCHRE, OCHRE_DARK, PAPER, RUST, SLATE, STONE, SUBTITLE_PX, TICK_PX, WIDE,
};

/// Size of the picture in pixels.
pub const SPECTRUM_WIDTH_PX: u32 = 1040;
pub const SPECTRUM_HEIGHT_PX: u32 = 600;
/// The strip of emitters under the chart.
const STRIP_PX: u32 = 170;
/// Products labelled with their order, best ranked first.
pub const LABELLED_PRODUCTS: usize = 10;
/// Of those, how many also show their formula.
pub const PRODUCTS_WITH_FORMULA: usize = 3;
/// The level axis spans at most this many dB below the strongest product shown.
pub const LEVEL_DEPTH_DB: f64 = 60.0;
/// The window never spans less than this either side of the heard frequency.
const MIN_HALF_WINDOW_KHZ: f64 = 25.0;

/// Everything the spectrum picture shows.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SpectrumInput {
    /// The first line of the picture, e.g. the site and the receiver.
    pub title: String,
    /// The heard frequency, at the centre of the receive channel, in MHz.
    pub target_mhz: f64,
    /// Width of the receive channel in kHz.
    pub rx_bw_khz: f64,
    /// The first candidate's level in the channel at the receiver, dBm, once a heard level
    /// calibrates the model: the axis is then in dBm (this plus each product's
    /// `level_db`); otherwise in dB relative to the first candidate.
    pub calibrated_first_dbm: Option<f64>,
    /// The products that land in the channel.
    pub products: Vec<ProductMark>,
    /// The emitters that take part in them.
    pub emitters: Vec<EmitterMark>,
}

/// One intermodulation product.
#[derive(Clone, Debug, PartialEq)]
pub struct ProductMark {
    pub freq_mhz: f64,
    /// The bandwidth the product occupies, in kHz.
    pub bandwidth_khz: f64,
    /// Σ|kᵢ|.
    pub order: u32,
    /// The product's level in the receive channel at the receiver, dB relative to the
    /// first candidate, when it could be levelled.
    pub level_db: Option<f64>,
    /// 1 for the most plausible.
    pub rank: usize,
    /// The product in trade notation, e.g. `2·SKP-152 − FIRE-DSP`; shown for the top
    /// few (may be empty).
    pub formula: String,
}

/// One emitter taking part in the products.
#[derive(Clone, Debug, PartialEq)]
pub struct EmitterMark {
    pub id: String,
    pub freq_mhz: f64,
}

/// The spectrum picture as an SVG document, drawn for a screen or paper.
pub fn spectrum_svg(input: &SpectrumInput) -> String {
    spectrum_svg_at(input, &WIDE)
}

/// The spectrum picture drawn at `look` ([`crate::picture::PHONE`] for a phone: 360 px
/// wide, the legend beneath, fewer product labels, and no strip of emitters, whose
/// frequencies the ticket's tables give).
pub fn spectrum_svg_at(input: &SpectrumInput, look: &Look) -> String {
    let mut svg = String::new();
    let canvas = canvas_px(look);
    let drawn = draw_spectrum(input, look, &mut svg).map(|l| l.used_px);
    finished_svg_cut(drawn, svg, canvas, "The spectrum")
}

/// The canvas a phone's spectrum is drawn on; its viewBox is cut to the height used.
const PHONE_CANVAS_PX: u32 = 1200;
/// The plot's part of a phone's spectrum, pixels high.
const PHONE_PLOT_PX: u32 = 330;

fn canvas_px(look: &Look) -> (u32, u32) {
    if look.stacked() {
        (look.width_px, PHONE_CANVAS_PX)
    } else {
        (SPECTRUM_WIDTH_PX, SPECTRUM_HEIGHT_PX)
    }
}

/// How many products get a label and how many of those their formula: fewer on a
/// phone, where the plot is a third as wide; the products chosen are the best ranked
/// either way.
fn labelled_products(look: &Look) -> (usize, usize) {
    if look.stacked() {
        (5, 1)
    } else {
        (LABELLED_PRODUCTS, PRODUCTS_WITH_FORMULA)
    }
}

/// What the vertical axis shows.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Height {
    /// Level from the floor to the top (dB relative to the first candidate, or dBm when
    /// `offset_db` calibrates it), with a band of `band_db` under the floor for products
    /// that have no level or lie more than [`LEVEL_DEPTH_DB`] below the strongest.
    Level {
        floor_db: f64,
        top_db: f64,
        band_db: f64,
        offset_db: f64,
        calibrated: bool,
    },
    /// Rank, 1 at the top, over this many ranks.
    Rank { ranks: usize },
}

impl Height {
    fn of(products: &[&ProductMark], calibrated_first_dbm: Option<f64>) -> Height {
        let offset_db = calibrated_first_dbm
            .filter(|v| v.is_finite())
            .unwrap_or(0.0);
        let levels: Vec<f64> = products
            .iter()
            .filter_map(|p| p.level_db)
            .filter(|l| l.is_finite())
            .map(|l| l + offset_db)
            .collect();
        if levels.is_empty() {
            let ranks = products.iter().map(|p| p.rank).max().unwrap_or(1).max(1);
            return Height::Rank { ranks };
        }
        let hi = levels.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let lo = levels
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
            .max(hi - LEVEL_DEPTH_DB);
        let floor_db = ((lo - 10.0) / 10.0).floor() * 10.0;
        let top_db = ((hi + 6.0) / 10.0).ceil() * 10.0;
        let shown = levels.iter().filter(|&&l| l >= floor_db).count();
        let band_db = if shown < products.len() {
            0.1 * (top_db - floor_db)
        } else {
            0.0
        };
        Height::Level {
            floor_db,
            top_db,
            band_db,
            offset_db,
            calibrated: calibrated_first_dbm.is_some_and(|v| v.is_finite()),
        }
    }

    fn range(&self) -> Range<f64> {
        match *self {
            Height::Level {
                floor_db,
                top_db,
                band_db,
                ..
            } => floor_db - band_db..top_db,
            Height::Rank { ranks } => 0.0..ranks as f64 + 0.6,
        }
    }

    /// Where stems stand.
    fn base(&self) -> f64 {
        match *self {
            Height::Level { floor_db, .. } => floor_db,
            Height::Rank { .. } => 0.0,
        }
    }

    /// The height of a product's stem top, or `None` for a product without a level (or
    /// below the floor) on a level axis.
    fn value(&self, p: &ProductMark) -> Option<f64> {
        match *self {
            Height::Level {
                floor_db,
                offset_db,
                ..
            } => p
                .level_db
                .filter(|l| l.is_finite())
                .map(|l| l + offset_db)
                .filter(|&v| v >= floor_db),
            Height::Rank { ranks } => Some((ranks + 1 - p.rank.clamp(1, ranks)) as f64),
        }
    }

    /// Whether a product has a level but lies below the floor.
    fn below(&self, p: &ProductMark) -> bool {
        matches!(self, Height::Level { .. })
            && p.level_db.is_some_and(|l| l.is_finite())
            && self.value(p).is_none()
    }

    /// Where a product's mark goes: its stem top, or the middle of the band under the
    /// floor when it has no level or lies below the floor.
    fn mark(&self, p: &ProductMark) -> f64 {
        match (self.value(p), *self) {
            (Some(v), _) => v,
            (
                None,
                Height::Level {
                    floor_db, band_db, ..
                },
            ) => floor_db - band_db / 2.0,
            (None, Height::Rank { .. }) => 0.0,
        }
    }
}

/// The input with every non-finite value left out or made safe.
struct Clean<'a> {
    target_mhz: f64,
    target_known: bool,
    rx_bw_khz: f64,
    /// Best ranked first.
    products: Vec<&'a ProductMark>,
    emitters: Vec<&'a EmitterMark>,
}

impl<'a> Clean<'a> {
    fn new(input: &'a SpectrumInput) -> Self {
        let mut products: Vec<&ProductMark> = input
            .products
            .iter()
            .filter(|p| p.freq_mhz.is_finite())
            .collect();
        products.sort_by(|a, b| {
            a.rank.cmp(&b.rank).then(
                b.level_db
                    .unwrap_or(f64::NEG_INFINITY)
                    .total_cmp(&a.level_db.unwrap_or(f64::NEG_INFINITY)),
            )
        });
        let target_known = input.target_mhz.is_finite() && input.target_mhz > 0.0;
        let target_mhz = if target_known {
            input.target_mhz
        } else {
            products.first().map(|p| p.freq_mhz).unwrap_or(0.0)
        };
        let rx_bw_khz = if input.rx_bw_khz.is_finite() {
            input.rx_bw_khz.abs()
        } else {
            0.0
        };
        Clean {
            target_mhz,
            target_known,
            rx_bw_khz,
            products,
            emitters: input
                .emitters
                .iter()
                .filter(|e| e.freq_mhz.is_finite())
                .collect(),
        }
    }

    /// The frequency window of the chart, in MHz.
    fn window_mhz(&self) -> Range<f64> {
        let mut half_khz = (2.0 * self.rx_bw_khz).max(MIN_HALF_WINDOW_KHZ);
        for p in &self.products {
            let bw = if p.bandwidth_khz.is_finite() {
                p.bandwidth_khz.abs()
            } else {
                0.0
            };
            half_khz = half_khz.max((p.freq_mhz - self.target_mhz).abs() * 1000.0 + bw / 2.0);
        }
        let half_mhz = half_khz * 1.12 / 1000.0;
        self.target_mhz - half_mhz..self.target_mhz + half_mhz
    }
}

/// Where things went, for the tests.
#[derive(Clone, Debug, Default)]
#[cfg_attr(not(test), allow(dead_code))] // read by the layout tests
struct SpectrumLayout {
    plot: Option<Rect>,
    window_mhz: Range<f64>,
    px_per_khz: f64,
    /// Left and right edges of the receive channel in pixels.
    rx_band_px: (i32, i32),
    target_px: i32,
    /// Stem tops of the products, best ranked first.
    stem_tops: Vec<(i32, i32)>,
    /// Labels in the chart.
    labels: Vec<PlacedLabel>,
    /// Labels in the emitter strip.
    strip_labels: Vec<PlacedLabel>,
    strip: Option<Rect>,
    /// The height of the picture used, pixels.
    used_px: u32,
}

fn draw_spectrum(
    input: &SpectrumInput,
    look: &Look,
    svg: &mut String,
) -> DrawResult<SpectrumLayout> {
    let root = SVGBackend::with_string(svg, canvas_px(look)).into_drawing_area();
    let layout = draw_spectrum_on(&root, input, look)?;
    root.present()?;
    Ok(layout)
}

/// Decimals that tell ticks apart over a window of `span_mhz`.
fn mhz_decimals(span_mhz: f64) -> usize {
    match span_mhz {
        s if s < 0.05 => 4,
        s if s < 0.5 => 3,
        s if s < 5.0 => 2,
        _ => 1,
    }
}

/// The label of a product: its order, and its formula for the top few.
fn product_label(p: &ProductMark, index: usize, with_formula: usize) -> String {
    if index < with_formula && !p.formula.trim().is_empty() {
        format!("{}: {}", p.order, p.formula.trim())
    } else {
        p.order.to_string()
    }
}

fn header_lines(input: &SpectrumInput, clean: &Clean) -> (String, String) {
    let title = if input.title.trim().is_empty() {
        "Products in the receive channel".to_string()
    } else {
        input.title.clone()
    };
    let heard = if clean.target_known {
        format!(
            "Heard {:.4} MHz in a {} kHz receive channel",
            clean.target_mhz,
            khz_text(clean.rx_bw_khz)
        )
    } else {
        "Heard frequency not given".to_string()
    };
    let count = match clean.products.len() {
        0 => "no product lands in the channel".to_string(),
        1 => "1 product lands in the channel".to_string(),
        n => format!("{n} products land in the channel"),
    };
    (title, format!("{heard} · {count}"))
}

/// A width in kHz without trailing zeros.
fn khz_text(khz: f64) -> String {
    let t = format!("{khz:.3}");
    t.trim_end_matches('0').trim_end_matches('.').to_string()
}

fn draw_spectrum_on(root: &Area, input: &SpectrumInput, look: &Look) -> DrawResult<SpectrumLayout> {
    root.fill(&PAPER)?;
    let clean = Clean::new(input);
    let (title, subtitle) = header_lines(input, &clean);
    let (header, rest) = root.split_vertically(look.header_px(&title, &subtitle));
    let (body, side) = look.split_body(&rest, PHONE_PLOT_PX);
    let strip_emitters: Vec<&EmitterMark> = clean
        .emitters
        .iter()
        .copied()
        .filter(|e| e.freq_mhz > 0.0)
        .collect();
    let (chart_area, strip_area) = if strip_emitters.is_empty() || look.stacked() {
        (body.clone(), None)
    } else {
        let (c, s) = body.split_vertically(SPECTRUM_HEIGHT_PX - HEADER_PX - STRIP_PX);
        (c, Some(s))
    };
    let (labelled, with_formula) = labelled_products(look);

    draw_header(&header, look, title, subtitle)?;

    let window = clean.window_mhz();
    let height = Height::of(&clean.products, input.calibrated_first_dbm);
    let mut chart = ChartBuilder::on(&chart_area)
        .margin(look.margin_px)
        .margin_right(look.margin_right_px())
        .x_label_area_size(look.x_label_area_px)
        .y_label_area_size(look.y_label_area_px)
        .build_cartesian_2d(window.clone(), height.range())?;
    let decimals = mhz_decimals(window.end - window.start);
    let x_tick = move |v: &f64| format!("{v:.decimals$}");
    let y_tick = move |v: &f64| match height {
        Height::Level { floor_db, .. } if *v < floor_db - 1e-9 => String::new(),
        Height::Level {
            calibrated: false, ..
        } => pim_io::precision::signed(*v, 0),
        Height::Level { .. } => pim_io::precision::fixed(*v, 0),
        Height::Rank { ranks } => {
            let r = ranks as f64 + 1.0 - v;
            if (r - r.round()).abs() < 1e-6 && r >= 1.0 && r <= ranks as f64 {
                format!("{r:.0}")
            } else {
                String::new()
            }
        }
    };
    // The axis title for a screen, and for a phone, whose axis is short (the legend's
    // notes say the rest).
    let y_desc = match height {
        Height::Level {
            calibrated: true, ..
        } => [
            "level in the channel at the receiver, dBm (calibrated)",
            "level, dBm",
        ],
        Height::Level { .. } => ["level in the channel, dB relative to #1", "dB re #1"],
        Height::Rank { .. } => ["rank (1 = most plausible)", "rank"],
    }[usize::from(look.stacked())];
    chart
        .configure_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .max_light_lines(0)
        .axis_style(MUTED.stroke_width(1))
        .label_style(axis_font(look.tick_px, MUTED))
        .axis_desc_style(axis_font(look.label_px, MUTED))
        .x_desc("frequency, MHz")
        .y_desc(y_desc)
        .x_labels(if look.stacked() { 3 } else { 7 })
        .y_labels(if look.stacked() { 5 } else { 7 })
        .x_label_formatter(&x_tick)
        .y_label_formatter(&y_tick)
        .draw()?;

    let plot = framed_plot(root, chart.plotting_area().get_pixel_range())?;
    let y_floor = height.range().start;
    let y_base = height.base();
    let to_px = |f_mhz: f64, y: f64| -> (f64, f64) {
        let (x, y) = chart.backend_coord(&(f_mhz, y));
        (x as f64, y as f64)
    };
    let x_of = |f_mhz: f64| to_px(f_mhz.clamp(window.start, window.end), y_floor).0;
    let px_per_khz = (x_of(window.end) - x_of(window.start)) / ((window.end - window.start) * 1e3);

    // The band under the floor for products without a level.
    if let Height::Level {
        floor_db, band_db, ..
    } = height
    {
        if band_db > 0.0 {
            let top = to_px(window.start, floor_db).1;
            root.draw(&Rectangle::new(
                [px((plot.x0 + 1.0, top)), px((plot.x1 - 1.0, plot.y1 - 1.0))],
                GRID.mix(0.7).filled(),
            ))?;
            root.draw(&PathElement::new(
                vec![px((plot.x0, top)), px((plot.x1, top))],
                MUTED.stroke_width(1),
            ))?;
            let weak = clean.products.iter().any(|p| height.below(p));
            let none = clean
                .products
                .iter()
                .any(|p| p.level_db.is_none_or(|l| !l.is_finite()));
            let text = match (weak, none) {
                (true, true) => "weaker / no level",
                (true, false) => "weaker",
                _ => "no level",
            };
            // Beside the axis, or inside the band where the axis has no room.
            let (at, anchor) = if look.stacked() {
                ((plot.x0 + 4.0, (top + plot.y1) / 2.0), HPos::Left)
            } else {
                ((plot.x0 - 8.0, (top + plot.y1) / 2.0), HPos::Right)
            };
            root.draw(&Text::new(
                text,
                px(at),
                text_style(look.tick_px, MUTED).pos(Pos::new(anchor, VPos::Center)),
            ))?;
        }
    }

    // The receive channel, at least two pixels wide.
    let half_bw_mhz = clean.rx_bw_khz / 2000.0;
    let (mut bx0, mut bx1) = (
        x_of(clean.target_mhz - half_bw_mhz),
        x_of(clean.target_mhz + half_bw_mhz),
    );
    if bx1 - bx0 < 2.0 {
        let c = (bx0 + bx1) / 2.0;
        (bx0, bx1) = (c - 1.0, c + 1.0);
    }
    if clean.target_known {
        root.draw(&Rectangle::new(
            [px((bx0, plot.y0)), px((bx1, plot.y1))],
            OCHRE.mix(0.30).filled(),
        ))?;
        for x in [bx0, bx1] {
            root.draw(&PathElement::new(
                vec![px((x, plot.y0)), px((x, plot.y1))],
                OCHRE_DARK.mix(0.7).stroke_width(1),
            ))?;
        }
    }

    // Emitters inside the window (co-channel carriers), as thin dashed lines.
    let in_window: Vec<&EmitterMark> = clean
        .emitters
        .iter()
        .copied()
        .filter(|e| window.contains(&e.freq_mhz))
        .collect();
    for e in &in_window {
        let x = x_of(e.freq_mhz);
        root.draw(&DashedPathElement::new(
            vec![px((x, plot.y0 + 10.0)), px((x, plot.y1))],
            3,
            3,
            MOSS.stroke_width(1),
        ))?;
        draw_emitter_mark(root, (x, plot.y0 + 6.0))?;
    }

    // The heard frequency.
    let tx = x_of(clean.target_mhz);
    if clean.target_known {
        root.draw(&DashedPathElement::new(
            vec![px((tx, plot.y0)), px((tx, plot.y1))],
            6,
            4,
            INK.stroke_width(2),
        ))?;
    }

    // Products, worst first so the best lie on top.
    let mut stem_tops: Vec<(f64, f64)> = Vec::with_capacity(clean.products.len());
    for p in &clean.products {
        stem_tops.push((x_of(p.freq_mhz), to_px(p.freq_mhz, height.mark(p)).1));
    }
    for (i, p) in clean.products.iter().enumerate().rev() {
        let top = stem_tops[i];
        let colour = if i < PRODUCTS_WITH_FORMULA {
            RUST
        } else {
            SLATE
        };
        let levelled = height.value(p).is_some();
        let bw_mhz = if p.bandwidth_khz.is_finite() {
            p.bandwidth_khz.abs() / 1000.0
        } else {
            0.0
        };
        let (wx0, wx1) = (
            x_of(p.freq_mhz - bw_mhz / 2.0),
            x_of(p.freq_mhz + bw_mhz / 2.0),
        );
        let bar_y = top.1;
        if wx1 - wx0 >= 1.0 {
            root.draw(&Rectangle::new(
                [px((wx0, bar_y - 1.5)), px((wx1, bar_y + 1.5))],
                colour.mix(0.35).filled(),
            ))?;
        }
        if levelled {
            root.draw(&PathElement::new(
                vec![px((top.0, to_px(p.freq_mhz, y_base).1)), px(top)],
                colour.stroke_width(if i < PRODUCTS_WITH_FORMULA { 2 } else { 1 }),
            ))?;
            let r = if i < PRODUCTS_WITH_FORMULA { 5 } else { 4 };
            root.draw(&Circle::new(px(top), r, colour.filled()))?;
            root.draw(&Circle::new(px(top), r, PAPER.stroke_width(1)))?;
        } else {
            draw_unlevelled_mark(root, top)?;
        }
    }

    // Labels: the heard frequency first, then emitters in the window, then products
    // by rank.
    let bounds = plot.inset(2.0);
    let mut placer = LabelPlacer::new(bounds);
    for t in &stem_tops {
        placer.block(Rect::around(*t, 6.0));
    }
    let mut labels = Vec::new();
    if clean.target_known {
        // the frequency is in the header; a phone's plot has no room to repeat it
        let text = if look.stacked() {
            "heard".to_string()
        } else {
            format!("heard {:.4} MHz", clean.target_mhz)
        };
        // bold, about a twelfth wider than the estimate
        let size = label_size_px(&text, look.label_px * 1.08);
        let y = plot.y0 + 4.0;
        let placed = placer.place_first_clear(&[
            Rect::at(bx1 + 4.0, y, size),
            Rect::at(bx0 - 4.0 - size.0, y, size),
            Rect::at(bx1 + 4.0, y + size.1 + 2.0, size),
            Rect::at(bx0 - 4.0 - size.0, y + size.1 + 2.0, size),
        ]);
        draw_label(root, &placed.rect, &text, &bold_style(look.label_px, INK))?;
        labels.push(PlacedLabel {
            text,
            rect: placed.rect,
            clear: placed.clear,
        });
    }
    let mut jobs: Vec<LabelJob> = in_window
        .iter()
        .map(|e| LabelJob {
            at: (x_of(e.freq_mhz), plot.y0 + 6.0),
            text: e.id.clone(),
            colour: MOSS,
            gap: 8.0,
        })
        .collect();
    for (i, p) in clean.products.iter().enumerate().take(labelled) {
        jobs.push(LabelJob {
            at: stem_tops[i],
            text: product_label(p, i, with_formula),
            colour: if i < PRODUCTS_WITH_FORMULA { RUST } else { INK },
            gap: 7.0,
        });
    }
    labels.extend(draw_labels(root, &mut placer, &jobs, look.label_px)?);

    // The emitters off to the side, on a log scale.
    let mut strip = None;
    let mut strip_labels = Vec::new();
    if let Some(area) = strip_area {
        let (_, sy) = area.get_base_pixel();
        let (_, sh) = area.dim_in_pixel();
        let r = Rect {
            x0: plot.x0,
            y0: sy as f64 + 8.0,
            x1: plot.x1,
            y1: (sy + sh as i32) as f64 - 8.0,
        };
        strip_labels = draw_strip(root, &r, &clean, &strip_emitters)?;
        strip = Some(r);
    }

    let (sx, sy) = side.get_base_pixel();
    let margin = look.margin_px as f64;
    let legend_bottom = draw_legend(
        root,
        (sx as f64 + margin, sy as f64 + margin),
        &clean,
        height,
        !in_window.is_empty(),
        look,
    )?;
    let used_px = if look.stacked() {
        (legend_bottom + margin).ceil() as u32
    } else {
        SPECTRUM_HEIGHT_PX
    };

    Ok(SpectrumLayout {
        plot: Some(plot),
        window_mhz: window,
        px_per_khz,
        rx_band_px: (bx0.round() as i32, bx1.round() as i32),
        target_px: tx.round() as i32,
        stem_tops: stem_tops.into_iter().map(px).collect(),
        labels,
        strip_labels,
        strip,
        used_px,
    })
}

/// A small downward triangle for an emitter.
fn draw_emitter_mark(area: &Area, p: (f64, f64)) -> DrawResult<()> {
    area.draw(&Polygon::new(
        vec![
            px((p.0 - 5.0, p.1 - 5.0)),
            px((p.0 + 5.0, p.1 - 5.0)),
            px((p.0, p.1 + 4.0)),
        ],
        MOSS.filled(),
    ))
}

/// A hollow diamond on the floor for a product with no predicted level.
fn draw_unlevelled_mark(area: &Area, p: (f64, f64)) -> DrawResult<()> {
    crate::picture::draw_diamond(area, p, 5.0, STONE.stroke_width(2))
}

/// A frequency in MHz for the strip: three decimals.
fn strip_freq_text(f_mhz: f64) -> String {
    format!("{f_mhz:.3}")
}

/// Left edges for boxes of `widths` wanted centred on `centres` (in increasing order)
/// along a line from `lo` to `hi`, `gap` apart, in the same order: boxes that would
/// overlap are pushed apart as a group centred where they wanted to be. `None` when
/// they do not fit side by side.
fn spread_row(centres: &[f64], widths: &[f64], gap: f64, lo: f64, hi: f64) -> Option<Vec<f64>> {
    let total: f64 = widths.iter().sum::<f64>() + gap * widths.len().saturating_sub(1) as f64;
    if total > hi - lo {
        return None;
    }
    // A group: its first box, its width, and the sum of where each member would put
    // the group's left edge.
    struct Group {
        first: usize,
        count: usize,
        width: f64,
        wish_sum: f64,
        left: f64,
    }
    let place = |g: &mut Group| {
        g.left = (g.wish_sum / g.count as f64).clamp(lo, hi - g.width);
    };
    let mut groups: Vec<Group> = Vec::new();
    for (i, (&c, &w)) in centres.iter().zip(widths).enumerate() {
        let mut g = Group {
            first: i,
            count: 1,
            width: w,
            wish_sum: c - w / 2.0,
            left: 0.0,
        };
        place(&mut g);
        while let Some(prev) = groups.last() {
            if prev.left + prev.width + gap <= g.left {
                break;
            }
            let Some(prev) = groups.pop() else { break };
            // Each member of `g` wishes the merged group's left edge to lie its own
            // offset further left.
            let shift = prev.width + gap;
            g = Group {
                first: prev.first,
                count: prev.count + g.count,
                width: prev.width + gap + g.width,
                wish_sum: prev.wish_sum + g.wish_sum - shift * g.count as f64,
                left: 0.0,
            };
            place(&mut g);
        }
        groups.push(g);
    }
    let mut lefts = vec![0.0; centres.len()];
    for g in &groups {
        let mut x = g.left;
        for (i, w) in widths.iter().enumerate().skip(g.first).take(g.count) {
            lefts[i] = x;
            x += w + gap;
        }
    }
    Some(lefts)
}

/// A label of two lines in the strip: a name over a frequency.
struct StripLabel {
    freq_mhz: f64,
    name: String,
    freq_text: String,
    heard: bool,
}

impl StripLabel {
    fn size(&self) -> (f64, f64) {
        let w = text_width_px(&self.name, LABEL_PX).max(text_width_px(&self.freq_text, TICK_PX));
        (
            w + 2.0 * LABEL_PAD_PX,
            text_height_px(LABEL_PX) + text_height_px(TICK_PX) + 2.0 * LABEL_PAD_PX + 1.0,
        )
    }
}

/// The strip: a logarithmic frequency axis by decades with the heard frequency and the
/// emitters on it; their labels fan out above in frequency order, each joined to its
/// mark by a leader, so that close frequencies stay apart without crossing leaders.
fn draw_strip(
    root: &Area,
    r: &Rect,
    clean: &Clean,
    emitters: &[&EmitterMark],
) -> DrawResult<Vec<PlacedLabel>> {
    root.draw(&Text::new(
        "Emitters in these products, on a logarithmic frequency scale",
        px((r.x0, r.y0)),
        bold_style(SUBTITLE_PX, INK),
    ))?;
    let mut labels: Vec<StripLabel> = emitters
        .iter()
        .map(|e| StripLabel {
            freq_mhz: e.freq_mhz,
            name: e.id.clone(),
            freq_text: strip_freq_text(e.freq_mhz),
            heard: false,
        })
        .collect();
    if clean.target_known && clean.target_mhz > 0.0 {
        labels.push(StripLabel {
            freq_mhz: clean.target_mhz,
            name: "heard".into(),
            freq_text: strip_freq_text(clean.target_mhz),
            heard: true,
        });
    }
    labels.sort_by(|a, b| a.freq_mhz.total_cmp(&b.freq_mhz));
    let lo_f = labels.first().map(|l| l.freq_mhz).unwrap_or(1.0);
    let hi_f = labels.last().map(|l| l.freq_mhz).unwrap_or(1.0);
    let lo = lo_f.log10().floor();
    let hi = hi_f.log10().ceil().max(lo + 1.0);
    let axis_y = r.y1 - 22.0;
    let x_of = |f: f64| r.x0 + (f.log10() - lo) / (hi - lo) * (r.x1 - r.x0);

    // The axis, decades labelled, with minor ticks at 2 and 5.
    root.draw(&PathElement::new(
        vec![px((r.x0, axis_y)), px((r.x1, axis_y))],
        MUTED.stroke_width(1),
    ))?;
    let decades = (hi - lo) as i32;
    for d in 0..=decades {
        let e = lo + d as f64;
        let f = 10f64.powf(e);
        let x = x_of(f);
        root.draw(&PathElement::new(
            vec![px((x, axis_y)), px((x, axis_y + 5.0))],
            MUTED.stroke_width(1),
        ))?;
        let text = if e < 0.0 {
            format!("{f:.prec$}", prec = (-e) as usize)
        } else {
            format!("{f:.0}")
        };
        root.draw(&Text::new(
            text,
            px((x, axis_y + 7.0)),
            text_style(TICK_PX, MUTED).pos(Pos::new(HPos::Center, VPos::Top)),
        ))?;
        if d < decades {
            for m in [2.0, 5.0] {
                let xm = x_of(f * m);
                root.draw(&PathElement::new(
                    vec![px((xm, axis_y)), px((xm, axis_y + 3.0))],
                    MUTED.stroke_width(1),
                ))?;
            }
        }
    }
    root.draw(&Text::new(
        "MHz",
        px((r.x1 + 8.0, axis_y)),
        text_style(TICK_PX, MUTED).pos(Pos::new(HPos::Left, VPos::Center)),
    ))?;
    for l in &labels {
        let x = x_of(l.freq_mhz);
        if l.heard {
            root.draw(&PathElement::new(
                vec![px((x, axis_y - 7.0)), px((x, axis_y + 7.0))],
                INK.stroke_width(2),
            ))?;
        } else {
            draw_emitter_mark(root, (x, axis_y - 4.0))?;
        }
    }

    // One row of labels when they fit side by side, else two, alternating.
    let sizes: Vec<(f64, f64)> = labels.iter().map(StripLabel::size).collect();
    let height = sizes.first().map(|s| s.1).unwrap_or(0.0);
    let (lo_x, hi_x) = (r.x0 - 30.0, r.x1 + 30.0);
    let centres: Vec<f64> = labels.iter().map(|l| x_of(l.freq_mhz)).collect();
    let widths: Vec<f64> = sizes.iter().map(|s| s.0).collect();
    let row0_bottom = axis_y - 44.0;
    let mut boxes: Vec<Rect> = Vec::with_capacity(labels.len());
    match spread_row(&centres, &widths, 6.0, lo_x, hi_x) {
        Some(lefts) => {
            for (i, left) in lefts.iter().enumerate() {
                boxes.push(Rect::at(*left, row0_bottom - height, sizes[i]));
            }
        }
        None => {
            let mut rows: [Vec<usize>; 2] = [Vec::new(), Vec::new()];
            for i in 0..labels.len() {
                rows[i % 2].push(i);
            }
            boxes = vec![Rect::at(0.0, 0.0, (0.0, 0.0)); labels.len()];
            for (row, members) in rows.iter().enumerate() {
                let c: Vec<f64> = members.iter().map(|&i| centres[i]).collect();
                let w: Vec<f64> = members.iter().map(|&i| widths[i]).collect();
                // Too many for two rows: spread from the left, overlapping at the end.
                let lefts = spread_row(&c, &w, 6.0, lo_x, hi_x).unwrap_or_else(|| {
                    let mut x = lo_x;
                    w.iter()
                        .map(|wi| {
                            let l = x;
                            x += wi + 6.0;
                            l
                        })
                        .collect()
                });
                let bottom = row0_bottom - row as f64 * (height + 6.0);
                for (k, &i) in members.iter().enumerate() {
                    boxes[i] = Rect::at(lefts[k], bottom - height, sizes[i]);
                }
            }
        }
    }

    // Leaders first, so the labels' backing covers any that pass behind them.
    for (l, b) in labels.iter().zip(&boxes) {
        let x = x_of(l.freq_mhz);
        let end = ((b.x0 + b.x1) / 2.0, b.y1);
        let bend = (x, axis_y - 18.0);
        root.draw(&PathElement::new(
            vec![px((x, axis_y - 9.0)), px(bend), px(end)],
            MUTED.mix(0.8).stroke_width(1),
        ))?;
    }
    let mut placed = Vec::with_capacity(labels.len());
    for (l, b) in labels.iter().zip(&boxes) {
        root.draw(&Rectangle::new(
            [px((b.x0, b.y0)), px((b.x1, b.y1))],
            PAPER.mix(0.9).filled(),
        ))?;
        let name_style = if l.heard {
            bold_style(LABEL_PX, INK)
        } else {
            text_style(LABEL_PX, INK)
        }
        .pos(Pos::new(HPos::Center, VPos::Top));
        let cx = (b.x0 + b.x1) / 2.0;
        root.draw(&Text::new(
            l.name.clone(),
            px((cx, b.y0 + LABEL_PAD_PX)),
            name_style,
        ))?;
        root.draw(&Text::new(
            l.freq_text.clone(),
            px((cx, b.y0 + LABEL_PAD_PX + text_height_px(LABEL_PX) + 1.0)),
            text_style(TICK_PX, MUTED).pos(Pos::new(HPos::Center, VPos::Top)),
        ))?;
        let clear = placed.iter().all(|p: &PlacedLabel| !p.rect.overlaps(b));
        placed.push(PlacedLabel {
            text: format!("{} {}", l.name, l.freq_text),
            rect: *b,
            clear,
        });
    }
    Ok(placed)
}

/// The legend, one symbol and its meaning a row, then notes on reading the chart.
fn draw_legend(
    area: &Area,
    top_left: (f64, f64),
    clean: &Clean,
    height: Height,
    emitters_in_window: bool,
    look: &Look,
) -> DrawResult<f64> {
    #[derive(Clone, Copy)]
    enum Sym {
        Channel,
        Heard,
        Top,
        Other,
        Width,
        NoLevel,
        Emitter,
    }
    let mut entries: Vec<(Sym, String)> = Vec::new();
    if clean.target_known {
        entries.push((
            Sym::Channel,
            format!("receive channel, {} kHz", khz_text(clean.rx_bw_khz)),
        ));
        entries.push((Sym::Heard, "heard frequency".into()));
    }
    let n = clean.products.len();
    let (labelled, with_formula) = labelled_products(look);
    if n > 0 {
        entries.push((
            Sym::Top,
            if n <= PRODUCTS_WITH_FORMULA {
                "product".to_string()
            } else {
                format!("product, top {PRODUCTS_WITH_FORMULA} by rank")
            },
        ));
    }
    if n > PRODUCTS_WITH_FORMULA {
        entries.push((Sym::Other, "other product".into()));
    }
    if n > 0 {
        entries.push((Sym::Width, "bandwidth the product occupies".into()));
    }
    let weak = clean.products.iter().filter(|p| height.below(p)).count();
    let unlevelled = clean
        .products
        .iter()
        .filter(|p| height.value(p).is_none())
        .count()
        - weak;
    if unlevelled > 0 {
        entries.push((Sym::NoLevel, "no level: ERP or location missing".into()));
    }
    if weak > 0 {
        entries.push((
            Sym::NoLevel,
            format!("more than {LEVEL_DEPTH_DB:.0} dB below the strongest"),
        ));
    }
    if emitters_in_window || !clean.emitters.is_empty() {
        entries.push((Sym::Emitter, "emitter".into()));
    }
    let (x, mut y) = (top_left.0, top_left.1 + 8.0);
    for (sym, text) in entries {
        match sym {
            Sym::Channel => {
                area.draw(&Rectangle::new(
                    [px((x + 4.0, y - 8.0)), px((x + 18.0, y + 8.0))],
                    OCHRE.mix(0.30).filled(),
                ))?;
                for bx in [x + 4.0, x + 18.0] {
                    area.draw(&PathElement::new(
                        vec![px((bx, y - 8.0)), px((bx, y + 8.0))],
                        OCHRE_DARK.mix(0.7).stroke_width(1),
                    ))?;
                }
            }
            Sym::Heard => area.draw(&DashedPathElement::new(
                vec![px((x + 11.0, y - 9.0)), px((x + 11.0, y + 9.0))],
                6,
                4,
                INK.stroke_width(2),
            ))?,
            Sym::Top | Sym::Other => {
                let (c, r, w) = if matches!(sym, Sym::Top) {
                    (RUST, 5, 2)
                } else {
                    (SLATE, 4, 1)
                };
                area.draw(&PathElement::new(
                    vec![px((x + 11.0, y + 9.0)), px((x + 11.0, y - 3.0))],
                    c.stroke_width(w),
                ))?;
                area.draw(&Circle::new(px((x + 11.0, y - 3.0)), r, c.filled()))?;
            }
            Sym::Width => area.draw(&Rectangle::new(
                [px((x, y - 1.5)), px((x + 22.0, y + 1.5))],
                SLATE.mix(0.35).filled(),
            ))?,
            Sym::NoLevel => draw_unlevelled_mark(area, (x + 11.0, y))?,
            Sym::Emitter => draw_emitter_mark(area, (x + 11.0, y))?,
        }
        area.draw(&Text::new(
            text,
            px((x + 32.0, y)),
            text_style(look.label_px, INK).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        y += look.row_px;
    }

    let mut notes = Vec::new();
    if n > 0 {
        notes.push(match height {
            Height::Level {
                calibrated: true, ..
            } => "Stem height: the product's level in the receive channel at the receiver, the model scaled so that the first candidate matches the level heard.".to_string(),
            Height::Level { .. } => "Stem height: the product's level in the receive channel at the receiver, relative to the first candidate (the model's absolute level is not known without a heard level).".to_string(),
            Height::Rank { .. } => {
                "Stem height: rank, the most plausible highest (no levels known).".to_string()
            }
        });
        notes.push(if with_formula == 1 {
            "Labels: order of the product; formula for the first.".to_string()
        } else {
            format!("Labels: order of the product; formula for the top {with_formula}.")
        });
    }
    if n > labelled {
        notes.push(format!(
            "{} more products are drawn without labels.",
            n - labelled
        ));
    }
    y += 8.0;
    let width = look.legend_width_px();
    let line_px = (look.label_px * 1.45).round();
    for note in notes {
        for line in wrap(&note, width, look.label_px) {
            area.draw(&Text::new(
                line,
                px((x, y)),
                text_style(look.label_px, MUTED).pos(Pos::new(HPos::Left, VPos::Center)),
            ))?;
            y += line_px;
        }
        y += 6.0;
    }
    Ok(y)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn product(
        freq_mhz: f64,
        bandwidth_khz: f64,
        order: u32,
        level_db: Option<f64>,
        rank: usize,
        formula: &str,
    ) -> ProductMark {
        ProductMark {
            freq_mhz,
            bandwidth_khz,
            order,
            level_db,
            rank,
            formula: formula.to_string(),
        }
    }

    /// Invented products on a 2 m repeater input; each formula adds up to its frequency.
    pub(crate) fn sample() -> SpectrumInput {
        let e = |id: &str, f: f64| EmitterMark {
            id: id.to_string(),
            freq_mhz: f,
        };
        SpectrumInput {
            title: "Marrow Hill repeater input".into(),
            target_mhz: 146.34,
            rx_bw_khz: 12.5,
            calibrated_first_dbm: None,
            products: vec![
                product(146.34, 43.25, 3, Some(0.0), 1, "2·SKP-152 − FIRE-DSP"),
                product(146.34, 70.5, 5, Some(-7.5), 2, "3·TAXI-153 − 2·EMS-157"),
                product(146.31, 626.0, 5, Some(-12.0), 3, "3·QFMR − TOW-149 − QAMV"),
                product(146.29, 43.25, 3, Some(-15.0), 4, "UTIL-UHF − 2·TAXI-153"),
                product(
                    146.36,
                    112.0,
                    7,
                    Some(-24.0),
                    5,
                    "2·TOW-149 + 2·TAXI-153 − 3·SKP-152",
                ),
            ],
            emitters: vec![
                e("SKP-152", 152.84),
                e("FIRE-DSP", 159.34),
                e("QFMR", 98.7),
                e("QAMV", 0.83),
                e("UTIL-UHF", 453.25),
                e("TOW-149", 148.96),
                e("TAXI-153", 153.48),
                e("EMS-157", 157.05),
            ],
        }
    }

    #[test]
    fn sample_formulas_add_up() {
        // The invented sample must not show arithmetic a reader could fault.
        let f = |id: &str| {
            sample()
                .emitters
                .iter()
                .find(|e| e.id == id)
                .expect("emitter")
                .freq_mhz
        };
        let sums = [
            2.0 * f("SKP-152") - f("FIRE-DSP"),
            3.0 * f("TAXI-153") - 2.0 * f("EMS-157"),
            3.0 * f("QFMR") - f("TOW-149") - f("QAMV"),
            (f("UTIL-UHF") - 2.0 * f("TAXI-153")).abs(),
            2.0 * f("TOW-149") + 2.0 * f("TAXI-153") - 3.0 * f("SKP-152"),
        ];
        for (p, s) in sample().products.iter().zip(sums) {
            assert!((p.freq_mhz - s).abs() < 1e-6, "{} ≠ {s}", p.formula);
        }
    }

    fn render(input: &SpectrumInput) -> (String, SpectrumLayout) {
        let mut svg = String::new();
        let layout = draw_spectrum(input, &WIDE, &mut svg).expect("drawn");
        (svg, layout)
    }

    fn disjoint(labels: &[PlacedLabel]) {
        for (i, a) in labels.iter().enumerate() {
            for b in &labels[i + 1..] {
                assert!(!a.rect.overlaps(&b.rect), "{} overlaps {}", a.text, b.text);
            }
        }
    }

    #[test]
    fn the_spectrum_parses_and_names_everything() {
        let input = sample();
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert_eq!(
            crate::picture::scalable_root(
                svg.clone(),
                (SPECTRUM_WIDTH_PX, SPECTRUM_HEIGHT_PX),
                SPECTRUM_HEIGHT_PX
            ),
            spectrum_svg(&input)
        );
        assert!(svg.contains("heard 146.3400 MHz"));
        assert!(svg.contains("receive channel, 12.5 kHz"));
        // The top three with formulas, the others by order alone.
        assert!(svg.contains("3: 2·SKP-152 − FIRE-DSP"));
        assert!(svg.contains("5: 3·QFMR − TOW-149 − QAMV"));
        assert!(!svg.contains("UTIL-UHF − 2·TAXI-153"));
        let texts: Vec<&str> = layout.labels.iter().map(|l| l.text.as_str()).collect();
        assert!(texts.contains(&"3") && texts.contains(&"7"));
        for e in &input.emitters {
            let text = format!("{} {:.3}", e.id, e.freq_mhz);
            assert!(layout.strip_labels.iter().any(|l| l.text == text), "{text}");
            assert!(svg.contains(&format!(">\n{}\n</text>", e.id)), "{}", e.id);
        }
    }

    #[test]
    fn labels_do_not_overlap() {
        let (_, layout) = render(&sample());
        assert!(layout.labels.iter().all(|l| l.clear));
        assert!(layout.strip_labels.iter().all(|l| l.clear));
        disjoint(&layout.labels);
        disjoint(&layout.strip_labels);
        let plot = layout.plot.expect("plot");
        assert!(layout.labels.iter().all(|l| plot.contains(&l.rect)));
    }

    #[test]
    fn the_channel_band_has_its_width_at_the_axis_scale() {
        let (_, layout) = render(&sample());
        let (x0, x1) = layout.rx_band_px;
        let expected = 12.5 * layout.px_per_khz;
        assert!(((x1 - x0) as f64 - expected).abs() <= 1.0);
        assert!((layout.target_px as f64 - (x0 + x1) as f64 / 2.0).abs() <= 1.0);
        let w = &layout.window_mhz;
        assert!(w.start < 146.34 - 0.313 && w.end > 146.34 + 0.313);
    }

    #[test]
    fn stems_stand_at_their_frequency_and_level() {
        let input = sample();
        let (_, layout) = render(&input);
        let tops = &layout.stem_tops;
        // Higher level, higher stem (smaller y); same frequency, same x.
        for w in tops.windows(2) {
            assert!(w[0].1 < w[1].1);
        }
        assert_eq!(tops[0].0, tops[1].0);
        assert_eq!(tops[0].0, layout.target_px);
        // 30 kHz below the heard frequency.
        let dx = (layout.target_px - tops[2].0) as f64;
        assert!((dx - 30.0 * layout.px_per_khz).abs() <= 1.0);
    }

    #[test]
    fn without_levels_the_stems_show_rank() {
        let mut input = sample();
        for p in &mut input.products {
            p.level_db = None;
        }
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert!(svg.contains("rank (1 = most plausible)"));
        for w in layout.stem_tops.windows(2) {
            assert!(w[0].1 < w[1].1);
        }
    }

    #[test]
    fn many_products_on_one_frequency_stay_legible() {
        let mut input = sample();
        input.products = (0..40)
            .map(|i| {
                product(
                    146.34,
                    40.0 + 15.0 * i as f64,
                    3 + 2 * (i % 3) as u32,
                    Some(-0.5 * i as f64),
                    i + 1,
                    "2·SKP-152 − FIRE-DSP",
                )
            })
            .collect();
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        let product_labels = layout
            .labels
            .iter()
            .filter(|l| !l.text.starts_with("heard"))
            .count();
        assert_eq!(product_labels, LABELLED_PRODUCTS);
        for l in &layout.labels {
            assert!(l.clear, "{l:?} among {:?}", layout.labels);
        }
        disjoint(&layout.labels);
        assert!(svg.contains("30 more products"));
    }

    #[test]
    fn odd_inputs_draw_without_panicking() {
        pim_tests::assert_xml_well_formed(&spectrum_svg(&SpectrumInput::default()), "svg");

        let mut odd = sample();
        odd.rx_bw_khz = 0.0;
        odd.products[0].level_db = Some(f64::NAN);
        odd.products[1].freq_mhz = f64::INFINITY;
        odd.products[2].bandwidth_khz = f64::NAN;
        odd.products[3].rank = 0;
        odd.emitters[0].freq_mhz = -3.0;
        odd.emitters[1].freq_mhz = f64::NAN;
        let (svg, _) = render(&odd);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert!(svg.contains("no level: ERP or location missing"));

        let mut no_target = sample();
        no_target.target_mhz = f64::NAN;
        no_target.emitters.clear();
        let (svg, layout) = render(&no_target);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert!(svg.contains("Heard frequency not given"));
        assert!(layout.strip.is_none());

        let mut same = sample();
        for p in &mut same.products {
            p.level_db = Some(-3.0);
            p.bandwidth_khz = 0.0;
        }
        same.emitters = vec![EmitterMark {
            id: "QK7MHR-R".into(),
            freq_mhz: 146.34,
        }];
        pim_tests::assert_xml_well_formed(&spectrum_svg(&same), "svg");
    }

    /// The axis never reaches below physical reason: a product hundreds of dB down joins
    /// the band under the floor instead of stretching the axis.
    #[test]
    fn the_level_axis_stays_within_reason() {
        let mut input = sample();
        input.products[4].level_db = Some(-380.0);
        input.calibrated_first_dbm = Some(-96.0);
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert!(svg.contains("dBm (calibrated)"));
        assert!(svg.contains("more than 60 dB below the strongest"));
        assert_eq!(layout.stem_tops.len(), 5);
        assert!(!svg.contains(">\n-4"), "no label near −400 dBm");
        let relative = sample();
        let (svg, _) = render(&relative);
        assert!(svg.contains("dB relative to #1"));
    }

    #[test]
    fn a_row_of_labels_spreads_in_order_without_overlap() {
        // Five labels wanting nearly the same place, one far off.
        let centres = [300.0, 302.0, 303.0, 305.0, 306.0, 600.0];
        let widths = [60.0, 50.0, 70.0, 40.0, 60.0, 80.0];
        let lefts = spread_row(&centres, &widths, 6.0, 0.0, 700.0).expect("fits");
        for i in 1..lefts.len() {
            assert!(lefts[i - 1] + widths[i - 1] + 6.0 <= lefts[i] + 1e-9);
        }
        // The crowd stays centred on where it wanted to be; the lone one is untouched.
        let crowd = (lefts[0] + lefts[4] + widths[4]) / 2.0;
        assert!((crowd - 303.0).abs() < 20.0, "centre {crowd}");
        assert!((lefts[5] - 560.0).abs() < 1e-9);
        // At the edge, pushed inside.
        let lefts = spread_row(&[5.0, 8.0], &[60.0, 60.0], 6.0, 0.0, 700.0).expect("fits");
        assert!(lefts[0] >= 0.0 && lefts[0] + 66.0 <= lefts[1]);
        // Too wide for the line.
        assert!(spread_row(&[10.0, 20.0], &[400.0, 400.0], 6.0, 0.0, 700.0).is_none());
        assert_eq!(spread_row(&[], &[], 6.0, 0.0, 10.0), Some(vec![]));
    }

    #[test]
    fn many_emitters_take_two_rows_of_labels() {
        let mut input = sample();
        input.emitters = (0..14)
            .map(|i| EmitterMark {
                id: format!("LMR-{i:02}"),
                freq_mhz: 150.0 + i as f64 * 0.8,
            })
            .collect();
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert_eq!(layout.strip_labels.len(), 15);
        assert!(layout.strip_labels.iter().all(|l| l.clear));
        disjoint(&layout.strip_labels);
    }

    #[test]
    fn lines_wrap_to_the_column() {
        let lines = wrap(
            "Labels: order of the product; formula for the top 3.",
            120.0,
            11.0,
        );
        assert!(lines.len() > 1);
        assert!(lines.iter().all(|l| text_width_px(l, 11.0) <= 120.0));
    }

    /// Writes sample spectra into the directory `$PIM_PICTURES` when that variable is
    /// set, to look at while working on the style.
    #[test]
    fn write_sample_when_asked() {
        if let Ok(dir) = std::env::var("PIM_PICTURES") {
            let mut no_levels = sample();
            for p in &mut no_levels.products[2..] {
                p.level_db = None;
            }
            let mut stacked = sample();
            stacked.products = (0..24)
                .map(|i| {
                    product(
                        146.34 + [0.0, -0.03, -0.05][i % 3],
                        40.0 + 25.0 * i as f64,
                        3 + 2 * (i % 3) as u32,
                        Some(-1.5 * (i / 3) as f64),
                        i + 1,
                        "2·SKP-152 − FIRE-DSP",
                    )
                })
                .collect();
            for (name, input) in [
                ("spectrum", sample()),
                ("spectrum-some-levels", no_levels),
                ("spectrum-stacked", stacked),
                ("spectrum-empty", SpectrumInput::default()),
            ] {
                std::fs::write(format!("{dir}/{name}.svg"), spectrum_svg(&input)).expect("written");
            }
        }
    }
}
