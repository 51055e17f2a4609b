//! Confirming tests by level slope: is a product made over the air or in the receiver, and
//! which coefficient does one emitter carry in it?
//!
//! **Attenuator test.** X dB of attenuation inserted in front of the receiver lowers a
//! signal that arrives over the air by X dB; a product made inside the receiver by an
//! n-th-order process drops by about n·X dB (common practice). Readings are
//! `(step_db, level_dbm)` with `step_db` the attenuation inserted (0 or more).
//!
//! **Power-step test.** Lowering one emitter by X dB lowers a product in which it carries
//! coefficient k by |k|·X dB (the power law: an n-th-order product rises n dB per dB of
//! its tones; Pozar, *Microwave Engineering*; Razavi, *RF Microelectronics*). Readings are
//! `(step_db, level_dbm)` with `step_db` the change of that emitter's power, negative for
//! a reduction (−3 means 3 dB lower than normal).
//!
//! **Fit.** Ordinary least squares of level on step gives the slope b, its standard error
//! se(b) = s/√Sxx with s² = Σ residual² / (n − 2), and the two-sided 95 % interval
//! b ± t(0.975; n − 2)·se(b) from Student's t distribution (statrs).
//!
//! **Sign convention.** The reported `slope_db_per_db` is positive when the test behaves
//! as expected:
//! - attenuator: the drop of the level per dB of attenuation inserted, −b (1 for a signal
//!   over the air, n for an n-th-order product made in the receiver);
//! - power step: the change of the level per dB of the emitter's power change, +b (|k|).
//!
//! The interval is stated in the same convention.
//!
//! **Decision rule.** The alternatives are separated at the midpoints between them, and a
//! verdict needs the whole 95 % interval on one side:
//! - attenuator: `external` when the interval lies inside (0.5, 1.5); `internal` when it
//!   lies wholly above 1.5, with the order n given when the interval also lies inside
//!   (n − 0.5, n + 0.5); otherwise `inconclusive`. A slope below 0.5 means the level does
//!   not follow the attenuator at all (the interference enters past it, or the readings
//!   sit on the noise floor).
//! - power step: a junction's law may sit below the ideal one by a drive exponent α, so a
//!   slope is α·|k|, not |k|. Measured passive intermodulation rises 2 to 3 dB/dB at third
//!   order (common practice), α about 0.67 to 1; with a margin the rule takes α in
//!   [`DRIVE_EXPONENT_RANGE`], 0.6 to 1.1. Every |k| (0 ≤ k ≤ 15) with α·|k| inside the
//!   interval for some such α is reported (`consistent_k`); the coefficient is settled
//!   only when exactly one is, so that no alternative is dropped: at 2 dB/dB a slope of
//!   2.0 fits |k| = 2 (α = 1) and |k| = 3 (α = 0.67) alike, and only the ratio of two
//!   emitters' slopes (a step of a second emitter) tells them apart. k = 0 (the interval
//!   meets ±0.3 dB/dB, half the least |k| = 1 slope) says the emitter takes no part in
//!   the product.
//!
//! When the interval straddles a boundary, [`Unsettled::Straddles`] says how many readings
//! over the same range of steps, or what range of steps with the same number of readings,
//! would narrow the interval enough at the present scatter.
//!
//! **Power steps of several emitters.** [`judge_power_steps`] fits each emitter's series
//! alone. A junction whose law is below the ideal by a common exponent α (level ∝
//! Π Pᵢ^(α·|kᵢ|)) gives slopes α·|kᵢ|, so one slope cannot separate |k| from α, but the
//! ratios of two or more can. Every integer vector (at most three emitters nonzero, order
//! at most 15) for which one α in [`DRIVE_EXPONENT_RANGE`] lies inside every slope's 95 %
//! interval divided by its |kᵢ| (|kᵢ| = 0 needs an interval holding 0) fits; the answer
//! is settled only when exactly one does, and ambiguous (every fitting vector listed)
//! otherwise: three readings an emitter rarely settle it.
//! The exponent is the weighted least-squares α̂ = Σ(kᵢbᵢ/seᵢ²)/Σ(kᵢ²/seᵢ²) with
//! se = 1/√Σ(kᵢ²/seᵢ²) and the t quantile of the fewest degrees of freedom.

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};

use crate::error::{Error, Result};
use crate::intermod::MAX_ORDER;

/// The confidence of the interval on which verdicts rest.
pub const CONFIDENCE: f64 = 0.95;

/// The drive exponents α a junction's law is taken to have: 2 to 3 dB/dB at third order
/// is what practitioners measure (common practice), the ideal law 3 dB/dB (Pozar), and a
/// margin either side.
pub const DRIVE_EXPONENT_RANGE: (f64, f64) = (0.6, 1.1);

/// The most readings [`Unsettled::Straddles`] will suggest; beyond that, more of the same
/// readings will not settle the question.
pub const MAX_SUGGESTED_READINGS: usize = 1_000;

/// Which test the readings come from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StepKind {
    /// Attenuation inserted in front of the receiver.
    Attenuator,
    /// One emitter's power changed.
    Power,
}

/// The attenuator test's answer.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// The product arrives over the air: the junction is outside the receiver.
    External,
    /// The product is made in the receiver.
    Internal,
    /// The interval does not separate the alternatives.
    Inconclusive,
}

/// Why a test gave no answer, and what would give one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Unsettled {
    /// Two readings fix a line but not its uncertainty.
    TooFewReadings {
        /// The readings given.
        have: usize,
    },
    /// The level does not follow the step the expected way: below 0.5 dB/dB for the
    /// attenuator, below −0.5 for a power step (the level rose as the emitter was lowered).
    DoesNotFollow,
    /// Steeper than any order the product search considers.
    TooSteep,
    /// Two or more |k| fit the slope with a drive exponent in [`DRIVE_EXPONENT_RANGE`]:
    /// one emitter's slope cannot separate |k| from α; a second emitter's step can.
    Alternatives,
    /// The interval straddles the boundary between two alternatives.
    Straddles {
        /// The boundary the interval crosses (nearest to the estimate).
        boundary: f64,
        /// Readings over the same range of steps that would settle it at the present
        /// scatter, when some number up to [`MAX_SUGGESTED_READINGS`] would.
        readings_needed: Option<usize>,
        /// The range of steps (dB) that would settle it with the same number of readings.
        step_range_needed_db: Option<f64>,
    },
}

/// An ordinary least-squares line through (step, level) readings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LineFit {
    /// How many readings the fit rests on.
    pub n: usize,
    /// d(level)/d(step), dB per dB, as measured (no sign convention applied).
    pub slope: f64,
    /// Level at step 0, dBm.
    pub intercept: f64,
    /// Standard error of the slope; `None` with two readings.
    pub slope_stderr: Option<f64>,
    /// Residual standard deviation s, dB; `None` with two readings.
    pub residual_sd_db: Option<f64>,
    /// Σ (step − mean step)².
    pub sxx: f64,
    /// Highest step minus lowest, dB.
    pub step_range_db: f64,
}

/// Fits level against step by ordinary least squares. Refuses fewer than two distinct
/// steps: no slope can be drawn through them.
pub fn fit_line(points: &[(f64, f64)]) -> Result<LineFit> {
    let n = points.len();
    let lowest = points.iter().map(|p| p.0).fold(f64::INFINITY, f64::min);
    let highest = points.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    if n < 2 || highest <= lowest {
        return Err(Error::refused(match n {
            0 => "no readings: a slope needs readings at two or more different steps".to_string(),
            1 => "one reading: a slope needs readings at two or more different steps".to_string(),
            _ => format!(
                "every reading was taken at step {lowest} dB: a slope needs two or more different steps"
            ),
        }));
    }
    let nf = n as f64;
    let mean_x = points.iter().map(|p| p.0).sum::<f64>() / nf;
    let mean_y = points.iter().map(|p| p.1).sum::<f64>() / nf;
    let sxx: f64 = points.iter().map(|p| (p.0 - mean_x).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.0 - mean_x) * (p.1 - mean_y)).sum();
    let slope = sxy / sxx;
    let intercept = mean_y - slope * mean_x;
    let (slope_stderr, residual_sd_db) = if n > 2 {
        let sse: f64 = points
            .iter()
            .map(|p| (p.1 - intercept - slope * p.0).powi(2))
            .sum();
        let s = (sse / (nf - 2.0)).sqrt();
        (Some(s / sxx.sqrt()), Some(s))
    } else {
        (None, None)
    };
    Ok(LineFit {
        n,
        slope,
        intercept,
        slope_stderr,
        residual_sd_db,
        sxx,
        step_range_db: highest - lowest,
    })
}

/// The two-sided Student's t quantile for [`CONFIDENCE`] with `df` degrees of freedom.
pub fn t_quantile(df: f64) -> Option<f64> {
    let t = StudentsT::new(0.0, 1.0, df).ok()?;
    let q = t.inverse_cdf(0.5 + CONFIDENCE / 2.0);
    q.is_finite().then_some(q)
}

/// What a series of readings says.
#[derive(Clone, Debug, PartialEq)]
pub struct SlopeAnswer {
    /// Which test the readings are.
    pub kind: StepKind,
    /// The straight line fitted to level against step.
    pub fit: LineFit,
    /// The slope in the sign convention of the module docs.
    pub slope_db_per_db: f64,
    /// The 95 % interval of `slope_db_per_db`; `None` with two readings.
    pub interval: Option<(f64, f64)>,
    /// Attenuator test only.
    pub verdict: Option<Verdict>,
    /// Attenuator test, internal: the order, when the interval singles one out.
    pub order: Option<u32>,
    /// Power step only: |k|, when exactly one fits (module docs).
    pub coefficient: Option<u32>,
    /// Power step only: every |k| that fits the interval with a drive exponent in
    /// [`DRIVE_EXPONENT_RANGE`].
    pub consistent_k: Vec<u32>,
    /// Why there is no answer, when there is none.
    pub unsettled: Option<Unsettled>,
}

/// The integer k with the whole interval inside (k − 0.5, k + 0.5), if any.
fn single_integer(lo: f64, hi: f64) -> Option<i64> {
    let k = lo.round();
    (hi.round() == k && lo > k - 0.5 && hi < k + 0.5).then_some(k as i64)
}

/// Fits the readings `(step_db, level_dbm)` and applies the decision rule of the module
/// docs.
pub fn judge(kind: StepKind, points: &[(f64, f64)]) -> Result<SlopeAnswer> {
    let fit = fit_line(points)?;
    let sign = match kind {
        StepKind::Attenuator => -1.0,
        StepKind::Power => 1.0,
    };
    let estimate = sign * fit.slope;
    let half_width = match (fit.slope_stderr, t_quantile(fit.n as f64 - 2.0)) {
        (Some(se), Some(t)) => Some(t * se),
        _ => None,
    };
    let mut answer = SlopeAnswer {
        kind,
        fit,
        slope_db_per_db: estimate,
        interval: half_width.map(|h| (estimate - h, estimate + h)),
        verdict: (kind == StepKind::Attenuator).then_some(Verdict::Inconclusive),
        order: None,
        coefficient: None,
        consistent_k: Vec::new(),
        unsettled: None,
    };
    let (Some((lo, hi)), Some(h)) = (answer.interval, half_width) else {
        answer.unsettled = Some(Unsettled::TooFewReadings { have: fit.n });
        return Ok(answer);
    };
    let top = MAX_ORDER as f64 + 0.5;
    match kind {
        StepKind::Attenuator => {
            if lo > 0.5 && hi < 1.5 {
                answer.verdict = Some(Verdict::External);
                return Ok(answer);
            }
            if lo > 1.5 {
                answer.verdict = Some(Verdict::Internal);
                answer.order = single_integer(lo, hi)
                    .filter(|&k| (2..=MAX_ORDER as i64).contains(&k))
                    .map(|k| k as u32);
                return Ok(answer);
            }
            if hi < 0.5 {
                answer.unsettled = Some(Unsettled::DoesNotFollow);
                return Ok(answer);
            }
            let boundary = if (estimate - 0.5).abs() < (estimate - 1.5).abs() {
                0.5
            } else {
                1.5
            };
            answer.unsettled = Some(straddles(&fit, boundary, (estimate - boundary).abs(), h));
        }
        StepKind::Power => {
            answer.consistent_k = consistent_coefficients(lo, hi);
            if let [k] = answer.consistent_k.as_slice() {
                answer.coefficient = Some(*k);
                return Ok(answer);
            }
            if answer.consistent_k.len() > 1
                && answer.consistent_k.windows(2).all(|w| {
                    // overlapping ranges: no series of this emitter alone separates them
                    w[1] as f64 * DRIVE_EXPONENT_RANGE.0 <= w[0] as f64 * DRIVE_EXPONENT_RANGE.1
                })
            {
                answer.unsettled = Some(Unsettled::Alternatives);
                return Ok(answer);
            }
            if hi < -0.5 {
                answer.unsettled = Some(Unsettled::DoesNotFollow);
                return Ok(answer);
            }
            if lo > top {
                answer.unsettled = Some(Unsettled::TooSteep);
                return Ok(answer);
            }
            // the gaps between the fitting |k|'s slope ranges: 0.3 | 0.6 and 1.1 | 1.2
            let (a_lo, a_hi) = DRIVE_EXPONENT_RANGE;
            let top_of = |k: u32| match k {
                0 => ZERO_SLOPE_DB_PER_DB,
                k => k as f64 * a_hi,
            };
            let boundary = answer
                .consistent_k
                .windows(2)
                .filter(|w| top_of(w[0]) < w[1] as f64 * a_lo)
                .map(|w| (top_of(w[0]) + w[1] as f64 * a_lo) / 2.0)
                .min_by(|x, y| (x - estimate).abs().total_cmp(&(y - estimate).abs()))
                .unwrap_or(((estimate - 0.5).round() + 0.5).clamp(-0.5, top));
            answer.unsettled = Some(straddles(&fit, boundary, (estimate - boundary).abs(), h));
        }
    }
    Ok(answer)
}

/// Every |k| whose slopes α·|k|, α in [`DRIVE_EXPONENT_RANGE`], meet the interval
/// [lo, hi] (k = 0 when it holds 0).
pub fn consistent_coefficients(lo: f64, hi: f64) -> Vec<u32> {
    let (a_lo, a_hi) = DRIVE_EXPONENT_RANGE;
    (0..=MAX_ORDER)
        .filter(|&k| {
            if k == 0 {
                // a level moving less than half the least |k| = 1 slope does not follow
                return lo <= ZERO_SLOPE_DB_PER_DB && hi >= -ZERO_SLOPE_DB_PER_DB;
            }
            let k = k as f64;
            lo <= k * a_hi && hi >= k * a_lo
        })
        .collect()
}

/// A level moving less than this per dB of an emitter's power (half the least slope of
/// |k| = 1) does not follow it: |k| = 0 fits.
pub const ZERO_SLOPE_DB_PER_DB: f64 = DRIVE_EXPONENT_RANGE.0 / 2.0;

/// How much more measuring would move the interval's edge off `boundary`, the estimate
/// being `margin` dB/dB from it and the interval `half_width` wide on each side.
fn straddles(fit: &LineFit, boundary: f64, margin: f64, half_width: f64) -> Unsettled {
    // Closer than this to the boundary, no practical series tells the alternatives apart.
    const MIN_MARGIN: f64 = 0.05;
    if margin < MIN_MARGIN {
        return Unsettled::Straddles {
            boundary,
            readings_needed: None,
            step_range_needed_db: None,
        };
    }
    let sd = fit.residual_sd_db.unwrap_or(0.0);
    // Readings spread like the present ones: Sxx grows in proportion to their number.
    let spread_per_reading = fit.sxx / fit.n as f64;
    let readings_needed = (fit.n + 1..=MAX_SUGGESTED_READINGS).find(|&m| {
        t_quantile(m as f64 - 2.0)
            .is_some_and(|t| t * sd / (m as f64 * spread_per_reading).sqrt() < margin)
    });
    // The same readings over a wider range: Sxx grows with the square of the range.
    let range = fit.step_range_db * half_width / margin;
    Unsettled::Straddles {
        boundary,
        readings_needed,
        step_range_needed_db: range.is_finite().then_some(range),
    }
}

/// One emitter's part in a multi-emitter power-step answer.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct EmitterCoefficient {
    /// The emitter stepped.
    pub emitter: String,
    /// |k|, when the answer settles it.
    pub k: Option<u32>,
    /// The level's change per dB of this emitter's power, dB/dB.
    pub slope_db_per_db: f64,
    /// Its standard error; `None` with two readings.
    pub slope_stderr: Option<f64>,
}

/// The common drive exponent α implied by the coefficients.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Exponent {
    /// The exponent's estimate (1 for the ideal power law).
    pub estimate: f64,
    /// The 95 % interval.
    pub interval: (f64, f64),
}

/// What a multi-emitter power-step series says.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PowerVerdict {
    /// Exactly one integer vector fits every slope.
    Coefficients,
    /// Two or more vectors fit.
    Ambiguous,
    /// No vector up to order 15 fits with an exponent in [`DRIVE_EXPONENT_RANGE`].
    NoneConsistent,
    /// One emitter's slope cannot separate |k| from the exponent; its answer assumes the
    /// ideal law.
    SingleEmitter,
    /// A series has only two readings: no interval.
    TooFewReadings,
}

/// The answer of [`judge_power_steps`].
#[derive(Clone, Debug, PartialEq)]
pub struct PowerSteps {
    /// Each stepped emitter's slope and coefficient.
    pub coefficients: Vec<EmitterCoefficient>,
    /// The common drive exponent implied, with its interval, when two or more emitters were stepped.
    pub exponent: Option<Exponent>,
    /// What the steps say.
    pub verdict: PowerVerdict,
    /// With one emitter, the single-series answer of [`judge`].
    pub single: Option<SlopeAnswer>,
    /// Every coefficient vector (by emitter, in the series' order) that fits every slope
    /// with one drive exponent in [`DRIVE_EXPONENT_RANGE`], lowest order first.
    pub alternatives: Vec<Vec<u32>>,
}

/// The most emitters one power-step file may hold.
pub const MAX_STEPPED_EMITTERS: usize = 8;

/// Every vector of `m` counts 0..=15 with at most three nonzero and order 1..=15, in
/// order of increasing Σ.
fn coefficient_vectors(m: usize) -> Vec<Vec<u32>> {
    fn recurse(m: usize, budget: u32, nonzero: usize, cur: &mut Vec<u32>, out: &mut Vec<Vec<u32>>) {
        if cur.len() == m {
            if cur.iter().any(|&k| k > 0) {
                out.push(cur.clone());
            }
            return;
        }
        for k in 0..=budget {
            if k > 0 && nonzero == 3 {
                break;
            }
            cur.push(k);
            recurse(m, budget - k, nonzero + usize::from(k > 0), cur, out);
            cur.pop();
        }
    }
    let mut out = Vec::new();
    recurse(m, MAX_ORDER, 0, &mut Vec::with_capacity(m), &mut out);
    out.sort_by_key(|v| v.iter().sum::<u32>());
    out
}

/// The range of α consistent with every interval for `k` (module docs), if any.
fn exponent_range(k: &[u32], intervals: &[(f64, f64)]) -> Option<(f64, f64)> {
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    for (&k, &(a, b)) in k.iter().zip(intervals) {
        if k == 0 {
            if a > ZERO_SLOPE_DB_PER_DB || b < -ZERO_SLOPE_DB_PER_DB {
                return None;
            }
        } else {
            lo = lo.max(a / k as f64);
            hi = hi.min(b / k as f64);
        }
    }
    let (a_lo, a_hi) = DRIVE_EXPONENT_RANGE;
    (lo <= hi && hi >= a_lo && lo <= a_hi).then_some((lo.max(a_lo), hi.min(a_hi)))
}

/// Reads the power steps of one or more emitters: `(emitter, readings)` with readings
/// `(step_db, level_dbm)` as for [`judge`] (module docs).
pub fn judge_power_steps(series: &[(String, Vec<(f64, f64)>)]) -> Result<PowerSteps> {
    if series.is_empty() {
        return Err(Error::refused(
            "no readings: a power step needs readings of at least one emitter",
        ));
    }
    if series.len() > MAX_STEPPED_EMITTERS {
        return Err(Error::refused(format!(
            "{} emitters stepped: at most {MAX_STEPPED_EMITTERS} can be read together",
            series.len()
        )));
    }
    for (i, (id, _)) in series.iter().enumerate() {
        if series[..i].iter().any(|(other, _)| other == id) {
            return Err(Error::refused(format!(
                "emitter `{id}` has two series: give each emitter's steps once"
            )));
        }
    }
    let mut fits = Vec::with_capacity(series.len());
    for (id, points) in series {
        let fit = fit_line(points).map_err(|e| Error::refused(format!("emitter `{id}`: {e}")))?;
        fits.push(fit);
    }
    let mut coefficients: Vec<EmitterCoefficient> = series
        .iter()
        .zip(&fits)
        .map(|((id, _), f)| EmitterCoefficient {
            emitter: id.clone(),
            k: None,
            slope_db_per_db: f.slope,
            slope_stderr: f.slope_stderr,
        })
        .collect();
    if series.len() == 1 {
        let single = judge(StepKind::Power, &series[0].1)?;
        coefficients[0].k = single.coefficient;
        return Ok(PowerSteps {
            coefficients,
            exponent: None,
            verdict: PowerVerdict::SingleEmitter,
            single: Some(single),
            alternatives: Vec::new(),
        });
    }
    let mut intervals = Vec::with_capacity(fits.len());
    let mut t_max: f64 = 0.0;
    for f in &fits {
        let (Some(se), Some(t)) = (f.slope_stderr, t_quantile(f.n as f64 - 2.0)) else {
            return Ok(PowerSteps {
                coefficients,
                exponent: None,
                verdict: PowerVerdict::TooFewReadings,
                single: None,
                alternatives: Vec::new(),
            });
        };
        t_max = t_max.max(t);
        intervals.push((f.slope - t * se, f.slope + t * se));
    }
    // every vector of any order that fits: settled only when one does
    let found: Vec<Vec<u32>> = coefficient_vectors(series.len())
        .into_iter()
        .filter(|k| exponent_range(k, &intervals).is_some())
        .collect();
    let verdict = match found.len() {
        0 => PowerVerdict::NoneConsistent,
        1 => PowerVerdict::Coefficients,
        _ => PowerVerdict::Ambiguous,
    };
    let mut exponent = None;
    if let [k] = found.as_slice() {
        let (mut num, mut den) = (0.0, 0.0);
        for ((&k, f), c) in k.iter().zip(&fits).zip(coefficients.iter_mut()) {
            c.k = Some(k);
            let w = 1.0
                / f.slope_stderr
                    .unwrap_or(f64::INFINITY)
                    .powi(2)
                    .max(f64::MIN_POSITIVE);
            num += k as f64 * f.slope * w;
            den += (k as f64).powi(2) * w;
        }
        if den > 0.0 && den.is_finite() {
            // within the range every slope allows
            let (lo, hi) = exponent_range(k, &intervals).unwrap_or(DRIVE_EXPONENT_RANGE);
            let estimate = (num / den).clamp(lo, hi);
            let h = t_max / den.sqrt();
            exponent = Some(Exponent {
                estimate,
                interval: (estimate - h, estimate + h),
            });
        }
    }
    Ok(PowerSteps {
        coefficients,
        exponent,
        verdict,
        single: None,
        alternatives: found,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(slope: f64, steps: &[f64], wobble: &[f64]) -> Vec<(f64, f64)> {
        steps
            .iter()
            .zip(wobble.iter().cycle())
            .map(|(&x, &w)| (x, -90.0 + slope * x + w))
            .collect()
    }

    #[test]
    fn exact_line_is_fitted_exactly() {
        let f = fit_line(&line(-3.0, &[0.0, 2.0, 4.0, 6.0], &[0.0])).unwrap();
        assert!((f.slope + 3.0).abs() < 1e-12);
        assert!((f.intercept + 90.0).abs() < 1e-12);
        assert!(f.slope_stderr.unwrap() < 1e-12);
    }

    #[test]
    fn t_quantiles_match_tables() {
        // Two-sided 95 % Student's t, as printed in any statistics table (values from
        // memory): 12.706 at 1 degree of freedom, 2.228 at 10.
        assert!((t_quantile(1.0).unwrap() - 12.706).abs() < 1e-3);
        assert!((t_quantile(10.0).unwrap() - 2.228).abs() < 1e-3);
    }

    #[test]
    fn attenuator_verdicts() {
        let steps = [0.0, 3.0, 6.0, 9.0, 12.0];
        let wob = [0.2, -0.1, 0.0, 0.1, -0.2];
        let a = judge(StepKind::Attenuator, &line(-1.0, &steps, &wob)).unwrap();
        assert_eq!(a.verdict, Some(Verdict::External));
        assert!((a.slope_db_per_db - 1.0).abs() < 0.05);
        let b = judge(StepKind::Attenuator, &line(-3.0, &steps, &wob)).unwrap();
        assert_eq!((b.verdict, b.order), (Some(Verdict::Internal), Some(3)));
        let c = judge(StepKind::Attenuator, &line(-0.05, &steps, &wob)).unwrap();
        assert_eq!(c.unsettled, Some(Unsettled::DoesNotFollow));
        let two = judge(StepKind::Attenuator, &[(0.0, -90.0), (6.0, -96.0)]).unwrap();
        assert_eq!(two.verdict, Some(Verdict::Inconclusive));
        assert_eq!(two.unsettled, Some(Unsettled::TooFewReadings { have: 2 }));
        assert!(judge(StepKind::Attenuator, &[(3.0, -90.0), (3.0, -91.0)]).is_err());
    }

    #[test]
    fn power_step_coefficients() {
        let steps = [0.0, -1.0, -2.0, -3.0, -4.0, -5.0];
        let wob = [0.1, -0.1, 0.05, 0.0, -0.05, 0.1];
        for k in 0..=1 {
            let a = judge(StepKind::Power, &line(k as f64, &steps, &wob)).unwrap();
            assert_eq!(a.coefficient, Some(k), "k = {k}");
            assert_eq!(a.consistent_k, vec![k]);
            assert_eq!(a.verdict, None);
        }
        // A junction rising 2.0 dB/dB at third order (α = 2/3, inside the 2 to 3 dB/dB
        // practitioners measure; common practice): the emitter carrying |k| = 2 moves the
        // level 1.33 dB/dB, which only |k| = 2 fits; the one carrying |k| = 1 moves it
        // 0.67 dB/dB, which only |k| = 1 fits.
        let a = judge(StepKind::Power, &line(4.0 / 3.0, &steps, &wob)).unwrap();
        assert_eq!((a.coefficient, a.consistent_k.clone()), (Some(2), vec![2]));
        let a = judge(StepKind::Power, &line(2.0 / 3.0, &steps, &wob)).unwrap();
        assert_eq!((a.coefficient, a.consistent_k.clone()), (Some(1), vec![1]));
        // At the ideal 3.0 dB/dB (α = 1; Pozar) the |k| = 2 emitter's 2.0 dB/dB fits
        // |k| = 2 and |k| = 3 (α = 2/3) alike: both are said, neither is settled, and no
        // candidate is dropped; a second emitter's step separates them.
        let a = judge(StepKind::Power, &line(2.0, &steps, &wob)).unwrap();
        assert_eq!(a.coefficient, None);
        assert_eq!(a.consistent_k, vec![2, 3]);
        assert_eq!(a.unsettled, Some(Unsettled::Alternatives));
        let a = judge(StepKind::Power, &line(1.0, &steps, &wob)).unwrap();
        assert_eq!(a.coefficient, Some(1));
        let a = judge(StepKind::Power, &line(-2.0, &steps, &wob)).unwrap();
        assert_eq!(a.unsettled, Some(Unsettled::DoesNotFollow));
    }

    #[test]
    fn scatter_makes_it_inconclusive_and_says_what_to_measure() {
        let steps = [0.0, 2.0, 4.0, 6.0];
        let wob = [1.5, -1.5, -1.5, 1.5];
        let a = judge(StepKind::Power, &line(1.8, &steps, &wob)).unwrap();
        assert_eq!(a.coefficient, None);
        match a.unsettled {
            Some(Unsettled::Straddles {
                boundary,
                readings_needed: Some(m),
                step_range_needed_db: Some(r),
            }) => {
                // between |k| = 1 (up to 1.1 dB/dB) and |k| = 2 (from 1.2)
                assert!((boundary - 1.15).abs() < 1e-9, "{boundary}");
                assert!(m > 4, "{m}");
                assert!(r > 6.0, "{r}");
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn two_emitters_separate_coefficients_from_the_exponent() {
        let steps = [0.0, -1.0, -2.0, -3.0, -4.0, -5.0, -6.0];
        let wob = [0.05, -0.05, 0.0, 0.04, -0.03, 0.02, -0.04];
        for (alpha, ka, kb) in [(0.7, 2u32, 1u32), (1.0, 3, 2), (0.7, 3, 2), (1.0, 2, 1)] {
            let series = vec![
                ("A".to_string(), line(alpha * ka as f64, &steps, &wob)),
                ("B".to_string(), line(alpha * kb as f64, &steps, &wob[1..])),
            ];
            let r = judge_power_steps(&series).unwrap();
            assert_eq!(r.verdict, PowerVerdict::Coefficients, "{alpha} {ka} {kb}");
            assert_eq!(r.coefficients[0].k, Some(ka));
            assert_eq!(r.coefficients[1].k, Some(kb));
            let e = r.exponent.unwrap();
            assert!(e.interval.0 < alpha && alpha < e.interval.1, "{e:?}");
        }
        let one = judge_power_steps(&[("A".to_string(), line(2.0, &steps, &wob))]).unwrap();
        assert_eq!(one.verdict, PowerVerdict::SingleEmitter);
        assert_eq!(one.coefficients[0].k, None);
        assert_eq!(one.single.unwrap().consistent_k, vec![2, 3]);
        // Three readings an emitter (0, −3, −6 dB) with a metre's scatter: (2, 1) and
        // (1, 1) both fit, so nothing is settled and both are listed.
        let short = [0.0, -3.0, -6.0];
        let r = judge_power_steps(&[
            ("A".to_string(), line(1.8, &short, &[0.4, -0.8, 0.4])),
            ("B".to_string(), line(0.9, &short, &[-0.4, 0.8, -0.4])),
        ])
        .unwrap();
        assert_eq!(r.verdict, PowerVerdict::Ambiguous, "{r:?}");
        assert!(r.alternatives.contains(&vec![2, 1]), "{:?}", r.alternatives);
        assert!(r.exponent.is_none());
    }
}
