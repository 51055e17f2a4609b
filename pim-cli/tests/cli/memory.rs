//! A listing beyond its memory budget is refused before it is made, never aborted: exit
//! code 5, a message naming how many products the search reached and what to do, and
//! nothing written. The budget is set small (`PIM_MEMORY_BUDGET_MB`) so that the test
//! needs a few megabytes, not gigabytes; the first K stay within it at any size.

use std::path::Path;
use std::process::{Command, Output};

use crate::support::{pim_bin, scratch, stderr_of, stdout_of};

/// 240 emitters on the 12.5 kHz raster from 148 MHz, with ERP and places round the
/// junction: hundreds of thousands of products of order up to 7 land in the channel.
fn crowded_site(dir: &Path) -> String {
    let mut text = String::from("id,freq_mhz,bw_khz,erp_w,lat,lon,height_m,kind\n");
    for i in 0..240u64 {
        let hz = 148_000_000 + (i * 7 % 480) * 12_500;
        text.push_str(&format!(
            "TX{i:03},{}.{:06},11.25,{},{:.6},{:.6},30,land mobile\n",
            hz / 1_000_000,
            hz % 1_000_000,
            20 + i % 80,
            45.10 + (i % 17) as f64 * 0.001,
            -122.41 + (i % 13) as f64 * 0.001,
        ));
    }
    let path = dir.join("crowded.csv");
    std::fs::write(&path, text).unwrap();
    path.to_str().unwrap().to_string()
}

fn explain_within(budget_mb: &str, emitters: &str, extra: &[&str]) -> Output {
    let mut args = vec![
        "explain",
        "150.0",
        "--emitters",
        emitters,
        "--rx-lat",
        "45.105",
        "--rx-lon",
        "-122.405",
    ];
    args.extend_from_slice(extra);
    Command::new(pim_bin())
        .args(&args)
        .env("PIM_MEMORY_BUDGET_MB", budget_mb)
        .output()
        .unwrap()
}

#[test]
fn a_full_listing_past_the_budget_is_refused_with_exit_code_5() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let out = explain_within("1", &tx, &["--limit", "all", "--format", "json"]);
    let err = stderr_of(&out);
    assert_eq!(out.status.code(), Some(5), "{err}");
    assert!(stdout_of(&out).is_empty(), "nothing is written");
    assert!(err.contains("the search reached"), "{err}");
    assert!(err.contains("products"), "{err}");
    assert!(err.contains("memory budget of 1 MB"), "{err}");
    assert!(err.contains("a shorter listing"), "{err}");
    assert!(err.contains("--limit N"), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn the_first_k_stay_within_the_same_budget() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let out = explain_within("1", &tx, &["--limit", "20", "--format", "json"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    let json = stdout_of(&out);
    assert!(json.contains("\"candidates_shown\": 20,"), "{json}");
}

#[test]
fn a_first_k_larger_than_the_budget_holds_is_refused() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let out = explain_within("1", &tx, &["--limit", "100000000", "--format", "csv"]);
    assert_eq!(out.status.code(), Some(5), "{}", stderr_of(&out));
    assert!(stdout_of(&out).is_empty());
    assert!(stderr_of(&out).contains("memory budget of 1 MB"));
}

/// A trace of 145.5–146.5 MHz in 1 kHz steps with one peak at 146 MHz, below the
/// crowded site's channels, where hundreds of thousands of its products land.
fn trace_below_the_site(dir: &Path) -> String {
    let mut text = String::from("freq_hz,level_dbm\n");
    for i in 0..1_001i64 {
        let f = 145_500_000 + i * 1_000;
        let d = (f - 146_000_000) as f64 / 1_000.0;
        let level = (-110.0f64).max(-70.0 - 6.0 * d * d);
        text.push_str(&format!("{f},{level:.1}\n"));
    }
    let path = dir.join("trace.csv");
    std::fs::write(&path, text).unwrap();
    path.to_str().unwrap().to_string()
}

fn sweep_within(budget_mb: &str, emitters: &str, trace: &str, extra: &[&str]) -> Output {
    let mut args = vec![
        "sweep",
        trace,
        "--emitters",
        emitters,
        "--rx-lat",
        "45.105",
        "--rx-lon",
        "-122.405",
        "--format",
        "json",
    ];
    args.extend_from_slice(extra);
    Command::new(pim_bin())
        .args(&args)
        .env("PIM_MEMORY_BUDGET_MB", budget_mb)
        .output()
        .unwrap()
}

#[test]
fn a_sweep_past_the_budget_is_refused_with_exit_code_5_naming_it() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let trace = trace_below_the_site(dir.path());
    for extra in [&["--limit", "all"][..], &["--limit", "100000000"][..]] {
        let out = sweep_within("1", &tx, &trace, extra);
        let err = stderr_of(&out);
        assert_eq!(out.status.code(), Some(5), "{extra:?}: {err}");
        assert!(stdout_of(&out).is_empty(), "nothing is written");
        assert!(err.contains("memory budget of 1 MB"), "{err}");
        assert!(err.contains("--limit N"), "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }
}

#[test]
fn a_sweep_of_the_first_candidates_stays_within_the_same_budget() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let trace = trace_below_the_site(dir.path());
    let out = sweep_within("1", &tx, &trace, &[]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr_of(&out));
    let json = stdout_of(&out);
    assert!(json.contains("\"kind\":\"product\""), "{json}");
}

#[test]
fn a_budget_that_is_not_a_number_is_an_argument_error() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let out = explain_within("lots", &tx, &[]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr_of(&out));
    assert!(stderr_of(&out).contains("PIM_MEMORY_BUDGET_MB"));
}

/// A 20,000-receiver study worst first holds its budget: each receiver's rendered
/// result is set aside in a temporary file as soon as it is done and only its sort key
/// is kept (run under PIM_MEMORY_BUDGET_MB=500 and a 1 GB address-space limit); the
/// receivers come out worst first, every one once.
#[cfg(unix)]
#[test]
fn a_worst_first_study_of_20000_receivers_holds_its_budget() {
    let dir = scratch();
    let tx = dir.path().join("tx.csv");
    std::fs::write(
        &tx,
        "id,freq_mhz,bw_khz,erp_w,lat,lon,height_m,kind\n\
         TXA,150.0000,11.25,100,45.100,-122.400,30,land mobile\n\
         TXB,150.5000,11.25,80,45.101,-122.401,30,land mobile\n\
         TXC,151.2500,11.25,60,45.102,-122.399,30,land mobile\n\
         TXD,152.0000,11.25,40,45.099,-122.402,30,land mobile\n",
    )
    .unwrap();
    let rx = dir.path().join("rx.csv");
    let mut text = String::from("id,freq_mhz,bw_khz,lat,lon\n");
    for i in 0..20_000u64 {
        let hz = 148_000_000 + (i * 7919 % 960) * 12_500;
        text.push_str(&format!(
            "RX{i:05},{}.{:06},11.25,{:.6},{:.6}\n",
            hz / 1_000_000,
            hz % 1_000_000,
            45.05 + (i % 101) as f64 * 0.001,
            -122.45 + (i % 97) as f64 * 0.001
        ));
    }
    std::fs::write(&rx, text).unwrap();
    let out = Command::new("sh")
        .arg("-c")
        .arg("ulimit -v 1000000; exec \"$0\" \"$@\"")
        .arg(pim_bin())
        .args(["study", "--emitters"])
        .arg(&tx)
        .arg("--receivers")
        .arg(&rx)
        .args(["--format", "json", "--max-order", "3"])
        .env("PIM_MEMORY_BUDGET_MB", "500")
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", stderr_of(&out));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let receivers = v["receivers"].as_array().unwrap();
    assert_eq!(receivers.len(), 20_000);
    let mut ids: Vec<&str> = receivers
        .iter()
        .map(|r| r["id"].as_str().unwrap())
        .collect();
    ids.sort();
    ids.dedup();
    assert_eq!(ids.len(), 20_000, "every receiver once");
    // worst first: levels of the first candidates never rise; receivers without one last
    let firsts: Vec<Option<f64>> = receivers
        .iter()
        .map(|r| r["candidates"][0]["in_channel_dbm"].as_f64())
        .collect();
    let with: Vec<f64> = firsts.iter().map_while(|l| *l).collect();
    assert!(!with.is_empty());
    assert!(with.windows(2).all(|w| w[0] >= w[1]), "not worst first");
    assert!(receivers[with.len()..]
        .iter()
        .all(|r| r["candidates"][0]["in_channel_dbm"].is_null()));
}
