//! The seeded synthetic regional licence list of the `regional` benchmark and the
//! `regional_study` example.

use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::geo::{destination, GeoPoint};
use pim_core::{Query, Site};

#[path = "seeded.rs"]
pub mod seeded;
use seeded::Rng;

/// The south-west corner of the square.
const CORNER: (f64, f64) = (44.55, -122.64);

/// `n` emitters on `n / 8` tower sites in a 100 km square (about 0.9° of latitude by
/// 1.27° of longitude at 45° N): class, channel raster, width and ERP drawn per emitter.
pub fn regional(n: usize, seed: u64) -> (Vec<Emitter>, Vec<GeoPoint>) {
    let mut rng = Rng(seed | 1);
    let towers: Vec<GeoPoint> = (0..(n / 8).max(1))
        .map(|_| GeoPoint::new(CORNER.0 + 0.9 * rng.unit(), CORNER.1 + 1.27 * rng.unit()))
        .collect();
    let emitters = (0..n)
        .map(|i| {
            let tower = towers[rng.below(towers.len() as i64) as usize];
            let class = rng.below(100);
            // (low Hz, channels, raster Hz, width Hz, ERP W low, high, kind)
            let (lo, channels, raster, width, erp, kind) = match class {
                0..=39 => (
                    150_800_000,
                    9_000,
                    2_500,
                    11_250,
                    (20.0, 300.0),
                    "land mobile",
                ),
                40..=64 => (
                    450_000_000,
                    3_200,
                    6_250,
                    11_250,
                    (20.0, 200.0),
                    "land mobile",
                ),
                65..=69 => (152_000_000, 560, 12_500, 16_000, (100.0, 1_000.0), "paging"),
                70..=94 => (
                    851_000_000,
                    1_440,
                    12_500,
                    16_000,
                    (50.0, 500.0),
                    "trunking",
                ),
                _ => (
                    88_100_000,
                    100,
                    200_000,
                    180_000,
                    (1_000.0, 50_000.0),
                    "FM broadcast",
                ),
            };
            let f = lo + rng.below(channels) * raster;
            let mut e = Emitter::new(format!("TX{i}"), Hz(f), Hz(width));
            let w = erp.0 + (erp.1 - erp.0) * rng.unit();
            e.erp_dbm = Some(pim_core::emitter::watts_to_dbm(w));
            e.position = Some(destination(tower, 360.0 * rng.unit(), 50.0 * rng.unit()));
            e.height_m = Some(20.0 + 60.0 * rng.unit());
            e.kind = Some(kind.to_string());
            e
        })
        .collect();
    (emitters, towers)
}

/// `count` receivers anywhere in the square (receive-only sites, voting receivers, a
/// monitoring receiver on a hill), each on a random channel of the VHF and UHF land
/// mobile and 800 MHz trunking bands of [`regional`]'s rasters, seeded by `seed`.
#[allow(dead_code)] // not every benchmark studies
pub fn receivers_anywhere(count: usize, seed: u64) -> Vec<(GeoPoint, Hz)> {
    let mut rng = Rng(seed | 1);
    // a small seed's first draws are small
    for _ in 0..8 {
        rng.next();
    }
    (0..count)
        .map(|_| {
            let at = GeoPoint::new(CORNER.0 + 0.9 * rng.unit(), CORNER.1 + 1.27 * rng.unit());
            let f = match rng.below(90) {
                0..=39 => 150_800_000 + rng.below(9_000) * 2_500,
                40..=64 => 450_000_000 + rng.below(3_200) * 6_250,
                _ => 851_000_000 + rng.below(1_440) * 12_500,
            };
            (at, Hz(f))
        })
        .collect()
}

/// A junction `km` kilometres south of the square's southern edge, below its middle.
#[allow(dead_code)] // not every benchmark studies
pub fn outside(km: f64) -> GeoPoint {
    destination(
        GeoPoint::new(CORNER.0, CORNER.1 + 0.635),
        180.0,
        km * 1_000.0,
    )
}

/// `count` receivers at towers, on channels of the land mobile, UHF and trunking bands.
#[allow(dead_code)] // not every benchmark studies
pub fn receivers(towers: &[GeoPoint], count: usize) -> Vec<(GeoPoint, Hz)> {
    (0..count)
        .map(|i| {
            let f = [155_175_000, 460_012_500, 152_512_500, 853_000_000][i % 4];
            (towers[(i * 97) % towers.len()], Hz(f))
        })
        .collect()
}

/// Studies `receivers` on `site` on 2 threads, in order, order ≤ 5, top 10 each; the
/// candidates kept.
#[allow(dead_code)] // not every benchmark studies
pub fn run_study(site: &Site, receivers: &[(GeoPoint, Hz)]) -> Result<usize, pim_core::Error> {
    let mut kept = 0;
    pim_core::study::in_order(
        receivers.len(),
        2,
        |i| {
            let (at, f) = receivers[i];
            let mut q = Query::new(f);
            q.params.max_order = 5;
            q.junction = Some(at);
            q.limit = Some(10);
            site.explain(&q)
        },
        |_, answer| {
            kept += answer?.ranking.candidates.len();
            Ok(())
        },
    )
    .map(|_| kept)
}
