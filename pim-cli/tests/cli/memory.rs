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
    assert!(json.contains("\"shown\": 20,"), "{json}");
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

#[test]
fn a_budget_that_is_not_a_number_is_an_argument_error() {
    let dir = scratch();
    let tx = crowded_site(dir.path());
    let out = explain_within("lots", &tx, &[]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr_of(&out));
    assert!(stderr_of(&out).contains("PIM_MEMORY_BUDGET_MB"));
}
