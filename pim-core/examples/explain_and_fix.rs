//! Explain 146.34 MHz, fix the junction from four bearings, re-rank at the fix.
use pim_core::geo::destination as dest;
use pim_core::{locate, Emitter, FixOptions, GeoPoint, Hz, Placement, Query, Reading, Site};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let rx = GeoPoint::new(45.1031, -122.4127);
    let skp = Emitter::new("SKP-152", Hz(152_840_000), Hz(16_000));
    let fire = Emitter::new("FIRE-DSP", Hz(159_340_000), Hz(11_250));
    let site = Site::new(vec![
        skp.radiating(50.0, dest(rx, 40.0, 300.0)),
        fire.radiating(47.0, dest(rx, 200.0, 450.0)),
    ]);
    let mut query = Query::new(Hz(146_340_000));
    query.junction = Some(rx);
    let answer = site.explain(&query)?;
    let first = site.formula(&answer.ranking.candidates[0].product);
    println!("at the receiver, first {first}");
    let junction = dest(rx, 45.0, 60.0);
    let spots = [(0.0, 0.8), (90.0, -0.5), (180.0, 0.3), (270.0, -0.6)];
    let readings: Vec<Reading> = (2..)
        .zip(spots)
        .map(|(line, (az, err))| {
            let bearing = (az + 180.0 + err) % 360.0;
            Reading::new(line, dest(junction, az, 120.0), bearing, Some(1.0))
        })
        .collect();
    let fix = locate(&readings, &FixOptions::default())?;
    let (lat, lon, r) = (fix.position.lat_deg, fix.position.lon_deg, fix.cep_m);
    println!("fix {lat:.6}, {lon:.6}, CEP {r:.1} m");
    let mut placement = Placement::at(Some(fix.position));
    placement.receiver = Some(rx);
    let at_fix = answer.ranked_at(&site, placement, &[])?;
    let first = site.formula(&at_fix.candidates[0].product);
    println!("at the fix, first {first}");
    Ok(())
}
