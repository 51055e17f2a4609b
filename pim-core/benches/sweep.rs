//! Speed and memory of `pim sweep` (target from its issue): a 100,000-point trace of
//! 136–176 MHz against a regional list of 2,000 emitters, default options (a 12.5 kHz
//! channel, orders up to 7, products of up to three emitters, the first 20 candidates of
//! each peak), at most 2 s and 500 MB on the project's two-core machine, with the
//! junction at the receiver's tower and with no location: floor, peaks, each peak
//! explained and the suspects ranked.
//!
//! The list is the seeded regional one of the `regional` benchmark (VHF and UHF land
//! mobile, paging, trunking, FM broadcast on tower sites in a 100 km square). The trace
//! steps 400 Hz over a floor sloping from −112 to −106 dBm with averaged noise
//! (σ = 1 dB); on it stand the carriers of the 30 in-band emitters nearest the receiver
//! and 30 third-order products 2A − B of them: 60 peaks, as a site's trace shows.
//!
//! The peak memory of the process (`VmHWM`) is printed after the runs.

use criterion::{criterion_group, criterion_main, Criterion};
use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::geo::{distance_m, GeoPoint};
use pim_core::level::JunctionModel;
use pim_core::rank::Placement;
use pim_core::trace::classify::ExplainRule;
use pim_core::trace::{analyse, SweepRule, Trace};
use pim_core::Site;

#[path = "support/regional_list.rs"]
mod regional_list;
use regional_list::seeded::Rng;

const START_HZ: i64 = 136_000_000;
const STOP_HZ: i64 = 176_000_000;
const POINTS: usize = 100_000;

fn step_hz() -> f64 {
    (STOP_HZ - START_HZ) as f64 / (POINTS - 1) as f64
}

fn plant(levels: &mut [f64], freq_hz: i64, level_dbm: f64) {
    let x = (freq_hz - START_HZ) as f64 / step_hz();
    if x < 2.0 || x > (POINTS - 3) as f64 {
        return;
    }
    // A 3 kHz-wide bump (a narrowband carrier seen with a 3 kHz resolution bandwidth).
    let i0 = x.round() as i64;
    for i in (i0 - 10).max(0)..(i0 + 11).min(POINTS as i64) {
        let d = (i as f64 - x) * step_hz() / 3_000.0;
        let v = level_dbm - 12.0 * d * d;
        let l = &mut levels[i as usize];
        *l = l.max(v);
    }
}

/// The trace heard at `rx`: the 30 in-band emitters nearest it and 30 products 2A − B
/// of them.
fn trace(emitters: &[Emitter], rx: GeoPoint, seed: u64) -> Trace {
    let mut rng = Rng(seed);
    let mut levels: Vec<f64> = (0..POINTS)
        .map(|i| -112.0 + 6.0 * i as f64 / POINTS as f64 + rng.normal())
        .collect();
    let mut near: Vec<(f64, &Emitter)> = emitters
        .iter()
        .filter(|e| (START_HZ + 100_000..STOP_HZ - 100_000).contains(&e.freq.0))
        .filter_map(|e| Some((distance_m(rx, e.position?), e)))
        .collect();
    near.sort_by(|a, b| a.0.total_cmp(&b.0));
    near.truncate(30);
    for (_, e) in &near {
        plant(&mut levels, e.freq.0, -60.0);
    }
    let mut planted = 0;
    'outer: for (_, a) in &near {
        for (_, b) in &near {
            let p = 2 * a.freq.0 - b.freq.0;
            if a.id != b.id && (START_HZ + 100_000..STOP_HZ - 100_000).contains(&p) {
                plant(&mut levels, p, -90.0);
                planted += 1;
                if planted == 30 {
                    break 'outer;
                }
            }
        }
    }
    Trace {
        start: Hz(START_HZ),
        step_hz: step_hz(),
        levels_dbm: levels,
        sweeps: 1,
    }
}

fn rule(junction: Option<GeoPoint>) -> SweepRule {
    SweepRule {
        threshold_db: 10.0,
        floor_window_points: None,
        explain: ExplainRule {
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 7,
            max_emitters: 3,
            placement: Placement::at(junction),
            model: JunctionModel::default(),
            keep_candidates: Some(20),
        },
        threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
    }
}

/// The process's peak resident memory, from `/proc/self/status` (Linux).
fn peak_memory() -> String {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .map(|l| l.trim_start_matches("VmHWM:").trim().to_string())
        })
        .unwrap_or_else(|| "unknown".into())
}

fn sweep_bench(c: &mut Criterion) {
    let (emitters, towers) = regional_list::regional(2_000, 7);
    let rx = towers[0];
    let t = trace(&emitters, rx, 11);
    let site = Site::new(emitters);
    let mut g = c.benchmark_group("sweep, 100,000 points x 2,000 regional emitters");
    g.sample_size(10);
    for (name, junction) in [
        ("junction at the receiver", Some(rx)),
        ("no location", None),
    ] {
        let r = rule(junction);
        let started = std::time::Instant::now();
        let s = analyse(&t, &site, &r).expect("within the memory budget");
        let once = started.elapsed();
        let candidates: usize = s.peaks.iter().map(|p| p.ranking.candidates.len()).sum();
        eprintln!(
            "{name}: {} peaks ({} products), {candidates} candidates, {} suspects; one run {once:.2?}",
            s.peaks.len(),
            s.peaks
                .iter()
                .filter(|p| p.kind == pim_core::trace::classify::PeakKind::Product)
                .count(),
            s.suspects.len()
        );
        g.bench_function(name, |b| b.iter(|| analyse(&t, &site, &r)));
    }
    g.finish();
    eprintln!("peak resident memory: {}", peak_memory());
}

criterion_group!(benches, sweep_bench);
criterion_main!(benches);
