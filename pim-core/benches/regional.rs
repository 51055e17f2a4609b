//! Regional scale (targets from the scale issue), on a seeded synthetic regional licence
//! list: a 100 km square, emitters clustered on tower sites (VHF and UHF land mobile,
//! paging, trunking, FM broadcast).
//! - explain, 20,000 emitters, order ≤ 5, three emitters, junction at a tower, top 20:
//!   at most 1 s;
//! - study, top 10 at each receiver, receivers on 2 threads written in order: the target
//!   is 100,000 emitters × 5,000 receivers in 60 s (the `regional_full` benchmark, opt-in:
//!   about 8 minutes); benched here at 20,000 emitters × 8 receivers and at 100,000
//!   emitters × 32 receivers for the rate per receiver;
//! - receivers anywhere in the square on random land-mobile channels (scale issue, "wherever
//!   the receivers are"): 100,000 emitters × 1,000 receivers in at most 60 s and 1 GB, no
//!   receiver over 2 s (the `regional_full` benchmark, opt-in); benched here at 100,000
//!   emitters × 32 receivers for the rate per receiver;
//! - a junction 40 km outside the list, 100,000 emitters, top 10: at most 0.5 s.

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::freq::Hz;
use pim_core::{Query, Site};

#[path = "support/regional_list.rs"]
mod regional_list;
use regional_list::{outside, receivers, receivers_anywhere, regional, run_study};

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

fn explain_outside(c: &mut Criterion) {
    let (emitters, _) = regional(100_000, 7);
    let site = Site::new(emitters);
    let mut g = c.benchmark_group("regional explain, junction outside");
    g.sample_size(10);
    for (i, (_, f)) in receivers_anywhere(2, 11).into_iter().enumerate() {
        let mut query = Query::new(f);
        query.params.max_order = 5;
        query.junction = Some(outside(40.0));
        query.limit = Some(10);
        g.bench_function(
            format!("100000 emitters, 40 km outside, channel {i}, top 10"),
            |b| b.iter(|| site.explain(&query)),
        );
    }
    g.finish();
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
        let anywhere = receivers_anywhere(count, 11);
        g.bench_function(
            format!("{n} emitters, {count} receivers anywhere, top 10, 2 threads"),
            |b| b.iter(|| run_study(&site, &anywhere)),
        );
    }
    g.finish();
}

criterion_group!(benches, explain_top, explain_outside, study);
criterion_main!(benches);
