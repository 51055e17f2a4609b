//! Fixing the junction from lines of bearing taken with a directional antenna.
//!
//! - `ls`: the closed-form least-squares intersection of the lines of bearing (the point
//!   minimising the weighted squared perpendicular distances to the lines); it also
//!   starts the others.
//! - `ml` (default): maximum likelihood under Gaussian bearing errors, nonlinear least
//!   squares on the wrapped bearing residuals weighted by 1/σᵢ² (Stansfield, "Statistical
//!   theory of d.f. fixing", J. IEE 94 (IIIA), 1947; Gavish & Weiss, IEEE Trans. AES 28
//!   (1992) 817–828), solved by Gauss–Newton with argmin.
//! - `robust`: an M-estimate by iteratively reweighted least squares, Huber's or Andrews'
//!   weights on standardised residuals (Lenth, "On finding the source of a signal",
//!   Technometrics 23 (1981) 149–154); readings it down-weights below one half are named
//!   as outliers.
//!
//! The covariance is C = (JᵀWJ)⁻¹ from the Jacobian of the bearing residuals at the fix;
//! see [`ellipse`] for the scaling. Geometry is checked before and after solving: lines
//! that are nearly parallel, that meet only behind the observers, or a fix on the line the
//! observers walked are refused or warned about, never turned into a made-up point.

pub mod ellipse;
pub mod geometry;
pub mod model;

use argmin::core::{Executor, Jacobian, Operator};
use argmin::solver::gaussnewton::GaussNewton;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use crate::error::{Error, Result};
use crate::geo::{bearing_difference_deg, normalize_bearing_deg, GeoPoint, LocalFrame};
pub use ellipse::Ellipse;
use model::{BearingModel, Line};

/// One bearing reading, ready for the solver (true north, position known).
#[derive(Clone, Debug, PartialEq)]
pub struct Reading {
    /// The line of the log it came from (header = line 1).
    pub line: u64,
    pub observer: GeoPoint,
    /// Degrees clockwise from true north.
    pub bearing_deg: f64,
    /// This reading's standard deviation in degrees, when known.
    pub sigma_deg: Option<f64>,
}

/// Which estimator to use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    Ls,
    Ml,
    Robust,
}

/// The weight function of the robust estimator.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Loss {
    /// w(u) = 1 for |u| ≤ k, k/|u| beyond; k = 1.5.
    Huber,
    /// w(u) = sin(u/c)/(u/c) for |u| ≤ cπ, 0 beyond; c = 1.5.
    Andrews,
}

/// Tuning constant of both weight functions, as used by Lenth (1981) (value from memory).
pub const ROBUST_TUNING: f64 = 1.5;

/// A reading is named an outlier when its standardised residual exceeds this (or, for the
/// robust method, its final weight falls below one half, which is about the same point).
pub const OUTLIER_SIGMAS: f64 = 3.0;

/// How to fix.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixOptions {
    pub method: Method,
    /// Probability the ellipse is to hold the junction, in (0, 1).
    pub confidence: f64,
    /// σ in degrees for every reading, overriding the log's.
    pub sigma_deg: Option<f64>,
    /// Readings may point either way (front/back ambiguity of the antenna).
    pub ambiguous: bool,
    pub loss: Loss,
}

impl Default for FixOptions {
    fn default() -> Self {
        FixOptions {
            method: Method::Ml,
            confidence: 0.95,
            sigma_deg: None,
            ambiguous: false,
            loss: Loss::Huber,
        }
    }
}

/// Where the σ behind the ellipse came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SigmaSource {
    /// Every reading had a σ (log column or option): ellipse scaled by χ²₂.
    Given,
    /// Estimated from the residuals: ellipse scaled by 2·F(2, n − 2).
    Estimated,
}

/// What became of one reading.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReadingFit {
    pub line: u64,
    pub observer: GeoPoint,
    /// The bearing used, true north (turned by 180° where the ambiguity was resolved so).
    pub bearing_deg: f64,
    /// Azimuth from the observer to the fix.
    pub predicted_deg: f64,
    /// Used minus predicted, in (−180, 180].
    pub residual_deg: f64,
    pub distance_m: f64,
    /// The robust weight (1 for ls and ml).
    pub weight: f64,
    /// Whether the reading was taken as pointing the other way.
    pub flipped: bool,
    pub outlier: bool,
}

/// A fix with its uncertainty.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Fix {
    pub position: GeoPoint,
    pub method: Method,
    pub ellipse: Ellipse,
    /// Position covariance, east/north at the fix, m².
    pub covariance_m2: [[f64; 2]; 2],
    pub cep_m: f64,
    pub sigma_deg_used: f64,
    pub sigma_source: SigmaSource,
    pub n_used: usize,
    pub readings: Vec<ReadingFit>,
    pub warnings: Vec<String>,
}

/// Wrapped, weighted bearing residuals for argmin's Gauss–Newton. The last evaluation is
/// kept so that the Jacobian at the same point costs no second geodesic pass.
struct Problem<'a> {
    model: &'a BearingModel,
    /// √wᵢ/σᵢ, σ in radians.
    scale: &'a [f64],
    last: std::cell::RefCell<Option<Evaluation>>,
}

/// Residuals and Jacobian at a local point (east, north).
type Evaluation = (f64, f64, Vec<f64>, Vec<[f64; 2]>);

impl Problem<'_> {
    fn evaluate(&self, p: &DVector<f64>) -> (Vec<f64>, Vec<[f64; 2]>) {
        if let Some((e, n, r, j)) = self.last.borrow().as_ref() {
            if *e == p[0] && *n == p[1] {
                return (r.clone(), j.clone());
            }
        }
        let (r, j) = self
            .model
            .residuals_and_jacobian(self.model.point(p[0], p[1]));
        *self.last.borrow_mut() = Some((p[0], p[1], r.clone(), j.clone()));
        (r, j)
    }
}

impl Operator for Problem<'_> {
    type Param = DVector<f64>;
    type Output = DVector<f64>;
    fn apply(&self, p: &DVector<f64>) -> std::result::Result<DVector<f64>, argmin::core::Error> {
        let (r, _) = self.evaluate(p);
        Ok(DVector::from_iterator(
            r.len(),
            r.iter().zip(self.scale).map(|(r, s)| r * s),
        ))
    }
}

impl Jacobian for Problem<'_> {
    type Param = DVector<f64>;
    type Jacobian = DMatrix<f64>;
    fn jacobian(&self, p: &DVector<f64>) -> std::result::Result<DMatrix<f64>, argmin::core::Error> {
        let (_, j) = self.evaluate(p);
        Ok(DMatrix::from_fn(j.len(), 2, |i, k| j[i][k] * self.scale[i]))
    }
}

/// Weighted cost Σ (sᵢ rᵢ)² at a local point.
fn cost(model: &BearingModel, scale: &[f64], e: f64, n: f64) -> f64 {
    let (r, _) = model.residuals_and_jacobian(model.point(e, n));
    r.iter().zip(scale).map(|(r, s)| (r * s).powi(2)).sum()
}

/// Gauss–Newton from `start` (local metres); falls back to a damped step, and to the start
/// itself, when a full step does not lower the cost.
fn gauss_newton(model: &BearingModel, scale: &[f64], start: (f64, f64)) -> Result<(f64, f64)> {
    let start_cost = cost(model, scale, start.0, start.1);
    let mut best = (start, start_cost);
    for gamma in [1.0, 0.5, 0.25] {
        let problem = Problem {
            model,
            scale,
            last: std::cell::RefCell::new(None),
        };
        let solver = GaussNewton::new()
            .with_gamma(gamma)
            .and_then(|s| s.with_tolerance(1e-14))
            .map_err(|e| Error::refused(format!("solver set-up: {e}")))?;
        let run = Executor::new(problem, solver)
            .configure(|s| {
                s.param(DVector::from_vec(vec![start.0, start.1]))
                    .max_iters(60)
            })
            .run();
        if let Ok(result) = run {
            if let Some(p) = result
                .state
                .best_param
                .as_ref()
                .or(result.state.param.as_ref())
            {
                let c = cost(model, scale, p[0], p[1]);
                if c.is_finite() && p[0].is_finite() && p[1].is_finite() && c <= best.1 {
                    best = ((p[0], p[1]), c);
                    if gamma == 1.0 || c < start_cost {
                        break;
                    }
                }
            }
        }
    }
    Ok(best.0)
}

/// The closed-form least-squares intersection: minimises Σ wᵢ·(perpendicular distance of
/// the point from line i)², a linear problem in the local plane.
fn least_squares_intersection(
    points: &[(f64, f64)],
    bearings_deg: &[f64],
    weights: &[f64],
) -> Option<(f64, f64)> {
    let (mut a11, mut a12, mut a22, mut b1, mut b2) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for ((&(e, n), &brg), &w) in points.iter().zip(bearings_deg).zip(weights) {
        let t = brg.to_radians();
        // unit normal to the line whose direction is (sin t, cos t)
        let (ne, nn) = (t.cos(), -t.sin());
        let c = ne * e + nn * n;
        a11 += w * ne * ne;
        a12 += w * ne * nn;
        a22 += w * nn * nn;
        b1 += w * ne * c;
        b2 += w * nn * c;
    }
    let det = a11 * a22 - a12 * a12;
    let scale = (a11 + a22).powi(2);
    if !(det.is_finite()) || det <= 1e-10 * scale {
        return None;
    }
    Some(((a22 * b1 - a12 * b2) / det, (a11 * b2 - a12 * b1) / det))
}

/// Robust weight of a standardised residual.
fn robust_weight(loss: Loss, u: f64) -> f64 {
    let k = ROBUST_TUNING;
    let a = u.abs();
    match loss {
        Loss::Huber => {
            if a <= k {
                1.0
            } else {
                k / a
            }
        }
        Loss::Andrews => {
            let x = a / k;
            if x < 1e-12 {
                1.0
            } else if x <= std::f64::consts::PI {
                x.sin() / x
            } else {
                0.0
            }
        }
    }
}

/// Median of absolute values.
fn median_abs(values: &[f64]) -> f64 {
    let mut v: Vec<f64> = values.iter().map(|x| x.abs()).collect();
    v.sort_by(f64::total_cmp);
    if v.is_empty() {
        return 0.0;
    }
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

/// Fixes the junction from `readings`. Refuses (an error of class `Refused`) when the
/// bearings cannot fix a point.
pub fn locate(readings: &[Reading], options: &FixOptions) -> Result<Fix> {
    let n = readings.len();
    if n < 2 {
        return Err(Error::refused(format!(
            "{n} usable reading{}: a fix needs at least two bearings from different spots",
            if n == 1 { "" } else { "s" }
        )));
    }
    if !(options.confidence > 0.0 && options.confidence < 1.0) {
        return Err(Error::argument(
            "--confidence",
            "must lie strictly between 0 and 1",
        ));
    }
    let mut warnings = Vec::new();

    // σ per reading: the option, else the log's where every reading has one.
    let given: Option<Vec<f64>> = match options.sigma_deg {
        Some(s) => Some(vec![s; n]),
        None => readings.iter().map(|r| r.sigma_deg).collect(),
    };
    if given.is_none() && readings.iter().any(|r| r.sigma_deg.is_some()) {
        warnings.push(
            "σ is given on some readings only: ignored, the scatter is estimated from the residuals"
                .to_string(),
        );
    }
    let sigma_rad: Vec<f64> = match &given {
        Some(s) => s.iter().map(|d| d.to_radians()).collect(),
        None => vec![1.0; n],
    };
    if given.is_none() && n < 3 {
        return Err(Error::refused(
            "two bearings without σ fix a point but say nothing of its uncertainty: give sigma_deg in the log or --sigma-deg, or take a third bearing",
        ));
    }

    geometry::check_spread_of_bearings(readings)?;

    // Local frame around the observers.
    let (lat0, lon0) = readings.iter().fold((0.0, 0.0), |(a, b), r| {
        (
            a + r.observer.lat_deg / n as f64,
            b + r.observer.lon_deg / n as f64,
        )
    });
    let frame = LocalFrame::new(GeoPoint::new(lat0, lon0));
    let points: Vec<(f64, f64)> = readings
        .iter()
        .map(|r| frame.to_local(r.observer))
        .collect();
    let mut bearings: Vec<f64> = readings
        .iter()
        .map(|r| normalize_bearing_deg(r.bearing_deg))
        .collect();
    let inv_var: Vec<f64> = sigma_rad.iter().map(|s| 1.0 / (s * s)).collect();

    let ls = least_squares_intersection(&points, &bearings, &inv_var).ok_or_else(|| {
        Error::refused(
            "the lines of bearing are parallel or coincide: they fix no point; take bearings from spots well to the side",
        )
    })?;

    // Front/back: point each ambiguous reading towards the current estimate.
    let mut flipped = vec![false; n];
    let orient = |at: (f64, f64), bearings: &mut Vec<f64>, flipped: &mut Vec<bool>| -> bool {
        let mut changed = false;
        for i in 0..n {
            let to = (at.0 - points[i].0).atan2(at.1 - points[i].1).to_degrees();
            if bearing_difference_deg(bearings[i], to).abs() > 90.0 {
                bearings[i] = normalize_bearing_deg(bearings[i] + 180.0);
                flipped[i] = !flipped[i];
                changed = true;
            }
        }
        changed
    };
    let mut start = ls;
    if options.ambiguous {
        orient(start, &mut bearings, &mut flipped);
    } else {
        start = geometry::forward_start(&points, &bearings, ls)?;
    }

    let lines = |bearings: &[f64]| -> Vec<Line> {
        readings
            .iter()
            .zip(bearings)
            .map(|(r, &b)| Line {
                observer: r.observer,
                bearing_deg: b,
            })
            .collect()
    };
    let mut model = BearingModel::new(frame, lines(&bearings));
    let base_scale: Vec<f64> = sigma_rad.iter().map(|s| 1.0 / s).collect();
    let mut weights = vec![1.0; n];

    let mut at = match options.method {
        Method::Ls => start,
        Method::Ml | Method::Robust => gauss_newton(&model, &base_scale, start)?,
    };
    if options.ambiguous && options.method != Method::Ls {
        for _ in 0..5 {
            if !orient(at, &mut bearings, &mut flipped) {
                break;
            }
            model = BearingModel::new(frame, lines(&bearings));
            at = gauss_newton(&model, &base_scale, at)?;
        }
    }
    if options.method == Method::Robust {
        for _ in 0..50 {
            let (r, _) = model.residuals_and_jacobian(model.point(at.0, at.1));
            let scale_rad = if given.is_some() {
                1.0
            } else {
                (1.4826 * median_abs(&r)).max(0.05f64.to_radians())
            };
            let new_weights: Vec<f64> = r
                .iter()
                .zip(&sigma_rad)
                .map(|(ri, si)| robust_weight(options.loss, ri / (si * scale_rad)))
                .collect();
            let scale: Vec<f64> = base_scale
                .iter()
                .zip(&new_weights)
                .map(|(s, w)| s * w.sqrt())
                .collect();
            let next = gauss_newton(&model, &scale, at)?;
            let moved = (next.0 - at.0).hypot(next.1 - at.1);
            let settled = weights
                .iter()
                .zip(&new_weights)
                .all(|(a, b)| (a - b).abs() < 1e-4);
            at = next;
            weights = new_weights;
            // a millimetre and weights steady to 1e-4: settled for any survey purpose
            if moved < 1e-3 && settled {
                break;
            }
        }
    }

    let position = model.point(at.0, at.1);
    finish(FixParts {
        model: &model,
        readings,
        position,
        method: options.method,
        confidence: options.confidence,
        given_sigma_deg: given.as_deref(),
        weights: &weights,
        flipped: &flipped,
        warnings,
    })
}

struct FixParts<'a> {
    model: &'a BearingModel,
    readings: &'a [Reading],
    position: GeoPoint,
    method: Method,
    confidence: f64,
    given_sigma_deg: Option<&'a [f64]>,
    weights: &'a [f64],
    flipped: &'a [bool],
    warnings: Vec<String>,
}

/// Covariance, ellipse, residual report and geometry checks at the solution.
fn finish(parts: FixParts) -> Result<Fix> {
    let FixParts {
        model,
        readings,
        position,
        method,
        confidence,
        given_sigma_deg,
        weights,
        flipped,
        mut warnings,
    } = parts;
    let robust_weights = weights;
    let n = readings.len();
    let sights = model.sights(position);
    let (r, j) = model.residuals_and_jacobian(position);

    geometry::check_solution(readings, &sights, &r, &mut warnings)?;

    let used: Vec<bool> = weights.iter().map(|w| *w >= 0.5).collect();
    let n_used = used.iter().filter(|u| **u).count();
    if n_used < 2 {
        return Err(Error::refused(
            "fewer than two readings agree with each other: no fix",
        ));
    }
    // Readings the robust estimate set aside (weight below one half) take no part in the
    // covariance nor in the scatter estimate.
    let weights: Vec<f64> = weights
        .iter()
        .map(|&w| if w >= 0.5 { w } else { 0.0 })
        .collect();
    let weights = weights.as_slice();
    // W: robust weight over σ² (σ in radians), or the robust weight alone when σ is
    // estimated.
    let w: Vec<f64> = match given_sigma_deg {
        Some(s) => weights
            .iter()
            .zip(s)
            .map(|(w, s)| w / s.to_radians().powi(2))
            .collect(),
        None => weights.to_vec(),
    };
    let mut info = [[0.0; 2]; 2];
    for (row, wi) in j.iter().zip(&w) {
        for a in 0..2 {
            for b in 0..2 {
                info[a][b] += wi * row[a] * row[b];
            }
        }
    }
    let det = info[0][0] * info[1][1] - info[0][1] * info[1][0];
    let trace = info[0][0] + info[1][1];
    if !(det.is_finite() && det > 1e-12 * trace * trace) {
        return Err(Error::refused(
            "the bearings do not observe the junction's position in every direction (the geometry is degenerate): take bearings from spots well to the side",
        ));
    }
    let mut cov = [
        [info[1][1] / det, -info[0][1] / det],
        [-info[1][0] / det, info[0][0] / det],
    ];
    let (sigma_source, sigma_deg_used, dof) = match given_sigma_deg {
        Some(s) => {
            let rms = (s.iter().map(|x| x * x).sum::<f64>() / s.len() as f64).sqrt();
            (SigmaSource::Given, rms, None)
        }
        None => {
            let dof = n_used as f64 - 2.0;
            if dof < 1.0 {
                return Err(Error::refused(
                    "too few agreeing readings to estimate the bearing scatter: give --sigma-deg",
                ));
            }
            let s2: f64 = r
                .iter()
                .zip(weights)
                .map(|(ri, wi)| wi * ri * ri)
                .sum::<f64>()
                / dof;
            for row in cov.iter_mut() {
                for c in row.iter_mut() {
                    *c *= s2;
                }
            }
            (SigmaSource::Estimated, s2.sqrt().to_degrees(), Some(dof))
        }
    };
    let k2 = ellipse::scale_squared(confidence, dof)?;
    let ell = ellipse::ellipse_from_covariance(cov, k2, confidence);
    let cep_m = ellipse::circular_error_probable(cov);

    let sigma_i: Vec<f64> = match given_sigma_deg {
        Some(s) => s.to_vec(),
        None => vec![sigma_deg_used; n],
    };
    let mut fits = Vec::with_capacity(n);
    for i in 0..n {
        let residual_deg = r[i].to_degrees();
        let outlier = match method {
            Method::Robust => robust_weights[i] < 0.5,
            _ => residual_deg.abs() > OUTLIER_SIGMAS * sigma_i[i],
        };
        fits.push(ReadingFit {
            line: readings[i].line,
            observer: readings[i].observer,
            bearing_deg: model.lines[i].bearing_deg,
            predicted_deg: normalize_bearing_deg(sights[i].azimuth_deg),
            residual_deg,
            distance_m: sights[i].distance_m,
            weight: robust_weights[i],
            flipped: flipped[i],
            outlier,
        });
    }
    geometry::check_ellipse(&ell, &fits, &mut warnings);
    if fits.iter().any(|f| f.flipped) {
        let lines: Vec<String> = fits
            .iter()
            .filter(|f| f.flipped)
            .map(|f| f.line.to_string())
            .collect();
        warnings.push(format!(
            "taken as pointing the other way (front/back): line{} {}",
            if lines.len() == 1 { "" } else { "s" },
            lines.join(", ")
        ));
    }
    Ok(Fix {
        position,
        method,
        ellipse: ell,
        covariance_m2: cov,
        cep_m,
        sigma_deg_used,
        sigma_source,
        n_used,
        readings: fits,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geo::{destination, distance_and_azimuth};

    fn readings_towards(truth: GeoPoint, spots: &[(f64, f64)], noise_deg: &[f64]) -> Vec<Reading> {
        spots
            .iter()
            .enumerate()
            .map(|(i, &(az, range))| {
                let obs = destination(truth, az, range);
                let (_, brg) = distance_and_azimuth(obs, truth);
                Reading {
                    line: i as u64 + 2,
                    observer: obs,
                    bearing_deg: normalize_bearing_deg(
                        brg + noise_deg.get(i).copied().unwrap_or(0.0),
                    ),
                    sigma_deg: Some(3.0),
                }
            })
            .collect()
    }

    #[test]
    fn exact_bearings_give_the_point_back() {
        let truth = GeoPoint::new(45.10462, -122.414036);
        let spots = [
            (10.0, 250.0),
            (100.0, 180.0),
            (200.0, 320.0),
            (290.0, 150.0),
        ];
        let rs = readings_towards(truth, &spots, &[]);
        for method in [Method::Ml, Method::Robust] {
            let fix = locate(
                &rs,
                &FixOptions {
                    method,
                    ..Default::default()
                },
            )
            .unwrap();
            let (d, _) = distance_and_azimuth(fix.position, truth);
            assert!(d < 1e-3, "{method:?}: {d} m");
        }
    }
}
