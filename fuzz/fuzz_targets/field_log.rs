//! The field-log reader and the preparation of readings on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::fieldlog::{prepare, read_field_log};

fuzz_target!(|data: &[u8]| {
    for from_track in [false, true] {
        if let Ok(log) = read_field_log("fuzz.csv", data, from_track) {
            for r in &log.rows {
                assert!(r.bearing_deg.is_none_or(|b| (0.0..=360.0).contains(&b)));
                // a row carries a bearing, a level or both
                assert!(r.bearing_deg.is_some() || r.level_dbm.is_some());
                // positions in any notation end within range
                assert!(r
                    .position
                    .is_none_or(|p| p.lat_deg.abs() <= 90.0 && p.lon_deg.abs() <= 180.0));
                assert!(r
                    .sigma_deg
                    .is_none_or(|s| s >= pim_io::fieldlog::MIN_SIGMA_DEG));
            }
            // a torn tail is never read as a row
            if let Some(torn) = log.torn_line {
                assert!(log.rows.iter().all(|r| r.line < torn));
            }
            let today = time::Date::from_calendar_date(2026, time::Month::December, 1).unwrap();
            if let Ok(p) = prepare(&log, None, None, today) {
                let _ = pim_core::fix::locate(&p.readings, &Default::default());
                let _ = pim_core::fix::locate_with_levels(
                    &p.readings,
                    &p.levels,
                    &Default::default(),
                    &Default::default(),
                );
            }
        }
    }
});
