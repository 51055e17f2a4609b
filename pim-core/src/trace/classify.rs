//! What each peak of a trace is, and which emitter sets explain several peaks at once.
//!
//! **Each peak.** The product search ([`crate::intermod`]) runs with the
//! peak's refined frequency as the channel centre, the receive channel width, and the
//! tolerance widened by half a trace step (the peak's frequency is known to within about
//! that). A peak within a listed emitter's own channel (k = 1, the search's co-channel
//! rule) is that emitter's carrier: `Emitter`. Otherwise a peak on which products land is
//! a `Product`, its candidates ranked as [`crate::rank`] ranks a single heard frequency, at the placement of [`ExplainRule::placement`] (a ticket's fix
//! and receiver, so that the picture and the ticket rank alike); a peak nothing explains
//! is `Unexplained`.
//!
//! **One decision.** A peak is put down to a product only when the product's centre lies
//! within the peak's resolution, half the receive channel plus one trace step
//! ([`resolution`]): a product centred farther off reaches the peak only by its skirt.
//! Where the candidates are levelled, the peaks explained must also agree in level: each
//! peak's first candidate of a mechanism, shifted by the median over the explained peaks
//! of (measured − predicted) for that mechanism, must come within [`LEVEL_TOLERANCE_DB`]
//! of the peak; a product predicted weaker than that by every mechanism judged is no
//! explanation. Levels compare only within one mechanism: what scales them is unknown and
//! differs between mechanisms (a joint's strength, a transmitter's isolation). A peak that fails either test is `Unexplained`,
//! with its nearest candidates listed and why ([`Miss`]). The sweep's table, its JSON,
//! the suspects, the trace picture's labels and the ticket all read this one decision.
//!
//! **Bounded work.** With a limit of K candidates per peak
//! ([`ExplainRule::keep_candidates`]) and the junction at the receiver, each peak is
//! explained by the pruned search of `explain` ([`Site::explain`] with a limit),
//! narrowed to the products centred within the peak's resolution: its first K are the
//! first K centred candidates of the full listing, found in memory bounded by K and the
//! emitters, with or without a junction location. With a receiver elsewhere or a fix
//! radius (a ticket's trace) the whole listing is ranked. Either way every listing is
//! held within the site's memory budget ([`Site::with_memory_budget`], shared among the
//! threads) and refused (`Refused`) before it would pass it, never by an abort.
//!
//! **Suspects.** A junction fed by a set of emitters makes every product of them, so one
//! corroded joint shows as several peaks: 2A − B and 2B − A together are stronger
//! evidence for a junction fed by A and B than either alone. Only each product peak's
//! first [`SUSPECT_CANDIDATES`] (ten) candidates are weighed. For every emitter set that
//! makes one of those of some product peak, the peaks it explains are those with a
//! candidate made of that set or of part of it. Sets explaining at least two peaks are
//! the suspects, ranked by the number of peaks explained (more first), then by the number
//! of emitters (fewer first: the simpler explanation), then by the sum of the best rank
//! they hold at each of those peaks (lower first), then by the emitter ids.

use std::collections::{HashMap, HashSet};

use crate::emitter::Emitter;
use crate::error::Result;
use crate::freq::Hz;
use crate::intermod::{co_channel, search_products_while, Product, SearchParams, MAX_ORDER};
use crate::level::{JunctionModel, Mechanism};
use crate::rank::{rank_candidates, Candidate, Placement, RankInputs, Ranker, Ranking};
use crate::site::{Query, Site};

use super::peaks::Peak;

/// What a peak is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum PeakKind {
    /// A listed emitter's own carrier.
    Emitter,
    /// An intermodulation product of listed emitters.
    Product,
    /// Neither.
    Unexplained,
}

impl PeakKind {
    /// The kind's name in outputs (`emitter`, `product`, `unexplained`).
    pub fn name(self) -> &'static str {
        match self {
            PeakKind::Emitter => "emitter",
            PeakKind::Product => "product",
            PeakKind::Unexplained => "unexplained",
        }
    }
}

/// How the peaks are explained: the search options apart from the channel centre.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ExplainRule {
    /// The receive channel width around each peak.
    pub rx_bandwidth: Hz,
    /// Extra tolerance on each side, before half a trace step is added.
    pub tolerance: Hz,
    /// Highest order Σ|k| searched.
    pub max_order: u32,
    /// Most distinct emitters in one product.
    pub max_emitters: u32,
    /// Where the junction is assumed and the peaks are heard, for levels.
    pub placement: Placement,
    /// The level model that ranks a peak's candidates.
    pub model: JunctionModel,
    /// Candidates kept per peak, best first (`None`: all). Suspects are judged on the
    /// candidates kept; against thousands of emitters the lists run to millions.
    pub keep_candidates: Option<usize>,
}

impl ExplainRule {
    /// The search parameters for a peak at `freq` on a trace of step `step_hz`.
    pub fn params(&self, freq: Hz, step_hz: f64) -> SearchParams {
        SearchParams {
            target: freq,
            rx_bandwidth: self.rx_bandwidth,
            tolerance: Hz(self.tolerance.0 + (step_hz / 2.0).ceil().max(0.0) as i64),
            max_order: self.max_order,
            max_emitters: self.max_emitters,
        }
    }
}

/// How far a level may fall short of the others' and still explain its peak, dB: the
/// level model's products of one junction differ from measurement by about ten dB each
/// way (common practice, from memory), so twenty dB apart is no longer the same junction.
pub const LEVEL_TOLERANCE_DB: f64 = 20.0;

/// How far from a peak a product's centre may lie and still explain it: half the receive
/// channel plus one trace step.
pub fn resolution(rx_bandwidth: Hz, step_hz: f64) -> Hz {
    Hz(rx_bandwidth.0 / 2 + step_hz.ceil().max(0.0) as i64)
}

/// Why a candidate lands on a peak but does not explain it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Miss {
    /// Its centre lies outside the peak's resolution.
    OffCentre,
    /// Its predicted level falls short of the peak by more than
    /// [`LEVEL_TOLERANCE_DB`] relative to the other peaks explained.
    TooWeak,
}

/// A peak with what explains it.
#[derive(Clone, Debug)]
pub struct ExplainedPeak {
    /// The peak found.
    pub peak: Peak,
    /// What explains it.
    pub kind: PeakKind,
    /// The emitters whose own carrier it is (kind `Emitter`), by index.
    pub co_channel: Vec<usize>,
    /// The search it was explained with.
    pub params: SearchParams,
    /// The ranked candidates (empty unless kind `Product`), the best
    /// [`ExplainRule::keep_candidates`] of them.
    pub ranking: Ranking,
    /// How many products the search found landing in the channel before any were left
    /// out.
    pub found: usize,
    /// Of those, the products centred within the peak's resolution: the ones its
    /// candidates are made of.
    pub kept: usize,
    /// Whether every product was counted (see [`crate::Explanation::complete`]).
    pub complete: bool,
    /// For a peak left unexplained although products land on it: the nearest
    /// candidates (at most three) and why none explains it.
    pub misses: Vec<(Candidate, Miss)>,
}

/// Explains one peak (module docs, "Each peak" and "One decision").
///
/// With [`ExplainRule::keep_candidates`] and the junction at the receiver (no receiver
/// elsewhere, no fix radius) the candidates come from the pruned search of
/// [`Site::explain`] with a limit, narrowed to the products centred within the peak's
/// resolution ([`Query::centred_within`]): the first K so centred, equal to the first K
/// of the full listing's centred candidates, in memory bounded by K. Otherwise the
/// whole listing is ranked, within the site's memory budget. Refused (class `Refused`)
/// when the listing would pass that budget.
pub fn explain_peak(
    peak: &Peak,
    site: &Site,
    rule: &ExplainRule,
    step_hz: f64,
) -> Result<ExplainedPeak> {
    let params = rule.params(peak.freq, step_hz);
    let reach = resolution(rule.rx_bandwidth, step_hz);
    let co = co_channel(site.carriers(), &params);
    let placement = rule.placement;
    let pruned = placement.receiver.is_none() && placement.fix_radius_m.is_none();
    let empty = || {
        let inputs = RankInputs {
            placement,
            model: rule.model,
            ..RankInputs::default()
        };
        rank_candidates(Vec::new(), site.emitters(), &params, &inputs)
    };
    let (kind, (found, kept, complete), mut ranking, misses) = if !co.is_empty() {
        (PeakKind::Emitter, (0, 0, true), empty(), Vec::new())
    } else if let (Some(k), true) = (rule.keep_candidates, pruned) {
        let query = |limit: usize, centred: Option<Hz>| Query {
            params,
            junction: placement.junction,
            model: rule.model,
            limit: Some(limit),
            centred_within: centred,
            ..Query::new(params.target)
        };
        let centred = site.explain(&query(k, Some(reach)))?;
        if !centred.ranking.candidates.is_empty() || k == 0 && centred.kept > 0 {
            (
                PeakKind::Product,
                (centred.found, centred.kept, centred.complete),
                centred.ranking,
                Vec::new(),
            )
        } else {
            // nothing centred: the nearest candidates that land off centre, and why
            let off = site.explain(&query(3, None))?;
            let misses = off
                .ranking
                .candidates
                .iter()
                .map(|c| (*c, Miss::OffCentre))
                .collect();
            (
                PeakKind::Unexplained,
                (off.found, 0, off.complete),
                empty(),
                misses,
            )
        }
    } else {
        whole_listing(site, rule, &params, reach)?
    };
    if let Some(keep) = rule.keep_candidates {
        ranking.candidates.truncate(keep);
        ranking.candidates.shrink_to_fit();
        ranking.unlevelled = ranking
            .candidates
            .iter()
            .filter(|c| c.level_dbm.is_none())
            .count();
    }
    Ok(ExplainedPeak {
        peak: *peak,
        kind,
        co_channel: co,
        params,
        ranking,
        found,
        kept,
        complete,
        misses,
    })
}

/// A peak's kind, the products its search found, kept and whether all were counted, its
/// ranking and its misses.
type Decided = (
    PeakKind,
    (usize, usize, bool),
    Ranking,
    Vec<(Candidate, Miss)>,
);

/// A peak explained from the whole listing, held within the site's memory budget: its
/// kind, the products found, the centred candidates ranked anew, and the misses.
fn whole_listing(
    site: &Site,
    rule: &ExplainRule,
    params: &SearchParams,
    reach: Hz,
) -> Result<Decided> {
    // Every product makes at least one candidate: the search stops once the products
    // and one candidate each would pass the budget.
    let mut products = Vec::new();
    let whole = search_products_while(site.carriers(), params, 2..=MAX_ORDER, &mut |p| {
        if !site.fits(products.len() + 1, products.len() + 1) {
            return false;
        }
        products.push(p);
        true
    });
    if !whole {
        return Err(site.over_budget(products.len()));
    }
    let found = products.len();
    let inputs = RankInputs {
        placement: rule.placement,
        model: rule.model,
        ..RankInputs::default()
    };
    if found == 0 {
        let ranking = rank_candidates(products, site.emitters(), params, &inputs);
        return Ok((PeakKind::Unexplained, (0, 0, true), ranking, Vec::new()));
    }
    let candidates =
        Ranker::lazy(site.emitters(), site.carriers(), params, &inputs).candidate_count(&products);
    if !site.fits(found, candidates) {
        return Err(site.over_budget(found));
    }
    let kept = products
        .iter()
        .filter(|p| p.offset(params.target).0.abs() <= reach.0)
        .count();
    let mut ranking = rank_candidates(products, site.emitters(), params, &inputs);
    // only products centred within the peak's resolution explain it
    let (centred, off): (Vec<Candidate>, Vec<Candidate>) = ranking
        .candidates
        .iter()
        .partition(|c| c.product.offset(params.target).0.abs() <= reach.0);
    let mut misses = Vec::new();
    let kind = if centred.is_empty() {
        misses = off.iter().take(3).map(|c| (*c, Miss::OffCentre)).collect();
        PeakKind::Unexplained
    } else {
        PeakKind::Product
    };
    ranking.candidates = centred;
    ranking.total = ranking.candidates.len();
    ranking.renumber();
    Ok((kind, (found, kept, true), ranking, misses))
}

/// The level test of the module docs: a product peak whose first candidate of each
/// mechanism, shifted by the median of (measured − predicted) over the product peaks
/// levelled by that mechanism, falls more than [`LEVEL_TOLERANCE_DB`] short of its peak
/// for every mechanism judged becomes `Unexplained` (a mechanism is judged where two or
/// more product peaks have a levelled candidate of it).
pub fn judge_levels(peaks: &mut [ExplainedPeak]) {
    let gap = |p: &ExplainedPeak, m: Mechanism| {
        let c = p
            .ranking
            .candidates
            .iter()
            .find(|c| c.mechanism == m && c.breakdown.is_some())?;
        Some(p.peak.level_dbm - c.breakdown?.in_channel_dbm)
    };
    let shifts: Vec<(Mechanism, f64)> = [
        Mechanism::Junction,
        Mechanism::Transmitter,
        Mechanism::TransmitterIm,
        Mechanism::Receiver,
    ]
    .into_iter()
    .filter_map(|m| {
        let mut gaps: Vec<f64> = peaks
            .iter()
            .filter(|p| p.kind == PeakKind::Product)
            .filter_map(|p| gap(p, m))
            .collect();
        if gaps.len() < 2 {
            return None;
        }
        gaps.sort_by(f64::total_cmp);
        let n = gaps.len();
        let median = if n % 2 == 1 {
            gaps[n / 2]
        } else {
            (gaps[n / 2 - 1] + gaps[n / 2]) / 2.0
        };
        Some((m, median))
    })
    .collect();
    for p in peaks.iter_mut().filter(|p| p.kind == PeakKind::Product) {
        let judged: Vec<bool> = shifts
            .iter()
            .filter_map(|&(m, shift)| gap(p, m).map(|g| g - shift > LEVEL_TOLERANCE_DB))
            .collect();
        if !judged.is_empty() && judged.iter().all(|&too_weak| too_weak) {
            p.kind = PeakKind::Unexplained;
            p.misses = p
                .ranking
                .candidates
                .iter()
                .take(3)
                .map(|c| (*c, Miss::TooWeak))
                .collect();
            p.ranking.candidates.clear();
        }
    }
}

/// Explains every peak, in the order given, spreading the peaks over `threads` threads
/// (1 runs them in this thread). Each thread's listings share the site's memory budget
/// ([`Site::shared_by`]). Refused with the first peak's refusal, in peak order.
pub fn explain_peaks(
    peaks: &[Peak],
    site: &Site,
    rule: &ExplainRule,
    step_hz: f64,
    threads: usize,
) -> Result<Vec<ExplainedPeak>> {
    let threads = threads.clamp(1, peaks.len().max(1));
    if threads == 1 {
        return peaks
            .iter()
            .map(|p| explain_peak(p, site, rule, step_hz))
            .collect();
    }
    let shared = site.clone().shared_by(threads);
    let site = &shared;
    // Peaks dealt round-robin so that each thread gets a share of the busy ones.
    let mut slots: Vec<Option<Result<ExplainedPeak>>> = Vec::new();
    slots.resize_with(peaks.len(), || None);
    let done: Vec<Vec<(usize, Result<ExplainedPeak>)>> = std::thread::scope(|s| {
        let handles: Vec<_> = (0..threads)
            .map(|t| {
                s.spawn(move || {
                    let mut out = Vec::new();
                    for (i, p) in peaks.iter().enumerate().skip(t).step_by(threads) {
                        let e = explain_peak(p, site, rule, step_hz);
                        let refused = e.is_err();
                        out.push((i, e));
                        if refused {
                            break;
                        }
                    }
                    out
                })
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().unwrap_or_default())
            .collect()
    });
    for (i, e) in done.into_iter().flatten() {
        slots[i] = Some(e);
    }
    // A refusal stops its thread: the first in peak order is the answer. A thread that
    // failed otherwise leaves its peaks unfilled: explain them here.
    if let Some(e) = slots.iter_mut().find_map(|s| match s {
        Some(Err(_)) => s.take(),
        _ => None,
    }) {
        return e.map(|_| Vec::new());
    }
    slots
        .into_iter()
        .zip(peaks)
        .map(|(slot, p)| slot.unwrap_or_else(|| explain_peak(p, site, rule, step_hz)))
        .collect()
}

/// An emitter set as sorted indices.
pub type EmitterSet = Vec<usize>;

/// An emitter set of one to three as a fixed key: sorted indices, padded with
/// `u32::MAX` (cheap to hash, no allocation).
type SetKey = [u32; 3];

const NONE: u32 = u32::MAX;

fn key_of(product: &Product) -> SetKey {
    let mut k = [NONE; 3];
    for (slot, t) in k.iter_mut().zip(product.terms()) {
        *slot = t.emitter as u32;
    }
    k.sort_unstable();
    k
}

/// The non-empty subsets of a set (up to seven).
fn subsets(key: &SetKey) -> impl Iterator<Item = SetKey> + '_ {
    let n = key.iter().filter(|&&e| e != NONE).count();
    (1u32..(1 << n)).map(move |mask| {
        let mut k = [NONE; 3];
        let mut j = 0;
        for (b, &e) in key.iter().take(n).enumerate() {
            if mask & (1 << b) != 0 {
                k[j] = e;
                j += 1;
            }
        }
        k
    })
}

/// The candidates of each product peak the suspects are judged on: its first ten. A set
/// that makes none of a peak's first ten is no likely source of it, and judging on every
/// candidate of every peak grows with the listing (millions against a regional list).
pub const SUSPECT_CANDIDATES: usize = 10;

/// One emitter set explaining several peaks.
#[derive(Clone, Debug, PartialEq)]
pub struct Suspect {
    /// Emitter indices, increasing.
    pub emitters: EmitterSet,
    /// For each peak explained (index into the explained peaks, increasing): the best
    /// ranked candidate made of this set or part of it, and its rank there.
    pub explains: Vec<(usize, Product, usize)>,
    /// Σ of the best rank held at each peak explained.
    pub rank_sum: usize,
}

/// The emitter sets explaining at least two product peaks, best first (see the module
/// docs for the order), judged on each peak's first [`SUSPECT_CANDIDATES`] candidates.
pub fn suspects(peaks: &[ExplainedPeak], emitters: &[Emitter]) -> Vec<Suspect> {
    // For each peak: set → (best rank, that candidate's product).
    let per_peak: Vec<HashMap<SetKey, (usize, Product)>> = peaks
        .iter()
        .map(|p| {
            let mut m: HashMap<SetKey, (usize, Product)> = HashMap::new();
            if p.kind == PeakKind::Product {
                for c in p.ranking.candidates.iter().take(SUSPECT_CANDIDATES) {
                    m.entry(key_of(&c.product))
                        .and_modify(|e| {
                            if c.rank < e.0 {
                                *e = (c.rank, c.product);
                            }
                        })
                        .or_insert((c.rank, c.product));
                }
            }
            m
        })
        .collect();
    let mut all: HashSet<SetKey> = HashSet::new();
    for m in &per_peak {
        all.extend(m.keys().copied());
    }
    let mut out: Vec<Suspect> = Vec::new();
    for set in all {
        let parts: Vec<SetKey> = subsets(&set).collect();
        let mut explains = Vec::new();
        for (i, m) in per_peak.iter().enumerate() {
            let best = parts
                .iter()
                .filter_map(|s| m.get(s))
                .min_by_key(|(rank, _)| *rank);
            if let Some(&(rank, product)) = best {
                explains.push((i, product, rank));
            }
        }
        if explains.len() >= 2 {
            let rank_sum = explains.iter().map(|e| e.2).sum();
            out.push(Suspect {
                emitters: set
                    .iter()
                    .filter(|&&e| e != NONE)
                    .map(|&e| e as usize)
                    .collect(),
                explains,
                rank_sum,
            });
        }
    }
    out.sort_by_cached_key(|s| {
        (
            std::cmp::Reverse(s.explains.len()),
            s.emitters.len(),
            s.rank_sum,
            s.emitters
                .iter()
                .map(|&i| emitters[i].id.clone())
                .collect::<Vec<_>>(),
        )
    });
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geo::GeoPoint;
    use crate::trace::peaks::Peak;

    fn peak(freq: i64) -> Peak {
        Peak {
            index: 0,
            freq: Hz(freq),
            level_dbm: -80.0,
            floor_dbm: -110.0,
            above_floor_db: 30.0,
        }
    }

    fn rule() -> ExplainRule {
        ExplainRule {
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 3,
            max_emitters: 3,
            placement: Placement::default(),
            model: JunctionModel::default(),
            keep_candidates: None,
        }
    }

    #[test]
    fn carriers_products_and_the_rest() {
        // A = 150, B = 153.6: 2A − B = 146.4, 2B − A = 157.2 MHz.
        let e = vec![
            Emitter::new("A", Hz(150_000_000), Hz(0)),
            Emitter::new("B", Hz(153_600_000), Hz(0)),
            Emitter::new("C", Hz(170_000_000), Hz(0)),
        ];
        let peaks = [
            peak(146_400_700),
            peak(150_000_000),
            peak(157_200_000),
            peak(162_000_000),
        ];
        let site = Site::new(e.clone());
        for (threads, keep) in [(1, None), (2, None), (1, Some(20)), (2, Some(20))] {
            let r = ExplainRule {
                keep_candidates: keep,
                ..rule()
            };
            let x = explain_peaks(&peaks, &site, &r, 1_000.0, threads).unwrap();
            let kinds: Vec<PeakKind> = x.iter().map(|p| p.kind).collect();
            assert_eq!(
                kinds,
                vec![
                    PeakKind::Product,
                    PeakKind::Emitter,
                    PeakKind::Product,
                    PeakKind::Unexplained
                ]
            );
            assert_eq!(x[1].co_channel, vec![0]);
            assert_eq!(x[0].params.tolerance, Hz(500));
            let s = suspects(&x, &e);
            assert_eq!(s[0].emitters, vec![0, 1]);
            assert_eq!(
                s[0].explains.iter().map(|x| x.0).collect::<Vec<_>>(),
                vec![0, 2]
            );
        }
    }

    /// The one decision: a product centred 33 kHz from a peak (one 12.5 kHz channel and a
    /// 1 kHz step give a resolution of 7.25 kHz) reaches it only by its skirt and does not
    /// explain it; the peak stays unexplained, naming the product as off-centre.
    #[test]
    fn an_off_centre_product_does_not_explain_a_peak() {
        let e = vec![
            Emitter::new("A", Hz(150_000_000), Hz(25_000)),
            Emitter::new("B", Hz(153_600_000), Hz(25_000)),
        ];
        let site = Site::new(e);
        let x = explain_peaks(
            &[peak(146_433_000), peak(146_400_000)],
            &site,
            &rule(),
            1_000.0,
            1,
        )
        .unwrap();
        assert_eq!(x[0].kind, PeakKind::Unexplained);
        assert!(x[0].ranking.candidates.is_empty());
        assert_eq!(x[0].misses[0].1, Miss::OffCentre);
        assert_eq!(x[1].kind, PeakKind::Product);
        assert_eq!(resolution(Hz(12_500), 1_000.0), Hz(7_250));
    }

    /// The level test: of three product peaks at −80 dBm whose candidates are predicted
    /// at −100, −102 and −130 dBm, the last falls 28 dB short of the others'
    /// agreement (more than 20 dB) and is left unexplained as too weak.
    #[test]
    fn a_product_too_weak_beside_the_others_does_not_explain_its_peak() {
        let a = 150_000_000;
        let b = 153_600_000;
        let c = 170_000_000;
        let e = vec![
            Emitter::new("A", Hz(a), Hz(0)).radiating(50.0, GeoPoint::new(45.0, -122.0)),
            Emitter::new("B", Hz(b), Hz(0)).radiating(50.0, GeoPoint::new(45.001, -122.0)),
            Emitter::new("C", Hz(c), Hz(0)).radiating(50.0, GeoPoint::new(45.0, -122.001)),
        ];
        let mut r = rule();
        r.placement = Placement::at(Some(GeoPoint::new(45.0005, -122.0005)));
        let freqs = [2 * a - b, 2 * b - a, 2 * c - b];
        let peaks: Vec<Peak> = freqs.iter().map(|&f| peak(f)).collect();
        let mut x = explain_peaks(&peaks, &Site::new(e), &r, 1_000.0, 1).unwrap();
        for (p, level) in x.iter_mut().zip([-100.0, -102.0, -130.0]) {
            assert_eq!(p.kind, PeakKind::Product);
            // every mechanism's candidate at the same level: levels compare within one
            for c in &mut p.ranking.candidates {
                if let Some(b) = c.breakdown.as_mut() {
                    b.in_channel_dbm = level;
                }
            }
        }
        judge_levels(&mut x);
        let kinds: Vec<PeakKind> = x.iter().map(|p| p.kind).collect();
        assert_eq!(
            kinds,
            vec![PeakKind::Product, PeakKind::Product, PeakKind::Unexplained]
        );
        assert_eq!(x[2].misses[0].1, Miss::TooWeak);
    }
}
