//! A fix for any mapping program: GeoJSON (RFC 7946) and KML (OGC KML 2.2). Both carry
//! the fix as a point, the region it claims as a polygon (the confidence ellipse, or the
//! likelihood contour where the ellipse does not hold), each line of bearing as a line
//! from its observer along the bearing used, and the observers as points.

use crate::text::xml_escape;
use geojson::{Feature, FeatureCollection, Geometry, JsonObject, JsonValue};

use pim_core::fix::{Fix, RegionKind};
use pim_core::geo::{destination, GeoPoint, LocalFrame};

/// Vertices of the ellipse outline.
pub const ELLIPSE_VERTICES: usize = 72;

/// A line of bearing drawn from its observer.
#[derive(Clone, Debug, PartialEq)]
pub struct BearingLine {
    pub line: u64,
    pub from: GeoPoint,
    pub to: GeoPoint,
    pub bearing_deg: f64,
    pub outlier: bool,
}

/// The geometry of a fix on the ground.
#[derive(Clone, Debug, PartialEq)]
pub struct FixShapes {
    pub fix: GeoPoint,
    /// The region claimed: closed ring (first vertex repeated last), counterclockwise.
    pub ellipse: Vec<GeoPoint>,
    pub bearings: Vec<BearingLine>,
}

/// Each line of bearing runs past the fix by a quarter of its length, at least 50 m.
pub fn bearing_length_m(distance_to_fix_m: f64) -> f64 {
    (1.25 * distance_to_fix_m).max(50.0)
}

/// The ellipse outline and the lines of bearing of a fix, on the ground.
pub fn fix_shapes(fix: &Fix) -> FixShapes {
    let frame = LocalFrame::new(fix.position);
    let mut ellipse: Vec<GeoPoint> = if fix.region.len() >= 4 {
        fix.region.clone()
    } else {
        fix.ellipse
            .outline(ELLIPSE_VERTICES)
            .into_iter()
            .map(|(e, n)| frame.to_geo(e, n))
            .collect()
    };
    if ellipse.first() != ellipse.last() {
        if let Some(first) = ellipse.first().copied() {
            ellipse.push(first);
        }
    }
    let bearings = fix
        .readings
        .iter()
        .map(|r| BearingLine {
            line: r.line,
            from: r.observer,
            to: destination(r.observer, r.bearing_deg, bearing_length_m(r.distance_m)),
            bearing_deg: r.bearing_deg,
            outlier: r.outlier,
        })
        .collect();
    FixShapes {
        fix: fix.position,
        ellipse,
        bearings,
    }
}

fn position(p: GeoPoint) -> (f64, f64) {
    (p.lon_deg, p.lat_deg)
}

fn feature(geometry: Geometry, props: &[(&str, JsonValue)]) -> Feature {
    let mut properties = JsonObject::new();
    for (k, v) in props {
        properties.insert((*k).to_string(), v.clone());
    }
    Feature {
        bbox: None,
        geometry: Some(geometry),
        id: None,
        properties: Some(properties),
        foreign_members: None,
    }
}

/// The fix as an RFC 7946 FeatureCollection.
pub fn fix_geojson(fix: &Fix) -> FeatureCollection {
    let shapes = fix_shapes(fix);
    let e = &fix.ellipse;
    let mut features = vec![
        feature(
            Geometry::new_point(position(shapes.fix)),
            &[
                ("kind", "fix".into()),
                (
                    "method",
                    serde_json::to_value(fix.method).unwrap_or_default(),
                ),
                ("cep_m", fix.cep_m.into()),
                ("n_used", fix.n_used.into()),
            ],
        ),
        feature(
            Geometry::new_polygon([shapes.ellipse.iter().map(|p| position(*p))]),
            &[
                ("kind", region_kind_name(fix.region_kind).into()),
                ("region_kind", region_kind_name(fix.region_kind).into()),
                ("confidence", e.confidence.into()),
                ("semi_major_m", e.semi_major_m.into()),
                ("semi_minor_m", e.semi_minor_m.into()),
                ("orientation_deg", e.orientation_deg.into()),
            ],
        ),
    ];
    for b in &shapes.bearings {
        features.push(feature(
            Geometry::new_line_string([position(b.from), position(b.to)]),
            &[
                ("kind", "bearing".into()),
                ("line", b.line.into()),
                ("bearing_deg", b.bearing_deg.into()),
                ("outlier", b.outlier.into()),
            ],
        ));
    }
    for b in &shapes.bearings {
        features.push(feature(
            Geometry::new_point(position(b.from)),
            &[("kind", "observer".into()), ("line", b.line.into())],
        ));
    }
    FeatureCollection::new(features)
}

fn region_kind_name(k: RegionKind) -> &'static str {
    match k {
        RegionKind::Ellipse => "ellipse",
        RegionKind::Likelihood => "likelihood",
    }
}

fn kml_coords(points: &[GeoPoint]) -> String {
    points
        .iter()
        .map(|p| format!("{:.7},{:.7},0", p.lon_deg, p.lat_deg))
        .collect::<Vec<_>>()
        .join(" ")
}

/// The fix as an OGC KML 2.2 document named `title`.
pub fn fix_kml(fix: &Fix, title: &str) -> String {
    let shapes = fix_shapes(fix);
    let e = &fix.ellipse;
    let mut k = String::new();
    k.push_str("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    k.push_str("<kml xmlns=\"http://www.opengis.net/kml/2.2\">\n<Document>\n");
    k.push_str(&format!("  <name>{}</name>\n", xml_escape(title)));
    for (id, colour, width) in [
        ("fix", "ff1f3fd9", 3),
        ("ellipse", "ff1f3fd9", 2),
        ("bearing", "ff8a5a2b", 2),
        ("outlier", "ff9e9e9e", 1),
        ("observer", "ff8a5a2b", 1),
    ] {
        k.push_str(&format!(
            "  <Style id=\"{id}\"><LineStyle><color>{colour}</color><width>{width}</width></LineStyle><PolyStyle><color>401f3fd9</color></PolyStyle><IconStyle><color>{colour}</color></IconStyle></Style>\n"
        ));
    }
    k.push_str(&format!(
        "  <Placemark><name>Fix</name><description>{} fix; {:.0}% ellipse {:.1} × {:.1} m at {:.0}°; CEP {:.1} m</description><styleUrl>#fix</styleUrl><Point><coordinates>{}</coordinates></Point></Placemark>\n",
        xml_escape(&format!("{:?}", fix.method).to_lowercase()),
        e.confidence * 100.0,
        e.semi_major_m,
        e.semi_minor_m,
        e.orientation_deg,
        fix.cep_m,
        kml_coords(&[shapes.fix])
    ));
    k.push_str(&format!(
        "  <Placemark><name>{:.0}% {}</name><styleUrl>#ellipse</styleUrl><Polygon><outerBoundaryIs><LinearRing><coordinates>{}</coordinates></LinearRing></outerBoundaryIs></Polygon></Placemark>\n",
        e.confidence * 100.0,
        match fix.region_kind {
            RegionKind::Ellipse => "ellipse",
            RegionKind::Likelihood => "likelihood region",
        },
        kml_coords(&shapes.ellipse)
    ));
    for b in &shapes.bearings {
        k.push_str(&format!(
            "  <Placemark><name>Bearing, line {}</name><description>{:.1}° true{}</description><styleUrl>#{}</styleUrl><LineString><coordinates>{}</coordinates></LineString></Placemark>\n",
            b.line,
            b.bearing_deg,
            if b.outlier { "; disagrees with the others" } else { "" },
            if b.outlier { "outlier" } else { "bearing" },
            kml_coords(&[b.from, b.to])
        ));
    }
    for b in &shapes.bearings {
        k.push_str(&format!(
            "  <Placemark><name>Observer, line {}</name><styleUrl>#observer</styleUrl><Point><coordinates>{}</coordinates></Point></Placemark>\n",
            b.line,
            kml_coords(&[b.from])
        ));
    }
    k.push_str("</Document>\n</kml>\n");
    k
}
