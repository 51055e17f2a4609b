//! End-to-end runs of `pim slope`: the demo readings of the invented Marrow Hill site, the
//! JSON contract, and each kind of bad readings file with its message and exit code.

use crate::support::{field_log, pim, stderr_of, stdout_of};

fn path(p: std::path::PathBuf) -> String {
    p.display().to_string()
}

fn json_of(args: &[&str]) -> serde_json::Value {
    let o = pim(args);
    assert!(o.status.success(), "{args:?}: {}", stderr_of(&o));
    serde_json::from_str(&stdout_of(&o)).unwrap()
}

/// Attenuator test, common practice: a signal over the air drops 1 dB per dB of pad.
#[test]
fn demo_attenuator_readings_read_external() {
    let r = path(field_log("attenuator-readings.csv"));
    let v = json_of(&[
        "slope",
        "--readings",
        &r,
        "--kind",
        "attenuator",
        "--format",
        "json",
    ]);
    assert_eq!(v["verdict"], "external");
    assert_eq!(v["n"], 5);
    let slope = v["slope_db_per_db"].as_f64().unwrap();
    assert!((slope - 1.0).abs() < 0.05, "{slope}");
    assert!(v["slope_stderr"].as_f64().unwrap() > 0.0);
    assert!(v.get("coefficient").is_none());
}

/// Power-step test, from the power law (Pozar; Razavi): the planted product
/// 2·SKP-152 − FIRE-DSP drops 2 dB per dB of SKP-152 and 1 dB per dB of FIRE-DSP.
#[test]
fn demo_power_steps_give_the_planted_coefficients() {
    let skp = path(field_log("power-step-skp152.csv"));
    let v = json_of(&[
        "slope",
        "--readings",
        &skp,
        "--kind",
        "power",
        "--emitter",
        "SKP-152",
        "--format",
        "json",
    ]);
    // 1.81 dB/dB fits |k| = 2 (α 0.9) and |k| = 3 (α 0.6): one emitter cannot settle it,
    // and no advice drops either.
    assert_eq!(v["coefficient"], serde_json::Value::Null);
    assert_eq!(v["consistent_k"], serde_json::json!([2, 3]));
    assert!(v.get("verdict").is_none());
    let advice = v["advice"].as_str().unwrap();
    assert!(advice.contains("step a second emitter"), "{advice}");
    assert!(!advice.contains("--coefficient"), "{advice}");
    let fire = path(field_log("power-step-fire.csv"));
    let v = json_of(&[
        "slope",
        "--readings",
        &fire,
        "--kind",
        "power",
        "--format",
        "json",
    ]);
    // 1.00 dB/dB over four readings: the interval (0.80 to 1.21) reaches |k| = 2 at
    // α 0.6, so both are listed and more readings are asked for.
    assert_eq!(v["coefficient"], serde_json::Value::Null);
    assert_eq!(v["consistent_k"], serde_json::json!([1, 2]));
    assert!(v["advice"].as_str().unwrap().contains("readings"));
    assert_eq!(v["n"], 4);
}

#[test]
fn table_shows_the_fit_and_what_next() {
    let r = path(field_log("attenuator-readings.csv"));
    let o = pim(&["slope", "--readings", &r, "--kind", "attenuator"]);
    let t = stdout_of(&o);
    assert!(o.status.success(), "{}", stderr_of(&o));
    assert!(t.contains("Verdict: external."), "{t}");
    assert!(t.contains("95 % interval"), "{t}");
    assert!(t.contains("Next: the product arrives over the air"), "{t}");
}

/// A noisy short series: no verdict, and the answer says what to measure.
#[test]
fn inconclusive_series_says_what_to_measure() {
    let noisy = path(
        crate::support::workspace_root().join("tests/scenarios/readings-noisy-attenuator.csv"),
    );
    let v = json_of(&[
        "slope",
        "--readings",
        &noisy,
        "--kind",
        "attenuator",
        "--format",
        "json",
    ]);
    assert_eq!(v["verdict"], "inconclusive");
    assert_eq!(v["order"], serde_json::Value::Null);
    let advice = v["advice"].as_str().unwrap();
    assert!(advice.contains("take about 16 readings"), "{advice}");
    // Rising levels read as an attenuator test do not follow the pad at all.
    let rising = crate::support::workspace_root().join("tests/scenarios/readings-rising.csv");
    let v = json_of(&[
        "slope",
        "--readings",
        &path(rising),
        "--kind",
        "attenuator",
        "--format",
        "json",
    ]);
    assert_eq!(v["verdict"], "inconclusive");
    assert!(
        v["advice"]
            .as_str()
            .unwrap()
            .contains("hardly follows the attenuator"),
        "{v}"
    );
    let v = json_of(&[
        "slope",
        "--readings",
        &noisy,
        "--kind",
        "power",
        "--format",
        "json",
    ]);
    assert_eq!(v["coefficient"], serde_json::Value::Null);
}

#[test]
fn bad_slope_arguments_are_refused() {
    let r = path(field_log("attenuator-readings.csv"));
    let o = pim(&["slope", "--readings", &r, "--kind", "loudness"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    let o = pim(&[
        "slope",
        "--readings",
        "no-such-readings.csv",
        "--kind",
        "power",
    ]);
    assert_eq!(o.status.code(), Some(4), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("no-such-readings.csv"));
}
