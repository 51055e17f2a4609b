//! A GPS track (GPX 1.1, read with the gpx crate) as a time-ordered list of positions, so
//! that readings logged with a time and no position can be placed on it.

use std::io::Read;

use time::OffsetDateTime;

use pim_core::error::{Error, Place, Result};
use pim_core::geo::{destination, distance_and_azimuth, GeoPoint};

/// Timed positions of a walk, oldest first.
#[derive(Clone, Debug, PartialEq)]
pub struct Track {
    points: Vec<(OffsetDateTime, GeoPoint)>,
}

impl Track {
    /// Builds a track from timed points (any order).
    pub fn new(mut points: Vec<(OffsetDateTime, GeoPoint)>) -> Self {
        points.sort_by_key(|p| p.0);
        Track { points }
    }

    pub fn first_time(&self) -> Option<OffsetDateTime> {
        self.points.first().map(|p| p.0)
    }

    pub fn last_time(&self) -> Option<OffsetDateTime> {
        self.points.last().map(|p| p.0)
    }

    /// The newest point.
    pub fn newest(&self) -> Option<(OffsetDateTime, GeoPoint)> {
        self.points.last().copied()
    }

    /// The position at `t`, along the geodesic between the points either side, or
    /// `None` when `t` is outside the track.
    pub fn position_at(&self, t: OffsetDateTime) -> Option<GeoPoint> {
        let (first, last) = (self.points.first()?, self.points.last()?);
        if t < first.0 || t > last.0 {
            return None;
        }
        let i = self.points.partition_point(|p| p.0 < t);
        let b = self.points[i];
        if b.0 == t || i == 0 {
            return Some(b.1);
        }
        let a = self.points[i - 1];
        let span = (b.0 - a.0).as_seconds_f64();
        let frac = if span > 0.0 {
            (t - a.0).as_seconds_f64() / span
        } else {
            0.0
        };
        let (d, az) = distance_and_azimuth(a.1, b.1);
        Some(destination(a.1, az, d * frac))
    }
}

/// Reads the timed points of every track and segment of a GPX file (route and waypoint
/// elements are not a walk and are left out).
pub fn read_track<R: Read>(source: &str, reader: R) -> Result<Track> {
    let gpx = gpx::read(std::io::BufReader::new(reader))
        .map_err(|e| Error::input(Place::new(source), format!("not a readable GPX file: {e}")))?;
    let mut points = Vec::new();
    for track in &gpx.tracks {
        for segment in &track.segments {
            for wp in &segment.points {
                if let Some(t) = wp.time {
                    let p = wp.point();
                    let at = GeoPoint::new(p.y(), p.x());
                    if at.is_valid() {
                        points.push((OffsetDateTime::from(t), at));
                    }
                }
            }
        }
    }
    if points.is_empty() {
        return Err(Error::input(
            Place::new(source),
            "the GPX file has no track points with a time",
        ));
    }
    Ok(Track::new(points))
}
