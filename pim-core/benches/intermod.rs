//! Speed of the product search (targets from the engine's issue):
//! - against the brute-force oracle at 300 emitters, three emitters, order ≤ 5;
//! - 1,200 emitters over 30–960 MHz with 11–25 kHz widths, three emitters, order ≤ 5,
//!   search and rank in under 1 s;
//! - the search's own cost with few hits (zero widths, narrow window) as N doubles;
//! - two emitters, order ≤ 9, 10,000 emitters, under 1 s;
//! - a mixed site, FM broadcast (200 kHz) beside 12.5 kHz land mobile, three emitters:
//!   the window of each bandwidth class is only as wide as the class.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use pim_core::emitter::{Carrier, Emitter};
use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::intermod::oracle::find_products_brute_force;
use pim_core::intermod::{find_products, SearchParams};
use pim_core::level::JunctionModel;
use pim_core::rank::rank;

#[path = "support/seeded.rs"]
mod seeded;
use seeded::raster_site as site;

fn carriers(e: &[Emitter]) -> Vec<Carrier> {
    pim_core::emitter::carriers(e)
}

fn params(target: i64, rx: i64, max_order: u32, max_emitters: u32) -> SearchParams {
    SearchParams {
        target: Hz(target),
        rx_bandwidth: Hz(rx),
        tolerance: Hz(0),
        max_order,
        max_emitters,
    }
}

fn against_oracle(c: &mut Criterion) {
    let tx = carriers(&site(300, 140_000_000, 175_000_000, (11_000, 25_000), 1));
    let p = params(155_000_000, 12_500, 5, 3);
    eprintln!(
        "300 emitters: {} products hit",
        find_products(&tx, &p).products.len()
    );
    let mut g = c.benchmark_group("300 emitters, order 5, three emitters");
    g.sample_size(10);
    g.bench_function("search", |b| b.iter(|| find_products(&tx, &p)));
    g.bench_function("brute force", |b| {
        b.iter(|| find_products_brute_force(&tx, &p))
    });
    g.finish();
}

fn large_site(c: &mut Criterion) {
    let tx = site(1_200, 30_000_000, 960_000_000, (11_000, 25_000), 2);
    let cs = carriers(&tx);
    let p = params(155_000_000, 12_500, 5, 3);
    let junction = Some(GeoPoint::new(45.01, -121.99));
    let model = JunctionModel::default();
    eprintln!(
        "1200 emitters: {} products hit",
        find_products(&cs, &p).products.len()
    );
    let mut g = c.benchmark_group("1200 emitters 30-960 MHz, order 5");
    g.sample_size(10);
    g.bench_function("search and rank", |b| {
        b.iter(|| {
            let hits = find_products(&cs, &p);
            rank(hits.products, &tx, &p, junction, &model)
        })
    });
    g.finish();
}

fn scaling(c: &mut Criterion) {
    let mut g = c.benchmark_group("search cost, few hits (zero widths)");
    g.sample_size(10);
    for n in [250usize, 500, 1_000, 2_000] {
        let tx = carriers(&site(n, 30_000_000, 960_000_000, (0, 0), 3));
        let p = params(155_000_000, 0, 5, 3);
        g.bench_with_input(BenchmarkId::from_parameter(n), &tx, |b, tx| {
            b.iter(|| find_products(tx, &p))
        });
    }
    g.finish();
}

fn two_emitters_high_order(c: &mut Criterion) {
    let tx = carriers(&site(10_000, 30_000_000, 960_000_000, (11_000, 25_000), 4));
    let p = params(155_000_000, 12_500, 9, 2);
    let mut g = c.benchmark_group("10000 emitters, two emitters, order 9");
    g.sample_size(10);
    g.bench_function("search", |b| b.iter(|| find_products(&tx, &p)));
    g.finish();
}

/// 1,000 land-mobile emitters on 12.5 kHz channels (VHF and UHF) and 100 FM broadcast
/// stations at 200 kHz, order ≤ 5, three emitters, a 12.5 kHz channel at 155 MHz.
fn mixed_widths(c: &mut Criterion) {
    let mut e = site(600, 150_000_000, 174_000_000, (12_500, 12_500), 5);
    e.extend(site(400, 450_000_000, 470_000_000, (12_500, 12_500), 6));
    e.extend(site(100, 88_000_000, 108_000_000, (200_000, 200_000), 7));
    let tx = carriers(&e);
    let p = params(155_000_000, 12_500, 5, 3);
    eprintln!(
        "mixed widths: {} products hit",
        find_products(&tx, &p).products.len()
    );
    let mut g = c.benchmark_group("1100 emitters, FM beside land mobile, order 5");
    g.sample_size(10);
    g.bench_function("search", |b| b.iter(|| find_products(&tx, &p)));
    g.finish();
}

criterion_group!(
    benches,
    against_oracle,
    large_site,
    scaling,
    two_emitters_high_order,
    mixed_widths
);
criterion_main!(benches);
