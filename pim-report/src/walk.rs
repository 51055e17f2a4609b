//! The walk's next spot in words and JSON: where to take the next bearing, and how the
//! region should shrink.

use pim_core::fix::Fix;
use pim_core::walk::ScoredSpot;
use serde_json::{json, Value};

use crate::text_table::{Align, TextTable};

/// One scored spot as JSON.
pub fn spot_json(s: &ScoredSpot) -> serde_json::Value {
    json!({
        "name": s.spot.name,
        "lat": s.spot.position.lat_deg,
        "lon": s.spot.position.lon_deg,
        "distance_m": s.distance_m,
        "bearing_to_fix_deg": s.bearing_to_fix_deg,
        "expected_semi_major_m": s.expected.semi_major_m,
        "expected_semi_minor_m": s.expected.semi_minor_m,
        "information_det": s.information_det,
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
    let e = &fix.ellipse;
    let mut out = format!(
        "Now: {:.0}% ellipse {:.0} × {:.0} m from {} readings; next bearing assumed σ {:.1}°.\n",
        e.confidence * 100.0,
        e.semi_major_m,
        e.semi_minor_m,
        fix.n_used,
        sigma_deg
    );
    out.push_str(&format!(
        "Go to {}: {:.6}, {:.6}, {:.0} m from the fix; expect the antenna to point {:.0}°.\n\n",
        best.spot.name.as_deref().unwrap_or("the spot"),
        best.spot.position.lat_deg,
        best.spot.position.lon_deg,
        best.distance_m,
        best.bearing_to_fix_deg
    ));
    let mut t = TextTable::new(&[
        ("spot", Align::Left),
        ("lat", Align::Right),
        ("lon", Align::Right),
        ("range m", Align::Right),
        ("ellipse after m", Align::Right),
    ]);
    for s in std::iter::once(best).chain(alternatives) {
        t.push(vec![
            s.spot.name.clone().unwrap_or_default(),
            format!("{:.6}", s.spot.position.lat_deg),
            format!("{:.6}", s.spot.position.lon_deg),
            format!("{:.0}", s.distance_m),
            format!(
                "{:.0} × {:.0}",
                s.expected.semi_major_m, s.expected.semi_minor_m
            ),
        ]);
    }
    out.push_str(&t.render());
    out
}
