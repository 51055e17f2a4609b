//! Large inputs are read as a stream: a 100,000-row emitter file and a 100,000-row field
//! log are read whole without trouble (memory figures are measured on the binary, not
//! here; see the notes of the hardening work).

use pim_io::fieldlog::read_field_log;
use pim_io::read_emitters;

#[test]
fn a_hundred_thousand_emitters_are_read() {
    let mut text = String::from("id,freq_mhz,bw_khz,erp_w,lat,lon,kind\n");
    for i in 0..100_000u64 {
        let khz = 30_000 + (i * 7_919) % 930_000;
        text.push_str(&format!(
            "TX{i},{}.{:03},12.5,50,45.1,-122.4,land mobile\n",
            khz / 1000,
            khz % 1000
        ));
    }
    let file = read_emitters("big.csv", text.as_bytes()).unwrap();
    assert_eq!(file.emitters.len(), 100_000);
    assert_eq!(file.emitters[99_999].line, 100_001);
}

#[test]
fn a_hundred_thousand_readings_are_read() {
    let mut text = String::from("time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,note\n");
    for i in 0..100_000u64 {
        text.push_str(&format!(
            "2026-11-28T10:00:00Z,45.10{:04},-122.41{:04},{}.5,true,2,-95,\n",
            i % 9_973,
            i % 7_919,
            i % 360
        ));
    }
    let log = read_field_log("big.csv", text.as_bytes(), false).unwrap();
    assert_eq!(log.rows.len(), 100_000);
    assert_eq!(log.rows[99_999].line, 100_001);
}

/// A site crowded on one raster: many thousands of products land on 150 MHz.
fn crowded_site() -> pim_core::Site {
    use pim_core::{Emitter, GeoPoint, Hz};
    let junction = GeoPoint::new(45.105, -122.405);
    pim_core::Site::new(
        (0..160i64)
            .map(|i| {
                Emitter::new(
                    format!("TX{i:03}"),
                    Hz(148_000_000 + (i * 7 % 320) * 12_500),
                    Hz(11_250),
                )
                .radiating(
                    pim_core::emitter::watts_to_dbm(20.0 + (i % 80) as f64),
                    pim_core::geo::destination(junction, (i * 37 % 360) as f64, 50.0 + i as f64),
                )
            })
            .collect(),
    )
}

/// The memory budget of a listing (common practice: refuse what would not fit rather than
/// let the system end the process): a listing past it is refused before it is made, with
/// the count reached and no command-line wording; the first K fit in the same budget and
/// equal the first K of the listing made under a budget that holds it.
#[test]
fn a_listing_past_the_memory_budget_is_refused_not_aborted() {
    use pim_core::{ErrorClass, GeoPoint, Hz, Placement, Query};
    let junction = GeoPoint::new(45.105, -122.405);
    let mut query = Query::new(Hz(150_000_000));
    query.junction = Some(junction);
    let roomy = crowded_site();
    let full = roomy.explain(&query).unwrap();
    assert!(full.ranking.candidates.len() > 10_000);
    let tight = crowded_site().with_memory_budget(1_000_000);
    let e = tight.explain(&query).unwrap_err();
    assert_eq!(e.class, ErrorClass::Refused);
    assert!(e.message.contains("the search reached"), "{e}");
    assert!(e.message.contains("memory budget of 1 MB"), "{e}");
    assert!(
        !e.message.contains("--"),
        "no option names in the engine: {e}"
    );
    // the count reached is what a megabyte holds, not the whole listing
    let reached: usize = e
        .message
        .split_whitespace()
        .nth(3)
        .and_then(|w| w.parse().ok())
        .unwrap();
    assert!(reached < 3_000 && reached < full.found, "{reached}");
    // the first K: bounded, within the same budget, equal to the first K of the listing
    query.limit = Some(20);
    let top = tight.explain(&query).unwrap();
    assert_eq!(&top.ranking.candidates[..], &full.ranking.candidates[..20]);
    // a K beyond what the budget holds is refused the same way
    query.limit = Some(usize::MAX / 4);
    assert_eq!(
        tight.explain(&query).unwrap_err().class,
        ErrorClass::Refused
    );
    // re-ranking a listing at a fix counts what both rankings hold
    let near = roomy.clone().with_memory_budget(
        full.products.len() as u64 * pim_core::site::BYTES_PER_PRODUCT
            + full.ranking.candidates.len() as u64 * pim_core::site::BYTES_PER_CANDIDATE,
    );
    let e = full
        .ranked_at(&near, Placement::at(Some(junction)), &[])
        .unwrap_err();
    assert_eq!(e.class, ErrorClass::Refused);
    assert!(full
        .ranked_at(&roomy, Placement::at(Some(junction)), &[])
        .is_ok());
}
