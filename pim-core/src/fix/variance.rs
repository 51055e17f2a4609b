//! What each reading's error is made of, beyond the antenna's own scatter.
//!
//! - **Position error.** A spot placed by a phone or a handheld receiver is off by a few
//!   metres; seen from a junction d metres away that turns the line by about σ_p/d, so a
//!   reading's variance is σ_b² + (σ_p/d)² (first order), d taken at the fix found. The
//!   W3C Geolocation API reports `accuracy` as the 95 % radius of the position: for a
//!   circular normal error that radius is σ_p·√χ²₂(0.95) = 2.448·σ_p.
//! - **Readings at one spot.** Readings taken within [`SPOT_RADIUS_M`] of each other share
//!   the spot's error (its multipath, its position error): a one-way random-effects model,
//!   σ_W within a spot and σ_B between spots, estimated by the method of moments (the
//!   ANOVA estimator; REML, H. D. Patterson and R. Thompson, "Recovery of inter-block
//!   information when block sizes are unequal", Biometrika 58 (1971) 545–554, agrees with
//!   it for balanced walks). A reading of a spot of m readings then counts with variance
//!   σ_W² + m·σ_B², so that the m together carry the information of one spot mean,
//!   (σ_W²/m + σ_B²)⁻¹: three readings at one spot count as about one.
//! - **Readings that lean the same way along the walk.** The lag-one autocorrelation of
//!   the standardised residuals in walk order, tested one-sided against its exact moments
//!   for the fit ([`serial_test_exact`], Durbin & Watson 1950), or on walks of more than
//!   [`SERIAL_MATRIX_MAX`] with the Ljung–Box statistic at one lag (G. M. Ljung and
//!   G. E. P. Box, "On a measure of lack of fit in time series models", Biometrika 65
//!   (1978) 297–303), Q = n(n + 2)ρ̂²/(n − 1) against χ²₁; when it rejects, the region is widened for an AR(1) error: its autocorrelation
//!   found by the method of moments on the fit's own residuals (the ρ whose expected
//!   lag-one ratio tr(S·MRM)/tr(MRM), M the fit's residual maker, equals the one seen),
//!   the covariance by the sandwich (XᵀX)⁻¹XᵀRX(XᵀX)⁻¹, and an estimated σ by
//!   (n − p)/tr(MRM), the share of an AR(1) error's variance the fit leaves in its
//!   residuals.

use nalgebra::DMatrix;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Readings taken closer together than this, metres, are one spot: about the spread of a
/// crew turning an antenna where it stands (common practice).
pub const SPOT_RADIUS_M: f64 = 3.0;

/// The position accuracy taken when neither the log nor the options state one, metres
/// (95 % radius): a phone or handheld receiver under open sky is usually within about
/// 5 m (GPS.gov, from memory), two to three times that under trees or beside buildings,
/// where walks round a site often go (common practice); 12 m is 5 m rms on each axis.
pub const DEFAULT_POSITION_ACCURACY_M: f64 = 12.0;

/// √χ²₂(0.95): the 95 % radius of a circular normal error over its σ per axis.
pub const RADIUS_95_OVER_SIGMA: f64 = 2.447_746_830_680_816;

/// Level of the one-sided test for readings that lean the same way along the walk.
pub const SERIAL_TEST_LEVEL: f64 = 0.10;

/// The spot each reading belongs to (single linkage within `radius_m`, spots numbered in
/// walk order of their first reading), and the number of spots.
pub fn spot_groups(points: &[(f64, f64)], radius_m: f64) -> (Vec<usize>, usize) {
    let n = points.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    // a grid of cells the size of the radius: only neighbouring cells are looked at, so
    // the pairs stay few on long walks
    let cell = |p: (f64, f64)| {
        (
            (p.0 / radius_m).floor() as i64,
            (p.1 / radius_m).floor() as i64,
        )
    };
    let mut grid: std::collections::HashMap<(i64, i64), Vec<usize>> =
        std::collections::HashMap::new();
    for (i, p) in points.iter().enumerate() {
        grid.entry(cell(*p)).or_default().push(i);
    }
    for (i, p) in points.iter().enumerate() {
        let (cx, cy) = cell(*p);
        for dx in -1..=1 {
            for dy in -1..=1 {
                let Some(near) = grid.get(&(cx + dx, cy + dy)) else {
                    continue;
                };
                for &j in near {
                    if j <= i {
                        continue;
                    }
                    let d = (points[j].0 - p.0).hypot(points[j].1 - p.1);
                    if d <= radius_m {
                        let (a, b) = (root(&mut parent, i), root(&mut parent, j));
                        if a != b {
                            parent[a.max(b)] = a.min(b);
                        }
                    }
                }
            }
        }
    }
    let mut id = vec![usize::MAX; n];
    let mut count = 0;
    let group = (0..n)
        .map(|i| {
            let r = root(&mut parent, i);
            if id[r] == usize::MAX {
                id[r] = count;
                count += 1;
            }
            id[r]
        })
        .collect();
    (group, count)
}

/// The variance components found for a walk with repeated spots, radians².
#[derive(Clone, Debug, PartialEq)]
pub struct Components {
    /// Within a spot (σ_W²).
    pub within: f64,
    /// Between spots beyond their position error (σ_B²).
    pub between: f64,
    /// Degrees of freedom of the variance the region rests on (`None`: known).
    pub dof: Option<f64>,
}

/// Method-of-moments variance components from residuals `r` (radians) at a fix, spots
/// `group` (of `spots`), each reading's position variance `p2` (rad²), the within-spot
/// variance when stated, and the parameters fitted besides position (`extra`).
/// `None` when no spot holds two readings.
pub fn components(
    r: &[f64],
    group: &[usize],
    spots: usize,
    p2: &[f64],
    stated_within: Option<f64>,
    extra: usize,
) -> Option<Components> {
    let n = r.len();
    if spots == n {
        return None;
    }
    let mut m = vec![0.0; spots];
    let mut sum = vec![0.0; spots];
    let mut pos = vec![0.0; spots];
    for ((g, r), p) in group.iter().zip(r).zip(p2) {
        m[*g] += 1.0;
        sum[*g] += r;
        pos[*g] += p;
    }
    let mean: Vec<f64> = sum.iter().zip(&m).map(|(s, m)| s / m).collect();
    let ssw: f64 = (0..n).map(|i| (r[i] - mean[group[i]]).powi(2)).sum();
    let dfw = (n - spots) as f64;
    let pooled_dof = n as f64 - 2.0 - extra as f64;
    let (within, within_known) = match stated_within {
        Some(s) => (s, true),
        None => ((ssw / dfw).max(0.0), false),
    };
    let dfb = spots as f64 - 2.0 - extra as f64;
    if dfb < 1.0 {
        // too few spots to tell a spot's error from the position: none assumed
        return Some(Components {
            within,
            between: 0.0,
            dof: if within_known {
                None
            } else {
                Some(dfw.max(1.0))
            },
        });
    }
    // E[Σ mⱼ r̄ⱼ²] ≈ (dfb/k)·Σ (σ_W² + mⱼ(σ_B² + p̄ⱼ²))
    let ssb: f64 = mean.iter().zip(&m).map(|(r, m)| m * r * r).sum();
    let spots_f = spots as f64;
    let known: f64 = (0..spots).map(|j| within + pos[j]).sum();
    let between = ((ssb * spots_f / dfb - known) / n as f64).max(0.0);
    // Whether or not a spot error is found, the spots' scatter is what the region rests
    // on: a spot error too small to show in a few spots is not shown to be absent.
    let dof = Some(dfb);
    let _ = pooled_dof;
    let within = if between > 0.0 || within_known {
        within
    } else {
        // no spot error found: the within and between scatter are one, pooled
        ((ssw + ssb) / pooled_dof.max(1.0)).max(within)
    };
    Some(Components {
        within,
        between,
        dof,
    })
}

/// The variance of each reading, rad²: σ_W² + mⱼ(σ_B² + p̄ⱼ²) for a reading of spot j of
/// mⱼ readings with mean position variance p̄ⱼ².
pub fn reading_variances(c: &Components, group: &[usize], spots: usize, p2: &[f64]) -> Vec<f64> {
    let mut m = vec![0.0; spots];
    let mut pos = vec![0.0; spots];
    for (g, p) in group.iter().zip(p2) {
        m[*g] += 1.0;
        pos[*g] += p;
    }
    group
        .iter()
        .map(|g| c.within + m[*g] * (c.between + pos[*g] / m[*g]))
        .collect()
}

/// The lag-one autocorrelation of `u` in order, and whether the one-sided Ljung–Box test
/// at one lag rejects independence at [`SERIAL_TEST_LEVEL`] for positive correlation.
pub fn serial_correlation(u: &[f64]) -> (f64, bool) {
    let n = u.len();
    if n < 5 {
        return (0.0, false);
    }
    let mean = u.iter().sum::<f64>() / n as f64;
    let den: f64 = u.iter().map(|x| (x - mean).powi(2)).sum();
    if den <= 0.0 {
        return (0.0, false);
    }
    let num: f64 = u.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).sum();
    let rho = num / den;
    let nf = n as f64;
    let q = nf * (nf + 2.0) * rho * rho / (nf - 1.0);
    let bound = ChiSquared::new(1.0)
        .map(|c| c.inverse_cdf(1.0 - 2.0 * SERIAL_TEST_LEVEL))
        .unwrap_or(f64::INFINITY);
    (rho, rho > 0.0 && q > bound)
}

/// Largest number of readings (or spots) for which the AR(1) widening works on the fit's
/// full residual maker; longer walks use the bias-corrected ρ̂ and the sandwich alone.
pub const SERIAL_MATRIX_MAX: usize = 120;

/// The AR(1) autocorrelation and the factor the position covariance is widened by, for
/// standardised residuals `u` in walk order of a fit whose columns are `x` (one row per
/// reading or spot, over its σ; the position's two columns first); `sigma_estimated`
/// when the scale was taken from these residuals.
pub fn serial_widening(x: &DMatrix<f64>, u: &[f64], sigma_estimated: bool) -> (f64, f64) {
    let n = u.len();
    let p = x.ncols();
    let Some(xtx_inv) = (x.transpose() * x).try_inverse() else {
        return (0.0, 1.0);
    };
    let h = x * &xtx_inv * x.transpose();
    let m = DMatrix::<f64>::identity(n, n) - h;
    let r_of = |rho: f64| DMatrix::from_fn(n, n, |i, j| rho.powi((i as i32 - j as i32).abs()));
    let s = DMatrix::from_fn(n, n, |i, j| if i.abs_diff(j) == 1 { 0.5 } else { 0.0 });
    let ratio = |rho: f64| {
        let mrm = &m * r_of(rho) * &m;
        (&s * &mrm).trace() / mrm.trace()
    };
    let den: f64 = u.iter().map(|x| x * x).sum();
    if den <= 0.0 {
        return (0.0, 1.0);
    }
    let seen = u.windows(2).map(|w| w[0] * w[1]).sum::<f64>() / den;
    let (mut lo, mut hi) = (0.0, 0.95);
    if ratio(lo) >= seen {
        return (0.0, 1.0);
    }
    if ratio(hi) > seen {
        for _ in 0..30 {
            let mid = 0.5 * (lo + hi);
            if ratio(mid) < seen {
                lo = mid;
            } else {
                hi = mid;
            }
        }
    }
    // one standard error of a lag-one autocorrelation, 1/√n (Bartlett; from memory), above
    // the estimate: a region widened by a ρ found too small would still be too small
    let rho = (0.5 * (lo + hi) + 1.0 / (n as f64).sqrt()).min(0.95);
    let r = r_of(rho);
    let q = &xtx_inv * x.transpose() * &r * x * &xtx_inv;
    let pos = |a: &DMatrix<f64>| [[a[(0, 0)], a[(0, 1)]], [a[(1, 0)], a[(1, 1)]]];
    let (pm, qm) = (pos(&xtx_inv), pos(&q));
    let det = pm[0][0] * pm[1][1] - pm[0][1] * pm[1][0];
    if det.is_nan() || det <= 0.0 {
        return (rho, 1.0);
    }
    let pi = [
        [pm[1][1] / det, -pm[0][1] / det],
        [-pm[1][0] / det, pm[0][0] / det],
    ];
    let g = mul(pi, qm);
    let tr = g[0][0] + g[1][1];
    let dg = g[0][0] * g[1][1] - g[0][1] * g[1][0];
    let mut widen = 0.5 * tr + (0.25 * tr * tr - dg).max(0.0).sqrt();
    if sigma_estimated {
        let left = (&m * &r * &m).trace();
        if left > 0.0 {
            widen *= (n - p) as f64 / left;
        }
    }
    (rho, widen.max(1.0))
}

/// The one-sided test for positive lag-one autocorrelation of the residuals `u` of a fit
/// with columns `x`, at [`SERIAL_TEST_LEVEL`]: the ratio r = uᵀSu/uᵀu against its exact
/// mean and variance under independent normal errors for this very fit (J. Durbin and
/// G. S. Watson, "Testing for serial correlation in least squares regression I",
/// Biometrika 37 (1950) 409–428: with M the residual maker of rank ν and A = MS,
/// E r = tr A/ν and var r = 2(ν·tr A² − (tr A)²)/(ν²(ν + 2))), taken as normal. A fit
/// takes up part of a slow error and leaves its residuals leaning the other way, so the
/// plain autocorrelation's zero is the wrong mark.
pub fn serial_test_exact(x: &DMatrix<f64>, u: &[f64]) -> bool {
    let n = u.len();
    let p = x.ncols();
    if n < p + 3 {
        return false;
    }
    let Some(xtx_inv) = (x.transpose() * x).try_inverse() else {
        return false;
    };
    let m = DMatrix::<f64>::identity(n, n) - x * &xtx_inv * x.transpose();
    let s = DMatrix::from_fn(n, n, |i, j| if i.abs_diff(j) == 1 { 0.5 } else { 0.0 });
    let a = &m * &s;
    let nu = (n - p) as f64;
    let tr = a.trace();
    let tr2 = (&a * &a).trace();
    let mean = tr / nu;
    let var = 2.0 * (nu * tr2 - tr * tr) / (nu * nu * (nu + 2.0));
    let den: f64 = u.iter().map(|v| v * v).sum();
    if !(var > 0.0 && den > 0.0) {
        return false;
    }
    let r = u.windows(2).map(|w| w[0] * w[1]).sum::<f64>() / den;
    let z = statrs::distribution::Normal::new(0.0, 1.0)
        .map(|d| d.inverse_cdf(1.0 - SERIAL_TEST_LEVEL))
        .unwrap_or(f64::INFINITY);
    (r - mean) / var.sqrt() > z
}

/// The autocorrelation to widen by: ρ̂ corrected for its small-sample bias (1 + 3ρ)/n,
/// at most 0.95.
pub fn corrected_rho(rho: f64, n: usize) -> f64 {
    (rho + (1.0 + 3.0 * rho) / n as f64).clamp(0.0, 0.95)
}

/// The longest run of residuals of one sign in walk order: first and last index.
pub fn longest_run(u: &[f64]) -> (usize, usize) {
    let mut best = (0, 0);
    let mut start = 0;
    for i in 1..=u.len() {
        if i == u.len() || (u[i] > 0.0) != (u[start] > 0.0) {
            if i - 1 - start > best.1 - best.0 {
                best = (start, i - 1);
            }
            start = i;
        }
    }
    best
}

/// How much an AR(1) error of autocorrelation `rho` along the rows of `a` (each row the
/// Jacobian over σ of one reading or spot, in walk order) widens the position covariance
/// of a weighted least-squares fix: the largest eigenvalue of (AᵀA)·V_AR, V_AR the
/// sandwich (AᵀA)⁻¹AᵀRA(AᵀA)⁻¹ with R = ρ^|i−j|; at least 1.
pub fn ar1_widening(a: &[[f64; 2]], rho: f64) -> f64 {
    let mut h = [[0.0; 2]; 2];
    let mut b = [[0.0; 2]; 2];
    for row in a {
        for p in 0..2 {
            for q in 0..2 {
                h[p][q] += row[p] * row[q];
            }
        }
    }
    // Σᵢⱼ ρ^|i−j| aᵢaⱼᵀ by the recursion sᵢ = aᵢ + ρ·sᵢ₋₁
    let mut s = [0.0; 2];
    for row in a {
        s = [row[0] + rho * s[0], row[1] + rho * s[1]];
        for p in 0..2 {
            for q in 0..2 {
                // aᵢ·(Σ_{j≤i} ρ^{i−j} aⱼ)ᵀ counted both ways less the diagonal once
                b[p][q] += row[p] * s[q] + s[p] * row[q] - row[p] * row[q];
            }
        }
    }
    let det = h[0][0] * h[1][1] - h[0][1] * h[1][0];
    if det.abs() <= 0.0 || !det.is_finite() {
        return 1.0;
    }
    let hi = [
        [h[1][1] / det, -h[0][1] / det],
        [-h[1][0] / det, h[0][0] / det],
    ];
    // eigenvalues of H⁻¹B (similar to H·V_AR)
    let m = mul(hi, b);
    let tr = m[0][0] + m[1][1];
    let dm = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let disc = (0.25 * tr * tr - dm).max(0.0).sqrt();
    (0.5 * tr + disc).max(1.0)
}

fn mul(x: [[f64; 2]; 2], y: [[f64; 2]; 2]) -> [[f64; 2]; 2] {
    let mut m = [[0.0; 2]; 2];
    for p in 0..2 {
        for q in 0..2 {
            m[p][q] = x[p][0] * y[0][q] + x[p][1] * y[1][q];
        }
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spots_join_readings_within_the_radius() {
        let (g, k) = spot_groups(
            &[(0.0, 0.0), (1.0, 1.0), (50.0, 0.0), (2.0, 2.5), (51.0, 0.5)],
            3.0,
        );
        assert_eq!(k, 2);
        assert_eq!(g, vec![0, 0, 1, 0, 1]);
    }

    #[test]
    fn independent_rows_are_not_widened() {
        let a = [[1.0, 0.0], [0.0, 1.0], [0.7, 0.7], [0.7, -0.7]];
        assert!((ar1_widening(&a, 0.0) - 1.0).abs() < 1e-12);
        assert!(ar1_widening(&a, 0.8) > 1.0);
    }

    #[test]
    fn runs_and_correlation() {
        assert_eq!(longest_run(&[1.0, -1.0, 2.0, 3.0, 1.0, -2.0]), (2, 4));
        let (rho, flagged) = serial_correlation(&[1.0, 1.1, 0.9, 1.2, -1.0, -0.8, -1.1, -0.9]);
        assert!(rho > 0.4 && flagged, "{rho}");
    }
}
