//! Seeded Monte Carlo checks of the fix from bearings and levels together and from levels
//! alone: 400 simulated walks per case (bearings σ 3°, levels σ 4 dB of shadowing, the
//! path-loss exponent drawn in 2–3 per walk and estimated within 2–4, both σ estimated
//! from the residuals), the truth tested against the claimed ring by point in polygon as
//! in `region_coverage.rs`. With 400 walks the binomial standard error at 95 % is 1.1 %,
//! so 93–97 % tells 95 % from 90 %. Sources: the log-distance law with log-normal
//! shadowing (T. S. Rappaport, *Wireless Communications*, 2nd ed., §4.9–4.10); the
//! hybrid AOA/RSS likelihood (Wang, Jackson & Inkol 2012); Beale (1960) for the
//! likelihood region, its threshold calibrated per fix by a parametric bootstrap read as
//! a Monte Carlo test (Barnard 1963; Dufour 2006) with each estimated σ drawn from its
//! fiducial law (Tsui & Weerahandi 1989); the Cramér–Rao bound of the joint model as
//! derived in `pim_core::fix::levels`.

use pim_core::fix::levels::position_information;
use pim_core::fix::{
    locate, locate_with_levels, Exponent, Fix, FixOptions, LevelOptions, LevelReading,
    Measurements, Method, Reading,
};
use pim_core::geo::{destination, distance_and_azimuth, GeoPoint, LocalFrame};
use pim_tests::Rng;

const TRUTH: GeoPoint = GeoPoint {
    lat_deg: 45.10462,
    lon_deg: -122.414033,
};

const WALKS: usize = 400;
const BEARING_SIGMA_DEG: f64 = 3.0;
const LEVEL_SIGMA_DB: f64 = 4.0;
/// The junction's level at 1 m (any value: it is estimated).
const L0_DBM: f64 = -35.0;

/// One walk: a bearing (when `bearings`) and a level at each (azimuth, range) spot, the
/// exponent drawn in 2–3.
fn walk(
    rng: &mut Rng,
    spots: &[(f64, f64)],
    bearings: bool,
) -> (Vec<Reading>, Vec<LevelReading>, f64) {
    let nu = 2.0 + rng.uniform();
    let errors: Vec<f64> = spots
        .iter()
        .map(|_| BEARING_SIGMA_DEG * rng.normal())
        .collect();
    let readings = if bearings {
        pim_tests::simulated_walk(TRUTH, spots, &errors, None)
    } else {
        Vec::new()
    };
    let levels = heard(rng, spots, nu);
    (readings, levels, nu)
}

/// A level at each spot by the log-distance law with exponent `nu`, shadowed by
/// `LEVEL_SIGMA_DB`.
fn heard(rng: &mut Rng, spots: &[(f64, f64)], nu: f64) -> Vec<LevelReading> {
    spots
        .iter()
        .enumerate()
        .map(|(i, &(az, range))| LevelReading {
            line: i as u64 + 2,
            observer: destination(TRUTH, az, range),
            level_dbm: L0_DBM - 10.0 * nu * range.log10() + LEVEL_SIGMA_DB * rng.normal(),
            setup: None,
            position_accuracy_m: None,
        })
        .collect()
}

/// Surveyed spots (the simulated observers stand where logged), the rest as the default.
fn options() -> FixOptions {
    FixOptions {
        position_accuracy_m: Some(0.0),
        ..FixOptions::default()
    }
}

#[derive(Default)]
struct Tally {
    walks: usize,
    covered: usize,
    refused: usize,
    likelihood: usize,
    /// Squared misses of the joint fix and of the bearings-only fix, on walks both fixed.
    joint_sq: Vec<f64>,
    bearing_sq: Vec<f64>,
}

impl Tally {
    fn coverage(&self) -> f64 {
        self.covered as f64 / self.walks as f64
    }
    fn rmse(v: &[f64]) -> f64 {
        (v.iter().sum::<f64>() / v.len().max(1) as f64).sqrt()
    }
}

fn miss_m(fix: &Fix) -> f64 {
    distance_and_azimuth(fix.position, TRUTH).0
}

/// Runs `WALKS` walks over `spots`, the joint (or level-only) fix against the bearings-only
/// fix of the same walk.
fn run(seed: u64, spots: &[(f64, f64)], bearings: bool) -> Tally {
    let mut rng = Rng::new(seed);
    let mut t = Tally {
        walks: WALKS,
        ..Tally::default()
    };
    for _ in 0..WALKS {
        let (readings, levels, _) = walk(&mut rng, spots, bearings);
        let joint = locate_with_levels(&readings, &levels, &options(), &LevelOptions::default());
        let alone = bearings.then(|| locate(&readings, &options()));
        match &joint {
            Ok(fix) => {
                assert_eq!(
                    fix.measurements,
                    Some(if bearings {
                        Measurements::Both
                    } else {
                        Measurements::Levels
                    })
                );
                assert_eq!(fix.region.first(), fix.region.last(), "ring not closed");
                if fix.region_contains(TRUTH) {
                    t.covered += 1;
                }
                if fix.region_kind == pim_core::fix::RegionKind::Likelihood {
                    t.likelihood += 1;
                }
                if let Some(Ok(b)) = &alone {
                    t.joint_sq.push(miss_m(fix).powi(2));
                    t.bearing_sq.push(miss_m(b).powi(2));
                }
            }
            Err(_) => t.refused += 1,
        }
    }
    eprintln!(
        "coverage {:.3}, likelihood regions {}, refused {}; RMSE joint {:.2} m, bearings only {:.2} m over {} walks both fixed",
        t.coverage(),
        t.likelihood,
        t.refused,
        Tally::rmse(&t.joint_sq),
        Tally::rmse(&t.bearing_sq),
        t.joint_sq.len()
    );
    t
}

fn honest(name: &str, t: &Tally) {
    assert!(
        (0.93..=0.97).contains(&t.coverage()),
        "{name}: the 95 % region held the truth in {:.3} of walks",
        t.coverage()
    );
}

/// A walk from one side: eight spots within a 30° arc as seen from the junction, at
/// 20–160 m (a crew walking a road past the site, nearer and farther). What levels add
/// grows with the spread of the distances: at 40–160 m the RMSE ratio is 0.80.
fn one_sided_arc() -> Vec<(f64, f64)> {
    (0..8)
        .map(|i| {
            (
                200.0 + 30.0 * i as f64 / 7.0,
                20.0 + 140.0 * ((i * 3) % 8) as f64 / 7.0,
            )
        })
        .collect()
}

/// Twelve spots around the junction, 150–400 m out (as `region_coverage.rs`).
fn ring_of_twelve() -> Vec<(f64, f64)> {
    (0..12)
        .map(|i| {
            (
                i as f64 * 30.0 + 7.0,
                150.0 + 250.0 * ((i * 5) % 12) as f64 / 11.0,
            )
        })
        .collect()
}

/// One-sided 30° arc of eight readings with levels: the joint fix's RMSE is at most
/// 0.9 × the bearings-only RMSE on the same walks, and its 95 % region holds the
/// junction in 93–97 % of walks. A ratio of 0.7 (asked for) is not claimed: it holds on
/// these 400 walks (0.64) but not over more, and it lies below what the Cramér–Rao bound
/// allows any unbiased estimator with the path-loss exponent unknown (see below).
#[test]
fn levels_sharpen_a_one_sided_walk() {
    // 0.953 on this seed (0.930 with the F law's threshold); over 1200 walks of it the
    // coverage is 0.945 but the RMSE ratio 0.78 (0.874 and 0.859 over 1200 walks from
    // seeds 7 and 2911): the 0.7 holds on these 400 walks only. The joint RMSE is steady
    // (6.1–6.8 m); the ratio swings with the bearings-only fix's heavy tail (7.2–9.8 m).
    // It is not the estimator: with both σ known and plain ML the ratio is 0.76, with the
    // exponent given as 2.5 it is 0.79, and the Cramér–Rao bound of this walk
    // (`pim_core::fix::levels::position_information`) gives 5.6–5.7 m with the exponent free in 2–4
    // against 5.7 m from bearings alone (ratio 0.98), 4.7–5.2 m with it known (0.82–0.90):
    // with the exponent unknown the levels carry little range here, and the joint fix is
    // within 8–20 % of that bound. A ratio of 0.7 would ask 5.0–5.5 m of the joint fix
    // over 1200 walks, below its bound of 5.6 m; the claim checked is the one that holds
    // on every seed tried (0.64, 0.78, 0.87, 0.86)
    let t = run(2901, &one_sided_arc(), true);
    honest("one-sided arc with levels", &t);
    let ratio = Tally::rmse(&t.joint_sq) / Tally::rmse(&t.bearing_sq);
    assert!(ratio <= 0.9, "RMSE ratio {ratio:.3}");
    assert!(t.joint_sq.len() >= WALKS * 8 / 10, "{}", t.joint_sq.len());
}

/// A walk all around the junction: levels at 150–400 m add little, and take nothing
/// away: the joint RMSE within 5 % of the bearings-only RMSE, and the 95 % region holds
/// the junction in 93–97 % of walks: 0.935 on this seed (with the F law's threshold, on
/// both σ estimated and joined by Satterthwaite's rule, 0.920; the bearings-only fix of
/// the same walks 0.930).
#[test]
fn levels_do_no_harm_all_around() {
    let t = run(2902, &ring_of_twelve(), true);
    honest("all around with levels", &t);
    let ratio = Tally::rmse(&t.joint_sq) / Tally::rmse(&t.bearing_sq);
    assert!(ratio <= 1.05, "RMSE ratio {ratio:.3}");
}

/// Levels alone, ten spots around the junction at 5–40 m: a fix in every walk, and the
/// 95 % region holds the junction in 93–97 % of walks: 0.932 on this seed. With the F
/// law's threshold it held it in 0.868 (16 walks refused, their region open on one side
/// with the truth inside it; of the rest 0.904, the misses those whose level σ came out
/// small), and with a plug-in bootstrap in 0.77: hence the fiducial draw of σ and the
/// open region drawn out and said, not refused.
#[test]
fn levels_alone_fix_the_junction_honestly() {
    let spots: Vec<(f64, f64)> = (0..10)
        .map(|i| {
            (
                i as f64 * 36.0 + 11.0,
                5.0 + 35.0 * ((i * 7) % 10) as f64 / 9.0,
            )
        })
        .collect();
    let t = run(2903, &spots, false);
    honest("levels alone", &t);
    assert_eq!(t.refused, 0);
}

/// The Cramér–Rao bound of the joint model (the Fisher information of both terms, the
/// level parameters' share taken out; `pim_core::fix::levels` docs): in a well-conditioned
/// walk (twelve spots all round at 20–80 m, both σ known, the exponent given) the
/// maximum-likelihood fix's mean squared error is within 10 % of the bound's trace.
#[test]
fn the_joint_fix_reaches_the_cramer_rao_bound() {
    let spots: Vec<(f64, f64)> = (0..12)
        .map(|i| {
            (
                i as f64 * 30.0 + 4.0,
                20.0 + 60.0 * ((i * 5) % 12) as f64 / 11.0,
            )
        })
        .collect();
    let nu = 2.5;
    let frame = LocalFrame::new(TRUTH);
    let local: Vec<(f64, f64)> = spots
        .iter()
        .map(|&(az, r)| frame.to_local(destination(TRUTH, az, r)))
        .collect();
    let info = position_information(
        &local,
        &local,
        (0.0, 0.0),
        BEARING_SIGMA_DEG.to_radians(),
        LEVEL_SIGMA_DB,
        nu,
        false,
    );
    let det = info[0][0] * info[1][1] - info[0][1] * info[1][0];
    let bound_m2 = (info[0][0] + info[1][1]) / det;
    let options = FixOptions {
        method: Method::Ml,
        sigma_deg: Some(BEARING_SIGMA_DEG),
        ..options()
    };
    let level = LevelOptions {
        exponent: Exponent::Given { value: nu },
        sigma_db: Some(LEVEL_SIGMA_DB),
        ..LevelOptions::default()
    };
    let mut rng = Rng::new(2904);
    let walks = 1000;
    let mut sum = 0.0;
    for _ in 0..walks {
        let errors: Vec<f64> = spots
            .iter()
            .map(|_| BEARING_SIGMA_DEG * rng.normal())
            .collect();
        let readings = pim_tests::simulated_walk(TRUTH, &spots, &errors, None);
        let levels = heard(&mut rng, &spots, nu);
        let fix = locate_with_levels(&readings, &levels, &options, &level).unwrap();
        sum += miss_m(&fix).powi(2);
    }
    let mse = sum / walks as f64;
    eprintln!("mean squared error {mse:.3} m², Cramér–Rao bound {bound_m2:.3} m²");
    assert!(
        (mse / bound_m2 - 1.0).abs() <= 0.10,
        "MSE {mse:.3} m² against the bound {bound_m2:.3} m²"
    );
}
