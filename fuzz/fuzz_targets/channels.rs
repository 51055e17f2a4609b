//! The channel-list reader of the planner on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::channels::read_channels;

fuzz_target!(|data: &[u8]| {
    let _ = read_channels("fuzz.csv", data);
});
