//! Cross-checks of the bearing fix against independent computations and published values.
//! Each check names its source.

use pim_core::fix::{locate, FixOptions, Loss, Method, OffsetChoice, Reading, SigmaSource};
use pim_core::geo::{
    destination, distance_and_azimuth, normalize_bearing_deg, GeoPoint, LocalFrame,
};
use pim_tests::Rng;

fn walk(
    truth: GeoPoint,
    spots: &[(f64, f64)],
    errors_deg: &[f64],
    sigma: Option<f64>,
) -> Vec<Reading> {
    pim_tests::simulated_walk(truth, spots, errors_deg, sigma)
}

const TRUTH: GeoPoint = GeoPoint {
    lat_deg: 45.104620,
    lon_deg: -122.414033,
};

/// Exact bearings drawn from a known point give that point back, to millimetres
/// (azimuths by GeographicLib's algorithms, Karney 2013).
#[test]
fn exact_bearings_return_the_point() {
    let spots = [
        (10.0, 250.0),
        (100.0, 180.0),
        (200.0, 320.0),
        (290.0, 150.0),
        (45.0, 4000.0),
    ];
    for method in [Method::Ml, Method::Robust] {
        let fix = locate(
            &walk(TRUTH, &spots, &[], Some(2.0)),
            &FixOptions {
                method,
                ..Default::default()
            },
        )
        .unwrap();
        let (d, _) = distance_and_azimuth(fix.position, TRUTH);
        assert!(d < 1e-3, "{method:?} is {d} m off");
    }
}

/// Against SciPy's `least_squares` with GeographicLib azimuths: the committed script
/// `tests/reference/fix_reference.py` and its output `fix_reference.json`.
#[test]
fn agrees_with_scipy_and_geographiclib() {
    let cases: serde_json::Value =
        serde_json::from_str(include_str!("../../reference/fix_reference.json")).unwrap();
    for case in cases.as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let sigma = case["sigma_deg"].as_f64();
        let readings: Vec<Reading> = case["observers"]
            .as_array()
            .unwrap()
            .iter()
            .enumerate()
            .map(|(i, o)| Reading {
                line: i as u64 + 2,
                observer: GeoPoint::new(o["lat"].as_f64().unwrap(), o["lon"].as_f64().unwrap()),
                bearing_deg: o["bearing_deg"].as_f64().unwrap(),
                sigma_deg: sigma,
                position_accuracy_m: None,
            })
            .collect();
        // SciPy's reference is the maximum-likelihood fix, exact positions, no offset
        let ml = FixOptions {
            method: Method::Ml,
            position_accuracy_m: Some(0.0),
            offset: OffsetChoice::None,
            ..Default::default()
        };
        let fix = locate(&readings, &ml).unwrap();
        let want = GeoPoint::new(
            case["fix"]["lat"].as_f64().unwrap(),
            case["fix"]["lon"].as_f64().unwrap(),
        );
        let (d, _) = distance_and_azimuth(fix.position, want);
        assert!(d < 0.01, "{name}: fix {d} m from SciPy's");
        let e = &fix.ellipse;
        let rel = |a: f64, b: f64| (a - b).abs() / b;
        assert!(
            rel(e.semi_major_m, case["semi_major_m"].as_f64().unwrap()) < 2e-3,
            "{name}: major {e:?}"
        );
        assert!(
            rel(e.semi_minor_m, case["semi_minor_m"].as_f64().unwrap()) < 2e-3,
            "{name}: minor {e:?}"
        );
        let dir = (e.orientation_deg - case["orientation_deg"].as_f64().unwrap()).rem_euclid(180.0);
        assert!(dir.min(180.0 - dir) < 0.2, "{name}: orientation {e:?}");
        assert_eq!(
            fix.sigma_source,
            if sigma.is_some() {
                SigmaSource::Given
            } else {
                SigmaSource::Estimated
            }
        );
    }
}

/// Table values of the quantiles behind the ellipse (any statistics handbook, or SciPy):
/// χ²₂(0.95) = 5.9915, χ²₂(0.50) = 1.3863, χ²₂(0.99) = 9.2103, F(0.95; 2, 10) = 4.1028,
/// F(0.95; 2, 5) = 5.7861.
#[test]
fn quantiles_match_tables() {
    use pim_core::fix::ellipse::scale_squared;
    assert!((scale_squared(0.95, None).unwrap() - 5.9915).abs() < 1e-4);
    assert!((scale_squared(0.50, None).unwrap() - 1.3863).abs() < 1e-4);
    assert!((scale_squared(0.99, None).unwrap() - 9.2103).abs() < 1e-4);
    assert!((scale_squared(0.95, Some(10.0)).unwrap() / 2.0 - 4.1028).abs() < 1e-4);
    assert!((scale_squared(0.95, Some(5.0)).unwrap() / 2.0 - 5.7861).abs() < 1e-4);
}

/// CEP of a circular normal is 1.1774·σ (Torrieri 1984; handbook value).
#[test]
fn cep_of_circular_error() {
    let cep = pim_core::fix::ellipse::circular_error_probable([[9.0, 0.0], [0.0, 9.0]]);
    assert!((cep / 3.0 - 1.1774).abs() < 1e-4);
}

fn fisher_information(truth: GeoPoint, spots: &[(f64, f64)], sigma_deg: f64) -> [[f64; 2]; 2] {
    // Σ uᵢuᵢᵀ/(σᵢ²dᵢ²), uᵢ perpendicular to the i-th line (Gavish & Weiss 1992).
    let s = sigma_deg.to_radians();
    let mut f = [[0.0; 2]; 2];
    for &(az, range) in spots {
        let observer = destination(truth, az, range);
        let (d, brg) = distance_and_azimuth(observer, truth);
        let t = brg.to_radians();
        let u = [t.cos(), -t.sin()];
        for a in 0..2 {
            for b in 0..2 {
                f[a][b] += u[a] * u[b] / (s * s * d * d);
            }
        }
    }
    f
}

/// Monte Carlo with a fixed seed: over 400 simulated walks the 95 % ellipse holds the
/// truth 93–97 % of the time, with σ given (χ²-scaled) and with σ estimated (F-scaled);
/// the RMSE of the ML fix is within 10 % of the Cramér–Rao bound (Gavish & Weiss 1992).
#[test]
fn ellipse_coverage_is_honest_and_ml_reaches_the_bound() {
    let spots = [
        (0.0, 220.0),
        (60.0, 300.0),
        (130.0, 180.0),
        (200.0, 350.0),
        (250.0, 240.0),
        (310.0, 160.0),
    ];
    let sigma = 2.0;
    let walks = 400;
    let mut rng = Rng::new(20261201);
    let (mut inside_given, mut inside_estimated, mut sq) = (0, 0, 0.0);
    for _ in 0..walks {
        let errors: Vec<f64> = spots.iter().map(|_| sigma * rng.normal()).collect();
        for given in [true, false] {
            let readings = walk(TRUTH, &spots, &errors, given.then_some(sigma));
            // the simulated observers stand exactly where logged
            let ml = FixOptions {
                method: Method::Ml,
                position_accuracy_m: Some(0.0),
                ..Default::default()
            };
            let fix = locate(&readings, &ml).unwrap();
            let (e, n) = LocalFrame::new(fix.position).to_local(TRUTH);
            if fix.ellipse.contains(e, n) {
                if given {
                    inside_given += 1;
                } else {
                    inside_estimated += 1;
                }
            }
            if given {
                sq += e * e + n * n;
            }
        }
    }
    let cover_given = inside_given as f64 / walks as f64;
    let cover_estimated = inside_estimated as f64 / walks as f64;
    assert!(
        (0.93..=0.97).contains(&cover_given),
        "σ given: {cover_given}"
    );
    assert!(
        (0.93..=0.97).contains(&cover_estimated),
        "σ estimated: {cover_estimated}"
    );
    let rmse = (sq / walks as f64).sqrt();
    eprintln!("coverage given {cover_given}, estimated {cover_estimated}");
    let f = fisher_information(TRUTH, &spots, sigma);
    let det = f[0][0] * f[1][1] - f[0][1] * f[1][0];
    let crb = ((f[0][0] + f[1][1]) / det).sqrt();
    eprintln!("RMSE {rmse:.3} m, bound {crb:.3} m");
    assert!(
        (rmse / crb - 1.0).abs() < 0.10,
        "RMSE {rmse:.2} m, bound {crb:.2} m"
    );
}

/// The robust estimate names a gross outlier (a reflection 40° off) and stays near the
/// truth (Lenth 1981: M-estimates for bearings).
#[test]
fn robust_names_a_reflection_and_stays_near_the_truth() {
    let spots = [
        (0.0, 220.0),
        (60.0, 300.0),
        (130.0, 180.0),
        (200.0, 350.0),
        (250.0, 240.0),
        (310.0, 160.0),
        (20.0, 260.0),
    ];
    let errors = [1.0, -1.5, 0.5, 40.0, -0.8, 1.2, -0.4];
    for loss in [Loss::Huber, Loss::Andrews] {
        let readings = walk(TRUTH, &spots, &errors, None);
        let fix = locate(
            &readings,
            &FixOptions {
                method: Method::Robust,
                loss,
                ..Default::default()
            },
        )
        .unwrap();
        let outliers: Vec<u64> = fix
            .readings
            .iter()
            .filter(|r| r.outlier)
            .map(|r| r.line)
            .collect();
        assert_eq!(outliers, vec![5], "{loss:?}");
        let (d, _) = distance_and_azimuth(fix.position, TRUTH);
        assert!(d < 5.0, "{loss:?}: {d} m off");
        let (e, n) = LocalFrame::new(fix.position).to_local(TRUTH);
        assert!(fix.ellipse.contains(e, n));
        assert_eq!(fix.n_used, 6);
    }
}

/// Front/back ambiguity: two readings taken reversed are turned round and named.
#[test]
fn ambiguous_readings_are_resolved() {
    let spots = [
        (0.0, 220.0),
        (60.0, 300.0),
        (130.0, 180.0),
        (200.0, 350.0),
        (250.0, 240.0),
    ];
    let mut readings = walk(TRUTH, &spots, &[0.5, -0.5, 0.3, -0.2, 0.1], Some(1.0));
    readings[1].bearing_deg = normalize_bearing_deg(readings[1].bearing_deg + 180.0);
    readings[3].bearing_deg = normalize_bearing_deg(readings[3].bearing_deg + 180.0);
    let fix = locate(
        &readings,
        &FixOptions {
            ambiguous: true,
            ..Default::default()
        },
    )
    .unwrap();
    let flipped: Vec<u64> = fix
        .readings
        .iter()
        .filter(|r| r.flipped)
        .map(|r| r.line)
        .collect();
    assert_eq!(flipped, vec![3, 5]);
    assert!(distance_and_azimuth(fix.position, TRUTH).0 < 3.0);
}

/// Geometry that fixes nothing is refused, not turned into a point.
#[test]
fn unobservable_geometry_is_refused() {
    use pim_core::ErrorClass;
    let class = |r: &[Reading]| {
        pim_core::Error::from(
            locate(
                r,
                &FixOptions {
                    sigma_deg: Some(2.0),
                    ..Default::default()
                },
            )
            .unwrap_err(),
        )
    };
    // parallel bearings from spots along a road
    let a = GeoPoint::new(45.10, -122.41);
    let parallel: Vec<Reading> = (0..4)
        .map(|i| Reading {
            line: i + 2,
            observer: destination(a, 90.0, 100.0 * i as f64),
            bearing_deg: 0.0,
            sigma_deg: None,
            position_accuracy_m: None,
        })
        .collect();
    let e = class(&parallel);
    assert_eq!(e.class, ErrorClass::Refused);
    assert!(e.message.contains("parallel"), "{e}");
    // two bearings that diverge: they cross only behind the observers
    let b = destination(a, 90.0, 200.0);
    let diverging = vec![
        Reading {
            line: 2,
            observer: a,
            bearing_deg: 300.0,
            sigma_deg: None,
            position_accuracy_m: None,
        },
        Reading {
            line: 3,
            observer: b,
            bearing_deg: 60.0,
            sigma_deg: None,
            position_accuracy_m: None,
        },
    ];
    let e = class(&diverging);
    assert_eq!(e.class, ErrorClass::Refused);
    assert!(e.message.contains("behind the observers"), "{e}");
    // a single reading
    let e = class(&diverging[..1]);
    assert!(e.message.contains("at least two"), "{e}");
    // all from one spot
    let same = vec![
        Reading {
            line: 2,
            observer: a,
            bearing_deg: 10.0,
            sigma_deg: None,
            position_accuracy_m: None,
        },
        Reading {
            line: 3,
            observer: a,
            bearing_deg: 80.0,
            sigma_deg: None,
            position_accuracy_m: None,
        },
    ];
    assert!(class(&same).message.contains("same spot"));
}

/// A junction close to the straight line the observers walked: refused when the lines
/// arrive within a degree of each other, warned about when they cross at a few degrees.
#[test]
fn fix_on_the_walked_line_is_refused_or_warned() {
    let along_road = |offset_m: f64| -> Vec<Reading> {
        // observers along a road running east; the source 600 m on, `offset_m` off it
        let start = GeoPoint::new(45.10, -122.42);
        let truth = destination(destination(start, 90.0, 600.0), 0.0, offset_m);
        (0..5)
            .map(|i| {
                let observer = destination(start, 90.0, 60.0 * i as f64);
                let (_, brg) = distance_and_azimuth(observer, truth);
                Reading {
                    line: i + 2,
                    observer,
                    bearing_deg: brg,
                    sigma_deg: Some(1.0),
                    position_accuracy_m: None,
                }
            })
            .collect()
    };
    // the observers stand exactly where logged (with a handheld GPS's 12 m the 60 m case
    // has no bounded region either, and is refused)
    let exact = FixOptions {
        position_accuracy_m: Some(0.0),
        ..Default::default()
    };
    let e = pim_core::Error::from(locate(&along_road(15.0), &exact).unwrap_err());
    assert_eq!(e.class, pim_core::ErrorClass::Refused);
    assert!(locate(&along_road(60.0), &FixOptions::default()).is_err());
    let fix = locate(&along_road(60.0), &exact).unwrap();
    assert!(
        fix.warnings
            .iter()
            .any(|w| w.to_string().contains("walked")),
        "{:?}",
        fix.warnings
    );
    assert!(
        fix.warnings
            .iter()
            .any(|w| w.to_string().contains("weakly observed")),
        "{:?}",
        fix.warnings
    );
}

/// Declination against the World Magnetic Model 2025's published test values (NOAA/BGS
/// WMM2025 report, table of test values; declination to 0.01°): height 0 km.
#[test]
fn declination_matches_wmm2025_test_values() {
    use pim_core::declination::declination_deg;
    use time::Month;
    let d2025 = time::Date::from_calendar_date(2025, Month::January, 1).unwrap();
    let d2027 = time::Date::from_calendar_date(2027, Month::July, 2).unwrap(); // 2027.5
    for (date, lat, lon, want) in [
        (d2025, 80.0, 0.0, 1.28),
        (d2025, 0.0, 120.0, -0.16),
        (d2025, -80.0, -120.0, 68.78),
        (d2027, 80.0, 0.0, 2.59),
        (d2027, 0.0, 120.0, -0.24),
        (d2027, -80.0, -120.0, 68.49),
    ] {
        let got = declination_deg(GeoPoint::new(lat, lon), date).unwrap();
        assert!(
            (got - want).abs() < 0.02,
            "{lat},{lon} on {date}: {got} vs {want}"
        );
    }
}
