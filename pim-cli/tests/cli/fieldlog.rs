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
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();

    // brute force, independently of pim-core's walk module
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

/// `--gps-from` takes the position (and, without --time, the time) of the newest track
/// point.
#[test]
fn log_takes_the_position_from_the_newest_track_point() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let file = dir.join("walk.csv");
    let gpx = field_log("walk.gpx");
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--gps-from",
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
        "--gps-from",
        gpx.to_str().unwrap(),
        "--lat",
        "45.1",
        "--bearing-deg",
        "23.0",
    ]);
    assert_eq!(both.status.code(), Some(2));
}
