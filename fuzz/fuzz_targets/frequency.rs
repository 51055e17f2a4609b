//! Frequency and width text (`146.52MHz`, `600kHz`, `12.5`) on arbitrary strings: exact
//! whole hertz or an error; the MHz text of a result reads back to the same hertz.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::freq::{parse_frequency_with_unit, parse_khz, parse_mhz};

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(f) = parse_frequency_with_unit(text) {
            assert_eq!(parse_mhz(&f.mhz_text()), Ok(f));
        }
        if let Ok(f) = parse_mhz(text) {
            assert_eq!(parse_mhz(&f.mhz_text()), Ok(f));
        }
        let _ = parse_khz(text);
    }
});
