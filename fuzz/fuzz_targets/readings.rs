//! The slope-test readings reader and the slope fit on arbitrary bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::slope::StepKind;
use pim_io::readings::read_readings;

fuzz_target!(|data: &[u8]| {
    for kind in [StepKind::Attenuator, StepKind::Power] {
        let _ = read_readings("fuzz.csv", data, kind);
    }
});
