//! The site walk: `pim log` under parallel and killed writers loses and tears nothing;
//! `pim next` picks the spot a brute-force evaluation of its criterion picks.

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

use crate::support::{field_log, pim, pim_bin, stderr_of, stdout_of, Rng};
use pim_core::fix::{locate, FixOptions};
use pim_core::geo::{distance_and_azimuth, GeoPoint};
use pim_io::fieldlog::{prepare, read_field_log};

fn log_args(file: &Path, i: usize) -> Vec<String> {
    let lat = 45.1020 + 0.0001 * (i % 37) as f64;
    let lon = -122.4140 + 0.0001 * (i % 23) as f64;
    vec![
        "log".into(),
        file.display().to_string(),
        "--lat".into(),
        format!("{lat:.6}"),
        "--lon".into(),
        format!("{lon:.6}"),
        "--bearing-deg".into(),
        format!("{:.1}", (i * 37 % 360) as f64),
        "--note".into(),
        format!("writer {i}"),
    ]
}

fn notes_in(file: &Path) -> Vec<String> {
    let log = read_field_log("log", std::fs::File::open(file).unwrap(), false)
        .unwrap_or_else(|e| panic!("the log no longer parses: {e}"));
    log.rows
        .iter()
        .map(|r| r.note.clone().unwrap_or_default())
        .collect()
}

#[test]
fn parallel_writers_interleave_whole_rows() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    let bin = pim_bin();
    let children: Vec<_> = (0..40)
        .map(|i| {
            Command::new(&bin)
                .args(log_args(&file, i))
                .stdout(Stdio::null())
                .stderr(Stdio::piped())
                .spawn()
                .unwrap()
        })
        .collect();
    for c in children {
        let o = c.wait_with_output().unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let mut notes = notes_in(&file);
    notes.sort();
    let mut want: Vec<String> = (0..40).map(|i| format!("writer {i}")).collect();
    want.sort();
    assert_eq!(notes, want);
    let text = std::fs::read_to_string(&file).unwrap();
    assert_eq!(text.matches("time,lat,lon").count(), 1, "one header only");
}

#[test]
fn killed_writers_tear_nothing_and_acknowledged_rows_stay() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    let bin = pim_bin();
    let mut rng = Rng::new(7);
    let mut acknowledged = Vec::new();
    for round in 0..12 {
        let children: Vec<_> = (0..6)
            .map(|k| {
                let i = round * 6 + k;
                let child = Command::new(&bin)
                    .args(log_args(&file, i))
                    .stdout(Stdio::null())
                    .stderr(Stdio::null())
                    .spawn()
                    .unwrap();
                (i, child)
            })
            .collect();
        std::thread::sleep(Duration::from_micros((rng.uniform() * 8_000.0) as u64));
        for (i, mut child) in children {
            if rng.uniform() < 0.5 {
                let _ = child.kill();
            }
            let status = child.wait().unwrap();
            if status.success() {
                acknowledged.push(format!("writer {i}"));
            }
        }
        // after every round the log parses: no torn row
        let notes = notes_in(&file);
        for a in &acknowledged {
            assert!(notes.contains(a), "acknowledged {a} lost");
        }
    }
    eprintln!("{} of 72 writers acknowledged", acknowledged.len());
    assert!(!acknowledged.is_empty());
}

#[test]
fn a_refused_reading_leaves_the_log_untouched() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &file).unwrap();
    let before = std::fs::read(&file).unwrap();
    for bad in [
        vec!["--bearing-deg", "400"],
        vec!["--bearing-deg", "NaN"],
        vec!["--bearing-deg", "12", "--reading-sigma-deg", "-1"],
        vec!["--bearing-deg", "12", "--sigma-deg", "-1"],
        vec!["--bearing-deg", "12", "--time", "yesterday"],
    ] {
        let mut args = vec![
            "log",
            file.to_str().unwrap(),
            "--lat",
            "45.1",
            "--lon",
            "-122.41",
        ];
        args.extend(bad.iter().copied());
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {}", stderr_of(&o));
        assert!(
            stderr_of(&o).contains("--"),
            "the option is named: {}",
            stderr_of(&o)
        );
    }
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "95",
        "--lon",
        "-122.41",
        "--bearing-deg",
        "10",
    ]);
    assert!(
        stderr_of(&o).contains("--lat: latitude 95 is outside"),
        "{}",
        stderr_of(&o)
    );
    assert_eq!(std::fs::read(&file).unwrap(), before);
    // a torn tail is reported, and nothing is appended to it
    std::fs::write(
        &file,
        b"time,lat,lon,bearing_deg\n2026-11-28T09:00:00Z,45.1,-122.41,1",
    )
    .unwrap();
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1",
        "--lon",
        "-122.41",
        "--bearing-deg",
        "10",
    ]);
    assert_eq!(o.status.code(), Some(3));
    assert!(
        stderr_of(&o).contains("line 2: the last row has no line end"),
        "{}",
        stderr_of(&o)
    );
    assert_eq!(
        std::fs::read(&file).unwrap(),
        b"time,lat,lon,bearing_deg\n2026-11-28T09:00:00Z,45.1,-122.41,1"
    );
}

#[test]
fn log_writes_in_an_existing_header_order_and_reports_the_fix() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    std::fs::write(&file, "bearing_deg,lon,lat,note,colour\n347.1,-122.413244,45.102534,gate,red\n296.6,-122.410732,45.103270,,\n").unwrap();
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.105799",
        "--lon",
        "-122.412867",
        "--bearing-deg",
        "214.2",
        "--note",
        "spur, north",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let text = std::fs::read_to_string(&file).unwrap();
    assert!(
        text.ends_with("214.2,-122.412867,45.105799,\"spur, north\",\n"),
        "{text}"
    );
    // Three readings leave one degree of freedom for the scatter: the fix is reported, or
    // its region is honestly unbounded; either way the reading was saved.
    let shown = stdout_of(&o);
    assert!(
        shown.contains("Running fix") || shown.contains("No fix yet"),
        "{shown}"
    );
}

/// `pim next` against a brute-force evaluation of its criterion (det of the Fisher
/// information after one more bearing; Gavish & Weiss 1992) on every candidate.
#[test]
fn next_picks_the_spot_with_the_largest_information() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let spots = dir.join("spots.csv");
    let mut rng = Rng::new(99);
    let mut text = String::from("lat,lon,name\n");
    let mut candidates = Vec::new();
    for i in 0..40 {
        let p = GeoPoint::new(
            45.1030 + 0.004 * rng.uniform(),
            -122.4170 + 0.006 * rng.uniform(),
        );
        text.push_str(&format!("{:.6},{:.6},spot {i}\n", p.lat_deg, p.lon_deg));
        candidates.push(GeoPoint::new(
            format!("{:.6}", p.lat_deg).parse().unwrap(),
            format!("{:.6}", p.lon_deg).parse().unwrap(),
        ));
    }
    std::fs::write(&spots, text).unwrap();
    let walk = field_log("walk.csv");
    let o = pim(&[
        "next",
        "--log",
        walk.to_str().unwrap(),
        "--candidates",
        spots.to_str().unwrap(),
        "--format",
        "json",
        "--sigma-deg",
        "4",
        "--use",
        "bearings",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();

    // brute force, independently of pim-core's walk module (the bearings' information:
    // the demo walk's levels are left out with --use bearings)
    let log = read_field_log("walk", std::fs::File::open(&walk).unwrap(), false).unwrap();
    let prepared = prepare(&log, None, None, time::OffsetDateTime::now_utc().date()).unwrap();
    let fix = locate(
        &prepared.readings,
        &FixOptions {
            sigma_deg: Some(4.0),
            ..Default::default()
        },
    )
    .unwrap();
    let c = fix.covariance_m2;
    let det_c = c[0][0] * c[1][1] - c[0][1] * c[1][0];
    let info = [
        [c[1][1] / det_c, -c[0][1] / det_c],
        [-c[1][0] / det_c, c[0][0] / det_c],
    ];
    let s = 4f64.to_radians();
    let mut best = (f64::MIN, 0usize);
    for (i, p) in candidates.iter().enumerate() {
        let (d, az) = distance_and_azimuth(*p, fix.position);
        if d < 25.0 {
            continue;
        }
        let t = az.to_radians();
        let u = [t.cos(), -t.sin()];
        let k = 1.0 / (s * s * d * d);
        let m = [
            [info[0][0] + k * u[0] * u[0], info[0][1] + k * u[0] * u[1]],
            [info[1][0] + k * u[1] * u[0], info[1][1] + k * u[1] * u[1]],
        ];
        let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
        if det > best.0 {
            best = (det, i);
        }
    }
    assert_eq!(v["name"], format!("spot {}", best.1));
    let chosen = v["information_det"].as_f64().unwrap();
    assert!((chosen / best.0 - 1.0).abs() < 1e-6);
    assert!(v["expected_semi_major_m"].as_f64().unwrap() < fix.ellipse.semi_major_m);
    assert_eq!(v["alternatives"].as_array().unwrap().len(), 4);

    // a ring of spots gives a spot at the asked radius
    let ring = pim(&[
        "next",
        "--log",
        walk.to_str().unwrap(),
        "--radius-m",
        "120",
        "--format",
        "json",
    ]);
    let r: serde_json::Value = serde_json::from_str(&stdout_of(&ring)).unwrap();
    assert!((r["distance_m"].as_f64().unwrap() - 120.0).abs() < 0.5);
}

/// `--track` without --lat/--lon takes the position (and, without --time, the time) of
/// the newest track point.
#[test]
fn log_takes_the_position_from_the_newest_track_point() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    let gpx = field_log("walk.gpx");
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--track",
        gpx.to_str().unwrap(),
        "--bearing-deg",
        "23.0",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let log = read_field_log("walk", std::fs::File::open(&file).unwrap(), false).unwrap();
    let row = &log.rows[0];
    // the walk's last point is the spot below the old tower, logged at 10:22:30
    let p = row.position.unwrap();
    assert!(
        (p.lat_deg - 45.103605).abs() < 1e-6 && (p.lon_deg + 122.414554).abs() < 1e-6,
        "{p:?}"
    );
    assert_eq!(
        row.time.unwrap().to_string(),
        "2026-11-28 10:22:30.0 +00:00:00"
    );
    let both = pim(&[
        "log",
        file.to_str().unwrap(),
        "--track",
        gpx.to_str().unwrap(),
        "--lat",
        "45.1",
        "--bearing-deg",
        "23.0",
    ]);
    assert_eq!(both.status.code(), Some(2));
}

/// `pim log --undo` takes back the last reading whole (printed) and leaves the log as it
/// was before it, in LF and CRLF logs; `--list` shows each reading's residual at the
/// running fix and marks the one the robust estimate sets aside. Positions typed in
/// degrees and minutes or degrees, minutes and seconds are saved as decimal degrees.
#[test]
fn log_takes_back_and_lists_readings() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    for crlf in [false, true] {
        let file = dir.join(if crlf { "walk-crlf.csv" } else { "walk.csv" });
        let original = std::fs::read_to_string(field_log("walk.csv")).unwrap();
        let original = if crlf {
            original.replace('\n', "\r\n")
        } else {
            original
        };
        std::fs::write(&file, &original).unwrap();
        let o = pim(&[
            "log",
            "--log",
            file.to_str().unwrap(),
            "--lat",
            "45°06.275'N",
            "--lon",
            "122 24 50.5 W",
            "--bearing-deg",
            "150",
            "--time",
            "2026-11-28T10:30:00Z",
        ]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        assert!(stdout_of(&o).contains("Saved to"), "{}", stdout_of(&o));
        let text = std::fs::read_to_string(&file).unwrap();
        let end = if crlf { "\r\n" } else { "\n" };
        assert!(
            text.ends_with(&format!(
                "2026-11-28T10:30:00Z,45.1045833,-122.4140278,150,true,,,{end}"
            )),
            "{text:?}"
        );
        // the positional form is the same log
        let o = pim(&["log", file.to_str().unwrap(), "--undo"]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        let shown = stdout_of(&o);
        assert!(
            shown.starts_with(&format!(
                "Took back line 10 of {}: 2026-11-28T10:30:00Z,45.1045833,-122.4140278,150,true,,,\n",
                file.display()
            )),
            "{shown}"
        );
        assert!(shown.contains("Running fix"), "{shown}");
        assert_eq!(std::fs::read_to_string(&file).unwrap(), original);
    }
    let file = dir.join("walk.csv");
    let o = pim(&[
        "log",
        "--log",
        file.to_str().unwrap(),
        "--list",
        "--wide",
        "--use",
        "bearings",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let shown = stdout_of(&o);
    // the demo walk's bearings: 7 of 8 readings carry the robust fix, the shed's reflection set aside
    // by the leave-one-out rule (line 3 down-weighted against six that agree closely)
    assert!(
        shown.starts_with("Running fix 45.104660, -122.413943 from 7 readings (robust"),
        "{shown}"
    );
    assert!(shown.contains("residual °"), "{shown}");
    assert_eq!(shown.matches("2026-11-28T").count(), 8, "{shown}");
    assert!(
        shown.contains("outlier") || shown.contains("down-weighted"),
        "{shown}"
    );
    // the listing in the formats of every listing
    let listed = |format: &str| {
        let o = pim(&[
            "log",
            "--log",
            file.to_str().unwrap(),
            "--list",
            "--use",
            "bearings",
            "--format",
            format,
        ]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        stdout_of(&o)
    };
    let v: serde_json::Value = serde_json::from_str(&listed("json")).unwrap();
    assert_eq!(v["fix"]["method"], "robust");
    assert_eq!(v["readings"].as_array().unwrap().len(), 8);
    assert_eq!(v["readings"][4]["status"], "outlier");
    let csv = listed("csv");
    assert!(
        csv.starts_with("line,time,lat_deg,lon_deg,bearing_deg,logged_bearing_deg,north,residual_deg,weight,status,note\n"),
        "{csv}"
    );
    assert_eq!(csv.lines().count(), 9, "{csv}");
    assert!(listed("markdown").contains("| line | time |"));
    // the estimator options reach the running fix
    let o = pim(&[
        "log",
        "--log",
        file.to_str().unwrap(),
        "--list",
        "--use",
        "bearings",
        "--method",
        "ml",
    ]);
    assert!(
        stdout_of(&o).contains("from 7 readings (maximum likelihood"),
        "{}",
        stdout_of(&o)
    );
    // nothing to take back under the header: refused, exit 5
    let empty = dir.join("empty.csv");
    std::fs::write(&empty, "time,lat,lon,bearing_deg\r\n").unwrap();
    let o = pim(&["log", "--log", empty.to_str().unwrap(), "--undo"]);
    assert_eq!(o.status.code(), Some(5), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).starts_with("pim: ") && stderr_of(&o).contains("no reading to take back"),
        "{}",
        stderr_of(&o)
    );
}

/// `--track` with --time places the new reading on the track at that time.
#[test]
fn log_places_a_reading_on_the_track_at_its_time() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let gpx = field_log("walk.gpx");
    let o = pim(&[
        "log",
        "--log",
        file.to_str().unwrap(),
        "--track",
        gpx.to_str().unwrap(),
        "--time",
        "2026-11-28T09:10:10Z",
        "--bearing-deg",
        "10",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let log = read_field_log("walk", std::fs::File::open(&file).unwrap(), false).unwrap();
    let p = log.rows[0].position.unwrap();
    // the track point at 09:10:10 in field-logs/walk.gpx
    assert!(
        (p.lat_deg - 45.102767).abs() < 1e-6 && (p.lon_deg + 122.412622).abs() < 1e-6,
        "{p:?}"
    );
    let o = pim(&[
        "log",
        "--log",
        file.to_str().unwrap(),
        "--track",
        gpx.to_str().unwrap(),
        "--time",
        "2026-11-29T09:10:10Z",
        "--bearing-deg",
        "10",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("outside the track"),
        "{}",
        stderr_of(&o)
    );
}

/// Files take positions in degrees and minutes, or degrees, minutes and seconds: a walk
/// so written fixes where the decimal one does.
#[test]
fn files_take_positions_in_minutes_and_seconds() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk-dms.csv");
    let mut text = String::new();
    for (i, line) in std::fs::read_to_string(field_log("walk.csv"))
        .unwrap()
        .lines()
        .enumerate()
    {
        if i == 0 {
            text.push_str(line);
        } else {
            // lat,lon as 45°06.15204'N and 122 24 47.678 W
            let cells: Vec<&str> = line.splitn(4, ',').collect();
            let lat: f64 = cells[1].parse().unwrap();
            let lon: f64 = -cells[2].parse::<f64>().unwrap();
            let m = (lat - 45.0) * 60.0;
            let (lm, ls) = (
                ((lon - 122.0) * 60.0).floor(),
                ((lon - 122.0) * 60.0).fract() * 60.0,
            );
            text.push_str(&format!(
                "{},\"45°{m:08.5}'N\",122 {lm:02} {ls:06.3} W,{}",
                cells[0], cells[3]
            ));
        }
        text.push('\n');
    }
    std::fs::write(&file, &text).unwrap();
    let json = |path: &Path| -> serde_json::Value {
        let o = pim(&["fix", "--log", path.to_str().unwrap(), "--format", "json"]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        serde_json::from_str(&stdout_of(&o)).unwrap()
    };
    let a = json(&field_log("walk.csv"));
    let b = json(&file);
    for k in ["lat_deg", "lon_deg"] {
        let (x, y) = (a[k].as_f64().unwrap(), b[k].as_f64().unwrap());
        assert!((x - y).abs() < 1e-6, "{k}: {x} vs {y}\n{text}");
    }
}

/// Emitter and structure files with positions in degrees, minutes and seconds give the
/// same levels and the same next spot as the decimal ones.
#[test]
fn site_files_take_positions_in_minutes_and_seconds() {
    let tmp = crate::support::scratch();
    // 45.103405 = 45°06'12.258"N; -122.410791 = 122°24'38.8476"W
    let dms = |v: f64, axis: (char, char)| {
        let h = if v < 0.0 { axis.1 } else { axis.0 };
        let a = v.abs();
        let d = a.floor();
        let m = ((a - d) * 60.0).floor();
        let s = ((a - d) * 60.0 - m) * 60.0;
        format!("{d}°{m:02}'{s:07.4}\"{h}")
    };
    let convert = |name: &str| {
        let mut out = csv::Writer::from_writer(Vec::new());
        let mut r = csv::Reader::from_path(field_log(name)).unwrap();
        let headers = r.headers().unwrap().clone();
        out.write_record(&headers).unwrap();
        for rec in r.records() {
            let rec = rec.unwrap();
            let cells: Vec<String> = headers
                .iter()
                .zip(rec.iter())
                .map(|(h, c)| match (h, c.parse::<f64>()) {
                    ("lat", Ok(v)) => dms(v, ('N', 'S')),
                    ("lon", Ok(v)) => dms(v, ('E', 'W')),
                    _ => c.to_string(),
                })
                .collect();
            out.write_record(&cells).unwrap();
        }
        let path = tmp.path().join(name);
        std::fs::write(&path, out.into_inner().unwrap()).unwrap();
        path
    };
    let (emitters, structures) = (convert("emitters.csv"), convert("structures.csv"));
    assert!(std::fs::read_to_string(&emitters)
        .unwrap()
        .contains("45°06'12.25"));
    let run = |args: &[&str]| {
        let o = pim(args);
        assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
        stdout_of(&o)
    };
    let walk = field_log("walk.csv");
    let w = walk.to_str().unwrap();
    let plain = field_log("emitters.csv");
    let at = |f: &Path| {
        run(&[
            "explain",
            "146.34",
            "--emitters",
            f.to_str().unwrap(),
            "--rx-lat",
            "45.103",
            "--rx-lon",
            "-122.412",
            "--format",
            "csv",
            "--limit",
            "5",
        ])
        .replace(f.to_str().unwrap(), "emitters.csv")
    };
    assert_eq!(at(&emitters), at(&plain));
    let next = |f: &Path| {
        run(&[
            "next",
            "--log",
            w,
            "--candidates",
            f.to_str().unwrap(),
            "--format",
            "csv",
        ])
    };
    let (a, b) = (next(&structures), next(&field_log("structures.csv")));
    let first = |t: &str| {
        t.lines()
            .nth(1)
            .unwrap()
            .split(',')
            .nth(1)
            .unwrap()
            .to_string()
    };
    assert_eq!(first(&a), first(&b), "{a}\n{b}");
}

/// A reading taken a few metres from the junction bends the region out of its ellipse:
/// the running fix then names the likelihood contour and its reach, not the ellipse, and
/// shows the fix's warnings as `pim fix` does.
#[test]
fn the_running_fix_names_the_region_it_claims() {
    let tmp = crate::support::scratch();
    let log = tmp.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    let log = log.display().to_string();
    let o = pim(&[
        "log",
        &log,
        "--lat",
        "45.1045833",
        "--lon",
        "-122.4140278",
        "--bearing-deg",
        "200",
        "--time",
        "2026-11-28T10:30:00Z",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let out = stdout_of(&o);
    assert!(out.contains("95% region reaching"), "{out}");
    assert!(!out.contains("95% ellipse"), "{out}");
    assert!(
        out.contains("warning: the ellipse misses the likelihood contour"),
        "{out}"
    );
    // the same log through pim fix: the reach is the contour's farthest point
    let o = pim(&["fix", "--log", &log, "--format", "json"]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["region_kind"], "likelihood", "{v}");
    let (lat, lon) = (
        v["lat_deg"].as_f64().unwrap(),
        v["lon_deg"].as_f64().unwrap(),
    );
    let reach = v["region"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            let q = GeoPoint::new(p[0].as_f64().unwrap(), p[1].as_f64().unwrap());
            distance_and_azimuth(GeoPoint::new(lat, lon), q).0
        })
        .fold(0.0, f64::max);
    assert!(
        out.contains(&format!("reaching {reach:.0} m")),
        "{out} vs {reach}"
    );
}
