//! Checks of the level model and the ranking built on it against independent values: a
//! spectrum computed here of a sampled polynomial nonlinearity, the ITU-R P.525 worked
//! value, simulated power steps, and the invented demo site.

use pim_core::emitter::{carriers, watts_to_dbm, Emitter};
use pim_core::freq::Hz;
use pim_core::geo::{destination, GeoPoint};
use pim_core::intermod::{find_products, SearchParams};
use pim_core::level::{field_strength_dbuv_m, form_weight_db, LevelModel, Mechanism};
use pim_core::rank::{formula, rank, rank_candidates, HeardLevel, Outlook, Placement, RankInputs};
use pim_core::slope::{judge_power_steps, PowerVerdict};

/// |X[m]| of a real series by a direct DFT at one bin.
fn dft_magnitude(y: &[f64], bin: usize) -> f64 {
    let n = y.len() as f64;
    let (mut re, mut im) = (0.0, 0.0);
    for (t, v) in y.iter().enumerate() {
        let ph = -2.0 * std::f64::consts::PI * (bin * t) as f64 / n;
        re += v * ph.cos();
        im += v * ph.sin();
    }
    re.hypot(im)
}

/// y = xⁿ of three equal cosines at bins (300, 347, 532) of 8192 samples: every product
/// of order ≤ 5 compared below sits alone in its bin (checked when choosing the bins).
fn power_law_spectrum(order: i32) -> Vec<f64> {
    let n = 8192;
    let bins = [300.0, 347.0, 532.0];
    (0..n)
        .map(|t| {
            let x: f64 = bins
                .iter()
                .map(|b| (2.0 * std::f64::consts::PI * b * t as f64 / n as f64).cos())
                .sum();
            x.powi(order)
        })
        .collect()
}

/// Source: an FFT (here a direct DFT) of a sampled memoryless power law a·xⁿ driven by
/// equal tones; the triple beat standing 6 dB above the two-tone product is common
/// practice in cable and PIM work (reference-facts: multinomial weights).
#[test]
fn form_weights_match_the_spectrum_of_a_power_law() {
    let y3 = power_law_spectrum(3);
    // 2f1 − f2 = 253, f1 + f2 − f3 = 115.
    let two_tone = dft_magnitude(&y3, 2 * 300 - 347);
    let triple = dft_magnitude(&y3, 300 + 347 - 532);
    let measured3 = 20.0 * (triple / two_tone).log10();
    assert!((measured3 - 6.02).abs() < 0.01, "{measured3}");
    let model3 = form_weight_db(&[1, 1, 1]) - form_weight_db(&[2, 1]);
    assert!((measured3 - model3).abs() < 1e-6, "{measured3} vs {model3}");

    let y5 = power_law_spectrum(5);
    // 3f1 − 2f2 = 206, |2f1 + f2 − 2f3| = 117.
    let a = dft_magnitude(&y5, 3 * 300 - 2 * 347);
    let b = dft_magnitude(&y5, 2 * 532 - 2 * 300 - 347);
    let measured5 = 20.0 * (b / a).log10();
    assert!((measured5 - 9.54).abs() < 0.01, "{measured5}");
    let model5 = form_weight_db(&[2, 1, 2]) - form_weight_db(&[3, 2]);
    assert!((measured5 - model5).abs() < 1e-6, "{measured5} vs {model5}");
}

/// ITU-R P.525: e = √(30·p)/d; 1 kW EIRP at 1 km is 104.8 dB(µV/m), 0.173 V/m.
#[test]
fn field_strength_matches_the_p525_worked_value() {
    let e = field_strength_dbuv_m(60.0, 1000.0);
    assert!((e - 104.8).abs() < 0.05, "{e}");
    let volts = 10f64.powf((e - 120.0) / 20.0);
    assert!((volts - 0.173).abs() < 0.0005, "{volts}");
}

const JUNCTION: GeoPoint = GeoPoint {
    lat_deg: 45.0,
    lon_deg: -122.0,
};

/// An emitter at `distance_m` from the junction whose ERP sets up `field_dbuv_m` there
/// (far field, P.525 inverted).
fn emitter_with_field(
    id: &str,
    freq: Hz,
    bw: Hz,
    azimuth: f64,
    distance_m: f64,
    field: f64,
) -> Emitter {
    let mut e = Emitter::new(id, freq, bw);
    let eirp = field - field_strength_dbuv_m(0.0, distance_m);
    e.erp_dbm = Some(eirp - pim_core::level::DIPOLE_GAIN_DBI);
    e.position = Some(destination(JUNCTION, azimuth, distance_m));
    e
}

fn params(target: Hz, max_order: u32) -> SearchParams {
    SearchParams {
        target,
        rx_bandwidth: Hz(12_500),
        tolerance: Hz(0),
        max_order,
        max_emitters: 3,
    }
}

fn ranked(emitters: &[Emitter], p: &SearchParams) -> pim_core::rank::Ranking {
    let hits = find_products(&carriers(emitters), p);
    rank(
        hits.products,
        emitters,
        p,
        Some(JUNCTION),
        &LevelModel::default(),
    )
}

/// The junction is driven by the field strength, whatever the band: equal fields give
/// equal levels for pairs of the same form (the level model; issue's requirement that the
/// λ²/4π aperture no longer favour low frequencies).
#[test]
fn equal_fields_give_equal_levels_in_every_band() {
    let field = 110.0;
    let mut levels = Vec::new();
    for (f1, f2, d) in [
        (152_840_000, 159_340_000, 800.0),
        (453_250_000, 458_250_000, 800.0),
        (830_000, 1_010_000, 4_000.0),
    ] {
        let em = vec![
            emitter_with_field("A", Hz(f1), Hz(0), 0.0, d, field),
            emitter_with_field("B", Hz(f2), Hz(0), 90.0, d, field),
        ];
        let r = ranked(&em, &params(Hz(2 * f1 - f2), 3));
        let c = r
            .candidates
            .iter()
            .find(|c| c.mechanism == Mechanism::Junction)
            .unwrap();
        assert_eq!(formula(&c.product, &em), "2·A − B");
        for (_, inc) in r.incidence.iter() {
            assert!((inc.field_dbuv_m - field).abs() < 1e-6, "{inc:?}");
        }
        levels.push(c.level_dbm.unwrap());
    }
    assert!((levels[0] - levels[1]).abs() < 1e-6, "{levels:?}");
    assert!((levels[0] - levels[2]).abs() < 1e-6, "{levels:?}");
}

/// An IM3 of two narrow emitters exactly on the channel outranks a wide mix of two FM
/// stations of equal drive centred 175 kHz off, and a distant medium-wave station's
/// seventh-order product (the channel fraction and the drive by field; the issue's
/// examples).
#[test]
fn on_channel_narrow_product_ranks_first() {
    let target = Hz(146_340_000);
    let field = 112.0;
    let em = vec![
        emitter_with_field("PAGE", Hz(152_840_000), Hz(16_000), 10.0, 300.0, field),
        emitter_with_field("FIRE", Hz(159_340_000), Hz(16_000), 100.0, 300.0, field),
        // 2·FMA − FMB = 146.515 MHz, 175 kHz above the channel, 3·137 = 411 kHz wide.
        emitter_with_field("FMA", Hz(97_500_000), Hz(137_000), 200.0, 300.0, field),
        emitter_with_field("FMB", Hz(48_485_000), Hz(137_000), 250.0, 300.0, field),
        // 5 kW medium wave at 4 km: VHF + 6·MW lands on the channel at order 7.
        {
            let mut e = Emitter::new("MW", Hz(830_000), Hz(10_000));
            e.erp_dbm = Some(watts_to_dbm(50_000.0));
            e.position = Some(destination(JUNCTION, 300.0, 4_000.0));
            e
        },
        emitter_with_field("LINK", Hz(141_360_000), Hz(16_000), 330.0, 300.0, field),
    ];
    let p = params(target, 7);
    let r = ranked(&em, &p);
    let names: Vec<String> = r
        .candidates
        .iter()
        .map(|c| format!("{} {:?}", formula(&c.product, &em), c.mechanism))
        .collect();

    let place = |f: &str| {
        names
            .iter()
            .position(|n| n == &format!("{f} Junction"))
            .unwrap_or_else(|| panic!("{f} missing from {names:?}"))
    };
    assert_eq!(place("2·PAGE − FIRE"), 0, "{names:?}");
    assert!(place("2·FMA − FMB") > 0, "{names:?}");
    assert!(place("6·MW + LINK") > 0, "{names:?}");
    let first = &r.candidates[0];
    assert_eq!(first.relative_db, Some(0.0));
    assert!(r
        .candidates
        .iter()
        .all(|c| c.relative_db.is_none_or(|d| d <= 0.0)));
    assert_eq!(r.outlook, Outlook::Credible);
}

/// Simulated power steps of two emitters under a law below the ideal: the coefficients
/// come from the ratios of the slopes (follows from the power law, Pozar; seeded noise).
#[test]
fn power_steps_of_two_emitters_give_the_true_coefficients() {
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut gauss = move || {
        let mut u = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        let (a, b) = (u().max(1e-12), u());
        (-2.0 * a.ln()).sqrt() * (2.0 * std::f64::consts::PI * b).cos()
    };
    for (alpha, ka, kb) in [(0.7, 2u32, 1u32), (1.0, 3, 2), (1.0, 2, 1), (0.7, 3, 2)] {
        let mut series = Vec::new();
        for (id, k) in [("SKP", ka), ("FIRE", kb)] {
            let pts: Vec<(f64, f64)> = (0..=8)
                .map(|i| {
                    let step = -(i as f64);
                    (step, -95.0 + alpha * k as f64 * step + 0.1 * gauss())
                })
                .collect();
            series.push((id.to_string(), pts));
        }
        let r = judge_power_steps(&series).unwrap();
        assert_eq!(r.verdict, PowerVerdict::Coefficients, "{alpha}: {r:?}");
        assert_eq!(
            (r.coefficients[0].k, r.coefficients[1].k),
            (Some(ka), Some(kb))
        );
        let e = r.exponent.unwrap();
        assert!(e.interval.0 <= alpha && alpha <= e.interval.1, "{e:?}");
    }
}

/// The invented demo site: with the junction at the fix of the demo walk, the planted
/// 2·SKP-152 − FIRE-DSP ranks first, and its level heard along the walk is of the order
/// the walk logged (−89.5 to −99 dBm).
#[test]
fn demo_ranks_the_planted_pair_first_with_believable_levels() {
    use pim_io::fieldlog::{prepare, read_field_log};
    let text = std::fs::read(pim_tests::field_log("emitters.csv")).unwrap();
    let emitters = pim_io::read_emitters("emitters.csv", text.as_slice())
        .unwrap()
        .emitters;
    let walk = std::fs::read(pim_tests::field_log("walk.csv")).unwrap();
    let log = read_field_log("walk.csv", walk.as_slice(), false).unwrap();
    let prepared = prepare(&log, None, None, time::macros::date!(2026 - 11 - 28)).unwrap();
    let fix = pim_core::fix::locate(
        &prepared.readings,
        &pim_core::fix::FixOptions {
            method: pim_core::fix::Method::Robust,
            ..Default::default()
        },
    )
    .unwrap();
    let rx = GeoPoint::new(45.103, -122.412);
    let p = params(Hz(146_340_000), 7);
    let hits = find_products(&carriers(&emitters), &p);
    let heard: Vec<HeardLevel> = log
        .rows
        .iter()
        .filter_map(|r| {
            Some(HeardLevel {
                position: Some(r.position?),
                level_dbm: r.level_dbm?,
            })
        })
        .collect();
    assert_eq!(heard.len(), 8);
    let inputs = |heard| RankInputs {
        placement: Placement {
            junction: Some(fix.position),
            receiver: Some(rx),
            fix_radius_m: Some(fix.ellipse.semi_major_m.max(30.0)),
        },
        model: LevelModel::default(),
        logbook: None,
        heard,
    };
    let plain = rank_candidates(hits.products.clone(), &emitters, &p, &inputs(&[]));
    assert_eq!(
        formula(&plain.candidates[0].product, &emitters),
        "2·SKP-152 − FIRE-DSP"
    );
    assert_eq!(plain.candidates[0].mechanism, Mechanism::Junction);
    // The same product made in SKP-152's output stage would be louder at the receiver
    // (a bare transmitter), but the bearings put the source at the fix, not the paging
    // tower some 290 m away.
    let tx_im = plain
        .candidates
        .iter()
        .find(|c| c.mechanism == Mechanism::TransmitterIm)
        .unwrap();
    assert!(tx_im.away_from_fix);
    let junctions: Vec<_> = plain
        .candidates
        .iter()
        .filter(|c| c.mechanism == Mechanism::Junction)
        .collect();
    let first = junctions[0];
    assert_eq!(formula(&first.product, &emitters), "2·SKP-152 − FIRE-DSP");
    // The next junction product is far weaker: the list is not sorted by order alone.
    let gap = junctions[1].relative_db.unwrap() - first.relative_db.unwrap();
    assert!(gap < -20.0, "{gap}");
    let b = first.breakdown.unwrap();
    // At the fix, the product is of the order the walk implies (−89.5 dBm some 120 m
    // away is about −32 dBm there in free space).
    assert!(
        (-60.0..=-25.0).contains(&b.source_level_dbm),
        "{}",
        b.source_level_dbm
    );
    // Believable: within 20 dB of what the walk logged at the receiver site's distance.
    assert!(
        (-120.0..=-85.0).contains(&b.in_channel_dbm),
        "{}",
        b.in_channel_dbm
    );
    // Calibrated by the walk's own levels: the planted pair stays first and needs a
    // plausible junction.
    let cal = rank_candidates(hits.products, &emitters, &p, &inputs(&heard));
    let c = cal
        .candidates
        .iter()
        .find(|c| c.mechanism == Mechanism::Junction)
        .unwrap();
    assert_eq!(formula(&c.product, &emitters), "2·SKP-152 − FIRE-DSP");
    let k = c.calibration.unwrap();
    eprintln!("calibrated by the walk: {k:?}");
    assert_eq!(k.points, 8);
    assert!(!c.implausible);
    assert!(k.shift_db.abs() < 20.0, "{k:?}");
    assert_eq!(cal.outlook, Outlook::Credible);
}
