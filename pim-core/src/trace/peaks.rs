//! Peaks of a trace: local maxima standing at least a threshold above the floor, at least
//! a minimum distance apart, each refined within its bin.
//!
//! The selection follows the definitions of SciPy's `scipy.signal.find_peaks` with
//! `height` and `distance` (the general-purpose implementation the tests compare with):
//! a local maximum is a point higher than its left neighbour and not lower than its
//! right one, a flat top counting once at its middle point (rounded down); the trace's
//! first and last points are never peaks. Of two maxima closer than the minimum distance
//! the higher is kept, working down from the highest.
//!
//! Refinement: a parabola through the top point and its two neighbours (levels in dB)
//! puts the peak at δ = ½·(a − c)/(a − 2b + c) bins from the top point, with level
//! b − ¼·(a − c)·δ (common practice).

use super::floor::Floor;
use super::Trace;
use crate::freq::Hz;

/// What makes a local maximum a peak.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PeakRule {
    /// Least height above the floor, in dB.
    pub threshold_db: f64,
    /// Least distance between two peaks, in points (1 keeps every maximum).
    pub min_distance_points: usize,
}

/// A peak of a trace.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Peak {
    /// The point it was found at.
    pub index: usize,
    /// The refined frequency.
    pub freq: Hz,
    /// The refined level, in dBm.
    pub level_dbm: f64,
    /// The floor there, in dBm.
    pub floor_dbm: f64,
    /// Refined level minus floor, in dB.
    pub above_floor_db: f64,
}

/// The indices of the local maxima of `levels` whose level is at least `height(i)`, at
/// least `min_distance` points apart (SciPy's `find_peaks(x, height, distance)`), in
/// increasing order.
pub fn select_maxima(
    levels: &[f64],
    height: impl Fn(usize) -> f64,
    min_distance: usize,
) -> Vec<usize> {
    let n = levels.len();
    let mut maxima = Vec::new();
    let mut i = 1;
    while i + 1 < n {
        if levels[i - 1] < levels[i] {
            // Walk along a flat top.
            let mut ahead = i + 1;
            while ahead + 1 < n && levels[ahead] == levels[i] {
                ahead += 1;
            }
            if levels[ahead] < levels[i] {
                let mid = (i + ahead - 1) / 2;
                if levels[mid] >= height(mid) {
                    maxima.push(mid);
                }
                i = ahead;
            }
        }
        i += 1;
    }
    if min_distance <= 1 || maxima.len() < 2 {
        return maxima;
    }
    // Highest first; equal levels: the later point first, as SciPy's stable order read
    // from its end.
    let mut order: Vec<usize> = (0..maxima.len()).collect();
    order.sort_by(|&a, &b| {
        levels[maxima[b]]
            .total_cmp(&levels[maxima[a]])
            .then(b.cmp(&a))
    });
    let mut keep = vec![true; maxima.len()];
    for &j in &order {
        if !keep[j] {
            continue;
        }
        let mut k = j;
        while k > 0 && maxima[j] - maxima[k - 1] < min_distance {
            k -= 1;
            keep[k] = false;
        }
        let mut k = j + 1;
        while k < maxima.len() && maxima[k] - maxima[j] < min_distance {
            keep[k] = false;
            k += 1;
        }
    }
    maxima
        .into_iter()
        .zip(keep)
        .filter_map(|(m, k)| k.then_some(m))
        .collect()
}

/// The offset (−½…½ points) and level of the vertex of the parabola through three
/// neighbouring levels `a`, `b` (the highest) and `c`.
pub fn parabolic_vertex(a: f64, b: f64, c: f64) -> (f64, f64) {
    let denominator = a - 2.0 * b + c;
    // Not a top (flat, or curving upwards, or not a number): no refinement.
    if denominator.is_nan() || denominator >= 0.0 {
        return (0.0, b);
    }
    let delta = (0.5 * (a - c) / denominator).clamp(-0.5, 0.5);
    (delta, b - 0.25 * (a - c) * delta)
}

/// The peaks of `trace` over `floor` by `rule`, in frequency order.
pub fn find_peaks(trace: &Trace, floor: &Floor, rule: &PeakRule) -> Vec<Peak> {
    let levels = &trace.levels_dbm;
    let maxima = select_maxima(
        levels,
        |i| floor.at(i as f64) + rule.threshold_db,
        rule.min_distance_points,
    );
    maxima
        .into_iter()
        .map(|i| {
            let (delta, level_dbm) = parabolic_vertex(levels[i - 1], levels[i], levels[i + 1]);
            let at = i as f64 + delta;
            let floor_dbm = floor.at(at);
            Peak {
                index: i,
                freq: Hz(trace.freq_hz_at(at).round() as i64),
                level_dbm,
                floor_dbm,
                above_floor_db: level_dbm - floor_dbm,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maxima_flat_tops_and_edges() {
        let x = [5.0, 1.0, 3.0, 3.0, 3.0, 2.0, 4.0, 4.0, 1.0, 6.0];
        // Edges never count; flat tops at their middle (rounded down).
        assert_eq!(select_maxima(&x, |_| f64::NEG_INFINITY, 1), vec![3, 6]);
        assert_eq!(select_maxima(&x, |_| 3.5, 1), vec![6]);
        // Too close: the higher one stays.
        assert_eq!(select_maxima(&x, |_| f64::NEG_INFINITY, 4), vec![6]);
        // A plateau that runs to the end is no peak.
        assert!(select_maxima(&[1.0, 2.0, 2.0], |_| 0.0, 1).is_empty());
    }

    #[test]
    fn parabola_finds_the_vertex() {
        // y = −(x − 0.3)² sampled at −1, 0, 1.
        let f = |x: f64| -(x - 0.3) * (x - 0.3);
        let (d, l) = parabolic_vertex(f(-1.0), f(0.0), f(1.0));
        assert!((d - 0.3).abs() < 1e-12 && l.abs() < 1e-12, "{d} {l}");
        assert_eq!(parabolic_vertex(1.0, 1.0, 1.0), (0.0, 1.0));
    }
}
