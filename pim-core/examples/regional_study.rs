//! A regional study from the command line, for timing and peak memory
//! (`/usr/bin/time -v`): `regional_study EMITTERS RECEIVERS THREADS [FROM] [PLACE]`, on the
//! seeded regional licence list of the `regional` benchmark, from receiver FROM on (0
//! unless given). PLACE is `towers` (the default: receivers at towers on four channels),
//! `anywhere` (receivers anywhere in the square on random land-mobile channels) or
//! `outside:KM` (every receiver at a junction KM kilometres outside the square). With
//! `DIGEST` set in the environment it prints every receiver's candidates (product,
//! mechanism, level), to compare two builds' answers; with `TIMES` set, every receiver's
//! time; with `SEED` another list; with `WRITE_CSV=DIR` it writes the list and the
//! receivers as `DIR/emitters.csv` and `DIR/receivers.csv` for `pim study` instead.

#[path = "../benches/support/regional_list.rs"]
mod regional_list;

use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::{Query, Site};

fn main() {
    let arg = |i: usize, d: usize| {
        std::env::args()
            .nth(i)
            .and_then(|a| a.parse().ok())
            .unwrap_or(d)
    };
    let (n, count, threads) = (arg(1, 100_000), arg(2, 32), arg(3, 2));
    // only receiver FROM on, when given
    let from = arg(4, 0);
    let place = std::env::args().nth(5).unwrap_or_else(|| "towers".into());
    let seed = std::env::var("SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(7);
    let (emitters, towers) = regional_list::regional(n, seed);
    let site = Site::new(emitters);
    let receivers: Vec<(GeoPoint, Hz)> = match place.as_str() {
        "towers" => regional_list::receivers(&towers, from + count),
        "anywhere" => regional_list::receivers_anywhere(from + count, 11),
        other => {
            let km: f64 = other
                .strip_prefix("outside:")
                .and_then(|k| k.parse().ok())
                .expect("PLACE: towers, anywhere or outside:KM");
            let at = regional_list::outside(km);
            regional_list::receivers_anywhere(from + count, 11)
                .into_iter()
                .map(|(_, f)| (at, f))
                .collect()
        }
    };
    if let Some(dir) = std::env::var_os("WRITE_CSV") {
        write_csv(
            std::path::Path::new(&dir),
            site.emitters(),
            &receivers[from..],
        );
        return;
    }
    let start = std::time::Instant::now();
    let mut first = None;
    let mut kept = 0;
    let mut times = Vec::with_capacity(count);
    let r: Result<(), pim_core::Error> = pim_core::study::in_order(
        count,
        threads,
        |i| {
            let began = std::time::Instant::now();
            let (at, f) = receivers[i + from];
            let mut q = Query::new(f);
            q.params.max_order = 5;
            q.junction = Some(at);
            q.limit = Some(10);
            (site.explain(&q), began.elapsed().as_secs_f64())
        },
        |i, (answer, took)| {
            if took > 1.0 || std::env::var_os("TIMES").is_some() {
                println!("receiver {} took {took:.3} s", i + from);
            }
            first.get_or_insert(start.elapsed());
            times.push(took);
            let answer = answer?;
            if std::env::var_os("DIGEST").is_some() {
                for c in &answer.ranking.candidates {
                    println!(
                        "R{} {:?} {:?} {:?}",
                        i + from,
                        c.product,
                        c.mechanism,
                        c.breakdown.map(|b| (b.in_channel_dbm * 1e6).round() / 1e6)
                    );
                }
            }
            kept += answer.ranking.candidates.len();
            Ok(())
        },
    );
    r.expect("within the memory budget");
    let all = start.elapsed();
    times.sort_by(f64::total_cmp);
    let at = |q: f64| times[((times.len() - 1) as f64 * q) as usize];
    println!(
        "per receiver: median {:.3} s, 90 % {:.3} s, 99 % {:.3} s, slowest {:.3} s, mean {:.3} s",
        at(0.5),
        at(0.9),
        at(0.99),
        at(1.0),
        times.iter().sum::<f64>() / times.len() as f64
    );
    println!(
        "{n} emitters, {count} receivers ({place}), {threads} threads: {kept} candidates, first receiver {:.3} s, all {:.2} s, {:.3} s a receiver",
        first.map_or(0.0, |d| d.as_secs_f64()),
        all.as_secs_f64(),
        all.as_secs_f64() / count as f64
    );
}

/// The list and the receivers as CSV files for `pim study`.
fn write_csv(
    dir: &std::path::Path,
    emitters: &[pim_core::emitter::Emitter],
    receivers: &[(GeoPoint, Hz)],
) {
    use std::fmt::Write;
    let mut tx = String::from("id,freq_mhz,bw_khz,erp_dbm,lat,lon,height_m,kind\n");
    for e in emitters {
        let p = e.position.expect("placed");
        writeln!(
            tx,
            "{},{:.6},{:.3},{:.3},{:.6},{:.6},{:.1},{}",
            e.id,
            e.freq.0 as f64 / 1e6,
            e.bandwidth.0 as f64 / 1e3,
            e.erp_dbm.expect("levelled"),
            p.lat_deg,
            p.lon_deg,
            e.height_m.unwrap_or(0.0),
            e.kind.as_deref().unwrap_or("")
        )
        .expect("a string");
    }
    let mut rx = String::from("id,freq_mhz,bw_khz,lat,lon\n");
    for (i, (at, f)) in receivers.iter().enumerate() {
        writeln!(
            rx,
            "RX{i},{:.6},12.5,{:.6},{:.6}",
            f.0 as f64 / 1e6,
            at.lat_deg,
            at.lon_deg
        )
        .expect("a string");
    }
    std::fs::write(dir.join("emitters.csv"), tx).expect("emitters.csv written");
    std::fs::write(dir.join("receivers.csv"), rx).expect("receivers.csv written");
}
