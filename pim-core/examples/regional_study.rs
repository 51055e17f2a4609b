//! A regional study from the command line, for timing and peak memory
//! (`/usr/bin/time -v`): `regional_study EMITTERS RECEIVERS THREADS`, on the seeded
//! regional licence list of the `regional` benchmark.

#[path = "../benches/support/regional_list.rs"]
mod regional_list;

use pim_core::freq::Hz;
use pim_core::{Query, Site};

fn main() {
    let arg = |i: usize, d: usize| {
        std::env::args()
            .nth(i)
            .and_then(|a| a.parse().ok())
            .unwrap_or(d)
    };
    let (n, count, threads) = (arg(1, 100_000), arg(2, 32), arg(3, 2));
    let (emitters, towers) = regional_list::regional(n, 7);
    let site = Site::new(emitters);
    let start = std::time::Instant::now();
    let mut first = None;
    let mut kept = 0;
    let r: Result<(), pim_core::Error> = pim_core::study::in_order(
        count,
        threads,
        |i| {
            let f = [155_175_000, 460_012_500, 152_512_500, 853_000_000][i % 4];
            let mut q = Query::new(Hz(f));
            q.params.max_order = 5;
            q.junction = Some(towers[(i * 97) % towers.len()]);
            q.limit = Some(10);
            site.explain(&q)
        },
        |_, answer| {
            first.get_or_insert(start.elapsed());
            kept += answer?.ranking.candidates.len();
            Ok(())
        },
    );
    r.expect("within the memory budget");
    let all = start.elapsed();
    println!(
        "{n} emitters, {count} receivers, {threads} threads: {kept} candidates, first receiver {:.3} s, all {:.2} s, {:.3} s a receiver",
        first.map_or(0.0, |d| d.as_secs_f64()),
        all.as_secs_f64(),
        all.as_secs_f64() / count as f64
    );
}
