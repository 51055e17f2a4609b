//! Files, links and outputs that cannot be turned against the user: the ticket written
//! all or nothing, never over an input or through a planted link, replaced only with
//! `--force`; the field log appended in its own dialect, never dropping a value; and
//! hostile text from files made harmless in CSV, Markdown, the terminal and XML.

use std::path::Path;

use crate::support::{field_log, pim, pim_in, stderr_of, stdout_of};

const TICKET: [&str; 7] = [
    "ticket.md",
    "ticket.html",
    "map.svg",
    "spectrum.svg",
    "fix.geojson",
    "fix.kml",
    "candidates.csv",
];

fn ticket_args(out: &Path, log: &Path, extra: &[&str]) -> Vec<String> {
    let mut a: Vec<String> = [
        "ticket",
        "146.34",
        "--emitters",
        field_log("emitters.csv").to_str().unwrap(),
        "--log",
        log.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    a.extend(extra.iter().map(|s| s.to_string()));
    a
}

fn run(args: &[String]) -> std::process::Output {
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    pim(&refs)
}

fn names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// An existing ticket is kept unless --force is given; the refusal names the files.
#[test]
fn an_existing_ticket_needs_force() {
    let tmp = crate::support::scratch();
    let out = tmp.path().join("t");
    let log = field_log("walk.csv");
    assert!(run(&ticket_args(&out, &log, &[])).status.success());
    std::fs::write(out.join("ticket.md"), "the crew's copy").unwrap();
    let o = run(&ticket_args(&out, &log, &[]));
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    let err = stderr_of(&o);
    assert!(
        err.contains("ticket.md") && err.contains("candidates.csv") && err.contains("--force"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(out.join("ticket.md")).unwrap(),
        "the crew's copy"
    );
    let o = run(&ticket_args(&out, &log, &["--force"]));
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(std::fs::read_to_string(out.join("ticket.md"))
        .unwrap()
        .starts_with("# PIM ticket"));
    assert_eq!(names(&out), {
        let mut v: Vec<String> = TICKET.iter().map(|s| s.to_string()).collect();
        v.sort();
        v
    });
}

/// An output that is one of the inputs is refused before anything is written, even
/// with --force.
#[test]
fn an_input_is_never_overwritten() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let log = dir.join("candidates.csv");
    std::fs::copy(field_log("walk.csv"), &log).unwrap();
    let before = std::fs::read(&log).unwrap();
    let o = run(&ticket_args(dir, &log, &["--force"]));
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("is the input"), "{}", stderr_of(&o));
    assert_eq!(std::fs::read(&log).unwrap(), before);
    assert_eq!(names(dir), ["candidates.csv"]);
}

/// A link planted at a ticket's name in a shared directory is replaced, never written
/// through; and a file that cannot be replaced leaves the earlier ticket whole.
#[cfg(unix)]
#[test]
fn planted_links_and_failed_renames_harm_nothing() {
    let tmp = crate::support::scratch();
    let victim = tmp.path().join("victim.txt");
    std::fs::write(&victim, "keep me").unwrap();
    let shared = tmp.path().join("shared");
    std::fs::create_dir(&shared).unwrap();
    std::os::unix::fs::symlink(&victim, shared.join("ticket.md")).unwrap();
    let log = field_log("walk.csv");
    let o = run(&ticket_args(&shared, &log, &["--force"]));
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert_eq!(std::fs::read_to_string(&victim).unwrap(), "keep me");
    assert!(!std::fs::symlink_metadata(shared.join("ticket.md"))
        .unwrap()
        .file_type()
        .is_symlink());

    // all or nothing: fix.kml cannot be replaced (a directory holding a file)
    let old = std::fs::read(shared.join("ticket.md")).unwrap();
    std::fs::remove_file(shared.join("fix.kml")).unwrap();
    std::fs::create_dir(shared.join("fix.kml")).unwrap();
    std::fs::write(shared.join("fix.kml").join("x"), "x").unwrap();
    let o = std::process::Command::new(crate::support::pim_bin())
        .env("SOURCE_DATE_EPOCH", "1764547200")
        .args(ticket_args(&shared, &log, &["--force", "--site", "Other"]))
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert_eq!(std::fs::read(shared.join("ticket.md")).unwrap(), old);
    let left: Vec<String> = names(&shared)
        .into_iter()
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "staging files left: {left:?}");
}

/// The demo replaces the folder it wrote itself, every time; a user's ticket in its
/// place needs --force.
#[test]
fn the_demo_runs_again_but_keeps_a_users_ticket() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    for _ in 0..2 {
        let o = pim_in(Some(dir), &["demo"]);
        assert!(o.status.success(), "{}", stderr_of(&o));
    }
    let users = dir.join("mine");
    std::fs::create_dir(&users).unwrap();
    std::fs::write(users.join("ticket.md"), "mine").unwrap();
    let o = pim_in(Some(dir), &["demo", "--out", "mine"]);
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert_eq!(
        std::fs::read_to_string(users.join("ticket.md")).unwrap(),
        "mine"
    );
    let o = pim_in(Some(dir), &["demo", "--out", "mine", "--force"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
}

fn log_reading(file: &Path, extra: &[&str]) -> std::process::Output {
    let mut a = vec![
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1025",
        "--lon",
        "-122.4132",
        "--bearing-deg",
        "347.1",
        "--time",
        "2026-11-28T10:40:00Z",
    ];
    a.extend_from_slice(extra);
    pim(&a)
}

/// `pim log` writes in the log's delimiter and line ends, after a comment line; what it
/// wrote, `pim fix` reads.
#[test]
fn log_appends_in_the_logs_own_dialect() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let original = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    let semicolon: String = original
        .lines()
        .map(|l| format!("{}\r\n", l.replace(',', ";")))
        .collect();
    std::fs::write(&file, format!("# walk of 28 Nov\r\n{semicolon}")).unwrap();
    let o = log_reading(&file, &["--note", "gate; north side"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let text = std::fs::read_to_string(&file).unwrap();
    assert!(
        text.ends_with(
            "2026-11-28T10:40:00Z;45.1025;-122.4132;347.1;true;;;\"gate; north side\"\r\n"
        ),
        "{text}"
    );
    assert!(stdout_of(&o).contains("Running fix"), "{}", stdout_of(&o));
    let o = pim(&["fix", "--log", file.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr_of(&o));
}

/// A value the log has no column for is refused, naming the column, never dropped.
#[test]
fn log_refuses_to_drop_a_value() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    std::fs::write(&file, "lat,lon,bearing_deg\n45.1,-122.41,10\n").unwrap();
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1",
        "--lon",
        "-122.40",
        "--bearing-deg",
        "300",
        "--north",
        "magnetic",
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o)
            .contains("field `north`: the log has no `north` column, so --north would be lost"),
        "{}",
        stderr_of(&o)
    );
    assert_eq!(
        std::fs::read_to_string(&file).unwrap(),
        "lat,lon,bearing_deg\n45.1,-122.41,10\n"
    );
    // true north and a clock time are what the log means without those columns
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1",
        "--lon",
        "-122.40",
        "--bearing-deg",
        "300",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
}

/// A magnetic bearing the World Magnetic Model cannot turn true is refused before it
/// would block every later fix.
#[test]
fn log_refuses_a_magnetic_bearing_outside_the_model() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let o = pim(&[
        "log",
        file.to_str().unwrap(),
        "--lat",
        "45.1",
        "--lon",
        "-122.41",
        "--bearing-deg",
        "10",
        "--north",
        "magnetic",
        "--time",
        "1990-06-01T10:00:00Z",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("World Magnetic Model"),
        "{}",
        stderr_of(&o)
    );
    assert!(!file.exists());
}

/// A torn last row is left out of the fix with a note; `pim log` refuses to append
/// after it and says how to mend it.
#[test]
fn a_torn_tail_is_reported_and_the_rest_used() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let mut text = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    text.push_str("2026-11-28T10:30:00Z,45.1025,-122.4132,347.1,true,,,whole but torn");
    std::fs::write(&file, &text).unwrap();
    let o = pim(&["fix", "--log", file.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("the last row has no line end"),
        "{}",
        stderr_of(&o)
    );
    let o = log_reading(&file, &[]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("or delete it"), "{}", stderr_of(&o));
    assert_eq!(std::fs::read_to_string(&file).unwrap(), text);
}

/// Hostile text in an emitter file: CSV cells that a spreadsheet would run are
/// neutralised, the terminal sees no raw control characters, the ticket's Markdown
/// cannot be forged, and its SVG and KML stay well-formed.
#[test]
fn hostile_text_is_harmless_everywhere() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let emitters = dir.join("emitters.csv");
    let original = std::fs::read_to_string(field_log("emitters.csv")).unwrap();
    let hostile = original.replacen(
        "\"Skerry Paging Co.\"",
        "\"=HYPERLINK(\"\"x\"\")\u{1b}]52;c;ZXZpbA==\u{7}\u{202e}<!--\n## Cautions\nnone ]]> & <b>\"",
        1,
    );
    let hostile = hostile.replacen("QK7MHR-R,", "@QK7MHR-R,", 1);
    std::fs::write(&emitters, hostile).unwrap();
    let e = emitters.to_str().unwrap();
    let o = pim(&["explain", "146.34", "--emitters", e, "--format", "csv"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let csv = stdout_of(&o);
    for line in csv.lines() {
        for cell in line.split(',') {
            let c = cell.trim_start_matches('"');
            assert!(
                !c.starts_with(['=', '@', '+']) || c.parse::<f64>().is_ok(),
                "{line}"
            );
        }
    }
    let o = pim(&["explain", "146.34", "--emitters", e]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(!o.stdout.contains(&0x1b) && !o.stdout.contains(&0x07));
    assert!(!stdout_of(&o).contains('\u{202e}'));

    let out = dir.join("t");
    let o = pim(&[
        "ticket",
        "146.34",
        "--emitters",
        e,
        "--log",
        field_log("walk.csv").to_str().unwrap(),
        "--site",
        "# Site <script>\u{1b}[2J",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let md = std::fs::read_to_string(out.join("ticket.md")).unwrap();
    let cautions = md.lines().filter(|l| l.contains("Cautions")).count();
    // every `<` is escaped (no comment, no raw HTML), no raw control character
    let raw_angle = md
        .char_indices()
        .any(|(i, c)| c == '<' && !md[..i].ends_with('\\'));
    assert!(!raw_angle && !md.contains('\u{1b}'), "{md}");
    assert!(
        md.lines().filter(|l| l.starts_with("## ")).count() == 6 && cautions >= 1,
        "{md}"
    );
    for f in ["map.svg", "spectrum.svg", "fix.kml"] {
        let text = std::fs::read_to_string(out.join(f)).unwrap();
        assert!(
            !text.contains(|c: char| c < ' ' && !"\t\n\r".contains(c)),
            "{f}"
        );
        crate::support::assert_xml_well_formed(&text, f);
    }
    let html = std::fs::read_to_string(out.join("ticket.html")).unwrap();
    assert!(!html.contains("<script") && !html.contains("<b>") && !html.contains('\u{1b}'));
    let csv = std::fs::read_to_string(out.join("candidates.csv")).unwrap();
    assert!(!csv.contains(",=") && !csv.contains(",@"), "{csv}");
}

/// The junction model's options are bounded to what a junction can do.
#[test]
fn junction_model_options_are_bounded() {
    for (option, value, want) in [
        ("--junction-dbc", "500", "500 dBc is outside -200…-20 dBc"),
        (
            "--junction-dbc",
            "1e300",
            "1e300 dBc is outside -200…-20 dBc",
        ),
        ("--max-im3-dbc", "0", "0 dBc is outside -140…-20 dBc"),
        ("--order-step-db", "-5", "-5 dB is outside 0…40 dB"),
    ] {
        let o = pim(&[
            "explain",
            "146.34",
            "--emitters",
            field_log("emitters.csv").to_str().unwrap(),
            option,
            value,
        ]);
        assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
        assert!(stderr_of(&o).contains(want), "{}", stderr_of(&o));
    }
}

/// A walk across longitude ±180° fixes like the same walk anywhere else: the junction
/// and the ellipse come out the same (geodesics by geographiclib-rs, Karney 2013).
#[test]
fn a_walk_across_the_antimeridian_fixes_like_any_other() {
    use pim_core::fix::{locate, FixOptions, Reading};
    use pim_core::geo::{destination, distance_and_azimuth, distance_m, GeoPoint};
    let walk = |junction: GeoPoint| -> Vec<Reading> {
        [
            (250.0, 600.0),
            (200.0, 500.0),
            (130.0, 700.0),
            (60.0, 450.0),
            (300.0, 550.0),
        ]
        .iter()
        .enumerate()
        .map(|(i, &(az, range))| {
            let observer = destination(junction, az, range);
            let (_, back) = distance_and_azimuth(observer, junction);
            // a fixed pattern of errors of a few degrees
            let err = [1.5, -2.0, 0.7, -1.1, 2.2][i];
            Reading {
                line: i as u64 + 2,
                observer,
                bearing_deg: (back + err).rem_euclid(360.0),
                sigma_deg: Some(3.0),
                position_accuracy_m: None,
            }
        })
        .collect()
    };
    let across = GeoPoint::new(-16.5, 179.999);
    let elsewhere = GeoPoint::new(-16.5, 12.0);
    let a = walk(across);
    assert!(a.iter().any(|r| r.observer.lon_deg < 0.0));
    let options = FixOptions::default();
    let fa = locate(&a, &options).unwrap_or_else(|e| panic!("{e:?}"));
    let fb = locate(&walk(elsewhere), &options).unwrap_or_else(|e| panic!("{e:?}"));
    let da = distance_and_azimuth(across, fa.position);
    let db = distance_and_azimuth(elsewhere, fb.position);
    assert!((da.0 - db.0).abs() < 0.5, "{da:?} {db:?}");
    assert!((fa.ellipse.semi_major_m - fb.ellipse.semi_major_m).abs() < 0.5);
    assert!(distance_m(across, fa.position) < 100.0);
}

/// A walk logged three times over gives the fix and ellipse of the walk logged once,
/// with a note saying so.
#[test]
fn repeated_readings_are_not_new_evidence() {
    let tmp = crate::support::scratch();
    let file = tmp.path().join("walk.csv");
    let text = std::fs::read_to_string(field_log("walk.csv")).unwrap();
    let (header, rows) = text.split_once('\n').unwrap();
    std::fs::write(&file, format!("{header}\n{rows}{rows}{rows}")).unwrap();
    let once = pim(&[
        "fix",
        "--log",
        field_log("walk.csv").to_str().unwrap(),
        "--format",
        "json",
    ]);
    let thrice = pim(&["fix", "--log", file.to_str().unwrap(), "--format", "json"]);
    assert!(thrice.status.success(), "{}", stderr_of(&thrice));
    assert!(
        stderr_of(&thrice).contains("counted once"),
        "{}",
        stderr_of(&thrice)
    );
    let ellipse = |o: &std::process::Output| {
        let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
        v["ellipse"]["semi_major_m"].as_f64().unwrap()
    };
    assert!((ellipse(&once) - ellipse(&thrice)).abs() < 1e-6);
}

/// `--svg` gets the ticket's protection: never an input (even with --force), never an
/// existing file without --force, never through a planted link.
#[test]
fn svg_never_eats_an_input() {
    let tmp = crate::support::scratch();
    let dir = tmp.path();
    let trace = dir.join("trace.csv");
    let emitters = dir.join("emitters.csv");
    std::fs::copy(field_log("trace.csv"), &trace).unwrap();
    std::fs::copy(field_log("emitters.csv"), &emitters).unwrap();
    let sweep = |svg: &Path, force: bool| {
        let mut a = vec![
            "sweep",
            trace.to_str().unwrap(),
            "--emitters",
            emitters.to_str().unwrap(),
            "--svg",
            svg.to_str().unwrap(),
        ];
        if force {
            a.push("--force");
        }
        pim(&a)
    };
    let (t0, e0) = (
        std::fs::read(&trace).unwrap(),
        std::fs::read(&emitters).unwrap(),
    );
    for input in [&trace, &emitters] {
        for force in [false, true] {
            let o = sweep(input, force);
            assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
            assert!(stderr_of(&o).contains("is the input"), "{}", stderr_of(&o));
        }
    }
    assert_eq!(std::fs::read(&trace).unwrap(), t0);
    assert_eq!(std::fs::read(&emitters).unwrap(), e0);

    let svg = dir.join("trace.svg");
    std::fs::write(&svg, "mine").unwrap();
    let o = sweep(&svg, false);
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("--force"), "{}", stderr_of(&o));
    assert_eq!(std::fs::read_to_string(&svg).unwrap(), "mine");
    let o = sweep(&svg, true);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(std::fs::read_to_string(&svg).unwrap().contains("<svg"));

    #[cfg(unix)]
    {
        let victim = dir.join("victim.txt");
        std::fs::write(&victim, "keep me").unwrap();
        let link = dir.join("planted.svg");
        std::os::unix::fs::symlink(&victim, &link).unwrap();
        let o = sweep(&link, false);
        assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
        let o = sweep(&link, true);
        assert!(o.status.success(), "{}", stderr_of(&o));
        assert_eq!(std::fs::read_to_string(&victim).unwrap(), "keep me");
        assert!(!std::fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink());
        // and a link to an input is the input
        let to_trace = dir.join("to-trace.svg");
        std::os::unix::fs::symlink(&trace, &to_trace).unwrap();
        let o = sweep(&to_trace, true);
        assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
        assert_eq!(std::fs::read(&trace).unwrap(), t0);
    }
    let left: Vec<String> = names(dir)
        .into_iter()
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}

/// Two tickets started at once into one new folder: never both succeed, and the folder
/// holds one run's set, never a mix (40 pairs; the loser exits 4).
#[test]
fn racing_tickets_never_mix() {
    let tmp = crate::support::scratch();
    let log = field_log("walk.csv");
    for round in 0..40 {
        let out = tmp.path().join(format!("t{round}"));
        let spawn = |site: &str| {
            std::process::Command::new(crate::support::pim_bin())
                .args(ticket_args(&out, &log, &["--site", site]))
                .stdout(std::process::Stdio::null())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        };
        let (a, b) = (spawn("Site-A"), spawn("Site-B"));
        let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
        let codes = (a.status.code(), b.status.code());
        assert!(
            matches!(codes, (Some(0), Some(4)) | (Some(4), Some(0))),
            "round {round}: {codes:?} {} {}",
            stderr_of(&a),
            stderr_of(&b)
        );
        let winner = if a.status.success() {
            "Site-A"
        } else {
            "Site-B"
        };
        for f in ["ticket.md", "ticket.html"] {
            let text = std::fs::read_to_string(out.join(f)).unwrap();
            assert!(
                text.contains(winner),
                "round {round}: {f} is not {winner}'s"
            );
        }
        assert!(
            names(&out).iter().all(|n| !n.starts_with('.')),
            "{:?}",
            names(&out)
        );
    }
}

/// A ticket's files get the mode the umask gives (0644 under 022, 0600 under 077), and
/// a path with a line end is shown escaped in the list of files written.
#[cfg(unix)]
#[test]
fn ticket_files_follow_the_umask_and_paths_are_escaped() {
    use std::os::unix::fs::PermissionsExt;
    let tmp = crate::support::scratch();
    let log = field_log("walk.csv");
    for (umask, mode) in [("022", 0o644), ("077", 0o600)] {
        let out = tmp.path().join(format!("u{umask}"));
        let args: Vec<String> = ticket_args(&out, &log, &[]);
        let o = std::process::Command::new("sh")
            .arg("-c")
            .arg(format!("umask {umask}; exec \"$0\" \"$@\""))
            .arg(crate::support::pim_bin())
            .args(&args)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", stderr_of(&o));
        for f in TICKET {
            let m = std::fs::metadata(out.join(f)).unwrap().permissions().mode() & 0o777;
            assert_eq!(m, mode, "{f} under umask {umask}");
        }
    }
    let out = tmp.path().join("two\nlines");
    let o = run(&ticket_args(&out, &log, &[]));
    assert!(o.status.success(), "{}", stderr_of(&o));
    let said = stdout_of(&o);
    assert!(said.contains("two\\x0alines"), "{said}");
    assert!(!said.contains("two\nlines"), "{said}");
}
