//! One vocabulary across commands (issue 14, items 1–3): the field log is `--log FILE`
//! everywhere, the estimator options and their robust default are shared, every listing
//! takes table, JSON, CSV and Markdown, quantity options take their unit, and every error,
//! the argument parser's included, reads `pim: …` with the README's exit codes. Also the
//! demo's printed commands, which redo its ticket on the files it wrote.

use crate::support::{field_log, pim, scratch, stderr_of, stdout_of};

fn json_of(args: &[&str]) -> serde_json::Value {
    let o = pim(args);
    assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
    serde_json::from_str(&stdout_of(&o)).unwrap_or_else(|e| panic!("{args:?}: {e}"))
}

/// `pim log` takes the log as `--log FILE` or positionally, never both or neither; its
/// running fix is the one `pim fix` gives with the same estimator options (robust by
/// default), so the field and the office agree.
#[test]
fn the_log_is_named_alike_and_fixed_alike() {
    let tmp = scratch();
    let walk = tmp.path().join("walk.csv");
    std::fs::copy(field_log("walk.csv"), &walk).unwrap();
    let w = walk.to_str().unwrap();
    for method in ["robust", "ml", "ls"] {
        let fix = json_of(&["fix", "--log", w, "--method", method, "--format", "json"]);
        let o = pim(&["log", "--log", w, "--list", "--method", method]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        let want = format!(
            "Running fix {:.6}, {:.6} ",
            fix["lat_deg"].as_f64().unwrap(),
            fix["lon_deg"].as_f64().unwrap()
        );
        assert!(
            stdout_of(&o).starts_with(&want),
            "{method}: {}",
            stdout_of(&o)
        );
    }
    // robust is the default of fix, log and next alike
    assert_eq!(
        json_of(&["fix", "--log", w, "--format", "json"])["method"],
        "robust"
    );
    for args in [vec!["log", "--list"], vec!["log", w, "--log", w, "--list"]] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        assert!(stderr_of(&o).starts_with("pim: "), "{}", stderr_of(&o));
    }
    // the old spellings are gone: one name for each thing
    let o = pim(&["log", w, "--gps-from", "x.gpx", "--bearing-deg", "1"]);
    assert_eq!(o.status.code(), Some(2));
    let o = pim(&["plan", "--grid", "150.0,12.5,10", "--order", "5"]);
    assert_eq!(o.status.code(), Some(2));
    let plan = json_of(&[
        "plan",
        "--grid",
        "150.0,12.5,10",
        "--max-order",
        "5",
        "--format",
        "json",
    ]);
    assert!(plan.is_object(), "{plan}");
}

/// `pim next` writes its spots in the four listing formats; spots are named by an `id`
/// column (a structures file) or `name`, and a spot without one by its coordinates.
#[test]
fn next_lists_in_every_format_and_names_every_spot() {
    let walk = field_log("walk.csv");
    let structures = field_log("structures.csv");
    let (w, s) = (walk.to_str().unwrap(), structures.to_str().unwrap());
    let base = [
        "next",
        "--log",
        w,
        "--candidates",
        s,
        "--min-range-m",
        "10m",
    ];
    let json = json_of(&[&base[..], &["--format", "json"]].concat());
    let best = json["name"].as_str().unwrap().to_string();
    let structures_text = std::fs::read_to_string(&structures).unwrap();
    assert!(structures_text.contains(&format!("\n{best},")), "{best}");
    let run = |format: &str| {
        let o = pim(&[&base[..], &["--format", format]].concat());
        assert!(o.status.success(), "{format}: {}", stderr_of(&o));
        stdout_of(&o)
    };
    let csv = run("csv");
    let mut lines = csv.lines();
    assert_eq!(
        lines.next(),
        Some("rank,spot,lat_deg,lon_deg,range_m,antenna_points_deg,ellipse_after_semi_major_m,ellipse_after_semi_minor_m")
    );
    assert!(
        lines.next().unwrap().starts_with(&format!("1,{best},")),
        "{csv}"
    );
    assert_eq!(csv.lines().count(), 1 + 5, "{csv}");
    // --limit, as in every listing, bounds the spots listed
    let o = pim(&[&base[..], &["--format", "csv", "--limit", "2"]].concat());
    assert_eq!(stdout_of(&o).lines().count(), 1 + 2, "{}", stdout_of(&o));
    let md = run("markdown");
    assert!(md.contains("| # | spot | lat | lon |"), "{md}");
    assert!(md.contains(&format!("| 1 | {} |", best)), "{md}");
    assert!(run("table").contains(&format!("Go to {best}: ")));
    // no name: the spot is called by its coordinates
    let tmp = scratch();
    let spots = tmp.path().join("spots.csv");
    std::fs::write(&spots, "lat,lon\n45.1060,-122.4160\n").unwrap();
    let o = pim(&["next", "--log", w, "--candidates", spots.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(
        stdout_of(&o).contains("Go to 45.106000, -122.416000, "),
        "{}",
        stdout_of(&o)
    );
    assert!(!stdout_of(&o).contains("the spot"), "{}", stdout_of(&o));
}

/// A quantity option takes its unit; a unit of another kind is refused naming the one
/// expected; a decimal comma gets the table reader's hint, in options and files alike.
#[test]
fn quantities_take_their_units() {
    let emitters = field_log("emitters.csv");
    let e = emitters.to_str().unwrap();
    let explain = |extra: &[&str]| {
        json_of(
            &[
                &["explain", "146.34", "--emitters", e, "--format", "json"][..],
                extra,
            ]
            .concat(),
        )
    };
    let plain = explain(&[
        "--rx-bw-khz",
        "12.5",
        "--junction-dbc",
        "-80",
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
    ]);
    for (bw, im3, lat) in [
        ("12.5kHz", "-80dBc", "45°06.18'N"),
        ("0.0125MHz", "-80 dBc", "45 06 10.8 N"),
        ("12500Hz", "-80", "N45.103"),
    ] {
        let v = explain(&[
            "--rx-bw-khz",
            bw,
            "--junction-dbc",
            im3,
            "--rx-lat",
            lat,
            "--rx-lon",
            "-122.412",
        ]);
        assert_eq!(v["candidates"], plain["candidates"], "{bw} {im3} {lat}");
    }
    let walk = field_log("walk.csv");
    let w = walk.to_str().unwrap();
    let a = json_of(&["fix", "--log", w, "--sigma-deg", "4", "--format", "json"]);
    let b = json_of(&["fix", "--log", w, "--sigma-deg", "4°", "--format", "json"]);
    assert_eq!(a, b);
    let o = pim(&["next", "--log", w, "--radius-m", "150m"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    for (args, want) in [
        (
            vec!["explain", "146.34", "--emitters", e, "--rx-bw-khz", "3dB"],
            "`3dB` is in dB; expected a frequency",
        ),
        (
            vec![
                "explain",
                "146.34",
                "--emitters",
                e,
                "--order-step-db",
                "3dBm",
            ],
            "`3dBm` is in dBm; expected dB",
        ),
        (
            vec![
                "explain",
                "146.34",
                "--emitters",
                e,
                "--junction-height-m",
                "30deg",
            ],
            "`30deg` is in °; expected metres",
        ),
        (
            vec!["explain", "146,34", "--emitters", e],
            "`146,34` is not a number (a decimal comma? write the number with a point)",
        ),
        (
            vec!["explain", "146.34", "--emitters", e, "--rx-bw-khz", "12,5"],
            "`12,5` is not a number (a decimal comma? write the number with a point)",
        ),
        (
            vec!["fix", "--log", w, "--sigma-deg", "4m"],
            "`4m` is in m; expected degrees",
        ),
        (
            vec!["next", "--log", w, "--radius-m", "150dB"],
            "`150dB` is in dB; expected metres",
        ),
    ] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        let err = stderr_of(&o);
        assert!(
            err.starts_with("pim: ") && err.contains(want),
            "{args:?}: {err}"
        );
    }
    // pim log stores the number of a quantity typed with its unit
    let tmp = scratch();
    let log = tmp.path().join("walk.csv");
    let l = log.to_str().unwrap();
    let o = pim(&[
        "log",
        "--log",
        l,
        "--lat",
        "45.1",
        "--lon",
        "-122.4",
        "--bearing-deg",
        "10°",
        "--reading-sigma-deg",
        "3deg",
        "--level-dbm",
        "-95dBm",
        "--time",
        "2026-11-28T09:00:00Z",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(
        std::fs::read_to_string(&log)
            .unwrap()
            .ends_with("\n2026-11-28T09:00:00Z,45.1,-122.4,10,true,3,-95,\n"),
        "{}",
        std::fs::read_to_string(&log).unwrap()
    );
    let o = pim(&[
        "log",
        "--log",
        l,
        "--lat",
        "45.1",
        "--lon",
        "-122.4",
        "--bearing-deg",
        "10dB",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr_of(&o).starts_with("pim: --bearing-deg: `10dB` is in dB; expected degrees"),
        "{}",
        stderr_of(&o)
    );
    // a decimal comma in a file gets the same words
    let bad = tmp.path().join("emitters.csv");
    std::fs::write(&bad, "id;freq_mhz\nA;146,94\n").unwrap();
    let o = pim(&["explain", "146.34", "--emitters", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(3));
    assert!(
        stderr_of(&o)
            .contains("`146,94` is not a number (a decimal comma? write the number with a point)"),
        "{}",
        stderr_of(&o)
    );
}

/// Every error reads `pim: …`, the argument parser's included, with the README's exit
/// codes; help and version still print and exit 0.
#[test]
fn every_error_in_one_style() {
    for (args, code) in [
        (vec!["explain"], 2),
        (vec!["fix", "--lgo", "walk.csv"], 2),
        (vec!["no-such-command"], 2),
        (vec!["fix", "--log", "no-such-walk.csv"], 4),
        (vec!["fix", "--log", "field-logs/emitters.csv"], 3),
    ] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(code), "{args:?}: {}", stderr_of(&o));
        let err = stderr_of(&o);
        assert!(err.starts_with("pim: "), "{args:?}: {err}");
        assert!(!err.contains("error:"), "{args:?}: {err}");
    }
    for args in [vec!["--help"], vec!["--version"], vec!["log", "--help"]] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(0), "{args:?}");
        assert!(!stdout_of(&o).is_empty());
    }
}

/// `pim demo` prints the commands it ran on the inputs it wrote beside the ticket; run
/// as printed, they write the same ticket (up to the inputs' folder), and the demo runs
/// again over its own folder.
#[test]
fn the_demo_prints_commands_that_redo_its_ticket() {
    let tmp = scratch();
    let dir = tmp.path();
    let run = |args: &[&str]| {
        let o = std::process::Command::new(crate::support::pim_bin())
            .args(args)
            .current_dir(dir)
            .env("SOURCE_DATE_EPOCH", "1796112000")
            .output()
            .unwrap();
        assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
        stdout_of(&o)
    };
    run(&["demo"]);
    let shown = run(&["demo"]);
    let commands: Vec<&str> = shown
        .lines()
        .map(str::trim)
        .filter(|l| l.starts_with("pim "))
        .collect();
    // fix, log, next, the two slopes, explain with the on-air evidence, study, plan, the
    // recording's sweep (its waterfall beside the folder), ticket
    assert_eq!(commands.len(), 10, "{shown}");
    assert!(
        commands[0].starts_with("pim fix --log pim-demo/walk.csv"),
        "{shown}"
    );
    for command in &commands {
        // the printed words, unquoted as a shell would
        let mut words: Vec<String> = Vec::new();
        let mut quoted = false;
        let mut word = String::new();
        for c in command.chars() {
            match c {
                '\'' => quoted = !quoted,
                ' ' if !quoted => words.push(std::mem::take(&mut word)),
                c => word.push(c),
            }
        }
        words.push(word);
        let args: Vec<&str> = words[1..].iter().map(String::as_str).collect();
        run(&args);
    }
    let mine = std::fs::read_to_string(dir.join("pim-demo/ticket.md")).unwrap();
    let again = std::fs::read_to_string(dir.join("pim-demo-again/ticket.md"))
        .unwrap()
        .replace("../pim-demo/", "");
    // the ticket names its inputs relative to its own folder: the demo's lie beside it,
    // the second ticket's in the demo's folder next to its own
    assert_eq!(mine, again);
}
