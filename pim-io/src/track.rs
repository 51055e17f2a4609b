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

/// Reads the timed points of a GPX file: track points of every track and segment, route
/// points and waypoints (walkers often mark a waypoint at each reading, and a file
/// written by a GIS tool may hold nothing else). Points without a time cannot place a
/// reading and are left out; so are points repeated with the same time and place (a
/// waypoint often repeats a track point).
pub fn read_track<R: Read>(source: &str, reader: R) -> Result<Track> {
    let gpx = gpx::read(std::io::BufReader::new(reader))
        .map_err(|e| Error::input(Place::new(source), format!("not a readable GPX file: {e}")))?;
    let track_points = gpx
        .tracks
        .iter()
        .flat_map(|t| &t.segments)
        .flat_map(|s| &s.points);
    let route_points = gpx.routes.iter().flat_map(|r| &r.points);
    let mut points = Vec::new();
    for wp in track_points.chain(route_points).chain(&gpx.waypoints) {
        if let Some(t) = wp.time {
            let p = wp.point();
            let at = GeoPoint::new(p.y(), p.x());
            if at.is_valid() {
                points.push((OffsetDateTime::from(t), at));
            }
        }
    }
    if points.is_empty() {
        return Err(Error::input(
            Place::new(source),
            "the GPX file has no track points, route points or waypoints with a time",
        ));
    }
    let mut track = Track::new(points);
    track.points.dedup();
    Ok(track)
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::macros::datetime;

    const HEAD: &str = r#"<?xml version="1.0" encoding="UTF-8"?>
<gpx version="1.1" creator="pim tests" xmlns="http://www.topografix.com/GPX/1/1">"#;

    fn gpx(body: &str) -> String {
        format!("{HEAD}{body}</gpx>")
    }

    /// A GPX 1.1 file with waypoints only (as a GIS tool writes marked spots) is a track
    /// of those timed spots (GPX 1.1 schema: `wpt` carries `time` like `trkpt`).
    #[test]
    fn waypoints_alone_make_a_track() {
        let text = gpx(r#"
<wpt lat="51.5000" lon="-2.6000"><time>2026-11-30T10:00:00Z</time><name>R1</name></wpt>
<wpt lat="51.5010" lon="-2.6000"><time>2026-11-30T10:10:00Z</time><name>R2</name></wpt>
<wpt lat="51.5020" lon="-2.6000"><name>no time</name></wpt>"#);
        let track = read_track("walk.gpx", text.as_bytes()).unwrap();
        assert_eq!(track.first_time(), Some(datetime!(2026-11-30 10:00 UTC)));
        assert_eq!(track.last_time(), Some(datetime!(2026-11-30 10:10 UTC)));
        let mid = track.position_at(datetime!(2026-11-30 10:05 UTC)).unwrap();
        assert!((mid.lat_deg - 51.5005).abs() < 1e-6, "{mid:?}");
        assert!((mid.lon_deg + 2.6).abs() < 1e-9, "{mid:?}");
    }

    /// Route points with times count as well.
    #[test]
    fn route_points_with_times_make_a_track() {
        let text = gpx(r#"<rte><name>walk</name>
<rtept lat="51.5000" lon="-2.6000"><time>2026-11-30T10:00:00Z</time></rtept>
<rtept lat="51.5000" lon="-2.5990"><time>2026-11-30T10:02:00Z</time></rtept>
</rte>"#);
        let track = read_track("walk.gpx", text.as_bytes()).unwrap();
        assert_eq!(track.newest().unwrap().1, GeoPoint::new(51.5, -2.599));
    }

    /// Track points, route points and waypoints together are one time-ordered walk; a
    /// waypoint repeating a track point is kept once.
    #[test]
    fn all_kinds_merge_in_time_order() {
        let text = gpx(r#"
<wpt lat="51.5010" lon="-2.6000"><time>2026-11-30T10:10:00Z</time></wpt>
<wpt lat="51.5000" lon="-2.6000"><time>2026-11-30T10:00:00Z</time></wpt>
<rte><rtept lat="51.5020" lon="-2.6000"><time>2026-11-30T10:20:00Z</time></rtept></rte>
<trk><trkseg>
<trkpt lat="51.5000" lon="-2.6000"><time>2026-11-30T10:00:00Z</time></trkpt>
<trkpt lat="51.5030" lon="-2.6000"><time>2026-11-30T10:30:00Z</time></trkpt>
</trkseg></trk>"#);
        let track = read_track("walk.gpx", text.as_bytes()).unwrap();
        assert_eq!(track.points.len(), 4);
        assert!(track.points.windows(2).all(|w| w[0].0 < w[1].0));
        let p = track.position_at(datetime!(2026-11-30 10:20 UTC)).unwrap();
        assert!((p.lat_deg - 51.502).abs() < 1e-9);
    }

    /// A file with no timed point of any kind is refused, naming the file.
    #[test]
    fn no_timed_point_is_refused() {
        let text = gpx(r#"<wpt lat="51.5" lon="-2.6"><name>no time</name></wpt>"#);
        let err = read_track("walk.gpx", text.as_bytes()).unwrap_err();
        assert_eq!(err.place.as_ref().unwrap().source, "walk.gpx");
        assert!(err.message.contains("with a time"), "{}", err.message);
    }
}
