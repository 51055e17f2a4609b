//! What the map and spectrum pictures share: the palette and type sizes, round lengths
//! for scale bars, text size estimates, a greedy label placer and a fallback picture.
//!
//! The palette is calm and prints well in greyscale: every mark that must be told apart
//! differs in shape or dash as well as in colour.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::FontDesc;

/// Paper.
pub const PAPER: RGBColor = RGBColor(0xFF, 0xFF, 0xFF);
/// Text and strong lines.
pub const INK: RGBColor = RGBColor(0x23, 0x29, 0x30);
/// Axes, tick labels and secondary text.
pub const MUTED: RGBColor = RGBColor(0x5E, 0x66, 0x70);
/// Grid lines.
pub const GRID: RGBColor = RGBColor(0xE3, 0xE6, 0xEA);
/// Bearings and observer spots; ordinary products.
pub const SLATE: RGBColor = RGBColor(0x2F, 0x4B, 0x68);
/// Outliers and anything left out of a result.
pub const STONE: RGBColor = RGBColor(0x9C, 0xA1, 0xA8);
/// The fix; the top-ranked products.
pub const RUST: RGBColor = RGBColor(0x9A, 0x3B, 0x1E);
/// The confidence ellipse and the receive channel.
pub const OCHRE: RGBColor = RGBColor(0xC2, 0x8E, 0x2B);
/// The confidence ellipse's edge.
pub const OCHRE_DARK: RGBColor = RGBColor(0x8A, 0x5F, 0x12);
/// Emitters.
pub const MOSS: RGBColor = RGBColor(0x3D, 0x6A, 0x47);
/// Site structures.
pub const PLUM: RGBColor = RGBColor(0x68, 0x4B, 0x7B);

/// Font family of every text in the pictures (no font file is needed to write it).
pub const FONT: &str = "sans-serif";
/// Type sizes in pixels, as written into the SVG.
pub const TITLE_PX: f64 = 16.0;
pub const SUBTITLE_PX: f64 = 12.0;
pub const LABEL_PX: f64 = 11.0;
pub const TICK_PX: f64 = 10.0;

/// plotters writes a text style's size divided by 1.24 into the SVG; this undoes that
/// so the constants above are the sizes a reader gets.
const PLOTTERS_FONT_SCALE: f64 = 1.24;

fn style(px: f64, color: RGBColor, weight: FontStyle, pos: Pos) -> TextStyle<'static> {
    TextStyle {
        font: FontDesc::new(FontFamily::Name(FONT), px * PLOTTERS_FONT_SCALE, weight),
        color: color.to_backend_color(),
        pos,
    }
}

/// A text style of `px` pixels in `color`, anchored at its top left.
pub fn text_style(px: f64, color: RGBColor) -> TextStyle<'static> {
    style(
        px,
        color,
        FontStyle::Normal,
        Pos::new(HPos::Left, VPos::Top),
    )
}

/// The same, bold.
pub fn bold_style(px: f64, color: RGBColor) -> TextStyle<'static> {
    style(px, color, FontStyle::Bold, Pos::new(HPos::Left, VPos::Top))
}

/// A font for plotters' own axis labels, `px` pixels in the SVG.
pub fn axis_font(px: f64, color: RGBColor) -> TextStyle<'static> {
    style(px, color, FontStyle::Normal, Pos::default())
}

/// The width of `text` at `px` pixels, estimated from its characters (the SVG reader
/// picks the actual font; this errs on the wide side of common sans-serif faces).
pub fn text_width_px(text: &str, px: f64) -> f64 {
    let em: f64 = text
        .chars()
        .map(|c| match c {
            'i' | 'j' | 'l' | '|' | '!' | '\'' | '.' | ',' | ':' | ';' => 0.32,
            ' ' | '-' | '(' | ')' | '[' | ']' | 'f' | 'r' | 't' | '·' => 0.40,
            'm' | 'w' | 'M' | 'W' => 0.92,
            c if c.is_ascii_uppercase() => 0.72,
            c if c.is_ascii_digit() => 0.64,
            c if c.is_ascii_lowercase() => 0.58,
            _ => 0.70,
        })
        .sum();
    em * px
}

/// The height a line of text at `px` pixels occupies, ascender to descender.
pub fn text_height_px(px: f64) -> f64 {
    px * 1.05
}

/// Space between a label's text and its backing box.
pub const LABEL_PAD_PX: f64 = 2.0;

/// The box a label of `text` at `px` pixels needs, backing included.
pub fn label_size_px(text: &str, px: f64) -> (f64, f64) {
    (
        text_width_px(text, px) + 2.0 * LABEL_PAD_PX,
        text_height_px(px) + 2.0 * LABEL_PAD_PX,
    )
}

/// The largest length of the form 1, 2 or 5 × 10ⁿ not above `max` (1 when `max` is not
/// a positive finite number).
pub fn round_length(max: f64) -> f64 {
    if !max.is_finite() || max <= 0.0 {
        return 1.0;
    }
    let decade = 10f64.powf(max.log10().floor());
    [5.0, 2.0, 1.0]
        .into_iter()
        .map(|m| m * decade)
        .find(|&l| l <= max * (1.0 + 1e-9))
        .unwrap_or(decade)
}

/// An axis-aligned box in pixels, y growing downwards.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rect {
    pub x0: f64,
    pub y0: f64,
    pub x1: f64,
    pub y1: f64,
}

impl Rect {
    /// A box of `size` with its top left corner at `(x, y)`.
    pub fn at(x: f64, y: f64, size: (f64, f64)) -> Rect {
        Rect {
            x0: x,
            y0: y,
            x1: x + size.0,
            y1: y + size.1,
        }
    }

    /// A square of half-side `r` around a point.
    pub fn around(p: (f64, f64), r: f64) -> Rect {
        Rect {
            x0: p.0 - r,
            y0: p.1 - r,
            x1: p.0 + r,
            y1: p.1 + r,
        }
    }

    /// The area two boxes share (zero when they only touch).
    /// The rectangle shrunk by `d` pixels on every side.
    pub fn inset(&self, d: f64) -> Rect {
        Rect {
            x0: self.x0 + d,
            y0: self.y0 + d,
            x1: self.x1 - d,
            y1: self.y1 - d,
        }
    }

    pub fn overlap_area(&self, other: &Rect) -> f64 {
        let w = self.x1.min(other.x1) - self.x0.max(other.x0);
        let h = self.y1.min(other.y1) - self.y0.max(other.y0);
        if w > 0.0 && h > 0.0 {
            w * h
        } else {
            0.0
        }
    }

    pub fn overlaps(&self, other: &Rect) -> bool {
        self.overlap_area(other) > 0.0
    }

    pub fn contains(&self, other: &Rect) -> bool {
        other.x0 >= self.x0 && other.x1 <= self.x1 && other.y0 >= self.y0 && other.y1 <= self.y1
    }

    pub fn contains_point(&self, p: (f64, f64)) -> bool {
        p.0 >= self.x0 && p.0 <= self.x1 && p.1 >= self.y0 && p.1 <= self.y1
    }

    /// The point of the box nearest to `p`.
    pub fn nearest_point(&self, p: (f64, f64)) -> (f64, f64) {
        (p.0.clamp(self.x0, self.x1), p.1.clamp(self.y0, self.y1))
    }

    /// The box moved inside `bounds` where it fits.
    fn clamped_into(&self, bounds: &Rect) -> Rect {
        let w = self.x1 - self.x0;
        let h = self.y1 - self.y0;
        let x0 = self.x0.min(bounds.x1 - w).max(bounds.x0);
        let y0 = self.y0.min(bounds.y1 - h).max(bounds.y0);
        Rect::at(x0, y0, (w, h))
    }
}

/// Where a label went, and whether it is clear of everything placed before it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Placement {
    pub rect: Rect,
    pub clear: bool,
}

/// A greedy label placer: each label takes the first of its candidate boxes that lies
/// inside the bounds and overlaps no marker or label placed before it; when none does,
/// the one with the least overlap. Place the important labels first.
pub struct LabelPlacer {
    bounds: Rect,
    taken: Vec<Rect>,
}

impl LabelPlacer {
    pub fn new(bounds: Rect) -> Self {
        LabelPlacer {
            bounds,
            taken: Vec::new(),
        }
    }

    /// Reserves a box (a marker, a scale bar) that no label may cover.
    pub fn block(&mut self, r: Rect) {
        self.taken.push(r);
    }

    /// Places a box of `size` next to the point `at`: to the right, left, above and
    /// below, then the diagonals, at distance `gap` and then further out.
    pub fn place_near(&mut self, at: (f64, f64), size: (f64, f64), gap: f64) -> Placement {
        let (w, h) = size;
        let mut candidates = Vec::with_capacity(40);
        for ring in [0.0, 1.0, 2.2, 3.6, 5.2] {
            let d = gap + ring * h;
            let dd = gap * 0.7 + ring * h;
            let (x, y) = at;
            candidates.extend([
                Rect::at(x + d, y - h / 2.0, size),
                Rect::at(x - d - w, y - h / 2.0, size),
                Rect::at(x + dd, y - dd - h, size),
                Rect::at(x - dd - w, y - dd - h, size),
                Rect::at(x + dd, y + dd, size),
                Rect::at(x - dd - w, y + dd, size),
                Rect::at(x - w / 2.0, y - d - h, size),
                Rect::at(x - w / 2.0, y + d, size),
            ]);
        }
        self.place_first_clear(&candidates)
    }

    /// Takes the first clear candidate, or the least-overlapping one inside the bounds,
    /// or, when none lies inside, the first moved into the bounds.
    pub fn place_first_clear(&mut self, candidates: &[Rect]) -> Placement {
        let overlap = |r: &Rect| -> f64 { self.taken.iter().map(|t| r.overlap_area(t)).sum() };
        let mut best: Option<(f64, Rect)> = None;
        for r in candidates.iter().filter(|r| self.bounds.contains(r)) {
            let o = overlap(r);
            if o == 0.0 {
                best = Some((0.0, *r));
                break;
            }
            match best {
                Some((b, _)) if b <= o => {}
                _ => best = Some((o, *r)),
            }
        }
        let (o, rect) = match best {
            Some(b) => b,
            None => {
                let r = candidates
                    .first()
                    .copied()
                    .unwrap_or(Rect::at(self.bounds.x0, self.bounds.y0, (0.0, 0.0)))
                    .clamped_into(&self.bounds);
                (overlap(&r), r)
            }
        };
        self.taken.push(rect);
        Placement {
            rect,
            clear: o == 0.0,
        }
    }
}

/// Draws a label in its placed box: a pale backing so it reads over lines, then the
/// text.
pub fn draw_label<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    rect: &Rect,
    text: &str,
    style: &TextStyle,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    area.draw(&Rectangle::new(
        [
            (rect.x0.round() as i32, rect.y0.round() as i32),
            (rect.x1.round() as i32, rect.y1.round() as i32),
        ],
        PAPER.mix(0.82).filled(),
    ))?;
    area.draw(&Text::new(
        text.to_string(),
        (
            (rect.x0 + LABEL_PAD_PX).round() as i32,
            (rect.y0 + LABEL_PAD_PX).round() as i32,
        ),
        style.clone(),
    ))
}

/// What drawing returns.
pub type DrawResult<T> = Result<T, DrawingAreaErrorKind<std::io::Error>>;
/// A part of an SVG picture, in pixel coordinates.
pub type Area<'a> = DrawingArea<SVGBackend<'a>, plotters::coord::Shift>;

/// The layout both pictures share: a header for the title lines, a column on the right
/// for the legend, a margin, and the room for the axes' tick labels.
pub const HEADER_PX: u32 = 58;
pub const SIDE_PX: u32 = 270;
pub const MARGIN_PX: u32 = 14;
pub const X_LABEL_AREA_PX: u32 = 40;
pub const Y_LABEL_AREA_PX: u32 = 62;

/// The size a picture is drawn at and the type and layout that go with it: [`WIDE`] for
/// a screen or paper, [`PHONE`] for a phone held upright. Each picture is drawn from
/// the same input at both; only the drawing differs (type sizes, how many ticks and
/// labels, where the legend goes), never what is shown as found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Look {
    /// Width of the picture in pixels.
    pub width_px: u32,
    pub title_px: f64,
    pub subtitle_px: f64,
    /// Labels, legend entries and axis titles.
    pub label_px: f64,
    /// Tick labels and scale bar figures.
    pub tick_px: f64,
    pub margin_px: u32,
    pub x_label_area_px: u32,
    pub y_label_area_px: u32,
    /// Width of the legend's column on the right; `None`: the legend goes beneath the
    /// plot, and the header's lines wrap to the width.
    pub side_px: Option<u32>,
    /// About how many tick labels an axis gets.
    pub ticks: usize,
    /// Height of one legend row.
    pub row_px: f64,
}

/// The pictures as drawn for a screen or paper: 1,040 px wide with the legend beside
/// the plot.
pub const WIDE: Look = Look {
    width_px: 1040,
    title_px: TITLE_PX,
    subtitle_px: SUBTITLE_PX,
    label_px: LABEL_PX,
    tick_px: TICK_PX,
    margin_px: MARGIN_PX,
    x_label_area_px: X_LABEL_AREA_PX,
    y_label_area_px: Y_LABEL_AREA_PX,
    side_px: Some(SIDE_PX),
    ticks: 9,
    row_px: 24.0,
};

/// The smallest size text may render at on a phone, in CSS pixels (common practice for
/// legible small print on a handheld screen; the ticket's browser test checks it).
pub const PHONE_MIN_TEXT_PX: f64 = 12.0;

/// The pictures as drawn for a phone held upright: 360 px wide, to be shown at about
/// that width (a 390 px screen less the page's margins, as the ticket does), so 13 px
/// text stays above [`PHONE_MIN_TEXT_PX`] when scaled down to 340 px (13 × 340/360 ≈
/// 12.3); the legend goes beneath the plot.
pub const PHONE: Look = Look {
    width_px: 360,
    title_px: 15.0,
    subtitle_px: 13.0,
    label_px: 13.0,
    tick_px: 13.0,
    margin_px: 8,
    x_label_area_px: 38,
    y_label_area_px: 50,
    side_px: None,
    ticks: 5,
    row_px: 22.0,
};

impl Look {
    /// The margin right of a chart: on a phone, room for half the last tick label,
    /// which plotters centres on its tick.
    pub fn margin_right_px(&self) -> u32 {
        if self.stacked() {
            self.margin_px + 16
        } else {
            self.margin_px
        }
    }

    /// Whether the legend goes beneath the plot (a phone).
    pub fn stacked(&self) -> bool {
        self.side_px.is_none()
    }

    /// The width the legend has: its column, or the picture less its margins.
    pub fn legend_width_px(&self) -> f64 {
        self.side_px.unwrap_or(self.width_px) as f64 - 2.0 * self.margin_px as f64
    }

    /// The header's lines at this look: the title and subtitle each on one line, or
    /// wrapped to the width when the legend goes beneath.
    pub fn header_lines(&self, title: &str, subtitle: &str) -> (Vec<String>, Vec<String>) {
        if self.stacked() {
            let w = self.width_px as f64 - 2.0 * self.margin_px as f64;
            (
                // bold type runs about a tenth wider than the estimate
                wrap(title, w, self.title_px * 1.1),
                wrap(subtitle, w, self.subtitle_px),
            )
        } else {
            (vec![title.to_string()], vec![subtitle.to_string()])
        }
    }

    /// The height of the header for these lines ([`HEADER_PX`] for a single line each).
    pub fn header_px(&self, title: &str, subtitle: &str) -> u32 {
        if !self.stacked() {
            return HEADER_PX;
        }
        let (t, s) = self.header_lines(title, subtitle);
        let h = 10.0
            + t.len() as f64 * (self.title_px * 1.5)
            + s.len() as f64 * (self.subtitle_px * 1.45)
            + 8.0;
        h.ceil() as u32
    }

    /// The body split into the plot's part and the legend's: side by side, or, when
    /// stacked, the plot's part `plot_px` high above the rest.
    pub fn split_body<'a>(&self, rest: &Area<'a>, plot_px: u32) -> (Area<'a>, Area<'a>) {
        match self.side_px {
            Some(side) => rest.split_horizontally(self.width_px - side),
            None => rest.split_vertically(plot_px),
        }
    }
}

/// Breaks `text` into lines no wider than `width_px` at `font_px` (a word wider than
/// that stands on a line of its own).
pub fn wrap(text: &str, width_px: f64, font_px: f64) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if text_width_px(&candidate, font_px) > width_px && !line.is_empty() {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// Draws a picture's header: the title in bold, the subtitle beneath, each wrapped as
/// [`Look::header_lines`] says.
pub fn draw_header(header: &Area, look: &Look, title: String, subtitle: String) -> DrawResult<()> {
    let x = look.margin_px as i32;
    if !look.stacked() {
        header.draw(&Text::new(title, (x, 10), bold_style(look.title_px, INK)))?;
        header.draw(&Text::new(
            subtitle,
            (x, 34),
            text_style(look.subtitle_px, MUTED),
        ))?;
        return Ok(());
    }
    let (titles, subtitles) = look.header_lines(&title, &subtitle);
    let mut y = 10.0;
    for (lines, style, step) in [
        (titles, bold_style(look.title_px, INK), look.title_px * 1.5),
        (
            subtitles,
            text_style(look.subtitle_px, MUTED),
            look.subtitle_px * 1.45,
        ),
    ] {
        for line in lines {
            header.draw(&Text::new(line, (x, y as i32), style.clone()))?;
            y += step;
        }
    }
    Ok(())
}

/// A hollow diamond of half-diagonal `r` pixels centred at `p`, edged in `edge`.
pub fn draw_diamond(area: &Area, p: (f64, f64), r: f64, edge: ShapeStyle) -> DrawResult<()> {
    let pts = vec![
        px((p.0, p.1 - r)),
        px((p.0 + r, p.1)),
        px((p.0, p.1 + r)),
        px((p.0 - r, p.1)),
    ];
    area.draw(&Polygon::new(pts.clone(), PAPER.filled()))?;
    let mut closed = pts.clone();
    closed.push(pts[0]);
    area.draw(&PathElement::new(closed, edge))
}

/// The plot's pixel rectangle from a chart's pixel ranges, framed with a thin rule.
pub fn framed_plot(
    root: &Area,
    (xr, yr): (std::ops::Range<i32>, std::ops::Range<i32>),
) -> DrawResult<Rect> {
    let plot = Rect {
        x0: xr.start as f64,
        y0: yr.start as f64,
        x1: (xr.end - 1) as f64,
        y1: (yr.end - 1) as f64,
    };
    root.draw(&Rectangle::new(
        [px((plot.x0, plot.y0)), px((plot.x1, plot.y1))],
        MUTED.stroke_width(1),
    ))?;
    Ok(plot)
}

/// Places and draws labels, in the order given, with `placer` (which already holds the
/// marks to keep clear of); a label whose point lies outside the placer's bounds is
/// skipped, and one pushed away from its point gets a thin leader.
pub fn draw_labels(
    area: &Area,
    placer: &mut LabelPlacer,
    jobs: &[LabelJob],
    label_px: f64,
) -> DrawResult<Vec<PlacedLabel>> {
    let mut placed_all = Vec::new();
    for job in jobs {
        if job.text.trim().is_empty() || !placer.bounds.contains_point(job.at) {
            continue;
        }
        let placed = placer.place_near(job.at, label_size_px(&job.text, label_px), job.gap);
        let near = placed.rect.nearest_point(job.at);
        if (near.0 - job.at.0).hypot(near.1 - job.at.1) > job.gap * 1.6 + 2.0 {
            area.draw(&PathElement::new(
                vec![px(job.at), px(near)],
                MUTED.mix(0.8).stroke_width(1),
            ))?;
        }
        draw_label(
            area,
            &placed.rect,
            &job.text,
            &text_style(label_px, job.colour),
        )?;
        placed_all.push(PlacedLabel {
            text: job.text.clone(),
            rect: placed.rect,
            clear: placed.clear,
        });
    }
    Ok(placed_all)
}

/// A label as drawn.
#[derive(Clone, Debug, PartialEq)]
pub struct PlacedLabel {
    pub text: String,
    pub rect: Rect,
    /// Clear of every marker and label placed before it.
    pub clear: bool,
}

/// A label to place next to a point.
pub struct LabelJob {
    pub at: (f64, f64),
    pub text: String,
    pub colour: RGBColor,
    /// Distance kept from the point's mark.
    pub gap: f64,
}

/// Rounds a pixel position for plotters.
pub fn px(p: (f64, f64)) -> (i32, i32) {
    (p.0.round() as i32, p.1.round() as i32)
}

/// A drawn picture as the finished SVG document: only characters XML allows are kept
/// (text from files may hold controls), and a drawing that failed gives the plain SVG of
/// [`fallback_svg`] saying that `what` could not be drawn.
pub fn finished_svg<T, E: std::fmt::Display>(
    drawn: Result<T, E>,
    svg: String,
    (width, height): (u32, u32),
    what: &str,
) -> String {
    finished_svg_cut(drawn.map(|_| height), svg, (width, height), what)
}

/// The same for a picture drawn on a canvas `height` pixels high that used only the
/// height `drawn` returns (a phone's picture, whose legend beneath the plot takes the
/// rows it needs): its viewBox is cut to the height used.
pub fn finished_svg_cut<E: std::fmt::Display>(
    drawn: Result<u32, E>,
    svg: String,
    (width, height): (u32, u32),
    what: &str,
) -> String {
    match drawn {
        Ok(used) => scalable_root(
            pim_io::text::xml_chars_only(svg),
            (width, height),
            used.clamp(1, height),
        ),
        Err(e) => fallback_svg(width, height, &format!("{what} could not be drawn: {e}")),
    }
}

/// The root element's size given by its viewBox alone: as wide as the page or screen
/// allows, at most its natural `width` pixels, its height following the viewBox's
/// proportions (plotters writes a fixed `width` and `height`; only those, and the
/// viewBox's height when `used` is less than `height`, are replaced).
pub(crate) fn scalable_root(svg: String, (width, height): (u32, u32), used: u32) -> String {
    let fixed =
        format!("<svg width=\"{width}\" height=\"{height}\" viewBox=\"0 0 {width} {height}\"");
    let scalable = format!(
        "<svg {} viewBox=\"0 0 {width} {used}\"",
        scalable_size(width)
    );
    match svg.strip_prefix(fixed.as_str()) {
        Some(rest) => format!("{scalable}{rest}"),
        None => svg,
    }
}

/// The root attributes that size a picture by its viewBox, at most `width` pixels wide.
fn scalable_size(width: u32) -> String {
    format!("width=\"100%\" style=\"max-width:{width}px;height:auto\"")
}

/// A plain SVG saying a picture could not be drawn (writing into memory does not fail
/// in practice; this keeps a ticket whole if it ever does).
pub fn fallback_svg(width: u32, height: u32, message: &str) -> String {
    let escaped = pim_io::text::xml_escape(message);
    format!(
        "<svg {} viewBox=\"0 0 {width} {height}\" xmlns=\"http://www.w3.org/2000/svg\">\n<rect x=\"0\" y=\"0\" width=\"{width}\" height=\"{height}\" fill=\"#FFFFFF\"/>\n<text x=\"16\" y=\"32\" font-family=\"{FONT}\" font-size=\"{SUBTITLE_PX}\" fill=\"#232930\">{escaped}</text>\n</svg>\n",
        scalable_size(width)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_lengths_are_one_two_five() {
        assert_eq!(round_length(180.0), 100.0);
        assert_eq!(round_length(240.0), 200.0);
        assert_eq!(round_length(500.0), 500.0);
        assert_eq!(round_length(0.7), 0.5);
        assert_eq!(round_length(0.0), 1.0);
        assert_eq!(round_length(f64::NAN), 1.0);
    }

    fn all_disjoint(rects: &[Rect]) -> bool {
        rects
            .iter()
            .enumerate()
            .all(|(i, a)| rects[i + 1..].iter().all(|b| !a.overlaps(b)))
    }

    #[test]
    fn labels_around_a_crowded_spot_do_not_overlap() {
        let bounds = Rect::at(0.0, 0.0, (600.0, 400.0));
        let mut placer = LabelPlacer::new(bounds);
        // Nine markers within a few pixels of each other, as at a tower with many
        // antennas on it.
        let spots: Vec<(f64, f64)> = (0..9)
            .map(|i| (300.0 + (i % 3) as f64 * 4.0, 200.0 + (i / 3) as f64 * 4.0))
            .collect();
        for s in &spots {
            placer.block(Rect::around(*s, 3.0));
        }
        let mut placed = Vec::new();
        for (i, s) in spots.iter().enumerate() {
            let size = label_size_px(&format!("ANT-{i}"), LABEL_PX);
            let p = placer.place_near(*s, size, 6.0);
            assert!(p.clear, "label {i} found no clear place");
            assert!(bounds.contains(&p.rect));
            for m in &spots {
                assert!(!p.rect.overlaps(&Rect::around(*m, 3.0)));
            }
            placed.push(p.rect);
        }
        assert!(all_disjoint(&placed));
    }

    #[test]
    fn a_label_at_the_right_edge_goes_left() {
        let bounds = Rect::at(0.0, 0.0, (200.0, 100.0));
        let mut placer = LabelPlacer::new(bounds);
        let p = placer.place_near((195.0, 50.0), (60.0, 15.0), 5.0);
        assert!(p.clear);
        assert!(p.rect.x1 <= 195.0);
    }

    #[test]
    fn an_impossible_label_still_lands_inside() {
        let bounds = Rect::at(0.0, 0.0, (30.0, 20.0));
        let mut placer = LabelPlacer::new(bounds);
        placer.block(bounds);
        let p = placer.place_near((15.0, 10.0), (20.0, 10.0), 4.0);
        assert!(!p.clear);
        assert!(bounds.contains(&p.rect));
        // Larger than the bounds: moved to their corner, never a panic.
        let q = placer.place_near((15.0, 10.0), (80.0, 40.0), 4.0);
        assert!(!q.clear);
    }

    #[test]
    fn wider_text_is_wider() {
        assert!(text_width_px("SKP-152", 11.0) > text_width_px("SKP", 11.0));
        assert!(text_width_px("", 11.0) == 0.0);
    }

    #[test]
    fn roots_scale_by_their_view_box() {
        let drawn = "<svg width=\"1040\" height=\"640\" viewBox=\"0 0 1040 640\" xmlns=\"http://www.w3.org/2000/svg\">\n</svg>\n";
        let svg = finished_svg::<(), String>(Ok(()), drawn.to_string(), (1040, 640), "x");
        let cut = finished_svg_cut::<String>(Ok(500), drawn.to_string(), (1040, 640), "x");
        assert!(cut.contains("viewBox=\"0 0 1040 500\""), "{cut}");
        assert!(svg.starts_with(
            "<svg width=\"100%\" style=\"max-width:1040px;height:auto\" viewBox=\"0 0 1040 640\""
        ));
        let failed = finished_svg::<(), String>(Err("no".into()), String::new(), (1040, 640), "x");
        assert!(failed.contains("viewBox=\"0 0 1040 640\"") && failed.contains("max-width:1040px"));
    }

    #[test]
    fn fallback_is_one_svg_element() {
        let svg = fallback_svg(100, 50, "a <b> & c");
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("a &lt;b&gt; &amp; c"));
    }
}
