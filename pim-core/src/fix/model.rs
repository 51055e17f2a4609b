//! The bearing model: what each observer would read if the junction were at a point, the
//! wrapped residuals against what was read, and their Jacobian. Azimuths come from the
//! geodesic on WGS84 (Karney 2013, via geographiclib-rs), so a fix from exact bearings is
//! exact; the solvers only see residual vectors and Jacobians.

use geographiclib_rs::{Geodesic, InverseGeodesic};

use crate::geo::{bearing_difference_deg, GeoPoint, LocalFrame};

/// One line of bearing as the solvers see it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Line {
    /// Where the bearing was taken.
    pub observer: GeoPoint,
    /// True bearing in degrees, as used (after any front/back choice).
    pub bearing_deg: f64,
}

/// Per-observer geometry towards a candidate point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sight {
    /// Azimuth from the observer to the point, degrees clockwise from true north.
    pub azimuth_deg: f64,
    /// Azimuth of the geodesic at the point (forward), degrees.
    pub azimuth_at_point_deg: f64,
    /// Distance from the observer to the point the residual was taken at, metres.
    pub distance_m: f64,
}

/// Lines of bearing around a local east/north frame.
pub struct BearingModel {
    /// The local frame the solver works in.
    pub frame: LocalFrame,
    /// The lines of bearing.
    pub lines: Vec<Line>,
    geodesic: Geodesic,
}

impl BearingModel {
    /// A bearing model of `lines` in `frame`.
    pub fn new(frame: LocalFrame, lines: Vec<Line>) -> Self {
        BearingModel {
            frame,
            lines,
            geodesic: Geodesic::wgs84(),
        }
    }

    /// What each observer sees of the point `at`.
    pub fn sights(&self, at: GeoPoint) -> Vec<Sight> {
        self.lines
            .iter()
            .map(|l| {
                let (s12, azi1, azi2, _a12): (f64, f64, f64, f64) = self.geodesic.inverse(
                    l.observer.lat_deg,
                    l.observer.lon_deg,
                    at.lat_deg,
                    at.lon_deg,
                );
                Sight {
                    azimuth_deg: azi1,
                    azimuth_at_point_deg: azi2,
                    distance_m: s12,
                }
            })
            .collect()
    }

    /// Residuals (read − predicted, wrapped to ±180°) in radians, and the Jacobian of the
    /// residuals with respect to the point's east and north metres (radians per metre):
    /// moving the point by δ across the line of sight turns the azimuth by δ/d.
    pub fn residuals_and_jacobian(&self, at: GeoPoint) -> (Vec<f64>, Vec<[f64; 2]>) {
        let sights = self.sights(at);
        let mut r = Vec::with_capacity(sights.len());
        let mut j = Vec::with_capacity(sights.len());
        for (line, s) in self.lines.iter().zip(&sights) {
            r.push(bearing_difference_deg(line.bearing_deg, s.azimuth_deg).to_radians());
            let d = s.distance_m.max(1e-3);
            let a = s.azimuth_at_point_deg.to_radians();
            // d(azimuth)/d(east, north) = (cos a, −sin a)/d; the residual moves opposite.
            j.push([-a.cos() / d, a.sin() / d]);
        }
        (r, j)
    }

    /// The geodetic position of local east/north metres.
    pub fn point(&self, east_m: f64, north_m: f64) -> GeoPoint {
        self.frame.to_geo(east_m, north_m)
    }
}
