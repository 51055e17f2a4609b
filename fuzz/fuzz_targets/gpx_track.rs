//! The GPX track reader and its interpolation on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::track::read_track;

fuzz_target!(|data: &[u8]| {
    if let Ok(track) = read_track("fuzz.gpx", data) {
        if let (Some(a), Some(b)) = (track.first_time(), track.last_time()) {
            let mid = a + (b - a) / 2;
            assert!(track.position_at(mid).is_some());
        }
    }
});
