//! The waterfall of a recording: time down, frequency across, level in a perceptual
//! colour map with its scale; the intervals of each watched peak and emitter as bars
//! beside it; the peaks labelled with the sweep's own decision.
//!
//! **Bounded.** [`WaterfallGrid`] folds the sweeps, as they stream past, into at most
//! [`MAX_ROWS`] × [`MAX_COLUMNS`] cells by maximum (a carrier one bin wide still shows),
//! so the picture's size does not grow with the recording.
//!
//! **Colour map.** Viridis (S. van der Walt and N. Smith, the matplotlib default since
//! 2.0): perceptually uniform and readable in greyscale and by most colour-blind eyes;
//! nine stops interpolated linearly (stop values from memory).
//!
//! The picture is drawn 390 units wide, the width of a phone, and scales to its box.

use std::fmt::Write as _;

use pim_io::text::xml_escape;

/// The most rows (time) in the picture.
pub const MAX_ROWS: usize = 240;
/// The most columns (frequency) in the picture.
pub const MAX_COLUMNS: usize = 260;

/// Viridis stops, from low to high (from memory).
const VIRIDIS: [(u8, u8, u8); 9] = [
    (0x44, 0x01, 0x54),
    (0x48, 0x28, 0x78),
    (0x3e, 0x49, 0x89),
    (0x31, 0x68, 0x8e),
    (0x26, 0x82, 0x8e),
    (0x1f, 0x9e, 0x89),
    (0x35, 0xb7, 0x79),
    (0x6e, 0xce, 0x58),
    (0xfd, 0xe7, 0x25),
];

/// The viridis colour at `x` in 0…1, as `#rrggbb`.
pub fn viridis(x: f64) -> String {
    let x = if x.is_finite() {
        x.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let pos = x * (VIRIDIS.len() - 1) as f64;
    let i = (pos.floor() as usize).min(VIRIDIS.len() - 2);
    let t = pos - i as f64;
    let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * t).round() as u8;
    let (a, b) = (VIRIDIS[i], VIRIDIS[i + 1]);
    format!(
        "#{:02x}{:02x}{:02x}",
        mix(a.0, b.0),
        mix(a.1, b.1),
        mix(a.2, b.2)
    )
}

/// Sweeps folded into a bounded grid of cells by maximum.
#[derive(Clone, Debug)]
pub struct WaterfallGrid {
    rows: usize,
    columns: usize,
    sweeps: usize,
    points: usize,
    cells: Vec<f32>,
}

impl WaterfallGrid {
    /// A grid for `sweeps` sweeps of `points` points.
    pub fn new(sweeps: usize, points: usize) -> WaterfallGrid {
        let rows = sweeps.clamp(1, MAX_ROWS);
        let columns = points.clamp(1, MAX_COLUMNS);
        WaterfallGrid {
            rows,
            columns,
            sweeps: sweeps.max(1),
            points: points.max(1),
            cells: vec![f32::NEG_INFINITY; rows * columns],
        }
    }

    /// Folds sweep number `sweep` in.
    pub fn add(&mut self, sweep: usize, levels_dbm: &[f64]) {
        let row = (sweep * self.rows / self.sweeps).min(self.rows - 1);
        let cells = &mut self.cells[row * self.columns..(row + 1) * self.columns];
        for (i, &l) in levels_dbm.iter().enumerate() {
            let c = (i * self.columns / self.points).min(self.columns - 1);
            cells[c] = cells[c].max(l as f32);
        }
    }
}

/// A bar of intervals beside the waterfall.
#[derive(Clone, Debug)]
pub struct Track {
    /// Its short label above the bar (`P1`, `E2`).
    pub label: String,
    /// Its line in the key (`P1 146.340 MHz product: 2·A − B`).
    pub key: String,
    /// The runs of present sweeps as (first, last) sweep numbers.
    pub runs: Vec<(usize, usize)>,
    /// The grid point it watches, for a peak marked above the waterfall.
    pub peak_point: Option<usize>,
    /// Whether it is a product peak (drawn in the product's colour).
    pub product: bool,
}

/// What the waterfall shows.
#[derive(Clone, Debug)]
pub struct WaterfallInput<'a> {
    /// The title.
    pub title: String,
    /// The folded sweeps.
    pub grid: &'a WaterfallGrid,
    /// The first and last frequencies, MHz.
    pub span_mhz: (f64, f64),
    /// The first and last sweeps' times as text.
    pub times: (String, String),
    /// The bars.
    pub tracks: Vec<Track>,
}

/// The waterfall as an SVG document, 390 units wide.
pub fn waterfall_svg(w: &WaterfallInput) -> String {
    let g = w.grid;
    let finite: Vec<f32> = g.cells.iter().copied().filter(|v| v.is_finite()).collect();
    let (mut lo, mut hi) = finite
        .iter()
        .fold((f32::INFINITY, f32::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if !lo.is_finite() || !hi.is_finite() {
        (lo, hi) = (-120.0, -60.0);
    }
    // The scale from the median cell (the floor) to the highest, 5 dB steps.
    let mut sorted = finite.clone();
    sorted.sort_by(|a, b| a.total_cmp(b));
    if let Some(&m) = sorted.get(sorted.len() / 2) {
        lo = m;
    }
    let lo = ((lo as f64) / 5.0).floor() * 5.0;
    let hi = (((hi as f64) / 5.0).ceil() * 5.0).max(lo + 5.0);
    let tracks = w.tracks.len().min(12);
    let bar_w = 9.0;
    let (x0, y0) = (6.0, 44.0);
    let width = 390.0;
    let plot_w = width - x0 - 6.0 - tracks as f64 * (bar_w + 2.0) - 4.0;
    let plot_h = 260.0;
    let (cw, ch) = (plot_w / g.columns as f64, plot_h / g.rows as f64);
    // The key, a long line split after its colon so that it fits 390 units.
    let key: Vec<String> = w
        .tracks
        .iter()
        .take(12)
        .flat_map(|t| match t.key.split_once(": ") {
            Some((a, b)) if t.key.chars().count() > 62 => {
                vec![format!("{a}:"), format!("    {b}")]
            }
            _ => vec![t.key.clone()],
        })
        .collect();
    let key_lines = key.len();
    let height = y0 + plot_h + 62.0 + key_lines as f64 * 13.0;
    let mut s = String::new();
    let _ = write!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height:.0}" width="100%" style="max-width:{width}px;height:auto" font-family="sans-serif" font-size="10" shape-rendering="crispEdges">"#
    );
    let _ = write!(
        s,
        r##"<rect width="{width}" height="{height:.0}" fill="#ffffff"/>"##
    );
    let _ = write!(
        s,
        r#"<text x="{x0}" y="14" font-size="12" font-weight="bold">{}</text>"#,
        xml_escape(&w.title)
    );
    let _ = write!(
        s,
        r#"<text x="{x0}" y="27">time down: {} to {}</text>"#,
        xml_escape(&w.times.0),
        xml_escape(&w.times.1)
    );
    // Cells, each row run-length merged by colour step.
    let steps = 32.0;
    for r in 0..g.rows {
        let row = &g.cells[r * g.columns..(r + 1) * g.columns];
        let mut c = 0;
        while c < g.columns {
            let q = |v: f32| {
                if v.is_finite() {
                    (((v as f64 - lo) / (hi - lo)).clamp(0.0, 1.0) * steps).round() as i32
                } else {
                    -1
                }
            };
            let k = q(row[c]);
            let mut e = c + 1;
            while e < g.columns && q(row[e]) == k {
                e += 1;
            }
            let fill = if k < 0 {
                "#dddddd".to_string()
            } else {
                viridis(k as f64 / steps)
            };
            let _ = write!(
                s,
                r#"<rect x="{:.2}" y="{:.2}" width="{:.2}" height="{:.2}" fill="{fill}"/>"#,
                x0 + c as f64 * cw,
                y0 + r as f64 * ch,
                (e - c) as f64 * cw + 0.05,
                ch + 0.05
            );
            c = e;
        }
    }
    let _ = write!(
        s,
        r##"<rect x="{x0}" y="{y0}" width="{plot_w:.2}" height="{plot_h}" fill="none" stroke="#333333"/>"##
    );
    // Peaks marked above the waterfall with their label.
    for t in &w.tracks {
        if let Some(p) = t.peak_point {
            let x = x0 + (p as f64 + 0.5) / g.points as f64 * plot_w;
            let _ = write!(
                s,
                r##"<path d="M{x:.1} {:.1} l-3 -5 h6 z" fill="#222222"/><text x="{x:.1}" y="{:.1}" text-anchor="middle" font-size="9">{}</text>"##,
                y0 - 1.0,
                y0 - 8.0,
                xml_escape(&t.label)
            );
        }
    }
    // Frequency axis.
    let ya = y0 + plot_h + 12.0;
    let _ = write!(
        s,
        r#"<text x="{x0}" y="{ya:.1}">{:.3} MHz</text><text x="{:.1}" y="{ya:.1}" text-anchor="end">{:.3} MHz</text>"#,
        w.span_mhz.0,
        x0 + plot_w,
        w.span_mhz.1
    );
    // Bars beside the waterfall.
    for (k, t) in w.tracks.iter().take(tracks).enumerate() {
        let x = x0 + plot_w + 6.0 + k as f64 * (bar_w + 2.0);
        let _ = write!(
            s,
            r##"<rect x="{x:.1}" y="{y0}" width="{bar_w}" height="{plot_h}" fill="#f0f0f0"/><text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="8">{}</text>"##,
            x + bar_w / 2.0,
            y0 - 3.0,
            xml_escape(&t.label)
        );
        let colour = if t.product { "#c0392b" } else { "#2c3e50" };
        for &(a, b) in &t.runs {
            let ya = y0 + a as f64 / g.sweeps as f64 * plot_h;
            let yb = y0 + (b + 1) as f64 / g.sweeps as f64 * plot_h;
            let _ = write!(
                s,
                r#"<rect x="{x:.1}" y="{ya:.2}" width="{bar_w}" height="{:.2}" fill="{colour}"/>"#,
                (yb - ya).max(0.8)
            );
        }
    }
    // The colour scale.
    let ys = ya + 8.0;
    let scale_w = 200.0;
    for i in 0..40 {
        let _ = write!(
            s,
            r#"<rect x="{:.2}" y="{ys:.1}" width="{:.2}" height="8" fill="{}"/>"#,
            x0 + i as f64 * scale_w / 40.0,
            scale_w / 40.0 + 0.05,
            viridis(i as f64 / 39.0)
        );
    }
    let _ = write!(
        s,
        r#"<text x="{x0}" y="{:.1}">{lo:.0} dBm</text><text x="{:.1}" y="{:.1}" text-anchor="end">{hi:.0} dBm</text><text x="{:.1}" y="{:.1}">level (max per cell)</text>"#,
        ys + 19.0,
        x0 + scale_w,
        ys + 19.0,
        x0 + scale_w + 6.0,
        ys + 7.0
    );
    // The key.
    for (k, line) in key.iter().enumerate() {
        let _ = write!(
            s,
            r#"<text x="{x0}" y="{:.1}" xml:space="preserve">{}</text>"#,
            ys + 34.0 + k as f64 * 13.0,
            xml_escape(line)
        );
    }
    s.push_str("</svg>\n");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn viridis_ends_and_bounded_grid() {
        assert_eq!(viridis(0.0), "#440154");
        assert_eq!(viridis(1.0), "#fde725");
        let mut g = WaterfallGrid::new(10_000, 10_000);
        g.add(9_999, &vec![-100.0; 10_000]);
        assert_eq!(g.cells.len(), MAX_ROWS * MAX_COLUMNS);
        let svg = waterfall_svg(&WaterfallInput {
            title: "t <x>".into(),
            grid: &g,
            span_mhz: (146.0, 154.0),
            times: ("a".into(), "b".into()),
            tracks: vec![Track {
                label: "P1".into(),
                key: "P1 product".into(),
                runs: vec![(0, 10)],
                peak_point: Some(30),
                product: true,
            }],
        });
        assert!(svg.contains("t &lt;x&gt;") && svg.contains("viewBox=\"0 0 390"));
    }
}
