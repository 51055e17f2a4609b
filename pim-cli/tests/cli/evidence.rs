//! End-to-end runs of `pim explain` with confirming evidence: `--coefficient` from a
//! power step, and the on-air and listening logs (`--on-air`, `--heard`) that move the
//! ranking. The scenario is the invented Marrow Hill site of `field-logs/`.

use crate::support::{field_log, pim, pim_json, stderr_of, stdout_of, workspace_root};

fn path(p: std::path::PathBuf) -> String {
    p.display().to_string()
}

fn explain_json(extra: &[&str]) -> serde_json::Value {
    let tx = path(field_log("emitters.csv"));
    let mut args = vec![
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--rx-lat",
        "45.103",
        "--rx-lon",
        "-122.412",
        "--format",
        "json",
    ];
    args.extend_from_slice(extra);
    pim_json(&args)
}

fn formulas(v: &serde_json::Value) -> Vec<String> {
    v["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["formula"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn coefficient_keeps_only_matching_candidates() {
    // Five products; 2·SKP-152 − FIRE-DSP is also a candidate made in SKP-152's output
    // stage (transmitter intermodulation), so six candidates.
    let all = explain_json(&[]);
    assert_eq!(all["candidates_total"], 6);
    let v = explain_json(&["--coefficient", "SKP-152=2"]);
    assert_eq!(v["products_found"], 5);
    // 2·SKP-152 − FIRE-DSP (twice), 2·QK7MHR-R + 2·SKP-152 − UTIL-UHF,
    // 3·QFMR + HWY-BASE − 2·SKP-152
    assert_eq!(v["candidates_total"], 4, "{:?}", formulas(&v));
    for c in v["candidates"].as_array().unwrap() {
        let k = c["terms"]
            .as_array()
            .unwrap()
            .iter()
            .find(|t| t["emitter"] == "SKP-152")
            .map(|t| t["coefficient"].as_i64().unwrap().abs());
        assert_eq!(k, Some(2), "{}", c["formula"]);
    }
    let v = explain_json(&["--coefficient", "SKP-152=2", "--coefficient", "FIRE-DSP=1"]);
    assert_eq!(
        formulas(&v),
        vec!["2·SKP-152 − FIRE-DSP", "2·SKP-152 − FIRE-DSP"]
    );
    assert_eq!(v["inputs"]["coefficients"]["FIRE-DSP"], 1);
    // K = 0: candidates without the emitter.
    let v = explain_json(&["--coefficient", "QFMR=0"]);
    assert!(formulas(&v).iter().all(|f| !f.contains("QFMR")));
    assert_eq!(v["candidates_total"], 4);
}

#[test]
fn coefficient_arguments_are_checked() {
    let tx = path(field_log("emitters.csv"));
    for (arg, want) in [
        ("SKP-999=2", "--coefficient: no emitter `SKP-999` in"),
        ("SKP-152", "is not EMITTER=K"),
        ("SKP-152=two", "`two` is not a whole number 0 to 15"),
        ("SKP-152=16", "|k| = 16 is above 15"),
        ("=2", "names no emitter"),
    ] {
        let o = pim(&["explain", "146.34", "--emitters", &tx, "--coefficient", arg]);
        assert_eq!(o.status.code(), Some(2), "{arg}: {}", stderr_of(&o));
        assert!(stderr_of(&o).contains(want), "{arg}: {}", stderr_of(&o));
    }
    let o = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--coefficient",
        "SKP-152=2",
        "--coefficient",
        "SKP-152=1",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr_of(&o).contains("`SKP-152` is given both |k| = 2 and |k| = 1"),
        "{}",
        stderr_of(&o)
    );
}

#[test]
fn demo_logs_confirm_the_planted_pair() {
    let on_air = path(field_log("on-air.csv"));
    let heard = path(field_log("heard.csv"));
    let v = explain_json(&["--on-air", &on_air, "--heard", &heard]);
    let first = &v["candidates"][0];
    assert_eq!(first["formula"], "2·SKP-152 − FIRE-DSP");
    // Heard five times, each with SKP-152 and FIRE-DSP on air; once silent with both on
    // (the joint is intermittent in the wind).
    assert_eq!(first["on_air"]["support"], 5);
    assert_eq!(first["on_air"]["contradictions"], 1);
    assert_eq!(first["on_air"]["heard_off_air"], 0);
    assert_eq!(first["on_air"]["unknown"], 0);
    assert_eq!(v["inputs"]["heard_times"], 5);
    assert_eq!(v["inputs"]["silent_times"], 7);
    assert!(v["ranking_basis"]
        .as_str()
        .unwrap()
        .starts_with("ranked first by on-air evidence"));
    // Every other product was off air at one or more heard times.
    for c in v["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["formula"] != first["formula"])
    {
        assert!(
            c["on_air"]["heard_off_air"].as_u64().unwrap() > 0,
            "{}",
            c["formula"]
        );
    }
    // Without logs the JSON carries no on_air field.
    assert!(explain_json(&[])["candidates"][0].get("on_air").is_none());
}

/// Heard only while the 70 cm link is keyed: the link's product rises to the top over the
/// pair, because the pair was off air at two heard times.
#[test]
fn evidence_moves_the_ranking_where_it_should() {
    let plain = explain_json(&[]);
    let link = "QK7MHR-L − 3·QFMR − 2·QAMV";
    assert_ne!(plain["candidates"][0]["formula"], link);
    let on_air = path(field_log("on-air.csv"));
    let heard = path(workspace_root().join("tests/scenarios/heard-with-the-link.csv"));
    let v = explain_json(&["--on-air", &on_air, "--heard", &heard]);
    assert_eq!(v["candidates"][0]["formula"], link);
    assert_eq!(v["candidates"][0]["on_air"]["support"], 3);
    assert_eq!(v["candidates"][1]["formula"], "2·SKP-152 − FIRE-DSP");
    assert_eq!(v["candidates"][1]["on_air"]["heard_off_air"], 2);
    // The table shows the evidence columns and their legend; CSV adds its columns.
    let tx = path(field_log("emitters.csv"));
    let o = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--on-air",
        &on_air,
        "--heard",
        &heard,
    ]);
    let t = stdout_of(&o);
    assert!(
        t.contains("support  contradictions  heard off  unknown"),
        "{t}"
    );
    assert!(
        t.contains("On-air evidence: 5 listening times, heard at 3, silent at 2."),
        "{t}"
    );
    let o = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--on-air",
        &on_air,
        "--heard",
        &heard,
        "--format",
        "csv",
    ]);
    let csv = stdout_of(&o);
    assert!(
        csv.lines()
            .next()
            .unwrap()
            .ends_with(",on_air_support,on_air_contradictions,on_air_heard_off_air,on_air_unknown"),
        "{csv}"
    );
    assert!(csv.lines().nth(1).unwrap().ends_with(",3,0,0,0"), "{csv}");
}

#[test]
fn on_air_needs_heard() {
    let tx = path(field_log("emitters.csv"));
    let o = pim(&[
        "explain",
        "146.34",
        "--emitters",
        &tx,
        "--on-air",
        &path(field_log("on-air.csv")),
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr_of(&o));
    assert!(stderr_of(&o).contains("--heard"), "{}", stderr_of(&o));
}
