//! Where to stand next: the spot whose bearing would shrink the ellipse most.
//!
//! D-optimal design: each candidate spot is scored by the determinant of the Fisher
//! information about the junction's position after adding one bearing taken there. The
//! information of the readings so far is the inverse of the fix's covariance; one more
//! bearing with standard deviation σ (radians) from distance d adds uuᵀ/(σ²d²), u the
//! unit vector across its line of bearing (Gavish & Weiss, IEEE Trans. AES 28 (1992)
//! 817–828). The current fix stands in for the unknown junction.
//!
//! When levels took part in the fix, the next spot is scored on the joint information
//! (`crate::fix::levels`): one more reading of each kind the walk logs (a level, and a
//! bearing unless the walk is of levels alone) adds the rise in the position's
//! information with the level parameters (L₀, the exponent) taken out, the Cramér–Rao
//! bound's Schur complement with and without the new reading.

use serde::Serialize;

use crate::error::Result;
use crate::fix::ellipse::{ellipse_from_covariance, scale_squared, Ellipse};
use crate::fix::{Fix, SigmaSource};
use crate::geo::{destination, distance_and_azimuth, GeoPoint, LocalFrame};

/// A place a bearing could be taken from.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Spot {
    /// A name for the spot, when it has one.
    pub name: Option<String>,
    /// Where it is (WGS84).
    pub position: GeoPoint,
}

/// A spot with its score.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ScoredSpot {
    /// The spot.
    pub spot: Spot,
    /// Distance from the spot to the current fix.
    pub distance_m: f64,
    /// The bearing the antenna would show there if the fix is right.
    pub bearing_to_fix_deg: f64,
    /// det of the Fisher information after the reading, m⁻⁴.
    pub information_det: f64,
    /// The ellipse expected after the reading.
    pub expected: Ellipse,
}

/// `count` spots on a circle of `radius_m` around `center`, from north clockwise.
pub fn ring(center: GeoPoint, radius_m: f64, count: usize) -> Vec<Spot> {
    (0..count)
        .map(|i| {
            let az = 360.0 * i as f64 / count as f64;
            Spot {
                name: Some(format!("{az:03.0}° from the fix, {radius_m:.0} m out")),
                position: destination(center, az, radius_m),
            }
        })
        .collect()
}

/// The inverse of a positive-definite 2×2 matrix (nalgebra), or `None` when it is not.
fn inverse(m: [[f64; 2]; 2]) -> Option<[[f64; 2]; 2]> {
    let a = nalgebra::Matrix2::new(m[0][0], m[0][1], m[1][0], m[1][1]);
    if !(a.determinant().is_finite() && a.determinant() > 0.0) {
        return None;
    }
    let i = a.try_inverse()?;
    Some([[i[(0, 0)], i[(0, 1)]], [i[(1, 0)], i[(1, 1)]]])
}

/// The Fisher information one bearing of σ `sigma_deg` from `from` adds about a junction
/// at `at`, in east/north m⁻².
pub fn bearing_information(from: GeoPoint, at: GeoPoint, sigma_deg: f64) -> [[f64; 2]; 2] {
    let (d, az) = distance_and_azimuth(from, at);
    // direction of the line at the junction ≈ azimuth from the spot (short ranges)
    let t = az.to_radians();
    let u = [t.cos(), -t.sin()];
    let s = sigma_deg.to_radians();
    let k = 1.0 / (s * s * d * d);
    [
        [k * u[0] * u[0], k * u[0] * u[1]],
        [k * u[1] * u[0], k * u[1] * u[1]],
    ]
}

/// The position information one more reading at `from` adds to a fix made with levels:
/// a level (and a bearing of σ `sigma_deg` when the walk has bearings), the level
/// parameters' share taken out.
fn joint_information_gain(fix: &Fix, from: GeoPoint, sigma_deg: f64) -> [[f64; 2]; 2] {
    let Some(m) = &fix.level_model else {
        return [[0.0; 2]; 2];
    };
    let frame = LocalFrame::new(fix.position);
    let bearings: Vec<(f64, f64)> = fix
        .readings
        .iter()
        .filter(|r| !r.outlier)
        .map(|r| frame.to_local(r.observer))
        .collect();
    let levels: Vec<(f64, f64)> = fix
        .levels
        .iter()
        .filter(|l| !l.near_field && !l.saturated && !l.outlier)
        .map(|l| frame.to_local(l.observer))
        .collect();
    let spot = frame.to_local(from);
    let free = m.exponent_source != crate::fix::levels::ExponentSource::Given;
    let sigma_b = if sigma_deg.is_finite() && sigma_deg > 0.0 {
        sigma_deg.to_radians()
    } else {
        fix.sigma_deg_used.to_radians()
    };
    let info = |b: &[(f64, f64)], l: &[(f64, f64)]| {
        crate::fix::levels::position_information(
            b,
            l,
            (0.0, 0.0),
            sigma_b,
            m.sigma_db,
            m.exponent,
            free,
        )
    };
    let before = info(&bearings, &levels);
    let mut more_levels = levels.clone();
    more_levels.push(spot);
    let mut more_bearings = bearings.clone();
    if !bearings.is_empty() {
        more_bearings.push(spot);
    }
    let after = info(&more_bearings, &more_levels);
    let mut gain = [[0.0; 2]; 2];
    for p in 0..2 {
        for q in 0..2 {
            gain[p][q] = after[p][q] - before[p][q];
        }
    }
    gain
}

/// A spot closer to the fix than this gives unreliable bearings (the default of the
/// walk's suggestions).
pub const MIN_SPOT_RANGE_M: f64 = 25.0;

/// Spots on the ring [`walk_ring`] draws.
const WALK_RING_SPOTS: usize = 16;

/// The ring is never drawn tighter than this around the fix, m.
const MIN_WALK_RING_M: f64 = 50.0;

/// The spots a walk without a list of reachable spots is offered: a ring around the fix
/// at the median range of its readings (at least 50 m).
pub fn walk_ring(fix: &Fix) -> Vec<Spot> {
    let mut ranges: Vec<f64> = fix.readings.iter().map(|r| r.distance_m).collect();
    ranges.sort_by(f64::total_cmp);
    let median = ranges
        .get(ranges.len() / 2)
        .copied()
        .unwrap_or(MIN_WALK_RING_M);
    ring(fix.position, median.max(MIN_WALK_RING_M), WALK_RING_SPOTS)
}

/// Scores every spot at least `min_range_m` from the fix, best first (ties by input
/// order). `sigma_deg` is the σ expected of the next bearing.
pub fn rank_spots(
    fix: &Fix,
    spots: &[Spot],
    sigma_deg: f64,
    min_range_m: f64,
) -> Result<Vec<ScoredSpot>> {
    let Some(info) = inverse(fix.covariance_m2) else {
        return Ok(Vec::new());
    };
    let dof = match fix.sigma_source {
        SigmaSource::Given => None,
        SigmaSource::Estimated | SigmaSource::Contradicted | SigmaSource::Spots => {
            Some(fix.n_used as f64 - 1.0)
        }
    };
    let k2 = scale_squared(fix.ellipse.confidence, dof)?;
    let mut scored: Vec<(usize, ScoredSpot)> = Vec::new();
    for (i, spot) in spots.iter().enumerate() {
        let (d, az) = distance_and_azimuth(spot.position, fix.position);
        if d < min_range_m {
            continue;
        }
        let add = match &fix.level_model {
            Some(_) => joint_information_gain(fix, spot.position, sigma_deg),
            None => bearing_information(spot.position, fix.position, sigma_deg),
        };
        let after = [
            [info[0][0] + add[0][0], info[0][1] + add[0][1]],
            [info[1][0] + add[1][0], info[1][1] + add[1][1]],
        ];
        let det = after[0][0] * after[1][1] - after[0][1] * after[1][0];
        let Some(cov) = inverse(after) else { continue };
        scored.push((
            i,
            ScoredSpot {
                spot: spot.clone(),
                distance_m: d,
                bearing_to_fix_deg: az,
                information_det: det,
                expected: ellipse_from_covariance(cov, k2, fix.ellipse.confidence),
            },
        ));
    }
    scored.sort_by(|a, b| {
        b.1.information_det
            .total_cmp(&a.1.information_det)
            .then(a.0.cmp(&b.0))
    });
    Ok(scored.into_iter().map(|(_, s)| s).collect())
}
