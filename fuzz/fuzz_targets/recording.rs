//! A recording (one CSV with a `time` column) on arbitrary bytes, each sweep pushed into
//! a maximum hold and a presence tracker as `pim sweep --recording` does.
#![no_main]

use libfuzzer_sys::fuzz_target;
use pim_core::recording::{PresenceRule, PresenceTracker};
use pim_core::trace::MaxHold;
use pim_io::recording::read_recording_file;

fuzz_target!(|data: &[u8]| {
    let mut hold = MaxHold::new();
    let mut tracker: Option<PresenceTracker> = None;
    let _ = read_recording_file("recording.csv", data, None, &mut |s| {
        for (&f, &l) in s.freqs.iter().zip(&s.levels_dbm) {
            let _ = hold.push(f, l);
        }
        let _ = hold.end_sweep();
        let t = tracker.get_or_insert_with(|| {
            let rule = PresenceRule {
                threshold_db: 13.0,
                hysteresis_db: 3.0,
                bridge_sweeps: 1,
                min_run_sweeps: 2,
                floor_window_points: 101,
                half_width_points: 1,
            };
            PresenceTracker::new(rule, s.levels_dbm.len(), vec![0, s.levels_dbm.len() / 2])
        });
        if let Some(at) = s.at {
            let _ = t.observe(at, &s.levels_dbm);
        }
        Ok(())
    });
    if let Some(t) = tracker {
        let _ = t.finish();
    }
});
