//! The receiver filter reader on arbitrary bytes, and the curve it gives looked up at
//! offsets either side.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::rx_filter::read_rx_filter;

fuzz_target!(|data: &[u8]| {
    if let Ok((filter, _)) = read_rx_filter("fuzz.csv", data) {
        for offset in [-1e9, -3.5, 0.0, 0.25, 7.0, 1e9] {
            let r = filter.rejection_db(offset);
            assert!((0.0..=200.0).contains(&r));
        }
    }
});
