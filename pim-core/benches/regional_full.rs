//! The regional study at full size, opt-in (about 45 s an iteration, some 8 minutes a
//! run): 100,000 emitters × 5,000 receivers of the seeded regional licence list, top 10
//! at each, order ≤ 5, receivers on 2 threads written in order. Target (scale issue): at
//! most 60 s on 2 cores and 1 GB, the first receiver within 1 s; peak memory and the
//! first receiver are read with the `regional_study` example under `/usr/bin/time -v`.
//! And 100,000 emitters × 1,000 receivers anywhere in the square on random land-mobile
//! channels: at most 60 s and 1 GB, no receiver over 2 s (the example's `anywhere`).
//!
//! `cargo bench -p pim-core --bench regional_full`

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::Site;

#[path = "support/regional_list.rs"]
mod regional_list;
use regional_list::{receivers, receivers_anywhere, regional, run_study};

fn study(c: &mut Criterion) {
    let (emitters, towers) = regional(100_000, 7);
    let site = Site::new(emitters);
    let at = receivers(&towers, 5_000);
    let mut g = c.benchmark_group("regional study, full size");
    g.sample_size(10);
    g.sampling_mode(criterion::SamplingMode::Flat);
    g.warm_up_time(std::time::Duration::from_secs(1));
    // one study a sample: criterion takes at least one iteration each
    g.measurement_time(std::time::Duration::from_secs(1));
    g.bench_function("100000 emitters, 5000 receivers, top 10, 2 threads", |b| {
        b.iter(|| run_study(&site, &at))
    });
    let anywhere = receivers_anywhere(1_000, 11);
    g.bench_function(
        "100000 emitters, 1000 receivers anywhere, top 10, 2 threads",
        |b| b.iter(|| run_study(&site, &anywhere)),
    );
    g.finish();
}

criterion_group!(benches, study);
criterion_main!(benches);
