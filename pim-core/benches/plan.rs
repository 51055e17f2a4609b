//! Speed of the channel planner (target from the planner's issue): third order, the
//! largest set from a uniform 35-channel grid, which is 8 channels (the optimal Golomb
//! ruler of 8 marks has length 34, OEIS A003022), found and proved optimal in under 1 s.

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::freq::Hz;
use pim_core::plan::{grid, plan, PlanSpec};

fn golomb_eight_of_thirty_five(c: &mut Criterion) {
    let channels = grid(Hz(150_000_000), Hz(12_500), 35);
    let spec = PlanSpec {
        order: 3,
        guard: Hz::ZERO,
    };
    let first = plan(&channels, &[], &spec).expect("a valid plan");
    assert_eq!(first.chosen.len(), 8);
    assert!(first.optimal);
    eprintln!(
        "35-channel grid, order 3: {} channels, optimal {}, {} conflicts, {} nodes",
        first.chosen.len(),
        first.optimal,
        first.conflicts,
        first.nodes
    );
    let mut g = c.benchmark_group("plan");
    g.sample_size(10);
    g.bench_function("third order, 35-channel grid, 8 proved optimal", |b| {
        b.iter(|| plan(&channels, &[], &spec))
    });
    g.finish();
}

criterion_group!(benches, golomb_eight_of_thirty_five);
criterion_main!(benches);
