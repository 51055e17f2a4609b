//! Fixing the junction from the levels heard along a walk, alone or with bearings.
//!
//! # The model
//!
//! A level reading k (dBm, taken at distance dₖ from the junction) follows the
//! log-distance law with shadowing (T. S. Rappaport, *Wireless Communications:
//! Principles and Practice*, 2nd ed., 2002, §4.9–4.10):
//!
//! Lₖ = L₀,g − 10·n·log₁₀(dₖ / 1 m) + εₖ,  εₖ ~ N(0, σ_L²),
//!
//! with L₀,g the junction's level at 1 m as heard with the walk's setup g (each `setup`
//! or `antenna` of the log has its own, since a different antenna, attenuator or gain
//! shifts every level by an unknown constant), n the path-loss exponent and σ_L the
//! shadowing and multipath scatter in dB. The exponent is either given or estimated
//! within [`EXPONENT_RANGE`]: 2 in free space, up to about 4 where the path is
//! obstructed (Rappaport's Table 4.2 lists 2 for free space and 2.7–3.5 for urban cells;
//! obstructed paths in buildings go higher, and there the junction is not what is heard).
//! A bearing reading i follows bᵢ = az(oᵢ → p) + ηᵢ, ηᵢ ~ N(0, σ_b²) as in the rest of
//! [`crate::fix`].
//!
//! Both terms enter one likelihood, each residual over its own σ (position error adds
//! (σ_p/d)² to a bearing's variance and (10n/ln 10)²(σ_p/d)² to a level's), and the
//! robust loss applies to both (iteratively reweighted least squares, as for bearings):
//! the hybrid angle-of-arrival / received-signal-strength estimate of S. Wang,
//! B. R. Jackson and R. Inkol, "Hybrid RSS/AOA emitter location estimation based on
//! least squares and maximum likelihood criteria", 26th Biennial Symposium on
//! Communications (2012), and of N. Patwari et al., "Locating the nodes", IEEE Signal
//! Processing Magazine 22 (2005) 54–69, for the received-strength part with L₀ and n
//! unknown. The level parameters are linear given the position, so the region's
//! deviance profiles them out in closed form.
//!
//! A σ not stated is estimated per kind of reading (bearings, levels) by Huber's
//! Proposal 2 on that kind's residuals, the degrees of freedom shared between the kinds
//! by their leverages (Helmert's variance components: K.-R. Koch, *Parameter Estimation
//! and Hypothesis Testing in Linear Models*, 1999, §3.6).
//!
//! A level at or above the receiver's saturation (`max_dbm`) is a lower bound: it adds
//! only when the model predicts less than the bound (a one-sided term, the hinge form of
//! the censored likelihood). A level taken closer to the fix than the near field is set
//! aside: the far-field law does not hold there, nor the antenna's pattern. The near
//! field's reach is λ/2π of the heard frequency when it is known (the radian sphere of
//! H. A. Wheeler, "The radiansphere around a small antenna", Proc. IRE 47 (1959)
//! 1325–1331, inside which the reactive field dominates), else [`NEAR_FIELD_M`], and the
//! fix says which ([`NearField`]).
//!
//! # The Cramér–Rao bound
//!
//! With θ = (p, L₀,₁…L₀,G, n) and independent normal errors, the Fisher information is the
//! sum of the two kinds' terms, I(θ) = Σᵢ gᵢgᵢᵀ/σ_{b,i}² + Σₖ hₖhₖᵀ/σ_{L,k}², with the
//! gradients of the means:
//!
//! - bearing i, observer oᵢ, u = p − oᵢ, dᵢ = |u|: gᵢ = ∂az/∂θ = (u_n, −u_e, 0, …, 0)/dᵢ²
//!   (radians per metre; zero on the level parameters);
//! - level k: hₖ = ∂μₖ/∂θ = (−(10n/ln 10)·u/dₖ², eₖ, −10·log₁₀ dₖ), eₖ the unit vector of
//!   its setup's L₀.
//!
//! The bound on the position is the 2×2 block of I⁻¹, i.e. the inverse of the Schur
//! complement I_pp − I_pν I_νν⁻¹ I_νp (ν the level parameters): the levels' information
//! on range is what is left after L₀ and n have taken their share, which is why a walk at
//! one distance from the junction learns nothing of range from its levels, and a walk
//! whose distances differ learns much. With σ known and squared loss the covariance the
//! fix reports is exactly this bound at the fix; Huber's loss costs E(ψ²)/E(ψ′)² (about
//! 4 %) of it. `tests/tests/checks/level_coverage.rs` checks that the estimator's error
//! reaches the bound within 10 % where the problem is well conditioned.
//!
//! # The region
//!
//! The same rule as for bearings ([`super::region`]): the linearised ellipse of the
//! position block where the profiled deviance S(p) = min over (L₀, n) of the weighted
//! squared residuals is close to quadratic over it, the contour {S(p) − S(p̂) = T}
//! (Beale 1960) where it is not, and a refusal where that contour does not close (from
//! levels alone: the contour drawn out to the search's reach on the open side, and said).
//!
//! The threshold T is not the F law's: with L₀, n and both σ estimated from ten or so
//! readings, 2·F(2, ν) held the junction in 87–93 % of simulated walks (the level law's
//! bend close in, the exponent held at an end of its range, the robust scale's
//! small-sample law). T is calibrated per fix by a small parametric bootstrap with the
//! σ drawn from its fiducial law, read as a Monte Carlo test (`calibrated_threshold`),
//! from a seed drawn from the readings, so the same log gives the same region; the
//! ellipse's k² is scaled with it.

use nalgebra::{DMatrix, DVector};
use rand_xoshiro::rand_core::{RngCore, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

use super::loss::Rho;
use super::{
    ellipse, region, variance, AccuracySource, Fix, FixOptions, FixRefusal, FixWarning, Method,
    PositionAccuracy, Reading, ReadingFit, RegionKind, SigmaSource, OUTLIER_FALSE_ALARM,
    REGION_ELLIPSE_VERTICES, SIGMA_FLOOR_DEG,
};
use crate::geo::{bearing_difference_deg, centre_of, GeoPoint, LocalFrame};

type Result<T> = std::result::Result<T, FixRefusal>;

/// The range a path-loss exponent is estimated within when not given: 2 in free space to
/// 4 on obstructed paths (Rappaport, *Wireless Communications*, Table 4.2).
pub const EXPONENT_RANGE: (f64, f64) = (2.0, 4.0);

/// The near field's reach when the heard frequency is not known, metres: within about a
/// metre of a bracket or connector the probe couples to the junction's own structure and
/// the far-field law does not hold (common practice, from memory). With the frequency
/// known, λ/2π is taken instead ([`NearField::reach_m`]).
pub const NEAR_FIELD_M: f64 = 1.0;

/// How far from the fix levels are set aside as heard in the near field.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "from", rename_all = "snake_case")]
pub enum NearField {
    /// λ/2π of the heard frequency (Wheeler's radian sphere).
    Wavelength {
        /// The heard frequency, Hz.
        freq_hz: i64,
    },
    /// No frequency known: [`NEAR_FIELD_M`].
    Fallback,
}

impl NearField {
    /// From the heard frequency, when known (a frequency of zero or below counts as not
    /// known).
    pub fn of(freq: Option<crate::freq::Hz>) -> Self {
        match freq {
            Some(f) if f.hz() > 0 => NearField::Wavelength { freq_hz: f.hz() },
            _ => NearField::Fallback,
        }
    }

    /// The reach, metres: λ/2π, or [`NEAR_FIELD_M`].
    ///
    /// ```
    /// use pim_core::fix::levels::NearField;
    /// use pim_core::freq::Hz;
    /// // 150 MHz: λ = 2.0 m, λ/2π = 0.32 m
    /// let r = NearField::of(Some(Hz(150_000_000))).reach_m();
    /// assert!((r - 0.318).abs() < 0.001);
    /// assert_eq!(NearField::of(None).reach_m(), 1.0);
    /// ```
    pub fn reach_m(self) -> f64 {
        match self {
            NearField::Wavelength { freq_hz } => {
                crate::level::wavelength_m(freq_hz as f64) / (2.0 * std::f64::consts::PI)
            }
            NearField::Fallback => NEAR_FIELD_M,
        }
    }
}

/// The finest level σ an estimate may claim, dB: a handheld receiver's reading of a
/// steady carrier wanders by about this much (common practice, from memory).
pub const LEVEL_SIGMA_FLOOR_DB: f64 = 0.5;

/// A level-only fix needs this many spots, not on one line (position, L₀ and the
/// exponent).
pub const MIN_LEVEL_SPOTS: usize = 4;

/// The least number of level readings for which `--use both` is the default.
pub const LEVELS_FOR_DEFAULT: usize = 3;

/// One level reading, ready for the solver.
#[derive(Clone, Debug, PartialEq)]
pub struct LevelReading {
    /// The line of the log it came from.
    pub line: u64,
    /// Where it was heard (WGS84).
    pub observer: GeoPoint,
    /// The level heard, dBm.
    pub level_dbm: f64,
    /// The antenna and receiver setup it was heard with (one L₀ per setup).
    pub setup: Option<String>,
    /// The observer's position accuracy, metres (95 % radius), when logged.
    pub position_accuracy_m: Option<f64>,
}

/// The path-loss exponent: given, or estimated within a range.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Exponent {
    /// Taken as this value.
    Given {
        /// The exponent.
        value: f64,
    },
    /// Estimated within [low, high].
    Within {
        /// The lowest value allowed.
        low: f64,
        /// The highest value allowed.
        high: f64,
    },
}

impl Default for Exponent {
    fn default() -> Self {
        Exponent::Within {
            low: EXPONENT_RANGE.0,
            high: EXPONENT_RANGE.1,
        }
    }
}

/// How levels are used (by default: the exponent estimated within [`EXPONENT_RANGE`],
/// σ estimated, no saturation, no frequency).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct LevelOptions {
    /// The path-loss exponent.
    pub exponent: Exponent,
    /// σ of every level in dB; estimated from the residuals when `None`.
    pub sigma_db: Option<f64>,
    /// The receiver's saturation: a level at or above it is a lower bound.
    pub max_dbm: Option<f64>,
    /// The heard frequency, when known: levels within λ/2π of the fix are set aside (else
    /// within [`NEAR_FIELD_M`]).
    pub freq: Option<crate::freq::Hz>,
}

/// Which measurements made a fix.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Measurements {
    /// Bearings only.
    Bearings,
    /// Levels only.
    Levels,
    /// Bearings and levels in one likelihood.
    Both,
}

/// Where the exponent of a fix came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ExponentSource {
    /// Given.
    Given,
    /// Estimated inside its range.
    Estimated,
    /// Estimated, and held at an end of its range.
    AtBound,
}

/// The junction's level at 1 m as heard with one setup.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SetupLevel {
    /// The setup (`None`: rows without a setup note).
    pub setup: Option<String>,
    /// L₀, dBm at 1 m.
    pub l0_dbm: f64,
    /// Level readings heard with it.
    pub readings: usize,
}

/// The level model a fix found.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LevelModel {
    /// The path-loss exponent n.
    pub exponent: f64,
    /// Where it came from.
    pub exponent_source: ExponentSource,
    /// L₀ of the first setup, dBm at 1 m.
    pub l0_dbm: f64,
    /// The level σ the region rests on, dB.
    pub sigma_db: f64,
    /// Whether σ was given (else estimated).
    pub sigma_given: bool,
    /// Each setup's L₀.
    pub setups: Vec<SetupLevel>,
    /// Levels closer than this to the fix were set aside, metres.
    pub near_field_m: f64,
    /// Where that reach came from.
    pub near_field: NearField,
}

/// What became of one level reading.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LevelFit {
    /// The log line.
    pub line: u64,
    /// Where it was heard.
    pub observer: GeoPoint,
    /// The level heard, dBm.
    pub level_dbm: f64,
    /// The level the model predicts there, dBm.
    pub predicted_dbm: f64,
    /// Heard minus predicted, dB (for a saturated level, how far the prediction falls
    /// short of the bound, else 0).
    pub residual_db: f64,
    /// The distance to the fix, metres.
    pub distance_m: f64,
    /// The robust weight (0 when set aside).
    pub weight: f64,
    /// The setup it was heard with.
    pub setup: Option<String>,
    /// At or above the receiver's saturation: a lower bound.
    pub saturated: bool,
    /// Closer to the fix than the near field: set aside.
    pub near_field: bool,
    /// Whether it disagrees with the rest by the outlier rule.
    pub outlier: bool,
}

/// The rows of a joint fix in the local plane.
#[derive(Clone)]
struct Rows {
    b_at: Vec<(f64, f64)>,
    b_deg: Vec<f64>,
    /// Stated bearing σ, radians, when every bearing has one.
    b_stated: Option<Vec<f64>>,
    /// Position variance per axis, m².
    b_pos: Vec<f64>,
    l_at: Vec<(f64, f64)>,
    l_dbm: Vec<f64>,
    l_group: Vec<usize>,
    groups: usize,
    l_saturated: Vec<bool>,
    l_pos: Vec<f64>,
    /// The exponent's range (equal ends when given).
    exponent: (f64, f64),
    near_m: f64,
    /// Bearings may point either way (front/back): each is taken the way nearer the point.
    ambiguous: bool,
}

impl Rows {
    fn nb(&self) -> usize {
        self.b_at.len()
    }
    fn nl(&self) -> usize {
        self.l_at.len()
    }
    fn free_exponent(&self) -> bool {
        self.exponent.1 > self.exponent.0
    }
}

/// The parameters: position, each setup's L₀ and the exponent.
#[derive(Clone, Debug)]
struct Theta {
    p: (f64, f64),
    l0: Vec<f64>,
    nu: f64,
}

const DB_PER_LN: f64 = 10.0 / std::f64::consts::LN_10;

/// Residuals (bearing: radians, used minus predicted; level: dB, heard minus predicted)
/// and their gradients with respect to (e, n, L₀…, ν).
fn residuals(rows: &Rows, t: &Theta, max_dbm: Option<f64>) -> (Vec<f64>, Vec<Vec<f64>>) {
    let cols = 3 + rows.groups;
    let mut r = Vec::with_capacity(rows.nb() + rows.nl());
    let mut j = Vec::with_capacity(rows.nb() + rows.nl());
    for (at, b) in rows.b_at.iter().zip(&rows.b_deg) {
        let (de, dn) = (t.p.0 - at.0, t.p.1 - at.1);
        let d2 = (de * de + dn * dn).max(1e-6);
        let az = de.atan2(dn).to_degrees();
        r.push(oriented_difference_deg(*b, az, rows.ambiguous).to_radians());
        // ∂az/∂e = dn/d², ∂az/∂n = −de/d²; the residual is −∂az
        let mut row = vec![0.0; cols];
        row[0] = -dn / d2;
        row[1] = de / d2;
        j.push(row);
    }
    for k in 0..rows.nl() {
        let at = rows.l_at[k];
        let (de, dn) = (t.p.0 - at.0, t.p.1 - at.1);
        let d2 = (de * de + dn * dn).max(1e-6);
        let x = 10.0 * 0.5 * d2.log10();
        let g = rows.l_group[k];
        let pred = t.l0[g] - t.nu * x;
        let mut row = vec![0.0; cols];
        let (res, active) = if rows.l_saturated[k] {
            let bound = max_dbm.unwrap_or(rows.l_dbm[k]).min(rows.l_dbm[k]);
            ((bound - pred).max(0.0), bound > pred)
        } else {
            (rows.l_dbm[k] - pred, true)
        };
        if active {
            // res = L − L₀ + ν·10·log₁₀ d
            row[0] = t.nu * DB_PER_LN * de / d2;
            row[1] = t.nu * DB_PER_LN * dn / d2;
            row[2 + g] = -1.0;
            row[2 + rows.groups] = x;
        }
        r.push(res);
        j.push(row);
    }
    (r, j)
}

/// The bearing's residual against the azimuth `az`, degrees; a front/back ambiguous
/// bearing is taken the way that points nearer to it (as [`super::locate`] orients them).
fn oriented_difference_deg(bearing_deg: f64, az: f64, ambiguous: bool) -> f64 {
    let d = bearing_difference_deg(bearing_deg, az);
    if ambiguous && d.abs() > 90.0 {
        d - 180.0 * d.signum()
    } else {
        d
    }
}

/// Distances from the point to each level observer.
fn level_distances(rows: &Rows, p: (f64, f64)) -> Vec<f64> {
    rows.l_at
        .iter()
        .map(|a| (p.0 - a.0).hypot(p.1 - a.1))
        .collect()
}

/// Each residual's σ: the kind's σ with the position error at the point's range.
fn sigmas(rows: &Rows, p: (f64, f64), nu: f64, s_b: f64, s_l: f64) -> Vec<f64> {
    let mut s = Vec::with_capacity(rows.nb() + rows.nl());
    for (at, pv) in rows.b_at.iter().zip(&rows.b_pos) {
        let d2 = ((p.0 - at.0).powi(2) + (p.1 - at.1).powi(2)).max(1.0);
        let base = match &rows.b_stated {
            Some(v) => v[s.len()] * s_b,
            None => s_b,
        };
        s.push((base * base + pv / d2).sqrt());
    }
    for (at, pv) in rows.l_at.iter().zip(&rows.l_pos) {
        let d2 = ((p.0 - at.0).powi(2) + (p.1 - at.1).powi(2)).max(1.0);
        s.push((s_l * s_l + (nu * DB_PER_LN).powi(2) * pv / d2).sqrt());
    }
    s
}

/// The level parameters that minimise Σ wₖ(rₖ/σₖ)² at a fixed position (a weighted
/// linear fit, the exponent clamped to its range), saturated and zero-weight rows aside.
fn profile_levels(rows: &Rows, p: (f64, f64), w: &[f64], nu_start: f64) -> (Vec<f64>, f64) {
    let x: Vec<f64> = level_distances(rows, p)
        .iter()
        .map(|d| 10.0 * d.max(1e-3).log10())
        .collect();
    let g = rows.groups;
    let mut sw = vec![0.0; g];
    let mut sl = vec![0.0; g];
    let mut sx = vec![0.0; g];
    for k in 0..rows.nl() {
        if rows.l_saturated[k] || w[k] <= 0.0 {
            continue;
        }
        let q = rows.l_group[k];
        sw[q] += w[k];
        sl[q] += w[k] * rows.l_dbm[k];
        sx[q] += w[k] * x[k];
    }
    let mean = |s: &[f64], q: usize| if sw[q] > 0.0 { s[q] / sw[q] } else { 0.0 };
    let nu = if rows.free_exponent() {
        let (mut num, mut den) = (0.0, 0.0);
        for k in 0..rows.nl() {
            if rows.l_saturated[k] || w[k] <= 0.0 {
                continue;
            }
            let q = rows.l_group[k];
            let dx = x[k] - mean(&sx, q);
            num += w[k] * (rows.l_dbm[k] - mean(&sl, q)) * dx;
            den += w[k] * dx * dx;
        }
        if den > 0.0 {
            (-num / den).clamp(rows.exponent.0, rows.exponent.1)
        } else {
            nu_start
        }
    } else {
        rows.exponent.0
    };
    let l0 = (0..g)
        .map(|q| {
            if sw[q] > 0.0 {
                mean(&sl, q) + nu * mean(&sx, q)
            } else {
                // a setup whose every level is saturated or set aside: its L₀ from the
                // bounds, at the highest of them
                (0..rows.nl())
                    .filter(|&k| rows.l_group[k] == q)
                    .map(|k| rows.l_dbm[k] + nu * x[k])
                    .fold(f64::NEG_INFINITY, f64::max)
            }
        })
        .collect();
    (l0, nu)
}

/// Σ wᵢ(rᵢ/σᵢ)² at a position, the level parameters profiled out.
fn profiled_cost(
    rows: &Rows,
    p: (f64, f64),
    w: &[f64],
    sigma: &[f64],
    nu_start: f64,
    max_dbm: Option<f64>,
) -> f64 {
    let nb = rows.nb();
    let wl: Vec<f64> = (0..rows.nl())
        .map(|k| w[nb + k] / sigma[nb + k].powi(2))
        .collect();
    let (l0, nu) = profile_levels(rows, p, &wl, nu_start);
    let (r, _) = residuals(rows, &Theta { p, l0, nu }, max_dbm);
    r.iter()
        .zip(w)
        .zip(sigma)
        .map(|((r, w), s)| w * (r / s).powi(2))
        .sum()
}

/// The solver's state at the end.
struct Solved {
    theta: Theta,
    s_b: f64,
    s_l: f64,
    weights: Vec<f64>,
    sigma: Vec<f64>,
    near: Vec<bool>,
    /// Degrees of freedom of each kind's estimated scale (`None`: known).
    kind_dof: (Option<f64>, Option<f64>),
    nu_at_bound: bool,
}

/// The columns of the parameters in play (the exponent's only when free and inside its
/// range).
fn columns(rows: &Rows, nu_at_bound: bool) -> Vec<usize> {
    let mut c: Vec<usize> = (0..2 + rows.groups).collect();
    if rows.free_exponent() && !nu_at_bound && rows.nl() > 0 {
        c.push(2 + rows.groups);
    }
    c
}

/// A = rows of √wᵢ·Jᵢ/σᵢ over the columns in play.
fn design(j: &[Vec<f64>], scale: &[f64], cols: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(j.len(), cols.len(), |i, c| j[i][cols[c]] * scale[i])
}

/// Leverages of a design, and its normal matrix's inverse.
fn leverages(a: &DMatrix<f64>) -> Option<(Vec<f64>, DMatrix<f64>)> {
    let n = a.transpose() * a;
    let inv = n.try_inverse()?;
    let h = (0..a.nrows())
        .map(|i| {
            let row = a.row(i);
            (row * &inv * row.transpose())[(0, 0)].clamp(0.0, 0.999)
        })
        .collect();
    Some((h, inv))
}

/// The levels' setups numbered in order of first appearance, with their names.
fn setups(levels: &[LevelReading]) -> (Vec<usize>, Vec<Option<String>>) {
    let mut names: Vec<Option<String>> = Vec::new();
    let group = levels
        .iter()
        .map(|l| match names.iter().position(|n| *n == l.setup) {
            Some(g) => g,
            None => {
                names.push(l.setup.clone());
                names.len() - 1
            }
        })
        .collect();
    (group, names)
}

/// A start for the solver: the best point of a grid over the walk (and beyond it) by the
/// profiled cost, and the least-squares crossing of the bearings.
fn starts(rows: &Rows, nu0: f64, s_b: f64, s_l: f64, max_dbm: Option<f64>) -> Vec<(f64, f64)> {
    let all: Vec<(f64, f64)> = rows.b_at.iter().chain(&rows.l_at).copied().collect();
    let (mut lo, mut hi) = ((f64::MAX, f64::MAX), (f64::MIN, f64::MIN));
    for a in &all {
        lo = (lo.0.min(a.0), lo.1.min(a.1));
        hi = (hi.0.max(a.0), hi.1.max(a.1));
    }
    let extent = (hi.0 - lo.0).max(hi.1 - lo.1).max(20.0);
    let centre = (0.5 * (lo.0 + hi.0), 0.5 * (lo.1 + hi.1));
    let half = 2.0 * extent;
    const STEPS: usize = 24;
    let w = vec![1.0; rows.nb() + rows.nl()];
    let mut best: Vec<(f64, (f64, f64))> = Vec::new();
    for i in 0..=STEPS {
        for k in 0..=STEPS {
            let p = (
                centre.0 - half + 2.0 * half * i as f64 / STEPS as f64,
                centre.1 - half + 2.0 * half * k as f64 / STEPS as f64,
            );
            if all
                .iter()
                .any(|a| (a.0 - p.0).hypot(a.1 - p.1) < rows.near_m)
            {
                continue;
            }
            let sigma = sigmas(rows, p, nu0, s_b, s_l);
            let c = profiled_cost(rows, p, &w, &sigma, nu0, max_dbm);
            if c.is_finite() {
                best.push((c, p));
            }
        }
    }
    best.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, f64)> = best.iter().take(2).map(|b| b.1).collect();
    if rows.nb() >= 2 {
        let weights = vec![1.0; rows.nb()];
        if let Some(p) = super::least_squares_intersection(&rows.b_at, &rows.b_deg, &weights) {
            if p.0.is_finite() && p.1.is_finite() {
                out.push(p);
            }
        }
    }
    out
}

/// Fits from one start: IRLS with one damped Gauss–Newton step per reweighting on all
/// parameters, the exponent kept in its range, the scales re-estimated (Proposal 2 per
/// kind) where not stated.
fn fit_from(
    rows: &Rows,
    rho: Rho,
    start: (f64, f64),
    known: (bool, bool),
    scales: (f64, f64),
    max_dbm: Option<f64>,
) -> Option<Solved> {
    let (mut s_b, mut s_l) = scales;
    let nb = rows.nb();
    let n = nb + rows.nl();
    let beta = rho.expected_psi_squared();
    let nu0 = 0.5 * (rows.exponent.0 + rows.exponent.1);
    let mut sigma = sigmas(rows, start, nu0, s_b, s_l);
    let wl: Vec<f64> = (0..rows.nl())
        .map(|k| 1.0 / sigma[nb + k].powi(2))
        .collect();
    let (l0, nu) = profile_levels(rows, start, &wl, nu0);
    let mut t = Theta { p: start, l0, nu };
    let mut weights = vec![1.0; n];
    let mut near = vec![false; rows.nl()];
    let mut dof_b = nb as f64;
    let mut dof_l = rows.nl() as f64;
    let floor_b = SIGMA_FLOOR_DEG.to_radians();
    let bound = |nu: f64| {
        rows.free_exponent()
            && ((nu - rows.exponent.0).abs() < 1e-9 || (nu - rows.exponent.1).abs() < 1e-9)
    };
    for iter in 0..200 {
        let d = level_distances(rows, t.p);
        near = d.iter().map(|d| *d < rows.near_m).collect();
        sigma = sigmas(rows, t.p, t.nu, s_b, s_l);
        let (r, j) = residuals(rows, &t, max_dbm);
        let u: Vec<f64> = r.iter().zip(&sigma).map(|(r, s)| r / s).collect();
        weights = u
            .iter()
            .enumerate()
            .map(|(i, u)| {
                if i >= nb && near[i - nb] {
                    0.0
                } else {
                    rho.weight(*u)
                }
            })
            .collect();
        // the scales, each kind on its share of the degrees of freedom
        let cols = columns(rows, bound(t.nu));
        let scale: Vec<f64> = weights
            .iter()
            .zip(&sigma)
            .map(|(w, s)| w.sqrt() / s)
            .collect();
        let a = design(&j, &scale, &cols);
        let (h, _) = leverages(&a)?;
        let active = |i: usize| weights[i] > 0.0;
        let h_b: f64 = (0..nb).filter(|&i| active(i)).map(|i| h[i]).sum();
        let h_l: f64 = (nb..n).filter(|&i| active(i)).map(|i| h[i]).sum();
        dof_b = (0..nb).filter(|&i| active(i)).count() as f64 - h_b;
        dof_l = (nb..n).filter(|&i| active(i)).count() as f64 - h_l;
        let (sb0, sl0) = (s_b, s_l);
        let psi2 = |range: std::ops::Range<usize>| -> f64 {
            range
                .filter(|&i| active(i))
                .map(|i| rho.psi(u[i]).powi(2))
                .sum()
        };
        if !known.0 && nb > 0 && dof_b >= 0.5 {
            s_b = (s_b * (psi2(0..nb) / (dof_b * beta)).sqrt()).max(floor_b);
        }
        if !known.1 && rows.nl() > 0 && dof_l >= 0.5 {
            s_l = (s_l * (psi2(nb..n) / (dof_l * beta)).sqrt()).max(LEVEL_SIGMA_FLOOR_DB);
        }
        // one damped Gauss–Newton step on the weighted residuals
        let z = DVector::from_iterator(n, r.iter().zip(&scale).map(|(r, s)| r * s));
        let cost = |t: &Theta| -> f64 {
            let (r, _) = residuals(rows, t, max_dbm);
            r.iter().zip(&scale).map(|(r, s)| (r * s).powi(2)).sum()
        };
        let c0 = cost(&t);
        let normal = a.transpose() * &a;
        let grad = a.transpose() * &z;
        let step = normal
            .clone()
            .cholesky()
            .map(|c| c.solve(&grad))
            .or_else(|| normal.try_inverse().map(|i| i * &grad));
        let step = step?;
        let mut moved = 0.0;
        let mut gamma = 1.0;
        for _ in 0..12 {
            let mut next = t.clone();
            for (c, &col) in cols.iter().enumerate() {
                let v = -gamma * step[c];
                match col {
                    0 => next.p.0 += v,
                    1 => next.p.1 += v,
                    x if x == 2 + rows.groups => {
                        next.nu = (next.nu + v).clamp(rows.exponent.0, rows.exponent.1)
                    }
                    x => next.l0[x - 2] += v,
                }
            }
            // the exponent, when held at a bound, may come back inside
            if rows.free_exponent() && bound(t.nu) {
                let wl: Vec<f64> = (0..rows.nl())
                    .map(|k| weights[nb + k] / sigma[nb + k].powi(2))
                    .collect();
                let (l0, nu) = profile_levels(rows, next.p, &wl, t.nu);
                next.l0 = l0;
                next.nu = nu;
            }
            if cost(&next) <= c0 + 1e-12 * c0.abs() {
                moved = (next.p.0 - t.p.0).hypot(next.p.1 - t.p.1);
                t = next;
                break;
            }
            gamma *= 0.5;
        }
        let steady = (s_b - sb0).abs() <= 1e-6 * s_b && (s_l - sl0).abs() <= 1e-6 * s_l;
        if iter > 2 && moved < 1e-4 && steady {
            break;
        }
    }
    let kind_dof = (
        (!known.0 && nb > 0).then_some(dof_b),
        (!known.1 && rows.nl() > 0).then_some(dof_l),
    );
    sigma = sigmas(rows, t.p, t.nu, s_b, s_l);
    let nu_at_bound = bound(t.nu);
    Some(Solved {
        theta: t,
        s_b,
        s_l,
        weights,
        sigma,
        near,
        kind_dof,
        nu_at_bound,
    })
}

/// Replicates of the parametric bootstrap that calibrates a joint region's threshold
/// (`calibrated_threshold` in this module's source).
pub const CALIBRATION_REPLICATES: usize = 39;

/// The likelihood-ratio statistic of a solution at the point `p`: the rise of its profiled
/// deviance from the solution to `p`, at the solution's weights and σ (the quantity the
/// region bounds).
fn rise_of(rows: &Rows, s: &Solved, p: (f64, f64), max_dbm: Option<f64>) -> f64 {
    let at = |q: (f64, f64)| profiled_cost(rows, q, &s.weights, &s.sigma, s.theta.nu, max_dbm);
    at(p) - at(s.theta.p)
}

/// A seed drawn from the readings themselves (FNV-1a over their bits), so that the same
/// log always gives the same region.
fn seed_of(rows: &Rows) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    let values = rows
        .b_at
        .iter()
        .chain(&rows.l_at)
        .flat_map(|a| [a.0, a.1])
        .chain(rows.b_deg.iter().copied())
        .chain(rows.l_dbm.iter().copied());
    for v in values {
        for b in v.to_bits().to_le_bytes() {
            h = (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
    h
}

/// A standard normal deviate by the Box–Muller transform (G. E. P. Box and M. E. Muller,
/// Ann. Math. Statist. 29 (1958) 610–611): one line, so no distribution crate for it.
fn standard_normal(rng: &mut Xoshiro256PlusPlus) -> f64 {
    let uniform =
        |r: &mut Xoshiro256PlusPlus| ((r.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let (u1, u2) = (uniform(rng), uniform(rng));
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// How a walk is fitted: the loss, which σ are known, the scales' starts, the saturation.
#[derive(Clone, Copy)]
struct Refit {
    rho: Rho,
    known: (bool, bool),
    scales: (f64, f64),
    max_dbm: Option<f64>,
}

/// The threshold of the region {S(p) − S(p̂) ≤ T} calibrated by a parametric bootstrap:
/// [`CALIBRATION_REPLICATES`] walks are drawn from the fitted model (the fix, each setup's
/// L₀, the exponent, each reading's σ; a level at or above the saturation clipped to it),
/// each is fitted as the log was (σ and exponent estimated as they were), and its
/// statistic at the fix, S*(p̂) − S*(p̂*), is taken. An estimated σ is not plugged in as
/// it came but drawn, per replicate, from its fiducial law σ̂·√(ν/χ²_ν) on the kind's
/// degrees of freedom (the generalized pivot of K.-W. Tsui and S. Weerahandi, J. Amer.
/// Statist. Assoc. 84 (1989) 602–607): the statistic's law widens with σ (the level law
/// bends more over a larger scatter), and the walks that need a wider region are those
/// whose σ̂ came out small, which a plug-in bootstrap would draw too clean (measured: on
/// ten levels alone the plug-in held the junction in 77 % of walks, the fiducial draw in
/// 93 %). Each replicate is fitted from the fix (its data are drawn there); levels alone
/// search the whole grid as the log's fit did, since their likelihood has a second lobe
/// beyond the spots. With B replicates and
/// k = ⌈γ(B + 1)⌉, the k-th smallest is the threshold of a Monte Carlo test of level γ:
/// exact when the statistic's law does not depend on the parameters (G. A. Barnard,
/// J. R. Statist. Soc. B 25 (1963) 294; J.-M. Dufour, "Monte Carlo tests with nuisance
/// parameters", J. Econometrics 133 (2006) 443–477), and close where it depends on them
/// smoothly, as here (the bootstrap's error is of the next order in 1/n:
/// P. Hall, *The Bootstrap and Edgeworth Expansion*, 1992, §3.5). With 39 replicates
/// k = 38 at γ = 0.95; the threshold's own scatter widens the region a little on average
/// but does not move its coverage, which is what the Monte Carlo test guarantees, so more
/// replicates would buy a steadier region, not a truer one (and cost a fit each: 39 keep
/// a fix from levels under a tenth of a second). For γ above B/(B + 1) the
/// highest rank is carried to γ by the F law's shape: T = W*₍ₖ₎·k²(γ)/k²(k/(B + 1)).
/// This corrects what the F law misses with few degrees of freedom: the curvature of
/// the level law close in, the exponent held at an end of its range and the scale's
/// small-sample law under the robust loss. Returns `None` when fewer than 19 replicates
/// could be fitted (the F law is kept then).
fn calibrated_threshold(
    rows: &Rows,
    refit: &Refit,
    solved: &Solved,
    confidence: f64,
    dof: Option<f64>,
    search_wide: bool,
) -> Option<f64> {
    let Refit {
        rho,
        known,
        scales,
        max_dbm,
    } = *refit;
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed_of(rows));
    let t = &solved.theta;
    let nb = rows.nb();
    let mut stats = Vec::with_capacity(CALIBRATION_REPLICATES);
    // an estimated σ is drawn from its fiducial law, σ̂·√(ν/χ²_ν), not taken as it came
    let fiducial = |dof: Option<f64>, rng: &mut Xoshiro256PlusPlus| -> f64 {
        let Some(nu) = dof.filter(|d| *d > 0.0) else {
            return 1.0;
        };
        let u = ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        statrs::distribution::ChiSquared::new(nu)
            .map(|c| (nu / c.inverse_cdf(u)).sqrt())
            .unwrap_or(1.0)
    };
    for _ in 0..CALIBRATION_REPLICATES {
        let f_b = fiducial(solved.kind_dof.0, &mut rng);
        let f_l = fiducial(solved.kind_dof.1, &mut rng);
        let mut replicate = rows.clone();
        for i in 0..nb {
            let at = rows.b_at[i];
            let az = (t.p.0 - at.0).atan2(t.p.1 - at.1).to_degrees();
            replicate.b_deg[i] = crate::geo::normalize_bearing_deg(
                az + f_b * solved.sigma[i].to_degrees() * standard_normal(&mut rng),
            );
        }
        for (k, d) in level_distances(rows, t.p).iter().enumerate() {
            let mean = t.l0[rows.l_group[k]] - t.nu * 10.0 * d.max(1e-3).log10();
            let mut heard = mean + f_l * solved.sigma[nb + k] * standard_normal(&mut rng);
            if let Some(m) = max_dbm {
                heard = heard.min(m);
            }
            replicate.l_dbm[k] = heard;
            replicate.l_saturated[k] = max_dbm.is_some_and(|m| heard >= m);
        }
        let fitted = if search_wide {
            solve(&replicate, rho, known, scales, max_dbm)
        } else {
            solve_from(&replicate, rho, known, scales, max_dbm, vec![t.p])
        };
        if let Some(s) = fitted {
            let w = rise_of(&replicate, &s, t.p, max_dbm);
            if w.is_finite() {
                stats.push(w.max(0.0));
            }
        }
    }
    if stats.len() < 19 {
        return None;
    }
    stats.sort_by(f64::total_cmp);
    let b = stats.len() as f64;
    let top = b / (b + 1.0);
    let level = confidence.min(top);
    let k = ((level * (b + 1.0)) - 1e-9).ceil().clamp(1.0, b) as usize;
    let at_rank = stats[k - 1];
    let q = k as f64 / (b + 1.0);
    if (q - confidence).abs() < 1e-12 {
        return Some(at_rank);
    }
    let k2_conf = ellipse::scale_squared(confidence, dof).ok()?;
    let k2_q = ellipse::scale_squared(q, dof).ok()?;
    Some(at_rank * k2_conf / k2_q)
}

/// Samples along each ray when a joint region is traced.
const RAY_SAMPLES: usize = 60;

/// The likelihood region's outline along each ray at its farthest crossing: the
/// likelihood of levels bends (a crescent round the spots, a second lobe beyond them), so
/// a ray may leave the region and enter it again; the outline at the last exit is the
/// region's star-shaped hull about the fix, which holds all of it. Each ray is sampled at
/// [`RAY_SAMPLES`] distances spaced geometrically from a centimetre to `reach_m` and the
/// last exit refined by bisection. A ray still inside at `reach_m` is drawn to it, and
/// the first such ray's direction returned beside the ring: the region is open there.
fn farthest_contour(
    rise: &impl Fn(f64, f64) -> f64,
    centre: (f64, f64),
    threshold: f64,
    dirs: &[(f64, f64)],
    reach_m: f64,
) -> (Vec<(f64, f64)>, Option<f64>) {
    let first = 0.01_f64;
    let ratio = (reach_m / first).powf(1.0 / (RAY_SAMPLES - 1) as f64);
    let mut ring = Vec::with_capacity(dirs.len());
    let mut open = None;
    for &dir in dirs {
        let at = |t: f64| rise(centre.0 + t * dir.0, centre.1 + t * dir.1);
        let mut last_inside = 0.0;
        let mut next_outside = first;
        let mut t = first;
        for _ in 0..RAY_SAMPLES {
            if at(t) < threshold {
                last_inside = t;
                next_outside = t * ratio;
            }
            t *= ratio;
        }
        if next_outside > reach_m * 1.0001 {
            open.get_or_insert(dir.0.atan2(dir.1).to_degrees().rem_euclid(360.0));
            ring.push((centre.0 + reach_m * dir.0, centre.1 + reach_m * dir.1));
            continue;
        }
        let (mut lo, mut hi) = (last_inside, next_outside);
        for _ in 0..40 {
            if hi - lo <= 1e-4 * hi {
                break;
            }
            let mid = 0.5 * (lo + hi);
            if at(mid) < threshold {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let r = 0.5 * (lo + hi);
        ring.push((centre.0 + r * dir.0, centre.1 + r * dir.1));
    }
    (ring, open)
}

/// The degrees of freedom of the position's variance when a kind's σ is estimated:
/// Satterthwaite's (F. E. Satterthwaite, "An approximate distribution of estimates of
/// variance components", Biometrics Bulletin 2 (1946) 110–114), each kind weighted by its
/// share cₖ of the position's variance, the trace of the position block of
/// I⁻¹IₖI⁻¹: ν = (Σcₖ)²/Σ(cₖ²/νₖ) over the kinds estimated. `None` when both are known.
fn effective_dof(
    a: &DMatrix<f64>,
    nb: usize,
    info: &DMatrix<f64>,
    kind_dof: (Option<f64>, Option<f64>),
) -> Option<f64> {
    if kind_dof.0.is_none() && kind_dof.1.is_none() {
        return None;
    }
    let Some(inv) = info.clone().try_inverse() else {
        return kind_dof.0.or(kind_dof.1);
    };
    let share = |rows: std::ops::Range<usize>| -> f64 {
        let part = a.rows(rows.start, rows.len());
        let ik = part.transpose() * part;
        let v = &inv * ik * &inv;
        v[(0, 0)] + v[(1, 1)]
    };
    let c = [share(0..nb), share(nb..a.nrows())];
    let total = c[0] + c[1];
    let denominator: f64 = [kind_dof.0, kind_dof.1]
        .iter()
        .zip(c)
        .filter_map(|(d, ck)| d.map(|d| ck * ck / d))
        .sum();
    if denominator > 0.0 {
        Some(total * total / denominator)
    } else {
        kind_dof.0.or(kind_dof.1)
    }
}

/// The robust objective Σρ(rᵢ/σᵢ) of a solution (for choosing between starts).
fn objective(rows: &Rows, rho: Rho, s: &Solved, max_dbm: Option<f64>) -> f64 {
    let (r, _) = residuals(rows, &s.theta, max_dbm);
    let nb = rows.nb();
    r.iter()
        .zip(&s.sigma)
        .enumerate()
        .filter(|(i, _)| *i < nb || !s.near[*i - nb])
        .map(|(_, (r, sg))| rho.rho(r / sg))
        .sum::<f64>()
        // the scales' own share, so that a fit cannot win by claiming a wider scatter
        + s.sigma.iter().map(|x| x.ln()).sum::<f64>()
}

/// The spots among `points` and whether they lie on one line (the smaller spread of the
/// spots about their centre under 2 % of the larger).
fn spots_and_line(points: &[(f64, f64)]) -> (usize, bool) {
    let (group, spots) = variance::spot_groups(points, variance::SPOT_RADIUS_M);
    let mut centres = vec![(0.0, 0.0, 0.0); spots];
    for (p, g) in points.iter().zip(&group) {
        centres[*g].0 += p.0;
        centres[*g].1 += p.1;
        centres[*g].2 += 1.0;
    }
    let c: Vec<(f64, f64)> = centres.iter().map(|c| (c.0 / c.2, c.1 / c.2)).collect();
    let m = c.len() as f64;
    let (me, mn) = (
        c.iter().map(|p| p.0).sum::<f64>() / m,
        c.iter().map(|p| p.1).sum::<f64>() / m,
    );
    let (mut a, mut b, mut d) = (0.0, 0.0, 0.0);
    for p in &c {
        a += (p.0 - me).powi(2);
        b += (p.0 - me) * (p.1 - mn);
        d += (p.1 - mn).powi(2);
    }
    let (l1, l2, _) = ellipse::eigen([[a, b], [b, d]]);
    (spots, l2 <= 0.02 * 0.02 * l1.max(1e-9))
}

/// Fixes the junction from bearings and levels together (either may be empty, not
/// both). With no levels it is [`super::locate`]; with levels the joint estimate above.
pub fn locate_with_levels(
    bearings: &[Reading],
    levels: &[LevelReading],
    options: &FixOptions,
    level: &LevelOptions,
) -> Result<Fix> {
    if levels.is_empty() {
        let mut fix = super::locate(bearings, options)?;
        fix.measurements = Some(Measurements::Bearings);
        return Ok(fix);
    }
    if !(options.confidence > 0.0 && options.confidence < 1.0) {
        return Err(FixRefusal::ConfidenceOutOfRange {
            confidence: options.confidence,
        });
    }
    let all: Vec<GeoPoint> = bearings
        .iter()
        .map(|r| r.observer)
        .chain(levels.iter().map(|l| l.observer))
        .collect();
    let origin = centre_of(&all).unwrap_or(all[0]);
    let frame = LocalFrame::new(origin);
    let fill = options
        .position_accuracy_m
        .unwrap_or(variance::DEFAULT_POSITION_ACCURACY_M);
    let pos_var =
        |a: Option<f64>| (a.unwrap_or(fill).max(0.0) / variance::RADIUS_95_OVER_SIGMA).powi(2);
    let stated_deg: Option<Vec<f64>> = match options.sigma_deg {
        Some(s) => Some(vec![s; bearings.len()]),
        None => bearings.iter().map(|r| r.sigma_deg).collect(),
    };
    let (l_group, names) = setups(levels);
    let exponent = match level.exponent {
        Exponent::Given { value } => (value, value),
        Exponent::Within { low, high } => (low.min(high), low.max(high)),
    };
    let rows = Rows {
        b_at: bearings
            .iter()
            .map(|r| frame.to_local(r.observer))
            .collect(),
        b_deg: bearings.iter().map(|r| r.bearing_deg).collect(),
        b_stated: stated_deg
            .as_ref()
            .map(|v| v.iter().map(|d| d.to_radians()).collect()),
        b_pos: bearings
            .iter()
            .map(|r| pos_var(r.position_accuracy_m))
            .collect(),
        l_at: levels.iter().map(|l| frame.to_local(l.observer)).collect(),
        l_dbm: levels.iter().map(|l| l.level_dbm).collect(),
        l_group,
        groups: names.len(),
        l_saturated: levels
            .iter()
            .map(|l| level.max_dbm.is_some_and(|m| l.level_dbm >= m))
            .collect(),
        l_pos: levels
            .iter()
            .map(|l| pos_var(l.position_accuracy_m))
            .collect(),
        exponent,
        near_m: NearField::of(level.freq).reach_m(),
        ambiguous: options.ambiguous,
    };
    let measurements = if bearings.is_empty() {
        Measurements::Levels
    } else {
        Measurements::Both
    };
    // Levels alone: at least four spots, not on one line.
    let (level_spots, on_line) = spots_and_line(&rows.l_at);
    if bearings.is_empty() {
        if level_spots < MIN_LEVEL_SPOTS {
            return Err(FixRefusal::TooFewLevelSpots {
                spots: level_spots,
                needed: MIN_LEVEL_SPOTS,
            });
        }
        if on_line {
            return Err(FixRefusal::LevelsOnOneLine);
        }
    } else {
        super::geometry::check_spread_of_bearings(bearings)?;
    }
    let rho = match options.method {
        Method::Robust => Rho::from(options.loss),
        Method::Ml | Method::Ls => Rho::Squared,
    };
    let known = (stated_deg.is_some(), level.sigma_db.is_some());
    // the scales' starts: as stated (bearings: the stated σ are the scale's unit), else
    // a walk's usual scatter (common practice: a few degrees, several dB)
    let scales = (
        if known.0 { 1.0 } else { 3f64.to_radians() },
        level.sigma_db.unwrap_or(6.0),
    );
    let solved = solve(&rows, rho, known, scales, level.max_dbm).ok_or(FixRefusal::Degenerate)?;
    finish_joint(JointParts {
        rows: &rows,
        bearings,
        levels,
        names: &names,
        frame,
        options,
        level,
        rho,
        known,
        scales,
        solved,
        measurements,
        level_spots,
    })
}

/// The joint fit of lowest robust objective over the starts of [`starts`].
fn solve(
    rows: &Rows,
    rho: Rho,
    known: (bool, bool),
    scales: (f64, f64),
    max_dbm: Option<f64>,
) -> Option<Solved> {
    let nu0 = 0.5 * (rows.exponent.0 + rows.exponent.1);
    solve_from(
        rows,
        rho,
        known,
        scales,
        max_dbm,
        starts(rows, nu0, scales.0, scales.1, max_dbm),
    )
}

/// The joint fit of lowest robust objective over the given starts.
fn solve_from(
    rows: &Rows,
    rho: Rho,
    known: (bool, bool),
    scales: (f64, f64),
    max_dbm: Option<f64>,
    starts: Vec<(f64, f64)>,
) -> Option<Solved> {
    let mut best: Option<(f64, Solved)> = None;
    for start in starts {
        if let Some(s) = fit_from(rows, rho, start, known, scales, max_dbm) {
            let o = objective(rows, rho, &s, max_dbm);
            if o.is_finite() && best.as_ref().is_none_or(|b| o < b.0) {
                best = Some((o, s));
            }
        }
    }
    best.map(|b| b.1)
}

struct JointParts<'a> {
    rows: &'a Rows,
    bearings: &'a [Reading],
    levels: &'a [LevelReading],
    names: &'a [Option<String>],
    frame: LocalFrame,
    options: &'a FixOptions,
    level: &'a LevelOptions,
    rho: Rho,
    known: (bool, bool),
    scales: (f64, f64),
    solved: Solved,
    measurements: Measurements,
    level_spots: usize,
}

/// Covariance, region and the report of each reading at the joint solution.
fn finish_joint(parts: JointParts) -> Result<Fix> {
    let JointParts {
        rows,
        bearings,
        levels,
        names,
        frame,
        options,
        level,
        rho,
        known,
        scales,
        solved,
        measurements,
        level_spots,
    } = parts;
    let nb = rows.nb();
    let n = nb + rows.nl();
    let t = &solved.theta;
    let (r, j) = residuals(rows, t, level.max_dbm);
    let u: Vec<f64> = r.iter().zip(&solved.sigma).map(|(r, s)| r / s).collect();
    let active: Vec<bool> = (0..n).map(|i| i < nb || !solved.near[i - nb]).collect();
    let n_active = active.iter().filter(|a| **a).count();
    let cols = columns(rows, solved.nu_at_bound);
    let estimated = solved.kind_dof.0.is_some() || solved.kind_dof.1.is_some();
    if n_active < cols.len() + usize::from(estimated)
        || [solved.kind_dof.0, solved.kind_dof.1]
            .iter()
            .any(|d| d.is_some_and(|d| d < 1.0))
    {
        return Err(FixRefusal::TooFewForScatter { n_used: n_active });
    }
    // The covariance: for squared loss the Fisher information's inverse (the Cramér–Rao
    // bound at the fix); for the robust loss Huber's sandwich, with the model's moments
    // when σ is known and the residuals' when estimated (as for bearings).
    let unit: Vec<f64> = solved
        .sigma
        .iter()
        .zip(&active)
        .map(|(s, a)| if *a { 1.0 / s } else { 0.0 })
        .collect();
    let a = design(&j, &unit, &cols);
    let dpsi: Vec<f64> = u
        .iter()
        .zip(&active)
        .map(|(u, a)| if *a { rho.psi_prime(*u) } else { 0.0 })
        .collect();
    let info = a.transpose() * &a;
    let dof = effective_dof(&a, nb, &info, solved.kind_dof);
    let v_full = if dof.is_none() {
        let factor = rho.expected_psi_squared() / rho.expected_psi_prime().powi(2);
        info.clone().try_inverse().map(|m| m * factor)
    } else {
        let m1 = dpsi.iter().sum::<f64>() / n_active as f64;
        let var1 = dpsi
            .iter()
            .zip(&active)
            .filter(|(_, a)| **a)
            .map(|(d, _)| (d - m1).powi(2))
            .sum::<f64>()
            / n_active as f64;
        let k = 1.0 + (cols.len() as f64 / n_active as f64) * var1 / (m1 * m1).max(1e-12);
        let m2 = rho.expected_psi_squared();
        let weighted = DMatrix::from_fn(a.nrows(), a.ncols(), |i, c| a[(i, c)] * dpsi[i].sqrt());
        let wi = (weighted.transpose() * &weighted).try_inverse();
        match wi {
            Some(w) if m1 > 0.0 => Some(w * (k * m2 / m1)),
            _ => info
                .clone()
                .try_inverse()
                .map(|m| m * (k * k * m2 / (m1 * m1).max(1e-12))),
        }
    }
    .ok_or(FixRefusal::Degenerate)?;
    let cov = [
        [v_full[(0, 0)], v_full[(0, 1)]],
        [v_full[(1, 0)], v_full[(1, 1)]],
    ];
    if super::inverse(cov).is_none() || !cov.iter().flatten().all(|x| x.is_finite()) {
        return Err(FixRefusal::Degenerate);
    }
    let k2_f = ellipse::scale_squared(options.confidence, dof)
        .map_err(|e| FixRefusal::Solver { detail: e.message })?;
    let cep_m = ellipse::circular_error_probable_with(cov, dof);

    // The profiled deviance at the final weights and σ, its quadratic part H_p (the Schur
    // complement of the weighted normal matrix) and the threshold T = k²·√(det V·det H_p).
    let w_scale: Vec<f64> = solved
        .weights
        .iter()
        .zip(&solved.sigma)
        .map(|(w, s)| w.sqrt() / s)
        .collect();
    let aw = design(&j, &w_scale, &cols);
    let nw = (aw.transpose() * &aw)
        .try_inverse()
        .ok_or(FixRefusal::Degenerate)?;
    let h_p = super::inverse([[nw[(0, 0)], nw[(0, 1)]], [nw[(1, 0)], nw[(1, 1)]]])
        .ok_or(FixRefusal::Degenerate)?;
    let threshold_f = k2_f * (super::det2(cov) * super::det2(h_p)).max(0.0).sqrt();
    let refit = Refit {
        rho,
        known,
        scales,
        max_dbm: level.max_dbm,
    };
    let threshold = calibrated_threshold(
        rows,
        &refit,
        &solved,
        options.confidence,
        dof,
        measurements == Measurements::Levels,
    )
    .filter(|c| *c > 0.0)
    .unwrap_or(threshold_f);
    let k2 = k2_f * threshold / threshold_f;
    let ell = ellipse::ellipse_from_covariance(cov, k2, options.confidence);
    let s_of = |e: f64, nn: f64| {
        profiled_cost(
            rows,
            (e, nn),
            &solved.weights,
            &solved.sigma,
            t.nu,
            level.max_dbm,
        )
    };
    let base = s_of(t.p.0, t.p.1);
    let rise = |e: f64, nn: f64| s_of(e, nn) - base;
    let mut warnings = Vec::new();
    let quad_radius = |m: &[[f64; 2]; 2], tt: f64, d: (f64, f64)| {
        let q = m[0][0] * d.0 * d.0 + 2.0 * m[0][1] * d.0 * d.1 + m[1][1] * d.1 * d.1;
        (tt / q.max(1e-300)).sqrt()
    };
    let mismatch = (0..24)
        .map(|i| {
            let a = 2.0 * std::f64::consts::PI * i as f64 / 24.0;
            let d = (a.cos(), a.sin());
            let rr = quad_radius(&h_p, threshold, d);
            region::radius_mismatch(threshold, rise(t.p.0 + rr * d.0, t.p.1 + rr * d.1))
        })
        .fold(0.0, f64::max);
    let farthest_m = rows
        .b_at
        .iter()
        .chain(&rows.l_at)
        .map(|a| (a.0 - t.p.0).hypot(a.1 - t.p.1))
        .fold(0.0, f64::max);
    let (ring_local, region_kind, contour_cep) = if mismatch <= region::LINEAR_TOLERANCE {
        let ring: Vec<(f64, f64)> = ell
            .outline(REGION_ELLIPSE_VERTICES)
            .into_iter()
            .map(|(e, nn)| (t.p.0 + e, t.p.1 + nn))
            .collect();
        (ring, RegionKind::Ellipse, None)
    } else {
        let reach_m = (20.0 * farthest_m).max(50_000.0);
        let v_inv = super::inverse(cov).ok_or(FixRefusal::Degenerate)?;
        let dirs = region::directions(cov, region::CONTOUR_RAYS);
        // levels alone bend the region round the spots: traced to each ray's last exit
        // levels alone: a region open on one side is drawn out to the reach and said so
        // (it still bounds the junction on the others); with bearings, refused as for
        // bearings alone
        let ring = if measurements == Measurements::Levels {
            let (ring, open) = farthest_contour(&rise, t.p, threshold, &dirs, reach_m);
            if let Some(towards_deg) = open {
                warnings.push(FixWarning::RegionOpen {
                    confidence: options.confidence,
                    towards_deg,
                    reach_m,
                });
            }
            Ok(ring)
        } else {
            region::trace_contour(
                rise,
                t.p,
                threshold,
                &dirs,
                |d| quad_radius(&v_inv, k2, d),
                reach_m,
            )
        };
        let ring = ring.map_err(|(towards_deg, reach_m)| FixRefusal::RegionUnbounded {
            confidence: options.confidence,
            towards_deg,
            reach_m,
        })?;
        let k2_half = ellipse::scale_squared(0.5, dof)
            .map_err(|e| FixRefusal::Solver { detail: e.message })?;
        let half = region::trace_contour(
            rise,
            t.p,
            threshold * k2_half / k2,
            &dirs,
            |d| quad_radius(&v_inv, k2_half, d),
            reach_m,
        )
        .ok()
        .map(|ring| (region::ring_area(&ring) / std::f64::consts::PI).sqrt());
        warnings.push(FixWarning::LinearisationFails {
            radius_mismatch: mismatch,
        });
        (ring, RegionKind::Likelihood, half)
    };
    let cep_m = contour_cep.unwrap_or(cep_m);

    // Outliers: the Bonferroni rule on residuals over their prediction spread.
    let (h, _) = leverages(&a).ok_or(FixRefusal::Degenerate)?;
    let level_q = 1.0 - OUTLIER_FALSE_ALARM / (2.0 * n_active as f64);
    let bound = match dof {
        None => Normal::new(0.0, 1.0).map(|d| d.inverse_cdf(level_q)).ok(),
        Some(d) => StudentsT::new(0.0, 1.0, d)
            .map(|x| x.inverse_cdf(level_q))
            .ok(),
    }
    .unwrap_or(f64::INFINITY);
    let outlier: Vec<bool> = (0..n)
        .map(|i| {
            let spread = match rho {
                Rho::Squared => (1.0 - h[i]).sqrt(),
                _ => 1.0 / (1.0 - h[i]).sqrt(),
            };
            active[i] && (u[i] / spread).abs() > bound
        })
        .collect();

    let position = frame.to_geo(t.p.0, t.p.1);
    let mut fits = Vec::with_capacity(nb);
    for i in 0..nb {
        let at = rows.b_at[i];
        let (de, dn) = (t.p.0 - at.0, t.p.1 - at.1);
        fits.push(ReadingFit {
            line: bearings[i].line,
            observer: bearings[i].observer,
            bearing_deg: bearings[i].bearing_deg,
            predicted_deg: crate::geo::normalize_bearing_deg(de.atan2(dn).to_degrees()),
            residual_deg: r[i].to_degrees(),
            distance_m: de.hypot(dn),
            weight: solved.weights[i],
            flipped: rows.ambiguous
                && bearing_difference_deg(bearings[i].bearing_deg, de.atan2(dn).to_degrees()).abs()
                    > 90.0,
            outlier: outlier[i],
        });
    }
    let d = level_distances(rows, t.p);
    let mut level_fits = Vec::with_capacity(rows.nl());
    for k in 0..rows.nl() {
        let pred = t.l0[rows.l_group[k]] - t.nu * 10.0 * d[k].max(1e-3).log10();
        level_fits.push(LevelFit {
            line: levels[k].line,
            observer: levels[k].observer,
            level_dbm: levels[k].level_dbm,
            predicted_dbm: pred,
            residual_db: r[nb + k],
            distance_m: d[k],
            weight: solved.weights[nb + k],
            setup: levels[k].setup.clone(),
            saturated: rows.l_saturated[k],
            near_field: solved.near[k],
            outlier: outlier[nb + k],
        });
    }
    let near_lines: Vec<u64> = level_fits
        .iter()
        .filter(|f| f.near_field)
        .map(|f| f.line)
        .collect();
    if !near_lines.is_empty() {
        warnings.push(FixWarning::LevelsInNearField {
            lines: near_lines,
            within_m: rows.near_m,
        });
    }
    let saturated: Vec<u64> = level_fits
        .iter()
        .filter(|f| f.saturated)
        .map(|f| f.line)
        .collect();
    if let (false, Some(max_dbm)) = (saturated.is_empty(), level.max_dbm) {
        warnings.push(FixWarning::LevelsSaturated {
            lines: saturated,
            max_dbm,
        });
    }
    if solved.nu_at_bound {
        warnings.push(FixWarning::ExponentAtBound {
            exponent: t.nu,
            low: rows.exponent.0,
            high: rows.exponent.1,
        });
    }
    if measurements == Measurements::Both && level_spots < 2 {
        warnings.push(FixWarning::LevelsFromOneSpot);
    }
    super::geometry::check_ellipse(&ell, &fits, &mut warnings);
    let mut region: Vec<GeoPoint> = ring_local
        .iter()
        .map(|&(e, nn)| frame.to_geo(e, nn))
        .collect();
    if let Some(first) = region.first().copied() {
        region.push(first);
    }
    let mut counts = vec![0; rows.groups];
    for g in &rows.l_group {
        counts[*g] += 1;
    }
    let level_model = LevelModel {
        exponent: t.nu,
        exponent_source: if !rows.free_exponent() {
            ExponentSource::Given
        } else if solved.nu_at_bound {
            ExponentSource::AtBound
        } else {
            ExponentSource::Estimated
        },
        l0_dbm: t.l0[0],
        sigma_db: solved.s_l,
        sigma_given: known.1,
        setups: names
            .iter()
            .zip(&t.l0)
            .zip(&counts)
            .map(|((s, l0), c)| SetupLevel {
                setup: s.clone(),
                l0_dbm: *l0,
                readings: *c,
            })
            .collect(),
        near_field_m: rows.near_m,
        near_field: NearField::of(level.freq),
    };
    let accuracies: Vec<Option<f64>> = bearings
        .iter()
        .map(|r| r.position_accuracy_m)
        .chain(levels.iter().map(|l| l.position_accuracy_m))
        .collect();
    let (group, spots) = variance::spot_groups(
        &rows
            .b_at
            .iter()
            .chain(&rows.l_at)
            .copied()
            .collect::<Vec<_>>(),
        variance::SPOT_RADIUS_M,
    );
    let _ = group;
    Ok(Fix {
        position,
        method: options.method,
        ellipse: ell,
        covariance_m2: cov,
        cep_m,
        sigma_deg_used: if nb > 0 {
            match options.sigma_deg {
                Some(s) if known.0 => s,
                _ if known.0 => {
                    let v: Vec<f64> = bearings.iter().filter_map(|r| r.sigma_deg).collect();
                    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
                }
                _ => solved.s_b.to_degrees(),
            }
        } else {
            f64::NAN
        },
        sigma_source: if known.0 {
            SigmaSource::Given
        } else {
            SigmaSource::Estimated
        },
        region,
        region_kind,
        n_used: outlier
            .iter()
            .zip(&active)
            .filter(|(o, a)| **a && !**o)
            .count(),
        readings: fits,
        warnings,
        offset: None,
        spots,
        position_accuracy: accuracy_of(&accuracies, options),
        sigma_dof: dof,
        measurements: Some(measurements),
        level_model: Some(level_model),
        levels: level_fits,
    })
}

/// The position accuracy a joint fix took, as for bearings.
fn accuracy_of(logged: &[Option<f64>], options: &FixOptions) -> PositionAccuracy {
    let count = logged.iter().filter(|a| a.is_some()).count();
    let fill = options
        .position_accuracy_m
        .unwrap_or(variance::DEFAULT_POSITION_ACCURACY_M);
    let source = match (
        count == logged.len(),
        options.position_accuracy_m.is_some(),
        count,
    ) {
        (true, _, _) => AccuracySource::Logged,
        (false, true, 0) => AccuracySource::Stated,
        (false, true, _) => AccuracySource::LoggedAndStated,
        (false, false, 0) => AccuracySource::Default,
        (false, false, _) => AccuracySource::LoggedAndDefault,
    };
    let mut a: Vec<f64> = logged.iter().map(|a| a.unwrap_or(fill)).collect();
    a.sort_by(f64::total_cmp);
    PositionAccuracy {
        source,
        typical_m: a.get(a.len() / 2).copied().unwrap_or(fill),
    }
}

/// The Fisher information of the position from bearings and levels at a point `p` (local
/// metres), the level parameters' share taken out (the Schur complement of the module's
/// docs), per unit σ: bearings at `sigma_b_rad`, levels at `sigma_db` with exponent `nu`.
/// The bound on the position's covariance is its inverse.
pub fn position_information(
    bearing_spots: &[(f64, f64)],
    level_spots: &[(f64, f64)],
    p: (f64, f64),
    sigma_b_rad: f64,
    sigma_db: f64,
    nu: f64,
    exponent_free: bool,
) -> [[f64; 2]; 2] {
    let rows = Rows {
        b_at: bearing_spots.to_vec(),
        b_deg: bearing_spots
            .iter()
            .map(|a| (p.0 - a.0).atan2(p.1 - a.1).to_degrees())
            .collect(),
        b_stated: None,
        b_pos: vec![0.0; bearing_spots.len()],
        l_at: level_spots.to_vec(),
        l_dbm: vec![0.0; level_spots.len()],
        l_group: vec![0; level_spots.len()],
        groups: 1,
        l_saturated: vec![false; level_spots.len()],
        l_pos: vec![0.0; level_spots.len()],
        exponent: if exponent_free {
            (nu - 1.0, nu + 1.0)
        } else {
            (nu, nu)
        },
        near_m: 0.0,
        ambiguous: false,
    };
    let theta = Theta {
        p,
        l0: vec![0.0],
        nu,
    };
    let (_, j) = residuals(&rows, &theta, None);
    let scale: Vec<f64> = (0..j.len())
        .map(|i| {
            if i < rows.nb() {
                1.0 / sigma_b_rad
            } else {
                1.0 / sigma_db
            }
        })
        .collect();
    let mut cols = columns(&rows, false);
    if level_spots.is_empty() {
        cols.truncate(2);
    }
    let a = design(&j, &scale, &cols);
    let info = a.transpose() * &a;
    match info.clone().try_inverse() {
        Some(v) => super::inverse([[v[(0, 0)], v[(0, 1)]], [v[(1, 0)], v[(1, 1)]]])
            .unwrap_or([[0.0; 2]; 2]),
        None => [[0.0; 2]; 2],
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geo::destination;

    const TRUTH: GeoPoint = GeoPoint {
        lat_deg: 45.10462,
        lon_deg: -122.414033,
    };

    fn levels_at(spots: &[(f64, f64)], l0: f64, nu: f64) -> Vec<LevelReading> {
        spots
            .iter()
            .enumerate()
            .map(|(i, &(az, d))| LevelReading {
                line: i as u64 + 2,
                observer: destination(TRUTH, az, d),
                level_dbm: l0 - 10.0 * nu * d.log10() + if i % 2 == 0 { 0.7 } else { -0.7 },
                setup: None,
                position_accuracy_m: Some(0.0),
            })
            .collect()
    }

    #[test]
    fn levels_alone_fix_the_junction() {
        let spots: Vec<(f64, f64)> = (0..10)
            .map(|i| {
                (
                    i as f64 * 36.0 + 5.0,
                    5.0 + 35.0 * ((i * 7) % 10) as f64 / 9.0,
                )
            })
            .collect();
        let levels = levels_at(&spots, -40.0, 2.5);
        let fix = locate_with_levels(
            &[],
            &levels,
            &FixOptions::default(),
            &LevelOptions::default(),
        )
        .unwrap();
        let miss = crate::geo::distance_m(fix.position, TRUTH);
        assert!(miss < 2.0, "{miss}");
        assert!(fix.region_contains(TRUTH));
        assert_eq!(fix.measurements, Some(Measurements::Levels));
        let m = fix.level_model.as_ref().unwrap();
        assert!((m.exponent - 2.5).abs() < 0.3, "{}", m.exponent);
        assert!((m.l0_dbm + 40.0).abs() < 2.0, "{}", m.l0_dbm);
    }

    #[test]
    fn the_next_spot_is_scored_on_the_levels_information() {
        // levels from one side only: the best next spot is on the other side
        let spots: Vec<(f64, f64)> = (0..8)
            .map(|i| (200.0 + 20.0 * i as f64, 6.0 + 4.0 * (i % 4) as f64))
            .collect();
        let levels = levels_at(&spots, -40.0, 2.0);
        let options = LevelOptions {
            exponent: Exponent::Given { value: 2.0 },
            sigma_db: Some(1.0),
            ..LevelOptions::default()
        };
        let fix = locate_with_levels(&[], &levels, &FixOptions::default(), &options).unwrap();
        let ring = crate::walk::ring(fix.position, 15.0, 8);
        let ranked = crate::walk::rank_spots(&fix, &ring, f64::NAN, 5.0).unwrap();
        assert_eq!(ranked.len(), 8);
        assert!(ranked.iter().all(|s| s.information_det.is_finite()));
        let (_, az) = crate::geo::distance_and_azimuth(fix.position, ranked[0].spot.position);
        assert!(
            crate::geo::bearing_difference_deg(az, 270.0).abs() > 60.0,
            "best spot at {az:.0}°"
        );
    }

    #[test]
    fn too_few_or_collinear_level_spots_give_no_fix() {
        let three = levels_at(&[(0.0, 10.0), (120.0, 20.0), (240.0, 30.0)], -40.0, 2.0);
        assert!(matches!(
            locate_with_levels(
                &[],
                &three,
                &FixOptions::default(),
                &LevelOptions::default()
            ),
            Err(FixRefusal::TooFewLevelSpots { spots: 3, .. })
        ));
        // five spots on one straight line, east of the junction
        let start = destination(TRUTH, 90.0, 10.0);
        let line: Vec<LevelReading> = (0..5)
            .map(|i| LevelReading {
                line: i + 2,
                observer: destination(start, 0.0, 8.0 * i as f64),
                level_dbm: -50.0 - i as f64,
                setup: None,
                position_accuracy_m: Some(0.0),
            })
            .collect();
        assert_eq!(
            locate_with_levels(&[], &line, &FixOptions::default(), &LevelOptions::default()),
            Err(FixRefusal::LevelsOnOneLine)
        );
    }

    #[test]
    fn without_levels_it_is_the_bearing_fix() {
        let readings: Vec<Reading> = [(10.0, 200.0), (70.0, 150.0), (130.0, 300.0), (200.0, 250.0)]
            .iter()
            .enumerate()
            .map(|(i, &(az, d))| {
                let o = destination(TRUTH, az, d);
                let (_, back) = crate::geo::distance_and_azimuth(o, TRUTH);
                Reading::new(
                    i as u64 + 2,
                    o,
                    crate::geo::normalize_bearing_deg(back + 1.0),
                    Some(3.0),
                )
            })
            .collect();
        let a = super::super::locate(&readings, &FixOptions::default()).unwrap();
        let mut b = locate_with_levels(
            &readings,
            &[],
            &FixOptions::default(),
            &LevelOptions::default(),
        )
        .unwrap();
        assert_eq!(b.measurements, Some(Measurements::Bearings));
        b.measurements = None;
        assert_eq!(a, b);
    }

    #[test]
    fn near_and_saturated_levels_are_said() {
        let spots: Vec<(f64, f64)> = (0..8)
            .map(|i| (i as f64 * 45.0, 3.0 + 4.0 * i as f64))
            .chain([(100.0, 0.2), (200.0, 2.0)])
            .collect();
        let mut levels = levels_at(&spots, -30.0, 2.0);
        levels[8].level_dbm = -22.0; // the law gives −16 at 0.2 m; the probe hears less
        levels[9].level_dbm = -38.0; // −36 at 2 m, clipped by the receiver at −38
        let options = LevelOptions {
            max_dbm: Some(-38.0),
            exponent: Exponent::Given { value: 2.0 },
            ..LevelOptions::default()
        };
        let fix = locate_with_levels(&[], &levels, &FixOptions::default(), &options).unwrap();
        assert!(fix.levels[9].saturated && !fix.levels[0].saturated);
        assert!(
            fix.levels[8].near_field && fix.levels[8].weight == 0.0,
            "{:?} {:?}",
            fix.levels[8],
            fix.position
        );
        assert!(fix
            .warnings
            .iter()
            .any(|w| matches!(w, FixWarning::LevelsInNearField { .. })));
        assert!(fix
            .warnings
            .iter()
            .any(|w| matches!(w, FixWarning::LevelsSaturated { .. })));
        assert!(crate::geo::distance_m(fix.position, TRUTH) < 2.0);
    }

    #[test]
    fn the_near_field_is_a_sixth_of_the_wavelength_when_the_frequency_is_known() {
        let spots: Vec<(f64, f64)> = (0..8)
            .map(|i| (i as f64 * 45.0, 3.0 + 4.0 * i as f64))
            .chain([(100.0, 1.3)])
            .collect();
        let levels = levels_at(&spots, -30.0, 2.0);
        let given = LevelOptions {
            exponent: Exponent::Given { value: 2.0 },
            ..LevelOptions::default()
        };
        // 30 MHz: λ = 10 m, λ/2π = 1.59 m, so the level at 1.3 m is set aside
        let low = LevelOptions {
            freq: Some(crate::freq::Hz(30_000_000)),
            ..given
        };
        let fix = locate_with_levels(&[], &levels, &FixOptions::default(), &low).unwrap();
        let m = fix.level_model.as_ref().unwrap();
        assert_eq!(
            m.near_field,
            NearField::Wavelength {
                freq_hz: 30_000_000
            }
        );
        assert!((m.near_field_m - 1.592).abs() < 0.01, "{}", m.near_field_m);
        assert!(fix.levels[8].near_field);
        // no frequency: the 1 m fallback keeps it, and says so
        let fix = locate_with_levels(&[], &levels, &FixOptions::default(), &given).unwrap();
        let m = fix.level_model.as_ref().unwrap();
        assert_eq!(m.near_field, NearField::Fallback);
        assert_eq!(m.near_field_m, NEAR_FIELD_M);
        assert!(!fix.levels[8].near_field);
    }

    #[test]
    fn front_back_bearings_join_the_levels() {
        let spots: Vec<(f64, f64)> = (0..8)
            .map(|i| (200.0 + 10.0 * i as f64, 20.0 + 15.0 * (i % 4) as f64))
            .collect();
        let levels = levels_at(&spots, -40.0, 2.0);
        let readings: Vec<Reading> = spots
            .iter()
            .enumerate()
            .map(|(i, &(az, d))| {
                let o = destination(TRUTH, az, d);
                let (_, back) = crate::geo::distance_and_azimuth(o, TRUTH);
                // every third reading logged the back of the antenna's pattern
                let flip = if i % 3 == 0 { 180.0 } else { 0.0 };
                let wobble = if i % 2 == 0 { 1.0 } else { -1.0 };
                Reading::new(
                    i as u64 + 2,
                    o,
                    crate::geo::normalize_bearing_deg(back + wobble + flip),
                    None,
                )
            })
            .collect();
        let options = FixOptions {
            ambiguous: true,
            position_accuracy_m: Some(0.0),
            ..FixOptions::default()
        };
        let level = LevelOptions {
            exponent: Exponent::Given { value: 2.0 },
            ..LevelOptions::default()
        };
        let fix = locate_with_levels(&readings, &levels, &options, &level).unwrap();
        assert_eq!(fix.measurements, Some(Measurements::Both));
        assert!(crate::geo::distance_m(fix.position, TRUTH) < 2.0);
        let flipped: Vec<bool> = fix.readings.iter().map(|r| r.flipped).collect();
        assert_eq!(
            flipped,
            (0..8).map(|i| i % 3 == 0).collect::<Vec<_>>(),
            "{:?}",
            fix.readings
        );
        assert!(fix.readings.iter().all(|r| r.residual_deg.abs() < 3.0));
    }

    #[test]
    fn setups_have_their_own_l0() {
        let spots: Vec<(f64, f64)> = (0..12)
            .map(|i| (i as f64 * 30.0, 5.0 + 3.0 * i as f64))
            .collect();
        let mut levels = levels_at(&spots, -40.0, 2.0);
        for l in levels.iter_mut().skip(6) {
            l.level_dbm -= 20.0; // a 20 dB attenuator put in
            l.setup = Some("20 dB pad".into());
        }
        let options = LevelOptions {
            exponent: Exponent::Given { value: 2.0 },
            ..LevelOptions::default()
        };
        let fix = locate_with_levels(&[], &levels, &FixOptions::default(), &options).unwrap();
        let m = fix.level_model.unwrap();
        assert_eq!(m.setups.len(), 2);
        assert!((m.setups[0].l0_dbm - m.setups[1].l0_dbm - 20.0).abs() < 1.0);
        assert!(crate::geo::distance_m(fix.position, TRUTH) < 2.0);
    }
}
