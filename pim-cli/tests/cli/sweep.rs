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
