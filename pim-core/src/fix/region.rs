//! The region a fix claims. When the bearing model is close to linear over the ellipse,
//! the linearised ellipse; otherwise the likelihood-ratio region
//! {x : S(x) − S(x̂) ≤ T} of E. M. L. Beale, "Confidence regions in non-linear
//! estimation", J. R. Statist. Soc. B 22 (1960) 41–88, with S the (robustly) weighted sum
//! of squared standardised bearing residuals and T = k²·c (k² the ellipse's quantile, c the
//! ratio that makes the two regions agree where the model is linear).
//!
//! Linearity is judged the way D. M. Bates and D. G. Watts (*Nonlinear Regression Analysis
//! and Its Applications*, 1988) judge curvature, on the scale of the region itself: along
//! the ellipse's outline, the rise of S predicted by its quadratic approximation is
//! compared with the rise found; where they differ by more than [`LINEAR_TOLERANCE`] in
//! radius the contour is traced instead, ray by ray from the fix.

/// Largest relative difference in radius between the ellipse and the likelihood contour
/// (judged on the ellipse's outline) for which the ellipse is claimed.
pub const LINEAR_TOLERANCE: f64 = 0.10;

/// Rays along which the likelihood contour is traced.
pub const CONTOUR_RAYS: usize = 144;

/// How far the quadratic approximation `q` of a rise misses the rise `g` found, as a
/// fraction of the radius: |√(q/g) − 1|, infinite when nothing rises.
pub fn radius_mismatch(q: f64, g: f64) -> f64 {
    if g.is_nan() || g <= 0.0 || !g.is_finite() {
        return f64::INFINITY;
    }
    ((q / g).sqrt() - 1.0).abs()
}

/// Where a ray from the centre leaves the region, or that it does not within `reach_m`.
pub enum RayEnd {
    /// The contour crosses the ray at this distance, metres.
    At(f64),
    /// The contour does not cross the ray within the search reach.
    Beyond,
}

/// The distance along the unit direction `dir` from `centre` at which `rise` (S minus its
/// value at the centre) first reaches `threshold`, starting the search at `guess_m`.
pub fn ray_exit(
    rise: &impl Fn(f64, f64) -> f64,
    centre: (f64, f64),
    dir: (f64, f64),
    threshold: f64,
    guess_m: f64,
    reach_m: f64,
) -> RayEnd {
    let at = |t: f64| rise(centre.0 + t * dir.0, centre.1 + t * dir.1);
    let mut t = guess_m.max(1e-3);
    let mut g = at(t);
    let (mut lo, mut hi);
    let (mut g_lo, mut g_hi);
    if g < threshold {
        lo = t;
        g_lo = g;
        loop {
            t *= 2.0;
            if t > reach_m {
                // one last look at the limit itself
                let g_end = at(reach_m);
                if g_end < threshold || !g_end.is_finite() {
                    return RayEnd::Beyond;
                }
                t = reach_m;
                g = g_end;
            } else {
                g = at(t);
            }
            if g >= threshold || !g.is_finite() {
                hi = t;
                g_hi = g;
                break;
            }
            lo = t;
            g_lo = g;
        }
    } else {
        hi = t;
        g_hi = g;
        loop {
            t *= 0.5;
            g = at(t);
            if g < threshold || t < 1e-6 {
                lo = t;
                g_lo = g.min(threshold);
                break;
            }
            hi = t;
            g_hi = g;
        }
    }
    // Refine: a rise close to quadratic in t gives t·√(T/g); fall back to bisection.
    for step in 0..60 {
        if hi - lo <= 1e-5 * hi {
            break;
        }
        let from_hi = if g_hi.is_finite() && g_hi > 0.0 {
            hi * (threshold / g_hi).sqrt()
        } else {
            f64::NAN
        };
        let from_lo = if g_lo > 0.0 {
            lo * (threshold / g_lo).sqrt()
        } else {
            f64::NAN
        };
        let guess = if from_lo.is_nan() {
            from_hi
        } else {
            0.5 * (from_hi + from_lo)
        };
        // every third step a bisection, so that a one-sided guess cannot creep
        let next = if step % 3 != 2 && guess > lo && guess < hi {
            guess
        } else {
            0.5 * (lo + hi)
        };
        let g_next = at(next);
        if g_next >= threshold || !g_next.is_finite() {
            hi = next;
            g_hi = g_next;
        } else {
            lo = next;
            g_lo = g_next;
        }
        if g_next.is_finite() && (g_next - threshold).abs() < 1e-4 * threshold {
            return RayEnd::At(next);
        }
    }
    RayEnd::At(0.5 * (lo + hi))
}

/// Unit directions for tracing around a region shaped like the covariance `v`: evenly
/// spaced in the coordinates that make `v` round (v = LLᵀ, direction ∝ L·(cos φ, sin φ)),
/// so a long, thin region gets as many rays along its length as across it; in
/// counterclockwise order.
pub fn directions(v: [[f64; 2]; 2], count: usize) -> Vec<(f64, f64)> {
    let l11 = v[0][0].max(0.0).sqrt();
    let (l21, l22) = if l11 > 0.0 {
        let l21 = v[1][0] / l11;
        (l21, (v[1][1] - l21 * l21).max(0.0).sqrt())
    } else {
        (0.0, v[1][1].max(0.0).sqrt())
    };
    let round = !(l11 > 0.0 && l22 > 0.0);
    (0..count)
        .map(|j| {
            let a = 2.0 * std::f64::consts::PI * j as f64 / count as f64;
            let (x, y) = if round {
                (a.cos(), a.sin())
            } else {
                (l11 * a.cos(), l21 * a.cos() + l22 * a.sin())
            };
            let norm = x.hypot(y);
            (x / norm, y / norm)
        })
        .collect()
}

/// The contour {rise = threshold} around `centre`, traced along the unit directions
/// `dirs`; `guess` gives a starting distance for each direction (the ellipse's radius).
/// `Err((towards_deg, reach_m))` when some ray finds no end within `reach_m`.
pub fn trace_contour(
    rise: impl Fn(f64, f64) -> f64,
    centre: (f64, f64),
    threshold: f64,
    dirs: &[(f64, f64)],
    guess: impl Fn((f64, f64)) -> f64,
    reach_m: f64,
) -> Result<Vec<(f64, f64)>, (f64, f64)> {
    let mut ring = Vec::with_capacity(dirs.len());
    for &dir in dirs {
        match ray_exit(&rise, centre, dir, threshold, guess(dir), reach_m) {
            RayEnd::At(t) => ring.push((centre.0 + t * dir.0, centre.1 + t * dir.1)),
            RayEnd::Beyond => {
                let towards = dir.0.atan2(dir.1).to_degrees().rem_euclid(360.0);
                return Err((towards, reach_m));
            }
        }
    }
    Ok(ring)
}

/// The area of the polygon `ring` (east, north; closed or not), m², by the shoelace rule.
pub fn ring_area(ring: &[(f64, f64)]) -> f64 {
    let n = ring.len();
    let mut twice = 0.0;
    for i in 0..n {
        let (a, b) = (ring[i], ring[(i + 1) % n]);
        twice += a.0 * b.1 - b.0 * a.1;
    }
    0.5 * twice.abs()
}

/// Whether `p` lies inside the polygon `ring` (east, north; closed or not), by ray
/// casting.
pub fn ring_contains(ring: &[(f64, f64)], p: (f64, f64)) -> bool {
    let n = ring.len();
    if n < 3 {
        return false;
    }
    let mut inside = false;
    let mut j = n - 1;
    for i in 0..n {
        let (a, b) = (ring[i], ring[j]);
        if (a.1 > p.1) != (b.1 > p.1) && p.0 < (b.0 - a.0) * (p.1 - a.1) / (b.1 - a.1) + a.0 {
            inside = !inside;
        }
        j = i;
    }
    inside
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_quadratic_rise_traces_its_ellipse() {
        // rise = (Δe/30)² + (Δn/10)²: the contour at 4 is the ellipse of semi-axes 60, 20
        let rise = |e: f64, n: f64| ((e - 5.0) / 30.0).powi(2) + ((n + 3.0) / 10.0).powi(2);
        let dirs = directions([[900.0, 0.0], [0.0, 100.0]], CONTOUR_RAYS);
        let ring = trace_contour(rise, (5.0, -3.0), 4.0, &dirs, |_| 7.0, 1e5).unwrap();
        for &(e, n) in &ring {
            let v = ((e - 5.0) / 60.0).powi(2) + ((n + 3.0) / 20.0).powi(2);
            assert!((v - 1.0).abs() < 1e-3, "{v}");
        }
        assert!(ring_contains(&ring, (5.0, -3.0)));
        assert!(ring_contains(&ring, (60.0, -3.0)));
        assert!(!ring_contains(&ring, (66.0, -3.0)));
    }

    #[test]
    fn an_open_valley_is_unbounded() {
        // rise grows across north only: the region runs on along east
        let rise = |_e: f64, n: f64| n * n;
        let dirs = directions([[1.0, 0.0], [0.0, 1.0]], 16);
        assert!(trace_contour(rise, (0.0, 0.0), 1.0, &dirs, |_| 1.0, 1e4).is_err());
    }
}
