//! End-to-end runs of `pim fix`: the demo walk in every format, the JSON contract, the
//! exports parsed back with independent readers, and each kind of bad walk.

use crate::support::{field_log, pim, scratch, stderr_of, stdout_of};

fn p(path: std::path::PathBuf) -> String {
    path.display().to_string()
}

#[test]
fn json_follows_the_contract() {
    let o = pim(&[
        "fix",
        "--log",
        &p(field_log("walk.csv")),
        "--method",
        "robust",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    for key in ["lat_deg", "lon_deg", "cep_m", "sigma_deg_used", "n_used"] {
        assert!(v[key].is_number(), "{key}");
    }
    assert_eq!(v["method"], "robust");
    assert_eq!(v["sigma_source"], "estimated");
    for key in ["semi_major_m", "semi_minor_m", "orientation_deg"] {
        assert!(v["ellipse"][key].is_number(), "{key}");
    }
    // each reading named by its number in the log and its time, its line kept beside
    // (field-logs/walk.csv: the first row, line 2, taken at 09:12:40 UTC; the outlier
    // is the fifth, line 6)
    let first = &v["residuals"][0];
    assert_eq!(
        (&first["line"], &first["number"], &first["time"]),
        (
            &serde_json::json!(2),
            &serde_json::json!(1),
            &serde_json::json!("2026-11-28T09:12:40Z")
        )
    );
    assert_eq!(v["outliers"][0]["line"], 6);
    assert_eq!(v["outliers"][0]["number"], 5);
    assert_eq!(v["ellipse"]["confidence"], 0.95);
    let o_deg = v["ellipse"]["orientation_deg"].as_f64().unwrap();
    assert!((0.0..180.0).contains(&o_deg));
    assert_eq!(v["residuals"].as_array().unwrap().len(), 8);
    assert_eq!(v["residuals"][0]["line"], 2);
    // the reading beside the metal shed, line 6 of the log, is the reflection (set aside
    // by the leave-one-out rule; with it aside, line 3 is down-weighted against six that
    // agree within a degree)
    let outliers = v["outliers"].as_array().unwrap();
    let shed = outliers.iter().find(|o| o["line"] == 6).unwrap();
    assert!(shed["residual_deg"].as_f64().unwrap() > 30.0);
    assert!(v["warnings"].is_array());
    // two magnetic readings turned by the WMM declination (about +14° on this site)
    let d = v["declination"].as_array().unwrap();
    assert_eq!(d.len(), 2);
    assert_eq!(d[0]["source"], "WMM2025");
    assert!((d[0]["declination_deg"].as_f64().unwrap() - 14.3).abs() < 0.5);
    // the planted junction (45.104620, −122.414033) is inside the ellipse, a few metres off
    let (lat, lon) = (
        v["lat_deg"].as_f64().unwrap(),
        v["lon_deg"].as_f64().unwrap(),
    );
    assert!((lat - 45.104620).abs() < 1e-4 && (lon + 122.414033).abs() < 1e-4);
}

#[test]
fn options_are_applied() {
    let log = p(field_log("walk.csv"));
    let given = pim(&[
        "fix",
        "--log",
        &log,
        "--sigma-deg",
        "3",
        "--confidence",
        "0.5",
        "--format",
        "json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&given)).unwrap();
    assert_eq!(v["sigma_source"], "given");
    assert_eq!(v["sigma_deg_used"], 3.0);
    assert_eq!(v["ellipse"]["confidence"], 0.5);
    let declined = pim(&[
        "fix",
        "--log",
        &log,
        "--declination-deg",
        "14.0",
        "--format",
        "json",
    ]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&declined)).unwrap();
    assert_eq!(v["declination"][0]["source"], "given");
    assert_eq!(v["declination"][0]["declination_deg"], 14.0);
    let ls = pim(&["fix", "--log", &log, "--method", "ls", "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&ls)).unwrap();
    assert_eq!(v["method"], "ls");
    let table = pim(&["fix", "--log", &log]);
    assert!(stdout_of(&table).contains("95% ellipse"));
}

#[test]
fn track_places_readings_without_positions() {
    let with = pim(&[
        "fix",
        "--log",
        &p(field_log("walk.csv")),
        "--format",
        "json",
    ]);
    let placed = pim(&[
        "fix",
        "--log",
        &p(field_log("walk-no-positions.csv")),
        "--track",
        &p(field_log("walk.gpx")),
        "--format",
        "json",
    ]);
    assert!(placed.status.success(), "{}", stderr_of(&placed));
    let a: serde_json::Value = serde_json::from_str(&stdout_of(&with)).unwrap();
    let b: serde_json::Value = serde_json::from_str(&stdout_of(&placed)).unwrap();
    assert!((a["lat_deg"].as_f64().unwrap() - b["lat_deg"].as_f64().unwrap()).abs() < 1e-6);
    assert!((a["lon_deg"].as_f64().unwrap() - b["lon_deg"].as_f64().unwrap()).abs() < 1e-6);
}

/// GeoJSON read back with the geojson crate (RFC 7946): a Point fix, a closed Polygon
/// ellipse holding the fix, LineString bearings and observer Points.
#[test]
fn geojson_parses_and_holds_the_fix() {
    let o = pim(&[
        "fix",
        "--log",
        &p(field_log("walk.csv")),
        "--format",
        "geojson",
    ]);
    let fc: geojson::FeatureCollection = stdout_of(&o).parse().unwrap();
    let kinds: Vec<String> = fc
        .features
        .iter()
        .map(|f| f.property("kind").unwrap().as_str().unwrap().to_string())
        .collect();
    assert_eq!(kinds.iter().filter(|k| *k == "fix").count(), 1);
    assert_eq!(kinds.iter().filter(|k| *k == "ellipse").count(), 1);
    assert_eq!(kinds.iter().filter(|k| *k == "bearing").count(), 8);
    assert_eq!(kinds.iter().filter(|k| *k == "observer").count(), 8);
    let point = match &fc.features[0].geometry.as_ref().unwrap().value {
        geojson::GeometryValue::Point { coordinates } => coordinates.as_slice().to_vec(),
        other => panic!("{other:?}"),
    };
    let ring = match &fc.features[1].geometry.as_ref().unwrap().value {
        geojson::GeometryValue::Polygon { coordinates } => coordinates[0].clone(),
        other => panic!("{other:?}"),
    };
    assert_eq!(ring.first(), ring.last());
    // point in polygon by ray casting, and counterclockwise (positive) signed area
    let (x, y) = (point[0], point[1]);
    let mut inside = false;
    let mut area = 0.0;
    for w in ring.windows(2) {
        let (a, b) = (w[0].as_slice(), w[1].as_slice());
        if (a[1] > y) != (b[1] > y) && x < (b[0] - a[0]) * (y - a[1]) / (b[1] - a[1]) + a[0] {
            inside = !inside;
        }
        area += a[0] * b[1] - b[0] * a[1];
    }
    assert!(inside);
    assert!(area > 0.0, "RFC 7946 wants exterior rings counterclockwise");
}

/// KML read back as XML (quick-xml): one Point fix, a Polygon, LineStrings.
#[test]
fn kml_is_well_formed() {
    let o = pim(&["fix", "--log", &p(field_log("walk.csv")), "--format", "kml"]);
    let text = stdout_of(&o);
    let mut reader = quick_xml::Reader::from_str(&text);
    let (mut points, mut polygons, mut lines) = (0, 0, 0);
    loop {
        match reader.read_event().unwrap() {
            quick_xml::events::Event::Start(e) => match e.name().as_ref() {
                b"Point" => points += 1,
                b"Polygon" => polygons += 1,
                b"LineString" => lines += 1,
                _ => {}
            },
            quick_xml::events::Event::Eof => break,
            _ => {}
        }
    }
    assert_eq!((points, polygons, lines), (9, 1, 8));
    assert!(text.contains("xmlns=\"http://www.opengis.net/kml/2.2\""));
}

#[test]
fn bad_fix_arguments_are_refused() {
    for (args, want) in [
        (
            vec!["--confidence", "1.5"],
            "confidence 1.5 is outside 0.5–0.9999",
        ),
        // statrs' quantile panicked on this one once
        (
            vec!["--confidence", "1e-200"],
            "confidence 1e-200 is outside 0.5–0.9999",
        ),
        (vec!["--sigma-deg", "0.001"], "σ 0.001° is below 0.1°"),
        (vec!["--sigma-deg", "-1"], "must be above 0"),
        (vec!["--method", "guess"], "invalid value 'guess'"),
    ] {
        let mut full = vec!["fix", "--log", "field-logs/walk.csv"];
        full.extend(args);
        let o = pim(&full);
        assert_eq!(o.status.code(), Some(2));
        assert!(stderr_of(&o).contains(want), "{}", stderr_of(&o));
    }
}

/// The observers' position accuracy comes from the log's `accuracy_m`, else
/// `--position-accuracy-m`, else the stated default, and the fix says which; `--offset`
/// chooses whether a common offset is estimated.
#[test]
fn position_accuracy_and_offset_are_applied() {
    let log = p(field_log("walk.csv"));
    let table = stdout_of(&pim(&["fix", "--log", &log]));
    assert!(
        table.contains("positions taken as within 12 m (a handheld GPS"),
        "{table}"
    );
    assert!(!table.contains("degrees of freedom"), "{table}");
    let stated = pim(&[
        "fix",
        "--log",
        &log,
        "--position-accuracy-m",
        "3",
        "--offset",
        "none",
        "--format",
        "json",
    ]);
    assert!(stated.status.success(), "{}", stderr_of(&stated));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&stated)).unwrap();
    assert_eq!(v["position_accuracy"]["source"], "stated");
    assert_eq!(v["position_accuracy"]["typical_m"], 3.0);
    assert!(v["offset"].is_null());
    // σ estimated: the region's law is on record, never on screen
    assert!(v["sigma_dof"].as_f64().unwrap() >= 1.0);
    assert!(v["reach_along_axes_m"][0].as_f64().unwrap() > 0.0);
    // a log whose rows carry their own accuracy: the column wins over the option
    let dir = scratch();
    let text = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    let mut lines = text.lines();
    let mut logged = format!("{},accuracy_m\n", lines.next().unwrap());
    for l in lines {
        logged.push_str(&format!("{l},6\n"));
    }
    let file = dir.path().join("walk-accuracy.csv");
    std::fs::write(&file, logged).unwrap();
    let o = pim(&[
        "fix",
        "--log",
        file.to_str().unwrap(),
        "--position-accuracy-m",
        "3",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["position_accuracy"]["source"], "logged");
    assert_eq!(v["position_accuracy"]["typical_m"], 6.0);
    let bad = pim(&["fix", "--log", &log, "--position-accuracy-m", "-2"]);
    assert_eq!(bad.status.code(), Some(2));
    assert!(
        stderr_of(&bad).contains("must lie within 0–1000 m"),
        "{}",
        stderr_of(&bad)
    );
}

/// `pim fix` exports the site beside the fix when given its structures and emitters, as
/// the ticket's fix.geojson and fix.kml do; the text formats refuse them.
#[test]
fn fix_exports_carry_the_site_when_given() {
    let (structures, emitters) = (p(field_log("structures.csv")), p(field_log("emitters.csv")));
    let log = p(field_log("walk.csv"));
    let with = |format: &str| {
        pim(&[
            "fix",
            "--log",
            &log,
            "--format",
            format,
            "--structures",
            &structures,
            "--emitters",
            &emitters,
        ])
    };
    let o = with("geojson");
    assert!(o.status.success(), "{}", stderr_of(&o));
    let fc: geojson::FeatureCollection = stdout_of(&o).parse().unwrap();
    let ids: Vec<(String, String)> = fc
        .features
        .iter()
        .filter_map(|f| {
            Some((
                f.property("kind")?.as_str()?.to_string(),
                f.property("id")?.as_str()?.to_string(),
            ))
        })
        .collect();
    assert!(
        ids.contains(&("structure".into(), "OLD-TWR".into())),
        "{ids:?}"
    );
    assert!(
        ids.contains(&("emitter".into(), "SKP-152".into())),
        "{ids:?}"
    );
    let o = with("kml");
    assert!(o.status.success(), "{}", stderr_of(&o));
    let kml = stdout_of(&o);
    crate::support::assert_xml_well_formed(&kml, "fix --format kml");
    assert!(
        kml.contains("<styleUrl>#emitter-paging</styleUrl>"),
        "{kml}"
    );
    let o = with("table");
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("geojson and kml only"),
        "{}",
        stderr_of(&o)
    );
}

/// A level at each of `spots` (azimuth from the demo's junction, range m) by the
/// log-distance law with exponent 2.5 and L₀ −40 dBm, alternately 1 dB high and low.
fn level_only_log(spots: &[(f64, f64)]) -> String {
    let junction = pim_core::geo::GeoPoint::new(45.104620, -122.414033);
    let mut text = String::from("lat,lon,level_dbm,setup\n");
    for (i, &(az, d)) in spots.iter().enumerate() {
        let o = pim_core::geo::destination(junction, az, d);
        let level = -40.0 - 25.0 * d.log10() + if i % 2 == 0 { 1.0 } else { -1.0 };
        text.push_str(&format!(
            "{:.7},{:.7},{level:.1},probe 1\n",
            o.lat_deg, o.lon_deg
        ));
    }
    text
}

#[test]
fn levels_alone_fix_or_say_no_fix() {
    let dir = scratch();
    let spots: Vec<(f64, f64)> = (0..10)
        .map(|i| {
            (
                i as f64 * 36.0 + 11.0,
                5.0 + 35.0 * ((i * 7) % 10) as f64 / 9.0,
            )
        })
        .collect();
    let log = dir.path().join("sniff.csv");
    std::fs::write(&log, level_only_log(&spots)).unwrap();
    let o = pim(&["fix", "--log", &p(log.clone()), "--format", "json"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["measurements"], "levels");
    for key in ["exponent", "l0_dbm", "sigma_db"] {
        assert!(v["level_model"][key].is_number(), "{key}");
    }
    assert_eq!(v["level_residuals"].as_array().unwrap().len(), 10);
    assert!(v["level_residuals"][0]["residual_db"].is_number());
    let (lat, lon) = (
        v["lat_deg"].as_f64().unwrap(),
        v["lon_deg"].as_f64().unwrap(),
    );
    assert!((lat - 45.104620).abs() < 3e-5 && (lon + 122.414033).abs() < 4e-5);
    // the table names the measurements and shows each level's residual in dB
    let t = pim(&["fix", "--log", &p(log.clone())]);
    assert!(t.status.success(), "{}", stderr_of(&t));
    let text = stdout_of(&t);
    assert!(
        text.contains("levels only") && text.contains("residual dB"),
        "{text}"
    );
    // the near field: 1 m without a frequency, said so; λ/2π with --freq (at 30 MHz,
    // 10 m / 2π = 1.59 m), in the JSON and the table alike
    assert_eq!(v["level_model"]["near_field"]["from"], "fallback");
    assert_eq!(v["level_model"]["near_field_m"], 1.0);
    assert!(
        text.contains("within 1.00 m of the fix") && text.contains("no frequency given"),
        "{text}"
    );
    let o = pim(&[
        "fix",
        "--log",
        &p(log.clone()),
        "--freq",
        "30MHz",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["level_model"]["near_field"]["from"], "wavelength");
    assert_eq!(v["level_model"]["near_field"]["freq_hz"], 30_000_000);
    let reach = v["level_model"]["near_field_m"].as_f64().unwrap();
    assert!((reach - 1.59).abs() < 0.01, "{reach}");
    let t = pim(&["fix", "--log", &p(log.clone()), "--freq", "30MHz"]);
    let text = stdout_of(&t);
    assert!(
        text.contains("within 1.59 m of the fix") && text.contains("λ/2π at 30.0 MHz"),
        "{text}"
    );
    // three spots: no fix, a refusal (exit 5)
    std::fs::write(&log, level_only_log(&spots[..3])).unwrap();
    let o = pim(&["fix", "--log", &p(log.clone())]);
    assert_eq!(o.status.code(), Some(5), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("at least 4 spots"),
        "{}",
        stderr_of(&o)
    );
}

/// Levels alone from five spots on one side of the junction (12–51 m out, within 25° as
/// seen from it): the 95 % region does not close, and every output says so instead of
/// giving the search's reach as a size: the table and `pim next` name the open side, the
/// warning says what walk would close it, the JSON gives no reach and no CEP.
#[test]
fn an_open_level_region_is_said_open_not_measured() {
    let dir = scratch();
    let log = dir.path().join("one-side.csv");
    std::fs::write(
        &log,
        "lat,lon,level_dbm\n\
         45.104413,-122.413859,-73.4\n\
         45.104238,-122.413817,-85.3\n\
         45.104408,-122.413936,-74.2\n\
         45.104099,-122.413838,-80.3\n\
         45.104311,-122.413833,-82.6\n",
    )
    .unwrap();
    let t = pim(&["fix", "--log", &p(log.clone())]);
    assert!(t.status.success(), "{}", stderr_of(&t));
    let text = stdout_of(&t);
    assert!(
        text.contains("95% region open towards") && text.contains("no size and no CEP"),
        "{text}"
    );
    assert!(
        !text.contains("49") && !text.contains("CEP ") && text.contains("would close it"),
        "{text}"
    );
    let o = pim(&["fix", "--log", &p(log.clone()), "--format", "json"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert!(v["region_open_towards_deg"].is_number(), "{v}");
    for key in ["cep_m", "reach_m", "reach_along_axes_m"] {
        assert!(v[key].is_null(), "{key}: {}", v[key]);
    }
    let g = pim(&["fix", "--log", &p(log.clone()), "--format", "geojson"]);
    let g: serde_json::Value = serde_json::from_str(&stdout_of(&g)).unwrap();
    assert!(g["features"][0]["properties"]["cep_m"].is_null(), "{g}");
    assert!(g["features"][1]["properties"]["open_towards_deg"].is_number());
    let k = pim(&["fix", "--log", &p(log.clone()), "--format", "kml"]);
    assert!(stdout_of(&k).contains("region open towards") && !stdout_of(&k).contains("CEP"));
    let n = pim(&["next", "--log", &p(log.clone()), "--radius-m", "100"]);
    assert!(n.status.success(), "{}", stderr_of(&n));
    assert!(
        stdout_of(&n).contains("region open towards"),
        "{}",
        stdout_of(&n)
    );
    // the ticket and its map: the open side named, no reach or CEP given as a size
    let out = dir.path().join("ticket");
    let t = pim(&[
        "ticket",
        "--emitters",
        &p(field_log("emitters.csv")),
        "--log",
        &p(log),
        "--out",
        &p(out.clone()),
        "--rx-lat",
        "45.1046",
        "--rx-lon",
        "-122.414",
        "146.34MHz",
    ]);
    assert!(t.status.success(), "{}", stderr_of(&t));
    let md = std::fs::read_to_string(out.join("ticket.md")).unwrap();
    assert!(md.contains("region open towards") && md.contains("open on one side"));
    assert!(!md.contains("50000 m") && !md.contains("circular error probable"));
    let map = std::fs::read_to_string(out.join("map.svg")).unwrap();
    assert!(map.contains("region is open towards"));
}

/// A log with no levels gives exactly the bearings-only fix: the demo walk with its
/// level column taken out, and the demo walk with `--use bearings`, give byte-identical
/// JSON.
#[test]
fn without_levels_the_fix_is_the_bearing_fix() {
    let dir = scratch();
    let text = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    let stripped: String = text
        .lines()
        .map(|l| {
            // level_dbm is the 7th cell; the note (quoted, without commas) follows it
            let mut cells: Vec<&str> = l.splitn(8, ',').collect();
            cells.remove(6);
            cells.join(",") + "\n"
        })
        .collect();
    let log = dir.path().join("walk.csv");
    std::fs::write(&log, stripped).unwrap();
    let a = pim(&["fix", "--log", &p(log.clone()), "--format", "json"]);
    let b = pim(&[
        "fix",
        "--log",
        &p(field_log("walk.csv")),
        "--use",
        "bearings",
        "--format",
        "json",
    ]);
    assert!(
        a.status.success() && b.status.success(),
        "{}",
        stderr_of(&a)
    );
    assert_eq!(stdout_of(&a), stdout_of(&b));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&a)).unwrap();
    assert_eq!(v["measurements"], "bearings");
    assert!(v.get("level_model").is_none());
    // the log without levels cannot be asked for them
    let o = pim(&["fix", "--log", &p(log), "--use", "levels"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("--use"), "{}", stderr_of(&o));
}

/// `pim log --setup NAME` logs a level with its setup group: a new log gets the `setup`
/// column, each setup has its own L₀ in the fix (a 20 dB pad put in half way shifts
/// every level of its group, not the position), a log that names the column `antenna`
/// takes the setup there, and a log with neither column says so and is left as it was.
#[test]
fn pim_log_records_the_setup_of_a_level() {
    let dir = scratch();
    let log = dir.path().join("sniff.csv");
    let junction = pim_core::geo::GeoPoint::new(45.104620, -122.414033);
    let log_level = |file: &std::path::Path, i: usize, setup: Option<&str>| {
        let (az, d) = (
            i as f64 * 36.0 + 11.0,
            5.0 + 35.0 * ((i * 7) % 10) as f64 / 9.0,
        );
        let o = pim_core::geo::destination(junction, az, d);
        let pad = if setup == Some("pad 20 dB") {
            20.0
        } else {
            0.0
        };
        let level = -40.0 - 25.0 * d.log10() + if i.is_multiple_of(2) { 1.0 } else { -1.0 } - pad;
        let (lat, lon, level) = (
            format!("{:.7}", o.lat_deg),
            format!("{:.7}", o.lon_deg),
            format!("{level:.1}"),
        );
        let mut args = vec![
            "log",
            file.to_str().unwrap(),
            "--lat",
            &lat,
            "--lon",
            &lon,
            "--level-dbm",
            &level,
            "--time",
            "2026-11-28T10:40:00Z",
        ];
        if let Some(s) = setup {
            args.extend(["--setup", s]);
        }
        pim(&args)
    };
    for i in 0..10 {
        let setup = if i < 5 { "probe 1" } else { "pad 20 dB" };
        let o = log_level(&log, i, Some(setup));
        assert!(o.status.success(), "{}", stderr_of(&o));
    }
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(
        text.starts_with("time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,setup,note\n"),
        "{text}"
    );
    assert_eq!(text.matches(",pad 20 dB,").count(), 5, "{text}");
    let o = pim(&["fix", "--log", &p(log.clone()), "--format", "json"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    let setups = v["level_model"]["setups"].as_array().unwrap();
    assert_eq!(setups.len(), 2, "{v}");
    assert_eq!(setups[0]["setup"], "probe 1");
    assert_eq!(setups[1]["setup"], "pad 20 dB");
    let step = setups[0]["l0_dbm"].as_f64().unwrap() - setups[1]["l0_dbm"].as_f64().unwrap();
    assert!((step - 20.0).abs() < 3.0, "{step}");
    let (lat, lon) = (
        v["lat_deg"].as_f64().unwrap(),
        v["lon_deg"].as_f64().unwrap(),
    );
    assert!((lat - 45.104620).abs() < 4e-5 && (lon + 122.414033).abs() < 5e-5);
    // a log that calls the column `antenna` gets the setup there
    let antenna = dir.path().join("antenna.csv");
    std::fs::write(
        &antenna,
        "time,lat,lon,bearing_deg,level_dbm,antenna,note\n",
    )
    .unwrap();
    let o = log_level(&antenna, 0, Some("yagi"));
    assert!(o.status.success(), "{}", stderr_of(&o));
    let text = std::fs::read_to_string(&antenna).unwrap();
    assert!(text.lines().nth(1).unwrap().ends_with(",yagi,"), "{text}");
    // a log with neither column: refused, naming --setup, and the log left as it was
    let plain = dir.path().join("plain.csv");
    std::fs::write(&plain, "time,lat,lon,bearing_deg,level_dbm,note\n").unwrap();
    let o = log_level(&plain, 0, Some("yagi"));
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("--setup"), "{}", stderr_of(&o));
    assert_eq!(
        std::fs::read_to_string(&plain).unwrap(),
        "time,lat,lon,bearing_deg,level_dbm,note\n"
    );
    // a setup with no level: refused by the command line
    let o = pim(&[
        "log",
        plain.to_str().unwrap(),
        "--lat",
        "45.1",
        "--lon",
        "-122.4",
        "--bearing-deg",
        "10",
        "--setup",
        "yagi",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
}

/// Front/back readings with levels: `--ambiguous --use both` fixes from both, each
/// bearing taken the way nearer the joint fix, and says it used both.
#[test]
fn ambiguous_bearings_join_the_levels_when_asked() {
    let o = pim(&[
        "fix",
        "--log",
        &p(field_log("walk.csv")),
        "--ambiguous",
        "--use",
        "both",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["measurements"], "both");
    let (lat, lon) = (
        v["lat_deg"].as_f64().unwrap(),
        v["lon_deg"].as_f64().unwrap(),
    );
    // the demo's junction, within the walk's own scatter
    assert!(
        (lat - 45.104620).abs() < 3e-4 && (lon + 122.414033).abs() < 4e-4,
        "{lat} {lon}"
    );
}
