//! The benchmarks' seeded random source (xorshift64) and the raster site the product
//! search and sweep benchmarks share: the same lists on every run and machine.

// each benchmark draws only some of these
#![allow(dead_code)]

use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;

pub struct Rng(pub u64);

impl Rng {
    pub fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    /// In 0..n.
    pub fn below(&mut self, n: i64) -> i64 {
        (self.next() % n as u64) as i64
    }

    /// In [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// In (0, 1): a logarithm may be taken.
    pub fn open_unit(&mut self) -> f64 {
        ((self.next() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal (Box–Muller).
    pub fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.open_unit(), self.open_unit());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// `n` emitters on a 1 kHz raster over `lo`..`hi` Hz with widths in `bw` Hz, ERPs of
/// 30–60 dBm, in a 2 km square.
pub fn raster_site(n: usize, lo: i64, hi: i64, bw: (i64, i64), seed: u64) -> Vec<Emitter> {
    let mut rng = Rng(seed);
    (0..n)
        .map(|i| {
            let f = lo + rng.below((hi - lo) / 1_000) * 1_000;
            let w = if bw.1 > bw.0 {
                bw.0 + rng.below(bw.1 - bw.0)
            } else {
                bw.0
            };
            let mut e = Emitter::new(format!("TX{i}"), Hz(f), Hz(w));
            e.erp_dbm = Some(30.0 + rng.below(300) as f64 / 10.0);
            e.position = Some(GeoPoint::new(
                45.0 + rng.below(2_000) as f64 / 100_000.0,
                -122.0 + rng.below(2_000) as f64 / 100_000.0,
            ));
            e
        })
        .collect()
}
