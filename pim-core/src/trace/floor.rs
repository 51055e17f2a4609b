//! The noise floor along a trace: a running median in sliding windows, joined by straight
//! lines.
//!
//! **Method.** The trace is cut into windows of `W` points that overlap by three quarters
//! (a new window every `W/4` points). The floor at each window's centre is the median of
//! its levels in dB; between centres it is interpolated linearly, and beyond the first and
//! last centres it is held flat.
//!
//! **Why a median.** The peaks of a receive band occupy a small share of each window, and
//! the median ignores anything that takes less than half of it (its breakdown point is
//! 50 %), whereas a mean is pulled up by every carrier. Over a straight slope the median
//! of a centred window is the slope's value at the centre, so a floor that tilts across
//! the band (preamplifier roll-off, a filter skirt) is followed; a floor that bends within
//! half a window is followed only in part. A low percentile would also resist the peaks,
//! but it sits below the typical noise by an amount that depends on the noise statistics
//! (sample or RMS detector, averaging, maximum hold), so the same threshold would mean a
//! different false-peak rate on every analyser setting; the median is the middle of the
//! noise whatever its spread. Windows of tens of channel widths keep a carrier from
//! filling half a window.
//!
//! Cost: each window's median by selection, O(W) each, O(4·N) in all; memory: one value
//! per window, N/(W/4).

/// The floor estimate of a trace.
#[derive(Clone, Debug, PartialEq)]
pub struct Floor {
    /// Points per window.
    pub window_points: usize,
    /// Window centres (fractional point indices), increasing.
    centres: Vec<f64>,
    /// The median level of each window, dBm.
    medians_dbm: Vec<f64>,
}

impl Floor {
    /// The running median of `levels_dbm` in windows of `window_points` (raised to 3,
    /// lowered to the trace's length). Non-finite levels are not expected (the reader
    /// refuses them) and are ignored where they occur.
    pub fn estimate(levels_dbm: &[f64], window_points: usize) -> Floor {
        let n = levels_dbm.len();
        if n == 0 {
            return Floor {
                window_points: 0,
                centres: Vec::new(),
                medians_dbm: Vec::new(),
            };
        }
        let w = window_points.max(3).min(n);
        let hop = (w / 4).max(1);
        let mut centres = Vec::with_capacity(n / hop + 2);
        let mut medians_dbm = Vec::with_capacity(n / hop + 2);
        let mut scratch: Vec<f64> = Vec::with_capacity(w);
        let mut start = 0usize;
        loop {
            let s = start.min(n.saturating_sub(w));
            scratch.clear();
            scratch.extend(
                levels_dbm[s..s + w]
                    .iter()
                    .copied()
                    .filter(|v| v.is_finite()),
            );
            if let Some(m) = median(&mut scratch) {
                centres.push(s as f64 + (w - 1) as f64 / 2.0);
                medians_dbm.push(m);
            }
            if s + w >= n {
                break;
            }
            start += hop;
        }
        Floor {
            window_points: w,
            centres,
            medians_dbm,
        }
    }

    /// The floor at a (fractional) point index, in dBm.
    pub fn at(&self, index: f64) -> f64 {
        let (c, m) = (&self.centres, &self.medians_dbm);
        let Some((&first, &last)) = c.first().zip(c.last()) else {
            return f64::NAN;
        };
        if index <= first {
            return m[0];
        }
        if index >= last {
            return m[m.len() - 1];
        }
        let j = c.partition_point(|&x| x <= index).clamp(1, c.len() - 1);
        let (x0, x1) = (c[j - 1], c[j]);
        let t = (index - x0) / (x1 - x0);
        m[j - 1] + t * (m[j] - m[j - 1])
    }

    /// The window centres and medians, for drawing the floor as a line.
    pub fn knots(&self) -> impl Iterator<Item = (f64, f64)> + '_ {
        self.centres
            .iter()
            .copied()
            .zip(self.medians_dbm.iter().copied())
    }

    /// The median of the window medians: one number for the whole trace, in dBm.
    pub fn typical_dbm(&self) -> f64 {
        let mut m = self.medians_dbm.clone();
        median(&mut m).unwrap_or(f64::NAN)
    }
}

/// The median of `values` (reordered in place); the mean of the middle two for an even
/// count. `None` when empty.
pub fn median(values: &mut [f64]) -> Option<f64> {
    let n = values.len();
    if n == 0 {
        return None;
    }
    let mid = n / 2;
    let (lower, upper, _) = values.select_nth_unstable_by(mid, f64::total_cmp);
    let upper = *upper;
    if n % 2 == 1 {
        Some(upper)
    } else {
        let below = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        Some((below + upper) / 2.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_of_odd_and_even_counts() {
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), Some(2.5));
        assert_eq!(median(&mut []), None);
    }

    #[test]
    fn follows_a_slope_and_ignores_narrow_peaks() {
        // A floor falling 20 dB across 2,000 points, with a 30 dB carrier every 100.
        let levels: Vec<f64> = (0..2000)
            .map(|i| {
                let base = -100.0 - 0.01 * i as f64;
                if i % 100 == 50 {
                    base + 30.0
                } else {
                    base
                }
            })
            .collect();
        let f = Floor::estimate(&levels, 201);
        for i in [150usize, 700, 1234, 1850] {
            let want = -100.0 - 0.01 * i as f64;
            assert!(
                (f.at(i as f64) - want).abs() < 0.06,
                "{i}: {}",
                f.at(i as f64)
            );
        }
        // Held flat beyond the outer centres: within half a window of slope.
        assert!((f.at(0.0) - -101.0).abs() < 0.06);
    }

    #[test]
    fn short_traces_get_one_window() {
        let f = Floor::estimate(&[-90.0, -80.0, -100.0], 201);
        assert_eq!(f.window_points, 3);
        assert_eq!(f.at(1.0), -90.0);
        assert_eq!(f.typical_dbm(), -90.0);
        assert!(Floor::estimate(&[], 101).at(0.0).is_nan());
    }
}
