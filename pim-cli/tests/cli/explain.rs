//! End-to-end runs of `pim explain`, `pim study` and `pim demo`: the demo files, the
//! output formats, and each kind of bad input with the message and exit code it must give.

use crate::support::{field_log, pim, pim_json, stderr_of, stdout_of};

fn path(p: std::path::PathBuf) -> String {
    p.display().to_string()
}

#[test]
fn explains_the_demo_carrier_with_the_planted_pair_first() {
    let tx = path(field_log("emitters.csv"));
    let o = pim(&[
        "explain",
        "146.34MHz",
        "--emitters",
        &tx,
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    // With the junction assumed at the repeater site itself, the repeater's own output
    // (about 125 dB(µV/m) at the tower base) may drive a fifth-order product above the
    // planted pair; the planted pair is the first third-order candidate (at the fix it is
    // first: cli_ticket).
    let first = v["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["order"] == 3)
        .unwrap();
    assert_eq!(first["formula"], "2·SKP-152 − FIRE-DSP");
    assert!(first["rank"].as_u64().unwrap() <= 2, "{first}");
    assert_eq!(first["product_mhz"], 146.34);
    assert_eq!(first["offset_khz"], 0.0);
    assert_eq!(first["terms"][0]["emitter"], "SKP-152");
    assert_eq!(first["terms"][0]["coefficient"], 2);
    assert!(first["predicted_level_dbm"].is_f64());
    assert_eq!(
        v["candidates_total"].as_u64().unwrap() as usize,
        v["candidates"].as_array().unwrap().len()
    );
    assert!(v["co_channel"].as_array().unwrap().is_empty());
}

#[test]
fn formats_agree_and_limit_is_kept() {
    let tx = path(field_log("emitters.csv"));
    let csv = pim(&["explain", "146.34", "--emitters", &tx, "--format", "csv"]);
    assert!(csv.status.success());
    let text = stdout_of(&csv);
    let mut lines = text.lines();
    assert!(lines
        .next()
        .unwrap()
        .starts_with("rank,formula,order,product_mhz"));
    assert!(lines
        .next()
        .unwrap()
        .starts_with("1,2·SKP-152 − FIRE-DSP,3,146.34,"));
    let limited = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--format",
        "json",
        "--limit",
        "1",
    ]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&limited)).unwrap();
    assert_eq!(v["candidates"].as_array().unwrap().len(), 1);
    let md = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--format",
        "markdown",
    ]);
    assert!(stdout_of(&md).contains("\n| # | product |"));
    let table = pim(&["explain", "146340kHz", "--emitters", &tx]);
    let t = stdout_of(&table);
    assert!(t.contains("2·SKP-152 − FIRE-DSP"), "{t}");
    assert!(t.contains("ranked by order, then offset"), "{t}");
}

#[test]
fn co_channel_emitters_are_listed_apart() {
    let tx = path(field_log("emitters.csv"));
    let o = pim(&[
        "explain",
        "152.84",
        "--emitters",
        &tx,
        "--format",
        "json",
        "--max-order",
        "3",
    ]);
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(v["co_channel"][0]["emitter"], "SKP-152");
    for c in v["candidates"].as_array().unwrap() {
        assert_ne!(c["formula"], "SKP-152");
    }
}

#[test]
fn study_lists_every_receiver() {
    let o = pim(&[
        "study",
        "--emitters",
        &path(field_log("emitters.csv")),
        "--receivers",
        &path(field_log("receivers.csv")),
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    let rx = v["receivers"].as_array().unwrap();
    assert_eq!(rx.len(), 4);
    assert_eq!(rx[0]["id"], "QK7MHR-IN");
    let third = rx[0]["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["order"] == 3)
        .unwrap();
    assert_eq!(third["formula"], "2·SKP-152 − FIRE-DSP");
    // Piped output carries no progress bar.
    assert!(!stderr_of(&o).contains("studying"));
}

#[test]
fn bad_arguments_are_refused_clearly() {
    let tx = path(field_log("emitters.csv"));
    for (args, want) in [
        (vec!["explain", "abc", "--emitters", &tx], "is not a number"),
        (
            vec!["explain", "-146.34", "--emitters", &tx],
            "must be above zero",
        ),
        (
            vec!["explain", "146.34", "--emitters", &tx, "--max-order", "0"],
            "0 is not in 1..=15",
        ),
        (
            vec!["explain", "146.34", "--emitters", &tx, "--max-order", "16"],
            "16 is not in 1..=15",
        ),
        (
            vec!["explain", "146.34", "--emitters", &tx, "--rx-bw-khz", "-5"],
            "is negative",
        ),
        (
            vec![
                "explain",
                "146.34",
                "--emitters",
                &tx,
                "--max-emitters",
                "4",
            ],
            "4 is not in 1..=3",
        ),
    ] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr_of(&o));
        assert!(stderr_of(&o).contains(want), "{args:?}: {}", stderr_of(&o));
    }
    let o = pim(&["explain", "146.34", "--emitters", "no-such-file.csv"]);
    assert_eq!(o.status.code(), Some(4));
    assert!(stderr_of(&o).contains("no-such-file.csv"));
}

/// `--rx-filter` reads a front-end filter (needs `--rx-iip3-dbm`); a bad point is refused
/// naming the file, the line and the field, with exit 3.
#[test]
fn a_receiver_filter_is_read_or_refused_by_line_and_field() {
    let dir = crate::support::scratch();
    let good = dir.path().join("cavity.csv");
    std::fs::write(&good, "offset_mhz,rejection_db\n0,0\n0.6,25\n6,60\n").unwrap();
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, "offset_mhz,rejection_db\n0,0\n0.6,lots\n").unwrap();
    let emitters = crate::support::field_log("emitters.csv");
    let run = |filter: &std::path::Path| {
        crate::support::pim(&[
            "explain",
            "146.34",
            "--emitters",
            emitters.to_str().unwrap(),
            "--rx-lat",
            "45.103",
            "--rx-lon",
            "-122.412",
            "--rx-iip3-dbm",
            "0",
            "--rx-filter",
            filter.to_str().unwrap(),
            "--format",
            "json",
        ])
    };
    let o = run(&good);
    assert!(
        matches!(o.status.code(), Some(0) | Some(5)),
        "{}",
        crate::support::stderr_of(&o)
    );
    let o = run(&bad);
    assert_eq!(o.status.code(), Some(3));
    let err = crate::support::stderr_of(&o);
    assert!(
        err.contains("bad.csv, line 3") && err.contains("rejection_db"),
        "{err}"
    );
}

/// `explain --power-steps`: what the demo's steps establish re-ranks `explain` as it does
/// the ticket. At the old tower the same pair made in SKP-152's output stage is predicted
/// far louder than the joint, but SKP-152's own step (1.8 dB/dB) moved the level, which
/// that mechanism does not follow: it is cleared, marked and ranked after the joint, and
/// the steps' drive exponent levels the listing.
#[test]
fn power_steps_re_rank_explain() {
    let tx = path(field_log("emitters.csv"));
    let steps = path(field_log("power-steps.csv"));
    let run = |extra: &[&str]| {
        let mut args = vec![
            "explain",
            "146.34",
            "--emitters",
            &tx,
            "--rx-lat",
            "45.10466",
            "--rx-lon",
            "-122.413943",
            "--junction-height-m",
            "36",
            "--format",
            "json",
        ];
        args.extend_from_slice(extra);
        pim_json(&args)
    };
    let plain = run(&[]);
    assert_eq!(plain["candidates"][0]["mechanism"], "transmitter-im");
    let stepped = run(&["--power-steps", &steps]);
    let first = &stepped["candidates"][0];
    assert_eq!(first["formula"], "2·SKP-152 − FIRE-DSP");
    assert_eq!(first["mechanism"], "junction");
    let second = &stepped["candidates"][1];
    assert_eq!(second["mechanism"], "transmitter-im");
    assert_eq!(second["cleared_by_steps"], true);
    let alpha = stepped["inputs"]["drive_exponent"].as_f64().unwrap();
    assert!((0.85..0.95).contains(&alpha), "{alpha}");
    assert!(stepped["inputs"]["cleared_by_steps"].as_u64().unwrap() >= 1);
}

/// `--junction-lat/--junction-lon` rank at a junction apart from the receiver (the
/// demo's fix, 250 m from a receiver down the hill): the levels differ from those with the junction
/// at the receiver, and the table says where the junction was assumed.
#[test]
fn a_junction_apart_from_the_receiver_is_ranked_there() {
    let tx = crate::support::field_log("emitters.csv");
    let tx = tx.to_str().unwrap();
    let at_rx = [
        "explain",
        "146.34",
        "--emitters",
        tx,
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
    ];
    let mut apart = at_rx.to_vec();
    apart.extend([
        "--junction-lat",
        "45.10466",
        "--junction-lon",
        "-122.413943",
    ]);
    let a = crate::support::pim(&at_rx);
    let b = crate::support::pim(&apart);
    assert!(a.status.success() && b.status.success());
    let (a, b) = (crate::support::stdout_of(&a), crate::support::stdout_of(&b));
    // the prose is wrapped for the terminal where the file's path ends
    let words = b.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        words.contains("junction assumed at 45.104660, -122.413943"),
        "{b}"
    );
    assert_ne!(a, b);
    let o = crate::support::pim(&[
        "explain",
        "146.34",
        "--emitters",
        tx,
        "--junction-lat",
        "45.1",
    ]);
    assert_eq!(o.status.code(), Some(2));
}
