//! The bearing model: what each observer would read if the junction were at a point, the
//! wrapped residuals against what was read, and their Jacobian. Azimuths come from the
//! geodesic on WGS84 (Karney 2013, via geographiclib-rs), so a fix from exact bearings is
//! exact; the solvers only see residual vectors and Jacobians.
//!
//! One evaluation is a geodesic per reading, the whole cost of a fix with many readings:
//! the last few points evaluated are kept, so a point the solver, the scale, the outlier
//! rule, the covariance and the region all look at costs one pass. The region's shape
//! away from the fix is judged on [`PlaneModel`], the same lines on the plane of the
//! local frame, exact at the fix and without a geodesic per reading.

use std::sync::{Arc, Mutex};

use geographiclib_rs::{Geodesic, InverseGeodesic};

use crate::geo::{bearing_difference_deg, GeoPoint, LocalFrame};

/// One line of bearing as the solvers see it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Line {
    /// Where the bearing was taken.
    pub observer: GeoPoint,
    /// True bearing in degrees, as used (after any front/back choice).
    pub bearing_deg: f64,
    /// The observer's east and north metres in the model's local frame.
    pub observer_local_m: (f64, f64),
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
    /// The points evaluated last, most recent first.
    recent: Mutex<Vec<(GeoPoint, Arc<[Sight]>)>>,
}

/// How many evaluated points [`BearingModel`] keeps.
const RECENT_POINTS: usize = 3;

impl BearingModel {
    /// A bearing model of `lines` in `frame`.
    pub fn new(frame: LocalFrame, lines: Vec<Line>) -> Self {
        BearingModel {
            frame,
            lines,
            geodesic: Geodesic::wgs84(),
            recent: Mutex::new(Vec::with_capacity(RECENT_POINTS)),
        }
    }

    /// What each observer sees of the point `at`.
    pub fn sights(&self, at: GeoPoint) -> Vec<Sight> {
        self.shared_sights(at).to_vec()
    }

    /// What each observer sees of `at`, from the points kept when it is one of them.
    fn shared_sights(&self, at: GeoPoint) -> Arc<[Sight]> {
        let mut recent = self.recent.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(k) = recent.iter().position(|(p, _)| *p == at) {
            let hit = recent.remove(k);
            let sights = hit.1.clone();
            recent.insert(0, hit);
            return sights;
        }
        drop(recent);
        let sights: Arc<[Sight]> = self.evaluate(at).into();
        let mut recent = self.recent.lock().unwrap_or_else(|e| e.into_inner());
        recent.truncate(RECENT_POINTS - 1);
        recent.insert(0, (at, sights.clone()));
        sights
    }

    fn evaluate(&self, at: GeoPoint) -> Vec<Sight> {
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
        let sights = self.shared_sights(at);
        let mut r = Vec::with_capacity(sights.len());
        let mut j = Vec::with_capacity(sights.len());
        for (line, s) in self.lines.iter().zip(sights.iter()) {
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

/// The lines of bearing on the plane of the local frame (azimuthal equidistant about the
/// frame's origin), each azimuth corrected by its geodesic value at one point, the
/// centre: exact there, and elsewhere the plane's departure from the ellipsoid changes an
/// azimuth's change by a share of the order of (D/R)², D the extent of the walk and its
/// region, R the Earth's radius (a part in 10⁴ at 50 km). Residuals cost an `atan2` per
/// reading instead of a geodesic.
pub struct PlaneModel {
    /// Each observer's local east and north metres.
    observers: Vec<(f64, f64)>,
    /// Each bearing less the correction of its planar azimuth, radians.
    aim_rad: Vec<f64>,
}

impl BearingModel {
    /// The lines on the plane, exact at the local point `centre`.
    pub fn plane_at(&self, centre: (f64, f64)) -> PlaneModel {
        let sights = self.shared_sights(self.point(centre.0, centre.1));
        let (observers, aim_rad) = self
            .lines
            .iter()
            .zip(sights.iter())
            .map(|(l, s)| {
                let o = l.observer_local_m;
                let planar = (centre.0 - o.0).atan2(centre.1 - o.1);
                let correction = s.azimuth_deg.to_radians() - planar;
                (o, l.bearing_deg.to_radians() - correction)
            })
            .unzip();
        PlaneModel { observers, aim_rad }
    }
}

impl PlaneModel {
    /// Residuals (read − predicted, wrapped to ±π) in radians at the local point
    /// (`east_m`, `north_m`).
    pub fn residuals(&self, east_m: f64, north_m: f64) -> impl Iterator<Item = f64> + '_ {
        use std::f64::consts::{PI, TAU};
        self.observers
            .iter()
            .zip(&self.aim_rad)
            .map(move |(o, aim)| {
                let d = (aim - (east_m - o.0).atan2(north_m - o.1)).rem_euclid(TAU);
                if d > PI {
                    d - TAU
                } else {
                    d
                }
            })
    }
}
