//! Seeded Monte Carlo checks that the region a fix claims holds the junction as often as
//! it says: 400 simulated walks per case (600 for the walks that break the independent
//! model), the truth tested against the claimed ring by
//! point in polygon (ellipse outline or likelihood contour alike). With 400 walks the
//! binomial standard error at 95 % is 1.1 %, so 92.5–97.5 % tells 95 % from 90 %.
//! Sources: Huber, *Robust Statistics* (1981) for the robust covariance and scale;
//! Beale (1960) for the likelihood region; χ² goodness of fit with n − 2 degrees of
//! freedom for a stated σ; the outlier rule's Bonferroni bound; for walks that break the
//! independent model, Patterson & Thompson (1971) for spots, Durbin & Watson (1950) for
//! serial correlation, Gavish & Weiss (1992) for the Cramér–Rao bound, the W3C
//! Geolocation API for a position's accuracy (95 % radius).

use pim_core::fix::{
    locate, Fix, FixOptions, FixWarning, Loss, Method, Reading, RegionKind, SigmaSource,
};
use pim_core::geo::{destination, distance_and_azimuth, normalize_bearing_deg, GeoPoint};
use pim_tests::Rng;

const TRUTH: GeoPoint = GeoPoint {
    lat_deg: 45.104620,
    lon_deg: -122.414033,
};

const WALKS: usize = 400;

/// One simulated walk: observers at (azimuth from the junction, range m); each bearing is
/// the true geodesic azimuth plus `scatter_deg`·N(0, 1) plus its entry in `offsets_deg`;
/// `stated_deg` goes in the log's σ column.
fn walk(
    rng: &mut Rng,
    truth: GeoPoint,
    spots: &[(f64, f64)],
    scatter_deg: f64,
    offsets_deg: &[f64],
    stated_deg: Option<f64>,
) -> Vec<Reading> {
    let errors: Vec<f64> = (0..spots.len())
        .map(|i| scatter_deg * rng.normal() + offsets_deg.get(i).copied().unwrap_or(0.0))
        .collect();
    pim_tests::simulated_walk(truth, spots, &errors, stated_deg)
}

/// Twelve spots around the junction, 150–400 m out.
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

struct Tally {
    walks: usize,
    covered: usize,
    refused: usize,
    likelihood: usize,
    named_any: usize,
    sigma_deg: Vec<f64>,
}

impl Tally {
    fn coverage(&self) -> f64 {
        self.covered as f64 / self.walks as f64
    }
}

/// Runs `WALKS` walks of `make` through `locate` and tallies how often the claimed region
/// holds the truth (a refusal counts as a miss). The simulated observers stand exactly
/// where logged unless `options` says otherwise: without a position accuracy the options
/// state 0 m (surveyed spots).
fn run(
    seed: u64,
    options: &FixOptions,
    truth: GeoPoint,
    make: impl FnMut(&mut Rng) -> Vec<Reading>,
    check: impl Fn(&Fix),
) -> Tally {
    run_walks(WALKS, seed, options, truth, make, check)
}

fn run_walks(
    walks: usize,
    seed: u64,
    options: &FixOptions,
    truth: GeoPoint,
    make: impl FnMut(&mut Rng) -> Vec<Reading>,
    check: impl Fn(&Fix),
) -> Tally {
    let mut options = *options;
    if options.position_accuracy_m.is_none() {
        options.position_accuracy_m = Some(0.0);
    }
    run_walks_as_given(walks, seed, &options, truth, make, check)
}

/// [`run_walks`] with the options as given: no position accuracy means the default.
fn run_walks_as_given(
    walks: usize,
    seed: u64,
    options: &FixOptions,
    truth: GeoPoint,
    mut make: impl FnMut(&mut Rng) -> Vec<Reading>,
    check: impl Fn(&Fix),
) -> Tally {
    let mut rng = Rng::new(seed);
    let mut t = Tally {
        walks,
        covered: 0,
        refused: 0,
        likelihood: 0,
        named_any: 0,
        sigma_deg: Vec::new(),
    };
    for _ in 0..walks {
        let readings = make(&mut rng);
        match locate(&readings, options) {
            Ok(fix) => {
                check(&fix);
                assert_eq!(fix.region.first(), fix.region.last(), "ring not closed");
                if fix.region_contains(truth) {
                    t.covered += 1;
                }
                if fix.region_kind == RegionKind::Likelihood {
                    t.likelihood += 1;
                }
                if fix.readings.iter().any(|r| r.outlier) {
                    t.named_any += 1;
                }
                t.sigma_deg.push(fix.sigma_deg_used);
            }
            Err(_) => t.refused += 1,
        }
    }
    t
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn honest(name: &str, t: &Tally) {
    eprintln!(
        "{name}: coverage {:.3}, likelihood regions {}, refused {}, walks naming an outlier {}",
        t.coverage(),
        t.likelihood,
        t.refused,
        t.named_any
    );
    assert!(
        (0.925..=0.975).contains(&t.coverage()),
        "{name}: the 95 % region held the truth in {:.3} of walks",
        t.coverage()
    );
}

/// Robust (the default) on clean walks of twelve, σ estimated: coverage 92.5–97.5 %, and
/// Proposal 2's σ̂ is consistent (median within 5 % of the true 2°).
#[test]
fn robust_on_clean_walks_is_honest() {
    let spots = ring_of_twelve();
    let in_cep = std::cell::Cell::new(0usize);
    let mut t = run(
        1201,
        &FixOptions::default(),
        TRUTH,
        |rng| walk(rng, TRUTH, &spots, 2.0, &[], None),
        |fix| {
            assert_eq!(fix.method, Method::Robust);
            if distance_and_azimuth(fix.position, TRUTH).0 <= fix.cep_m {
                in_cep.set(in_cep.get() + 1);
            }
        },
    );
    honest("robust, clean", &t);
    // the CEP from the region's own law holds the junction in half the walks (binomial
    // standard error 2.5 % at 400 walks)
    let cep_share = in_cep.get() as f64 / WALKS as f64;
    eprintln!("robust, clean: CEP held the junction in {cep_share:.3}");
    assert!((0.43..=0.57).contains(&cep_share), "{cep_share}");
    let m = median(&mut t.sigma_deg);
    eprintln!("robust, clean: median σ̂ {m:.3}° for a true 2°");
    assert!((m / 2.0 - 1.0).abs() < 0.05, "median σ̂ {m}");
}

/// Robust with one reading among twelve spoiled by a 40° reflection: coverage 92.5–97.5 %,
/// and the reflection is named in nearly every walk.
#[test]
fn robust_with_a_reflection_is_honest() {
    let spots = ring_of_twelve();
    let mut offsets = vec![0.0; 12];
    offsets[4] = 40.0;
    let named = std::cell::Cell::new(0usize);
    let t = run(
        1202,
        &FixOptions::default(),
        TRUTH,
        |rng| walk(rng, TRUTH, &spots, 2.0, &offsets, None),
        |fix| {
            if fix.readings[4].outlier {
                named.set(named.get() + 1);
            }
        },
    );
    honest("robust, one 40° reflection in 12", &t);
    eprintln!("reflection named in {} of {WALKS} walks", named.get());
    assert!(named.get() as f64 >= 0.98 * WALKS as f64);
}

/// The least-squares intersection with its own (sandwich) covariance, on walks whose
/// ranges differ tenfold (where the unweighted estimator is furthest from ML):
/// coverage 92.5–97.5 % with σ estimated and with σ stated.
#[test]
fn ls_region_is_honest() {
    let spots: Vec<(f64, f64)> = (0..8)
        .map(|i| (i as f64 * 45.0 + 10.0, [150.0, 1500.0, 300.0, 900.0][i % 4]))
        .collect();
    let mut results = Vec::new();
    for (seed, stated) in [(1203, None), (1204, Some(2.0))] {
        let in_cep = std::cell::Cell::new(0usize);
        let t = run(
            seed,
            &FixOptions {
                method: Method::Ls,
                ..Default::default()
            },
            TRUTH,
            |rng| walk(rng, TRUTH, &spots, 2.0, &[], stated),
            |fix| {
                // the least-squares point never lies outside its own region
                assert!(fix.region_contains(fix.position));
                if distance_and_azimuth(fix.position, TRUTH).0 <= fix.cep_m {
                    in_cep.set(in_cep.get() + 1);
                }
            },
        );
        eprintln!(
            "ls, σ stated {stated:?}: {:.3}; CEP held the junction in {:.3}",
            t.coverage(),
            in_cep.get() as f64 / WALKS as f64
        );
        let cep_share = in_cep.get() as f64 / WALKS as f64;
        results.push((stated, t, cep_share));
    }
    for (stated, t, cep_share) in &results {
        honest(&format!("ls, σ stated {stated:?}"), t);
        assert!((0.43..=0.57).contains(cep_share), "CEP {cep_share}");
    }
}

/// A stated σ of one third of the real scatter (2° stated, 6° real): the χ² test rejects,
/// the fix warns and widens the region; coverage 92.5–97.5 %.
#[test]
fn a_contradicted_sigma_widens_the_region() {
    let spots = ring_of_twelve();
    let contradicted = std::cell::Cell::new(0usize);
    let t = run(
        1205,
        &FixOptions::default(),
        TRUTH,
        |rng| walk(rng, TRUTH, &spots, 6.0, &[], Some(2.0)),
        |fix| {
            if fix.sigma_source == SigmaSource::Contradicted {
                contradicted.set(contradicted.get() + 1);
                assert!(fix.warnings.iter().any(|w| matches!(
                    w,
                    pim_core::fix::FixWarning::SigmaContradicted { stated_deg, .. }
                        if (*stated_deg - 2.0).abs() < 1e-9
                )));
            }
        },
    );
    honest("σ stated 2°, real 6°", &t);
    assert!(contradicted.get() as f64 >= 0.95 * WALKS as f64);
}

/// Three nearly parallel bearings (about 89°, 90°, 91° as seen from the junction) from
/// spots 50 m apart, the junction 2.9 km away, σ 0.2° stated: the likelihood region is
/// claimed in nearly every walk and holds the truth in at least 92.5 % of the walks it is
/// claimed in, for every method. A walk whose region does not close is refused, and says
/// so; that happens mostly when the χ² test rejects the stated σ (1 % of walks by
/// design), leaving one degree of freedom for the scatter: at most 3 % of walks here.
#[test]
fn nearly_parallel_bearings_get_an_honest_region() {
    let base = destination(TRUTH, 180.0, 2900.0);
    let spots: Vec<(f64, f64)> = (-1..=1)
        .map(|k| {
            let (d, az) = distance_and_azimuth(TRUTH, destination(base, 90.0, 50.0 * k as f64));
            (az, d)
        })
        .collect();
    let mut results = Vec::new();
    for (seed, method) in [
        (1206, Method::Robust),
        (1207, Method::Ml),
        (1208, Method::Ls),
    ] {
        let t = run(
            seed,
            &FixOptions {
                method,
                ..Default::default()
            },
            TRUTH,
            |rng| walk(rng, TRUTH, &spots, 0.2, &[], Some(0.2)),
            |fix| {
                // the region claimed holds its own fix (for ls, its own ellipse when the
                // likelihood contour would leave the point out)
                assert!(fix.region_contains(fix.position), "{method:?}");
                if method != Method::Ls {
                    assert_eq!(fix.region_kind, RegionKind::Likelihood);
                }
            },
        );
        let claimed = t.walks - t.refused;
        let held = t.covered as f64 / claimed as f64;
        eprintln!(
            "parallel, {method:?}: region holds the truth in {held:.3} of {claimed} walks with a region; refused {}; {:.3} of all walks",
            t.refused,
            t.coverage()
        );
        results.push((method, held, t));
    }
    for (method, held, t) in &results {
        assert!(*held >= 0.925, "{method:?}: {held}");
        assert!(
            t.refused as f64 <= 0.03 * WALKS as f64,
            "{method:?}: {}",
            t.refused
        );
    }
}

/// The outlier rule's false alarm on clean walks (fixed seed): the share of clean walks
/// in which the robust fit names any reading, for walks of 6 and of 12 readings, σ
/// estimated and σ stated. The rule's bound is 5 % (Bonferroni); with these seeds the
/// rates are 1.5 % (12 readings, σ estimated), 0 % (6 readings) and 2.8 % (12 readings,
/// σ stated).
#[test]
fn outlier_false_alarm_rate_is_at_most_five_percent() {
    let twelve = ring_of_twelve();
    let six: Vec<(f64, f64)> = twelve.iter().step_by(2).copied().collect();
    for (seed, spots, stated) in [
        (1209, &twelve, None),
        (1210, &six, None),
        (1211, &twelve, Some(2.0)),
    ] {
        let t = run(
            seed,
            &FixOptions::default(),
            TRUTH,
            |rng| walk(rng, TRUTH, spots, 2.0, &[], stated),
            |_| {},
        );
        let rate = t.named_any as f64 / WALKS as f64;
        eprintln!(
            "false alarm, {} readings, σ stated {stated:?}: {rate:.3}",
            spots.len()
        );
        assert!(rate <= 0.05, "{rate}");
    }
}

// ---------------------------------------------------------------------------------------
// Walks that break the independent, exactly placed model (600 walks each: the binomial
// standard error at 95 % is 0.9 %). Each either covers 95 % (92.5 % or more of walks) or
// says, in at least 95 % of walks, that the readings break the model.

const BROKEN_WALKS: usize = 600;

/// A tally of a case that breaks the model: coverage, and the walks whose fix says so.
struct Verdict {
    tally: Tally,
    said: usize,
}

fn run_broken(
    name: &str,
    seed: u64,
    options: &FixOptions,
    make: impl FnMut(&mut Rng) -> Vec<Reading>,
    says: impl Fn(&Fix) -> bool,
    check: impl Fn(&Fix),
) -> Verdict {
    let mut options = *options;
    if options.position_accuracy_m.is_none() {
        options.position_accuracy_m = Some(0.0);
    }
    run_broken_as_given(name, seed, &options, make, says, check)
}

/// [`run_broken`] with the options as given: no position accuracy means the default.
fn run_broken_as_given(
    name: &str,
    seed: u64,
    options: &FixOptions,
    make: impl FnMut(&mut Rng) -> Vec<Reading>,
    says: impl Fn(&Fix) -> bool,
    check: impl Fn(&Fix),
) -> Verdict {
    let said = std::cell::Cell::new(0usize);
    let tally = run_walks_as_given(BROKEN_WALKS, seed, options, TRUTH, make, |fix| {
        if says(fix) {
            said.set(said.get() + 1);
        }
        check(fix);
    });
    let v = Verdict {
        tally,
        said: said.get(),
    };
    eprintln!(
        "{name}: coverage {:.3}, said so in {:.3} of walks, likelihood regions {}, refused {}",
        v.tally.coverage(),
        v.said as f64 / BROKEN_WALKS as f64,
        v.tally.likelihood,
        v.tally.refused
    );
    v
}

/// A refusal claims no region: it counts as saying the readings break the model.
fn covers_or_says(name: &str, v: &Verdict) {
    let covers = v.tally.coverage() >= 0.925;
    let says = (v.said + v.tally.refused) as f64 >= 0.95 * BROKEN_WALKS as f64;
    assert!(
        covers || says,
        "{name}: the 95 % region held the truth in {:.3} of walks and the fix said the readings break the model in {:.3}",
        v.tally.coverage(),
        v.said as f64 / BROKEN_WALKS as f64
    );
}

fn warns(fix: &Fix, f: impl Fn(&FixWarning) -> bool) -> bool {
    fix.warnings.iter().any(f)
}

/// An observer `spot` = (azimuth from the junction, range m) with its bearing error, its
/// logged position off by `position_sigma_m` per axis, and `accuracy_m` in the log.
fn reading_at(
    rng: &mut Rng,
    line: u64,
    spot: (f64, f64),
    error_deg: f64,
    position_sigma_m: f64,
    accuracy_m: Option<f64>,
    stated_deg: Option<f64>,
) -> Reading {
    let observer = destination(TRUTH, spot.0, spot.1);
    let (_, brg) = distance_and_azimuth(observer, TRUTH);
    let (e, n) = (
        position_sigma_m * rng.normal(),
        position_sigma_m * rng.normal(),
    );
    let logged = destination(observer, e.atan2(n).to_degrees(), e.hypot(n));
    Reading::new(
        line,
        logged,
        normalize_bearing_deg(brg + error_deg),
        stated_deg,
    )
    .with_position_accuracy_m(accuracy_m)
}

/// Per-spot repeats: six spots around the junction, three readings at each within a
/// metre, every reading's error a spot error N(0, 3°) shared by the spot's readings plus
/// its own N(0, 1°) (multipath that turns with the spot, not with the reading); σ
/// estimated. Variance components (method of moments; Patterson & Thompson 1971 for the
/// model) count the eighteen readings as six spots.
#[test]
fn per_spot_repeats_count_as_one_spot() {
    let spots: Vec<(f64, f64)> = ring_of_twelve().into_iter().step_by(2).collect();
    let v = run_broken(
        "per-spot repeats, 6 spots × 3",
        1301,
        &FixOptions::default(),
        |rng| {
            let mut out = Vec::new();
            for (k, &s) in spots.iter().enumerate() {
                let spot_error = 3.0 * rng.normal();
                for r in 0..3 {
                    let jitter = (s.0 + 0.2 * r as f64, s.1 + 0.5 * r as f64);
                    let own = rng.normal();
                    out.push(reading_at(
                        rng,
                        (3 * k + r) as u64 + 2,
                        jitter,
                        spot_error + own,
                        0.0,
                        None,
                        None,
                    ));
                }
            }
            out
        },
        |fix| {
            warns(fix, |w| {
                matches!(
                    w,
                    FixWarning::SpotsShareError { .. } | FixWarning::TooFewSpots { .. }
                )
            })
        },
        |fix| assert_eq!(fix.spots, 6),
    );
    covers_or_says("per-spot repeats", &v);
    assert!(v.tally.coverage() >= 0.925, "{}", v.tally.coverage());
}

/// Per-spot repeats at only three spots (the audit's case): three readings at each, the
/// same errors; the region rests on one degree of freedom between spots, so it is wide
/// but honest, or the fix says the spots are too few.
#[test]
fn three_spots_of_three_readings() {
    let spots = [(10.0, 200.0), (130.0, 300.0), (250.0, 250.0)];
    let v = run_broken(
        "per-spot repeats, 3 spots × 3",
        1302,
        &FixOptions::default(),
        |rng| {
            let mut out = Vec::new();
            for (k, &s) in spots.iter().enumerate() {
                let spot_error = 3.0 * rng.normal();
                for r in 0..3 {
                    let own = rng.normal();
                    out.push(reading_at(
                        rng,
                        (3 * k + r) as u64 + 2,
                        (s.0 + 0.2 * r as f64, s.1),
                        spot_error + own,
                        0.0,
                        None,
                        None,
                    ));
                }
            }
            out
        },
        |fix| {
            warns(fix, |w| {
                matches!(
                    w,
                    FixWarning::SpotsShareError { .. } | FixWarning::TooFewSpots { .. }
                )
            })
        },
        |_| {},
    );
    covers_or_says("3 spots × 3", &v);
}

/// Serial correlation: 32 readings walked along one side of the junction (a half circle,
/// 150–350 m out), errors AR(1) along the walk with ρ = 0.8 and 2° marginal σ; σ
/// estimated. The lag-one autocorrelation of the residuals, judged against its exact
/// moments for the fit (Durbin & Watson 1950), flags the walk (98 % here) and the region
/// is widened for the AR(1) error. (A ring of sixteen is flagged in 64 % of walks and
/// held in 68 %: the fix and a common offset take up most of so slow an error.)
#[test]
fn serial_correlation_is_flagged_or_covered() {
    let spots: Vec<(f64, f64)> = (0..32)
        .map(|i| {
            (
                i as f64 * 180.0 / 32.0 + 3.0,
                150.0 + 200.0 * ((i * 7) % 32) as f64 / 31.0,
            )
        })
        .collect();
    let rho: f64 = 0.8;
    let v = run_broken(
        "serial correlation ρ 0.8, 32 readings on a half circle",
        1303,
        &FixOptions::default(),
        |rng| {
            let mut e = 2.0 * rng.normal();
            let errors: Vec<f64> = (0..spots.len())
                .map(|i| {
                    if i > 0 {
                        e = rho * e + 2.0 * (1.0 - rho * rho).sqrt() * rng.normal();
                    }
                    e
                })
                .collect();
            pim_tests::simulated_walk(TRUTH, &spots, &errors, None)
        },
        |fix| warns(fix, |w| matches!(w, FixWarning::LeanTheSameWay { .. })),
        |_| {},
    );
    covers_or_says("serial correlation", &v);
}

/// A common offset: every bearing of a ring of twelve reads 4° clockwise (an antenna
/// mounted askew), σ 2° estimated. The walk surrounds the junction, so the offset is
/// estimated (Wald test at 5 %) as a nuisance parameter: the region covers 95 %, the offset
/// is found in nearly every walk and its 95 % interval holds 4° in at least 92.5 %.
#[test]
fn a_common_offset_is_estimated() {
    let spots = ring_of_twelve();
    let offsets = vec![4.0; 12];
    let held = std::cell::Cell::new(0usize);
    let v = run_broken(
        "common offset 4°",
        1304,
        &FixOptions::default(),
        |rng| walk(rng, TRUTH, &spots, 2.0, &offsets, None),
        |fix| fix.offset.is_some(),
        |fix| {
            if let Some(o) = fix.offset {
                if o.low_deg <= 4.0 && 4.0 <= o.high_deg {
                    held.set(held.get() + 1);
                }
            }
        },
    );
    honest_broken("common offset", &v);
    assert!(v.said as f64 >= 0.95 * BROKEN_WALKS as f64, "{}", v.said);
    eprintln!("offset interval held 4° in {} walks", held.get());
    assert!(held.get() as f64 >= 0.925 * v.said as f64);
}

/// No offset, the same ring: the default estimates one in about 5 % of walks (the Wald
/// test's level), and the region stays honest.
#[test]
fn no_offset_is_seldom_estimated() {
    let spots = ring_of_twelve();
    let v = run_broken(
        "no offset",
        1305,
        &FixOptions::default(),
        |rng| walk(rng, TRUTH, &spots, 2.0, &[], None),
        |fix| fix.offset.is_some(),
        |_| {},
    );
    honest_broken("no offset", &v);
    assert!(v.said as f64 <= 0.08 * BROKEN_WALKS as f64, "{}", v.said);
}

fn honest_broken(name: &str, v: &Verdict) {
    assert!(
        (0.925..=0.975).contains(&v.tally.coverage()),
        "{name}: the 95 % region held the truth in {:.3} of walks",
        v.tally.coverage()
    );
}

/// Stated position accuracy: eight readings around the junction at `ranges`, each
/// position off by a phone's error (10 m 95 % radius, σ 4.1 m per axis; W3C Geolocation
/// API's accuracy is the 95 % radius) and the log saying so; bearing σ 3° stated. Each
/// reading's variance σ_b² + (σ_p/d)² at the fix.
fn position_case(name: &str, seed: u64, ranges: (f64, f64)) {
    let accuracy = 10.0;
    let sigma_p = accuracy / 2.447_746_830_680_816;
    let spots: Vec<(f64, f64)> = (0..8)
        .map(|i| {
            (
                i as f64 * 45.0 + 11.0,
                ranges.0 + (ranges.1 - ranges.0) * ((i * 3) % 8) as f64 / 7.0,
            )
        })
        .collect();
    let v = run_broken(
        name,
        seed,
        &FixOptions::default(),
        |rng| {
            spots
                .iter()
                .enumerate()
                .map(|(i, &s)| {
                    let err = 3.0 * rng.normal();
                    reading_at(
                        rng,
                        i as u64 + 2,
                        s,
                        err,
                        sigma_p,
                        Some(accuracy),
                        Some(3.0),
                    )
                })
                .collect()
        },
        |fix| fix.sigma_source == SigmaSource::Contradicted,
        |_| {},
    );
    covers_or_says(name, &v);
    assert!(v.tally.coverage() <= 0.985, "{}", v.tally.coverage());
}

/// A phone's position error of 5 m rms per axis that the log does not state (bearing σ
/// 3° stated): the default accuracy (10 m, 95 %) and the test of the stated σ keep the
/// region honest or say the scatter contradicts it.
fn unstated_position_case(name: &str, seed: u64, ranges: (f64, f64)) {
    let spots: Vec<(f64, f64)> = (0..8)
        .map(|i| {
            (
                i as f64 * 45.0 + 11.0,
                ranges.0 + (ranges.1 - ranges.0) * ((i * 3) % 8) as f64 / 7.0,
            )
        })
        .collect();
    let v = run_broken_as_given(
        name,
        seed,
        &FixOptions::default(),
        |rng| {
            spots
                .iter()
                .enumerate()
                .map(|(i, &s)| {
                    let err = 3.0 * rng.normal();
                    reading_at(rng, i as u64 + 2, s, err, 5.0, None, Some(3.0))
                })
                .collect()
        },
        |fix| fix.sigma_source == SigmaSource::Contradicted,
        |_| {},
    );
    covers_or_says(name, &v);
}

#[test]
fn unstated_position_error_at_10_to_30_m() {
    unstated_position_case(
        "position 5 m rms unstated, ranges 10–30 m",
        1313,
        (10.0, 30.0),
    );
}

#[test]
fn unstated_position_error_at_40_to_150_m() {
    unstated_position_case(
        "position 5 m rms unstated, ranges 40–150 m",
        1314,
        (40.0, 150.0),
    );
}

#[test]
fn stated_position_accuracy_at_10_to_30_m() {
    position_case("position 10 m stated, ranges 10–30 m", 1306, (10.0, 30.0));
}

#[test]
fn stated_position_accuracy_at_40_to_150_m() {
    position_case("position 10 m stated, ranges 40–150 m", 1307, (40.0, 150.0));
}

/// Sixty readings around the junction, 15 % of them gross outliers (a reflection
/// anywhere from 20° to 90° either way), σ 2° estimated: the robust fix's RMSE is within
/// 2 × the Cramér–Rao bound of the 51 clean readings (Gavish & Weiss 1992: Fisher
/// information Σuuᵀ/(σ²d²)), and its region covers 95 %.
#[test]
fn robust_with_fifteen_percent_outliers() {
    let spots: Vec<(f64, f64)> = (0..60)
        .map(|i| {
            (
                i as f64 * 6.0 + 1.0,
                100.0 + 400.0 * ((i * 17) % 60) as f64 / 59.0,
            )
        })
        .collect();
    let bad: Vec<bool> = (0..60).map(|i| i % 20 < 3).collect();
    // the bound from the clean readings (σ 2°)
    let sigma = 2f64.to_radians();
    let mut info = [[0.0; 2]; 2];
    for (s, b) in spots.iter().zip(&bad) {
        if *b {
            continue;
        }
        let u = (
            (s.0 + 90.0).to_radians().sin(),
            (s.0 + 90.0).to_radians().cos(),
        );
        let w = 1.0 / (sigma * sigma * s.1 * s.1);
        info[0][0] += w * u.0 * u.0;
        info[0][1] += w * u.0 * u.1;
        info[1][1] += w * u.1 * u.1;
    }
    let det = info[0][0] * info[1][1] - info[0][1] * info[0][1];
    let bound_m = ((info[0][0] + info[1][1]) / det).sqrt();
    let sq = std::cell::Cell::new(0.0f64);
    let v = run_broken(
        "15 % outliers in 60",
        1308,
        &FixOptions::default(),
        |rng| {
            let errors: Vec<f64> = bad
                .iter()
                .map(|b| {
                    if *b {
                        let m = 20.0 + 70.0 * rng.uniform();
                        if rng.uniform() < 0.5 {
                            m
                        } else {
                            -m
                        }
                    } else {
                        2.0 * rng.normal()
                    }
                })
                .collect();
            pim_tests::simulated_walk(TRUTH, &spots, &errors, None)
        },
        |fix| fix.readings.iter().filter(|r| r.outlier).count() >= 5,
        |fix| {
            let (d, _) = distance_and_azimuth(fix.position, TRUTH);
            sq.set(sq.get() + d * d);
        },
    );
    let rmse = (sq.get() / (BROKEN_WALKS - v.tally.refused) as f64).sqrt();
    eprintln!("15 % outliers: RMSE {rmse:.2} m against a bound of {bound_m:.2} m");
    assert!(rmse <= 2.0 * bound_m, "{rmse} vs {bound_m}");
    assert!(v.tally.coverage() >= 0.925, "{}", v.tally.coverage());
}

/// A 35° reflection in a walk of five readings (σ 2° estimated): the leave-one-out rule
/// names it in nearly every walk and the region covers 95 %; on clean walks of five and
/// six readings the rule names a reading in at most 5 % of walks (its Bonferroni bound).
#[test]
fn a_reflection_in_five_readings() {
    let spots = [
        (5.0, 180.0),
        (80.0, 260.0),
        (150.0, 220.0),
        (220.0, 300.0),
        (290.0, 200.0),
    ];
    let mut offsets = vec![0.0; 5];
    offsets[2] = 35.0;
    let v = run_broken(
        "35° reflection in 5",
        1309,
        &FixOptions::default(),
        |rng| walk(rng, TRUTH, &spots, 2.0, &offsets, None),
        |fix| fix.readings[2].outlier,
        |_| {},
    );
    // named in 87 % of walks with this seed: with σ estimated from the four others the
    // bound is Student's t on 2 degrees of freedom; the rest are covered all the same
    assert!(v.said as f64 >= 0.85 * BROKEN_WALKS as f64, "{}", v.said);
    assert!(v.tally.coverage() >= 0.925, "{}", v.tally.coverage());
    let six: Vec<(f64, f64)> = ring_of_twelve().into_iter().step_by(2).collect();
    for (seed, spots) in [(1310, &spots[..]), (1311, &six[..])] {
        let t = run_walks(
            BROKEN_WALKS,
            seed,
            &FixOptions::default(),
            TRUTH,
            |rng| walk(rng, TRUTH, spots, 2.0, &[], None),
            |_| {},
        );
        let rate = t.named_any as f64 / BROKEN_WALKS as f64;
        eprintln!(
            "leave-one-out false alarm, {} readings: {rate:.3}",
            spots.len()
        );
        assert!(rate <= 0.05, "{rate}");
    }
}

/// Andrews' loss with σ estimated, twelve readings of which one is a 30° reflection: the
/// fix is never refused (the scale starts from Huber's fit) and the region covers 95 %.
#[test]
fn andrews_with_sigma_estimated() {
    let spots = ring_of_twelve();
    let mut offsets = vec![0.0; 12];
    offsets[7] = 30.0;
    let v = run_broken(
        "Andrews, σ estimated, one 30° reflection",
        1312,
        &FixOptions {
            loss: Loss::Andrews,
            ..Default::default()
        },
        |rng| walk(rng, TRUTH, &spots, 2.0, &offsets, None),
        |fix| fix.readings[7].outlier,
        |_| {},
    );
    assert_eq!(v.tally.refused, 0);
    assert!(v.tally.coverage() >= 0.925, "{}", v.tally.coverage());
}

/// Exact bearings never claim a region of 0 m: the estimated σ has a floor.
#[test]
fn exact_bearings_claim_a_region_of_some_size() {
    let spots = ring_of_twelve();
    let readings = pim_tests::simulated_walk(TRUTH, &spots, &[], None);
    let fix = locate(&readings, &FixOptions::default()).unwrap();
    assert!(fix.ellipse.semi_minor_m > 0.1, "{:?}", fix.ellipse);
    assert!(fix.sigma_deg_used >= pim_core::fix::SIGMA_FLOOR_DEG - 1e-9);
}
