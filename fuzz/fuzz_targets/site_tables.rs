//! The receiver, structure and candidate-spot readers on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_io::emitters::read_structures;
use pim_io::fieldlog::read_spots;
use pim_io::read_receivers;

fuzz_target!(|data: &[u8]| {
    let _ = read_receivers("fuzz.csv", data);
    let _ = read_structures("fuzz.csv", data);
    let _ = read_spots("fuzz.csv", data);
});
