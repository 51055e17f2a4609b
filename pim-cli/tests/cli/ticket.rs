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
        // the property is written to 0.1° (README, "Numbers")
        assert!(
            diff.abs() < 0.05 + 1e-6,
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
        // asked for, or (the demo) shown as done
        assert!(text.contains("Attenuator test") || text.contains("Done: attenuator test"));
    }
    // self-contained HTML: pictures inline (the trace's too, when one was given), each
    // drawn twice, for a screen and for a phone; no outside references
    let band = dir.join("trace.svg").exists();
    assert_eq!(html.matches("<svg").count(), 2 * (2 + usize::from(band)));
    assert_eq!(
        html.matches("<div class=\"pic-phone\">").count(),
        2 + usize::from(band)
    );
    // the cautions come before the work steps
    let cautions = md.find("## 4. Cautions").expect("cautions");
    assert!(cautions < md.find("## 5. What to inspect").expect("inspect"));
    assert!(cautions < md.find("## 6. How to confirm").expect("confirm"));
    assert!(md.contains("Stay out of guy-anchor areas"));
    // readings named by number and time, the log's line beside where it is cited
    assert!(md.contains("strongest at reading #") && md.contains(", line "));
    let map = std::fs::read_to_string(dir.join("map.svg")).unwrap();
    assert!(
        map.contains("\n#1 ") && !map.contains("\nline 2\n"),
        "{map}"
    );
    if band {
        xml_well_formed(&dir.join("trace.svg"));
        for text in [&md, &html] {
            assert!(text.contains("Over the whole receive band"));
            assert!(text.contains("SKP-152 + SKP-157 + FIRE-DSP explain 3 peaks"));
        }
    }
    assert!(!html.contains("src=\"http") && !html.contains("href=\"http"));
    // on a phone: the viewport tag, and every picture (inline or in its own file) sized
    // by its viewBox, at most its natural width
    assert!(html.contains("<meta name=\"viewport\" content=\"width=device-width"));
    assert!(html.contains("data-label=\""));
    let files: Vec<String> = ["map.svg", "spectrum.svg", "trace.svg"]
        .iter()
        .filter_map(|f| std::fs::read_to_string(dir.join(f)).ok())
        .collect();
    for svg in std::iter::once(&html).chain(&files) {
        for root in svg.split("<svg").skip(1) {
            let root = &root[..root.find('>').unwrap()];
            assert!(root.contains("viewBox=\"0 0 "), "{root}");
            assert!(root.contains("width=\"100%\" style=\"max-width:"), "{root}");
            assert!(!root.contains("height=\""), "{root}");
        }
    }
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
    // eleven inputs (emitters, structures, walk, trace, attenuator readings, power steps,
    // receivers, on-air and heard logs, plan candidates and protected channels), for the
    // commands it prints, and its recording with the recording's waterfall
    assert_eq!(names.len(), 22, "{names:?}");
    assert!(names.contains(&".pim-demo".to_string()), "{names:?}");
    // every file a printed command names is in the folder
    for line in out.lines().filter(|l| l.trim_start().starts_with("pim ")) {
        for word in line.split_whitespace() {
            if let Some(name) = word.strip_prefix("pim-demo/") {
                assert!(names.iter().any(|n| n == name), "{name} of {line}");
            }
        }
    }
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

fn s(p: std::path::PathBuf) -> String {
    p.to_str().unwrap().to_string()
}

/// The slope `pim slope` reads from a file, as JSON (the ticket must state the same).
fn slope_json(file: &str, kind: &str) -> serde_json::Value {
    let o = pim(&[
        "slope",
        "--readings",
        &s(field_log(file)),
        "--kind",
        kind,
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    serde_json::from_str(&stdout_of(&o)).unwrap()
}

/// The ticket takes in the evidence the crew gathered: on-air logs (ranked first, support
/// columns), coefficients (narrowing, stated), the attenuator test and power steps (shown
/// as done with the figures `pim slope` gives for the same files), the affected receiver,
/// the ticket's number and assignee, and the visit from the log's reading times.
#[test]
fn ticket_takes_the_evidence() {
    let tmp = crate::support::scratch();
    let dir = tmp.path().join("t");
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        &s(field_log("emitters.csv")),
        "--log",
        &s(field_log("walk.csv")),
        "--structures",
        &s(field_log("structures.csv")),
        "--out",
        dir.to_str().unwrap(),
        "--on-air",
        &s(field_log("on-air.csv")),
        "--heard",
        &s(field_log("heard.csv")),
        "--coefficient",
        "SKP-152=2",
        "--attenuator-readings",
        &s(field_log("attenuator-readings.csv")),
        "--power-steps",
        &s(field_log("power-steps.csv")),
        "--receiver",
        "QK7MHR-IN",
        "--receivers",
        &s(field_log("receivers.csv")),
        "--ticket-id",
        "T-0042",
        "--assignee",
        "R. Ostrander",
        "--limit",
        "5",
        "--utc-offset",
        "-08:00",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let md = std::fs::read_to_string(dir.join("ticket.md")).unwrap();
    // walk.csv: first reading 09:12:40Z, last 10:22 on 2026-11-28; the site's own time
    // first, UTC beside
    for want in [
        "Ticket: T-0042.",
        "Assigned to: R. Ostrander.",
        "Site visit: 2026-11-28, 01:12–02:22 -08:00 (2026-11-28, 09:12–10:22 UTC)",
        "Affected receiver: QK7MHR-IN (146.34 MHz, line 2 of",
        "its 12.5 kHz channel and its position 45.104620, -122.414033 are used",
        "Kept 3 of 5 products: those with SKP-152 \\|k\\| = 2 (the coefficients a power step found",
        "On-air evidence: 12 listening times, heard at 5, silent at 7.",
        "| support | contradictions | heard off air |",
        "Done: attenuator test",
        "Done: power steps",
        "Done: on-air check",
        // the output-stage candidate stands on the old tower, at the fix, and SKP-152's
        // own step clears it
        "| SKP-152 output stage | 3 |",
        "cleared by the power steps",
    ] {
        assert!(md.contains(want), "{want}\n{md}");
    }
    // the figures are those of pim slope on the same files
    let att = slope_json("attenuator-readings.csv", "attenuator");
    let slope = att["slope_db_per_db"].as_f64().unwrap();
    assert!(
        md.contains(&format!("drops {slope:.2} dB per dB")),
        "{slope}\n{md}"
    );
    let steps = slope_json("power-steps.csv", "power");
    for c in steps["coefficients"].as_array().unwrap() {
        let want = format!(
            "{} {:.2} dB/dB over {} readings, \\|k\\| = {}",
            c["emitter"].as_str().unwrap(),
            c["slope_db_per_db"].as_f64().unwrap(),
            c["n"],
            c["k"]
        );
        assert!(md.contains(&want), "{want}\n{md}");
    }
    // the power steps are done: none is asked for again
    assert!(!md.contains("Power step with the licensee"), "{md}");
    let csv = std::fs::read_to_string(dir.join("candidates.csv")).unwrap();
    assert!(csv.lines().next().unwrap().contains("on_air_support"));
    // every kept candidate carries SKP-152 with |k| = 2
    for row in csv.lines().skip(1) {
        assert!(
            row.contains("SKP-152:2") || row.contains("SKP-152:-2"),
            "{row}"
        );
    }
    xml_well_formed(&dir.join("fix.kml"));

    // a receiver whose channel does not hold the carrier is a bad argument
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        &s(field_log("emitters.csv")),
        "--log",
        &s(field_log("walk.csv")),
        "--out",
        tmp.path().join("u").to_str().unwrap(),
        "--receiver",
        "FIRE-RX",
        "--receivers",
        &s(field_log("receivers.csv")),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("outside the channel of `FIRE-RX`"));
}

/// When nothing explains the carrier the ticket is still written (the fix and the walk
/// are useful) but says so first, asks for no power step and lists what to check.
#[test]
fn ticket_says_first_when_nothing_explains_the_carrier() {
    let tmp = crate::support::scratch();
    let dir = tmp.path().join("t");
    let o = pim(&[
        "ticket",
        "300",
        "--max-order",
        "3",
        "--emitters",
        &s(field_log("emitters.csv")),
        "--log",
        &s(field_log("walk.csv")),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let out = stdout_of(&o);
    assert!(out.starts_with("Written all the same"), "{out}");
    let md = std::fs::read_to_string(dir.join("ticket.md")).unwrap();
    let said = md
        .find("Nothing explains the carrier: no product of the listed emitters lands")
        .unwrap_or_else(|| panic!("{md}"));
    assert!(said < md.find("## 1. What was heard").unwrap(), "{md}");
    assert!(md.contains("No product of up to 3 emitters and order up to 3 lands"));
    assert!(!md.contains("The first 0"), "{md}");
    assert!(!md.contains("Power step with the licensee"), "{md}");
    assert_eq!(md.matches("Instead of a power step, ").count(), 3, "{md}");
    assert!(md.contains("## 3. Where the junction is"));
}

/// The case: a seventh-order product of a broadcaster lands 435 kHz off the
/// centre of the 12.5 kHz channel by the skirt of its 920 kHz-wide spectrum; no power
/// step is asked of the broadcaster (invented stations).
#[test]
fn no_power_step_for_a_high_order_product_off_centre() {
    let tmp = crate::support::scratch();
    let tx = tmp.path().join("tx.csv");
    std::fs::write(
        &tx,
        "id,freq_mhz,bw_khz,erp_w,lat,lon,height_m,kind,owner\n\
         KQBC-FM,98.100,200,50000,45.110000,-122.400000,120,fm,Cedar Valley Broadcasting\n\
         LB-PAGE,81.875,40,200,45.104000,-122.413000,30,paging,Skerry Paging Co.\n",
    )
    .unwrap();
    // The walk's bearings without its levels: uncalibrated, the ranking is the model's.
    let quiet_walk = tmp.path().join("walk.csv");
    let walk = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    let rows: Vec<String> = walk
        .lines()
        .map(|l| {
            let mut f: Vec<&str> = l.splitn(8, ',').collect();
            if f[6] != "level_dbm" {
                f[6] = "";
            }
            f.join(",")
        })
        .collect();
    std::fs::write(&quiet_walk, rows.join("\n") + "\n").unwrap();
    let dir = tmp.path().join("t");
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        tx.to_str().unwrap(),
        "--log",
        &s(quiet_walk.clone()),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let md = std::fs::read_to_string(dir.join("ticket.md")).unwrap();
    // 4 × 98.100 − 3 × 81.875 = 146.775 MHz, 435 kHz above 146.34
    assert!(
        md.contains("| 4·KQBC-FM − 3·LB-PAGE | junction | 7 | 146.7750 | +435.0 |"),
        "{md}"
    );
    assert!(
        md.contains("No power step for the first candidate, 4·KQBC-FM − 3·LB-PAGE"),
        "{md}"
    );
    assert!(!md.contains("Power step with the licensee"), "{md}");
}

/// fix.geojson and fix.kml carry the whole site: every structure and every placed
/// emitter (id, kind, owner; frequency and ERP), the KML with one style per kind and each
/// placemark pointing at its kind's style; both stay well-formed with markup in the names.
#[test]
fn exports_carry_the_structures_and_emitters() {
    let tmp = crate::support::scratch();
    let tx = tmp.path().join("tx.csv");
    std::fs::write(
        &tx,
        "id,freq_mhz,bw_khz,erp_w,lat,lon,height_m,kind,owner\n\
         SKP-152,152.840,16,300,45.103405,-122.410791,40,paging,\"Skerry <Paging> & Co.\"\n\
         FIRE-DSP,159.340,11.25,100,45.105340,-122.412764,25,land mobile,Tillery County Fire\n\
         MOBILE-7,151.000,11.25,,,,,land mobile,\n",
    )
    .unwrap();
    let dir = tmp.path().join("t");
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        tx.to_str().unwrap(),
        "--log",
        &s(field_log("walk.csv")),
        "--structures",
        &s(field_log("structures.csv")),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let fc: geojson::FeatureCollection = std::fs::read_to_string(dir.join("fix.geojson"))
        .unwrap()
        .parse()
        .unwrap();
    let prop = |f: &geojson::Feature, k: &str| f.property(k).cloned().unwrap_or_default();
    let structures = std::fs::read_to_string(field_log("structures.csv")).unwrap();
    let structure_count = structures.lines().count() - 1;
    let of = |kind: &str| {
        fc.features
            .iter()
            .filter(|f| prop(f, "kind") == kind)
            .collect::<Vec<_>>()
    };
    assert_eq!(of("structure").len(), structure_count);
    let emitters = of("emitter");
    // MOBILE-7 has no position and cannot be placed
    assert_eq!(emitters.len(), 2);
    let skp = emitters
        .iter()
        .find(|f| prop(f, "id") == "SKP-152")
        .unwrap();
    assert_eq!(prop(skp, "item_kind"), "paging");
    assert_eq!(prop(skp, "owner"), "Skerry <Paging> & Co.");
    assert_eq!(prop(skp, "freq_mhz").as_f64(), Some(152.84));
    // 300 W is 54.77 dBm
    assert!((prop(skp, "erp_dbm").as_f64().unwrap() - 54.771).abs() < 0.01);
    let p = point(&skp.geometry.as_ref().unwrap().value);
    assert!((p.lat_deg - 45.103405).abs() < 1e-9 && (p.lon_deg + 122.410791).abs() < 1e-9);

    let kml = std::fs::read_to_string(dir.join("fix.kml")).unwrap();
    xml_well_formed(&dir.join("fix.kml"));
    assert!(kml.contains("Skerry &lt;Paging&gt; &amp; Co."), "{kml}");
    for (style, placemark) in [
        ("emitter-paging", "SKP-152"),
        ("emitter-land-mobile", "FIRE-DSP"),
        ("structure-guy-anchor", "OLD-TWR-GUY-N"),
        ("structure-guyed-tower", "OLD-TWR"),
    ] {
        assert_eq!(
            kml.matches(&format!("<Style id=\"{style}\">")).count(),
            1,
            "{style}"
        );
        assert!(
            kml.contains(&format!("<Placemark><name>{placemark}</name><description>"))
                && kml.contains(&format!("<styleUrl>#{style}</styleUrl>")),
            "{placemark}: {kml}"
        );
    }
    // every styleUrl points at a Style of the document
    for url in kml.split("<styleUrl>#").skip(1) {
        let id = &url[..url.find('<').unwrap()];
        assert!(kml.contains(&format!("<Style id=\"{id}\">")), "{id}");
    }
}

/// The affected receiver's own channel width and position are used, before the options'
/// defaults, and the ticket names it.
#[test]
fn the_affected_receivers_channel_and_position_are_used() {
    let tmp = crate::support::scratch();
    let rx = tmp.path().join("rx.csv");
    std::fs::write(
        &rx,
        "id,freq_mhz,bw_khz,lat,lon\nRX-W,146.345,25,45.1035,-122.4125\n",
    )
    .unwrap();
    let dir = tmp.path().join("t");
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        &s(field_log("emitters.csv")),
        "--log",
        &s(field_log("walk.csv")),
        "--out",
        dir.to_str().unwrap(),
        "--receiver",
        "RX-W",
        "--receivers",
        rx.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let md = std::fs::read_to_string(dir.join("ticket.md")).unwrap();
    assert!(
        md.contains("Affected receiver: RX-W (146.345 MHz, line 2 of")
            && md.contains("its 25.0 kHz channel and its position 45.103500, -122.412500 are used"),
        "{md}"
    );
    assert!(md.contains("in the 25.0 kHz receive channel"), "{md}");
    // ranked at the receiver too (its position is where the carrier is heard)
    assert!(
        md.contains("Moving the junction from the receiver to the fix"),
        "{md}"
    );
}
