//! The walk page's save at 5,000 readings: one POST /reading answered (target: under
//! 200 ms), the reading then taken back so the log stays at 5,000. Also the page's
//! state and map of an unchanged log, answered from the cache of its version.
//!
//! `pim walk` runs as a child process on the loopback.

use std::io::{BufRead, BufReader, Write};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion};

struct Walk(Child);

impl Drop for Walk {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// A log of `n` readings around one junction, each from its own spot and minute.
fn log_text(n: usize) -> String {
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let (lat0, lon0) = (45.10462_f64, -122.414033_f64);
    let mut text = String::from("time,lat,lon,bearing_deg,north,sigma_deg,level_dbm,note\n");
    for i in 0..n {
        // a spot 100–500 m away in a random direction (flat-earth offsets suffice here)
        let az = 360.0 * uniform();
        let r = 100.0 + 400.0 * uniform();
        let dlat = r * az.to_radians().cos() / 111_320.0;
        let dlon = r * az.to_radians().sin() / (111_320.0 * lat0.to_radians().cos());
        let back = (az + 180.0 + 4.0 * (uniform() - 0.5)).rem_euclid(360.0);
        text.push_str(&format!(
            "2026-11-28T{:02}:{:02}:{:02}Z,{:.6},{:.6},{back:.1},true,,,\"spot {i}\"\n",
            (i / 3600) % 24,
            (i / 60) % 60,
            i % 60,
            lat0 + dlat,
            lon0 + dlon
        ));
    }
    text
}

fn bench(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("a scratch directory");
    let log = dir.path().join("walk.csv");
    std::fs::write(&log, log_text(5_000)).expect("the log");
    let mut child = Command::new(env!("CARGO_BIN_EXE_pim"))
        .args(["walk", "--log"])
        .arg(&log)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("pim walk");
    let mut first = String::new();
    BufReader::new(child.stdout.take().expect("stdout"))
        .read_line(&mut first)
        .expect("the address");
    let _walk = Walk(child);
    let page = first.trim().to_string();
    let (origin, query) = page.split_once("/?").expect("an address");
    let agent = ureq::AgentBuilder::new()
        .timeout(Duration::from_secs(60))
        .build();
    let url = |path: &str| format!("{origin}{path}?{query}");
    // the first state and map of the log (worked out once, then cached)
    agent.get(&url("/state")).call().expect("state");
    agent.get(&url("/map")).call().expect("map");

    let mut g = c.benchmark_group("walk page at 5,000 readings");
    g.sample_size(20);
    g.bench_function("save", |b| {
        b.iter_custom(|iters| {
            let mut spent = Duration::ZERO;
            for _ in 0..iters {
                let start = Instant::now();
                let r = agent
                    .post(&url("/reading"))
                    .set("Content-Type", "application/x-www-form-urlencoded")
                    .send_string("lat=45.1031&lon=-122.4135&bearing_deg=120&note=bench")
                    .expect("save");
                let body = r.into_string().expect("answer");
                spent += start.elapsed();
                assert!(body.contains("\"saved\""), "{body}");
                agent.post(&url("/undo")).call().expect("undo");
            }
            spent
        })
    });
    g.bench_function("state, cached", |b| {
        b.iter(|| agent.get(&url("/state")).call().expect("state"))
    });
    g.bench_function("map, cached", |b| {
        b.iter(|| agent.get(&url("/map")).call().expect("map"))
    });
    g.finish();
    let _ = std::io::stdout().flush();
}

criterion_group!(benches, bench);
criterion_main!(benches);
