//! Recordings: repeated sweeps of one grid over time, and what comes and goes in them.
//!
//! A receiver or analyser left recording holds both halves of the on-air evidence
//! ([`crate::onair`]): the carriers of the emitters inside its span show when each was
//! keyed, and a product's peak shows when the interference was there. This module turns
//! the sweeps into those two halves and hands them to the same [`Logbook`], so a
//! recording's evidence is counted exactly as a listening log's.
//!
//! **Presence.** Each watched grid point (a peak of the maximum hold, or a listed emitter's
//! carrier inside the span) is measured in every sweep as the highest level within
//! `half_width_points` of it, less that sweep's own floor there (the running median of
//! [`crate::trace::floor`], with the same window as the maximum hold's). It turns present
//! when it stands [`PresenceRule::threshold_db`] above the floor and stays present while
//! it stands `threshold_db − hysteresis_db` above (a level hysteresis, common practice for
//! squelch and carrier detectors); then gaps of at most [`PresenceRule::bridge_sweeps`]
//! sweeps between two present runs are filled, so that one noisy sweep does not split an
//! interval, and runs shorter than [`PresenceRule::min_run_sweeps`] are cleared, so that
//! one noisy sweep does not make one. Each run of present sweeps is an [`Interval`] from its first sweep's time to
//! its last's.
//!
//! **Evidence.** Each sweep is one observation: the product peak present or not. Emitters
//! inside the span are on the air during their recorded intervals (and, watched and never
//! seen, off throughout); emitters outside it follow the on-air log when one is given,
//! otherwise their keying. [`Logbook::evidence`] then counts support, contradictions and
//! times heard off air for every candidate of every product peak, and the candidates are
//! ordered by [`Evidence::ranking_cmp`], ties kept in the level model's order.
//!
//! **Agreement.** Over sweeps whose states are all known, the presences form a 2 × 2
//! table (product present or not × all the candidate's emitters on or not). Its phi
//! coefficient and the two-sided p-value of Fisher's exact test (the sum of the
//! hypergeometric probabilities of every table with the same margins no more probable
//! than the one seen: R. A. Fisher, *Statistical Methods for Research Workers*, §21.02;
//! the convention SciPy's `fisher_exact` follows) say how far the agreement is beyond
//! chance.
//!
//! **Memory.** [`PresenceTracker`] holds the sweep times (16 bytes a sweep), one byte and
//! one `f32` per watched point per sweep, and one sweep's floor (a value per quarter
//! window); the sweep itself is the caller's and is not kept. For `S` sweeps and `W`
//! watched points that is `S·(16 + 5·W)` bytes: 10,000 sweeps with 100 watched points
//! take about 5 MB whatever the number of grid points. The [`Logbook`] adds one byte per
//! listed emitter per sweep.

use std::cmp::Ordering;

use serde::Serialize;
use time::OffsetDateTime;

use crate::emitter::Emitter;
use crate::onair::{Evidence, Interval, Logbook, Observation, OnAir, Schedule};
use crate::rank::Candidate;
use crate::trace::classify::{ExplainedPeak, PeakKind};
use crate::trace::floor::Floor;
use crate::trace::Trace;

/// The least level hysteresis, dB, by default: 3 dB (common practice for carrier detect).
pub const DEFAULT_HYSTERESIS_DB: f64 = 3.0;

/// The presence threshold by default, dB above the sweep's floor: one sweep's noise
/// (exponential power, a sample detector) passes its median by 13 dB in one point of about
/// a million (2^-20), where 10 dB is passed in one of a thousand.
pub const DEFAULT_PRESENCE_DB: f64 = 13.0;

/// Gaps bridged by default, in sweeps.
pub const DEFAULT_BRIDGE_SWEEPS: usize = 1;

/// How presence is decided in each sweep.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PresenceRule {
    /// Height above the sweep's floor at which a watched point turns present, dB.
    pub threshold_db: f64,
    /// How far below the threshold a present point may fall and stay present, dB.
    pub hysteresis_db: f64,
    /// The longest gap, in sweeps, filled between two present runs.
    pub bridge_sweeps: usize,
    /// The shortest run, in sweeps, kept as present once gaps are bridged: a lone sweep
    /// in which noise crossed the threshold is no interval.
    pub min_run_sweeps: usize,
    /// The floor window, points.
    pub floor_window_points: usize,
    /// Points either side of a watched point searched for its level.
    pub half_width_points: usize,
}

/// Why a sweep of a recording was refused.
#[derive(Clone, Debug, PartialEq)]
pub enum RecordingRefusal {
    /// The sweep has another number of points than the grid.
    Points {
        /// The sweep's points.
        points: usize,
        /// The grid's.
        grid_points: usize,
    },
    /// The sweep's time is not after the previous sweep's.
    NotLater {
        /// The previous sweep's time.
        previous: OffsetDateTime,
    },
}

impl RecordingRefusal {
    /// The refusal in words, without file or line.
    pub fn message(&self) -> String {
        match self {
            RecordingRefusal::Points {
                points,
                grid_points,
            } => format!(
                "{points} points, but the recording's first sweep has {grid_points}; a recording's sweeps must share one grid"
            ),
            RecordingRefusal::NotLater { previous } => format!(
                "the sweep's time is not after the previous sweep's ({previous}); a recording's sweeps must follow each other in time"
            ),
        }
    }
}

/// Follows watched grid points through the sweeps of a recording, one sweep at a time.
#[derive(Clone, Debug)]
pub struct PresenceTracker {
    rule: PresenceRule,
    grid_points: usize,
    watches: Vec<usize>,
    times: Vec<OffsetDateTime>,
    /// By watch: the present state after the level hysteresis, one per sweep.
    present: Vec<Vec<bool>>,
    /// By watch: the level above the sweep's floor, dB, one per sweep.
    excess_db: Vec<Vec<f32>>,
}

impl PresenceTracker {
    /// A tracker of the grid points `watches` (indices into sweeps of `grid_points`).
    pub fn new(rule: PresenceRule, grid_points: usize, watches: Vec<usize>) -> PresenceTracker {
        let n = watches.len();
        PresenceTracker {
            rule,
            grid_points,
            watches,
            times: Vec::new(),
            present: vec![Vec::new(); n],
            excess_db: vec![Vec::new(); n],
        }
    }

    /// Takes one sweep, taken at `at`, with one level per grid point.
    pub fn observe(
        &mut self,
        at: OffsetDateTime,
        levels_dbm: &[f64],
    ) -> Result<(), RecordingRefusal> {
        if levels_dbm.len() != self.grid_points {
            return Err(RecordingRefusal::Points {
                points: levels_dbm.len(),
                grid_points: self.grid_points,
            });
        }
        if let Some(&previous) = self.times.last() {
            if at <= previous {
                return Err(RecordingRefusal::NotLater { previous });
            }
        }
        let floor = Floor::estimate(levels_dbm, self.rule.floor_window_points);
        let h = self.rule.half_width_points;
        for (w, &bin) in self.watches.iter().enumerate() {
            let hi = (bin.saturating_add(h).saturating_add(1)).min(levels_dbm.len());
            let lo = bin.saturating_sub(h).min(hi);
            let level = levels_dbm[lo..hi]
                .iter()
                .copied()
                .fold(f64::NEG_INFINITY, f64::max);
            let excess = level - floor.at(bin as f64);
            let was = self.present[w].last().copied().unwrap_or(false);
            let on = if was {
                excess >= self.rule.threshold_db - self.rule.hysteresis_db
            } else {
                excess >= self.rule.threshold_db
            };
            self.present[w].push(on);
            self.excess_db[w].push(excess as f32);
        }
        self.times.push(at);
        Ok(())
    }

    /// Sweeps taken so far.
    pub fn sweeps(&self) -> usize {
        self.times.len()
    }

    /// The presences, with short gaps bridged, and their intervals.
    pub fn finish(self) -> Presences {
        let bridge = self.rule.bridge_sweeps;
        let watches = self
            .watches
            .iter()
            .zip(self.present)
            .zip(self.excess_db)
            .map(|((&bin, mut present), excess_db)| {
                bridge_gaps(&mut present, bridge);
                drop_short_runs(&mut present, self.rule.min_run_sweeps);
                let intervals = intervals(&present, &self.times);
                WatchPresence {
                    bin,
                    present,
                    excess_db,
                    intervals,
                }
            })
            .collect();
        Presences {
            times: self.times,
            watches,
        }
    }
}

/// Fills gaps of at most `bridge` sweeps between two present runs.
pub fn bridge_gaps(present: &mut [bool], bridge: usize) {
    if bridge == 0 {
        return;
    }
    let mut last_on: Option<usize> = None;
    for i in 0..present.len() {
        if present[i] {
            if let Some(j) = last_on {
                if i - j > 1 && i - j - 1 <= bridge {
                    present[j + 1..i].iter_mut().for_each(|p| *p = true);
                }
            }
            last_on = Some(i);
        }
    }
}

/// Clears runs of present sweeps shorter than `min_run`.
pub fn drop_short_runs(present: &mut [bool], min_run: usize) {
    let mut i = 0;
    while i < present.len() {
        if present[i] {
            let j = i + present[i..].iter().take_while(|&&p| p).count();
            if j - i < min_run {
                present[i..j].iter_mut().for_each(|p| *p = false);
            }
            i = j;
        } else {
            i += 1;
        }
    }
}

/// The least run kept by default, in sweeps.
pub const DEFAULT_MIN_RUN_SWEEPS: usize = 2;

/// The runs of present sweeps as intervals from the first sweep's time to the last's.
pub fn intervals(present: &[bool], times: &[OffsetDateTime]) -> Vec<Interval> {
    let mut out = Vec::new();
    let mut start: Option<usize> = None;
    for (i, &p) in present.iter().enumerate() {
        match (p, start) {
            (true, None) => start = Some(i),
            (false, Some(s)) => {
                out.push(Interval {
                    start: times[s],
                    end: times[i - 1],
                });
                start = None;
            }
            _ => {}
        }
    }
    if let Some(s) = start {
        out.push(Interval {
            start: times[s],
            end: times[present.len() - 1],
        });
    }
    out
}

/// One watched point through the recording.
#[derive(Clone, Debug, PartialEq)]
pub struct WatchPresence {
    /// Its grid point.
    pub bin: usize,
    /// Present in each sweep (after hysteresis and bridging).
    pub present: Vec<bool>,
    /// Its level above each sweep's floor, dB.
    pub excess_db: Vec<f32>,
    /// The runs of present sweeps.
    pub intervals: Vec<Interval>,
}

/// Every watched point through the recording.
#[derive(Clone, Debug, PartialEq)]
pub struct Presences {
    /// Each sweep's time.
    pub times: Vec<OffsetDateTime>,
    /// By watch, in the order given to [`PresenceTracker::new`].
    pub watches: Vec<WatchPresence>,
}

/// What a recording watches: the peaks of its maximum hold and the listed emitters whose
/// carriers fall inside its span.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct WatchList {
    /// Grid points to watch: the peaks' first, in peak order, then the emitters'.
    pub bins: Vec<usize>,
    /// How many of `bins` are peaks.
    pub peaks: usize,
    /// The emitters watched, by index, in the order of their bins after the peaks'.
    pub emitters: Vec<usize>,
}

/// The grid points to watch on `trace` for the peaks of `peaks` and the emitters inside
/// its span.
pub fn watch_list(trace: &Trace, peaks: &[ExplainedPeak], emitters: &[Emitter]) -> WatchList {
    let n = trace.levels_dbm.len();
    let mut bins: Vec<usize> = peaks.iter().map(|p| p.peak.index).collect();
    let mut watched = Vec::new();
    for (i, e) in emitters.iter().enumerate() {
        let index = ((e.freq.0 as f64 - trace.start.0 as f64) / trace.step_hz).round();
        if index >= 0.0 && (index as usize) < n && trace.step_hz > 0.0 {
            bins.push(index as usize);
            watched.push(i);
        }
    }
    WatchList {
        bins,
        peaks: peaks.len(),
        emitters: watched,
    }
}

/// The 2 × 2 table of a candidate's presences and what it says beyond chance.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Agreement {
    /// Sweeps with the product present and all its emitters on (the support).
    pub both: u32,
    /// Emitters all on, product absent (the contradictions).
    pub emitters_only: u32,
    /// Product present, an emitter off (heard off air).
    pub product_only: u32,
    /// Neither.
    pub neither: u32,
    /// The phi coefficient of the table (0 when a margin is empty).
    pub phi: f64,
    /// The two-sided p-value of Fisher's exact test.
    pub fisher_p: f64,
}

impl Agreement {
    /// The agreement of the 2 × 2 table `[[a, b], [c, d]]` (a: both, b: emitters only,
    /// c: product only, d: neither).
    pub fn of_table(a: u32, b: u32, c: u32, d: u32) -> Agreement {
        let (fa, fb, fc, fd) = (a as f64, b as f64, c as f64, d as f64);
        let den = ((fa + fb) * (fc + fd) * (fa + fc) * (fb + fd)).sqrt();
        let phi = if den > 0.0 {
            (fa * fd - fb * fc) / den
        } else {
            0.0
        };
        Agreement {
            both: a,
            emitters_only: b,
            product_only: c,
            neither: d,
            phi,
            fisher_p: fisher_exact_two_sided(a, b, c, d),
        }
    }
}

/// The two-sided p-value of Fisher's exact test on `[[a, b], [c, d]]`: the sum of the
/// hypergeometric probabilities of the tables with the same margins whose probability is
/// at most the observed one's (within a relative 1e-7, as SciPy compares).
pub fn fisher_exact_two_sided(a: u32, b: u32, c: u32, d: u32) -> f64 {
    use statrs::function::factorial::ln_factorial;
    let (r1, r2, c1) = (
        a as u64 + b as u64,
        c as u64 + d as u64,
        a as u64 + c as u64,
    );
    let n = r1 + r2;
    let ln_p = |x: u64| -> f64 {
        // rows r1, r2; first column c1; x in the top-left cell
        ln_factorial(r1) + ln_factorial(r2) + ln_factorial(c1) + ln_factorial(n - c1)
            - ln_factorial(n)
            - ln_factorial(x)
            - ln_factorial(r1 - x)
            - ln_factorial(c1 - x)
            - ln_factorial(r2 + x - c1)
    };
    let lo = c1.saturating_sub(r2);
    let hi = r1.min(c1);
    let observed = ln_p(a as u64);
    let mut p = 0.0;
    for x in lo..=hi {
        let l = ln_p(x);
        if l <= observed + 1e-7f64.ln_1p() {
            p += l.exp();
        }
    }
    p.min(1.0)
}

/// A candidate of a product peak, judged over the recording.
#[derive(Clone, Debug)]
pub struct RecordedCandidate {
    /// The candidate as the sweep ranked it (its `rank` is the level model's).
    pub candidate: Candidate,
    /// The counts of the on-air evidence, one observation per sweep.
    pub evidence: Evidence,
    /// The 2 × 2 table over the sweeps whose states are all known.
    pub agreement: Agreement,
    /// The product's mean level above the floor while present with all its emitters
    /// on, dB.
    pub level_all_on_db: Option<f64>,
    /// The product's mean level above the floor while present with one of them off, dB.
    pub level_otherwise_db: Option<f64>,
}

/// A peak of the maximum hold through the recording.
#[derive(Clone, Debug)]
pub struct RecordedPeak {
    /// The peak's index in the sweep's peaks.
    pub peak: usize,
    /// The runs of sweeps in which it was present.
    pub intervals: Vec<Interval>,
    /// Sweeps in which it was present.
    pub present_sweeps: usize,
    /// For a product peak: its candidates ordered by the evidence, then by the level
    /// model's rank.
    pub candidates: Vec<RecordedCandidate>,
}

/// A listed emitter inside the span through the recording.
#[derive(Clone, Debug)]
pub struct RecordedEmitter {
    /// The emitter's index.
    pub emitter: usize,
    /// The runs of sweeps in which its carrier was present.
    pub intervals: Vec<Interval>,
    /// Sweeps in which it was present.
    pub present_sweeps: usize,
}

/// What a recording says.
#[derive(Clone, Debug)]
pub struct RecordingEvidence {
    /// Each sweep's time.
    pub times: Vec<OffsetDateTime>,
    /// Each peak, in the sweep's order.
    pub peaks: Vec<RecordedPeak>,
    /// Each emitter inside the span.
    pub emitters: Vec<RecordedEmitter>,
}

/// Judges the candidates of every product peak of `peaks` by the presences, emitters
/// outside the span following `on_air` (pairs of emitter index and interval, as the
/// on-air log gives them) or their keying.
pub fn judge(
    peaks: &[ExplainedPeak],
    watch: &WatchList,
    presences: &Presences,
    emitters: &[Emitter],
    on_air: &[(usize, Interval)],
) -> RecordingEvidence {
    let in_span = &watch.emitters;
    let mut pairs: Vec<(usize, Interval)> = on_air
        .iter()
        .filter(|(e, _)| !in_span.contains(e))
        .copied()
        .collect();
    for (k, &e) in in_span.iter().enumerate() {
        for &iv in &presences.watches[watch.peaks + k].intervals {
            pairs.push((e, iv));
        }
    }
    let mut schedule = Schedule::new(emitters, &pairs);
    for &e in in_span {
        schedule.mark_logged(e);
    }
    let times = &presences.times;
    let mut out_peaks = Vec::with_capacity(peaks.len());
    for (p, peak) in peaks.iter().enumerate() {
        let w = &presences.watches[p];
        let mut candidates = Vec::new();
        if peak.kind == PeakKind::Product {
            let observations: Vec<Observation> = times
                .iter()
                .zip(&w.present)
                .map(|(&at, &heard)| Observation { at, heard })
                .collect();
            let book = Logbook::new(schedule.clone(), observations);
            candidates = peak
                .ranking
                .candidates
                .iter()
                .map(|c| judge_candidate(c, &book, w))
                .collect();
            candidates.sort_by(|a, b| {
                a.evidence
                    .ranking_cmp(&b.evidence)
                    .then(a.candidate.rank.cmp(&b.candidate.rank))
            });
        }
        out_peaks.push(RecordedPeak {
            peak: p,
            intervals: w.intervals.clone(),
            present_sweeps: w.present.iter().filter(|&&x| x).count(),
            candidates,
        });
    }
    let out_emitters = in_span
        .iter()
        .enumerate()
        .map(|(k, &e)| {
            let w = &presences.watches[watch.peaks + k];
            RecordedEmitter {
                emitter: e,
                intervals: w.intervals.clone(),
                present_sweeps: w.present.iter().filter(|&&x| x).count(),
            }
        })
        .collect();
    RecordingEvidence {
        times: times.clone(),
        peaks: out_peaks,
        emitters: out_emitters,
    }
}

fn judge_candidate(c: &Candidate, book: &Logbook, w: &WatchPresence) -> RecordedCandidate {
    let evidence = book.evidence(&c.product);
    let (mut sum_on, mut n_on, mut sum_off, mut n_off) = (0.0, 0u32, 0.0, 0u32);
    let mut neither = 0u32;
    for (i, o) in book.observations.iter().enumerate() {
        let mut all = OnAir::Yes;
        for t in c.product.terms() {
            match book.schedule.state(t.emitter, o.at) {
                OnAir::No => {
                    all = OnAir::No;
                    break;
                }
                OnAir::Unknown => all = OnAir::Unknown,
                OnAir::Yes => {}
            }
        }
        match (all, o.heard) {
            (OnAir::Yes, true) => {
                sum_on += w.excess_db[i] as f64;
                n_on += 1;
            }
            (OnAir::No, true) => {
                sum_off += w.excess_db[i] as f64;
                n_off += 1;
            }
            (OnAir::No, false) => neither += 1,
            _ => {}
        }
    }
    let mean = |s: f64, n: u32| (n > 0).then(|| s / n as f64);
    RecordedCandidate {
        candidate: *c,
        evidence,
        agreement: Agreement::of_table(
            evidence.support,
            evidence.contradictions,
            evidence.heard_off_air,
            neither,
        ),
        level_all_on_db: mean(sum_on, n_on),
        level_otherwise_db: mean(sum_off, n_off),
    }
}

/// Orders two recorded candidates as [`judge`] does.
pub fn recorded_cmp(a: &RecordedCandidate, b: &RecordedCandidate) -> Ordering {
    a.evidence
        .ranking_cmp(&b.evidence)
        .then(a.candidate.rank.cmp(&b.candidate.rank))
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::macros::datetime;
    use time::Duration;

    fn times(n: usize) -> Vec<OffsetDateTime> {
        (0..n)
            .map(|i| datetime!(2026-05-01 10:00 UTC) + Duration::seconds(10 * i as i64))
            .collect()
    }

    #[test]
    fn one_missing_sweep_does_not_split_an_interval() {
        let mut p = vec![false, true, true, false, true, true, false, false, true];
        bridge_gaps(&mut p, 1);
        assert_eq!(
            p,
            vec![false, true, true, true, true, true, false, false, true]
        );
        let t = times(9);
        let iv = intervals(&p, &t);
        assert_eq!(iv.len(), 2);
        assert_eq!((iv[0].start, iv[0].end), (t[1], t[5]));
        assert_eq!((iv[1].start, iv[1].end), (t[8], t[8]));
        drop_short_runs(&mut p, 2);
        assert_eq!(intervals(&p, &t).len(), 1);
    }

    #[test]
    fn level_hysteresis_holds_a_fading_carrier() {
        let rule = PresenceRule {
            threshold_db: 10.0,
            hysteresis_db: 3.0,
            bridge_sweeps: 0,
            min_run_sweeps: 1,
            floor_window_points: 11,
            half_width_points: 0,
        };
        let mut tr = PresenceTracker::new(rule, 21, vec![10]);
        for (i, lift) in [0.0, 12.0, 8.0, 6.0, 11.0].iter().enumerate() {
            let mut s = vec![-100.0; 21];
            s[10] += lift;
            tr.observe(times(5)[i], &s).unwrap();
        }
        let e = tr
            .observe(times(5)[4], &[-100.0; 21])
            .unwrap_err()
            .message();
        assert!(e.contains("not after the previous sweep"), "{e}");
        let p = tr.finish();
        assert_eq!(p.watches[0].present, vec![false, true, true, false, true]);
    }

    #[test]
    fn fisher_matches_a_hand_count() {
        // [[3, 1], [1, 3]]: tables x = 0..4 with probabilities 1,16,36,16,1 over 70;
        // two-sided p = (1 + 16 + 16 + 1) / 70.
        let a = Agreement::of_table(3, 1, 1, 3);
        assert!((a.fisher_p - 34.0 / 70.0).abs() < 1e-12, "{}", a.fisher_p);
        assert!((a.phi - 0.5).abs() < 1e-12);
    }
}
