//! From a 2×2 position covariance to the numbers a crew uses: the confidence ellipse
//! (semi-axes k·√λ, major-axis orientation clockwise from true north), the circular error
//! probable and the area. Ellipse scaling follows Torrieri, "Statistical theory of passive
//! location systems", IEEE Trans. AES 20 (1984): k² = χ²₂(p) when the bearing errors' σ is
//! known, k² = 2·F(2, n − 2; p) when it is estimated from the residuals.

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF, FisherSnedecor, StudentsT};

use crate::error::{Error, Result};

/// A confidence ellipse around a fix.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Ellipse {
    /// Semi-major axis, metres.
    pub semi_major_m: f64,
    /// Semi-minor axis, metres.
    pub semi_minor_m: f64,
    /// Direction of the major axis, degrees clockwise from true north, in [0, 180).
    pub orientation_deg: f64,
    /// Probability that the ellipse holds the junction.
    pub confidence: f64,
}

impl Ellipse {
    /// The ellipse's area, m² (π·a·b).
    pub fn area_m2(&self) -> f64 {
        std::f64::consts::PI * self.semi_major_m * self.semi_minor_m
    }

    /// Whether the point `east_m`, `north_m` (relative to the ellipse centre) is inside.
    pub fn contains(&self, east_m: f64, north_m: f64) -> bool {
        let t = self.orientation_deg.to_radians();
        // components along the major (sin t, cos t) and minor (cos t, −sin t) axes
        let u = east_m * t.sin() + north_m * t.cos();
        let v = east_m * t.cos() - north_m * t.sin();
        (u / self.semi_major_m).powi(2) + (v / self.semi_minor_m).powi(2) <= 1.0
    }

    /// `count` vertices (east, north metres from the centre) going counterclockwise.
    pub fn outline(&self, count: usize) -> Vec<(f64, f64)> {
        let t = self.orientation_deg.to_radians();
        let (major, minor) = ((t.sin(), t.cos()), (t.cos(), -t.sin()));
        (0..count)
            .map(|i| {
                // counterclockwise in the east/north plane
                let s = -2.0 * std::f64::consts::PI * i as f64 / count as f64;
                let (a, b) = (self.semi_major_m * s.cos(), self.semi_minor_m * s.sin());
                (a * major.0 + b * minor.0, a * major.1 + b * minor.1)
            })
            .collect()
    }
}

/// The k² that scales the ellipse: χ²₂(p) with σ known, 2·F(2, dof; p) with σ estimated
/// on `dof` degrees of freedom.
pub fn scale_squared(confidence: f64, estimated_dof: Option<f64>) -> Result<f64> {
    let bad = |e: statrs::distribution::FisherSnedecorError| Error::refused(e.to_string());
    match estimated_dof {
        None => Ok(ChiSquared::new(2.0)
            .map_err(|e| Error::refused(e.to_string()))?
            .inverse_cdf(confidence)),
        Some(dof) => Ok(2.0
            * FisherSnedecor::new(2.0, dof)
                .map_err(bad)?
                .inverse_cdf(confidence)),
    }
}

/// The ellipse of covariance `c` (east/north, m²) at the given k².
pub fn ellipse_from_covariance(c: [[f64; 2]; 2], k2: f64, confidence: f64) -> Ellipse {
    let (l1, l2, angle) = eigen(c);
    Ellipse {
        semi_major_m: (k2 * l1).sqrt(),
        semi_minor_m: (k2 * l2.max(0.0)).sqrt(),
        orientation_deg: angle,
        confidence,
    }
}

/// Eigenvalues (larger first) of a symmetric 2×2 covariance in east/north, and the
/// direction of the larger one's eigenvector in degrees clockwise from north, [0, 180).
pub fn eigen(c: [[f64; 2]; 2]) -> (f64, f64, f64) {
    let (a, b, d) = (c[0][0], c[0][1], c[1][1]);
    let mean = 0.5 * (a + d);
    let half_diff = 0.5 * (a - d);
    let root = half_diff.hypot(b);
    let (l1, l2) = (mean + root, mean - root);
    // Eigenvector of l1 as (east, north): (l1 − d, b), since (l1 − a)(l1 − d) = b².
    let (e, n) = if b != 0.0 {
        (l1 - d, b)
    } else if a >= d {
        (1.0, 0.0)
    } else {
        (0.0, 1.0)
    };
    let mut angle = e.atan2(n).to_degrees().rem_euclid(180.0);
    if angle >= 180.0 {
        angle = 0.0;
    }
    (l1, l2, angle)
}

/// The circular error probable: the radius of the circle about the fix that holds the
/// junction with probability 1/2 under a normal error of covariance `c`. Computed from
/// P(R ≤ r) = (1/(2π σ₁σ₂)) ∫₀^{2π} (1 − exp(−r²q(φ)/2)) / q(φ) dφ,
/// q(φ) = cos²φ/σ₁² + sin²φ/σ₂², solved for P = 1/2 by bisection (1.1774·σ for a
/// circular error, the handbook value).
pub fn circular_error_probable(c: [[f64; 2]; 2]) -> f64 {
    circular_error_probable_with(c, None)
}

/// The circular error probable with the same small-sample treatment as the ellipse: when
/// σ is estimated on `estimated_dof` degrees of freedom the error about the fix is
/// bivariate Student t with scale matrix `c` (the law behind the 2·F(2, ν) scaling), and
/// exp(−x/2) above becomes E[exp(−x·W/2ν)] = (1 + x/ν)^(−ν/2), W ~ χ²_ν. For a circular
/// error this gives σ·√(2·F(2, ν; 0.5)), which is the ellipse's rule at p = 1/2.
pub fn circular_error_probable_with(c: [[f64; 2]; 2], estimated_dof: Option<f64>) -> f64 {
    let (l1, l2, _) = eigen(c);
    let (s1, s2) = (l1.max(0.0).sqrt(), l2.max(0.0).sqrt());
    if s1 == 0.0 {
        return 0.0;
    }
    let tail = |x: f64| match estimated_dof {
        None => (-x / 2.0).exp(),
        Some(nu) => (1.0 + x / nu).powf(-nu / 2.0),
    };
    if s2 < 1e-9 * s1 {
        // a line distribution: the median of |error| along it
        let (mut lo, mut hi) = (0.0, 100.0 * s1);
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            // P(|T| ≤ r) for a one-dimensional error: bisection on the two-sided tail
            let p = match estimated_dof {
                None => statrs::function::erf::erf(mid / (s1 * std::f64::consts::SQRT_2)),
                Some(nu) => {
                    let t = StudentsT::new(0.0, 1.0, nu).map(|d| d.cdf(mid / s1));
                    t.map(|x| 2.0 * x - 1.0).unwrap_or(0.5)
                }
            };
            if p < 0.5 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        return 0.5 * (lo + hi);
    }
    let steps = 360;
    let prob = |r: f64| {
        let mut sum = 0.0;
        for i in 0..steps {
            let phi = 2.0 * std::f64::consts::PI * (i as f64 + 0.5) / steps as f64;
            let q = phi.cos().powi(2) / (s1 * s1) + phi.sin().powi(2) / (s2 * s2);
            sum += (1.0 - tail(r * r * q)) / q;
        }
        sum * (2.0 * std::f64::consts::PI / steps as f64) / (2.0 * std::f64::consts::PI * s1 * s2)
    };
    let (mut lo, mut hi) = (0.0, 3.0 * s1);
    while prob(hi) < 0.5 && hi < 1e6 * s1 {
        hi *= 2.0;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if prob(mid) < 0.5 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn orientation_follows_the_major_axis() {
        // larger variance north-south: major axis at 0°
        assert!((eigen([[1.0, 0.0], [0.0, 4.0]]).2 - 0.0).abs() < 1e-9);
        // larger east-west: 90°
        assert!((eigen([[4.0, 0.0], [0.0, 1.0]]).2 - 90.0).abs() < 1e-9);
        // along north-east: 45°
        assert!((eigen([[2.5, 1.5], [1.5, 2.5]]).2 - 45.0).abs() < 1e-9);
        // along north-west: 135°
        assert!((eigen([[2.5, -1.5], [-1.5, 2.5]]).2 - 135.0).abs() < 1e-9);
    }

    #[test]
    fn outline_lies_on_the_ellipse() {
        let e = Ellipse {
            semi_major_m: 30.0,
            semi_minor_m: 12.0,
            orientation_deg: 35.0,
            confidence: 0.95,
        };
        for (x, y) in e.outline(36) {
            let t = 35f64.to_radians();
            let u = x * t.sin() + y * t.cos();
            let v = x * t.cos() - y * t.sin();
            assert!(((u / 30.0).powi(2) + (v / 12.0).powi(2) - 1.0).abs() < 1e-9);
        }
        assert!(e.contains(0.0, 0.0));
        assert!(e.contains(
            29.0 * 35f64.to_radians().sin(),
            29.0 * 35f64.to_radians().cos()
        ));
        assert!(!e.contains(
            13.0 * 35f64.to_radians().cos(),
            -13.0 * 35f64.to_radians().sin()
        ));
    }

    #[test]
    fn cep_of_a_circular_error_is_the_handbook_value() {
        let cep = circular_error_probable([[4.0, 0.0], [0.0, 4.0]]);
        assert!((cep / 2.0 - 1.1774).abs() < 1e-4, "{cep}");
    }

    #[test]
    fn cep_with_estimated_sigma_follows_the_f_rule() {
        // circular: CEP = σ·√(2·F(2, ν; 0.5)); F(2, 6) has the closed-form CDF
        // 1 − (1 + x/3)⁻³, so F(0.5; 2, 6) = 3·(2^(1/3) − 1) = 0.77976
        let cep = circular_error_probable_with([[4.0, 0.0], [0.0, 4.0]], Some(6.0));
        let want = 2.0 * (2.0 * 0.779763f64).sqrt();
        assert!((scale_squared(0.5, Some(6.0)).unwrap() / 2.0 - 0.779763).abs() < 1e-5);
        assert!((cep - want).abs() < 1e-3, "{cep} vs {want}");
        assert!(cep > circular_error_probable([[4.0, 0.0], [0.0, 4.0]]));
    }
}
