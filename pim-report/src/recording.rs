//! `--recording DIR|FILE` of `pim sweep` and `pim ticket`: a recording read twice as a
//! stream. The first pass holds the sweeps' maximum (one level per grid point) and finds
//! and explains its peaks exactly as `pim sweep` does; the second follows each peak and
//! each listed emitter inside the span sweep by sweep ([`pim_core::recording`]) and folds
//! the sweeps into the waterfall. Memory: the maximum hold, one sweep, the waterfall's
//! cells, and 16 + 5·W bytes a sweep for W watched points.

use crate::waterfall::{Track, WaterfallGrid, WaterfallInput};
use pim_core::emitter::Emitter;
use pim_core::onair::Interval;
use pim_core::recording::{
    judge, watch_list, PresenceRule, PresenceTracker, RecordingEvidence, DEFAULT_BRIDGE_SWEEPS,
    DEFAULT_HYSTERESIS_DB, DEFAULT_MIN_RUN_SWEEPS, DEFAULT_PRESENCE_DB,
};
use pim_core::trace::classify::PeakKind;
use pim_core::trace::{floor_window_points, MaxHold, Sweep, SweepRule, Trace};
use pim_core::{Error, Place};
use pim_io::recording::RecordedSweep;
use pim_io::text::time_text;
use serde_json::{json, Value};

/// A recording explained.
pub struct Explained {
    /// The maximum hold of its sweeps.
    pub trace: Trace,
    /// The maximum hold's peaks, explained.
    pub sweep: Sweep,
    /// The evidence.
    pub evidence: RecordingEvidence,
    /// The waterfall's cells.
    pub grid: WaterfallGrid,
}

fn place_of(s: &RecordedSweep, source: &str) -> Place {
    s.place.clone().unwrap_or_else(|| Place::new(source))
}

/// Hands each sweep of a recording to the visitor, in order; returns the sweeps read.
pub type Reader<'a> =
    dyn Fn(&mut dyn FnMut(&RecordedSweep) -> pim_core::Result<()>) -> pim_core::Result<usize> + 'a;

/// Explains the recording `read` gives (twice), named `path` in messages, against the
/// emitters of `site`.
pub fn explain_with(
    read: &Reader,
    path: &str,
    site: &pim_core::Site,
    rule: &SweepRule,
    on_air: &[(usize, Interval)],
) -> pim_core::Result<Explained> {
    let emitters = site.emitters();
    let mut hold = MaxHold::new();
    let mut previous: Option<pim_core::time::OffsetDateTime> = None;
    read(&mut |s| {
        let place = place_of(s, path);
        let at =
            s.at.ok_or_else(|| Error::input(place.clone(), "the sweep has no time"))?;
        if let Some(p) = previous {
            if at <= p {
                return Err(Error::input(
                    place.at_field("time"),
                    format!(
                        "{} is not after the previous sweep's {}; a recording's sweeps must follow each other in time",
                        time_text(at),
                        time_text(p)
                    ),
                ));
            }
        }
        previous = Some(at);
        for (&f, &l) in s.freqs.iter().zip(&s.levels_dbm) {
            hold.push(f, l)
                .map_err(|r| Error::input(place.clone(), r.message(f)))?;
        }
        hold.end_sweep()
            .map_err(|r| Error::input(place.clone(), r.message()))
    })?;
    let sweeps = hold.sweeps();
    let trace = hold
        .finish()
        .ok_or_else(|| Error::input(Place::new(path), "no sweep in the recording"))?;
    let sweep = pim_core::trace::analyse(&trace, site, rule)?;
    let watch = watch_list(&trace, &sweep.peaks, emitters);
    let presence = PresenceRule {
        threshold_db: DEFAULT_PRESENCE_DB.max(rule.threshold_db),
        hysteresis_db: DEFAULT_HYSTERESIS_DB,
        bridge_sweeps: DEFAULT_BRIDGE_SWEEPS,
        min_run_sweeps: DEFAULT_MIN_RUN_SWEEPS,
        floor_window_points: rule
            .floor_window_points
            .unwrap_or_else(|| floor_window_points(trace.step_hz, rule.explain.rx_bandwidth)),
        // half the receive channel either side: a carrier between two grid points
        half_width_points: ((rule.explain.rx_bandwidth.0 as f64 / 2.0) / trace.step_hz.max(1.0))
            .ceil() as usize,
    };
    let mut tracker = PresenceTracker::new(presence, trace.levels_dbm.len(), watch.bins.clone());
    let mut grid = WaterfallGrid::new(sweeps, trace.levels_dbm.len());
    let mut k = 0usize;
    read(&mut |s| {
        let at = s.at.unwrap_or(pim_core::time::OffsetDateTime::UNIX_EPOCH);
        tracker
            .observe(at, &s.levels_dbm)
            .map_err(|r| Error::input(place_of(s, path), r.message()))?;
        grid.add(k, &s.levels_dbm);
        k += 1;
        Ok(())
    })?;
    let presences = tracker.finish();
    let evidence = judge(&sweep.peaks, &watch, &presences, emitters, on_air);
    Ok(Explained {
        trace,
        sweep,
        evidence,
        grid,
    })
}

fn intervals_json(ivs: &[Interval]) -> Value {
    json!(ivs
        .iter()
        .map(|iv| json!({"start": time_text(iv.start), "end": time_text(iv.end)}))
        .collect::<Vec<_>>())
}

/// A candidate's formula, with the emitter whose output stage makes it where one does.
fn named(c: &pim_core::Candidate, emitters: &[Emitter]) -> String {
    let f = pim_core::rank::formula(&c.product, emitters);
    match c.formed_in {
        Some(e) => format!("{f} (in {})", emitters[e].id),
        None => f,
    }
}

fn ids(product: &pim_core::Product, emitters: &[Emitter]) -> Vec<String> {
    product
        .terms()
        .map(|t| emitters[t.emitter].id.clone())
        .collect()
}

/// The evidence-ordered candidates of peak `p` as JSON, each the sweep's own candidate
/// object (`by_level`, matched by rank) with `emitters`, `evidence` and `agreement`.
fn candidates_json(
    r: &Explained,
    p: usize,
    emitters: &[Emitter],
    by_level: &[Value],
    shown: Option<usize>,
) -> Value {
    let list = &r.evidence.peaks[p].candidates;
    json!(list
        .iter()
        .take(shown.unwrap_or(usize::MAX))
        .enumerate()
        .map(|(k, c)| {
            let mut v = by_level
                .iter()
                .find(|v| v["rank"].as_u64() == Some(c.candidate.rank as u64))
                .cloned()
                .unwrap_or_else(|| json!({"rank": c.candidate.rank}));
            v["rank_by_level"] = json!(c.candidate.rank);
            v["rank"] = json!(k + 1);
            v["formula"] = json!(pim_core::rank::formula(&c.candidate.product, emitters));
            v["emitters"] = json!(ids(&c.candidate.product, emitters));
            v["evidence"] = json!(c.evidence);
            v["agreement"] = json!(c.agreement);
            v["level_all_on_db"] = json!(c.level_all_on_db.map(|x| (x * 10.0).round() / 10.0));
            v["level_otherwise_db"] =
                json!(c.level_otherwise_db.map(|x| (x * 10.0).round() / 10.0));
            v
        })
        .collect::<Vec<_>>())
}

/// Adds the recording to the JSON `pim sweep` writes: each peak's `intervals`, its
/// `candidates` ordered by the evidence, and `recording` (sweeps, times, the emitters
/// seen in the span with their intervals).
pub fn augment_json(doc: &mut Value, r: &Explained, emitters: &[Emitter], shown: Option<usize>) {
    if let Some(peaks) = doc["peaks"].as_array_mut() {
        for (p, v) in peaks.iter_mut().enumerate() {
            let Some(rp) = r.evidence.peaks.get(p) else {
                continue;
            };
            v["intervals"] = intervals_json(&rp.intervals);
            v["present_sweeps"] = json!(rp.present_sweeps);
            if r.sweep.peaks[p].kind == PeakKind::Product {
                let by_level = v["candidates"].as_array().cloned().unwrap_or_default();
                v["candidates"] = candidates_json(r, p, emitters, &by_level, shown);
            }
        }
    }
    let times = &r.evidence.times;
    doc["recording"] = json!({
        "sweeps": times.len(),
        "first": times.first().map(|t| time_text(*t)),
        "last": times.last().map(|t| time_text(*t)),
        "presence_db": DEFAULT_PRESENCE_DB,
        "hysteresis_db": DEFAULT_HYSTERESIS_DB,
        "bridged_sweeps": DEFAULT_BRIDGE_SWEEPS,
        "least_run_sweeps": DEFAULT_MIN_RUN_SWEEPS,
        "emitters": r.evidence.emitters.iter().map(|e| json!({
            "id": emitters[e.emitter].id,
            "freq_mhz": emitters[e.emitter].freq.mhz(),
            "present_sweeps": e.present_sweeps,
            "intervals": intervals_json(&e.intervals),
        })).collect::<Vec<_>>(),
    });
}

/// The recording's table: each peak's intervals and its candidates by evidence.
pub fn table(r: &Explained, emitters: &[Emitter], shown: Option<usize>) -> String {
    let times = &r.evidence.times;
    let mut s = format!(
        "\nRecording: {} sweeps, {} to {}; present = {} dB above the sweep's floor ({} dB hysteresis, {} sweep gaps bridged)\n",
        times.len(),
        times.first().map(|t| time_text(*t)).unwrap_or_default(),
        times.last().map(|t| time_text(*t)).unwrap_or_default(),
        DEFAULT_PRESENCE_DB,
        DEFAULT_HYSTERESIS_DB,
        DEFAULT_BRIDGE_SWEEPS
    );
    for e in &r.evidence.emitters {
        s.push_str(&format!(
            "  emitter {:<12} {:>11} MHz  on in {:>5} sweeps, {} intervals\n",
            emitters[e.emitter].id,
            emitters[e.emitter].freq.mhz_text(),
            e.present_sweeps,
            e.intervals.len()
        ));
    }
    for (p, rp) in r.evidence.peaks.iter().enumerate() {
        let pk = &r.sweep.peaks[p];
        s.push_str(&format!(
            "  peak {:>11} MHz  {:<11} present in {:>5} sweeps, {} intervals\n",
            pk.peak.freq.mhz_text(),
            pk.kind.name(),
            rp.present_sweeps,
            rp.intervals.len()
        ));
        if !rp.candidates.is_empty() {
            s.push_str("      #  candidate                            support  contra  heard-off  phi    level on / otherwise\n");
        }
        for (k, c) in rp
            .candidates
            .iter()
            .take(shown.unwrap_or(usize::MAX))
            .enumerate()
        {
            let level = |x: Option<f64>| x.map_or("-".to_string(), |v| format!("{v:.1} dB"));
            s.push_str(&format!(
                "    {:>3}  {:<36} {:>7} {:>7} {:>10}  {:>5.2}  {} / {}\n",
                k + 1,
                named(&c.candidate, emitters),
                c.evidence.support,
                c.evidence.contradictions,
                c.evidence.heard_off_air,
                c.agreement.phi,
                level(c.level_all_on_db),
                level(c.level_otherwise_db)
            ));
        }
    }
    s
}

/// The waterfall picture of the recording.
pub fn waterfall(r: &Explained, emitters: &[Emitter], source: &str) -> String {
    let times = &r.evidence.times;
    let index_of = |t: pim_core::time::OffsetDateTime| times.partition_point(|&x| x < t);
    let runs = |ivs: &[Interval]| -> Vec<(usize, usize)> {
        ivs.iter()
            .map(|iv| (index_of(iv.start), index_of(iv.end)))
            .collect()
    };
    let mut tracks = Vec::new();
    for (p, rp) in r.evidence.peaks.iter().enumerate() {
        let pk = &r.sweep.peaks[p];
        let mut key = format!(
            "P{} {} MHz {}",
            p + 1,
            pk.peak.freq.mhz_text(),
            pk.kind.name()
        );
        if let Some(c) = rp.candidates.first() {
            key.push_str(&format!(
                ": {} (support {}, heard off air {})",
                named(&c.candidate, emitters),
                c.evidence.support,
                c.evidence.heard_off_air
            ));
        }
        tracks.push(Track {
            label: format!("P{}", p + 1),
            key,
            runs: runs(&rp.intervals),
            peak_point: Some(pk.peak.index),
            product: pk.kind == PeakKind::Product,
        });
    }
    for (k, e) in r.evidence.emitters.iter().enumerate() {
        tracks.push(Track {
            label: format!("E{}", k + 1),
            key: format!(
                "E{} {} {} MHz on the air",
                k + 1,
                emitters[e.emitter].id,
                emitters[e.emitter].freq.mhz_text()
            ),
            runs: runs(&e.intervals),
            peak_point: None,
            product: false,
        });
    }
    crate::waterfall::waterfall_svg(&WaterfallInput {
        title: format!("Recording {source}"),
        grid: &r.grid,
        span_mhz: (r.trace.start.mhz(), r.trace.stop().mhz()),
        times: (
            times.first().map(|t| time_text(*t)).unwrap_or_default(),
            times.last().map(|t| time_text(*t)).unwrap_or_default(),
        ),
        tracks,
    })
}
