//! A fix for any mapping program: GeoJSON (RFC 7946) and KML (OGC KML 2.2). Both carry
//! the fix as a point, the region it claims as a polygon (the confidence ellipse, or the
//! likelihood contour where the ellipse does not hold), each line of bearing as a line
//! from its observer along the bearing used, and the observers as points. The site
//! exports ([`site_geojson`], [`site_kml`]) add the site's structures and emitters as
//! points (id, kind, owner; an emitter's frequency and ERP), the KML styled by kind.

use crate::text::xml_escape;
use geojson::{Feature, FeatureCollection, Geometry, JsonObject, JsonValue};

use pim_core::emitter::Emitter;
use pim_core::fix::{Fix, RegionKind};
use pim_core::geo::{destination, GeoPoint, LocalFrame};
use pim_core::ticket::Structure;

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

/// The site around a fix: its structures and emitters.
#[derive(Clone, Copy, Debug, Default)]
pub struct SiteItems<'a> {
    pub structures: &'a [Structure],
    pub emitters: &'a [Emitter],
}

/// One placed item of the site, as the exports show it.
struct SitePoint<'a> {
    /// `structure` or `emitter`.
    item: &'static str,
    id: &'a str,
    kind: Option<&'a str>,
    owner: Option<&'a str>,
    note: Option<&'a str>,
    position: GeoPoint,
    freq_mhz: Option<f64>,
    erp_dbm: Option<f64>,
}

/// The structures, then the emitters with a position (an emitter without one cannot be
/// placed).
fn site_points<'a>(items: &SiteItems<'a>) -> Vec<SitePoint<'a>> {
    let structures = items.structures.iter().map(|s| SitePoint {
        item: "structure",
        id: &s.id,
        kind: s.kind.as_deref(),
        owner: None,
        note: s.note.as_deref(),
        position: s.position,
        freq_mhz: None,
        erp_dbm: None,
    });
    let emitters = items.emitters.iter().filter_map(|e| {
        Some(SitePoint {
            item: "emitter",
            id: &e.id,
            kind: e.kind.as_deref(),
            owner: e.owner.as_deref(),
            note: e.note.as_deref(),
            position: e.position?,
            freq_mhz: Some(e.freq.mhz()),
            erp_dbm: e.erp_dbm,
        })
    });
    structures.chain(emitters).collect()
}

fn erp_w(erp_dbm: f64) -> f64 {
    10f64.powf((erp_dbm - 30.0) / 10.0)
}

/// The fix and the site's structures and emitters as an RFC 7946 FeatureCollection: each
/// item a point with `kind` (`structure` or `emitter`), `id`, `item_kind` (its kind as its
/// file says), `owner`, `note`, and for an emitter `freq_mhz`, `erp_dbm` and `erp_w`.
pub fn site_geojson(fix: &Fix, items: &SiteItems) -> FeatureCollection {
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
                // no CEP for a region open on one side (its size is not measured)
                (
                    "cep_m",
                    fix.open_towards_deg()
                        .map_or(fix.cep_m.into(), |_| serde_json::Value::Null),
                ),
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
            ]
            .into_iter()
            .chain(
                fix.open_towards_deg()
                    .map(|d| ("open_towards_deg", d.into())),
            )
            .collect::<Vec<_>>(),
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
    for p in site_points(items) {
        let mut props: Vec<(&str, JsonValue)> = vec![
            ("kind", p.item.into()),
            ("id", p.id.into()),
            ("item_kind", p.kind.into()),
            ("owner", p.owner.into()),
            ("note", p.note.into()),
        ];
        if p.item == "emitter" {
            props.push(("freq_mhz", p.freq_mhz.into()));
            props.push(("erp_dbm", p.erp_dbm.into()));
            props.push(("erp_w", p.erp_dbm.map(erp_w).into()));
        }
        features.push(feature(Geometry::new_point(position(p.position)), &props));
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
        .map(|p| {
            format!(
                "{},{},0",
                crate::precision::cell("lon_deg", p.lon_deg),
                crate::precision::cell("lat_deg", p.lat_deg)
            )
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// A KML style id for an item of `kind`: `structure-guy-anchor`, `emitter-paging`, or
/// the bare item name without a kind (ASCII letters, digits and hyphens only).
fn style_id(item: &str, kind: Option<&str>) -> String {
    let slug: String = kind
        .unwrap_or("")
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '-'
            }
        })
        .collect();
    let slug = slug.trim_matches('-');
    if slug.is_empty() {
        item.to_string()
    } else {
        format!("{item}-{slug}")
    }
}

/// Icon colours (KML aabbggrr) for the kinds, in order of first appearance.
const KIND_COLOURS: [&str; 8] = [
    "ff2b8cd9", "ff3fa33f", "ffb0562b", "ff9e3fb5", "ff2bb3c9", "ff5a5a5a", "ff1f6fe0", "ff8a8a1f",
];

/// The fix and the site's structures and emitters as an OGC KML 2.2 document named
/// `title`; one style per kind of structure and emitter, each placemark pointing at its
/// kind's style.
pub fn site_kml(fix: &Fix, items: &SiteItems, title: &str) -> String {
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
    let said = match fix.open_towards_deg() {
        Some(d) => format!(
            "{:.0}% region open towards {d:.0}° (no size: the levels do not bound it that way)",
            e.confidence * 100.0
        ),
        None => format!(
            "{:.0}% ellipse, semi-axes {:.1} × {:.1} m, at {:.0}°; CEP {:.1} m",
            e.confidence * 100.0,
            e.semi_major_m,
            e.semi_minor_m,
            e.orientation_deg,
            fix.cep_m
        ),
    };
    k.push_str(&format!(
        "  <Placemark><name>Fix</name><description>{} fix; {}</description><styleUrl>#fix</styleUrl><Point><coordinates>{}</coordinates></Point></Placemark>\n",
        xml_escape(&format!("{:?}", fix.method).to_lowercase()),
        xml_escape(&said),
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
    let points = site_points(items);
    let mut styles: Vec<String> = Vec::new();
    for p in &points {
        let id = style_id(p.item, p.kind);
        if !styles.contains(&id) {
            let colour = KIND_COLOURS[styles.len() % KIND_COLOURS.len()];
            k.push_str(&format!(
                "  <Style id=\"{id}\"><IconStyle><color>{colour}</color><scale>{}</scale></IconStyle><LabelStyle><scale>0.8</scale></LabelStyle></Style>\n",
                if p.item == "emitter" { "1.1" } else { "0.9" }
            ));
            styles.push(id);
        }
    }
    for p in &points {
        let mut about: Vec<String> = vec![p.item.to_string()];
        about.extend(p.kind.map(str::to_string));
        about.extend(p.owner.map(str::to_string));
        if let Some(f) = p.freq_mhz {
            about.push(format!("{f:.4} MHz"));
        }
        if let Some(erp) = p.erp_dbm {
            let w = erp_w(erp);
            let digits = if w >= 10.0 {
                0
            } else if w >= 1.0 {
                1
            } else {
                3
            };
            about.push(format!("ERP {w:.digits$} W ({erp:.1} dBm)"));
        }
        about.extend(p.note.map(str::to_string));
        let mut data = vec![("item", p.item.to_string())];
        data.extend(p.kind.map(|v| ("kind", v.to_string())));
        data.extend(p.owner.map(|v| ("owner", v.to_string())));
        data.extend(p.freq_mhz.map(|v| {
            let hz = crate::precision::Rounding::Decimals(6);
            ("freq_mhz", crate::precision::round(v, hz).to_string())
        }));
        data.extend(
            p.erp_dbm
                .map(|v| ("erp_dbm", crate::precision::cell("erp_dbm", v))),
        );
        let data: String = data
            .iter()
            .map(|(name, value)| {
                format!(
                    "<Data name=\"{name}\"><value>{}</value></Data>",
                    xml_escape(value)
                )
            })
            .collect();
        k.push_str(&format!(
            "  <Placemark><name>{}</name><description>{}</description><styleUrl>#{}</styleUrl><ExtendedData>{data}</ExtendedData><Point><coordinates>{}</coordinates></Point></Placemark>\n",
            xml_escape(p.id),
            xml_escape(&about.join("; ")),
            style_id(p.item, p.kind),
            kml_coords(&[p.position])
        ));
    }
    k.push_str("</Document>\n</kml>\n");
    k
}
