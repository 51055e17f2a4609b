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

/// The largest GPX file read: 32 MiB, a day's walk logged every second with room to
/// spare.
pub const MAX_GPX_BYTES: u64 = 32 << 20;

/// The deepest nesting of XML elements read: a GPX 1.1 track point sits at depth 4
/// (`gpx`, `trk`, `trkseg`, `trkpt`); 32 leaves room for any extensions a receiver
/// writes, and refuses in linear time a file built to make the XML reader's work grow
/// with the square of its size.
pub const MAX_GPX_DEPTH: usize = 32;

/// One linear pass over the bytes, counting the nesting of elements (comments, CDATA,
/// processing instructions and quoted attribute values skipped) and refusing a file
/// nested deeper than [`MAX_GPX_DEPTH`], naming the line.
fn check_nesting(source: &str, bytes: &[u8]) -> Result<()> {
    let find = |from: usize, pat: &[u8]| -> usize {
        bytes[from.min(bytes.len())..]
            .windows(pat.len())
            .position(|w| w == pat)
            .map_or(bytes.len(), |p| from + p + pat.len())
    };
    let mut depth = 0usize;
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] != b'<' {
            i += 1;
            continue;
        }
        let rest = &bytes[i..];
        if rest.starts_with(b"<!--") {
            i = find(i + 4, b"-->");
        } else if rest.starts_with(b"<![CDATA[") {
            i = find(i + 9, b"]]>");
        } else if rest.starts_with(b"<?") {
            i = find(i + 2, b"?>");
        } else if rest.starts_with(b"<!") {
            i = find(i + 2, b">");
        } else if rest.starts_with(b"</") {
            depth = depth.saturating_sub(1);
            i = find(i + 2, b">");
        } else {
            // an opening tag: to its `>`, outside quoted attribute values
            let mut j = i + 1;
            let mut quote = None;
            while j < bytes.len() {
                match (quote, bytes[j]) {
                    (None, b'"' | b'\'') => quote = Some(bytes[j]),
                    (Some(q), c) if c == q => quote = None,
                    (None, b'>') => break,
                    _ => {}
                }
                j += 1;
            }
            if j >= bytes.len() || bytes[j - 1] != b'/' {
                depth += 1;
                if depth > MAX_GPX_DEPTH {
                    let line = bytes[..i].iter().filter(|&&b| b == b'\n').count() as u64 + 1;
                    return Err(Error::input(
                        Place::new(source).at_line(line),
                        format!(
                            "elements nested deeper than {MAX_GPX_DEPTH} levels; a GPS track needs 4 (gpx, trk, trkseg, trkpt) and its extensions a few more"
                        ),
                    ));
                }
            }
            i = j + 1;
        }
    }
    Ok(())
}

/// Reads the timed points of a GPX file: track points of every track and segment, route
/// points and waypoints (walkers often mark a waypoint at each reading, and a file
/// written by a GIS tool may hold nothing else). Points without a time cannot place a
/// reading and are left out; so are points repeated with the same time and place (a
/// waypoint often repeats a track point).
pub fn read_track<R: Read>(source: &str, reader: R) -> Result<Track> {
    let mut bytes = Vec::new();
    reader
        .take(MAX_GPX_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(source, &e))?;
    if bytes.len() as u64 > MAX_GPX_BYTES {
        return Err(Error::input(
            Place::new(source),
            format!(
                "larger than {} MiB; split the track or leave out its extensions",
                MAX_GPX_BYTES >> 20
            ),
        ));
    }
    check_nesting(source, &bytes)?;
    let gpx = gpx::read(bytes.as_slice())
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
    /// Extensions nested a hundred thousand deep are refused in one pass, naming the
    /// line; the usual depth is read.
    #[test]
    fn deep_nesting_is_refused() {
        let deep = format!(
            "<gpx version=\"1.1\">\n<extensions>{}{}</extensions></gpx>",
            "<x a='>'>".repeat(100_000),
            "</x>".repeat(100_000)
        );
        let e = read_track("deep.gpx", deep.as_bytes()).unwrap_err();
        assert_eq!(
            e.to_string(),
            "deep.gpx, line 2: elements nested deeper than 32 levels; a GPS track needs 4 (gpx, trk, trkseg, trkpt) and its extensions a few more"
        );
        let ok = gpx(
            "<trk><trkseg><trkpt lat=\"45.1\" lon=\"-122.4\"><time>2026-11-28T09:00:00Z</time><extensions><!-- <a><b> --><e><f/><g>1</g></e></extensions></trkpt></trkseg></trk>",
        );
        assert!(read_track("ok.gpx", ok.as_bytes()).is_ok());
    }

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
