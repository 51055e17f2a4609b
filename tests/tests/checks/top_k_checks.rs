//! The first K of a ranking kept in bounded memory equal the first K of the full
//! ranking, with and without locations (the bound the search prunes by is exact: see
//! `pim_core::level`, "Bound for pruning"). The reference is the full listing itself.

use pim_core::emitter::{watts_to_dbm, Emitter};
use pim_core::freq::Hz;
use pim_core::geo::{destination, GeoPoint};
use pim_core::level::LevelModel;
use pim_core::{Explanation, Query, Site};
use proptest::prelude::*;

/// One generated emitter: channel on a 12.5 kHz raster near 150 MHz (or an FM station),
/// width, and optionally an ERP and a place round the junction.
#[derive(Clone, Debug)]
struct Spec {
    channel: i64,
    fm: bool,
    width: i64,
    erp_w: Option<f64>,
    place: Option<(f64, f64)>,
}

fn spec() -> impl Strategy<Value = Spec> {
    (
        0i64..96,
        prop::bool::weighted(0.1),
        prop::sample::select(vec![0i64, 11_250, 16_000, 180_000]),
        prop::option::weighted(0.9, 1.0f64..500.0),
        prop::option::weighted(0.9, (0.0f64..360.0, 5.0f64..5_000.0)),
    )
        .prop_map(|(channel, fm, width, erp_w, place)| Spec {
            channel,
            fm,
            width,
            erp_w,
            place,
        })
}

fn build(specs: &[Spec], junction: GeoPoint, located: bool) -> Site {
    Site::new(
        specs
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let f = if s.fm {
                    88_100_000 + (s.channel % 100) * 200_000
                } else {
                    148_000_000 + s.channel * 12_500
                };
                let mut e = Emitter::new(format!("TX{i:02}"), Hz(f), Hz(s.width));
                if located {
                    e.erp_dbm = s.erp_w.map(watts_to_dbm);
                    e.position = s.place.map(|(az, d)| destination(junction, az, d));
                }
                e
            })
            .collect(),
    )
}

/// `query` with `limit: Some(k)` gives exactly the first K candidates of the full
/// ranking, ranks, levels and relative levels included, and the same counts where it
/// says it counted all.
fn first_k_agree(
    site: &Site,
    mut query: Query,
    k: usize,
) -> Result<(Explanation, Explanation), TestCaseError> {
    let full = site.explain(&query).unwrap();
    query.limit = Some(k);
    let top = site.explain(&query).unwrap();
    let want = &full.ranking.candidates[..k.min(full.ranking.candidates.len())];
    prop_assert_eq!(top.ranking.candidates.len(), want.len());
    for (a, b) in top.ranking.candidates.iter().zip(want) {
        prop_assert_eq!(a, b);
    }
    prop_assert_eq!(&top.co_channel, &full.co_channel);
    prop_assert_eq!(top.ranking.outlook, full.ranking.outlook);
    if top.complete {
        prop_assert_eq!(top.found, full.found);
        prop_assert_eq!(top.kept, full.kept);
        prop_assert_eq!(top.ranking.total, full.ranking.total);
        prop_assert_eq!(top.ranking.unlevelled, full.ranking.unlevelled);
    } else {
        prop_assert!(top.found <= full.found);
    }
    Ok((top, full))
}

proptest! {
    // A fixed seed and no regression files: the same cases on every run and machine.
    #![proptest_config(ProptestConfig { cases: 256, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_201), failure_persistence: None, ..ProptestConfig::default() })]

    /// `limit: Some(K)` gives exactly the first K candidates of the full ranking, ranks,
    /// levels and relative levels included.
    #[test]
    fn limit_k_equals_the_first_k_of_the_full_listing(
        specs in prop::collection::vec(spec(), 3..56),
        target_channel in 0i64..96,
        k in 0usize..30,
        max_order in 2u32..7,
        max_emitters in 1u32..4,
        located in prop::bool::weighted(0.7),
        iip3 in prop::option::of(-20.0f64..20.0),
        alpha in 0.3f64..1.2,
        narrow in prop::option::of(0u32..3),
    ) {
        let junction = GeoPoint::new(45.0, -122.0);
        let site = build(&specs, junction, located);
        let mut query = Query::new(Hz(148_000_000 + target_channel * 12_500));
        query.params.max_order = max_order;
        query.params.max_emitters = max_emitters;
        query.junction = located.then_some(junction);
        query.model = LevelModel { rx_iip3_dbm: iip3, drive_exponent: alpha, ..LevelModel::default() };
        query.coefficients = narrow.map(|kk| vec![(0, kk)]).unwrap_or_default();
        first_k_agree(&site, query, k)?;
    }
}

/// A larger site: more emitters than the strong emitters' first look takes (64), ERPs
/// from 1 W to 50 kW and places out to 20 km, so that the drive bounds, the strong
/// emitters' floor and the transmitters' own bound all prune.
fn wide_spec() -> impl Strategy<Value = Spec> {
    (
        0i64..96,
        prop::bool::weighted(0.1),
        prop::sample::select(vec![11_250i64, 16_000, 180_000]),
        prop::option::weighted(0.95, 1.0f64..50_000.0),
        prop::option::weighted(0.95, (0.0f64..360.0, 2.0f64..20_000.0)),
    )
        .prop_map(|(channel, fm, width, erp_w, place)| Spec {
            channel,
            fm,
            width,
            erp_w,
            place,
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 32, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_202), failure_persistence: None, ..ProptestConfig::default() })]

    /// The same on sites past the first look, the fields of the candidates' emitters
    /// included.
    #[test]
    fn limit_k_equals_the_first_k_on_larger_sites(
        specs in prop::collection::vec(wide_spec(), 70..130),
        target_channel in 0i64..96,
        k in 1usize..25,
        max_order in 3u32..6,
        max_emitters in 2u32..4,
        alpha in 0.5f64..1.2,
        weak_junction in prop::bool::ANY,
    ) {
        let junction = GeoPoint::new(45.0, -122.0);
        let site = build(&specs, junction, true);
        let mut query = Query::new(Hz(148_000_000 + target_channel * 12_500));
        query.params.max_order = max_order;
        query.params.max_emitters = max_emitters;
        query.junction = Some(junction);
        // with a junction that hardly converts, the transmitters' own products lead
        let shift = if weak_junction { 150.0 } else { 0.0 };
        let im3_dbm = LevelModel::default().im3_dbm - shift;
        query.model = LevelModel { drive_exponent: alpha, im3_dbm, ..LevelModel::default() };
        let (top, full) = first_k_agree(&site, query, k)?;
        // the fields of the candidates' emitters too
        for a in &top.ranking.candidates {
            for t in a.product.terms() {
                prop_assert_eq!(
                    top.ranking.incidence.get(t.emitter).map(|i| i.incident_dbm),
                    full.ranking.incidence.get(t.emitter).map(|i| i.incident_dbm)
                );
            }
        }
    }
}

/// One emitter of a tower site: which tower, its channel (VHF land mobile near 150 MHz,
/// FM broadcast, or low VHF at a third of the channel so that its harmonic lands), ERP
/// and where on the tower.
#[derive(Clone, Debug)]
struct OnTower {
    tower: usize,
    band: u8,
    channel: i64,
    erp_w: Option<f64>,
    offset: (f64, f64),
}

fn on_tower(towers: usize) -> impl Strategy<Value = OnTower> {
    (
        0..towers,
        prop::sample::select(vec![0u8, 0, 0, 0, 0, 0, 1, 2]),
        0i64..96,
        prop::option::weighted(0.97, 5.0f64..5_000.0),
        (0.0f64..360.0, 0.0f64..60.0),
    )
        .prop_map(|(tower, band, channel, erp_w, offset)| OnTower {
            tower,
            band,
            channel,
            erp_w,
            offset,
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 12, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_204), failure_persistence: None, ..ProptestConfig::default() })]

    /// The same with the receiver anywhere among tower sites (not at a tower, or far
    /// outside them): more emitters than the transmitters' own products are walked one
    /// at a time (256), so the rest are searched by frequency; where those products lead,
    /// their K-th level bounds the junction's search.
    #[test]
    fn limit_k_equals_the_first_k_with_the_receiver_anywhere(
        towers in prop::collection::vec((0.0f64..360.0, 300.0f64..15_000.0), 30..60),
        emitters in prop::collection::vec(on_tower(60), 300..380),
        target_channel in 0i64..96,
        k in 1usize..15,
        max_order in 3u32..6,
        max_emitters in 2u32..4,
        outside_km in prop::option::weighted(0.25, 20.0f64..60.0),
    ) {
        let centre = GeoPoint::new(45.0, -122.0);
        let sites: Vec<GeoPoint> = towers.iter().map(|&(az, d)| destination(centre, az, d)).collect();
        let site = Site::new(
            emitters
                .iter()
                .enumerate()
                .map(|(i, s)| {
                    let f = match s.band {
                        0 => 148_000_000 + s.channel * 12_500,
                        1 => 88_100_000 + (s.channel % 100) * 200_000,
                        _ => 49_330_000 + s.channel * 4_000,
                    };
                    let w = if s.band == 1 { 180_000 } else { 11_250 };
                    let mut e = Emitter::new(format!("TX{i:03}"), Hz(f), Hz(w));
                    e.erp_dbm = s.erp_w.map(watts_to_dbm);
                    e.position = Some(destination(sites[s.tower % sites.len()], s.offset.0, s.offset.1));
                    e.height_m = Some(30.0);
                    e.kind = Some(if s.band == 1 { "FM broadcast" } else { "land mobile" }.into());
                    e
                })
                .collect(),
        );
        let junction = match outside_km {
            Some(km) => destination(centre, 90.0, km * 1_000.0),
            None => centre,
        };
        let mut query = Query::new(Hz(148_000_000 + target_channel * 12_500));
        query.params.max_order = max_order;
        query.params.max_emitters = max_emitters;
        query.junction = Some(junction);
        first_k_agree(&site, query, k)?;
    }
}
