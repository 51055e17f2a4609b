//! What a fix can say beside its answer, as typed values: warnings that come with a fix and
//! refusals that stand instead of one. Their `Display` states the finding in the trade's
//! words; a front end adds its own advice (which option or log column to use).

use std::fmt;

use serde::Serialize;

/// Something the crew should know about a fix.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum FixWarning {
    /// Some readings carry a σ and some do not: the given ones were ignored.
    SigmaOnSomeReadings,
    /// The stated σ is contradicted by the residuals (χ² test with n − 2 degrees of
    /// freedom rejects at `level`): the region uses the observed scatter instead.
    SigmaContradicted {
        /// The σ stated, degrees.
        stated_deg: f64,
        /// The scatter the residuals show, degrees.
        observed_deg: f64,
        /// The test's level, e.g. 0.01.
        level: f64,
    },
    /// The fix lies behind these observers (residual beyond 90°).
    BehindObservers {
        /// Their log lines.
        lines: Vec<u64>,
    },
    /// Seen from the fix, the lines of bearing cross at no more than this.
    WeakCrossing {
        /// The largest angle between lines at the fix, degrees.
        spread_deg: f64,
    },
    /// The fix lies near the straight line the observers walked.
    OnWalkedLine,
    /// The linearised ellipse is this many times longer than wide.
    ElongatedEllipse {
        /// Major over minor axis.
        ratio: f64,
        /// Orientation of the major axis, degrees from true north.
        along_deg: f64,
    },
    /// The ellipse reaches further than the nearest observer.
    EllipseBeyondNearestObserver {
        /// The semi-major axis, metres.
        semi_major_m: f64,
        /// The nearest observer's distance to the fix, metres.
        nearest_m: f64,
    },
    /// These readings were taken as pointing the other way (front/back).
    TakenReversed {
        /// Their log lines.
        lines: Vec<u64>,
    },
    /// The linearised ellipse misses the likelihood contour by this fraction of its
    /// radius somewhere: the region given is the likelihood contour.
    LinearisationFails {
        /// The largest relative difference in radius.
        radius_mismatch: f64,
    },
    /// The fix is the least-squares intersection but the region is the likelihood
    /// contour, which centres on the maximum-likelihood point this far away.
    RegionCentredElsewhere {
        /// Distance between the two points, metres.
        offset_m: f64,
    },
    /// A common offset was asked for but the walk does not surround the junction, so it
    /// cannot be told from the position: none was estimated.
    OffsetNotObservable,
    /// Every bearing reads this much clockwise of the junction (estimated with the fix).
    CommonOffset {
        /// The offset, degrees.
        offset_deg: f64,
        /// Its interval's lower end, degrees.
        low_deg: f64,
        /// Its interval's upper end, degrees.
        high_deg: f64,
    },
    /// Readings at one spot share that spot's error: they count as about one.
    SpotsShareError {
        /// The spots.
        spots: usize,
        /// The readings.
        readings: usize,
        /// The spot error's σ, degrees.
        between_deg: f64,
        /// The scatter within a spot, degrees.
        within_deg: f64,
    },
    /// Readings repeat at too few spots to tell a spot's own error.
    TooFewSpots {
        /// The spots.
        spots: usize,
    },
    /// Readings along the walk lean the same way (serial correlation): the region is
    /// widened, and may still be too small.
    LeanTheSameWay {
        /// The first log line of the longest run of one sign.
        first_line: u64,
        /// Its last log line.
        last_line: u64,
        /// How much the region's axes were widened by.
        widened_by: f64,
    },
    /// These levels were heard closer to the fix than the near field: set aside.
    LevelsInNearField {
        /// Their log lines.
        lines: Vec<u64>,
        /// The near field's reach, metres.
        within_m: f64,
    },
    /// The likelihood region of a fix from levels alone does not close: it runs on out to
    /// the search's reach towards this direction, and is drawn out that far (the levels
    /// bound the junction on the other sides only).
    RegionOpen {
        /// The region's confidence.
        confidence: f64,
        /// The first direction it stays open towards, degrees from north.
        towards_deg: f64,
        /// How far it is drawn, metres.
        reach_m: f64,
    },
    /// These levels reached the receiver's saturation: taken as lower bounds.
    LevelsSaturated {
        /// Their log lines.
        lines: Vec<u64>,
        /// The saturation level, dBm.
        max_dbm: f64,
    },
    /// The path-loss exponent went to an end of its range and is held there.
    ExponentAtBound {
        /// The exponent held.
        exponent: f64,
        /// The range's low end.
        low: f64,
        /// The range's high end.
        high: f64,
    },
    /// Every level was heard at one spot: they say nothing of the position.
    LevelsFromOneSpot,
}

impl fmt::Display for FixWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let lines = |l: &[u64]| {
            format!(
                "line{} {}",
                if l.len() == 1 { "" } else { "s" },
                l.iter()
                    .map(|x| x.to_string())
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        };
        match self {
            FixWarning::SigmaOnSomeReadings => write!(
                f,
                "σ is given on some readings only: ignored, the scatter is estimated from the residuals"
            ),
            FixWarning::SigmaContradicted { stated_deg, observed_deg, .. } => write!(
                f,
                "the stated bearing σ of {stated_deg:.1}° is contradicted by the residuals, which scatter by {observed_deg:.1}°: the region is widened to the observed scatter"
            ),
            FixWarning::BehindObservers { lines: l } => write!(
                f,
                "the fix lies behind the observer of {} (a reflection, or the back of the antenna?)",
                lines(l)
            ),
            FixWarning::WeakCrossing { spread_deg } => write!(
                f,
                "weakly observed: the lines of bearing cross at no more than {spread_deg:.1}°; a bearing from the side would help"
            ),
            FixWarning::OnWalkedLine => write!(
                f,
                "the fix lies near the straight line the observers walked: bearings along it observe poorly; take one from the side"
            ),
            FixWarning::ElongatedEllipse { ratio, along_deg } => write!(
                f,
                "the ellipse is {ratio:.0} times longer than wide: weakly observed along {along_deg:.0}°"
            ),
            FixWarning::EllipseBeyondNearestObserver { semi_major_m, nearest_m } => write!(
                f,
                "the ellipse ({semi_major_m:.0} m) reaches further than the nearest observer ({nearest_m:.0} m): more bearings, closer in and from other sides, would help"
            ),
            FixWarning::TakenReversed { lines: l } => {
                write!(f, "taken as pointing the other way (front/back): {}", lines(l))
            }
            FixWarning::LinearisationFails { radius_mismatch } => {
                let by = if radius_mismatch.is_finite() && *radius_mismatch < 1.0 {
                    format!("by up to {:.0} % of its radius", radius_mismatch * 100.0)
                } else {
                    "by more than its own size".to_string()
                };
                write!(
                    f,
                    "the ellipse misses the likelihood contour {by}: the region given is the likelihood contour, not the ellipse"
                )
            }
            FixWarning::LevelsInNearField { lines: l, within_m } => write!(
                f,
                "{} heard within {within_m:.1} m of the fix, in the near field where the distance law does not hold: set aside",
                lines(l)
            ),
            FixWarning::LevelsSaturated { lines: l, max_dbm } => write!(
                f,
                "{} at or above the receiver's saturation ({max_dbm:.1} dBm): taken as lower bounds, not values",
                lines(l)
            ),
            FixWarning::RegionOpen { confidence, towards_deg, reach_m } => write!(
                f,
                "the {:.0} % region does not close: the levels do not bound the junction towards {towards_deg:.0}°, and the region is drawn out to the search's reach ({:.0} km) that way, no measurement of its size; levels from spots beyond the fix towards {towards_deg:.0}° (the junction's far side from the walk) would close it",
                confidence * 100.0,
                reach_m / 1000.0
            ),
            FixWarning::ExponentAtBound { exponent, low, high } => write!(
                f,
                "the path-loss exponent went to {exponent:.1}, an end of its range {low:.1}–{high:.1}, and is held there: the levels may not follow the distance law (reflections, a changed attenuator)"
            ),
            FixWarning::LevelsFromOneSpot => write!(
                f,
                "every level was heard at one spot: the levels say nothing of the position"
            ),
            FixWarning::OffsetNotObservable => write!(
                f,
                "no common offset estimated: the walk does not surround the junction, so an offset of every bearing cannot be told from the position"
            ),
            FixWarning::CommonOffset { offset_deg, low_deg, high_deg } => write!(
                f,
                "every bearing reads {:.1}° {} of the fix ({:+.1}° to {:+.1}°): check the antenna's mounting and the compass; the fix allows for it",
                offset_deg.abs(),
                if *offset_deg >= 0.0 { "clockwise" } else { "anticlockwise" },
                low_deg,
                high_deg
            ),
            FixWarning::SpotsShareError { spots, readings, between_deg, within_deg } => write!(
                f,
                "readings at one spot share that spot's error ({between_deg:.1}° from spot to spot, {within_deg:.1}° within a spot): the {readings} readings count as about {spots} spots; bearings from more spots would help more than repeats"
            ),
            FixWarning::TooFewSpots { spots } => write!(
                f,
                "readings repeat at only {spots} spots: a spot's own error (multipath) cannot be told, so the region may be too small; take bearings from more spots"
            ),
            FixWarning::LeanTheSameWay { first_line, last_line, widened_by } => write!(
                f,
                "readings on lines {first_line}–{last_line} lean the same way: their errors are not independent, so the region is widened {widened_by:.1} times and may still be too small"
            ),
            FixWarning::RegionCentredElsewhere { offset_m } => write!(
                f,
                "the region is the likelihood contour around the maximum-likelihood point, {offset_m:.0} m from this least-squares fix"
            ),
        }
    }
}

/// Why the bearings support no fix (or no honest region).
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum FixRefusal {
    /// Fewer than two usable readings.
    TooFewReadings {
        /// The readings given.
        n: usize,
    },
    /// The confidence is not strictly between 0 and 1.
    ConfidenceOutOfRange {
        /// The confidence asked for.
        confidence: f64,
    },
    /// Two bearings without σ: a point but no uncertainty.
    TwoBearingsWithoutSigma,
    /// Every reading was taken from the same spot.
    SameSpot,
    /// The bearings are parallel: they differ by this much at most.
    ParallelBearings {
        /// The largest difference between bearings, degrees.
        spread_deg: f64,
    },
    /// The lines of bearing are parallel or coincide (no least-squares intersection).
    LinesCoincide,
    /// The lines meet only behind the observers.
    Diverging,
    /// Seen from the fix, the lines arrive within this spread.
    ArriveParallel {
        /// The spread of arrival angles, degrees.
        spread_deg: f64,
    },
    /// Fewer than two readings agree with each other.
    TooFewAgreeing,
    /// The position is not observed in every direction.
    Degenerate,
    /// Too few agreeing readings to estimate the scatter.
    TooFewForScatter {
        /// The readings that agree.
        n_used: usize,
    },
    /// The likelihood region reaches beyond `reach_m` along `towards_deg`: it is
    /// unbounded for practical purposes, so no region is claimed.
    RegionUnbounded {
        /// The region's confidence.
        confidence: f64,
        /// The direction it runs on in, degrees from true north.
        towards_deg: f64,
        /// How far it was traced, metres.
        reach_m: f64,
    },
    /// Levels alone, from too few spots (position, L₀ and the exponent need four).
    TooFewLevelSpots {
        /// The spots the levels were heard at.
        spots: usize,
        /// The spots needed.
        needed: usize,
    },
    /// Levels alone, every spot on one straight line: the junction's side of it is not
    /// known.
    LevelsOnOneLine,
    /// The solver could not be set up.
    Solver {
        /// What the solver said.
        detail: String,
    },
}

impl fmt::Display for FixRefusal {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FixRefusal::TooFewReadings { n } => write!(
                f,
                "{n} usable reading{}: a fix needs at least two bearings from different spots",
                if *n == 1 { "" } else { "s" }
            ),
            FixRefusal::ConfidenceOutOfRange { confidence } => {
                write!(f, "confidence {confidence} must lie strictly between 0 and 1")
            }
            FixRefusal::TwoBearingsWithoutSigma => write!(
                f,
                "two bearings without σ fix a point but say nothing of its uncertainty: state their σ or take a third bearing"
            ),
            FixRefusal::SameSpot => write!(
                f,
                "every reading was taken from the same spot: lines from one spot cross only there; walk to other spots"
            ),
            FixRefusal::ParallelBearings { spread_deg } => write!(
                f,
                "the bearings are parallel (they differ by {spread_deg:.2}° at most): they fix no point; take bearings from spots well to the side"
            ),
            FixRefusal::LinesCoincide => write!(
                f,
                "the lines of bearing are parallel or coincide: they fix no point; take bearings from spots well to the side"
            ),
            FixRefusal::Diverging => write!(
                f,
                "the lines of bearing diverge: they meet only behind the observers, so they fix no junction in front of them"
            ),
            FixRefusal::ArriveParallel { spread_deg } => write!(
                f,
                "seen from the fix, the lines of bearing arrive within {spread_deg:.2}° of each other: the junction is not observable along them; take bearings from spots well to the side"
            ),
            FixRefusal::TooFewAgreeing => {
                write!(f, "fewer than two readings agree with each other: no fix")
            }
            FixRefusal::Degenerate => write!(
                f,
                "the bearings do not observe the junction's position in every direction (the geometry is degenerate): take bearings from spots well to the side"
            ),
            FixRefusal::TooFewForScatter { n_used } => write!(
                f,
                "{n_used} agreeing readings are too few to estimate the bearing scatter: state the bearings' σ or take more bearings"
            ),
            FixRefusal::RegionUnbounded { confidence, towards_deg, reach_m } => write!(
                f,
                "the {:.0} % likelihood region is unbounded: it runs on beyond {:.0} km towards {towards_deg:.0}°, so the bearings fix no region; take bearings from spots well to the side",
                confidence * 100.0,
                reach_m / 1000.0
            ),
            FixRefusal::TooFewLevelSpots { spots, needed } => write!(
                f,
                "levels from {spots} spot{} fix no point: levels alone need at least {needed} spots, not on one line",
                if *spots == 1 { "" } else { "s" }
            ),
            FixRefusal::LevelsOnOneLine => write!(
                f,
                "every level was heard on one straight line: they cannot tell which side of it the junction is; take levels off the line"
            ),
            FixRefusal::Solver { detail } => write!(f, "solver set-up: {detail}"),
        }
    }
}

impl std::error::Error for FixRefusal {}

impl From<FixRefusal> for crate::error::Error {
    fn from(r: FixRefusal) -> Self {
        crate::error::Error {
            class: match r {
                FixRefusal::ConfidenceOutOfRange { .. } => crate::error::ErrorClass::Argument,
                _ => crate::error::ErrorClass::Refused,
            },
            place: None,
            message: r.to_string(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_name_no_command_line_option() {
        let warnings = [
            FixWarning::SigmaOnSomeReadings,
            FixWarning::SigmaContradicted {
                stated_deg: 2.0,
                observed_deg: 6.1,
                level: 0.01,
            },
            FixWarning::BehindObservers { lines: vec![4, 7] },
            FixWarning::LinearisationFails {
                radius_mismatch: 0.3,
            },
        ];
        let refusals = [
            FixRefusal::TwoBearingsWithoutSigma,
            FixRefusal::TooFewForScatter { n_used: 2 },
            FixRefusal::RegionUnbounded {
                confidence: 0.95,
                towards_deg: 12.0,
                reach_m: 60_000.0,
            },
        ];
        let texts: Vec<String> = warnings
            .iter()
            .map(|w| w.to_string())
            .chain(refusals.iter().map(|r| r.to_string()))
            .collect();
        for t in &texts {
            assert!(!t.contains("--"), "{t}");
        }
        assert!(texts[1].contains("2.0°") && texts[1].contains("6.1°"));
        assert!(texts[2].contains("lines 4, 7"));
    }
}
