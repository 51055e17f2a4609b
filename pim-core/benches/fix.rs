//! Speed of the fix: a 1,000-reading log fixed with its region in under 50 ms, and a
//! 100,000-reading log (targets: ml 0.5 s, robust 1.5 s; two passes now: ml about 0.85 s).

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::fix::{locate, FixOptions, Method, Reading};
use pim_core::geo::{destination, distance_and_azimuth, normalize_bearing_deg, GeoPoint};

fn readings(n: usize) -> Vec<Reading> {
    let truth = GeoPoint::new(45.10462, -122.414033);
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|i| {
            let observer = destination(truth, 360.0 * uniform(), 100.0 + 400.0 * uniform());
            let (_, brg) = distance_and_azimuth(observer, truth);
            // a triangular error of about 2° standard deviation
            let err = 2.45 * (uniform() + uniform() - 1.0) * 2.0;
            Reading {
                line: i as u64 + 2,
                observer,
                bearing_deg: normalize_bearing_deg(brg + err),
                sigma_deg: None,
                position_accuracy_m: None,
            }
        })
        .collect()
}

fn fix_speed(c: &mut Criterion) {
    for (n, samples) in [(1_000, 20), (100_000, 10)] {
        let log = readings(n);
        let mut g = c.benchmark_group(format!("{n}-reading log"));
        g.sample_size(samples);
        for (name, method) in [
            ("ml", Method::Ml),
            ("robust", Method::Robust),
            ("ls", Method::Ls),
        ] {
            g.bench_function(name, |b| {
                b.iter(|| {
                    locate(
                        &log,
                        &FixOptions {
                            method,
                            ..Default::default()
                        },
                    )
                })
            });
        }
        g.finish();
    }
}

criterion_group!(benches, fix_speed);
criterion_main!(benches);
