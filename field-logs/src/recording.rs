//! The demo's invented recording of Marrow Hill's receive band: 240 sweeps a minute
//! apart, 144–160 MHz in 20 kHz steps. SKP-152 and FIRE-DSP are keyed in bursts; while
//! both are on, the corroded junction makes 2·SKP-152 − FIRE-DSP on the repeater input,
//! 146.34 MHz. An unrelated spur at 149.01 MHz comes and goes on its own; HWY-BASE is
//! keyed without a partner (it makes nothing). Noise is one sweep's sample detector
//! (exponential power), seeded, so every run writes the same file.

use std::fmt::Write as _;

/// Sweeps in the recording.
pub const SWEEPS: usize = 240;
const START_HZ: i64 = 144_000_000;
const STEP_HZ: i64 = 20_000;
const POINTS: usize = 801;
/// The first sweep's time.
pub const FIRST: &str = "2025-06-14T08:00:00-07:00";

struct SplitMix(u64);

impl SplitMix {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        (((z ^ (z >> 31)) >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// On/off in bursts of `min`..`min + spread` sweeps, on with probability `p`.
    fn keying(&mut self, p: f64, min: usize, spread: usize) -> Vec<bool> {
        let mut out = Vec::with_capacity(SWEEPS);
        while out.len() < SWEEPS {
            let on = self.uniform() < p;
            let len = min + (self.uniform() * spread as f64) as usize;
            out.extend(std::iter::repeat_n(on, len));
        }
        out.truncate(SWEEPS);
        out
    }
}

fn bin(hz: i64) -> usize {
    ((hz - START_HZ + STEP_HZ / 2) / STEP_HZ) as usize
}

/// The recording as CSV: `time,freq_mhz,level_dbm`.
pub fn recording_csv() -> String {
    let mut rng = SplitMix(0x4d61_7272_6f77);
    let skp = rng.keying(0.5, 4, 16);
    let fire = rng.keying(0.45, 3, 10);
    let hwy = rng.keying(0.4, 3, 12);
    let spur = rng.keying(0.3, 2, 8);
    let mut s = String::with_capacity(SWEEPS * POINTS * 34);
    s.push_str("# Marrow Hill (invented): a recording of the receive band, one sweep a minute\n");
    s.push_str("time,freq_mhz,level_dbm\n");
    let t0 = pim_io::text::parse_time(FIRST).map_or(0, |(t, _)| t.unix_timestamp());
    let mut levels = vec![0.0f64; POINTS];
    for k in 0..SWEEPS {
        for l in levels.iter_mut() {
            *l = -138.0 + 10.0 * (-rng.uniform().ln() / std::f64::consts::LN_2).log10();
        }
        for (on, hz, dbm) in [
            (skp[k], 152_840_000, -68.0),
            (fire[k], 159_340_000, -75.0),
            (hwy[k], 155_610_000, -72.0),
            (skp[k] && fire[k], 146_340_000, -116.0),
            (spur[k], 149_010_000, -113.0),
        ] {
            if on {
                levels[bin(hz)] = dbm;
            }
        }
        let at = pim_core::time::OffsetDateTime::from_unix_timestamp(t0 + 60 * k as i64)
            .map(pim_io::text::time_text)
            .unwrap_or_default();
        for (i, l) in levels.iter().enumerate() {
            let hz = START_HZ + i as i64 * STEP_HZ;
            let _ = writeln!(s, "{at},{}.{:06},{l:.1}", hz / 1_000_000, hz % 1_000_000);
        }
    }
    s
}

/// Reads the demo's recording, for `pim_report::recording::explain_with`.
pub fn read(
    text: &str,
    visit: &mut dyn FnMut(&pim_io::recording::RecordedSweep) -> pim_core::Result<()>,
) -> pim_core::Result<usize> {
    pim_io::recording::read_recording_file("recording.csv", text.as_bytes(), None, visit)
}
