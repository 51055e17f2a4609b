//! Positions on the WGS84 ellipsoid and the two geodesic questions the tool asks: how far
//! and in which direction (the inverse problem), and where a bearing and distance lead
//! (the direct problem). Both are solved with Karney's algorithms ("Algorithms for
//! geodesics", J. Geodesy 87 (2013) 43–55) as implemented by the geographiclib-rs crate.
//!
//! The fix solver works in a local east/north plane in metres around a reference point;
//! [`LocalFrame`] maps between that plane and geodetic coordinates with the geodesic
//! through the reference (an azimuthal equidistant projection), so distances and azimuths
//! from the reference are exact.

use geographiclib_rs::{DirectGeodesic, Geodesic, InverseGeodesic};
use serde::{Deserialize, Serialize};

/// A geodetic position in WGS84 degrees.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct GeoPoint {
    /// Latitude in degrees, north positive (WGS84).
    pub lat_deg: f64,
    /// Longitude in degrees, east positive (WGS84).
    pub lon_deg: f64,
}

impl GeoPoint {
    /// A point from latitude and longitude in degrees.
    pub fn new(lat_deg: f64, lon_deg: f64) -> Self {
        GeoPoint { lat_deg, lon_deg }
    }

    /// Whether the coordinates are finite and inside ±90° latitude, ±180° longitude.
    pub fn is_valid(&self) -> bool {
        self.lat_deg.is_finite()
            && self.lon_deg.is_finite()
            && (-90.0..=90.0).contains(&self.lat_deg)
            && (-180.0..=180.0).contains(&self.lon_deg)
    }
}

fn wgs84() -> Geodesic {
    Geodesic::wgs84()
}

/// Geodesic distance in metres and the azimuth at `from` in degrees clockwise from true
/// north, in [0, 360).
pub fn distance_and_azimuth(from: GeoPoint, to: GeoPoint) -> (f64, f64) {
    let (s12, azi1, _azi2, _a12): (f64, f64, f64, f64) =
        wgs84().inverse(from.lat_deg, from.lon_deg, to.lat_deg, to.lon_deg);
    (s12, normalize_bearing_deg(azi1))
}

/// Geodesic distance in metres.
pub fn distance_m(from: GeoPoint, to: GeoPoint) -> f64 {
    distance_and_azimuth(from, to).0
}

/// The point reached from `from` along the geodesic with initial azimuth `azimuth_deg`
/// after `range_m` metres.
pub fn destination(from: GeoPoint, azimuth_deg: f64, range_m: f64) -> GeoPoint {
    let (lat, lon): (f64, f64) = wgs84().direct(from.lat_deg, from.lon_deg, azimuth_deg, range_m);
    GeoPoint::new(lat, lon)
}

/// An angle in degrees brought into [0, 360).
pub fn normalize_bearing_deg(deg: f64) -> f64 {
    let r = deg.rem_euclid(360.0);
    if r >= 360.0 {
        0.0
    } else {
        r
    }
}

/// The signed smallest difference `a − b` between two bearings, in (−180, 180].
pub fn bearing_difference_deg(a: f64, b: f64) -> f64 {
    let d = (a - b).rem_euclid(360.0);
    if d > 180.0 {
        d - 360.0
    } else {
        d
    }
}

/// The centre of `points` for a local frame: the normalised mean of their unit vectors
/// from the Earth's centre (on a sphere), so that points on both sides of longitude ±180°
/// or around a pole have their centre among them, not half a world away as the mean of
/// their longitudes would. `None` for no points, or points whose vectors cancel.
pub fn centre_of(points: &[GeoPoint]) -> Option<GeoPoint> {
    let (mut x, mut y, mut z) = (0.0, 0.0, 0.0);
    for p in points {
        let (lat, lon) = (p.lat_deg.to_radians(), p.lon_deg.to_radians());
        x += lat.cos() * lon.cos();
        y += lat.cos() * lon.sin();
        z += lat.sin();
    }
    let r = (x * x + y * y + z * z).sqrt();
    if points.is_empty() || r.is_nan() || r <= 1e-12 {
        return None;
    }
    Some(GeoPoint::new(
        (z / r).asin().to_degrees(),
        y.atan2(x).to_degrees(),
    ))
}

/// A local east/north plane in metres centred on `origin` (azimuthal equidistant).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LocalFrame {
    /// The point the frame is centred on (east and north are 0 there).
    pub origin: GeoPoint,
}

impl LocalFrame {
    /// A frame centred on `origin`.
    pub fn new(origin: GeoPoint) -> Self {
        LocalFrame { origin }
    }

    /// East and north metres of `p` from the origin.
    pub fn to_local(&self, p: GeoPoint) -> (f64, f64) {
        let (s, az) = distance_and_azimuth(self.origin, p);
        let a = az.to_radians();
        (s * a.sin(), s * a.cos())
    }

    /// The geodetic position of the point `east_m`, `north_m` from the origin.
    pub fn to_geo(&self, east_m: f64, north_m: f64) -> GeoPoint {
        let s = east_m.hypot(north_m);
        if s == 0.0 {
            return self.origin;
        }
        let az = east_m.atan2(north_m).to_degrees();
        destination(self.origin, az, s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn local_frame_round_trips() {
        let f = LocalFrame::new(GeoPoint::new(45.2, -121.6));
        let p = f.to_geo(350.0, -1200.0);
        let (e, n) = f.to_local(p);
        assert_abs_diff_eq!(e, 350.0, epsilon = 1e-6);
        assert_abs_diff_eq!(n, -1200.0, epsilon = 1e-6);
    }

    #[test]
    fn the_centre_of_points_across_the_antimeridian_is_among_them() {
        let c = centre_of(&[GeoPoint::new(-16.5, 179.99), GeoPoint::new(-16.5, -179.99)]).unwrap();
        assert_abs_diff_eq!(c.lat_deg, -16.5, epsilon = 1e-6);
        assert_abs_diff_eq!(c.lon_deg.abs(), 180.0, epsilon = 1e-6);
        let c = centre_of(&[GeoPoint::new(45.0, -122.0), GeoPoint::new(45.0, -122.002)]).unwrap();
        assert_abs_diff_eq!(c.lon_deg, -122.001, epsilon = 1e-6);
        assert!(centre_of(&[]).is_none());
    }

    #[test]
    fn bearing_arithmetic_wraps() {
        assert_abs_diff_eq!(bearing_difference_deg(359.0, 1.0), -2.0);
        assert_abs_diff_eq!(bearing_difference_deg(1.0, 359.0), 2.0);
        assert_abs_diff_eq!(normalize_bearing_deg(-90.0), 270.0);
        assert_abs_diff_eq!(normalize_bearing_deg(360.0), 0.0);
    }
}
