//! A recording's second pass at scale: 10,000-point sweeps followed through
//! [`pim_core::recording::PresenceTracker`] (each sweep's own floor, 20 watched points),
//! then the presences merged into intervals. The target of its issue is 10,000 sweeps of
//! 10,000 points in bounded memory; criterion times 1,000 sweeps (a full run is ten
//! times that, linear in the sweeps), and the memory the tracker holds is printed: the
//! sweep itself is the caller's (80 kB at 10,000 points) and is reused, so what grows is
//! 16 + 5·W bytes a sweep.

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::recording::{PresenceRule, PresenceTracker};
use pim_core::time::{Duration, OffsetDateTime};

#[path = "support/seeded.rs"]
mod seeded;
use seeded::Rng;

const POINTS: usize = 10_000;
const WATCHED: usize = 20;

fn rule() -> PresenceRule {
    PresenceRule {
        threshold_db: 13.0,
        hysteresis_db: 3.0,
        bridge_sweeps: 1,
        min_run_sweeps: 2,
        floor_window_points: 101,
        half_width_points: 1,
    }
}

fn run(sweeps: usize, noise: &[f64]) -> usize {
    let watches: Vec<usize> = (0..WATCHED).map(|w| 250 + w * 480).collect();
    let mut tracker = PresenceTracker::new(rule(), POINTS, watches.clone());
    let t0 = OffsetDateTime::UNIX_EPOCH;
    let mut sweep = vec![0.0; POINTS];
    for s in 0..sweeps {
        // the noise rotated by the sweep number: a new sweep without a new random draw
        let r = (s * 7919) % POINTS;
        sweep[..POINTS - r].copy_from_slice(&noise[r..]);
        sweep[POINTS - r..].copy_from_slice(&noise[..r]);
        for (k, &w) in watches.iter().enumerate() {
            if (s / (5 + k)) % 2 == 0 {
                sweep[w] = -70.0;
            }
        }
        let _ = tracker.observe(t0 + Duration::seconds(s as i64), &sweep);
    }
    let p = tracker.finish();
    p.watches.iter().map(|w| w.intervals.len()).sum()
}

fn bench(c: &mut Criterion) {
    let mut rng = Rng(0x5eed_0030);
    let noise: Vec<f64> = (0..POINTS)
        .map(|_| -110.0 + 10.0 * (-rng.open_unit().ln() / std::f64::consts::LN_2).log10())
        .collect();
    let held = |sweeps: usize| sweeps * (16 + 5 * WATCHED);
    eprintln!(
        "recording: tracker holds {} bytes for 1,000 sweeps, {} bytes for 10,000 sweeps of {POINTS} points ({WATCHED} watched), plus one sweep of {} bytes",
        held(1_000),
        held(10_000),
        POINTS * 8
    );
    let mut group = c.benchmark_group("recording");
    group.sample_size(10);
    group.bench_function("1000 sweeps x 10000 points, 20 watched", |b| {
        b.iter(|| run(1_000, &noise))
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
