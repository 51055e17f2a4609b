//! `pim sweep` end to end: the demo trace explained, repeated sweeps held, the trace
//! picture, and a grid mismatch refused with exit 3.

use crate::support::{field_log, pim, stderr_of, stdout_of};

#[test]
fn sweep_command_explains_the_demo_trace() {
    let trace = field_log("trace.csv").display().to_string();
    let tx = field_log("emitters.csv").display().to_string();
    let o = pim(&[
        "sweep",
        &trace,
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
    let peaks = v["peaks"].as_array().unwrap();
    let product = peaks
        .iter()
        .find(|p| (p["freq_mhz"].as_f64().unwrap() - 146.34).abs() < 0.004)
        .expect("a peak at 146.34 MHz");
    assert_eq!(product["kind"], "product");
    // At the receiver site the repeater's own output drives a junction hardest, so a
    // fifth-order product of it may lead; the planted pair is the first third-order one.
    let first_third = product["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["order"] == 3)
        .expect("a third-order candidate");
    assert_eq!(first_third["formula"], "2·SKP-152 − FIRE-DSP");
    assert!(peaks.iter().any(|p| p["kind"] == "emitter"
        && p["emitters"]
            .as_array()
            .unwrap()
            .iter()
            .any(|e| e == "SKP-152")));
    assert!(v["floor"]["typical_dbm"].is_f64());

    // The same sweep twice, held: the same peaks.
    let o = pim(&[
        "sweep",
        &trace,
        &trace,
        "--emitters",
        &tx,
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let twice: serde_json::Value = serde_json::from_str(&stdout_of(&o)).unwrap();
    assert_eq!(twice["trace"]["sweeps"], 2);
    let freqs = |v: &serde_json::Value| -> Vec<f64> {
        v["peaks"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["freq_mhz"].as_f64().unwrap())
            .collect()
    };
    assert_eq!(freqs(&twice), freqs(&v));

    // The picture, and a second trace on another grid refused by file and line.
    let dir = std::env::temp_dir().join(format!("pim-sweep-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let svg = dir.join("trace.svg");
    let o = pim(&[
        "sweep",
        &trace,
        "--emitters",
        &tx,
        "--svg",
        &svg.display().to_string(),
    ]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let text = std::fs::read_to_string(&svg).unwrap();
    crate::support::assert_xml_well_formed(&text, "trace.svg");
    assert!(text.contains("2·SKP-152 − FIRE-DSP") && text.contains("? 159.1520"));
    let other = dir.join("other.csv");
    std::fs::write(
        &other,
        "freq_mhz,level_dbm\n150.0,-100\n150.01,-100\n150.02,-100\n",
    )
    .unwrap();
    let other = other.display().to_string();
    let o = pim(&["sweep", &trace, &other, "--emitters", &tx]);
    assert_eq!(o.status.code(), Some(3), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("other.csv, line 2, field `freq_mhz`"),
        "{}",
        stderr_of(&o)
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// A trace on a log-spaced grid is refused, never read as uniform (each point checked
/// against start + i·step, a quarter step allowed): its peak at 151.789 MHz would
/// otherwise be reported kilohertz away.
#[test]
fn a_log_spaced_trace_is_refused() {
    let tmp = crate::support::scratch();
    let trace = tmp.path().join("log-spaced.csv");
    let (n, a, b) = (2000, 144e6_f64, 160e6_f64);
    let mut text = String::from("freq_hz,level_dbm\n");
    for i in 0..n {
        let f = a * (b / a).powf(i as f64 / (n - 1) as f64);
        let level = if (f - 151.789e6).abs() < 5e3 {
            -80.0
        } else {
            -110.0
        };
        text.push_str(&format!("{},{level}\n", f.round()));
    }
    std::fs::write(&trace, text).unwrap();
    let o = pim(&[
        "sweep",
        trace.to_str().unwrap(),
        "--emitters",
        field_log("emitters.csv").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(3), "{}", stdout_of(&o));
    assert!(
        stderr_of(&o).contains("not on a uniform grid"),
        "{}",
        stderr_of(&o)
    );
}

/// A trace whose last row has no line end (still being written) is read without that
/// row, with a note naming its line, whatever the row holds.
#[test]
fn an_unterminated_last_row_is_noted_and_left_out() {
    let tmp = crate::support::scratch();
    let whole = std::fs::read_to_string(field_log("trace.csv")).unwrap();
    let trace = tmp.path().join("trace.csv");
    let lines = whole.lines().count();
    for cut in [1, 8] {
        std::fs::write(&trace, &whole[..whole.len() - cut]).unwrap();
        let o = pim(&[
            "sweep",
            trace.to_str().unwrap(),
            "--emitters",
            field_log("emitters.csv").to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", stderr_of(&o));
        assert!(
            stderr_of(&o).contains(&format!("line {lines}: the last row has no line end")),
            "{}",
            stderr_of(&o)
        );
    }
}

/// Fifty million blank lines after a header hold no memory: the readers count blank and
/// comment lines and store nothing for them (run under a 400 MB address-space limit;
/// one stored entry a line took over a gigabyte).
#[cfg(unix)]
#[test]
fn fifty_million_blank_lines_in_bounded_memory() {
    use std::io::Write;
    let tmp = crate::support::scratch();
    let trace = tmp.path().join("blank.csv");
    {
        let mut f = std::io::BufWriter::new(std::fs::File::create(&trace).unwrap());
        f.write_all(b"freq_mhz,level_dbm\n").unwrap();
        let blanks = vec![b'\n'; 1 << 20];
        let mut left = 50_000_000usize;
        while left > 0 {
            let n = left.min(blanks.len());
            f.write_all(&blanks[..n]).unwrap();
            left -= n;
        }
        for i in 0..200 {
            let level = if i == 100 { -80.0 } else { -110.0 };
            writeln!(f, "{:.3},{level}", 150.0 + i as f64 * 0.001).unwrap();
        }
    }
    let emitters = tmp.path().join("emitters.csv");
    let mut text = std::fs::read_to_string(field_log("emitters.csv")).unwrap();
    let (header, rows) = text.split_once('\n').unwrap();
    text = format!("{header}\n{}\n{rows}", "# note\n\n".repeat(5_000_000));
    std::fs::write(&emitters, text).unwrap();
    let o = std::process::Command::new("sh")
        .arg("-c")
        .arg("ulimit -v 400000; exec \"$0\" \"$@\"")
        .arg(crate::support::pim_bin())
        .args(["sweep", trace.to_str().unwrap(), "--emitters"])
        .arg(&emitters)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", stderr_of(&o));
}

/// The same trace given several times is noted: held again, it adds nothing.
#[test]
fn the_same_trace_twice_is_noted() {
    let t = field_log("trace.csv");
    let t = t.to_str().unwrap();
    let e = field_log("emitters.csv");
    let o = pim(&["sweep", t, t, "--emitters", e.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(
        stderr_of(&o).contains("is the same file as") && stderr_of(&o).contains("adds nothing"),
        "{}",
        stderr_of(&o)
    );
}
