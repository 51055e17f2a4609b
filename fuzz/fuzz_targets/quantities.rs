//! Quantity and coordinate text as options and files give it (`12.5kHz`, `-80dBm`,
//! `150m`, `10°`, `45°06.275'N`, `122 24 50.5 W`) on arbitrary strings: a finite value
//! in the unit asked or an error; a frequency is exact whole hertz; a coordinate lies in
//! its axis's range and its decimal-degree text reads back to it; a field log whose
//! position cells hold the text reads it the same way or names the field.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::text::{decimal_degrees, parse_coordinate, parse_frequency_in, parse_quantity, Axis};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    for exp in [3, 6] {
        if let Ok(f) = parse_frequency_in(text, exp) {
            assert_eq!(pim_core::freq::parse_mhz(&f.mhz_text()), Ok(f));
        }
    }
    for unit in ["", "dB", "dBm", "dBc", "m", "°", "s"] {
        if let Ok(v) = parse_quantity(text, unit) {
            assert!(v.is_finite());
        }
    }
    for (axis, limit) in [(Axis::Latitude, 90.0), (Axis::Longitude, 180.0)] {
        if let Ok(v) = parse_coordinate(text, axis) {
            assert!(v.is_finite() && v.abs() <= limit);
            let again = parse_coordinate(&decimal_degrees(text, axis), axis).unwrap();
            assert!((again - v).abs() < 1e-7);
        }
    }
    if !text.contains(['"', '\n', '\r', ',', ';', '\t', '#']) {
        let log = format!("lat,lon,bearing_deg\n{text},{text},10\n");
        if let Ok(read) = pim_io::fieldlog::read_field_log("fuzz.csv", log.as_bytes(), false) {
            // an empty or blank cell is no position; any other is one within range
            let p = read.rows[0].position;
            assert_eq!(p.is_none(), text.trim().is_empty());
            assert!(p.is_none_or(|p| p.lat_deg.abs() <= 90.0 && p.lon_deg.abs() <= 180.0));
        }
    }
});
