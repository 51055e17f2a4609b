//! Large inputs are read as a stream: a 100,000-row emitter file and a 100,000-row field
//! log are read whole without trouble (memory figures are measured on the binary, not
//! here; see the notes of the hardening work).

use pim_io::fieldlog::read_field_log;
use pim_io::read_emitters;

#[test]
fn a_hundred_thousand_emitters_are_read() {
    let mut text = String::from("id,freq_mhz,bw_khz,erp_w,lat,lon,kind\n");
    for i in 0..100_000u64 {
        let khz = 30_000 + (i * 7_919) % 930_000;
        text.push_str(&format!(
            "TX{i},{}.{:03},12.5,50,45.1,-122.4,land mobile\n",
            khz / 1000,
            khz % 1000
        ));
    }
    let file = read_emitters("big.csv", text.as_bytes()).unwrap();
    assert_eq!(file.emitters.len(), 100_000);
    assert_eq!(file.emitters[99_999].line, 100_001);
}

#[test]
fn a_hundred_thousand_readings_are_read() {
    let mut text = String::from("time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,note\n");
    for i in 0..100_000u64 {
        text.push_str(&format!(
            "2026-11-28T10:00:00Z,45.10{:04},-122.41{:04},{}.5,true,2,-95,\n",
            i % 9_973,
            i % 7_919,
            i % 360
        ));
    }
    let log = read_field_log("big.csv", text.as_bytes(), false).unwrap();
    assert_eq!(log.rows.len(), 100_000);
    assert_eq!(log.rows[99_999].line, 100_001);
}
