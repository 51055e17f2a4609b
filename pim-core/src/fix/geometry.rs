//! Whether a set of bearings can fix anything, and how well: lines that are nearly
//! parallel, lines that meet only behind the observers, a junction near the line the
//! observers walked. Refusals are errors of class `Refused`; weaker cases become warnings.

use super::model::Sight;
use super::{Ellipse, FixRefusal, FixWarning, Reading, ReadingFit};
use crate::geo::{bearing_difference_deg, distance_m};

type Result<T> = std::result::Result<T, FixRefusal>;

/// Below this spread of directions (degrees, lines taken modulo 180°) the lines are
/// parallel to working precision and fix nothing. Wider but still narrow spreads are
/// left to the likelihood region, which is refused only when it does not close.
pub const REFUSE_SPREAD_DEG: f64 = 0.01;
/// Below this spread the fix is weakly observed and said so.
pub const WARN_SPREAD_DEG: f64 = 10.0;

/// The spread of undirected line directions: 180° minus the largest gap between them on
/// the half circle.
pub fn spread_deg(azimuths_deg: impl Iterator<Item = f64>) -> f64 {
    let mut a: Vec<f64> = azimuths_deg.map(|x| x.rem_euclid(180.0)).collect();
    if a.len() < 2 {
        return 0.0;
    }
    a.sort_by(f64::total_cmp);
    let mut largest_gap = a[0] + 180.0 - a[a.len() - 1];
    for w in a.windows(2) {
        largest_gap = largest_gap.max(w[1] - w[0]);
    }
    180.0 - largest_gap
}

/// Before solving: readings from more than one spot, bearings not all parallel.
pub fn check_spread_of_bearings(readings: &[Reading]) -> Result<()> {
    let first = readings[0].observer;
    if readings.iter().all(|r| distance_m(first, r.observer) < 1.0) {
        return Err(FixRefusal::SameSpot);
    }
    let spread = spread_deg(readings.iter().map(|r| r.bearing_deg));
    if spread < REFUSE_SPREAD_DEG {
        return Err(FixRefusal::ParallelBearings { spread_deg: spread });
    }
    Ok(())
}

fn in_front(point: (f64, f64), from: (f64, f64), bearing_deg: f64) -> bool {
    let to = (point.0 - from.0).atan2(point.1 - from.1).to_degrees();
    bearing_difference_deg(bearing_deg, to).abs() < 90.0
}

/// A starting point in front of the observers: the least-squares intersection when most
/// lines point at it, else the crossing of two rays that most lines point at. Refuses when
/// no two rays cross in front of their observers.
pub fn forward_start(
    points: &[(f64, f64)],
    bearings_deg: &[f64],
    ls: (f64, f64),
) -> Result<(f64, f64)> {
    let n = points.len();
    let count_front = |p: (f64, f64)| {
        (0..n)
            .filter(|&i| in_front(p, points[i], bearings_deg[i]))
            .count()
    };
    let need = 2.max(n.div_ceil(2));
    if count_front(ls) >= need {
        return Ok(ls);
    }
    let stride = if n > 60 { n / 30 } else { 1 };
    let mut best: Option<((f64, f64), usize)> = None;
    for i in (0..n).step_by(stride) {
        for j in (i + 1..n).step_by(stride) {
            let (ti, tj) = (bearings_deg[i].to_radians(), bearings_deg[j].to_radians());
            let (di, dj) = ((ti.sin(), ti.cos()), (tj.sin(), tj.cos()));
            let den = di.0 * dj.1 - di.1 * dj.0;
            if den.abs() < 1e-9 {
                continue;
            }
            let (dx, dy) = (points[j].0 - points[i].0, points[j].1 - points[i].1);
            let si = (dx * dj.1 - dy * dj.0) / den;
            let sj = (dx * di.1 - dy * di.0) / den;
            if si <= 0.0 || sj <= 0.0 {
                continue;
            }
            let p = (points[i].0 + si * di.0, points[i].1 + si * di.1);
            let c = count_front(p);
            if best.is_none_or(|(_, bc)| c > bc) {
                best = Some((p, c));
            }
        }
    }
    match best {
        Some((p, _)) => Ok(p),
        None => Err(FixRefusal::Diverging),
    }
}

/// Every crossing of two lines of bearing that lies in front of both observers.
pub fn forward_crossings(points: &[(f64, f64)], bearings_deg: &[f64]) -> Vec<(f64, f64)> {
    let n = points.len();
    let mut out = Vec::new();
    for i in 0..n {
        for j in i + 1..n {
            let (ti, tj) = (bearings_deg[i].to_radians(), bearings_deg[j].to_radians());
            let (di, dj) = ((ti.sin(), ti.cos()), (tj.sin(), tj.cos()));
            let den = di.0 * dj.1 - di.1 * dj.0;
            if den.abs() < 1e-12 {
                continue;
            }
            let (dx, dy) = (points[j].0 - points[i].0, points[j].1 - points[i].1);
            let si = (dx * dj.1 - dy * dj.0) / den;
            let sj = (dx * di.1 - dy * di.0) / den;
            if si > 0.0 && sj > 0.0 {
                out.push((points[i].0 + si * di.0, points[i].1 + si * di.1));
            }
        }
    }
    out
}

/// After solving: lines pointing away from the fix, the spread of the lines at the fix,
/// and a fix on the line the observers walked.
pub fn check_solution(
    readings: &[Reading],
    sights: &[Sight],
    residuals_rad: &[f64],
    warnings: &mut Vec<FixWarning>,
) -> Result<()> {
    let behind: Vec<u64> = readings
        .iter()
        .zip(residuals_rad)
        .filter(|(_, r)| r.to_degrees().abs() > 90.0)
        .map(|(rd, _)| rd.line)
        .collect();
    if readings.len() - behind.len() < 2 {
        return Err(FixRefusal::Diverging);
    }
    if !behind.is_empty() {
        warnings.push(FixWarning::BehindObservers { lines: behind });
    }
    let spread = spread_deg(sights.iter().map(|s| s.azimuth_at_point_deg));
    if spread < REFUSE_SPREAD_DEG {
        return Err(FixRefusal::ArriveParallel { spread_deg: spread });
    }
    if spread < WARN_SPREAD_DEG {
        warnings.push(FixWarning::WeakCrossing { spread_deg: spread });
    }
    // Observers along one straight path with the fix on its extension.
    let n = sights.len() as f64;
    let (me, mn) = sights.iter().fold((0.0, 0.0), |(e, nn), s| {
        let a = (s.azimuth_at_point_deg + 180.0).to_radians();
        (
            e + s.distance_m * a.sin() / n,
            nn + s.distance_m * a.cos() / n,
        )
    });
    let pts: Vec<(f64, f64)> = sights
        .iter()
        .map(|s| {
            let a = (s.azimuth_at_point_deg + 180.0).to_radians();
            (s.distance_m * a.sin() - me, s.distance_m * a.cos() - mn)
        })
        .collect();
    let (sxx, sxy, syy) = pts.iter().fold((0.0, 0.0, 0.0), |(a, b, c), p| {
        (a + p.0 * p.0, b + p.0 * p.1, c + p.1 * p.1)
    });
    let mean = 0.5 * (sxx + syy);
    let root = (0.5 * (sxx - syy)).hypot(sxy);
    let (along, across) = ((mean + root).max(0.0).sqrt(), (mean - root).max(0.0).sqrt());
    if along > 0.0 && across < 0.05 * along {
        // direction of the path, and the fix's distance from its line
        let (ux, uy) = if sxy != 0.0 {
            let v = (mean + root - syy, sxy);
            let l = v.0.hypot(v.1);
            (v.0 / l, v.1 / l)
        } else if sxx >= syy {
            (1.0, 0.0)
        } else {
            (0.0, 1.0)
        };
        // the fix is at (−me, −mn) relative to the observers' centroid
        let off = (-me * uy + mn * ux).abs();
        let dist = me.hypot(mn);
        if off < 0.2 * dist.max(1.0) {
            warnings.push(FixWarning::OnWalkedLine);
        }
    }
    Ok(())
}

/// Warnings on the shape and size of the ellipse.
pub fn check_ellipse(e: &Ellipse, fits: &[ReadingFit], warnings: &mut Vec<FixWarning>) {
    if e.semi_minor_m > 0.0 && e.semi_major_m / e.semi_minor_m > 10.0 {
        warnings.push(FixWarning::ElongatedEllipse {
            ratio: e.semi_major_m / e.semi_minor_m,
            along_deg: e.orientation_deg,
        });
    }
    let nearest = fits
        .iter()
        .map(|f| f.distance_m)
        .fold(f64::INFINITY, f64::min);
    if e.semi_major_m > nearest {
        warnings.push(FixWarning::EllipseBeyondNearestObserver {
            semi_major_m: e.semi_major_m,
            nearest_m: nearest,
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spread_treats_lines_as_undirected() {
        assert!((spread_deg([10.0, 190.0].into_iter()) - 0.0).abs() < 1e-9);
        assert!((spread_deg([0.0, 90.0].into_iter()) - 90.0).abs() < 1e-9);
        assert!((spread_deg([175.0, 5.0].into_iter()) - 10.0).abs() < 1e-9);
    }
}
