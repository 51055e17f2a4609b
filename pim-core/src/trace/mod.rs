//! Analyser traces of a receive band: every peak found and explained at once.
//!
//! - [`MaxHold`] combines repeated sweeps of one grid point by point by maximum hold,
//!   holding one level per grid point and nothing else;
//! - [`floor`] estimates the noise floor along the trace with a running median, so a
//!   sloping floor is followed;
//! - [`peaks`] finds the local maxima that stand far enough above that floor, at least a
//!   receive channel apart, and refines each within its bin (parabolic interpolation of
//!   the top three bins: common practice);
//! - [`classify`] calls each peak a listed emitter's own carrier, an intermodulation
//!   product (the first candidates of the pruned search, [`crate::site::Site::explain`]
//!   with a limit, or the whole listing ranked by [`crate::rank::rank`]) or unexplained, and ranks the emitter sets that explain
//!   several peaks at once.
//!
//! **Grids.** A trace is a uniform grid of frequencies, as a swept or FFT analyser writes
//! it: the first point, a fixed step and a point count. The first sweep defines the grid
//! (its points may be rounded to the hertz): its step is the span over the point count
//! less one, and every point `i` must lie within a quarter step of `start + i·step`,
//! checked point by point once the sweep has ended (while it is read, each point is also
//! checked against the line through the first point and the one before it, to refuse a
//! wrong file early). A log-spaced or otherwise uneven grid is refused, never taken as
//! uniform. Every further sweep must have the same number of points, each within a
//! quarter step of the same grid point. A sweep with
//! another start, stop or point count is refused, not resampled: resampling would move
//! peaks by a fraction of a bin and smear the maximum hold.
//!
//! Memory: one level per grid point while reading (the maximum-hold array; the first
//! sweep's frequencies too, until its grid is checked), the floor at
//! a fraction of the points, and the peaks with their candidates.

pub mod classify;
pub mod floor;
pub mod peaks;

use crate::freq::Hz;

/// The most points one sweep may have.
pub const MAX_POINTS: usize = 1_000_000;

/// The fewest points a trace needs: a peak has a neighbour on each side.
pub const MIN_POINTS: usize = 3;

/// Why a point of a sweep was refused.
#[derive(Clone, Debug, PartialEq)]
pub enum PointRefusal {
    /// More than [`MAX_POINTS`] points in one sweep.
    TooMany,
    /// The frequency is not above the previous point's.
    NotIncreasing {
        /// The previous point's frequency.
        previous: Hz,
    },
    /// The point is off the grid: not within a quarter step of where it should be.
    OffGrid {
        /// Where the point should be, Hz.
        expected_hz: f64,
        /// The grid step, Hz.
        step_hz: f64,
    },
    /// A later sweep has more points than the first.
    BeyondGrid {
        /// The first sweep's points.
        points: usize,
    },
}

impl PointRefusal {
    /// The refusal in words, for a point at `freq`.
    pub fn message(&self, freq: Hz) -> String {
        match self {
            PointRefusal::TooMany => {
                format!("more than {MAX_POINTS} points in one trace; split the band into several traces")
            }
            PointRefusal::NotIncreasing { previous } => format!(
                "{} MHz is not above the previous point's {} MHz; trace points must rise in frequency",
                freq.mhz_text(),
                previous.mhz_text()
            ),
            PointRefusal::OffGrid {
                expected_hz,
                step_hz,
            } => format!(
                "{} MHz is off the uniform grid of the trace (expected {:.6} MHz, step {:.3} kHz); traces combined by maximum hold must share start, step and point count",
                freq.mhz_text(),
                expected_hz / 1e6,
                step_hz / 1e3
            ),
            PointRefusal::BeyondGrid { points } => format!(
                "{} MHz is beyond the {points} points of the first trace; traces combined by maximum hold must share start, stop and point count",
                freq.mhz_text()
            ),
        }
    }
}

/// Why a whole sweep was refused at its end.
#[derive(Clone, Debug, PartialEq)]
pub enum SweepRefusal {
    /// Fewer than [`MIN_POINTS`] points.
    TooFew {
        /// The points read.
        points: usize,
    },
    /// A point of the first sweep is not within a quarter step of its place on the
    /// uniform grid through the first and last points.
    Uneven {
        /// The point's index (0 for the first).
        index: usize,
        /// Its frequency.
        freq: Hz,
        /// Where the uniform grid puts it, Hz.
        expected_hz: f64,
        /// The grid step, Hz.
        step_hz: f64,
    },
    /// A later sweep ended with fewer points than the first.
    Short {
        /// The points read.
        points: usize,
        /// The first sweep's points.
        grid_points: usize,
    },
}

impl SweepRefusal {
    /// The problem in words, without file or line (the reader adds those).
    pub fn message(&self) -> String {
        match self {
            SweepRefusal::TooFew { points } => format!(
                "{points} point{} in the trace; a trace needs at least {MIN_POINTS}",
                if *points == 1 { "" } else { "s" }
            ),
            SweepRefusal::Uneven {
                index,
                freq,
                expected_hz,
                step_hz,
            } => format!(
                "point {} ({} MHz) is off the uniform grid through the first and last points (expected {:.6} MHz, step {:.3} kHz, a quarter step allowed): the trace is not on a uniform grid (log-spaced?); export it with a linear frequency axis",
                index + 1,
                freq.mhz_text(),
                expected_hz / 1e6,
                step_hz / 1e3
            ),
            SweepRefusal::Short {
                points,
                grid_points,
            } => format!(
                "{points} points, but the first trace has {grid_points}; traces combined by maximum hold must share start, stop and point count"
            ),
        }
    }
}

/// Sweeps combined point by point by maximum hold, read as streams.
///
/// Call [`MaxHold::push`] for each point of a sweep in frequency order, then
/// [`MaxHold::end_sweep`]; repeat for each sweep; [`MaxHold::finish`] gives the trace.
#[derive(Clone, Debug, Default)]
pub struct MaxHold {
    start: Option<Hz>,
    /// The grid step, known once the first sweep has ended.
    step_hz: Option<f64>,
    levels: Vec<f64>,
    sweeps: usize,
    /// Points pushed in the current sweep.
    index: usize,
    previous: Option<Hz>,
    /// The current sweep's first point (the grid's start in the first sweep).
    sweep_start: Option<Hz>,
    /// The first sweep's frequencies, until its end checks them against its grid.
    first_freqs: Vec<i64>,
}

impl MaxHold {
    /// An empty hold, waiting for its first sweep.
    pub fn new() -> Self {
        MaxHold::default()
    }

    /// Adds a point of the current sweep.
    pub fn push(&mut self, freq: Hz, level_dbm: f64) -> Result<(), PointRefusal> {
        if let Some(previous) = self.previous {
            if freq <= previous {
                return Err(PointRefusal::NotIncreasing { previous });
            }
        }
        let i = self.index;
        match (self.step_hz, self.start) {
            (Some(step), Some(start)) => {
                if i >= self.levels.len() {
                    return Err(PointRefusal::BeyondGrid {
                        points: self.levels.len(),
                    });
                }
                let expected_hz = start.0 as f64 + i as f64 * step;
                if (freq.0 as f64 - expected_hz).abs() > 0.25 * step {
                    return Err(PointRefusal::OffGrid {
                        expected_hz,
                        step_hz: step,
                    });
                }
                let held = &mut self.levels[i];
                *held = held.max(level_dbm);
            }
            _ => {
                if i >= MAX_POINTS {
                    return Err(PointRefusal::TooMany);
                }
                if let (Some(first), Some(previous)) = (self.sweep_start, self.previous) {
                    if i >= 2 {
                        let step = (previous.0 - first.0) as f64 / (i - 1) as f64;
                        let expected_hz = first.0 as f64 + i as f64 * step;
                        if (freq.0 as f64 - expected_hz).abs() > 0.25 * step {
                            return Err(PointRefusal::OffGrid {
                                expected_hz,
                                step_hz: step,
                            });
                        }
                    }
                }
                self.levels.push(level_dbm);
                self.first_freqs.push(freq.0);
            }
        }
        if i == 0 {
            self.sweep_start = Some(freq);
        }
        self.previous = Some(freq);
        self.index += 1;
        Ok(())
    }

    /// Ends the current sweep; the first one fixes the grid.
    pub fn end_sweep(&mut self) -> Result<(), SweepRefusal> {
        let points = self.index;
        match self.step_hz {
            None => {
                if points < MIN_POINTS {
                    return Err(SweepRefusal::TooFew { points });
                }
                let (Some(first), Some(last)) = (self.sweep_start, self.previous) else {
                    return Err(SweepRefusal::TooFew { points });
                };
                let step = (last.0 - first.0) as f64 / (points - 1) as f64;
                let freqs = std::mem::take(&mut self.first_freqs);
                for (index, &f) in freqs.iter().enumerate() {
                    let expected_hz = first.0 as f64 + index as f64 * step;
                    if (f as f64 - expected_hz).abs() > 0.25 * step {
                        return Err(SweepRefusal::Uneven {
                            index,
                            freq: Hz(f),
                            expected_hz,
                            step_hz: step,
                        });
                    }
                }
                self.start = Some(first);
                self.step_hz = Some(step);
            }
            Some(_) => {
                if points != self.levels.len() {
                    return Err(SweepRefusal::Short {
                        points,
                        grid_points: self.levels.len(),
                    });
                }
            }
        }
        self.sweeps += 1;
        self.index = 0;
        self.previous = None;
        self.sweep_start = None;
        Ok(())
    }

    /// How many sweeps have ended.
    pub fn sweeps(&self) -> usize {
        self.sweeps
    }

    /// The combined trace, once at least one sweep has ended.
    pub fn finish(self) -> Option<Trace> {
        Some(Trace {
            start: self.start?,
            step_hz: self.step_hz?,
            levels_dbm: self.levels,
            sweeps: self.sweeps,
        })
    }
}

/// A trace on a uniform grid: point `i` is at `start + i·step`.
#[derive(Clone, Debug, PartialEq)]
pub struct Trace {
    /// Frequency of the first point.
    pub start: Hz,
    /// The grid step in hertz (a fraction of a hertz where the span does not divide).
    pub step_hz: f64,
    /// The level of each point, in dBm (the maximum over the sweeps).
    pub levels_dbm: Vec<f64>,
    /// How many sweeps were combined.
    pub sweeps: usize,
}

impl Trace {
    /// The frequency of a (fractional) point index, in hertz.
    pub fn freq_hz_at(&self, index: f64) -> f64 {
        self.start.0 as f64 + index * self.step_hz
    }

    /// The last point's frequency.
    pub fn stop(&self) -> Hz {
        Hz(self
            .freq_hz_at(self.levels_dbm.len().saturating_sub(1) as f64)
            .round() as i64)
    }
}

/// The least floor window, in points.
pub const MIN_FLOOR_WINDOW_POINTS: usize = 101;

/// Receive channel widths per floor window.
pub const FLOOR_WINDOW_CHANNELS: f64 = 25.0;

/// The floor window for a trace of step `step_hz` and a receive channel of `rx_bandwidth`:
/// [`FLOOR_WINDOW_CHANNELS`] channel widths, at least [`MIN_FLOOR_WINDOW_POINTS`] points.
pub fn floor_window_points(step_hz: f64, rx_bandwidth: Hz) -> usize {
    let channels = FLOOR_WINDOW_CHANNELS * rx_bandwidth.0 as f64 / step_hz.max(1e-9);
    (channels.ceil() as usize).max(MIN_FLOOR_WINDOW_POINTS)
}

/// The least distance between peaks in points: one receive channel, at least one point.
pub fn min_distance_points(step_hz: f64, rx_bandwidth: Hz) -> usize {
    ((rx_bandwidth.0 as f64 / step_hz.max(1e-9)).ceil() as usize).max(1)
}

/// How a trace is read: the peak threshold and the explaining search.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SweepRule {
    /// Least height of a peak above the floor, in dB.
    pub threshold_db: f64,
    /// Floor window in points; `None` for [`floor_window_points`].
    pub floor_window_points: Option<usize>,
    /// How each peak is explained.
    pub explain: classify::ExplainRule,
    /// Threads to explain the peaks on.
    pub threads: usize,
}

/// Everything found on a trace.
#[derive(Clone, Debug)]
pub struct Sweep {
    /// The floor estimated along the trace.
    pub floor: floor::Floor,
    /// The least distance kept between peaks, in points.
    pub min_distance_points: usize,
    /// The peaks in frequency order, each explained.
    pub peaks: Vec<classify::ExplainedPeak>,
    /// Emitter sets explaining several peaks, best first.
    pub suspects: Vec<classify::Suspect>,
}

/// Finds the floor and the peaks of `trace`, explains each peak from the site's emitters
/// and ranks the suspects. Refused (class `Refused`) when a peak's listing would pass the
/// site's memory budget ([`classify::explain_peak`]).
pub fn analyse(
    trace: &Trace,
    site: &crate::site::Site,
    rule: &SweepRule,
) -> crate::error::Result<Sweep> {
    let rx = rule.explain.rx_bandwidth;
    let window = rule
        .floor_window_points
        .unwrap_or_else(|| floor_window_points(trace.step_hz, rx));
    let floor = floor::Floor::estimate(&trace.levels_dbm, window);
    let min_distance = min_distance_points(trace.step_hz, rx);
    let found = peaks::find_peaks(
        trace,
        &floor,
        &peaks::PeakRule {
            threshold_db: rule.threshold_db,
            min_distance_points: min_distance,
        },
    );
    let mut explained =
        classify::explain_peaks(&found, site, &rule.explain, trace.step_hz, rule.threads)?;
    classify::judge_levels(&mut explained);
    let suspects = classify::suspects(&explained, site.emitters());
    Ok(Sweep {
        floor,
        min_distance_points: min_distance,
        peaks: explained,
        suspects,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sweep(hold: &mut MaxHold, points: &[(i64, f64)]) -> Result<(), String> {
        for &(f, l) in points {
            hold.push(Hz(f), l).map_err(|e| e.message(Hz(f)))?;
        }
        hold.end_sweep().map_err(|e| e.message())
    }

    #[test]
    fn max_hold_takes_the_higher_level_of_each_point() {
        let mut hold = MaxHold::new();
        sweep(&mut hold, &[(100, -90.0), (200, -80.0), (300, -95.0)]).unwrap();
        sweep(&mut hold, &[(100, -85.0), (200, -99.0), (301, -94.0)]).unwrap();
        let t = hold.finish().unwrap();
        assert_eq!(t.levels_dbm, vec![-85.0, -80.0, -94.0]);
        assert_eq!((t.start, t.step_hz, t.sweeps), (Hz(100), 100.0, 2));
        assert_eq!(t.stop(), Hz(300));
    }

    #[test]
    fn rounded_grid_points_are_accepted_and_the_step_is_exact() {
        // 10 MHz over 1,001 points: a step of 9,990.00999… Hz, written to the hertz.
        let mut hold = MaxHold::new();
        let step = 10e6 / 1001.0;
        let pts: Vec<(i64, f64)> = (0..1002)
            .map(|i| ((140e6 + i as f64 * step).round() as i64, -100.0))
            .collect();
        sweep(&mut hold, &pts).unwrap();
        let t = hold.finish().unwrap();
        assert!((t.step_hz - step).abs() < 1e-3, "{}", t.step_hz);
    }

    #[test]
    fn mismatched_grids_are_refused() {
        let mut hold = MaxHold::new();
        sweep(&mut hold, &[(100, -90.0), (200, -80.0), (300, -95.0)]).unwrap();
        let e = sweep(&mut hold, &[(150, -90.0)]).unwrap_err();
        assert!(e.contains("off the uniform grid"), "{e}");
        let mut hold = MaxHold::new();
        sweep(&mut hold, &[(100, -90.0), (200, -80.0), (300, -95.0)]).unwrap();
        let e = sweep(&mut hold, &[(100, -90.0), (200, -80.0)]).unwrap_err();
        assert!(e.contains("2 points, but the first trace has 3"), "{e}");
        let mut hold = MaxHold::new();
        sweep(&mut hold, &[(100, -90.0), (200, -80.0), (300, -95.0)]).unwrap();
        let e = sweep(
            &mut hold,
            &[(100, -90.0), (200, -80.0), (300, -95.0), (400, -95.0)],
        )
        .unwrap_err();
        assert!(e.contains("beyond the 3 points"), "{e}");
        let mut hold = MaxHold::new();
        let e = sweep(&mut hold, &[(100, -90.0), (200, -80.0), (350, -95.0)]).unwrap_err();
        assert!(e.contains("off the uniform grid"), "{e}");
        let e = sweep(&mut MaxHold::new(), &[(100, -90.0), (100, -80.0)]).unwrap_err();
        assert!(e.contains("not above the previous"), "{e}");
        let e = sweep(&mut MaxHold::new(), &[(100, -90.0), (200, -80.0)]).unwrap_err();
        assert!(e.contains("at least 3"), "{e}");
    }

    #[test]
    fn a_million_points_and_no_more() {
        let mut hold = MaxHold::new();
        for i in 0..MAX_POINTS as i64 {
            hold.push(Hz(100_000_000 + i), -100.0).unwrap();
        }
        let refused = hold.push(Hz(200_000_000), -100.0).unwrap_err();
        assert_eq!(refused, PointRefusal::TooMany);
        hold.end_sweep().unwrap();
        assert_eq!(hold.finish().map(|t| t.levels_dbm.len()), Some(MAX_POINTS));
    }
}
