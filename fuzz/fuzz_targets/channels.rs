//! The channel-list reader of the planner and its grid option on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::channels::{read_channels, Grid};

fuzz_target!(|data: &[u8]| {
    let _ = read_channels("fuzz.csv", data);
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(grid) = Grid::parse(text) {
            let channels = grid.channels();
            assert_eq!(channels.len(), grid.count);
            assert!(channels.iter().all(|c| c.freq.0 > 0));
        }
    }
});
