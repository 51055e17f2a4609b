//! `map.svg`: a bearing walk and its fix on a local plane in metres east and north of a
//! reference point: the observer spots, their lines of bearing (outliers dashed), the
//! fix and its confidence ellipse, nearby emitters and site structures, a scale bar and
//! a north arrow. Both axes share one scale, so distances and the ellipse's shape read
//! true.
//!
//! Drawn with plotters' SVG backend: the axes, grid and tick labels by its chart mesh,
//! the marks as plotters elements at pixel positions from the chart's own coordinate
//! mapping, because the label placer, scale bar and north arrow work in pixels.

use std::f64::consts::PI;
use std::ops::Range;

use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::picture::{
    axis_font, bold_style, draw_header, draw_labels, finished_svg_cut, framed_plot, px,
    round_length, text_style, text_width_px, Area, DrawResult, LabelJob, LabelPlacer, Look,
    PlacedLabel, Rect, GRID, INK, MOSS, MUTED, OCHRE, OCHRE_DARK, PAPER, PLUM, RUST, SLATE, STONE,
    WIDE,
};

/// Size of the picture in pixels.
pub const MAP_WIDTH_PX: u32 = 1040;
pub const MAP_HEIGHT_PX: u32 = 760;
/// The canvas a phone's map is drawn on; its viewBox is cut to the height used.
const PHONE_CANVAS_PX: u32 = 1600;
/// The detail never shows less than this many metres either side of the fix.
const DETAIL_MIN_HALF_M: f64 = 25.0;
/// Vertices of the drawn ellipse.
const ELLIPSE_VERTICES: usize = 72;
/// The view never spans less than this many metres around its contents.
const MIN_PAD_M: f64 = 30.0;

/// Everything the map shows. Positions are metres east and north of a local origin
/// chosen by the caller (the fix, or the receive site).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct MapInput {
    /// The first line of the picture, e.g. the site and the heard frequency.
    pub title: String,
    /// The confidence level of the ellipse as a fraction, e.g. 0.95.
    pub confidence: f64,
    /// The fix (east, north) in metres; `None` when the bearings fixed no point.
    pub fix: Option<(f64, f64)>,
    /// The confidence ellipse, centred on the fix (not drawn without a fix).
    pub ellipse: Option<Ellipse>,
    /// The region the fix claims, a ring of (east, north) metres in the map's frame;
    /// drawn in place of the ellipse's outline when given (a likelihood contour where the
    /// ellipse does not hold).
    pub region_m: Option<Vec<(f64, f64)>>,
    /// The direction the region stays open towards, degrees from north, when it does not
    /// close ([`pim_core::fix::Fix::open_towards_deg`]): the view then keeps to the walk
    /// and the fix, the ring running on out of it that way.
    pub region_open_towards_deg: Option<f64>,
    /// The spots bearings were taken from.
    pub observers: Vec<Observer>,
    /// Emitters and site structures to show near the fix.
    pub markers: Vec<Marker>,
    /// Where the walker stands now, with the position's accuracy (for the walk page;
    /// `None` on the ticket).
    pub you_are_here: Option<YouAreHere>,
    /// The spot suggested for the next bearing (for the walk page).
    pub next_spot: Option<NextSpot>,
    /// Which part of the plane the map opens on.
    pub view: MapView,
}

/// The walker's position: a dot labelled "you are here", inside a ring of the
/// position's accuracy.
#[derive(Clone, Debug, PartialEq)]
pub struct YouAreHere {
    pub east_m: f64,
    pub north_m: f64,
    /// The 95 % radius of the position in metres (the W3C Geolocation API's
    /// `accuracy`), drawn as a ring at the map's scale; `None` or not positive: no ring.
    pub accuracy_m: Option<f64>,
}

/// The spot suggested for the next bearing: a diamond with its label.
#[derive(Clone, Debug, PartialEq)]
pub struct NextSpot {
    pub east_m: f64,
    pub north_m: f64,
    /// Shown beside the diamond; empty: "next spot".
    pub label: String,
}

/// Which part of the plane the map shows.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub enum MapView {
    /// Everything: the spots, the fix and its ellipse, the markers, the walker and the
    /// next spot.
    #[default]
    All,
    /// Centred on the fix (on the walker's position while there is no fix), at least
    /// `half_width_m` metres either side; the walker and the next spot are kept in view
    /// too, and lines of bearing are cut to it.
    AroundFix { half_width_m: f64 },
}

/// A confidence ellipse.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Ellipse {
    pub semi_major_m: f64,
    pub semi_minor_m: f64,
    /// Direction of the major axis, degrees clockwise from north.
    pub orientation_deg: f64,
}

/// One observer spot and the bearing taken there.
#[derive(Clone, Debug, PartialEq)]
pub struct Observer {
    pub east_m: f64,
    pub north_m: f64,
    /// The bearing to the source, degrees clockwise from true north.
    pub bearing_deg: f64,
    /// How far to draw the line of bearing from the spot (zero or less: no line).
    pub line_length_m: f64,
    /// Shown beside the spot: the reading's number and time, e.g. `#7 14:32`
    /// ([`name_observers`]), or its line in the log, `line 14`.
    pub label: String,
    /// Left out of the fix as an outlier: drawn dashed and grey.
    pub outlier: bool,
}

/// An emitter or a site structure.
#[derive(Clone, Debug, PartialEq)]
pub struct Marker {
    pub east_m: f64,
    pub north_m: f64,
    /// Shown beside the marker: the emitter or structure id.
    pub label: String,
    pub kind: MarkerKind,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MarkerKind {
    /// A transmitting antenna: a triangle.
    Emitter,
    /// A tower, mast, fence, building or other metalwork: a square.
    Structure,
}

/// The map as an SVG document, drawn for a screen or paper.
pub fn map_svg(input: &MapInput) -> String {
    map_svg_at(input, &WIDE)
}

/// The map as an SVG document drawn at `look` ([`crate::picture::PHONE`] for a phone:
/// 360 px wide, the detail around the fix and the legend beneath the plot).
pub fn map_svg_at(input: &MapInput, look: &Look) -> String {
    let mut svg = String::new();
    let canvas = canvas_px(look);
    let drawn = draw_map(input, look, &mut svg).map(|l| l.used_px);
    finished_svg_cut(drawn, svg, canvas, "The map")
}

/// The canvas the map is drawn on at `look`.
fn canvas_px(look: &Look) -> (u32, u32) {
    if look.stacked() {
        (look.width_px, PHONE_CANVAS_PX)
    } else {
        (MAP_WIDTH_PX, MAP_HEIGHT_PX)
    }
}

/// Names the observers of a fix's map (made by
/// [`crate::ticket::fix_map_input`], one observer a reading, in the fix's order) by
/// their reading's number and time (`#7 14:32`) instead of the log's line.
pub fn name_observers(
    input: &mut MapInput,
    fix: &pim_core::fix::Fix,
    names: &crate::readings::ReadingNames,
) {
    for (o, r) in input.observers.iter_mut().zip(&fix.readings) {
        o.label = names.name(r.line);
    }
}

/// The confidence ellipse around `center` as a ring of `n` vertices (at least 4; the
/// first is not repeated at the end), in metres east and north. Vertex k lies at
/// parametric angle 2πk/n from the major axis, so vertex 0 ends the major axis, on the
/// side the orientation points to. Empty when a value is not finite.
pub fn ellipse_polygon_m(center: (f64, f64), ellipse: &Ellipse, n: usize) -> Vec<(f64, f64)> {
    let a = ellipse.semi_major_m.abs();
    let b = ellipse.semi_minor_m.abs();
    let theta = ellipse.orientation_deg.to_radians();
    if ![a, b, theta, center.0, center.1]
        .iter()
        .all(|v| v.is_finite())
    {
        return Vec::new();
    }
    let n = n.max(4);
    // Major axis along (sin θ, cos θ) in (east, north); minor axis a right angle
    // clockwise from it.
    let major = (theta.sin(), theta.cos());
    let minor = (theta.cos(), -theta.sin());
    (0..n)
        .map(|k| {
            let t = 2.0 * PI * k as f64 / n as f64;
            let (c, s) = (t.cos(), t.sin());
            (
                center.0 + a * c * major.0 + b * s * minor.0,
                center.1 + a * c * major.1 + b * s * minor.1,
            )
        })
        .collect()
}

/// The segment from `p0` to `p1` cut to the box `east` × `north` (Liang–Barsky), or
/// `None` when it misses the box.
fn clip_segment(
    p0: (f64, f64),
    p1: (f64, f64),
    east: &Range<f64>,
    north: &Range<f64>,
) -> Option<((f64, f64), (f64, f64))> {
    let d = (p1.0 - p0.0, p1.1 - p0.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-d.0, p0.0 - east.start),
        (d.0, east.end - p0.0),
        (-d.1, p0.1 - north.start),
        (d.1, north.end - p0.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    (t0 <= t1).then_some((
        (p0.0 + t0 * d.0, p0.1 + t0 * d.1),
        (p0.0 + t1 * d.0, p0.1 + t1 * d.1),
    ))
}

/// The east and north ranges that show every point with a margin and give both axes
/// the same metres per pixel over a plotting area `span_px` pixels wide and high.
fn fit_view(points: &[(f64, f64)], span_px: (f64, f64)) -> (Range<f64>, Range<f64>) {
    let mut lo = (f64::INFINITY, f64::INFINITY);
    let mut hi = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    for p in points {
        lo = (lo.0.min(p.0), lo.1.min(p.1));
        hi = (hi.0.max(p.0), hi.1.max(p.1));
    }
    if points.is_empty() {
        lo = (0.0, 0.0);
        hi = (0.0, 0.0);
    }
    let span = (hi.0 - lo.0).max(hi.1 - lo.1);
    let pad = (span * 0.12).max(MIN_PAD_M);
    let width = hi.0 - lo.0 + 2.0 * pad;
    let height = hi.1 - lo.1 + 2.0 * pad;
    let (sx, sy) = (span_px.0.max(1.0), span_px.1.max(1.0));
    let m_per_px = (width / sx).max(height / sy);
    let centre = ((lo.0 + hi.0) / 2.0, (lo.1 + hi.1) / 2.0);
    let half = (m_per_px * sx / 2.0, m_per_px * sy / 2.0);
    (
        centre.0 - half.0..centre.0 + half.0,
        centre.1 - half.1..centre.1 + half.1,
    )
}

/// The input with every non-finite position left out.
struct Clean<'a> {
    fix: Option<(f64, f64)>,
    you: Option<&'a YouAreHere>,
    next: Option<&'a NextSpot>,
    ellipse_m: Vec<(f64, f64)>,
    /// The region does not close (its ring runs to the search's reach).
    open: bool,
    observers: Vec<&'a Observer>,
    markers: Vec<&'a Marker>,
}

fn finite(p: (f64, f64)) -> bool {
    p.0.is_finite() && p.1.is_finite()
}

impl<'a> Clean<'a> {
    fn new(input: &'a MapInput) -> Self {
        let fix = input.fix.filter(|&p| finite(p));
        let ellipse_m = match (fix, &input.ellipse, &input.region_m) {
            (Some(_), _, Some(ring)) if ring.len() >= 3 && ring.iter().all(|&p| finite(p)) => {
                ring.clone()
            }
            (Some(c), Some(e), _) => ellipse_polygon_m(c, e, ELLIPSE_VERTICES),
            _ => Vec::new(),
        };
        Clean {
            fix,
            you: input
                .you_are_here
                .as_ref()
                .filter(|y| finite((y.east_m, y.north_m))),
            next: input
                .next_spot
                .as_ref()
                .filter(|n| finite((n.east_m, n.north_m))),
            ellipse_m,
            open: input.region_open_towards_deg.is_some(),
            observers: input
                .observers
                .iter()
                .filter(|o| finite((o.east_m, o.north_m)))
                .collect(),
            markers: input
                .markers
                .iter()
                .filter(|m| finite((m.east_m, m.north_m)))
                .collect(),
        }
    }

    /// What the view must show (lines of bearing are cut to it instead).
    fn extent_points(&self) -> Vec<(f64, f64)> {
        let mut pts: Vec<(f64, f64)> = self.fix.into_iter().collect();
        match (self.open, self.fix) {
            // an open ring reaches the search's edge: keep to twice the walk's reach
            (true, Some(c)) => {
                let reach = self
                    .observers
                    .iter()
                    .map(|o| (o.east_m - c.0).hypot(o.north_m - c.1))
                    .fold(0.0, f64::max)
                    .max(10.0);
                pts.extend(
                    self.ellipse_m
                        .iter()
                        .filter(|p| (p.0 - c.0).hypot(p.1 - c.1) <= 2.0 * reach),
                );
            }
            _ => pts.extend(&self.ellipse_m),
        }
        pts.extend(self.observers.iter().map(|o| (o.east_m, o.north_m)));
        pts.extend(self.markers.iter().map(|m| (m.east_m, m.north_m)));
        pts.extend(self.walker_points());
        pts
    }

    /// The walker's position and the next spot, where given.
    fn walker_points(&self) -> Vec<(f64, f64)> {
        let mut pts: Vec<(f64, f64)> = self
            .you
            .map(|y| (y.east_m, y.north_m))
            .into_iter()
            .collect();
        pts.extend(self.next.map(|n| (n.east_m, n.north_m)));
        pts
    }

    /// What the view must show for `view`: everything, or the fix (else the walker) with
    /// `half_width_m` around it, the walker and the next spot.
    fn view_points(&self, view: MapView) -> Vec<(f64, f64)> {
        match view {
            MapView::All => self.extent_points(),
            MapView::AroundFix { half_width_m } => {
                let h = if half_width_m.is_finite() && half_width_m > 0.0 {
                    half_width_m
                } else {
                    MIN_PAD_M
                };
                let centre = self.fix.or(self.you.map(|y| (y.east_m, y.north_m)));
                let Some(c) = centre else {
                    return self.extent_points();
                };
                let mut pts = vec![(c.0 - h, c.1 - h), (c.0 + h, c.1 + h)];
                // Others kept in view symmetrically, so the fix stays in the middle.
                for p in self.walker_points() {
                    pts.push(p);
                    pts.push((2.0 * c.0 - p.0, 2.0 * c.1 - p.1));
                }
                pts
            }
        }
    }
}

/// The far end of an observer's line of bearing, when it has one.
fn bearing_end(o: &Observer) -> Option<(f64, f64)> {
    let b = o.bearing_deg.to_radians();
    (b.is_finite() && o.line_length_m.is_finite() && o.line_length_m > 0.0).then(|| {
        (
            o.east_m + o.line_length_m * b.sin(),
            o.north_m + o.line_length_m * b.cos(),
        )
    })
}

/// Where things went, for the tests.
#[derive(Clone, Debug, Default)]
#[cfg_attr(not(test), allow(dead_code))] // read by the layout tests
struct MapLayout {
    /// The plotting area in pixels.
    plot: Option<Rect>,
    east: Range<f64>,
    north: Range<f64>,
    px_per_m_east: f64,
    px_per_m_north: f64,
    scale_bar_m: f64,
    /// Left and right ends of the scale bar in pixels.
    scale_bar_px: (i32, i32),
    north_arrow_box: Option<Rect>,
    /// Tip and base middle of the north arrow.
    north_arrow: ((f64, f64), (f64, f64)),
    fix_px: Option<(i32, i32)>,
    ellipse_px: Vec<(i32, i32)>,
    /// Every label drawn, on the map and in the detail.
    labels: Vec<PlacedLabel>,
    detail: Option<DetailLayout>,
    /// The height of the picture used, pixels.
    used_px: u32,
}

/// Where the detail around the fix went.
#[derive(Clone, Debug)]
#[cfg_attr(not(test), allow(dead_code))] // read by the layout tests
struct DetailLayout {
    frame: Rect,
    px_per_m: f64,
    scale_bar_m: f64,
    scale_bar_px: (i32, i32),
}

fn draw_map(input: &MapInput, look: &Look, svg: &mut String) -> DrawResult<MapLayout> {
    let root = SVGBackend::with_string(svg, canvas_px(look)).into_drawing_area();
    let layout = draw_map_on(&root, input, look)?;
    root.present()?;
    Ok(layout)
}

/// A percentage for text: 0.95 → "95", 0.683 → "68.3".
fn percent_text(fraction: f64) -> Option<String> {
    (fraction.is_finite() && fraction > 0.0 && fraction <= 1.0).then(|| {
        let p = format!("{:.1}", fraction * 100.0);
        p.trim_end_matches(".0").to_string()
    })
}

/// A length for text, in m (to 0.1 m) or km (to 1 m), without trailing zeros.
fn length_text(m: f64) -> String {
    let (v, unit, decimals) = if m >= 1000.0 {
        (m / 1000.0, "km", 3)
    } else {
        (m, "m", 1)
    };
    let t = format!("{v:.decimals$}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    format!("{t} {unit}")
}

/// Two semi-axes as `18.2 × 15.2 m`, the unit once where both share it
/// (`1.2 km × 800 m` where they do not).
fn semi_axes_text(a_m: f64, b_m: f64) -> String {
    let (a, b) = (length_text(a_m), length_text(b_m));
    match (a.rsplit_once(' '), b.rsplit_once(' ')) {
        (Some((va, ua)), Some((_, ub))) if ua == ub => format!("{va} × {b}"),
        _ => format!("{a} × {b}"),
    }
}

fn header_lines(input: &MapInput, clean: &Clean) -> (String, String) {
    let title = if input.title.trim().is_empty() {
        "Bearing fix".to_string()
    } else {
        input.title.clone()
    };
    let used = clean.observers.iter().filter(|o| !o.outlier).count();
    let outliers = clean.observers.len() - used;
    let bearings = match (used, outliers) {
        (0, 0) => "no bearings".to_string(),
        (1, 0) => "1 bearing".to_string(),
        (u, 0) => format!("{u} bearings"),
        (u, 1) => format!("{u} bearings used, 1 outlier left out"),
        (u, o) => format!("{u} bearings used, {o} outliers left out"),
    };
    let level = percent_text(input.confidence)
        .map(|p| format!("{p} % confidence ellipse"))
        .unwrap_or_else(|| "confidence ellipse (level not given)".to_string());
    let fix = match (clean.fix, &input.ellipse, clean.ellipse_m.is_empty()) {
        (None, _, _) => "No fix".to_string(),
        (Some(_), _, false) if input.region_open_towards_deg.is_some() => format!(
            "Fix; its {} region is open towards {:.0}° (no size: the levels do not bound it that way)",
            percent_text(input.confidence)
                .map(|p| format!("{p} %"))
                .unwrap_or_default(),
            input.region_open_towards_deg.unwrap_or_default()
        ),
        (Some(_), Some(e), false) => format!(
            "Fix with its {level}: semi-axes {}, major axis {:.0}° from north",
            semi_axes_text(e.semi_major_m.abs(), e.semi_minor_m.abs()),
            e.orientation_deg.rem_euclid(180.0)
        ),
        (Some(_), _, _) => "Fix (no ellipse)".to_string(),
    };
    (title, format!("{fix} · {bearings}"))
}

/// The corner of `plot` (inset by `inset`) where a box of `size` covers the fewest of
/// `points`; corners listed in order of preference, `skip` excluded.
fn emptiest_corner(
    plot: &Rect,
    size: (f64, f64),
    inset: f64,
    points: &[(f64, f64)],
    skip: Option<&Rect>,
) -> Rect {
    let left = plot.x0 + inset;
    let right = plot.x1 - inset - size.0;
    let top = plot.y0 + inset;
    let bottom = plot.y1 - inset - size.1;
    let corners = [
        Rect::at(left, bottom, size),
        Rect::at(right, bottom, size),
        Rect::at(right, top, size),
        Rect::at(left, top, size),
    ];
    let mut best: Option<(usize, Rect)> = None;
    for c in corners {
        if skip.is_some_and(|s| s.overlaps(&c)) {
            continue;
        }
        let grown = Rect {
            x0: c.x0 - 8.0,
            y0: c.y0 - 8.0,
            x1: c.x1 + 8.0,
            y1: c.y1 + 8.0,
        };
        let n = points.iter().filter(|p| grown.contains_point(**p)).count();
        match best {
            Some((b, _)) if b <= n => {}
            _ => best = Some((n, c)),
        }
    }
    best.map(|(_, r)| r).unwrap_or(corners[0])
}

/// A view of the plane drawn into a box of the picture.
struct Frame<'f> {
    east: Range<f64>,
    north: Range<f64>,
    to_px: &'f dyn Fn((f64, f64)) -> (f64, f64),
}

impl Frame<'_> {
    fn shows(&self, p: (f64, f64)) -> bool {
        self.east.contains(&p.0) && self.north.contains(&p.1)
    }
}

/// What the marks of a frame left for the scale bar, north arrow and labels to avoid.
#[derive(Default)]
struct Marks {
    /// Pixels covered by marks and lines.
    occupied: Vec<(f64, f64)>,
    /// Boxes of the point marks.
    blocks: Vec<Rect>,
    ellipse_px: Vec<(i32, i32)>,
    fix_px: Option<(i32, i32)>,
}

/// Draws the ellipse, lines of bearing, observer spots, markers and fix that fall in
/// the frame, in that order (the fix on top).
fn draw_marks(area: &Area, frame: &Frame, clean: &Clean) -> DrawResult<Marks> {
    let to_px = frame.to_px;
    let mut marks = Marks::default();
    if !clean.ellipse_m.is_empty() {
        let ring: Vec<(i32, i32)> = clean.ellipse_m.iter().map(|&p| px(to_px(p))).collect();
        area.draw(&Polygon::new(ring.clone(), OCHRE.mix(0.28).filled()))?;
        let mut closed = ring.clone();
        closed.push(ring[0]);
        area.draw(&PathElement::new(closed, OCHRE_DARK.stroke_width(2)))?;
        marks
            .occupied
            .extend(ring.iter().map(|&(x, y)| (x as f64, y as f64)));
        marks.ellipse_px = ring;
    }
    // Outliers first, so the lines used for the fix lie on top.
    for o in clean.observers.iter().filter(|o| o.outlier) {
        draw_bearing(area, frame, o, &mut marks)?;
    }
    for o in clean.observers.iter().filter(|o| !o.outlier) {
        draw_bearing(area, frame, o, &mut marks)?;
    }
    for o in &clean.observers {
        let at = (o.east_m, o.north_m);
        if !frame.shows(at) {
            continue;
        }
        let p = to_px(at);
        if o.outlier {
            area.draw(&Circle::new(px(p), 4, PAPER.filled()))?;
            area.draw(&Circle::new(px(p), 4, STONE.stroke_width(2)))?;
        } else {
            area.draw(&Circle::new(px(p), 4, SLATE.filled()))?;
        }
        marks.occupied.push(p);
        marks.blocks.push(Rect::around(p, 5.0));
    }
    for m in &clean.markers {
        let at = (m.east_m, m.north_m);
        if !frame.shows(at) {
            continue;
        }
        let p = to_px(at);
        draw_marker(area, p, m.kind)?;
        marks.occupied.push(p);
        marks.blocks.push(Rect::around(p, 7.0));
    }
    if let Some(n) = clean.next.filter(|n| frame.shows((n.east_m, n.north_m))) {
        let p = to_px((n.east_m, n.north_m));
        draw_next_spot(area, p)?;
        marks.occupied.push(p);
        marks.blocks.push(Rect::around(p, 9.0));
    }
    if let Some(y) = clean.you.filter(|y| frame.shows((y.east_m, y.north_m))) {
        let p = to_px((y.east_m, y.north_m));
        let r_px = y
            .accuracy_m
            .filter(|a| a.is_finite() && *a > 0.0)
            .map(|a| (to_px((y.east_m + a, y.north_m)).0 - p.0).abs());
        draw_you_are_here(area, p, r_px)?;
        marks.occupied.push(p);
        marks.blocks.push(Rect::around(p, 7.0));
    }
    if let Some(f) = clean.fix.filter(|&f| frame.shows(f)) {
        let p = to_px(f);
        draw_fix(area, p)?;
        marks.occupied.push(p);
        marks.blocks.push(Rect::around(p, 12.0));
        marks.fix_px = Some(px(p));
    }
    Ok(marks)
}

/// One line of bearing, cut to the frame: solid, or dashed and grey for an outlier.
fn draw_bearing(area: &Area, frame: &Frame, o: &Observer, marks: &mut Marks) -> DrawResult<()> {
    let Some(end) = bearing_end(o) else {
        return Ok(());
    };
    let Some((a, b)) = clip_segment((o.east_m, o.north_m), end, &frame.east, &frame.north) else {
        return Ok(());
    };
    let (pa, pb) = ((frame.to_px)(a), (frame.to_px)(b));
    let steps = ((pb.0 - pa.0).hypot(pb.1 - pa.1) / 10.0).ceil() as usize;
    for i in 0..=steps.min(500) {
        let t = i as f64 / steps.max(1) as f64;
        marks
            .occupied
            .push((pa.0 + t * (pb.0 - pa.0), pa.1 + t * (pb.1 - pa.1)));
    }
    let pts = vec![px(pa), px(pb)];
    if o.outlier {
        area.draw(&DashedPathElement::new(pts, 7, 5, STONE.stroke_width(2)))
    } else {
        area.draw(&PathElement::new(pts, SLATE.mix(0.85).stroke_width(1)))
    }
}

/// The bounding box of pixel points.
fn bbox(points: &[(i32, i32)]) -> Option<Rect> {
    let first = points.first()?;
    let mut r = Rect::around((first.0 as f64, first.1 as f64), 0.0);
    for p in points {
        r.x0 = r.x0.min(p.0 as f64);
        r.x1 = r.x1.max(p.0 as f64);
        r.y0 = r.y0.min(p.1 as f64);
        r.y1 = r.y1.max(p.1 as f64);
    }
    Some(r)
}

fn draw_map_on(root: &Area, input: &MapInput, look: &Look) -> DrawResult<MapLayout> {
    root.fill(&PAPER)?;
    let clean = Clean::new(input);
    let (title, subtitle) = header_lines(input, &clean);
    let (header, rest) = root.split_vertically(look.header_px(&title, &subtitle));
    // On a phone the plot is about square, the detail and legend beneath it.
    let (body, side) = look.split_body(&rest, look.width_px);

    draw_header(&header, look, title, subtitle)?;

    // Measure the plotting area first, then fit the view to it at one scale.
    let builder = || {
        let mut b = ChartBuilder::on(&body);
        b.margin(look.margin_px)
            .x_label_area_size(look.x_label_area_px)
            .y_label_area_size(look.y_label_area_px);
        b
    };
    let (xr, yr) = builder()
        .build_cartesian_2d(0f64..1f64, 0f64..1f64)?
        .plotting_area()
        .get_pixel_range();
    let span_px = (
        (xr.end - 1 - xr.start) as f64,
        (yr.end - 1 - yr.start) as f64,
    );
    let (east, north) = fit_view(&clean.view_points(input.view), span_px);
    let mut chart = builder().build_cartesian_2d(east.clone(), north.clone())?;

    let view_m = east.end - east.start;
    let decimals = if view_m < 20.0 { 1 } else { 0 };
    let tick = move |v: &f64| {
        let t = format!("{v:.decimals$}");
        if t.trim_start_matches('-')
            .chars()
            .all(|c| c == '0' || c == '.')
        {
            "0".to_string()
        } else {
            t
        }
    };
    chart
        .configure_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .max_light_lines(0)
        .axis_style(MUTED.stroke_width(1))
        .label_style(axis_font(look.tick_px, MUTED))
        .axis_desc_style(axis_font(look.label_px, MUTED))
        .x_desc("east, m")
        .y_desc("north, m")
        .x_labels(look.ticks)
        .y_labels(look.ticks)
        .x_label_formatter(&tick)
        .y_label_formatter(&tick)
        .draw()?;

    let plot = framed_plot(root, chart.plotting_area().get_pixel_range())?;

    let to_px = |p: (f64, f64)| -> (f64, f64) {
        let (x, y) = chart.backend_coord(&p);
        (x as f64, y as f64)
    };
    let frame = Frame {
        east: east.clone(),
        north: north.clone(),
        to_px: &to_px,
    };
    let px_per_m_east =
        (to_px((east.end, north.start)).0 - to_px((east.start, north.start)).0) / view_m;
    let px_per_m_north = (to_px((east.start, north.start)).1 - to_px((east.start, north.end)).1)
        / (north.end - north.start);

    let marks = draw_marks(root, &frame, &clean)?;

    // A detail around the fix when the ellipse is small on the map.
    let detail = detail_view(&clean, input.ellipse.as_ref(), px_per_m_east, look);
    let mut blocks = marks.blocks.clone();
    if let Some((de, dn)) = &detail {
        let corner0 = px(to_px((de.start, dn.start)));
        let corner1 = px(to_px((de.end, dn.end)));
        if (corner1.0 - corner0.0) >= 8 {
            root.draw(&Rectangle::new(
                [(corner0.0, corner1.1), (corner1.0, corner0.1)],
                MUTED.stroke_width(1),
            ))?;
        }
    }

    // Scale bar and north arrow in the emptiest corners.
    let scale_m = round_length(view_m * 0.22);
    let scale_label = length_text(scale_m);
    let (scale_box, bar_x0) = scale_bar_box(scale_m * px_per_m_east, &scale_label, look, |size| {
        emptiest_corner(&plot, size, 10.0, &marks.occupied, None)
    });
    let scale_bar_px = draw_scale_bar(
        root,
        &scale_box,
        bar_x0,
        scale_m * px_per_m_east,
        &scale_label,
        look,
    )?;
    let arrow_box = emptiest_corner(
        &plot,
        (26.0, 34.0 + look.subtitle_px),
        10.0,
        &marks.occupied,
        Some(&scale_box),
    );
    let north_arrow = draw_north_arrow(root, &arrow_box, look)?;
    blocks.push(scale_box);
    blocks.push(arrow_box);
    if let Some(r) = bbox(&marks.ellipse_px) {
        // A small ellipse stays readable; a large one may carry labels.
        if (r.x1 - r.x0) * (r.y1 - r.y0) < 0.05 * (plot.x1 - plot.x0) * (plot.y1 - plot.y0) {
            blocks.push(r);
        }
    }

    // Labels: markers first (their ids matter most), then observers. Markers inside
    // the detail are labelled there.
    let in_detail = |p: (f64, f64)| {
        detail
            .as_ref()
            .is_some_and(|(de, dn)| de.contains(&p.0) && dn.contains(&p.1))
    };
    let mut jobs: Vec<LabelJob> = walker_label_jobs(&clean, &to_px);
    for m in &clean.markers {
        if !in_detail((m.east_m, m.north_m)) {
            jobs.push(LabelJob {
                at: to_px((m.east_m, m.north_m)),
                text: m.label.clone(),
                colour: INK,
                gap: 8.0,
            });
        }
    }
    for o in clean.observers.iter().filter(|o| !o.outlier) {
        jobs.push(LabelJob {
            at: to_px((o.east_m, o.north_m)),
            text: o.label.clone(),
            colour: SLATE,
            gap: 6.0,
        });
    }
    for o in clean.observers.iter().filter(|o| o.outlier) {
        jobs.push(LabelJob {
            at: to_px((o.east_m, o.north_m)),
            text: o.label.clone(),
            colour: MUTED,
            gap: 6.0,
        });
    }
    let bounds = plot.inset(2.0);
    let mut placer = LabelPlacer::new(bounds);
    for b in &blocks {
        placer.block(*b);
    }
    let mut labels = draw_labels(root, &mut placer, &jobs, look.label_px)?;

    // The side column (beneath the plot on a phone): the detail, then the legend.
    let (sx, sy) = side.get_base_pixel();
    let margin = look.margin_px as f64;
    let mut legend_top = sy as f64 + margin;
    let mut detail_layout = None;
    if let Some((de, dn)) = detail {
        let size = look.legend_width_px();
        let top = legend_top + 10.0 + look.subtitle_px;
        let box_px = Rect::at(sx as f64 + margin, top, (size, size));
        root.draw(&Text::new(
            "Detail around the fix",
            px((box_px.x0, legend_top)),
            bold_style(look.subtitle_px, INK),
        ))?;
        let (d, mut l) = draw_detail(root, &clean, box_px, de, dn, look)?;
        labels.append(&mut l);
        detail_layout = Some(d);
        legend_top = box_px.y1 + 24.0;
    }
    let legend_bottom = draw_legend(
        root,
        (sx as f64 + margin, legend_top),
        input,
        &clean,
        detail_layout.is_some(),
        look,
    )?;
    let used_px = if look.stacked() {
        (legend_bottom + margin).ceil() as u32
    } else {
        MAP_HEIGHT_PX
    };

    Ok(MapLayout {
        plot: Some(plot),
        east,
        north,
        px_per_m_east,
        px_per_m_north,
        scale_bar_m: scale_m,
        scale_bar_px,
        north_arrow_box: Some(arrow_box),
        north_arrow,
        fix_px: marks.fix_px,
        ellipse_px: marks.ellipse_px,
        labels,
        detail: detail_layout,
        used_px,
    })
}

/// Labels for the walker's position and the next spot, placed before all others.
fn walker_label_jobs(clean: &Clean, to_px: &dyn Fn((f64, f64)) -> (f64, f64)) -> Vec<LabelJob> {
    let mut jobs = Vec::new();
    if let Some(y) = clean.you {
        jobs.push(LabelJob {
            at: to_px((y.east_m, y.north_m)),
            text: "you are here".into(),
            colour: INK,
            gap: 8.0,
        });
    }
    if let Some(n) = clean.next {
        let text = if n.label.trim().is_empty() {
            "next spot".to_string()
        } else {
            n.label.clone()
        };
        jobs.push(LabelJob {
            at: to_px((n.east_m, n.north_m)),
            text,
            colour: INK,
            gap: 10.0,
        });
    }
    jobs
}

/// The view of the detail, square around the fix, when the ellipse is small on the map
/// (under 90 pixels across) and the detail shows it at least twice as large.
fn detail_view(
    clean: &Clean,
    ellipse: Option<&Ellipse>,
    map_px_per_m: f64,
    look: &Look,
) -> Option<(Range<f64>, Range<f64>)> {
    let fix = clean.fix?;
    let a = ellipse
        .filter(|_| !clean.ellipse_m.is_empty())
        .map(|e| e.semi_major_m.abs().max(e.semi_minor_m.abs()))
        .unwrap_or(0.0);
    let half = (1.8 * a).max(DETAIL_MIN_HALF_M);
    let detail_px_per_m = look.legend_width_px() / (2.0 * half);
    (2.0 * a * map_px_per_m < 90.0 && detail_px_per_m >= 2.0 * map_px_per_m)
        .then_some((fix.0 - half..fix.0 + half, fix.1 - half..fix.1 + half))
}

/// Draws the detail into `box_px`: the same marks at a larger scale, its own scale
/// bar, and labels for the markers in it.
fn draw_detail(
    root: &Area,
    clean: &Clean,
    box_px: Rect,
    east: Range<f64>,
    north: Range<f64>,
    look: &Look,
) -> DrawResult<(DetailLayout, Vec<PlacedLabel>)> {
    let k = (box_px.x1 - box_px.x0) / (east.end - east.start);
    let to_px = |p: (f64, f64)| -> (f64, f64) {
        (
            box_px.x0 + (p.0 - east.start) * k,
            box_px.y1 - (p.1 - north.start) * k,
        )
    };
    root.draw(&Rectangle::new(
        [px((box_px.x0, box_px.y0)), px((box_px.x1, box_px.y1))],
        PAPER.filled(),
    ))?;
    // A light grid at the scale bar's spacing.
    let step = round_length((east.end - east.start) * 0.3);
    let mut g = (east.start / step).ceil() * step;
    while g < east.end {
        let x = to_px((g, north.start)).0;
        root.draw(&PathElement::new(
            vec![px((x, box_px.y0)), px((x, box_px.y1))],
            GRID.stroke_width(1),
        ))?;
        g += step;
    }
    let mut g = (north.start / step).ceil() * step;
    while g < north.end {
        let y = to_px((east.start, g)).1;
        root.draw(&PathElement::new(
            vec![px((box_px.x0, y)), px((box_px.x1, y))],
            GRID.stroke_width(1),
        ))?;
        g += step;
    }
    let frame = Frame {
        east: east.clone(),
        north: north.clone(),
        to_px: &to_px,
    };
    let marks = draw_marks(root, &frame, clean)?;
    root.draw(&Rectangle::new(
        [px((box_px.x0, box_px.y0)), px((box_px.x1, box_px.y1))],
        MUTED.stroke_width(1),
    ))?;
    let label = length_text(step);
    let (scale_box, bar_x0) = scale_bar_box(step * k, &label, look, |size| {
        emptiest_corner(&box_px, size, 6.0, &marks.occupied, None)
    });
    let scale_bar_px = draw_scale_bar(root, &scale_box, bar_x0, step * k, &label, look)?;
    let mut blocks = marks.blocks.clone();
    blocks.push(scale_box);
    let jobs: Vec<LabelJob> = clean
        .markers
        .iter()
        .filter(|m| frame.shows((m.east_m, m.north_m)))
        .map(|m| LabelJob {
            at: to_px((m.east_m, m.north_m)),
            text: m.label.clone(),
            colour: INK,
            gap: 8.0,
        })
        .collect();
    let mut walker = walker_label_jobs(clean, &to_px);
    walker.retain(|j| box_px.contains_point(j.at));
    let jobs: Vec<LabelJob> = walker.into_iter().chain(jobs).collect();
    let bounds = box_px.inset(2.0);
    let mut placer = LabelPlacer::new(bounds);
    for b in &blocks {
        placer.block(*b);
    }
    let labels = draw_labels(root, &mut placer, &jobs, look.label_px)?;
    Ok((
        DetailLayout {
            frame: box_px,
            px_per_m: k,
            scale_bar_m: step,
            scale_bar_px,
        },
        labels,
    ))
}

/// The box of a scale bar `bar_px` long labelled `label`, put where `corner` says, and
/// the left end of its bar.
fn scale_bar_box(
    bar_px: f64,
    label: &str,
    look: &Look,
    corner: impl Fn((f64, f64)) -> Rect,
) -> (Rect, f64) {
    let half0 = text_width_px("0", look.tick_px) / 2.0;
    let half_l = text_width_px(label, look.tick_px) / 2.0;
    let r = corner((bar_px + half0 + half_l + 20.0, 26.0 + look.tick_px));
    (r, r.x0 + 10.0 + half0)
}

fn draw_marker(area: &Area, p: (f64, f64), kind: MarkerKind) -> DrawResult<()> {
    match kind {
        MarkerKind::Emitter => {
            let tri = vec![
                px((p.0, p.1 - 7.0)),
                px((p.0 - 6.5, p.1 + 5.0)),
                px((p.0 + 6.5, p.1 + 5.0)),
            ];
            area.draw(&Polygon::new(tri.clone(), MOSS.filled()))?;
            let mut edge = tri.clone();
            edge.push(tri[0]);
            area.draw(&PathElement::new(edge, PAPER.stroke_width(1)))
        }
        MarkerKind::Structure => {
            area.draw(&Rectangle::new(
                [px((p.0 - 5.0, p.1 - 5.0)), px((p.0 + 5.0, p.1 + 5.0))],
                PLUM.filled(),
            ))?;
            area.draw(&Rectangle::new(
                [px((p.0 - 5.0, p.1 - 5.0)), px((p.0 + 5.0, p.1 + 5.0))],
                PAPER.stroke_width(1),
            ))
        }
    }
}

/// The suggested next spot: an open diamond.
fn draw_next_spot(area: &Area, p: (f64, f64)) -> DrawResult<()> {
    crate::picture::draw_diamond(area, p, 8.0, SLATE.stroke_width(2))
}

/// The walker: a filled dot with a white edge inside a faint ring of `accuracy_px`.
fn draw_you_are_here(area: &Area, p: (f64, f64), accuracy_px: Option<f64>) -> DrawResult<()> {
    if let Some(r) = accuracy_px.filter(|r| *r >= 1.0 && *r < 10_000.0) {
        let r = r.round() as i32;
        area.draw(&Circle::new(px(p), r, SLATE.mix(0.12).filled()))?;
        area.draw(&Circle::new(px(p), r, SLATE.mix(0.6).stroke_width(1)))?;
    }
    area.draw(&Circle::new(px(p), 6, PAPER.filled()))?;
    area.draw(&Circle::new(px(p), 4, INK.filled()))
}

/// The fix: a ring with four ticks and a centre dot.
fn draw_fix(area: &Area, p: (f64, f64)) -> DrawResult<()> {
    area.draw(&Circle::new(px(p), 7, PAPER.mix(0.6).filled()))?;
    area.draw(&Circle::new(px(p), 7, RUST.stroke_width(2)))?;
    for (dx, dy) in [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)] {
        area.draw(&PathElement::new(
            vec![
                px((p.0 + dx * 7.0, p.1 + dy * 7.0)),
                px((p.0 + dx * 12.0, p.1 + dy * 12.0)),
            ],
            RUST.stroke_width(2),
        ))?;
    }
    area.draw(&Circle::new(px(p), 2, RUST.filled()))
}

/// A two-part bar `bar_px` long from `bar_x0`, labelled 0 and its length; returns its
/// ends in pixels.
fn draw_scale_bar(
    area: &Area,
    frame: &Rect,
    bar_x0: f64,
    bar_px: f64,
    label: &str,
    look: &Look,
) -> DrawResult<(i32, i32)> {
    area.draw(&Rectangle::new(
        [px((frame.x0, frame.y0)), px((frame.x1, frame.y1))],
        PAPER.mix(0.85).filled(),
    ))?;
    let x0 = bar_x0.round() as i32;
    let x1 = (bar_x0 + bar_px).round() as i32;
    let xm = (bar_x0 + bar_px / 2.0).round() as i32;
    let y1 = (frame.y1 - 8.0).round() as i32;
    let y0 = y1 - 6;
    area.draw(&Rectangle::new([(x0, y0), (xm, y1)], INK.filled()))?;
    area.draw(&Rectangle::new([(xm, y0), (x1, y1)], PAPER.filled()))?;
    area.draw(&Rectangle::new([(x0, y0), (x1, y1)], INK.stroke_width(1)))?;
    let centred = text_style(look.tick_px, INK).pos(Pos::new(HPos::Center, VPos::Bottom));
    area.draw(&Text::new("0", (x0, y0 - 3), centred.clone()))?;
    area.draw(&Text::new(label.to_string(), (x1, y0 - 3), centred))?;
    Ok((x0, x1))
}

/// An arrowhead pointing up the page (north), half filled, with an N above it; returns
/// its tip and the middle of its base.
fn draw_north_arrow(
    area: &Area,
    frame: &Rect,
    look: &Look,
) -> DrawResult<((f64, f64), (f64, f64))> {
    area.draw(&Rectangle::new(
        [px((frame.x0, frame.y0)), px((frame.x1, frame.y1))],
        PAPER.mix(0.85).filled(),
    ))?;
    let cx = (frame.x0 + frame.x1) / 2.0;
    let tip = (cx, frame.y0 + 6.0 + look.subtitle_px);
    let base = frame.y1 - 4.0;
    let notch = (cx, base - 7.0);
    let left = (cx - 8.0, base);
    let right = (cx + 8.0, base);
    area.draw(&Polygon::new(
        vec![px(tip), px(left), px(notch)],
        INK.filled(),
    ))?;
    area.draw(&PathElement::new(
        vec![px(tip), px(right), px(notch), px(left), px(tip)],
        INK.stroke_width(1),
    ))?;
    area.draw(&Text::new(
        "N",
        px((cx, frame.y0 + 2.0)),
        bold_style(look.subtitle_px, INK).pos(Pos::new(HPos::Center, VPos::Top)),
    ))?;
    Ok((tip, (cx, base)))
}

/// The legend, one symbol and its meaning a row, from `top_left` down.
fn draw_legend(
    area: &Area,
    top_left: (f64, f64),
    input: &MapInput,
    clean: &Clean,
    detail: bool,
    look: &Look,
) -> DrawResult<f64> {
    #[derive(Clone, Copy)]
    enum Sym {
        Spot,
        Line,
        Outlier,
        Fix,
        Ellipse,
        Marker(MarkerKind),
        Detail,
        You,
        Next,
    }
    let mut entries: Vec<(Sym, String)> = Vec::new();
    if !clean.observers.is_empty() {
        entries.push((Sym::Spot, "observer spot, its reading".into()));
        entries.push((Sym::Line, "line of bearing".into()));
    }
    if clean.observers.iter().any(|o| o.outlier) {
        entries.push((Sym::Outlier, "outlier, left out of the fix".into()));
    }
    if clean.fix.is_some() {
        entries.push((Sym::Fix, "fix".into()));
    }
    if !clean.ellipse_m.is_empty() {
        let level = percent_text(input.confidence)
            .map(|p| format!("{p} % confidence ellipse"))
            .unwrap_or_else(|| "confidence ellipse".to_string());
        entries.push((Sym::Ellipse, level));
    }
    if clean.markers.iter().any(|m| m.kind == MarkerKind::Emitter) {
        entries.push((Sym::Marker(MarkerKind::Emitter), "emitter".into()));
    }
    if clean
        .markers
        .iter()
        .any(|m| m.kind == MarkerKind::Structure)
    {
        entries.push((Sym::Marker(MarkerKind::Structure), "structure".into()));
    }
    if detail {
        entries.push((Sym::Detail, "extent of the detail".into()));
    }
    if clean.you.is_some() {
        entries.push((Sym::You, "you are here, ring: 95 % accuracy".into()));
    }
    if clean.next.is_some() {
        entries.push((Sym::Next, "suggested next spot".into()));
    }
    let (x, mut y) = (top_left.0, top_left.1 + 8.0);
    for (sym, text) in entries {
        let c = (x + 11.0, y);
        match sym {
            Sym::Spot => area.draw(&Circle::new(px(c), 4, SLATE.filled()))?,
            Sym::Line => area.draw(&PathElement::new(
                vec![px((x, y)), px((x + 22.0, y))],
                SLATE.stroke_width(1),
            ))?,
            Sym::Outlier => {
                area.draw(&DashedPathElement::new(
                    vec![px((x, y)), px((x + 22.0, y))],
                    7,
                    5,
                    STONE.stroke_width(2),
                ))?;
                area.draw(&Circle::new(px((x, y)), 4, PAPER.filled()))?;
                area.draw(&Circle::new(px((x, y)), 4, STONE.stroke_width(2)))?;
            }
            Sym::Fix => draw_fix(area, c)?,
            Sym::Ellipse => {
                let e = Ellipse {
                    semi_major_m: 11.0,
                    semi_minor_m: 5.0,
                    orientation_deg: 90.0,
                };
                // Pixel y grows downwards; the ellipse is symmetric, so mirroring is moot.
                let ring: Vec<(i32, i32)> =
                    ellipse_polygon_m(c, &e, 32).into_iter().map(px).collect();
                area.draw(&Polygon::new(ring.clone(), OCHRE.mix(0.28).filled()))?;
                let mut closed = ring.clone();
                closed.push(ring[0]);
                area.draw(&PathElement::new(closed, OCHRE_DARK.stroke_width(2)))?;
            }
            Sym::Marker(kind) => draw_marker(area, c, kind)?,
            Sym::Detail => area.draw(&Rectangle::new(
                [px((x + 4.0, y - 6.0)), px((x + 18.0, y + 6.0))],
                MUTED.stroke_width(1),
            ))?,
            Sym::You => draw_you_are_here(area, c, Some(9.0))?,
            Sym::Next => draw_next_spot(area, c)?,
        }
        area.draw(&Text::new(
            text,
            px((x + 32.0, y)),
            text_style(look.label_px, INK).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
        y += look.row_px;
    }
    Ok(y)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn observer(east_m: f64, north_m: f64, line: u32, outlier: bool) -> Observer {
        // Bearing from the spot towards the origin.
        let bearing_deg = (-east_m).atan2(-north_m).to_degrees().rem_euclid(360.0);
        Observer {
            east_m,
            north_m,
            bearing_deg: if outlier {
                bearing_deg + 25.0
            } else {
                bearing_deg
            },
            line_length_m: east_m.hypot(north_m) * 1.3,
            label: format!("line {line}"),
            outlier,
        }
    }

    /// An invented walk around a fix at the origin.
    pub(crate) fn sample() -> MapInput {
        let spots = [
            (-310.0, 120.0),
            (-240.0, -210.0),
            (-60.0, -140.0),
            (150.0, -280.0),
            (330.0, -90.0),
            (290.0, 180.0),
            (60.0, 150.0),
            (-150.0, 300.0),
        ];
        let observers = spots
            .iter()
            .enumerate()
            .map(|(i, &(e, n))| observer(e, n, 12 + 3 * i as u32, i == 4))
            .collect();
        let m = |e, n, id: &str, kind| Marker {
            east_m: e,
            north_m: n,
            label: id.to_string(),
            kind,
        };
        MapInput {
            title: "Marrow Hill: carrier heard on 146.3400 MHz".into(),
            confidence: 0.95,
            fix: Some((4.0, -6.0)),
            ellipse: Some(Ellipse {
                semi_major_m: 30.0,
                semi_minor_m: 12.0,
                orientation_deg: 35.0,
            }),
            region_m: None,
            region_open_towards_deg: None,
            you_are_here: None,
            next_spot: None,
            view: MapView::All,
            observers,
            markers: vec![
                m(0.0, 0.0, "QK7MHR-R", MarkerKind::Emitter),
                m(4.0, 2.0, "QK7MHR-L", MarkerKind::Emitter),
                m(94.0, 45.0, "SKP-152", MarkerKind::Emitter),
                m(-62.0, 260.0, "FIRE-DSP", MarkerKind::Emitter),
                m(-8.0, -14.0, "tower", MarkerKind::Structure),
                m(22.0, -30.0, "guy anchor S", MarkerKind::Structure),
                m(-35.0, 12.0, "equipment hut", MarkerKind::Structure),
                m(60.0, -48.0, "fence", MarkerKind::Structure),
            ],
        }
    }

    fn render(input: &MapInput) -> (String, MapLayout) {
        let mut svg = String::new();
        let layout = draw_map(input, &WIDE, &mut svg).expect("drawn");
        (svg, layout)
    }

    #[test]
    fn the_map_parses_and_names_everything() {
        let input = sample();
        let (svg, layout) = render(&input);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert_eq!(
            crate::picture::scalable_root(
                svg.clone(),
                (MAP_WIDTH_PX, MAP_HEIGHT_PX),
                MAP_HEIGHT_PX
            ),
            map_svg(&input)
        );
        for o in &input.observers {
            assert!(svg.contains(&o.label), "{} missing", o.label);
        }
        for m in &input.markers {
            assert!(svg.contains(&m.label), "{} missing", m.label);
        }
        assert!(svg.contains("95 % confidence ellipse"));
        assert!(svg.contains("Marrow Hill"));
        assert!(layout.labels.iter().all(|l| l.clear));
    }

    #[test]
    fn placed_labels_do_not_overlap() {
        let (_, layout) = render(&sample());
        let boxes: Vec<&Rect> = layout.labels.iter().map(|l| &l.rect).collect();
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                assert!(!a.overlaps(b), "{a:?} overlaps {b:?}");
            }
        }
        let plot = layout.plot.expect("plot");
        let detail = layout.detail.expect("detail").frame;
        assert!(boxes.iter().all(|r| plot.contains(r) || detail.contains(r)));
        // The markers near the fix are labelled in the detail, the others on the map.
        let in_detail = |id: &str| {
            layout
                .labels
                .iter()
                .any(|l| l.text == id && detail.contains(&l.rect))
        };
        assert!(in_detail("tower") && in_detail("QK7MHR-R"));
        assert!(!in_detail("FIRE-DSP"));
    }

    #[test]
    fn the_detail_has_its_own_true_scale_bar() {
        let (_, layout) = render(&sample());
        let d = layout.detail.expect("a small ellipse gets a detail");
        let (x0, x1) = d.scale_bar_px;
        assert!(((x1 - x0) as f64 - d.scale_bar_m * d.px_per_m).abs() <= 1.0);
        assert!(d.px_per_m >= 2.0 * layout.px_per_m_east);
        // A large ellipse needs none.
        let mut big = sample();
        big.ellipse = Some(Ellipse {
            semi_major_m: 200.0,
            semi_minor_m: 90.0,
            orientation_deg: 120.0,
        });
        assert!(render(&big).1.detail.is_none());
    }

    #[test]
    fn both_axes_share_one_scale() {
        let (_, layout) = render(&sample());
        assert!(layout.px_per_m_east > 0.0);
        let ratio = layout.px_per_m_north / layout.px_per_m_east;
        assert!((ratio - 1.0).abs() < 0.005, "ratio {ratio}");
    }

    #[test]
    fn the_scale_bar_matches_the_pixel_scale() {
        let (svg, layout) = render(&sample());
        let (x0, x1) = layout.scale_bar_px;
        let expected = layout.scale_bar_m * layout.px_per_m_east;
        assert!(((x1 - x0) as f64 - expected).abs() <= 1.0);
        // A round length, labelled.
        let m = layout.scale_bar_m;
        let mantissa = m / 10f64.powf(m.log10().floor());
        assert!([1.0, 2.0, 5.0].iter().any(|r| (mantissa - r).abs() < 1e-9));
        assert!(svg.contains(&format!(">\n{}\n</text>", length_text(m))));
        // The outline of the bar is a rect of exactly that width.
        assert!(svg.contains(&format!("width=\"{}\" height=\"6\"", x1 - x0)));
    }

    #[test]
    fn ellipse_axes_point_where_the_orientation_says() {
        let north_south = Ellipse {
            semi_major_m: 30.0,
            semi_minor_m: 12.0,
            orientation_deg: 0.0,
        };
        let ring = ellipse_polygon_m((100.0, 200.0), &north_south, 8);
        assert!((ring[0].0 - 100.0).abs() < 1e-9 && (ring[0].1 - 230.0).abs() < 1e-9);
        assert!((ring[2].0 - 112.0).abs() < 1e-9 && (ring[2].1 - 200.0).abs() < 1e-9);
        let east_west = Ellipse {
            orientation_deg: 90.0,
            ..north_south
        };
        let ring = ellipse_polygon_m((0.0, 0.0), &east_west, 8);
        assert!((ring[0].0 - 30.0).abs() < 1e-9 && ring[0].1.abs() < 1e-9);
        assert!(ring[2].0.abs() < 1e-9 && (ring[2].1 + 12.0).abs() < 1e-9);
    }

    #[test]
    fn ellipse_vertices_lie_on_the_ellipse() {
        let e = Ellipse {
            semi_major_m: 30.0,
            semi_minor_m: 12.0,
            orientation_deg: 35.0,
        };
        let c = (4.0, -6.0);
        let ring = ellipse_polygon_m(c, &e, 72);
        let (s, co) = 35f64.to_radians().sin_cos();
        let mut far: f64 = 0.0;
        let mut near = f64::INFINITY;
        for &(x, y) in &ring {
            let (de, dn) = (x - c.0, y - c.1);
            // Coordinates along the major and minor axes.
            let u = de * s + dn * co;
            let v = de * co - dn * s;
            let on = (u / 30.0).powi(2) + (v / 12.0).powi(2);
            assert!((on - 1.0).abs() < 1e-9);
            far = far.max(de.hypot(dn));
            near = near.min(de.hypot(dn));
        }
        assert!((far - 30.0).abs() < 1e-9 && (near - 12.0).abs() < 1e-9);
        // The farthest vertex lies along 35° (or 215°).
        let (de, dn) = (ring[0].0 - c.0, ring[0].1 - c.1);
        assert!((de.atan2(dn).to_degrees() - 35.0).abs() < 1e-9);
    }

    #[test]
    fn the_drawn_ellipse_sits_on_the_fix_at_the_plot_scale() {
        let input = sample();
        let (_, layout) = render(&input);
        let fix = layout.fix_px.expect("fix drawn");
        let k = layout.px_per_m_east;
        let e = input.ellipse.expect("ellipse");
        let (s, c) = e.orientation_deg.to_radians().sin_cos();
        for (i, &(x, y)) in layout.ellipse_px.iter().enumerate() {
            // Back to metres about the fix; the SVG's y grows downwards.
            let de = (x - fix.0) as f64 / k;
            let dn = -(y - fix.1) as f64 / k;
            let u = de * s + dn * c;
            let v = de * c - dn * s;
            let t = 2.0 * PI * i as f64 / ELLIPSE_VERTICES as f64;
            // Within a pixel and a half of the exact position.
            let tol = 1.5 / k;
            assert!((u - 30.0 * t.cos()).abs() < tol, "vertex {i}: u {u}");
            assert!((v - 12.0 * t.sin()).abs() < tol, "vertex {i}: v {v}");
        }
    }

    #[test]
    fn the_view_holds_every_spot_and_marker() {
        let input = sample();
        let (_, layout) = render(&input);
        let inside = |e: f64, n: f64| layout.east.contains(&e) && layout.north.contains(&n);
        assert!(input.observers.iter().all(|o| inside(o.east_m, o.north_m)));
        assert!(input.markers.iter().all(|m| inside(m.east_m, m.north_m)));
    }

    /// A region open on one side runs its ring to the search's reach (50 km): the view
    /// keeps to the walk and the fix instead of shrinking them to a dot.
    #[test]
    fn an_open_region_does_not_stretch_the_view() {
        let mut input = sample();
        input.region_m = Some(vec![
            (4.0, -40.0),
            (50_000.0, -6.0),
            (4.0, 30.0),
            (-30.0, -6.0),
            (4.0, -40.0),
        ]);
        let (_, wide) = render(&input);
        assert!(wide.east.end - wide.east.start > 40_000.0);
        input.region_open_towards_deg = Some(90.0);
        let (_, layout) = render(&input);
        let span = layout.east.end - layout.east.start;
        assert!(span < 2_000.0, "{span}");
        let (_, caption) = header_lines(&input, &Clean::new(&input));
        assert!(caption.contains("open towards 90°"), "{caption}");
        let inside = |e: f64, n: f64| layout.east.contains(&e) && layout.north.contains(&n);
        assert!(input.observers.iter().all(|o| inside(o.east_m, o.north_m)));
    }

    #[test]
    fn the_north_arrow_points_up_in_a_corner() {
        let (svg, layout) = render(&sample());
        let arrow = layout.north_arrow_box.expect("arrow");
        assert!(layout.plot.expect("plot").contains(&arrow));
        // Straight up the page, which is north on a map at one scale with north up.
        let (tip, base) = layout.north_arrow;
        assert_eq!(tip.0, base.0);
        assert!(tip.1 < base.1);
        assert!(layout.px_per_m_north > 0.0);
        assert!(svg.contains(">\nN\n</text>"));
    }

    #[test]
    fn odd_inputs_draw_without_panicking() {
        let empty = MapInput::default();
        let (svg, _) = render(&empty);
        pim_tests::assert_xml_well_formed(&svg, "svg");
        assert!(svg.contains("No fix"));

        let single = MapInput {
            fix: Some((0.0, 0.0)),
            ellipse: Some(Ellipse {
                semi_major_m: 0.0,
                semi_minor_m: 0.0,
                orientation_deg: 0.0,
            }),
            ..MapInput::default()
        };
        pim_tests::assert_xml_well_formed(&map_svg(&single), "svg");

        let mut odd = sample();
        odd.fix = None;
        odd.observers[0].line_length_m = 0.0;
        odd.observers[1].east_m = f64::NAN;
        odd.observers[2].bearing_deg = f64::INFINITY;
        odd.markers[0].north_m = f64::INFINITY;
        odd.confidence = 7.0;
        let (svg, _) = render(&odd);
        pim_tests::assert_xml_well_formed(&svg, "svg");

        // Everything on one spot, and a far-flung marker.
        let mut stacked = sample();
        for o in &mut stacked.observers {
            o.east_m = 5.0;
            o.north_m = 5.0;
        }
        stacked.markers[0].east_m = 4.0e6;
        pim_tests::assert_xml_well_formed(&map_svg(&stacked), "svg");

        // A thin sliver of an ellipse.
        let mut sliver = sample();
        sliver.ellipse = Some(Ellipse {
            semi_major_m: 500.0,
            semi_minor_m: 0.0,
            orientation_deg: -400.0,
        });
        pim_tests::assert_xml_well_formed(&map_svg(&sliver), "svg");
    }

    #[test]
    fn semi_axes_are_sized_with_one_unit() {
        assert_eq!(semi_axes_text(18.2, 15.24), "18.2 × 15.2 m");
        assert_eq!(semi_axes_text(1200.0, 800.0), "1.2 km × 800 m");
        assert!(map_svg(&sample()).contains("semi-axes 30 × 12 m, major axis 35°"));
    }

    #[test]
    fn segments_are_cut_to_the_view() {
        let (e, n) = (0.0..10.0, 0.0..10.0);
        let cut = clip_segment((-5.0, 5.0), (15.0, 5.0), &e, &n).expect("crosses");
        assert_eq!(cut, ((0.0, 5.0), (10.0, 5.0)));
        assert!(clip_segment((-5.0, -5.0), (-1.0, 20.0), &e, &n).is_none());
        let inside = clip_segment((1.0, 1.0), (2.0, 3.0), &e, &n).expect("inside");
        assert_eq!(inside, ((1.0, 1.0), (2.0, 3.0)));
    }

    fn walker_sample() -> MapInput {
        MapInput {
            you_are_here: Some(YouAreHere {
                east_m: -120.0,
                north_m: 60.0,
                accuracy_m: Some(15.0),
            }),
            next_spot: Some(NextSpot {
                east_m: 80.0,
                north_m: -150.0,
                label: "next: 120 m at 69°".into(),
            }),
            ..sample()
        }
    }

    fn render_at(input: &MapInput, look: &Look) -> (String, MapLayout) {
        let mut svg = String::new();
        let layout = draw_map(input, look, &mut svg).expect("drawn");
        (svg, layout)
    }

    #[test]
    fn the_walker_and_the_next_spot_are_marked_and_labelled() {
        let input = walker_sample();
        for look in [WIDE, crate::picture::PHONE] {
            let (svg, layout) = render_at(&input, &look);
            pim_tests::assert_xml_well_formed(&svg, "svg");
            for text in ["you are here", "next: 120 m at 69°", "suggested next spot"] {
                assert!(svg.contains(text), "{text} missing at {look:?}");
            }
            let you = layout
                .labels
                .iter()
                .find(|l| l.text == "you are here")
                .expect("placed");
            assert!(you.clear, "{look:?}");
            // The accuracy ring: 15 m at the map's scale, as a circle of that radius.
            let r = (15.0 * layout.px_per_m_east).round() as i32;
            assert!(
                svg.contains(&format!("r=\"{r}\"")),
                "ring of {r} px at {look:?}"
            );
        }
        // Without a label the next spot is called so.
        let mut plain = walker_sample();
        plain.next_spot.as_mut().expect("next").label = " ".into();
        assert!(map_svg(&plain).contains(">\nnext spot\n</text>"));
    }

    #[test]
    fn labels_of_a_phone_s_map_are_at_least_twelve_pixels_as_shown() {
        // The phone's map is 360 px wide and shown at the width of a 390 px screen less
        // the page's margins (358 px in the ticket), or at most its own width.
        let svg = map_svg_at(&walker_sample(), &crate::picture::PHONE);
        assert!(svg.contains("viewBox=\"0 0 360 ") && svg.contains("max-width:360px"));
        let shown = 358.0 / 360.0;
        let mut sizes = svg
            .split("font-size=\"")
            .skip(1)
            .map(|s| {
                s[..s.find('"').expect("quoted")]
                    .trim_end_matches("px")
                    .parse::<f64>()
                    .expect("a size")
            })
            .peekable();
        assert!(sizes.peek().is_some());
        for px in sizes {
            assert!(px * shown >= crate::picture::PHONE_MIN_TEXT_PX, "{px} px");
        }
    }

    #[test]
    fn a_map_around_the_fix_opens_centred_on_it() {
        let mut input = walker_sample();
        input.view = MapView::AroundFix { half_width_m: 40.0 };
        for look in [WIDE, crate::picture::PHONE] {
            let (_, layout) = render_at(&input, &look);
            let fix = input.fix.expect("fix");
            let centre = (
                (layout.east.start + layout.east.end) / 2.0,
                (layout.north.start + layout.north.end) / 2.0,
            );
            assert!((centre.0 - fix.0).abs() < 1e-6 && (centre.1 - fix.1).abs() < 1e-6);
            // The walker and the next spot stay in view; the far spots need not.
            let inside = |e: f64, n: f64| layout.east.contains(&e) && layout.north.contains(&n);
            assert!(inside(-120.0, 60.0) && inside(80.0, -150.0));
            assert!(!inside(-310.0, 120.0));
        }
        // Without the walker it shows the fix with its half-width, not the whole walk.
        let mut near = sample();
        near.view = MapView::AroundFix { half_width_m: 40.0 };
        let (_, layout) = render(&near);
        assert!(layout.east.end - layout.east.start < 300.0);
        assert!(layout.east.contains(&-36.0) && layout.east.contains(&44.0));
        // No fix: centred on the walker.
        let mut lost = walker_sample();
        lost.fix = None;
        lost.view = MapView::AroundFix { half_width_m: 40.0 };
        let (_, layout) = render(&lost);
        assert!(((layout.east.start + layout.east.end) / 2.0 + 120.0).abs() < 1e-6);
    }

    /// Writes sample maps into the directory `$PIM_PICTURES` when that variable is set,
    /// to look at while working on the style.
    #[test]
    fn write_sample_when_asked() {
        if let Ok(dir) = std::env::var("PIM_PICTURES") {
            let mut no_fix = sample();
            no_fix.fix = None;
            let mut far = sample();
            far.markers[3].north_m = 2600.0;
            far.markers[3].east_m = -900.0;
            let oriented = |deg: f64| {
                let mut m = sample();
                m.ellipse = Some(Ellipse {
                    semi_major_m: 60.0,
                    semi_minor_m: 15.0,
                    orientation_deg: deg,
                });
                m
            };
            for (name, input) in [
                ("map", sample()),
                ("map-ellipse-0", oriented(0.0)),
                ("map-ellipse-90", oriented(90.0)),
                ("map-no-fix", no_fix),
                ("map-far-marker", far),
                ("map-empty", MapInput::default()),
            ] {
                std::fs::write(format!("{dir}/{name}.svg"), map_svg(&input)).expect("written");
            }
        }
    }
}
