//! Fixing the junction from lines of bearing taken with a directional antenna.
//!
//! - `ls`: the closed-form least-squares intersection of the lines of bearing (the point
//!   minimising the weighted squared perpendicular distances to the lines); it also
//!   starts the others. Its covariance is its own, the sandwich A⁻¹BA⁻¹ of a linear
//!   estimator whose line offsets grow with range (dᵢ·σᵢ), not the likelihood's.
//! - `ml`: maximum likelihood under Gaussian bearing errors, nonlinear least squares on
//!   the wrapped bearing residuals weighted by 1/σᵢ² (Stansfield, "Statistical theory of
//!   d.f. fixing", J. IEE 94 (IIIA), 1947; Gavish & Weiss, IEEE Trans. AES 28 (1992)
//!   817–828), solved by Gauss–Newton with argmin.
//! - `robust` (default): an M-estimate by iteratively reweighted least squares, Huber's or
//!   Andrews' loss on standardised residuals (Lenth, "On finding the source of a signal",
//!   Technometrics 23 (1981) 149–154), with the scale from Huber's Proposal 2 when σ is
//!   not stated and the covariance in Huber's sandwich form with its small-sample
//!   correction K (P. J. Huber, *Robust Statistics*, 1981, §7.6).
//!
//! Outliers are named by one rule for every method: the studentised residual beyond the
//! Bonferroni bound for a false alarm in [`OUTLIER_FALSE_ALARM`] of clean walks (normal
//! quantile with σ stated, Student's t with σ estimated).
//!
//! A stated σ is tested against the residuals (Σ(rᵢ/σᵢ)² against χ² with n − 2 degrees of
//! freedom at [`SIGMA_TEST_LEVEL`]); when the test rejects, the fix warns and its region
//! uses the scatter estimated from the residuals.
//!
//! The region claimed ([`region`]) is the linearised ellipse where the bearing model is
//! close to linear over it and the likelihood-ratio contour elsewhere; a region that does
//! not close is refused. Geometry is checked before and after solving: lines that are
//! nearly parallel, that meet only behind the observers, or a fix on the line the
//! observers walked are refused or warned about, never turned into a made-up point.

pub mod ellipse;
pub mod geometry;
pub mod levels;
pub mod loss;
pub mod model;
pub mod notice;
mod offset;
pub mod region;
pub mod variance;

use argmin::core::{Executor, Jacobian, Operator};
use argmin::solver::gaussnewton::GaussNewton;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

use crate::geo::{bearing_difference_deg, normalize_bearing_deg, GeoPoint, LocalFrame};
pub use ellipse::Ellipse;
pub use levels::{
    locate_with_levels, Exponent, LevelFit, LevelModel, LevelOptions, LevelReading, Measurements,
};
use loss::Rho;
use model::{BearingModel, Line};
pub use notice::{FixRefusal, FixWarning};

type Result<T> = std::result::Result<T, FixRefusal>;

/// One bearing reading, ready for the solver (true north, position known).
#[derive(Clone, Debug, PartialEq)]
pub struct Reading {
    /// The line of the log it came from (header = line 1).
    pub line: u64,
    /// Where the bearing was taken (WGS84).
    pub observer: GeoPoint,
    /// Degrees clockwise from true north.
    pub bearing_deg: f64,
    /// This reading's standard deviation in degrees, when known.
    pub sigma_deg: Option<f64>,
    /// How well the observer's position is known: the 95 % radius in metres (the W3C
    /// Geolocation API's `accuracy`), when logged.
    pub position_accuracy_m: Option<f64>,
}

impl Reading {
    /// A true bearing (degrees clockwise from north) taken at `observer`, with its σ in
    /// degrees when known; `line` is where it stands in its log.
    pub fn new(line: u64, observer: GeoPoint, bearing_deg: f64, sigma_deg: Option<f64>) -> Self {
        Reading {
            line,
            observer,
            bearing_deg,
            sigma_deg,
            position_accuracy_m: None,
        }
    }

    /// The same reading with its position's 95 % radius in metres.
    pub fn with_position_accuracy_m(mut self, accuracy_m: Option<f64>) -> Self {
        self.position_accuracy_m = accuracy_m;
        self
    }
}

/// Which estimator to use.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Least-squares intersection of the lines of bearing (closed form).
    Ls,
    /// Maximum likelihood with the bearings' σ (Gauss–Newton on the angle residuals).
    Ml,
    #[default]
    /// A robust M-estimate that sets reflections and other outliers aside.
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

/// The share of clean walks in which the outlier rule may name a reading (Bonferroni
/// bound over the walk's readings).
pub const OUTLIER_FALSE_ALARM: f64 = 0.05;

/// Level of the χ² test of a stated σ against the residuals.
pub const SIGMA_TEST_LEVEL: f64 = 0.01;

/// How to fix.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixOptions {
    /// The estimator.
    pub method: Method,
    /// Probability the ellipse is to hold the junction, in (0, 1).
    pub confidence: f64,
    /// σ in degrees for every reading, overriding the log's.
    pub sigma_deg: Option<f64>,
    /// Readings may point either way (front/back ambiguity of the antenna).
    pub ambiguous: bool,
    /// The robust estimator's loss.
    pub loss: Loss,
    /// The 95 % radius of every observer's position in metres, for readings whose log
    /// gives none; `None` takes [`variance::DEFAULT_POSITION_ACCURACY_M`]; 0 means the
    /// spots are surveyed.
    pub position_accuracy_m: Option<f64>,
    /// Whether to estimate a common bearing offset.
    pub offset: OffsetChoice,
}

/// Whether a fix estimates a common offset on every bearing.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum OffsetChoice {
    /// When the walk surrounds the junction and the offset is significant (Wald test at 5 %).
    #[default]
    Auto,
    /// Whenever the walk surrounds the junction.
    Estimate,
    /// Never.
    None,
}

impl Default for FixOptions {
    fn default() -> Self {
        FixOptions {
            method: Method::default(),
            confidence: 0.95,
            sigma_deg: None,
            ambiguous: false,
            loss: Loss::Huber,
            position_accuracy_m: None,
            offset: OffsetChoice::Auto,
        }
    }
}

/// Where the σ behind the region came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SigmaSource {
    /// Every reading had a σ (log column or option) and the residuals agree with it:
    /// region scaled by χ²₂.
    Given,
    /// Estimated from the residuals: region scaled by 2·F(2, n − 2).
    Estimated,
    /// A σ was stated but the residuals contradict it (χ² test): the region is widened to
    /// the scatter estimated from the residuals, scaled by 2·F(2, n − 2).
    Contradicted,
    /// Readings share their spot's error: σ within and between spots estimated from the
    /// residuals (method of moments), the region on the spots' degrees of freedom.
    Spots,
}

/// Where the observers' position accuracy came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AccuracySource {
    /// Every reading's log row.
    Logged,
    /// The options, for every reading.
    Stated,
    /// The log where it has one, the options elsewhere.
    LoggedAndStated,
    /// Not stated: [`variance::DEFAULT_POSITION_ACCURACY_M`].
    Default,
    /// The log where it has one, the default elsewhere.
    LoggedAndDefault,
}

/// The position accuracy a fix took for its observers.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PositionAccuracy {
    /// Where it came from.
    pub source: AccuracySource,
    /// The median over the readings, metres (95 % radius).
    pub typical_m: f64,
}

/// A common bearing offset found with the fix.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Offset {
    /// Every bearing read this much clockwise of the junction, degrees.
    pub offset_deg: f64,
    /// The interval's lower end, degrees.
    pub low_deg: f64,
    /// The interval's upper end, degrees.
    pub high_deg: f64,
    /// The interval's confidence.
    pub confidence: f64,
}

/// Which region a fix claims.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RegionKind {
    /// The linearised ellipse: the bearing model is close to linear over it.
    Ellipse,
    /// The likelihood-ratio contour (Beale 1960): the ellipse does not hold here.
    Likelihood,
}

/// What became of one reading.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReadingFit {
    /// The log line of the reading.
    pub line: u64,
    /// Where it was taken.
    pub observer: GeoPoint,
    /// The bearing used, true north (turned by 180° where the ambiguity was resolved so).
    pub bearing_deg: f64,
    /// Azimuth from the observer to the fix.
    pub predicted_deg: f64,
    /// Used minus predicted, in (−180, 180].
    pub residual_deg: f64,
    /// The observer's distance to the fix, metres.
    pub distance_m: f64,
    /// The robust weight (1 for ls and ml).
    pub weight: f64,
    /// Whether the reading was taken as pointing the other way.
    pub flipped: bool,
    /// Whether the reading disagrees with the rest by the outlier rule.
    pub outlier: bool,
}

/// A fix with its uncertainty.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Fix {
    /// The junction's estimated position (WGS84).
    pub position: GeoPoint,
    /// The estimator used.
    pub method: Method,
    /// The linearised summary: the ellipse of `covariance_m2` at the confidence asked.
    pub ellipse: Ellipse,
    /// Position covariance, east/north at the fix, m² (the method's own: Fisher for ml,
    /// Huber's sandwich for robust, the least-squares sandwich for ls).
    pub covariance_m2: [[f64; 2]; 2],
    /// Circular error probable, with the same small-sample law as the ellipse.
    pub cep_m: f64,
    /// The bearing σ the region rests on, degrees.
    pub sigma_deg_used: f64,
    /// Where that σ came from.
    pub sigma_source: SigmaSource,
    /// The region claimed to hold the junction at the confidence asked: a closed ring
    /// (first point repeated last), counterclockwise.
    pub region: Vec<GeoPoint>,
    /// What the region is: the linearised ellipse or the likelihood contour.
    pub region_kind: RegionKind,
    /// Readings that carried weight in the fix.
    pub n_used: usize,
    /// Each reading with its residual, weight and distance.
    pub readings: Vec<ReadingFit>,
    /// What the reader of the fix should know.
    pub warnings: Vec<FixWarning>,
    /// The common bearing offset, when estimated.
    pub offset: Option<Offset>,
    /// The spots the readings were taken from (readings within
    /// [`variance::SPOT_RADIUS_M`] of each other are one).
    pub spots: usize,
    /// The observers' position accuracy taken.
    pub position_accuracy: PositionAccuracy,
    /// The degrees of freedom of the bearing scatter the region rests on: the region is
    /// scaled by 2·F(2, ν) with `Some(ν)`, by χ²₂ with `None` (σ known).
    pub sigma_dof: Option<f64>,
    /// Which measurements made the fix (`None` from [`locate`] itself, which takes
    /// bearings only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub measurements: Option<Measurements>,
    /// The level model found, when levels took part.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level_model: Option<LevelModel>,
    /// Each level reading with its residual in dB, when levels took part.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub levels: Vec<LevelFit>,
}

impl Fix {
    /// Whether `p` lies inside the region claimed.
    pub fn region_contains(&self, p: GeoPoint) -> bool {
        let frame = LocalFrame::new(self.position);
        let ring: Vec<(f64, f64)> = self.region.iter().map(|q| frame.to_local(*q)).collect();
        region::ring_contains(&ring, frame.to_local(p))
    }

    /// The direction the region stays open towards, degrees from north, when it does not
    /// close (levels alone that bound the junction on some sides only: the ring is then
    /// drawn out to the search's reach that way, which is no measurement of size).
    pub fn open_towards_deg(&self) -> Option<f64> {
        self.warnings.iter().find_map(|w| match w {
            FixWarning::RegionOpen { towards_deg, .. } => Some(*towards_deg),
            _ => None,
        })
    }

    /// How far from the fix the region claimed reaches, m: the ellipse's semi-major axis,
    /// or the farthest point of the likelihood contour when that is the region.
    pub fn reach_m(&self) -> f64 {
        let ring = self
            .region
            .iter()
            .map(|q| crate::geo::distance_m(self.position, *q))
            .fold(0.0, f64::max);
        match self.region_kind {
            RegionKind::Ellipse => self.ellipse.semi_major_m,
            RegionKind::Likelihood => ring,
        }
    }

    /// How far the region claimed reaches from the fix along the ellipse's major axis and
    /// across it, m (the farther side of each): the semi-axes for the ellipse, the
    /// contour's own reach otherwise.
    pub fn reach_along_axes_m(&self) -> (f64, f64) {
        if self.region_kind == RegionKind::Ellipse {
            return (self.ellipse.semi_major_m, self.ellipse.semi_minor_m);
        }
        let frame = LocalFrame::new(self.position);
        let t = self.ellipse.orientation_deg.to_radians();
        self.region
            .iter()
            .map(|q| frame.to_local(*q))
            .fold((0.0, 0.0), |(a, b), (e, n)| {
                let along = (e * t.sin() + n * t.cos()).abs();
                let across = (e * t.cos() - n * t.sin()).abs();
                (f64::max(a, along), f64::max(b, across))
            })
    }
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

/// Gauss–Newton stops when the norm of the weighted residuals changes by less than this
/// fraction of its value at the start: relative, so the iterations stay near ten at any
/// number of readings (an absolute change of a sum over all readings cannot fall below
/// its own rounding once the readings are many).
const RELATIVE_COST_TOLERANCE: f64 = 1e-10;

/// Gauss–Newton from `start` (local metres); falls back to a damped step, and to the start
/// itself, when a full step does not lower the cost.
fn gauss_newton(model: &BearingModel, scale: &[f64], start: (f64, f64)) -> Result<(f64, f64)> {
    gauss_newton_steps(model, scale, start, 60)
}

/// [`gauss_newton`] with at most `max_iters` steps.
fn gauss_newton_steps(
    model: &BearingModel,
    scale: &[f64],
    start: (f64, f64),
    max_iters: u64,
) -> Result<(f64, f64)> {
    let start_cost = cost(model, scale, start.0, start.1);
    let tolerance = (RELATIVE_COST_TOLERANCE * start_cost.sqrt()).max(1e-14);
    let mut best = (start, start_cost);
    for gamma in [1.0, 0.5, 0.25] {
        let problem = Problem {
            model,
            scale,
            last: std::cell::RefCell::new(None),
        };
        let solver = GaussNewton::new()
            .with_gamma(gamma)
            .and_then(|s| s.with_tolerance(tolerance))
            .map_err(|e| FixRefusal::Solver {
                detail: e.to_string(),
            })?;
        let run = Executor::new(problem, solver)
            .configure(|s| {
                s.param(DVector::from_vec(vec![start.0, start.1]))
                    .max_iters(max_iters)
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

/// Smallest scale multiplier (keeps exact bearings from dividing by zero).
const MIN_SCALE: f64 = 1e-9;

/// A fitted point with what it was fitted with.
#[derive(Clone, Debug)]
struct Fitted {
    /// Local east, north metres.
    at: (f64, f64),
    /// The multiplier s of every σᵢ: 1 when the stated σ is taken as true.
    scale: f64,
    /// Whether `scale` is known (stated σ) rather than estimated.
    known: bool,
    /// Degrees of freedom of `scale` when estimated.
    dof: f64,
    /// Final IRLS weights ψ(u)/u (1 for squared loss).
    weights: Vec<f64>,
}

/// Residuals over σᵢ at a local point.
fn standardised(model: &BearingModel, sigma_rad: &[f64], at: (f64, f64)) -> Vec<f64> {
    let (r, _) = model.residuals_and_jacobian(model.point(at.0, at.1));
    r.iter().zip(sigma_rad).map(|(r, s)| r / s).collect()
}

/// The scale of squared-loss residuals at `at`: √(Σ(rᵢ/σᵢ)²/(n − 2)).
fn squared_scale(model: &BearingModel, sigma_rad: &[f64], at: (f64, f64)) -> f64 {
    let e = standardised(model, sigma_rad, at);
    let dof = (e.len() as f64 - 2.0).max(1.0);
    (e.iter().map(|x| x * x).sum::<f64>() / dof)
        .sqrt()
        .max(MIN_SCALE)
}

/// σ's multiplier for the least-squares intersection, estimated so that it is independent
/// of the least-squares point: the likelihood's residuals e (over σᵢ, at `ml_at`) less
/// their projection on the columns that make up the least-squares error, aᵢ = Jᵢ/σᵢ and
/// mᵢ = dᵢ²σᵢJᵢ/σᵢ² (its linear influence), so s² = |e − P e|²/(n − rank) follows σ²χ²
/// on n − rank degrees of freedom apart from the fix (rank 2 when ls and ml coincide to
/// first order, else 4). Falls back to the likelihood's n − 2 when too few remain.
fn ls_scale(
    model: &BearingModel,
    sigma_rad: &[f64],
    ml_at: (f64, f64),
    ls_at: (f64, f64),
) -> (f64, f64) {
    let n = sigma_rad.len();
    let fallback = (squared_scale(model, sigma_rad, ml_at), n as f64 - 2.0);
    let e = standardised(model, sigma_rad, ml_at);
    let at = model.point(ls_at.0, ls_at.1);
    let (_, j) = model.residuals_and_jacobian(at);
    let sights = model.sights(at);
    let z = DMatrix::from_fn(n, 4, |i, c| {
        let (ji, si, d) = (j[i], sigma_rad[i], sights[i].distance_m);
        match c {
            0 | 1 => ji[c] / si,
            _ => d * d * ji[c - 2] / si,
        }
    });
    // normalise the columns so that the rank test is on their directions only
    let mut z = z;
    for mut col in z.column_iter_mut() {
        let norm = col.norm();
        if norm > 0.0 {
            col /= norm;
        }
    }
    let svd = z.svd(true, false);
    let Some(u) = svd.u else {
        return fallback;
    };
    let largest = svd.singular_values.max();
    let keep: Vec<usize> = (0..svd.singular_values.len())
        .filter(|&k| svd.singular_values[k] > 1e-6 * largest)
        .collect();
    let dof = n as f64 - keep.len() as f64;
    if dof < 1.0 {
        return fallback;
    }
    let ev = DVector::from_vec(e);
    let mut rest = ev.clone();
    for k in keep {
        let col = u.column(k);
        let c = col.dot(&ev);
        rest -= col * c;
    }
    ((rest.norm_squared() / dof).sqrt().max(MIN_SCALE), dof)
}

/// Most steps of Proposal 2's scale iteration at one set of residuals.
const SCALE_STEPS: usize = 200;

/// The M-estimate from `start`: IRLS with weights ψ(u)/u, u = rᵢ/(σᵢ·s); when the scale
/// is not known it is Huber's Proposal 2, the s solving Σψ(rᵢ/(σᵢs))² = (n − 2)·E[ψ(Z)²],
/// iterated jointly with the position (Huber 1981, §7.7), started at `initial_scale` (and
/// held there when its flag says so) or at the normalised median absolute residual.
/// Readings `set_aside` carry no weight and do not count.
fn fit_robust(
    model: &BearingModel,
    sigma_rad: &[f64],
    rho: Rho,
    start: (f64, f64),
    known: bool,
    initial_scale: Option<(f64, bool)>,
    set_aside: &[bool],
) -> Result<Fitted> {
    let hold = initial_scale.is_some_and(|(_, h)| h);
    let n = sigma_rad.len();
    let kept = set_aside.iter().filter(|a| !**a).count();
    let beta = rho.expected_psi_squared();
    let dof = kept as f64 - 2.0;
    let mut at = start;
    let mut s = if known {
        1.0
    } else if let Some((s0, _)) = initial_scale {
        s0.max(MIN_SCALE)
    } else {
        let e: Vec<f64> = standardised(model, sigma_rad, at)
            .into_iter()
            .zip(set_aside)
            .filter(|(_, a)| !**a)
            .map(|(e, _)| e)
            .collect();
        (1.4826 * median_abs(&e) * (kept as f64 / dof.max(1.0)).sqrt()).max(MIN_SCALE)
    };
    let mut weights: Vec<f64> = set_aside
        .iter()
        .map(|a| if *a { 0.0 } else { 1.0 })
        .collect();
    for _ in 0..100 {
        let e = standardised(model, sigma_rad, at);
        let s_before = s;
        if !known && !hold && dof >= 1.0 {
            // the scale solved at these residuals (no geodesic needed), so the outer
            // loop waits only on the point
            for _ in 0..SCALE_STEPS {
                let sum: f64 = e
                    .iter()
                    .zip(set_aside)
                    .filter(|(_, a)| !**a)
                    .map(|(x, _)| rho.psi(x / s).powi(2))
                    .sum();
                let next = (s * (sum / (dof * beta)).sqrt()).max(MIN_SCALE);
                let steady = (next - s).abs() <= 1e-9 * s;
                s = next;
                if steady {
                    break;
                }
            }
        }
        let new_weights: Vec<f64> = e
            .iter()
            .zip(set_aside)
            .map(|(x, a)| if *a { 0.0 } else { rho.weight(x / s) })
            .collect();
        if new_weights.iter().filter(|w| **w > 0.0).count() < 2 {
            break;
        }
        let scale: Vec<f64> = sigma_rad
            .iter()
            .zip(&new_weights)
            .map(|(si, w)| w.sqrt() / si)
            .collect();
        // one step per reweighting: the weights move with the point, so solving to the
        // end at weights about to change would spend passes over every reading for nothing
        let next = gauss_newton_steps(model, &scale, at, 1)?;
        let moved = (next.0 - at.0).hypot(next.1 - at.1);
        let settled = (s - s_before).abs() <= 1e-6 * s;
        at = next;
        weights = new_weights;
        // a millimetre and the scale steady to a part in a million: the weights are a
        // function of both, so they are steady too; settled for any survey purpose, at any
        // number of readings
        if moved < 1e-3 && settled {
            break;
        }
    }
    let _ = n;
    Ok(Fitted {
        at,
        scale: s,
        known,
        dof,
        weights,
    })
}

/// Leverages hᵢ = aᵢᵀ(Σ aaᵀ)⁻¹aᵢ of the linearised problem, aᵢ = Jᵢ/σᵢ.
fn leverages(j: &[[f64; 2]], sigma_rad: &[f64]) -> Vec<f64> {
    let a: Vec<[f64; 2]> = j
        .iter()
        .zip(sigma_rad)
        .map(|(j, s)| [j[0] / s, j[1] / s])
        .collect();
    let Some(inv) = inverse(outer_sum(&a, &vec![1.0; a.len()])) else {
        return vec![0.0; a.len()];
    };
    a.iter()
        .map(|x| {
            let h = x[0] * (inv[0][0] * x[0] + inv[0][1] * x[1])
                + x[1] * (inv[1][0] * x[0] + inv[1][1] * x[1]);
            h.clamp(0.0, 0.999)
        })
        .collect()
}

/// The outlier rule, one for every method: reading i is named when its studentised
/// residual (for the robust fit, its residual over the prediction spread σ/√(1 − hᵢ))
/// exceeds the two-sided Bonferroni bound for a false alarm in
/// [`OUTLIER_FALSE_ALARM`] of clean walks: the normal quantile at 1 − α/(2n) with σ
/// known; with σ estimated, Student's t at the same level on n − 3 degrees of freedom
/// for squared loss (externally studentised residuals, exact for a linear model) and on
/// n − 2 for the robust fit (its Proposal 2 scale is already resistant).
fn outliers(method: Method, e: &[f64], lev: &[f64], scale: f64, known: bool) -> Vec<bool> {
    let n = e.len();
    let level = 1.0 - OUTLIER_FALSE_ALARM / (2.0 * n as f64);
    let quantile = |dof: f64| -> Option<f64> {
        if dof < 1.0 {
            return None;
        }
        StudentsT::new(0.0, 1.0, dof)
            .ok()
            .map(|t| t.inverse_cdf(level))
    };
    // A reading the robust fit sets aside no longer pulls the fit towards itself: its
    // residual is close to the prediction error from the others, of variance σ²/(1 − h),
    // not the σ²(1 − h) of a reading the fit follows.
    let spread = |h: f64| match method {
        Method::Robust => 1.0 / (1.0 - h).sqrt(),
        Method::Ml | Method::Ls => (1.0 - h).sqrt(),
    };
    if known {
        let bound = Normal::new(0.0, 1.0)
            .map(|d| d.inverse_cdf(level))
            .unwrap_or(f64::INFINITY);
        return e
            .iter()
            .zip(lev)
            .map(|(x, h)| (x / spread(*h)).abs() > bound)
            .collect();
    }
    match method {
        Method::Robust => {
            let Some(bound) = quantile(n as f64 - 2.0) else {
                return vec![false; n];
            };
            e.iter()
                .zip(lev)
                .map(|(x, h)| (x / (scale * spread(*h))).abs() > bound)
                .collect()
        }
        Method::Ml | Method::Ls => {
            let dof = n as f64 - 3.0;
            let Some(bound) = quantile(dof) else {
                return vec![false; n];
            };
            let ss = scale * scale * (n as f64 - 2.0);
            e.iter()
                .zip(lev)
                .map(|(x, h)| {
                    let left_out = ((ss - x * x / (1.0 - h)) / dof).max(0.0).sqrt();
                    left_out > 0.0 && (x / (left_out * (1.0 - h).sqrt())).abs() > bound
                        || left_out == 0.0 && x.abs() > 0.0 && n > 3
                })
                .collect()
        }
    }
}

/// Σ wᵢ aᵢaᵢᵀ.
fn outer_sum(a: &[[f64; 2]], w: &[f64]) -> [[f64; 2]; 2] {
    let mut m = [[0.0; 2]; 2];
    for (row, wi) in a.iter().zip(w) {
        for p in 0..2 {
            for q in 0..2 {
                m[p][q] += wi * row[p] * row[q];
            }
        }
    }
    m
}

/// The inverse of a positive-definite 2×2 matrix, or `None` when it is not.
fn inverse(m: [[f64; 2]; 2]) -> Option<[[f64; 2]; 2]> {
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let trace = m[0][0] + m[1][1];
    if !(det.is_finite() && trace > 0.0 && det > 1e-12 * trace * trace) {
        return None;
    }
    Some([
        [m[1][1] / det, -m[0][1] / det],
        [-m[1][0] / det, m[0][0] / det],
    ])
}

fn det2(m: [[f64; 2]; 2]) -> f64 {
    m[0][0] * m[1][1] - m[0][1] * m[1][0]
}

fn scaled(m: [[f64; 2]; 2], k: f64) -> [[f64; 2]; 2] {
    [[m[0][0] * k, m[0][1] * k], [m[1][0] * k, m[1][1] * k]]
}

/// Huber's sandwich covariance of an M-estimate (Huber 1981, §7.6, his second form):
/// V = K·[Σψ(uᵢ)²/(n − 2)]/[Σψ′(uᵢ)/n] · (Σψ′(uᵢ)aᵢaᵢᵀ)⁻¹, aᵢ = Jᵢ/(σᵢs),
/// K = 1 + (2/n)·var(ψ′)/mean(ψ′)². With the scale known, the model's own law:
/// V = (E[ψ′]Σ_in aaᵀ)⁻¹(E[ψ²]Σ_in aaᵀ + Σ_out ψ(uᵢ)²aaᵀ)(E[ψ′]Σ_in aaᵀ)⁻¹, "out" the
/// readings the outlier rule names. For squared loss it is the Fisher information's
/// inverse (times s² when σ is estimated). Falls back to Huber's first form
/// K²·[Σψ²/(n − 2)]/mean(ψ′)² · (Σaaᵀ)⁻¹ when Σψ′aaᵀ is not positive definite
/// (Andrews' ψ′ can be negative).
fn m_covariance(
    rho: Rho,
    j: &[[f64; 2]],
    e: &[f64],
    sigma_rad: &[f64],
    fitted: &Fitted,
    out: &[bool],
) -> Option<[[f64; 2]; 2]> {
    let n = e.len() as f64;
    let s = fitted.scale;
    let a: Vec<[f64; 2]> = j
        .iter()
        .zip(sigma_rad)
        .map(|(j, si)| [j[0] / (si * s), j[1] / (si * s)])
        .collect();
    let u: Vec<f64> = e.iter().map(|x| x / s).collect();
    let dpsi: Vec<f64> = u.iter().map(|x| rho.psi_prime(*x)).collect();
    let m1 = dpsi.iter().sum::<f64>() / n;
    if m1.is_nan() || m1 <= 0.0 {
        return None;
    }
    let var1 = dpsi.iter().map(|d| (d - m1).powi(2)).sum::<f64>() / n;
    let k = 1.0 + (2.0 / n) * var1 / (m1 * m1);
    if fitted.known {
        // σ known: the asymptotic law at the errors themselves, not at the residuals
        // (which the fit shrinks towards ψ′ = 1): readings within the model contribute
        // E[ψ′] and E[ψ²], readings the outlier rule names contribute ψ′ = 0 and their ψ².
        let (e1, beta) = (rho.expected_psi_prime(), rho.expected_psi_squared());
        // (squared loss has no such split: every reading counts fully, V = (Σaaᵀ)⁻¹; nor
        // does a walk whose remaining readings would not fix the point)
        let split = |out: &[bool]| -> Vec<bool> {
            if rho == Rho::Squared {
                vec![false; out.len()]
            } else {
                out.to_vec()
            }
        };
        let mut out = split(out);
        let inside_of =
            |out: &[bool]| -> Vec<f64> { out.iter().map(|o| if *o { 0.0 } else { 1.0 }).collect() };
        if inverse(outer_sum(&a, &inside_of(&out))).is_none() {
            out = vec![false; out.len()];
        }
        let inside = inside_of(&out);
        let meat_w: Vec<f64> = u
            .iter()
            .zip(&out)
            .map(|(x, o)| if *o { rho.psi(*x).powi(2) } else { beta })
            .collect();
        let bread = inverse(scaled(outer_sum(&a, &inside), e1))?;
        let meat = outer_sum(&a, &meat_w);
        let mut v = [[0.0; 2]; 2];
        for p in 0..2 {
            for q in 0..2 {
                for r in 0..2 {
                    for t in 0..2 {
                        v[p][q] += bread[p][r] * meat[r][t] * bread[t][q];
                    }
                }
            }
        }
        return Some(v);
    }
    // at Proposal 2's scale (and at the squared scale) this is E[ψ²] by construction; it
    // falls below only where the scale was raised to the floor on σ, which must widen
    let m2 = (u.iter().map(|x| rho.psi(*x).powi(2)).sum::<f64>() / (n - 2.0).max(1.0))
        .max(rho.expected_psi_squared());
    match inverse(outer_sum(&a, &dpsi)) {
        Some(w_inv) => Some(scaled(w_inv, k * m2 / m1)),
        None => {
            inverse(outer_sum(&a, &vec![1.0; a.len()])).map(|x| scaled(x, k * k * m2 / (m1 * m1)))
        }
    }
}

/// The covariance of the least-squares intersection, its own sandwich: the point solves
/// Σ wᵢ nᵢnᵢᵀ x = Σ wᵢ nᵢcᵢ (nᵢ the unit normal of line i, wᵢ = 1/σᵢ²), and a bearing
/// error εᵢ moves line i by dᵢεᵢ at the junction, so V = A⁻¹BA⁻¹ with A = Σ wᵢnᵢnᵢᵀ,
/// B = Σ wᵢ²dᵢ²(σᵢs)²nᵢnᵢᵀ; nᵢnᵢᵀ = dᵢ²JᵢJᵢᵀ.
fn ls_covariance(
    j: &[[f64; 2]],
    distances_m: &[f64],
    sigma_rad: &[f64],
    scale: f64,
) -> Option<[[f64; 2]; 2]> {
    let mut a = [[0.0; 2]; 2];
    let mut b = [[0.0; 2]; 2];
    for ((ji, d), si) in j.iter().zip(distances_m).zip(sigma_rad) {
        let w = 1.0 / (si * si);
        let var = (si * scale).powi(2);
        for p in 0..2 {
            for q in 0..2 {
                let nn = d * d * ji[p] * ji[q];
                a[p][q] += w * nn;
                b[p][q] += w * w * d * d * var * nn;
            }
        }
    }
    let ai = inverse(a)?;
    let mut v = [[0.0; 2]; 2];
    for p in 0..2 {
        for q in 0..2 {
            for r in 0..2 {
                for t in 0..2 {
                    v[p][q] += ai[p][r] * b[r][t] * ai[t][q];
                }
            }
        }
    }
    Some(v)
}

/// The finest bearing σ an estimate may claim, degrees: a hand-held directional antenna
/// does not resolve a bearing to better than about half a degree (common practice), so a
/// walk whose few readings happen to agree closely claims no region finer than that.
pub const SIGMA_FLOOR_DEG: f64 = 0.5;

/// Walks of at most this many readings are searched for one reading that disagrees with
/// the rest by leaving each out in turn (the robust fit's weights cannot tell a reflection
/// among so few).
pub const LEAVE_ONE_OUT_MAX: usize = 8;

/// Starts tried besides the maximum-likelihood point on walks of more than six readings:
/// the crossings of two lines with the smallest median residual (least median of squares).
const MEDIAN_STARTS: usize = 4;

/// A crossing is a restart only when its median residual is below this share of the
/// maximum-likelihood point's: on clean walks a crossing of two lines can beat that point
/// on the median by chance, never by much; a point the wild readings pulled away loses by
/// far more.
const MEDIAN_RESTART_SHARE: f64 = 0.75;

/// How one pass of the solver takes each reading's σ (radians).
#[derive(Clone, Debug)]
enum SigmaPlan {
    /// Stated per reading (with any position error added), tested against the residuals.
    Stated(Vec<f64>),
    /// Known up to a common factor the fit estimates.
    Estimated(Vec<f64>),
    /// From the spot components: taken as known, the region's law on `dof` degrees of
    /// freedom (`None`: χ²).
    Components {
        sigma_rad: Vec<f64>,
        dof: Option<f64>,
    },
}

impl SigmaPlan {
    fn sigma_rad(&self) -> &[f64] {
        match self {
            SigmaPlan::Stated(s) | SigmaPlan::Estimated(s) => s,
            SigmaPlan::Components { sigma_rad, .. } => sigma_rad,
        }
    }
}

/// What one pass of the solver is given.
#[derive(Clone, Debug)]
struct Plan {
    sigma: SigmaPlan,
    /// The bearing σ, degrees, the plan rests on (for `Estimated`, before the fit's factor).
    bearing_sigma_deg: f64,
    /// The common offset taken off every bearing, degrees.
    offset_deg: f64,
}

/// One pass of the solver, ready to be finished.
struct Staged {
    model: BearingModel,
    sigma_rad: Vec<f64>,
    fitted: Fitted,
    sigma_source: SigmaSource,
    ml_at: (f64, f64),
    flipped: Vec<bool>,
    set_aside: Vec<bool>,
    warnings: Vec<FixWarning>,
    /// The region's law when the plan sets it (spot components).
    law_dof: Option<Option<f64>>,
}

/// Each reading's position accuracy (95 % radius, metres) and where the figures came from.
fn position_accuracies(readings: &[Reading], options: &FixOptions) -> (Vec<f64>, AccuracySource) {
    let logged = readings
        .iter()
        .filter(|r| r.position_accuracy_m.is_some())
        .count();
    let fill = options
        .position_accuracy_m
        .unwrap_or(variance::DEFAULT_POSITION_ACCURACY_M);
    let source = if logged == readings.len() {
        AccuracySource::Logged
    } else if options.position_accuracy_m.is_some() {
        if logged == 0 {
            AccuracySource::Stated
        } else {
            AccuracySource::LoggedAndStated
        }
    } else if logged == 0 {
        AccuracySource::Default
    } else {
        AccuracySource::LoggedAndDefault
    };
    (
        readings
            .iter()
            .map(|r| r.position_accuracy_m.unwrap_or(fill).max(0.0))
            .collect(),
        source,
    )
}

/// Fixes the junction from `readings`. Refuses when the bearings cannot fix a point, or
/// when the region they support does not close.
///
/// Three passes at most: the antenna's σ alone (the pilot); then each reading's σ with
/// its position error at the pilot's ranges, the spots' shared error and, when chosen,
/// a common offset; then, with an offset, once more at the offset found there. Readings
/// that lean the same way along the walk widen the region of the last pass.
pub fn locate(readings: &[Reading], options: &FixOptions) -> Result<Fix> {
    let n = readings.len();
    if n < 2 {
        return Err(FixRefusal::TooFewReadings { n });
    }
    if !(options.confidence > 0.0 && options.confidence < 1.0) {
        return Err(FixRefusal::ConfidenceOutOfRange {
            confidence: options.confidence,
        });
    }
    let mut notes = Vec::new();
    // σ per reading: the option, else the log's where every reading has one.
    let stated_deg: Option<Vec<f64>> = match options.sigma_deg {
        Some(s) => Some(vec![s; n]),
        None => readings.iter().map(|r| r.sigma_deg).collect(),
    };
    if stated_deg.is_none() && readings.iter().any(|r| r.sigma_deg.is_some()) {
        notes.push(FixWarning::SigmaOnSomeReadings);
    }
    if stated_deg.is_none() && n < 3 {
        return Err(FixRefusal::TwoBearingsWithoutSigma);
    }
    geometry::check_spread_of_bearings(readings)?;

    let rms = |s: &[f64]| (s.iter().map(|x| x * x).sum::<f64>() / s.len() as f64).sqrt();
    let (accuracy_m, accuracy_source) = position_accuracies(readings, options);
    let floor = SIGMA_FLOOR_DEG.to_radians();

    let pilot_plan = Plan {
        sigma: match &stated_deg {
            Some(s) => SigmaPlan::Stated(s.iter().map(|d| d.to_radians()).collect()),
            None => SigmaPlan::Estimated(vec![1.0; n]),
        },
        bearing_sigma_deg: stated_deg.as_deref().map(rms).unwrap_or(1.0),
        offset_deg: 0.0,
    };
    let pilot = solve(readings, options, &pilot_plan, None)?;
    let hint = Some((pilot.ml_at, pilot.fitted.at));
    let pilot_at = pilot.model.point(pilot.fitted.at.0, pilot.fitted.at.1);
    let sights = pilot.model.sights(pilot_at);
    let p2: Vec<f64> = accuracy_m
        .iter()
        .zip(&sights)
        .map(|(a, s)| (a / variance::RADIUS_95_OVER_SIGMA / s.distance_m.max(1.0)).powi(2))
        .collect();
    let points: Vec<(f64, f64)> = pilot
        .model
        .lines
        .iter()
        .map(|l| l.observer_local_m)
        .collect();
    let (group, spots) = variance::spot_groups(&points, variance::SPOT_RADIUS_M);

    // A common offset: estimated when the walk surrounds the junction and the offset the
    // pilot shows is significant (or when asked), never when it cannot be told from the
    // position.
    let surrounds = offset::surrounds(&sights);
    let pilot_offset = offset::estimate(&pilot);
    let estimate_offset = match options.offset {
        OffsetChoice::None => false,
        OffsetChoice::Estimate | OffsetChoice::Auto if !surrounds => {
            if options.offset == OffsetChoice::Estimate {
                notes.push(FixWarning::OffsetNotObservable);
            }
            false
        }
        OffsetChoice::Estimate => pilot_offset.is_some(),
        OffsetChoice::Auto => pilot_offset
            .as_ref()
            .is_some_and(|o| (o.step_rad / o.se_rad).abs() > offset::AUTO_TEST_Z),
    };
    let offset_deg = match (&pilot_offset, estimate_offset) {
        (Some(o), true) => o.step_rad.to_degrees(),
        _ => 0.0,
    };

    // Each reading's σ: its position error at the pilot's range, and the spots' shared
    // error when a spot holds more than one reading.
    let (r, _) = pilot.model.residuals_and_jacobian(pilot_at);
    let r_adj: Vec<f64> = r.iter().map(|x| x - offset_deg.to_radians()).collect();
    // the pilot's outliers would pass for spot errors: clipped at three robust σ
    let clip = 3.0 * 1.4826 * median_abs(&r_adj).max(1e-12);
    let r_clip: Vec<f64> = r_adj.iter().map(|x| x.clamp(-clip, clip)).collect();
    let stated_rad2 = stated_deg.as_deref().map(|s| rms(s).to_radians().powi(2));
    let comps = variance::components(
        &r_clip,
        &group,
        spots,
        &p2,
        stated_rad2,
        estimate_offset as usize,
    );
    let mut plan = match (&comps, &stated_deg) {
        (Some(c), _) => {
            let v = variance::reading_variances(c, &group, spots, &p2);
            Plan {
                sigma: SigmaPlan::Components {
                    sigma_rad: v.iter().map(|x| x.sqrt().max(floor)).collect(),
                    dof: c.dof,
                },
                bearing_sigma_deg: (c.within + c.between)
                    .sqrt()
                    .to_degrees()
                    .max(SIGMA_FLOOR_DEG),
                offset_deg,
            }
        }
        (None, Some(s)) => Plan {
            sigma: SigmaPlan::Stated(
                s.iter()
                    .zip(&p2)
                    .map(|(d, p)| (d.to_radians().powi(2) + p).sqrt())
                    .collect(),
            ),
            bearing_sigma_deg: rms(s),
            offset_deg,
        },
        (None, None) => {
            let s1 = pilot.fitted.scale;
            let mean_p2 = p2.iter().sum::<f64>() / n as f64;
            let b0 = (s1 * s1 - mean_p2).max(floor * floor).sqrt();
            Plan {
                sigma: SigmaPlan::Estimated(p2.iter().map(|p| (b0 * b0 + p).sqrt()).collect()),
                bearing_sigma_deg: b0.to_degrees(),
                offset_deg,
            }
        }
    };
    let mut staged = solve(readings, options, &plan, hint)?;
    let mut offset_found = None;
    if estimate_offset {
        if let Some(step) = offset::estimate(&staged) {
            plan.offset_deg += step.step_rad.to_degrees();
            staged = solve(
                readings,
                options,
                &plan,
                Some((staged.ml_at, staged.fitted.at)),
            )?;
        }
        offset_found = offset::estimate(&staged).map(|o| (plan.offset_deg, o));
    }
    let mut widen = 1.0;
    let dof_spent = if offset_found.is_some() { 1.0 } else { 0.0 };
    let offset = match offset_found {
        Some((deg, o)) => {
            widen *= o.widen;
            let dof = match staged.law_dof {
                Some(d) => d,
                None if staged.fitted.known => None,
                None => Some(staged.fitted.dof - 1.0),
            };
            let q = quantile_two_sided(options.confidence, dof);
            let half = q * o.se_rad.to_degrees();
            let found = Offset {
                offset_deg: deg + o.step_rad.to_degrees(),
                low_deg: deg + o.step_rad.to_degrees() - half,
                high_deg: deg + o.step_rad.to_degrees() + half,
                confidence: options.confidence,
            };
            notes.push(FixWarning::CommonOffset {
                offset_deg: found.offset_deg,
                low_deg: found.low_deg,
                high_deg: found.high_deg,
            });
            Some(found)
        }
        None => None,
    };
    if let Some(c) = &comps {
        if c.between > 0.0 {
            notes.push(FixWarning::SpotsShareError {
                spots,
                readings: n,
                between_deg: c.between.sqrt().to_degrees(),
                within_deg: c.within.sqrt().to_degrees(),
            });
        }
        // one or no degree of freedom between spots: a spot error can hide in them
        if (spots as f64) < 4.0 + dof_spent {
            notes.push(FixWarning::TooFewSpots { spots });
        }
    }

    // Readings that lean the same way along the walk.
    let serial = serial_check(&staged, &group, spots, dof_spent > 0.0);
    if let Some((first, last, w)) = serial {
        widen *= w;
        notes.push(FixWarning::LeanTheSameWay {
            first_line: readings[first].line,
            last_line: readings[last].line,
            widened_by: w.sqrt(),
        });
    }

    let Staged {
        model,
        sigma_rad,
        mut fitted,
        sigma_source,
        ml_at,
        flipped,
        set_aside,
        warnings,
        law_dof,
    } = staged;
    // the floor on an estimated σ
    if !fitted.known && fitted.scale * plan.bearing_sigma_deg < SIGMA_FLOOR_DEG {
        fitted.scale = SIGMA_FLOOR_DEG / plan.bearing_sigma_deg;
    }
    let mut all_warnings = notes;
    all_warnings.extend(warnings);
    let mut fix = finish(FixParts {
        model: &model,
        readings,
        method: options.method,
        rho: match options.method {
            Method::Robust => Rho::from(options.loss),
            Method::Ml | Method::Ls => Rho::Squared,
        },
        confidence: options.confidence,
        sigma_rad: &sigma_rad,
        bearing_sigma_deg: plan.bearing_sigma_deg,
        fitted,
        sigma_source,
        ml_at,
        flipped: &flipped,
        set_aside: &set_aside,
        warnings: all_warnings,
        widen,
        law_dof,
        dof_spent,
    })?;
    fix.offset = offset;
    fix.spots = spots;
    fix.position_accuracy = PositionAccuracy {
        source: accuracy_source,
        typical_m: {
            let mut a = accuracy_m.clone();
            a.sort_by(f64::total_cmp);
            a[a.len() / 2]
        },
    };
    Ok(fix)
}

/// The two-sided quantile of the normal (`dof` `None`) or Student's t.
fn quantile_two_sided(confidence: f64, dof: Option<f64>) -> f64 {
    let p = 0.5 + 0.5 * confidence;
    match dof {
        Some(d) if d >= 1.0 => StudentsT::new(0.0, 1.0, d)
            .map(|t| t.inverse_cdf(p))
            .unwrap_or(f64::NAN),
        _ => Normal::new(0.0, 1.0)
            .map(|z| z.inverse_cdf(p))
            .unwrap_or(f64::NAN),
    }
}

/// The serial test on a pass's standardised residuals in walk order (spot means where
/// spots hold several readings): `None`, or the run of readings that lean the same way
/// and the factor the covariance is widened by.
fn serial_check(
    staged: &Staged,
    group: &[usize],
    spots: usize,
    with_offset: bool,
) -> Option<(usize, usize, f64)> {
    let f = &staged.fitted;
    let at = staged.model.point(f.at.0, f.at.1);
    let (r, j) = staged.model.residuals_and_jacobian(at);
    let s = if f.known { 1.0 } else { f.scale };
    // per spot, in walk order: the mean residual and Jacobian over their spread
    let mut sum_r = vec![0.0; spots];
    let mut sum_j = vec![[0.0; 2]; spots];
    let mut var = vec![0.0; spots];
    let mut first = vec![usize::MAX; spots];
    let mut last = vec![0; spots];
    for i in 0..r.len() {
        if staged.set_aside[i] || f.weights[i] < 0.5 {
            continue;
        }
        let g = group[i];
        let w = 1.0 / (staged.sigma_rad[i] * s).powi(2);
        sum_r[g] += r[i] * w;
        sum_j[g] = [sum_j[g][0] + j[i][0] * w, sum_j[g][1] + j[i][1] * w];
        var[g] += w;
        first[g] = first[g].min(i);
        last[g] = i;
    }
    let keep: Vec<usize> = (0..spots).filter(|g| var[*g] > 0.0).collect();
    // a spot's weighted mean residual over its standard error, and its rows likewise
    let u: Vec<f64> = keep.iter().map(|&g| sum_r[g] / var[g].sqrt()).collect();
    let cols = if with_offset { 3 } else { 2 };
    let design = (u.len() <= variance::SERIAL_MATRIX_MAX).then(|| {
        DMatrix::from_fn(u.len(), cols, |k, c| {
            let g = keep[k];
            match c {
                0 | 1 => sum_j[g][c] / var[g].sqrt(),
                _ => -var[g].sqrt(),
            }
        })
    });
    let w = match &design {
        Some(x) => {
            if !variance::serial_test_exact(x, &u) {
                return None;
            }
            variance::serial_widening(x, &u, !f.known).1
        }
        None => {
            let (rho_seen, flagged) = variance::serial_correlation(&u);
            if !flagged {
                return None;
            }
            let a: Vec<[f64; 2]> = keep
                .iter()
                .map(|&g| [sum_j[g][0] / var[g].sqrt(), sum_j[g][1] / var[g].sqrt()])
                .collect();
            variance::ar1_widening(&a, variance::corrected_rho(rho_seen, u.len()))
        }
    };
    let (lo, hi) = variance::longest_run(&u);
    Some((first[keep[lo]], last[keep[hi]], w))
}

/// The crossings of two lines (in front of both observers) whose median standardised
/// residual, on the plane, is smallest and well below that of the point `against`: least
/// median of squares over the crossings, on at most 24 readings' lines and judged on at
/// most 240 readings (evenly spread over the walk). A point the wild readings did not
/// pull has the lowest median already, and no restart is spent on it.
fn median_starts(
    points: &[(f64, f64)],
    bearings_deg: &[f64],
    sigma_rad: &[f64],
    count: usize,
    against: (f64, f64),
) -> Vec<(f64, f64)> {
    let n = points.len();
    let pick = |k: usize| -> Vec<usize> {
        if n <= k {
            (0..n).collect()
        } else {
            (0..k).map(|i| i * n / k).collect()
        }
    };
    let lines = pick(24);
    let judges = pick(240);
    let sub_points: Vec<(f64, f64)> = lines.iter().map(|&i| points[i]).collect();
    let sub_bearings: Vec<f64> = lines.iter().map(|&i| bearings_deg[i]).collect();
    let score = |c: (f64, f64)| -> f64 {
        let e: Vec<f64> = judges
            .iter()
            .map(|&i| {
                let to = (c.0 - points[i].0).atan2(c.1 - points[i].1).to_degrees();
                bearing_difference_deg(bearings_deg[i], to).to_radians() / sigma_rad[i]
            })
            .collect();
        median_abs(&e)
    };
    let bar = score(against);
    let mut scored: Vec<(f64, (f64, f64))> =
        geometry::forward_crossings(&sub_points, &sub_bearings)
            .into_iter()
            .map(|c| (score(c), c))
            .filter(|(m, _)| *m < MEDIAN_RESTART_SHARE * bar)
            .collect();
    scored.sort_by(|a, b| a.0.total_cmp(&b.0));
    scored.into_iter().take(count).map(|(_, c)| c).collect()
}

/// The leave-one-out rule for walks of few readings: each reading is left out in turn, the
/// others fixed by maximum likelihood, and the reading's miss from that fix judged against
/// its prediction spread σ̂₍ᵢ₎·√(1 + hᵢ) (σ̂ from the others on n − 3 degrees of freedom, or
/// σ known): the reading that misses most is set aside when it passes the Bonferroni
/// bound for a false alarm in [`OUTLIER_FALSE_ALARM`] of clean walks (Student's t or
/// normal). For a linear model this is the externally studentised residual, exact.
fn leave_one_out(
    model: &BearingModel,
    sigma_rad: &[f64],
    at: (f64, f64),
    known: bool,
) -> Result<Vec<bool>> {
    let n = sigma_rad.len();
    let mut out = vec![false; n];
    let dof = n as f64 - 3.0;
    if n < 4 || (!known && dof < 1.0) {
        return Ok(out);
    }
    let level = 1.0 - OUTLIER_FALSE_ALARM / (2.0 * n as f64);
    let bound = if known {
        Normal::new(0.0, 1.0).ok().map(|d| d.inverse_cdf(level))
    } else {
        StudentsT::new(0.0, 1.0, dof)
            .ok()
            .map(|d| d.inverse_cdf(level))
    }
    .unwrap_or(f64::INFINITY);
    let mut worst = (0.0, 0);
    for i in 0..n {
        let scale: Vec<f64> = sigma_rad
            .iter()
            .enumerate()
            .map(|(k, s)| if k == i { 0.0 } else { 1.0 / s })
            .collect();
        let p = gauss_newton(model, &scale, at)?;
        let (r, j) = model.residuals_and_jacobian(model.point(p.0, p.1));
        let e: Vec<f64> = r.iter().zip(sigma_rad).map(|(r, s)| r / s).collect();
        let a: Vec<[f64; 2]> = j
            .iter()
            .zip(sigma_rad)
            .map(|(j, s)| [j[0] / s, j[1] / s])
            .collect();
        let w: Vec<f64> = (0..n).map(|k| if k == i { 0.0 } else { 1.0 }).collect();
        let Some(inv) = inverse(outer_sum(&a, &w)) else {
            continue;
        };
        let x = a[i];
        let h = x[0] * (inv[0][0] * x[0] + inv[0][1] * x[1])
            + x[1] * (inv[1][0] * x[0] + inv[1][1] * x[1]);
        let sd = if known {
            1.0
        } else {
            let ss: f64 = (0..n).filter(|k| *k != i).map(|k| e[k] * e[k]).sum();
            (ss / dof).sqrt()
        };
        if sd <= 0.0 {
            continue;
        }
        let t = (e[i] / (sd * (1.0 + h.max(0.0)).sqrt())).abs();
        if t > worst.0 {
            worst = (t, i);
        }
    }
    if worst.0 > bound {
        out[worst.1] = true;
    }
    Ok(out)
}

/// One pass of the solver under `plan`: the maximum-likelihood point from several starts,
/// the method's fit, and the test of a stated σ.
/// `hint`: the maximum-likelihood and the method's points of an earlier pass, where this
/// one starts.
fn solve(
    readings: &[Reading],
    options: &FixOptions,
    plan: &Plan,
    hint: Option<((f64, f64), (f64, f64))>,
) -> Result<Staged> {
    let n = readings.len();
    let mut warnings = Vec::new();
    let sigma_rad: Vec<f64> = plan.sigma.sigma_rad().to_vec();

    // Local frame around the observers (their centre on the sphere: a walk across
    // longitude ±180° is centred among its spots, not half a world away).
    let observers: Vec<GeoPoint> = readings.iter().map(|r| r.observer).collect();
    let frame = LocalFrame::new(crate::geo::centre_of(&observers).unwrap_or(readings[0].observer));
    let points: Vec<(f64, f64)> = readings
        .iter()
        .map(|r| frame.to_local(r.observer))
        .collect();
    let mut bearings: Vec<f64> = readings
        .iter()
        .map(|r| normalize_bearing_deg(r.bearing_deg - plan.offset_deg))
        .collect();
    let inv_var: Vec<f64> = sigma_rad.iter().map(|s| 1.0 / (s * s)).collect();

    let ls = least_squares_intersection(&points, &bearings, &inv_var)
        .ok_or(FixRefusal::LinesCoincide)?;

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
            .zip(&points)
            .map(|((r, &b), &o)| Line {
                observer: r.observer,
                bearing_deg: b,
                observer_local_m: o,
            })
            .collect()
    };
    let mut model = BearingModel::new(frame, lines(&bearings));
    let base_scale: Vec<f64> = sigma_rad.iter().map(|s| 1.0 / s).collect();

    // The maximum-likelihood point: the robust fit starts there, and it centres the
    // likelihood region of every method. Gauss–Newton can stop in a long, flat valley or
    // at a point a few wild readings hold: it restarts from every crossing of two lines
    // with up to six readings, from the crossings of least median residual with more,
    // and keeps the lowest cost.
    let mut ml_at = gauss_newton(&model, &base_scale, hint.map_or(start, |h| h.0))?;
    let starts = if options.ambiguous {
        Vec::new()
    } else if n <= 6 {
        geometry::forward_crossings(&points, &bearings)
    } else {
        median_starts(&points, &bearings, &sigma_rad, MEDIAN_STARTS, ml_at)
    };
    {
        let mut best = cost(&model, &base_scale, ml_at.0, ml_at.1);
        for p in &starts {
            let at = gauss_newton(&model, &base_scale, *p)?;
            let c = cost(&model, &base_scale, at.0, at.1);
            if c < best {
                best = c;
                ml_at = at;
            }
        }
    }
    if options.ambiguous && options.method != Method::Ls {
        for _ in 0..5 {
            if !orient(ml_at, &mut bearings, &mut flipped) {
                break;
            }
            model = BearingModel::new(frame, lines(&bearings));
            ml_at = gauss_newton(&model, &base_scale, ml_at)?;
        }
    }

    let rho = match options.method {
        Method::Robust => Rho::from(options.loss),
        Method::Ml | Method::Ls => Rho::Squared,
    };
    let plan_known = !matches!(plan.sigma, SigmaPlan::Estimated(_));
    let set_aside = if options.method == Method::Robust && n <= LEAVE_ONE_OUT_MAX {
        leave_one_out(&model, &sigma_rad, ml_at, plan_known)?
    } else {
        vec![false; n]
    };
    let robust_starts: Vec<(f64, f64)> = std::iter::once(hint.map_or(ml_at, |h| h.1))
        .chain(
            starts
                .iter()
                .copied()
                .take(if n <= 6 { 16 } else { MEDIAN_STARTS }),
        )
        .collect();
    let fit = |known: bool| -> Result<Fitted> {
        match options.method {
            // σ is a property of the bearings, not of the estimator: estimated from the
            // likelihood's residuals, which the least-squares point does not minimise.
            Method::Ls => {
                let (scale, dof) = if known {
                    (1.0, n as f64 - 2.0)
                } else {
                    ls_scale(&model, &sigma_rad, ml_at, start)
                };
                Ok(Fitted {
                    at: start,
                    scale,
                    known,
                    dof,
                    weights: vec![1.0; n],
                })
            }
            Method::Ml => Ok(Fitted {
                at: ml_at,
                scale: if known {
                    1.0
                } else {
                    squared_scale(&model, &sigma_rad, ml_at)
                },
                known,
                dof: n as f64 - 2.0,
                weights: vec![1.0; n],
            }),
            Method::Robust => {
                fit_robust_best(&model, &sigma_rad, rho, &robust_starts, known, &set_aside)
            }
        }
    };

    let mut law_dof = None;
    let (fitted, sigma_source) = match &plan.sigma {
        SigmaPlan::Estimated(_) => (fit(false)?, SigmaSource::Estimated),
        SigmaPlan::Components { dof, .. } => {
            law_dof = Some(*dof);
            (fit(true)?, SigmaSource::Spots)
        }
        // A stated σ is tested on a fit that does not lean on it: Σ(rᵢ/σᵢ)² over the
        // readings the outlier rule keeps, against χ² with (kept − 2) degrees of freedom.
        SigmaPlan::Stated(_) if n >= 3 => {
            let free = fit(false)?;
            let judged_at = if options.method == Method::Ls {
                ml_at
            } else {
                free.at
            };
            let e = standardised(&model, &sigma_rad, judged_at);
            let (_, j) = model.residuals_and_jacobian(model.point(judged_at.0, judged_at.1));
            let out = outliers(
                options.method,
                &e,
                &leverages(&j, &sigma_rad),
                free.scale,
                false,
            );
            let kept: Vec<f64> = e
                .iter()
                .zip(&out)
                .zip(&set_aside)
                .filter(|((_, o), a)| !**o && !**a)
                .map(|((x, _), _)| *x)
                .collect();
            let q: f64 = kept.iter().map(|x| x * x).sum();
            let dof = kept.len() as f64 - 2.0;
            let bound = ChiSquared::new(dof.max(1.0))
                .map(|c| c.inverse_cdf(1.0 - SIGMA_TEST_LEVEL))
                .unwrap_or(f64::INFINITY);
            if dof >= 1.0 && q > bound {
                let stated_deg = plan.bearing_sigma_deg;
                warnings.push(FixWarning::SigmaContradicted {
                    stated_deg,
                    observed_deg: stated_deg * free.scale,
                    level: SIGMA_TEST_LEVEL,
                });
                (free, SigmaSource::Contradicted)
            } else {
                (fit(true)?, SigmaSource::Given)
            }
        }
        SigmaPlan::Stated(_) => (fit(true)?, SigmaSource::Given),
    };
    Ok(Staged {
        model,
        sigma_rad,
        fitted,
        sigma_source,
        ml_at,
        flipped,
        set_aside,
        warnings,
        law_dof,
    })
}

/// The robust fit from each of `starts`, keeping the one of lowest objective. With Andrews' loss and σ estimated,
/// each start is first settled by Huber's loss, whose Proposal 2 scale Andrews' fit then
/// keeps (a redescending loss has several scales that solve Proposal 2, and one started at
/// a poor scale can give every reading weight 0).
fn fit_robust_best(
    model: &BearingModel,
    sigma_rad: &[f64],
    rho: Rho,
    starts: &[(f64, f64)],
    known: bool,
    set_aside: &[bool],
) -> Result<Fitted> {
    let mut fits = Vec::with_capacity(starts.len());
    for &s in starts {
        let f = if rho == Rho::Andrews && !known {
            let h = fit_robust(model, sigma_rad, Rho::Huber, s, known, None, set_aside)?;
            fit_robust(
                model,
                sigma_rad,
                rho,
                h.at,
                known,
                Some((h.scale, true)),
                set_aside,
            )?
        } else {
            fit_robust(model, sigma_rad, rho, s, known, None, set_aside)?
        };
        fits.push(f);
    }
    // Proposal 2 minimises Huber's joint objective s·Σρ(eᵢ/s) + (n − 2)·β·s/2 in the
    // position and the scale together (Huber 1981, §7.7): fits from different starts are
    // compared on it, each at its own scale (with σ known, s = 1 and it is Σρ(eᵢ)).
    let beta = rho.expected_psi_squared();
    let objective = |f: &Fitted| -> f64 {
        let s = if known { 1.0 } else { f.scale.max(MIN_SCALE) };
        let sum: f64 = standardised(model, sigma_rad, f.at)
            .iter()
            .zip(set_aside)
            .filter(|(_, a)| !**a)
            .map(|(e, _)| rho.rho(e / s))
            .sum();
        if known {
            sum
        } else {
            s * sum + f.dof.max(0.0) * beta * s / 2.0
        }
    };
    let mut best: Option<(f64, Fitted)> = None;
    for f in fits {
        let o = objective(&f);
        if o.is_finite() && best.as_ref().is_none_or(|(b, _)| o < *b - 1e-9) {
            best = Some((o, f));
        }
    }
    best.map(|(_, f)| f).ok_or(FixRefusal::TooFewAgreeing)
}

struct FixParts<'a> {
    model: &'a BearingModel,
    readings: &'a [Reading],
    method: Method,
    rho: Rho,
    confidence: f64,
    sigma_rad: &'a [f64],
    /// The bearing σ the plan rests on, degrees (for σ estimated, before the fit's factor).
    bearing_sigma_deg: f64,
    fitted: Fitted,
    sigma_source: SigmaSource,
    ml_at: (f64, f64),
    flipped: &'a [bool],
    set_aside: &'a [bool],
    warnings: Vec<FixWarning>,
    /// Multiplies the covariance (and so the region): a common offset estimated, readings
    /// that lean the same way.
    widen: f64,
    /// The region's law when the plan sets it.
    law_dof: Option<Option<f64>>,
    /// Degrees of freedom spent besides the position (a common offset).
    dof_spent: f64,
}

/// Covariance, ellipse, region, residual report and geometry checks at the solution.
fn finish(parts: FixParts) -> Result<Fix> {
    let FixParts {
        model,
        readings,
        method,
        rho,
        confidence,
        sigma_rad,
        bearing_sigma_deg,
        fitted,
        sigma_source,
        ml_at,
        flipped,
        set_aside,
        mut warnings,
        widen,
        law_dof,
        dof_spent,
    } = parts;
    let n = readings.len();
    let position = model.point(fitted.at.0, fitted.at.1);
    let sights = model.sights(position);
    let (r, j) = model.residuals_and_jacobian(position);

    geometry::check_solution(readings, &sights, &r, &mut warnings)?;

    let e: Vec<f64> = r.iter().zip(sigma_rad).map(|(r, s)| r / s).collect();
    // ls judges its readings on the likelihood's residuals, as it estimates σ from them
    let outlier: Vec<bool> = if method == Method::Ls {
        let e_ml = standardised(model, sigma_rad, ml_at);
        let (_, j_ml) = model.residuals_and_jacobian(model.point(ml_at.0, ml_at.1));
        let lev = leverages(&j_ml, sigma_rad);
        let s_ml = squared_scale(model, sigma_rad, ml_at);
        outliers(method, &e_ml, &lev, s_ml, fitted.known)
    } else {
        outliers(
            method,
            &e,
            &leverages(&j, sigma_rad),
            fitted.scale,
            fitted.known,
        )
    }
    .into_iter()
    .zip(set_aside)
    .map(|(o, a)| o || *a)
    .collect();
    let n_used = outlier.iter().filter(|o| !**o).count();
    // ml and ls use every reading whatever the rule names; the robust fit must rest on two
    if n_used < 2 && method == Method::Robust {
        return Err(FixRefusal::TooFewAgreeing);
    }
    let dof = match law_dof {
        Some(d) => d,
        None if fitted.known => None,
        None => {
            if fitted.dof - dof_spent < 1.0 {
                return Err(FixRefusal::TooFewForScatter { n_used });
            }
            Some(fitted.dof - dof_spent)
        }
    };
    let cov = match method {
        Method::Ls => {
            let d: Vec<f64> = sights.iter().map(|s| s.distance_m).collect();
            ls_covariance(&j, &d, sigma_rad, fitted.scale)
        }
        Method::Ml | Method::Robust => m_covariance(rho, &j, &e, sigma_rad, &fitted, &outlier),
    }
    .filter(|c| inverse(*c).is_some())
    .map(|c| scaled(c, widen))
    .ok_or(FixRefusal::Degenerate)?;
    let k2 = ellipse::scale_squared(confidence, dof)
        .map_err(|e| FixRefusal::Solver { detail: e.message })?;
    let ell = ellipse::ellipse_from_covariance(cov, k2, confidence);
    let cep_m = ellipse::circular_error_probable_with(cov, dof);

    let sigma_deg_used = match sigma_source {
        SigmaSource::Given | SigmaSource::Spots => bearing_sigma_deg,
        SigmaSource::Estimated | SigmaSource::Contradicted => fitted.scale * bearing_sigma_deg,
    };

    let mut fits = Vec::with_capacity(n);
    for i in 0..n {
        fits.push(ReadingFit {
            line: readings[i].line,
            observer: readings[i].observer,
            bearing_deg: model.lines[i].bearing_deg,
            predicted_deg: normalize_bearing_deg(sights[i].azimuth_deg),
            residual_deg: r[i].to_degrees(),
            distance_m: sights[i].distance_m,
            weight: fitted.weights[i],
            flipped: flipped[i],
            outlier: outlier[i],
        });
    }
    geometry::check_ellipse(&ell, &fits, &mut warnings);
    if fits.iter().any(|f| f.flipped) {
        warnings.push(FixWarning::TakenReversed {
            lines: fits.iter().filter(|f| f.flipped).map(|f| f.line).collect(),
        });
    }

    let k2_half =
        ellipse::scale_squared(0.5, dof).map_err(|e| FixRefusal::Solver { detail: e.message })?;
    let (mut region_local, mut region_kind, contour_cep) = claimed_region(RegionParts {
        model,
        method,
        rho,
        sigma_rad,
        fitted: &fitted,
        ml_at,
        cov,
        k2,
        k2_half,
        widen,
        ellipse: &ell,
        confidence,
        farthest_m: sights.iter().map(|s| s.distance_m).fold(0.0, f64::max),
        warnings: &mut warnings,
    })?;
    // The least-squares point is never outside its own region: where the likelihood
    // contour (centred on the maximum-likelihood point) leaves it out, its own ellipse is
    // the region.
    if region_kind == RegionKind::Likelihood && !region::ring_contains(&region_local, fitted.at) {
        region_local = ell
            .outline(REGION_ELLIPSE_VERTICES)
            .into_iter()
            .map(|(e, n)| (fitted.at.0 + e, fitted.at.1 + n))
            .collect();
        region_kind = RegionKind::Ellipse;
        warnings.retain(|w| {
            !matches!(
                w,
                FixWarning::LinearisationFails { .. } | FixWarning::RegionCentredElsewhere { .. }
            )
        });
    }
    // the CEP under the region's own law: about the likelihood contour's centre, the
    // radius of the circle of the 50 % contour's area
    let cep_m = match (region_kind, contour_cep) {
        (RegionKind::Likelihood, Some(c)) => c,
        _ => cep_m,
    };
    let mut region: Vec<GeoPoint> = region_local
        .iter()
        .map(|&(e, n)| model.point(e, n))
        .collect();
    if let Some(first) = region.first().copied() {
        region.push(first);
    }

    Ok(Fix {
        position,
        method,
        ellipse: ell,
        covariance_m2: cov,
        cep_m,
        sigma_deg_used,
        sigma_source,
        region,
        region_kind,
        n_used,
        readings: fits,
        warnings,
        offset: None,
        sigma_dof: dof,
        spots: n,
        position_accuracy: PositionAccuracy {
            source: AccuracySource::Default,
            typical_m: variance::DEFAULT_POSITION_ACCURACY_M,
        },
        measurements: None,
        level_model: None,
        levels: Vec::new(),
    })
}

/// Vertices of the ellipse outline when the ellipse is the region claimed.
pub const REGION_ELLIPSE_VERTICES: usize = 72;

/// Outline points at which the ellipse is judged against the likelihood.
const LINEARITY_PROBES: usize = 24;

struct RegionParts<'a> {
    model: &'a BearingModel,
    method: Method,
    rho: Rho,
    sigma_rad: &'a [f64],
    fitted: &'a Fitted,
    ml_at: (f64, f64),
    cov: [[f64; 2]; 2],
    k2: f64,
    k2_half: f64,
    widen: f64,
    ellipse: &'a Ellipse,
    confidence: f64,
    farthest_m: f64,
    warnings: &'a mut Vec<FixWarning>,
}

/// The region claimed, in the model's local metres (not closed): the ellipse's outline
/// when the model is close to linear over it, else the likelihood-ratio contour
/// D(x) = 2Σρ(rᵢ(x)/(σᵢs)) − 2Σρ(rᵢ(x̂)/(σᵢs)) = k²·c. For ml (ρ = u²/2) this is
/// Beale's region S(x) − S(x̂) ≤ k²s²; for the robust fit it is the drop in dispersion of
/// the M-estimate with c the sandwich's factor (so that where the model is linear D's
/// quadratic part, ΔᵀΣψ′aaᵀΔ, gives the sandwich ellipse exactly); ls takes the
/// likelihood's own region, centred on the maximum-likelihood point.
///
/// Linearity is judged on the model alone: the weighted squared residuals S_w (the fit's
/// final IRLS weights) along the outline of their own quadratic approximation.
/// A region claimed: its ring (local metres, not closed), its kind, and the CEP under the
/// likelihood's law when the region is the contour.
type Claimed = (Vec<(f64, f64)>, RegionKind, Option<f64>);

fn claimed_region(parts: RegionParts) -> Result<Claimed> {
    let RegionParts {
        model,
        method,
        rho,
        sigma_rad,
        fitted,
        ml_at,
        cov,
        k2,
        k2_half,
        widen,
        ellipse,
        confidence,
        farthest_m,
        warnings,
    } = parts;
    let a_at = |at: (f64, f64), scale: &[f64]| -> Vec<[f64; 2]> {
        let (_, j) = model.residuals_and_jacobian(model.point(at.0, at.1));
        j.iter()
            .zip(scale)
            .map(|(j, c)| [j[0] * c, j[1] * c])
            .collect()
    };
    // the deviance's centre, loss, 1/(σᵢs), and the covariance it is to agree with
    let (centre, dev_rho, dev_scale, v) = match method {
        Method::Ls => {
            let s = if fitted.known {
                1.0
            } else {
                squared_scale(model, sigma_rad, ml_at)
            };
            let dev_scale: Vec<f64> = sigma_rad.iter().map(|si| 1.0 / (si * s)).collect();
            let a = a_at(ml_at, &dev_scale);
            let v = inverse(outer_sum(&a, &vec![1.0; a.len()])).ok_or(FixRefusal::Degenerate)?;
            (ml_at, Rho::Squared, dev_scale, scaled(v, widen))
        }
        Method::Ml | Method::Robust => {
            let dev_scale: Vec<f64> = sigma_rad
                .iter()
                .map(|si| 1.0 / (si * fitted.scale))
                .collect();
            (fitted.at, rho, dev_scale, cov)
        }
    };
    let v_inv = inverse(v).ok_or(FixRefusal::Degenerate)?;

    // Linearity of the model over the region: S_w against its quadratic approximation.
    let w_scale: Vec<f64> = dev_scale
        .iter()
        .zip(&fitted.weights)
        .map(|(c, w)| c * if method == Method::Ls { 1.0 } else { w.sqrt() })
        .collect();
    let a = a_at(centre, &w_scale);
    let h = outer_sum(&a, &vec![1.0; a.len()]);
    // away from the centre, on the plane (model docs): a geodesic per reading per probe
    // would cost a pass over every reading for each point looked at
    let plane = model.plane_at(centre);
    let plane_cost = |scale: &[f64], e: f64, n: f64| -> f64 {
        plane
            .residuals(e, n)
            .zip(scale)
            .map(|(r, s)| (r * s).powi(2))
            .sum()
    };
    let base_w = plane_cost(&w_scale, centre.0, centre.1);
    let probe_t = k2 * (det2(v) * det2(h)).max(0.0).sqrt();
    let quad_radius = |m: &[[f64; 2]; 2], t: f64, d: (f64, f64)| {
        let q = m[0][0] * d.0 * d.0 + 2.0 * m[0][1] * d.0 * d.1 + m[1][1] * d.1 * d.1;
        (t / q.max(1e-300)).sqrt()
    };
    let mismatch = (0..LINEARITY_PROBES)
        .map(|i| {
            let t = 2.0 * std::f64::consts::PI * i as f64 / LINEARITY_PROBES as f64;
            let d = (t.cos(), t.sin());
            let r = quad_radius(&h, probe_t, d);
            let g = plane_cost(&w_scale, centre.0 + r * d.0, centre.1 + r * d.1) - base_w;
            region::radius_mismatch(probe_t, g)
        })
        .fold(0.0, f64::max);
    if mismatch <= region::LINEAR_TOLERANCE {
        let ring = ellipse
            .outline(REGION_ELLIPSE_VERTICES)
            .into_iter()
            .map(|(e, n)| (fitted.at.0 + e, fitted.at.1 + n))
            .collect();
        return Ok((ring, RegionKind::Ellipse, None));
    }

    // The likelihood-ratio contour: threshold k²·c with c = √(det V · det Σψ′aaᵀ).
    let a = a_at(centre, &dev_scale);
    let u0: Vec<f64> = {
        let (r, _) = model.residuals_and_jacobian(model.point(centre.0, centre.1));
        r.iter().zip(&dev_scale).map(|(r, c)| r * c).collect()
    };
    let dpsi: Vec<f64> = u0.iter().map(|u| dev_rho.psi_prime(*u)).collect();
    let mut hpsi = outer_sum(&a, &dpsi);
    if inverse(hpsi).is_none() {
        let m1 = dpsi.iter().sum::<f64>() / dpsi.len() as f64;
        hpsi = scaled(outer_sum(&a, &vec![1.0; a.len()]), m1.max(1e-6));
    }
    let c = (det2(v) * det2(hpsi)).max(0.0).sqrt();
    let threshold = k2 * if c > 0.0 { c } else { 1.0 };
    let deviance = |e: f64, n: f64| -> f64 {
        plane
            .residuals(e, n)
            .zip(&dev_scale)
            .map(|(r, c)| 2.0 * dev_rho.rho(r * c))
            .sum()
    };
    let base = deviance(centre.0, centre.1);
    let rise = |e: f64, n: f64| deviance(e, n) - base;
    let reach_m = (20.0 * farthest_m).max(50_000.0);
    let dirs = region::directions(v, region::CONTOUR_RAYS);
    let half = region::trace_contour(
        rise,
        centre,
        threshold * k2_half / k2,
        &dirs,
        |d| quad_radius(&v_inv, k2_half, d),
        reach_m,
    )
    .ok()
    .map(|ring| (region::ring_area(&ring) / std::f64::consts::PI).sqrt());
    let ring = region::trace_contour(
        rise,
        centre,
        threshold,
        &dirs,
        |d| quad_radius(&v_inv, k2, d),
        reach_m,
    )
    .map_err(|(towards_deg, reach_m)| FixRefusal::RegionUnbounded {
        confidence,
        towards_deg,
        reach_m,
    })?;
    warnings.push(FixWarning::LinearisationFails {
        radius_mismatch: mismatch,
    });
    if method == Method::Ls {
        let offset_m = (ml_at.0 - fitted.at.0).hypot(ml_at.1 - fitted.at.1);
        warnings.push(FixWarning::RegionCentredElsewhere { offset_m });
    }
    Ok((ring, RegionKind::Likelihood, half))
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
                    position_accuracy_m: None,
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
