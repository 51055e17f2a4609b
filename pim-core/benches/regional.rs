//! Regional scale (targets from the scale issue), on a seeded synthetic regional licence
//! list: a 100 km square, emitters clustered on tower sites (VHF and UHF land mobile,
//! paging, trunking, FM broadcast).
//! - explain, 20,000 emitters, order ≤ 5, three emitters, junction at a tower, top 20:
//!   at most 1 s;
//! - study, top 10 at each receiver, receivers on 2 threads written in order: the target
//!   is 100,000 emitters × 5,000 receivers in 60 s; benched at 20,000 emitters × 8
//!   receivers and at 100,000 emitters × 32 receivers for the rate per receiver.

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::{Query, Site};

#[path = "support/regional_list.rs"]
mod regional_list;
use regional_list::regional;

fn explain_top(c: &mut Criterion) {
    let (emitters, towers) = regional(20_000, 7);
    let site = Site::new(emitters);
    let mut query = Query::new(Hz(155_175_000));
    query.params.max_order = 5;
    query.params.max_emitters = 3;
    query.junction = Some(towers[0]);
    query.limit = Some(20);
    let answer = site.explain(&query).expect("within the memory budget");
    eprintln!(
        "20,000 emitters: {} candidates kept, {} products examined",
        answer.ranking.candidates.len(),
        answer.found
    );
    let mut g = c.benchmark_group("regional explain");
    g.sample_size(10);
    g.bench_function("20000 emitters, order 5, top 20", |b| {
        b.iter(|| site.explain(&query))
    });
    g.finish();
}

/// Receivers at towers, on channels of the land mobile, UHF and trunking bands.
fn receivers(towers: &[GeoPoint], count: usize) -> Vec<(GeoPoint, Hz)> {
    (0..count)
        .map(|i| {
            let f = [155_175_000, 460_012_500, 152_512_500, 853_000_000][i % 4];
            (towers[(i * 97) % towers.len()], Hz(f))
        })
        .collect()
}

/// Studies `receivers` on `site` on 2 threads, in order; the candidates kept.
fn run_study(site: &Site, receivers: &[(GeoPoint, Hz)]) -> Result<usize, pim_core::Error> {
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

fn study(c: &mut Criterion) {
    let mut g = c.benchmark_group("regional study");
    g.sample_size(10);
    for (n, count) in [(20_000, 8), (100_000, 32)] {
        let (emitters, towers) = regional(n, 7);
        let site = Site::new(emitters);
        let at = receivers(&towers, count);
        g.bench_function(
            format!("{n} emitters, {count} receivers, top 10, 2 threads"),
            |b| b.iter(|| run_study(&site, &at)),
        );
    }
    g.finish();
}

criterion_group!(benches, explain_top, study);
criterion_main!(benches);
