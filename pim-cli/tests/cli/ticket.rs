//! End-to-end runs of `pim ticket` and `pim demo`: all seven files (eight with a trace) written and readable by
//! independent parsers, the ellipse polygon holding the fix with the stated axes, each
//! line of bearing pointing along its bearing, and the ticket naming the first candidate
//! and the cautions.

use std::path::Path;

use crate::support::{field_log, pim, pim_in, stderr_of, stdout_of};
use pim_core::geo::{distance_and_azimuth, GeoPoint};

const FILES: [&str; 7] = [
    "ticket.md",
    "ticket.html",
    "map.svg",
    "spectrum.svg",
    "fix.geojson",
    "fix.kml",
    "candidates.csv",
];

fn xml_well_formed(path: &Path) {
    let text = std::fs::read_to_string(path).unwrap();
    crate::support::assert_xml_well_formed(&text, &path.display().to_string());
}

fn point(v: &geojson::GeometryValue) -> GeoPoint {
    match v {
        geojson::GeometryValue::Point { coordinates } => {
            GeoPoint::new(coordinates.as_slice()[1], coordinates.as_slice()[0])
        }
        other => panic!("{other:?}"),
    }
}

fn check_ticket_dir(dir: &Path) {
    for f in FILES {
        assert!(dir.join(f).is_file(), "{f} missing");
    }
    xml_well_formed(&dir.join("map.svg"));
    xml_well_formed(&dir.join("spectrum.svg"));
    xml_well_formed(&dir.join("fix.kml"));

    // GeoJSON (RFC 7946) read with the geojson crate
    let fc: geojson::FeatureCollection = std::fs::read_to_string(dir.join("fix.geojson"))
        .unwrap()
        .parse()
        .unwrap();
    let kind = |f: &geojson::Feature| f.property("kind").unwrap().as_str().unwrap().to_string();
    let fix_feature = fc.features.iter().find(|f| kind(f) == "fix").unwrap();
    let fix = point(&fix_feature.geometry.as_ref().unwrap().value);
    let ellipse = fc.features.iter().find(|f| kind(f) == "ellipse").unwrap();
    let a = ellipse.property("semi_major_m").unwrap().as_f64().unwrap();
    let b = ellipse.property("semi_minor_m").unwrap().as_f64().unwrap();
    let ring = match &ellipse.geometry.as_ref().unwrap().value {
        geojson::GeometryValue::Polygon { coordinates } => coordinates[0].clone(),
        other => panic!("{other:?}"),
    };
    // distances from the fix to the outline span the semi-axes (geodesic distances)
    let d: Vec<f64> = ring
        .iter()
        .map(|p| distance_and_azimuth(fix, GeoPoint::new(p.as_slice()[1], p.as_slice()[0])).0)
        .collect();
    let (lo, hi) = d
        .iter()
        .fold((f64::MAX, 0.0f64), |(l, h), x| (l.min(*x), h.max(*x)));
    assert!((hi / a - 1.0).abs() < 0.01, "major {hi} vs {a}");
    assert!((lo / b - 1.0).abs() < 0.01, "minor {lo} vs {b}");
    // the fix lies inside the polygon (ray casting in lon/lat)
    let (x, y) = (fix.lon_deg, fix.lat_deg);
    let mut inside = false;
    for w in ring.windows(2) {
        let (p, q) = (w[0].as_slice(), w[1].as_slice());
        if (p[1] > y) != (q[1] > y) && x < (q[0] - p[0]) * (y - p[1]) / (q[1] - p[1]) + p[0] {
            inside = !inside;
        }
    }
    assert!(inside);
    // each line of bearing points along its bearing (geodesic azimuth at the observer)
    let mut lines = 0;
    for f in fc.features.iter().filter(|f| kind(f) == "bearing") {
        let coords = match &f.geometry.as_ref().unwrap().value {
            geojson::GeometryValue::LineString { coordinates } => coordinates.clone(),
            other => panic!("{other:?}"),
        };
        let from = GeoPoint::new(coords[0].as_slice()[1], coords[0].as_slice()[0]);
        let to = GeoPoint::new(coords[1].as_slice()[1], coords[1].as_slice()[0]);
        let (_, az) = distance_and_azimuth(from, to);
        let want = f.property("bearing_deg").unwrap().as_f64().unwrap();
        let diff = (az - want + 540.0).rem_euclid(360.0) - 180.0;
        assert!(
            diff.abs() < 1e-6,
            "line {}: {az} vs {want}",
            f.property("line").unwrap()
        );
        lines += 1;
    }
    assert_eq!(lines, 8);

    // the ticket names the first candidate, the fix and the cautions
    let md = std::fs::read_to_string(dir.join("ticket.md")).unwrap();
    let html = std::fs::read_to_string(dir.join("ticket.html")).unwrap();
    for text in [&md, &html] {
        assert!(text.contains("2·SKP-152 − FIRE-DSP"));
        assert!(text.contains("RF exposure"));
        assert!(text.contains("trained, authorised climbers"));
        assert!(text.contains("arrangement with the licensees"));
        assert!(text.contains("local codes"));
        assert!(text.contains("OLD-TWR-GUY-N"));
        assert!(text.contains("Attenuator test"));
    }
    // self-contained HTML: pictures inline (the trace's too, when one was given), no
    // outside references
    let band = dir.join("trace.svg").exists();
    assert_eq!(html.matches("<svg").count(), 2 + usize::from(band));
    if band {
        xml_well_formed(&dir.join("trace.svg"));
        for text in [&md, &html] {
            assert!(text.contains("Over the whole receive band"));
            assert!(text.contains("SKP-152 + SKP-157 + FIRE-DSP explain 3 peaks"));
        }
    }
    assert!(!html.contains("src=\"http") && !html.contains("href=\"http"));
    // candidates.csv: a header and the first candidate first
    let csv = std::fs::read_to_string(dir.join("candidates.csv")).unwrap();
    let mut rows = csv.lines();
    assert!(rows.next().unwrap().starts_with("rank,formula,order"));
    assert!(rows
        .next()
        .unwrap()
        .starts_with("1,2·SKP-152 − FIRE-DSP,3,"));
}

#[test]
fn demo_runs_from_an_empty_directory() {
    // (the demo's ticket carries the band trace: check_ticket_dir checks trace.svg)
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let o = pim_in(Some(dir), &["demo"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let out = stdout_of(&o);
    assert!(out.contains("2·SKP-152 − FIRE-DSP"), "{out}");
    assert!(out.contains("pim-demo/ticket.md"), "{out}");
    check_ticket_dir(&dir.join("pim-demo"));
    // nothing but the ticket is left behind (no temporary files)
    let names: Vec<String> = std::fs::read_dir(dir.join("pim-demo"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    // the seven files of every ticket, the band's trace.svg, the demo's marker and its
    // four inputs (emitters, structures, walk, trace), for the commands it prints
    assert_eq!(names.len(), 13, "{names:?}");
    assert!(names.contains(&".pim-demo".to_string()), "{names:?}");
}

#[test]
fn demo_runs_from_outside_the_repository_with_an_out_dir() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let target = dir.join("nested").join("ticket");
    let o = pim_in(
        Some(&std::env::temp_dir()),
        &["demo", "--out", target.to_str().unwrap()],
    );
    assert!(o.status.success(), "{}", stderr_of(&o));
    check_ticket_dir(&target);
}

#[test]
fn ticket_from_files() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        field_log("emitters.csv").to_str().unwrap(),
        "--log",
        field_log("walk.csv").to_str().unwrap(),
        "--structures",
        field_log("structures.csv").to_str().unwrap(),
        "--site",
        "Marrow Hill",
        "--method",
        "robust",
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
        "--trace",
        field_log("trace.csv").to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    check_ticket_dir(dir);
    assert!(dir.join("trace.svg").exists());
    // the same inputs give the same ticket, byte for byte, with the date pinned
    let tmp_again = crate::support::scratch();
    let again = tmp_again.path();
    for d in [&dir, &again] {
        let o = std::process::Command::new(crate::support::pim_bin())
            .env("SOURCE_DATE_EPOCH", "1764547200")
            .args([
                "ticket",
                "146.34",
                "--emitters",
                field_log("emitters.csv").to_str().unwrap(),
                "--log",
                field_log("walk.csv").to_str().unwrap(),
                "--out",
                d.to_str().unwrap(),
                "--force",
            ])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", stderr_of(&o));
    }
    for f in FILES {
        assert_eq!(
            std::fs::read(dir.join(f)).unwrap(),
            std::fs::read(again.join(f)).unwrap(),
            "{f}"
        );
    }
}

#[test]
fn ticket_refuses_an_out_path_that_is_a_file() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("taken");
    std::fs::write(&file, "x").unwrap();
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        field_log("emitters.csv").to_str().unwrap(),
        "--log",
        field_log("walk.csv").to_str().unwrap(),
        "--out",
        file.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("taken"));
}
