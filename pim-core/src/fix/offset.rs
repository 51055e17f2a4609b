//! A common offset on every bearing (an antenna mounted askew, a compass off by a few
//! degrees), estimated as a nuisance parameter beside the position: the residual of
//! reading i becomes bᵢ − δ − azᵢ(x). With observers on every side of the junction the
//! offset turns the lines about the junction and is told apart from the position; from
//! one side it is not (a turn looks like a shift). The offset is taken when the walk
//! surrounds the junction (no gap of 180° or more in the observers' directions seen from
//! the pilot fix) and the pilot's Gauss–Newton step in δ passes a two-sided Wald test at
//! 5 % (|δ̂|/se > 1.96), or whenever asked and observable. Its cost to the position is the
//! marginal covariance of the 3-parameter Fisher information: the position block of its
//! inverse against the 2-parameter inverse.

use nalgebra::{Matrix2, Matrix3, Vector3};

use super::model::Sight;
use super::Staged;

/// The Wald statistic the pilot's offset must pass to be estimated by default (two-sided
/// 5 %).
pub const AUTO_TEST_Z: f64 = 1.959_963_984_540_054;

/// An offset step at a fix.
#[derive(Clone, Copy, Debug)]
pub(crate) struct OffsetStep {
    /// The Gauss–Newton step in δ from the bearings as used, radians.
    pub step_rad: f64,
    /// Its standard error, radians.
    pub se_rad: f64,
    /// How much estimating δ widens the position covariance (largest eigenvalue of the
    /// marginal over the conditional), at least 1.
    pub widen: f64,
}

/// Whether the observers stand on every side of the junction: seen from it, no gap
/// between their directions reaches 180°.
pub fn surrounds(sights: &[Sight]) -> bool {
    let mut az: Vec<f64> = sights
        .iter()
        .map(|s| (s.azimuth_at_point_deg + 180.0).rem_euclid(360.0))
        .collect();
    if az.len() < 3 {
        return false;
    }
    az.sort_by(f64::total_cmp);
    let wrap = az[0] + 360.0 - az[az.len() - 1];
    let gap = az.windows(2).map(|w| w[1] - w[0]).fold(wrap, f64::max);
    gap < 180.0
}

/// The offset's Gauss–Newton step at a pass's fit, with its standard error and its cost
/// to the position; `None` when the three parameters are not all observed.
pub(crate) fn estimate(staged: &Staged) -> Option<OffsetStep> {
    let f = &staged.fitted;
    let (r, j) = staged
        .model
        .residuals_and_jacobian(staged.model.point(f.at.0, f.at.1));
    let s = if f.known { 1.0 } else { f.scale };
    let mut info = Matrix3::zeros();
    let mut grad = Vector3::zeros();
    for i in 0..r.len() {
        if staged.set_aside[i] {
            continue;
        }
        let w = f.weights[i] / (staged.sigma_rad[i] * s).powi(2);
        let row = Vector3::new(j[i][0], j[i][1], -1.0);
        info += w * row * row.transpose();
        grad += w * r[i] * row;
    }
    let inv = info.try_inverse()?;
    let step = -(inv * grad);
    let se = inv[(2, 2)];
    if !(se > 0.0 && se.is_finite()) {
        return None;
    }
    let pos = Matrix2::new(info[(0, 0)], info[(0, 1)], info[(1, 0)], info[(1, 1)]);
    let marginal = Matrix2::new(inv[(0, 0)], inv[(0, 1)], inv[(1, 0)], inv[(1, 1)]);
    let m = pos * marginal;
    let (tr, det) = (m.trace(), m.determinant());
    let widen = (0.5 * tr + (0.25 * tr * tr - det).max(0.0).sqrt()).max(1.0);
    Some(OffsetStep {
        step_rad: step[2],
        se_rad: se.sqrt(),
        widen,
    })
}
