//! The walk's next spot in words and JSON: where to take the next bearing, and how the
//! region should shrink.

use pim_core::fix::Fix;
use pim_core::geo::{distance_and_azimuth, GeoPoint};
use pim_core::walk::{ScoredSpot, MIN_SPOT_RANGE_M};
use pim_core::Error;
use pim_io::fieldlog::LogRow;
use pim_io::precision::{fixed, signed};
use serde_json::{json, Value};

use crate::text_table::{Align, TextTable};

/// A spot's name, or its coordinates when it has none (`45.104583, -122.414028`).
pub fn spot_label(s: &ScoredSpot) -> String {
    match &s.spot.name {
        Some(name) => name.clone(),
        None => format!(
            "{:.6}, {:.6}",
            s.spot.position.lat_deg, s.spot.position.lon_deg
        ),
    }
}

/// The columns of the spot listing in CSV and Markdown.
const SPOT_COLUMNS: [&str; 8] = [
    "rank",
    "spot",
    "lat_deg",
    "lon_deg",
    "range_m",
    "antenna_points_deg",
    "ellipse_after_semi_major_m",
    "ellipse_after_semi_minor_m",
];

/// The spot listing's columns for people: the table's and the Markdown's, the last
/// joining the two semi-axes.
const SPOT_HEADERS: [(&str, Align); 7] = [
    ("#", Align::Right),
    ("spot", Align::Left),
    ("lat", Align::Right),
    ("lon", Align::Right),
    ("range m", Align::Right),
    ("antenna points °", Align::Right),
    ("semi-axes after m", Align::Right),
];

fn spot_cells(rank: usize, s: &ScoredSpot) -> [String; 8] {
    [
        rank.to_string(),
        spot_label(s),
        format!("{:.6}", s.spot.position.lat_deg),
        format!("{:.6}", s.spot.position.lon_deg),
        format!("{:.0}", s.distance_m),
        format!("{:.0}", s.bearing_to_fix_deg),
        format!("{:.0}", s.expected.semi_major_m),
        format!("{:.0}", s.expected.semi_minor_m),
    ]
}

/// The best spot and the alternatives as CSV (spreadsheet-safe), best first.
pub fn next_csv(
    out: &mut dyn std::io::Write,
    best: &ScoredSpot,
    alternatives: &[ScoredSpot],
) -> std::io::Result<()> {
    crate::csv_out::write_row(out, SPOT_COLUMNS)?;
    for (i, s) in std::iter::once(best).chain(alternatives).enumerate() {
        crate::csv_out::write_row(out, spot_cells(i + 1, s))?;
    }
    Ok(())
}

/// The region now and the σ assumed of the next bearing, one line.
fn now_line(fix: &Fix, sigma_deg: f64) -> String {
    if let (true, Some(m)) = (fix.readings.is_empty(), &fix.level_model) {
        return format!(
            "Now: {} from {} levels; next level assumed σ {:.1} dB.\n",
            crate::fix::region_claimed(fix),
            fix.n_used,
            m.sigma_db
        );
    }
    format!(
        "Now: {} from {} readings; next bearing assumed σ {:.1}°.\n",
        crate::fix::region_claimed(fix),
        fix.n_used,
        sigma_deg
    )
}

/// The best spot and the alternatives as a Markdown table under the region now.
pub fn next_markdown(
    fix: &Fix,
    sigma_deg: f64,
    best: &ScoredSpot,
    alternatives: &[ScoredSpot],
) -> String {
    let mut out = format!("{}\n", now_line(fix, sigma_deg));
    let headers: Vec<&str> = SPOT_HEADERS.iter().map(|(h, _)| *h).collect();
    out.push_str(&format!(
        "| {} |\n|---:|---|---:|---:|---:|---:|---|\n",
        headers.join(" | ")
    ));
    for (i, s) in std::iter::once(best).chain(alternatives).enumerate() {
        let c = spot_cells(i + 1, s);
        out.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} | {} × {} |\n",
            c[0],
            crate::document::md_inline(&c[1]),
            c[2],
            c[3],
            c[4],
            c[5],
            c[6],
            c[7]
        ));
    }
    out
}

/// One scored spot as JSON.
pub fn spot_json(s: &ScoredSpot) -> serde_json::Value {
    json!({
        "name": s.spot.name,
        "lat_deg": s.spot.position.lat_deg,
        "lon_deg": s.spot.position.lon_deg,
        "distance_m": s.distance_m,
        "bearing_to_fix_deg": s.bearing_to_fix_deg,
        "expected_semi_major_m": s.expected.semi_major_m,
        "expected_semi_minor_m": s.expected.semi_minor_m,
        "information_det": s.information_det,
    })
}

/// The walk page's next spot: the best one with the walk to it from the newest
/// reading's spot, or why there is none.
pub fn page_next_json(best: Option<&ScoredSpot>, from: Option<GeoPoint>) -> Value {
    let Some(best) = best else {
        return json!({"none": format!(
            "no candidate spot is at least {MIN_SPOT_RANGE_M:.0} m from the fix"
        )});
    };
    let walk_to = from.map(|p| {
        let (d, az) = distance_and_azimuth(p, best.spot.position);
        json!({"distance_m": d, "bearing_deg": az})
    });
    json!({
        "name": best.spot.name,
        "lat_deg": best.spot.position.lat_deg,
        "lon_deg": best.spot.position.lon_deg,
        "distance_from_fix_m": best.distance_m,
        "bearing_to_fix_deg": best.bearing_to_fix_deg,
        "expected_semi_major_m": best.expected.semi_major_m,
        "expected_semi_minor_m": best.expected.semi_minor_m,
        "walk": walk_to,
    })
}

/// A refused reading for the walk page: the message beside the input it concerns, when
/// the error names one of the page's fields.
pub fn form_error_json(e: &Error) -> Value {
    let field = e
        .place
        .as_ref()
        .filter(|p| p.line.is_none())
        .map(|p| p.source.as_str())
        // the page's inputs are named by the log column each fills
        .filter(|s| pim_io::fieldlog::LOG_COLUMNS.contains(s));
    json!({
        "field": field,
        "message": match field {
            Some(_) => e.message.clone(),
            None => e.to_string(),
        },
    })
}

/// The best spot, the region now and the alternatives, as JSON.
pub fn next_json(
    fix: &Fix,
    sigma_deg: f64,
    best: &ScoredSpot,
    alternatives: &[ScoredSpot],
) -> Value {
    let mut v = spot_json(best);
    v["current"] = json!({
        "semi_major_m": fix.ellipse.semi_major_m,
        "semi_minor_m": fix.ellipse.semi_minor_m,
        "orientation_deg": fix.ellipse.orientation_deg,
        "confidence": fix.ellipse.confidence,
    });
    v["sigma_deg_assumed"] = json!(sigma_deg);
    v["alternatives"] = alternatives.iter().map(spot_json).collect();
    v
}

/// Where to go next, in words, with the alternatives as a table.
pub fn next_text(
    fix: &Fix,
    sigma_deg: f64,
    best: &ScoredSpot,
    alternatives: &[ScoredSpot],
) -> String {
    let mut out = now_line(fix, sigma_deg);
    out.push_str(&format!(
        "Go to {}, {:.0} m from the fix; expect the antenna to point {:.0}°.\n\n",
        match &best.spot.name {
            Some(name) => format!(
                "{name}: {:.6}, {:.6}",
                best.spot.position.lat_deg, best.spot.position.lon_deg
            ),
            None => spot_label(best),
        },
        best.distance_m,
        best.bearing_to_fix_deg
    ));
    let mut t = TextTable::new(&SPOT_HEADERS);
    for (i, s) in std::iter::once(best).chain(alternatives).enumerate() {
        let c = spot_cells(i + 1, s);
        t.push(vec![
            c[0].clone(),
            c[1].clone(),
            c[2].clone(),
            c[3].clone(),
            c[4].clone(),
            c[5].clone(),
            format!("{} × {}", c[6], c[7]),
        ]);
    }
    out.push_str(&t.render_within(crate::text_table::TERMINAL_WIDTH));
    crate::text_table::wrap_lines(&out, crate::text_table::TERMINAL_WIDTH)
}

/// The running fix in one line, as `pim log` shows it after each change to the log.
pub fn running_fix_line(fix: &Fix) -> String {
    format!(
        "Running fix {:.6}, {:.6} from {} readings ({}); {}.\n",
        fix.position.lat_deg,
        fix.position.lon_deg,
        fix.n_used,
        crate::fix::method_and_measurements(fix),
        crate::fix::region_claimed(fix),
    )
}

/// A robust weight below this marks a reading as down-weighted in the listing.
const DOWN_WEIGHTED: f64 = 0.999;

/// The columns of the readings listing as CSV names them (as the JSON does): the table's
/// and the Markdown's in the same order, the logged bearing and its north apart.
const LISTING_COLUMNS: [&str; 11] = [
    "line",
    "time",
    "lat_deg",
    "lon_deg",
    "bearing_deg",
    "logged_bearing_deg",
    "north",
    "residual_deg",
    "weight",
    "status",
    "note",
];

fn north_name(north: pim_io::fieldlog::North) -> &'static str {
    match north {
        pim_io::fieldlog::North::True => "true",
        pim_io::fieldlog::North::Magnetic => "magnetic",
    }
}

/// The same columns for people: the table's and the Markdown's headers.
const LISTING_HEADERS: [(&str, Align); 10] = [
    ("line", Align::Right),
    ("time", Align::Left),
    ("lat", Align::Right),
    ("lon", Align::Right),
    ("true °", Align::Right),
    ("as logged", Align::Right),
    ("residual °", Align::Right),
    ("weight", Align::Right),
    ("status", Align::Left),
    ("note", Align::Left),
];

/// A row's bearing from true north, as the fix used it before any reversal; the logged
/// bearing where the row gives none used.
fn true_bearing_deg(row: &LogRow, fit: Option<&pim_core::fix::ReadingFit>) -> Option<f64> {
    match fit {
        Some(f) if f.flipped => Some((f.bearing_deg + 180.0).rem_euclid(360.0)),
        Some(f) => Some(f.bearing_deg),
        None => row.bearing_deg,
    }
}

/// The bearing as logged when its north was not true (`246.9 magnetic`), else empty.
fn logged_text(row: &LogRow) -> String {
    match row.north {
        pim_io::fieldlog::North::True => String::new(),
        pim_io::fieldlog::North::Magnetic => row
            .bearing_deg
            .map_or(String::new(), |b| format!("{b:.1} mag")),
    }
}

/// Each row of the log as the listing shows it: line, time, position, bearing from true
/// north (with the logged bearing where it was magnetic), residual (degrees) and weight
/// at the running fix, and its status: down-weighted, flagged as an outlier, taken
/// reversed, or not used (a repeat of an earlier reading).
fn listing_cells(fix: &Fix, rows: &[LogRow]) -> Vec<[String; 10]> {
    rows.iter()
        .map(|row| {
            let fit = fix.readings.iter().find(|r| r.line == row.line);
            let level = fix.levels.iter().find(|l| l.line == row.line);
            let position = fit
                .map(|f| f.observer)
                .or(level.map(|l| l.observer))
                .or(row.position);
            let mut flags = Vec::new();
            match fit {
                None if level.is_some() || (row.bearing_deg.is_none() && fix.levels.is_empty()) => {
                }
                None => flags.push("not used (a repeat)"),
                Some(f) => {
                    if f.outlier {
                        flags.push("outlier");
                    } else if f.weight < DOWN_WEIGHTED {
                        flags.push("down-weighted");
                    }
                    if f.flipped {
                        flags.push("taken reversed");
                    }
                }
            }
            let level_words = level.map(crate::fix::level_status);
            let mut flags: Vec<&str> = flags;
            if let Some(w) = &level_words {
                flags.push(w);
            }
            [
                row.line.to_string(),
                row.time.map(pim_io::text::time_text).unwrap_or_default(),
                position.map_or(String::new(), |p| format!("{:.6}", p.lat_deg)),
                position.map_or(String::new(), |p| format!("{:.6}", p.lon_deg)),
                true_bearing_deg(row, fit).map_or(String::new(), |b| fixed(b, 1)),
                logged_text(row),
                fit.map_or(String::new(), |f| signed(f.residual_deg, 1)),
                fit.map_or(String::new(), |f| fixed(f.weight, 2)),
                flags.join(", "),
                row.note.clone().unwrap_or_default(),
            ]
        })
        .collect()
}

/// The log's readings with their residuals at the running fix, as a text table under the
/// running fix's line, its text columns wrapped to the terminal's width; the time is left
/// out unless `wide`.
pub fn log_listing(fix: &Fix, rows: &[LogRow], wide: bool) -> String {
    let keep = |i: usize| wide || i != 1;
    let headers: Vec<(&str, Align)> = (0..LISTING_HEADERS.len())
        .filter(|&i| keep(i))
        .map(|i| LISTING_HEADERS[i])
        .collect();
    let mut t = TextTable::new(&headers);
    for cells in listing_cells(fix, rows) {
        t.push(
            cells
                .into_iter()
                .enumerate()
                .filter(|(i, _)| keep(*i))
                .map(|(_, c)| c)
                .collect(),
        );
    }
    let width = crate::text_table::TERMINAL_WIDTH;
    let mut out = crate::text_table::wrap_lines(&running_fix_line(fix), width);
    out.push_str(&if wide {
        t.render()
    } else {
        t.render_within(width)
    });
    if rows
        .iter()
        .any(|r| r.north == pim_io::fieldlog::North::Magnetic)
    {
        out.push_str("true °: the bearing from true north the fix uses; as logged: a bearing logged from magnetic\n  north (mag), turned to true by the declination (WMM2025).\n");
    }
    if !wide {
        out.push_str("Not shown: the time; --wide shows it.\n");
    }
    out
}

/// The listing as Markdown: the running fix's line, then a table.
pub fn log_listing_markdown(fix: &Fix, rows: &[LogRow]) -> String {
    let table = crate::document::Block::Table {
        headers: LISTING_HEADERS.iter().map(|(h, _)| h.to_string()).collect(),
        right: LISTING_HEADERS
            .iter()
            .map(|(_, a)| *a == Align::Right)
            .collect(),
        rows: listing_cells(fix, rows)
            .into_iter()
            .map(|c| c.to_vec())
            .collect(),
    };
    format!(
        "{}\n{}",
        crate::document::md_text(running_fix_line(fix).trim_end()),
        crate::document::markdown(&[table])
    )
}

/// The listing as CSV (spreadsheet-safe), one row per reading.
pub fn log_listing_csv(
    out: &mut dyn std::io::Write,
    fix: &Fix,
    rows: &[LogRow],
) -> std::io::Result<()> {
    crate::csv_out::write_row(out, LISTING_COLUMNS)?;
    for (c, row) in listing_cells(fix, rows).into_iter().zip(rows) {
        let mut cells = c.to_vec();
        cells[5] = row.bearing_deg.map_or(String::new(), |b| fixed(b, 1));
        cells.insert(6, north_name(row.north).to_string());
        crate::csv_out::write_row(out, cells)?;
    }
    Ok(())
}

/// The listing as JSON: the running fix (as `pim fix --format json` gives it, without
/// corrections) and each reading with its number in the log (from 1), residual, weight
/// and status.
pub fn log_listing_json(fix: &Fix, rows: &[LogRow]) -> Value {
    let readings: Vec<Value> = listing_cells(fix, rows)
        .iter()
        .zip(rows)
        .enumerate()
        .map(|(i, (c, row))| {
            let fit = fix.readings.iter().find(|r| r.line == row.line);
            let mut reading = json!({
                "line": row.line,
                // the reading's number in the log, as crate::readings counts it
                "number": i + 1,
                "time": (!c[1].is_empty()).then(|| c[1].clone()),
                "lat_deg": fit.map(|f| f.observer.lat_deg).or(row.position.map(|p| p.lat_deg)),
                "lon_deg": fit.map(|f| f.observer.lon_deg).or(row.position.map(|p| p.lon_deg)),
                "bearing_deg": true_bearing_deg(row, fit),
                "logged_bearing_deg": row.bearing_deg,
                "north": north_name(row.north),
                "residual_deg": fit.map(|f| f.residual_deg),
                "weight": fit.map(|f| f.weight),
                "status": c[8],
                "note": row.note,
            });
            // a walk with levels: each row's level and its residual in dB
            if !fix.levels.is_empty() {
                let level = fix.levels.iter().find(|l| l.line == row.line);
                reading["level_dbm"] = json!(row.level_dbm);
                reading["level_residual_db"] = json!(level.map(|l| l.residual_db));
            }
            reading
        })
        .collect();
    json!({
        "fix": serde_json::to_value(crate::fix::fix_json(fix, &[])).unwrap_or(Value::Null),
        "readings": readings,
    })
}
