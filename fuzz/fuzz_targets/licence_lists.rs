//! Licence lists as they come, on arbitrary bytes: emission designators (a bandwidth of
//! whole hertz, never negative), `--columns` mappings, and an emitter table read through
//! a mapping and past bad rows: emitters or refusals, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::emission::parse_designator;
use pim_core::freq::MAX_FREQUENCY;
use pim_io::columns::ColumnMap;
use pim_io::emitters::{read_emitters_with, ReadOptions};

fuzz_target!(|data: &[u8]| {
    // the first line is a mapping, the rest a table
    let split = data.iter().position(|&b| b == b'\n').unwrap_or(data.len());
    let (head, table) = data.split_at(split);
    let Ok(head) = std::str::from_utf8(head) else {
        return;
    };
    if let Ok(d) = parse_designator(head) {
        assert!(d.bandwidth.0 >= 0 && d.bandwidth <= MAX_FREQUENCY);
    }
    let map = ColumnMap::parse_list(head).ok();
    let _ = ColumnMap::parse_file("map.txt", head);
    for keep_going in [false, true] {
        let options = ReadOptions {
            columns: map.as_ref(),
            keep_going,
        };
        if let Ok(file) = read_emitters_with("fuzz.csv", table, options) {
            for e in &file.emitters {
                assert!(e.freq.0 > 0 && e.freq <= MAX_FREQUENCY);
                assert!(e.bandwidth.0 >= 0);
                assert!(e.erp_dbm.is_none_or(|p| p.is_finite()));
                assert!(e.position.is_none_or(|p| p.is_valid()));
                assert!(pim_io::text::id_problem(&e.id).is_none(), "{:?}", e.id);
            }
            assert_eq!(file.emitters.len() + file.refused.len(), file.rows);
        }
    }
});
