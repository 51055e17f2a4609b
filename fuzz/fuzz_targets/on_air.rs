//! The on-air and listening logs on arbitrary bytes (the first half read as the on-air
//! log, the rest as the listening log, on one clock).
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_io::onair::{read_heard, read_on_air, Clock};

fuzz_target!(|data: &[u8]| {
    let emitters = vec![
        Emitter::new("SKP-152", Hz(152_840_000), Hz(16_000)),
        Emitter::new("FIRE-DSP", Hz(159_340_000), Hz(11_250)),
    ];
    let (a, b) = data.split_at(data.len() / 2);
    let mut clock = Clock::default();
    let _ = read_on_air("on-air.csv", a, &emitters, &mut clock);
    let _ = read_heard("heard.csv", b, &mut clock);
});
