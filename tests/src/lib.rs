//! Shared helpers for the cross-checks against published sources (`tests/tests/checks/`)
//! and the end-to-end runs of the `pim` binary (`pim-cli/tests/cli/`): the demo and
//! bad-input files, a seeded random source, and an XML well-formedness check.

use std::path::{Path, PathBuf};

use pim_core::fix::Reading;
use pim_core::geo::{destination, distance_and_azimuth, normalize_bearing_deg, GeoPoint};

/// The workspace root.
pub fn workspace_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("."))
}

/// A file of the invented demo scenario.
pub fn field_log(name: &str) -> PathBuf {
    workspace_root().join("field-logs").join(name)
}

/// A file of the bad-input catalogue.
pub fn bad_input(name: &str) -> PathBuf {
    workspace_root().join("tests").join("bad-inputs").join(name)
}

/// A small deterministic random source for Monte Carlo checks (SplitMix64, Box–Muller):
/// the same seed gives the same walks on every machine.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal.
    pub fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// Panics unless `text` is well-formed XML with balanced elements; `what` names it.
pub fn assert_xml_well_formed(text: &str, what: &str) {
    let mut reader = quick_xml::Reader::from_str(text);
    let mut depth = 0i32;
    loop {
        match reader.read_event() {
            Ok(quick_xml::events::Event::Start(_)) => depth += 1,
            Ok(quick_xml::events::Event::End(_)) => depth -= 1,
            Ok(quick_xml::events::Event::Eof) => break,
            Ok(_) => {}
            Err(e) => panic!("{what}: not XML: {e}"),
        }
    }
    assert_eq!(depth, 0, "{what}: unbalanced elements");
}

/// The walk simulator every check shares: an observer at each (azimuth from the
/// junction in degrees, range in metres) of `spots`, its bearing the true geodesic
/// azimuth to `truth` (Karney 2013) plus `errors_deg[i]` (0 where missing), `sigma_deg`
/// in the log's σ column. Lines are numbered from 2, as under a header.
pub fn simulated_walk(
    truth: GeoPoint,
    spots: &[(f64, f64)],
    errors_deg: &[f64],
    sigma_deg: Option<f64>,
) -> Vec<Reading> {
    spots
        .iter()
        .enumerate()
        .map(|(i, &(az, range))| {
            let observer = destination(truth, az, range);
            let (_, brg) = distance_and_azimuth(observer, truth);
            let error = errors_deg.get(i).copied().unwrap_or(0.0);
            Reading::new(
                i as u64 + 2,
                observer,
                normalize_bearing_deg(brg + error),
                sigma_deg,
            )
        })
        .collect()
}
