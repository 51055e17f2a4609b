//! The emitter reader (CSV or JSON) on arbitrary bytes: an error or emitters, never a
//! panic; every emitter it accepts is valid.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::freq::MAX_FREQUENCY;
use pim_io::read_emitters;

fuzz_target!(|data: &[u8]| {
    if let Ok(file) = read_emitters("fuzz.csv", data) {
        assert!(!file.emitters.is_empty());
        for e in &file.emitters {
            assert!(e.freq.0 > 0 && e.freq <= MAX_FREQUENCY);
            assert!(e.bandwidth.0 >= 0);
            assert!(e.position.is_none_or(|p| p.is_valid()));
            // no id passes with a hidden character or a space at either end
            assert!(pim_io::text::id_problem(&e.id).is_none(), "{:?}", e.id);
        }
    }
});
