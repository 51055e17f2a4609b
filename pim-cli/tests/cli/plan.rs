//! End-to-end runs of `pim plan`: the JSON contract, a grid against the Golomb ruler
//! (Babcock 1953; OEIS A003022), the invented Marrow Hill candidate list with protected
//! receivers, and each kind of bad input with its message and exit code.

use std::collections::HashSet;

use crate::support::{field_log, pim, stderr_of, stdout_of};
use pim_core::emitter::Carrier;
use pim_core::freq::Hz;
use pim_core::plan::is_conflict_free;

fn path(p: std::path::PathBuf) -> String {
    p.display().to_string()
}

fn plan_json(args: &[&str]) -> serde_json::Value {
    let mut all = vec!["plan", "--format", "json"];
    all.extend_from_slice(args);
    let o = pim(&all);
    assert!(o.status.success(), "{all:?}: {}", stderr_of(&o));
    serde_json::from_str(&stdout_of(&o)).unwrap()
}

fn hz(mhz: &serde_json::Value) -> i64 {
    (mhz.as_f64().unwrap() * 1e6).round() as i64
}

/// Shortest 7-mark Golomb ruler has length 25 (OEIS A003022): 26 channels hold 7.
#[test]
fn grid_plan_is_a_golomb_ruler_with_the_contract_fields() {
    let v = plan_json(&["--grid", "150.0,12.5,26"]);
    assert_eq!(v["count"], 7);
    assert_eq!(v["optimal"], true);
    let ch = v["channels_mhz"].as_array().unwrap();
    assert_eq!(ch.len(), 7);
    let marks: Vec<i64> = ch.iter().map(|m| (hz(m) - 150_000_000) / 12_500).collect();
    let mut diffs = HashSet::new();
    for (i, a) in marks.iter().enumerate() {
        for b in &marks[i + 1..] {
            assert!(diffs.insert(b - a), "{marks:?} repeats a difference");
        }
    }
    for c in v["channels"].as_array().unwrap() {
        let near = &c["closest_product"];
        assert!(
            near["formula"].as_str().unwrap().contains('·')
                || near["formula"].as_str().unwrap().contains('+')
        );
        assert!(near["distance_khz"].as_f64().unwrap() >= 12.5, "{near}");
        assert_eq!(near["order"], 3);
    }
    // One channel fewer: 6 marks (length 24 < 25).
    let v = plan_json(&["--grid", "150.0,12.5,25"]);
    assert_eq!(
        (v["count"].as_u64(), v["optimal"].as_bool()),
        (Some(6), Some(true))
    );
}

#[test]
fn demo_candidates_with_protected_receivers() {
    let cands = path(field_log("plan-candidates.csv"));
    let prot = path(field_log("plan-protect.csv"));
    let v = plan_json(&["--channels", &cands, "--protect", &prot]);
    assert_eq!(v["optimal"], true);
    assert_eq!(v["candidates"], 24);
    let count = v["count"].as_u64().unwrap() as usize;
    assert!(count >= 3, "{v}");
    // Checked plainly with the product search, widths from the file (11.25 kHz).
    let chosen: Vec<Carrier> = v["channels_mhz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| Carrier {
            freq: Hz(hz(m)),
            bandwidth: Hz(11_250),
        })
        .collect();
    let protected: Vec<Carrier> = v["protected_mhz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| Carrier {
            freq: Hz(hz(m)),
            bandwidth: Hz(11_250),
        })
        .collect();
    assert_eq!(protected.len(), 2);
    assert!(is_conflict_free(&chosen, &protected, 3, Hz::ZERO));
    assert!(v["channels"][0]["id"].as_str().unwrap().starts_with("MH-"));
    // Without the protected receivers the plan can only grow; fifth order can only shrink it.
    let free = plan_json(&["--channels", &cands]);
    assert!(free["count"].as_u64().unwrap() as usize >= count);
    let fifth = plan_json(&["--channels", &cands, "--protect", &prot, "--max-order", "5"]);
    assert!(fifth["count"].as_u64().unwrap() as usize <= count);
    // The table says whether the plan is proved.
    let o = pim(&["plan", "--channels", &cands, "--protect", &prot]);
    let t = stdout_of(&o);
    assert!(t.contains("Proved the largest"), "{t}");
    assert!(t.contains("closest product"), "{t}");
}

#[test]
fn a_short_time_limit_says_the_plan_is_not_proved() {
    let v = plan_json(&["--grid", "150.0,12.5,150", "--time-limit-s", "0.3"]);
    assert_eq!(v["optimal"], false);
    assert!(v["count"].as_u64().unwrap() >= 8);
}

#[test]
fn bad_plan_arguments_are_refused() {
    let cands = path(field_log("plan-candidates.csv"));
    for (args, want) in [
        (
            vec!["plan", "--grid", "150.0,12.5"],
            "is not START_MHZ,STEP_KHZ,COUNT",
        ),
        (
            vec!["plan", "--grid", "150.0,0,10"],
            "step 0 must be above zero",
        ),
        (vec!["plan", "--grid", "-150,12.5,10"], "must be above zero"),
        (
            vec!["plan", "--grid", "150.0,12.5,many"],
            "count `many` is not a whole number",
        ),
        (vec!["plan", "--grid", "150.0,12.5,0"], "count 0 is outside"),
        (vec!["plan", "--grid", "299999,1000000,10"], "above 300 GHz"),
        (
            vec!["plan", "--grid", "150.0,12.5,10", "--max-order", "4"],
            "order `4` is neither 3 nor 5",
        ),
        (
            vec!["plan", "--grid", "150.0,12.5,10", "--time-limit-s", "0"],
            "is not a time above 0",
        ),
        (
            vec!["plan", "--grid", "150.0,12.5,10", "--guard-khz", "-1"],
            "is negative",
        ),
        (
            vec!["plan", "--grid", "150.0,12.5,10", "--channels", &cands],
            "cannot be used with",
        ),
        (vec!["plan"], "--channels"),
    ] {
        let o = pim(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr_of(&o));
        assert!(stderr_of(&o).contains(want), "{args:?}: {}", stderr_of(&o));
    }
    let o = pim(&["plan", "--channels", "no-such-channels.csv"]);
    assert_eq!(o.status.code(), Some(4));
}
