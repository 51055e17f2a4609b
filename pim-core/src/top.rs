//! The first K candidates of an explanation in memory bounded by K and the emitters,
//! never by the number of products, and equal to the first K of the full listing.
//!
//! **Bounded list.** Candidates are offered one at a time to a list that keeps the best
//! K in the ranking order of [`crate::rank`] (at most 2K + 64 held between compactions);
//! everything is counted as it passes.
//!
//! **Exact bound.** Every mechanism's level is non-decreasing in each emitter's drive
//! ([`crate::level`], "Bound for pruning"), and the channel fraction is at most 1. So
//! for each emitter j an upper bound hⱼ on the in-channel level of any candidate whose
//! product involves j follows from j's own drive with every other emitter at the
//! strongest drive found: the junction law at each order with the largest form weight,
//! the harmonic at its spurious limit, transmitter intermodulation at the least antenna
//! isolation, the receiver's own product from the strongest inputs. The path to the
//! receiver is taken at the lowest frequency a hit can have (free-space loss rises with
//! frequency). Emitters are searched strongest bound first, the set doubling from 16:
//! once the K-th levelled candidate among the emitters searched lies strictly above the
//! bound of the first emitter left out, no product involving that emitter or any later
//! one can enter the first K, and the search stops.
//!
//! **Strong emitters apart.** A bound that takes every partner at the strongest drive
//! found is loose when one emitter (a broadcaster near the junction) is far stronger than
//! the rest. So the [`STRONG`] emitters with the strongest drive at the junction have
//! every product they take part in searched whole, apart (each partner found by its
//! frequency window, each product once), and the bounds of the others take their partners
//! among the others only. Their products are looked at first among the [`FIRST_LOOK`]
//! emitters of strongest drive; the K-th level found there is a floor below which the
//! whole search of their products skips a partner (its drive bounds the level as above),
//! and an emitter without a level.
//!
//! **Without levels.** Emitters without ERP or location make only unlevelled candidates,
//! which follow every levelled one by order, then offset: their products are searched
//! one order at a time, and the search stops at the order at which the K-th candidate
//! is settled.
//!
//! With on-air evidence (which ranks before the level) nothing is skipped; the list is
//! still bounded.
//!
//! **Budget.** The list holds at most 2K + 64 candidates (and the transmitters' own
//! products 4K + 256): where K is so large that these would pass the site's memory
//! budget, the search stops at the budget and is refused.

use std::cmp::Ordering;

use crate::emitter::{Carrier, Emitter};
use crate::error::Result;
use crate::freq::Hz;
use crate::intermod::search_products_while;
use crate::intermod::SearchParams;
use crate::intermod::{co_channel, coefficient_sets, Product, Term, MAX_ORDER};
use crate::level::{
    form_weight_db, free_space_loss_db, slant_distance_m, wavelength_m, DIPOLE_GAIN_DBI,
};
use crate::level::{LevelModel, Mechanism};
use crate::rank::{Candidate, Placement, RankInputs, Ranker, Tally};
use crate::site::{Explanation, Query, Site, BYTES_PER_CANDIDATE};

/// The emitters searched first: the set doubles from here until the bound settles.
const FIRST_SET: usize = 16;

/// Margin on every bound, dB: rounding in the level arithmetic never prunes a tie.
const BOUND_MARGIN_DB: f64 = 1e-6;

/// The best K candidates offered so far, with the counts of all.
struct Best<'r, 'a> {
    ranker: &'r Ranker<'a>,
    k: usize,
    held: Vec<Candidate>,
    kth: Option<Candidate>,
    tally: Tally,
}

impl<'r, 'a> Best<'r, 'a> {
    fn new(ranker: &'r Ranker<'a>, k: usize) -> Self {
        Best {
            ranker,
            k,
            held: Vec::new(),
            kth: None,
            tally: Tally::default(),
        }
    }

    fn offer(&mut self, c: Candidate) {
        self.tally.count(&c);
        if c.breakdown.is_some()
            && self
                .tally
                .first_levelled
                .is_none_or(|f| self.ranker.cmp(&c, &f) == Ordering::Less)
        {
            self.tally.first_levelled = Some(c);
        }
        if self.k == 0 {
            return;
        }
        if let Some(kth) = &self.kth {
            if self.ranker.cmp(&c, kth) != Ordering::Less {
                return;
            }
        }
        self.held.push(c);
        if self.held.len() >= self.k.saturating_mul(2).saturating_add(64) {
            self.compact();
        }
    }

    fn compact(&mut self) {
        let ranker = self.ranker;
        self.held.sort_by(|a, b| ranker.cmp(a, b));
        self.held.truncate(self.k);
        if self.k > 0 && self.held.len() == self.k {
            self.kth = self.held.last().copied();
        }
    }

    /// Holds `c` without counting it (it was counted where it was found).
    fn place(&mut self, c: Candidate) {
        if self.k == 0 {
            return;
        }
        self.held.push(c);
        if self.held.len() >= self.k.saturating_mul(2).saturating_add(64) {
            self.compact();
        }
    }

    /// Adds the counts of `other`, whose candidates were offered apart.
    fn absorb(&mut self, other: &Tally) {
        let t = &mut self.tally;
        t.total += other.total;
        t.unlevelled += other.unlevelled;
        t.calibrated |= other.calibrated;
        t.credible |= other.credible;
        t.levelled |= other.levelled;
        if let Some(c) = other.first_levelled {
            if t.first_levelled
                .is_none_or(|f| self.ranker.cmp(&c, &f) == Ordering::Less)
            {
                t.first_levelled = Some(c);
            }
        }
    }

    /// The K-th candidate, once K are held.
    fn kth(&mut self) -> Option<Candidate> {
        self.compact();
        self.kth
    }
}

/// An upper bound on the in-channel level (dBm) of any junction or receiver candidate
/// whose product involves each emitter (module docs); −∞ where none can be levelled, +∞
/// where no bound holds. A transmitter's own products are listed apart, whole.
fn emitter_bounds(
    ranker: &Ranker,
    query: &Query,
    emitters: &[Emitter],
    strong: &[bool],
) -> Vec<f64> {
    let n = emitters.len();
    let r = &ranker.shell;
    let (Some(rx), Some(_)) = (r.receiver, r.junction) else {
        return vec![f64::NEG_INFINITY; n];
    };
    let m = &r.model;
    let params = &query.params;
    if m.drive_exponent < 0.0 || !m.drive_exponent.is_finite() {
        return vec![f64::INFINITY; n];
    }
    let max_order = params.max_order.min(MAX_ORDER);
    let max_emitters = params.max_emitters.clamp(1, 3) as usize;
    let path_floor = |slant: f64, f: f64| {
        free_space_loss_db(f, slant.max(wavelength_m(f) / (2.0 * std::f64::consts::PI)))
            - m.rx_antenna_gain_dbi
    };
    // The largest form weight of each order, over the shapes the search makes.
    let mut form_max = vec![f64::NEG_INFINITY; max_order as usize + 1];
    for parts in 1..=max_emitters {
        for ks in coefficient_sets(parts, max_order) {
            let ks: Vec<u32> = ks.iter().map(|k| k.unsigned_abs() as u32).collect();
            let order: u32 = ks.iter().sum();
            if order >= 2 {
                let f = form_weight_db(&ks);
                let slot = &mut form_max[order as usize];
                *slot = slot.max(f);
            }
        }
    }
    let slant: Vec<Option<f64>> = emitters
        .iter()
        .zip(&r.incidence)
        .map(|(e, inc)| match inc {
            Some(i) => Some(i.distance_m),
            None => e.position.map(|p| {
                slant_distance_m(
                    crate::geo::distance_m(p, rx),
                    e.height_m.unwrap_or(m.junction_height_m),
                    m.junction_height_m,
                )
            }),
        })
        .collect();
    let erp_at = |i: usize| emitters[i].position.and(emitters[i].erp_dbm);
    let fold_max = |it: &mut dyn Iterator<Item = f64>| it.fold(f64::NEG_INFINITY, f64::max);
    // the strong emitters' products are searched whole, apart: the partners of every
    // other product are among the rest
    let p_max = fold_max(
        &mut r
            .incidence
            .iter()
            .zip(strong)
            .filter(|(_, s)| !**s)
            .filter_map(|(i, _)| i.map(|i| i.incident_dbm)),
    );
    let a = m.drive_exponent;
    // Junction: the path from the junction to a receiver at it is the λ/2π floor, 6.02 dB.
    let junction_path = 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi;
    let junction_top = fold_max(&mut (2..=max_order).map(|order| {
        let n = order as f64;
        m.im3_dbm + form_max[order as usize]
            - m.order_step_db * (n - 3.0)
            - if order % 2 == 0 {
                m.even_order_penalty_db
            } else {
                0.0
            }
            + a * n * (p_max - m.reference_tone_dbm)
    })) - junction_path;
    let rx_input: Vec<Option<f64>> = (0..n)
        .map(|i| {
            let (erp, s) = (erp_at(i)?, slant[i]?);
            Some(erp + DIPOLE_GAIN_DBI - path_floor(s, emitters[i].freq.0 as f64))
        })
        .collect();
    let rx_max = fold_max(
        &mut rx_input
            .iter()
            .zip(strong)
            .filter(|(_, s)| !**s)
            .filter_map(|(i, _)| *i),
    );
    let receiver = match m.rx_iip3_dbm {
        Some(iip3) if ranker.receiver_modelled() && max_order >= 3 => {
            Some(2.0 * rx_max - 2.0 * iip3 + form_max[3])
        }
        _ => None,
    };
    (0..n)
        .map(|i| {
            let mut h = f64::NEG_INFINITY;
            if let Some(inc) = r.incidence[i] {
                h = h.max(junction_top - a * (p_max - inc.incident_dbm));
            }
            if let (Some(extra), Some(input)) = (receiver, rx_input[i]) {
                h = h.max(input + extra);
            }
            if h.is_nan() {
                f64::INFINITY
            } else {
                h + BOUND_MARGIN_DB
            }
        })
        .collect()
}

/// How many of the strongest emitters at the junction have their products searched whole,
/// apart from the pruned search: a strong broadcaster near the junction would otherwise
/// lift every other emitter's bound.
const STRONG: usize = 8;

/// The emitters of the strongest drive among which the strong emitters' products are
/// looked at first, for a K-th level to search the rest against.
const FIRST_LOOK: usize = 64;

/// What the strong emitters' search may skip: products whose junction level cannot reach
/// `level` (dBm) at the emitters' drives (the receiver's own products not modelled), and
/// products of an emitter without a level (they follow every levelled candidate).
struct Floor<'a> {
    level: f64,
    drive: &'a [Option<f64>],
    model: &'a LevelModel,
    /// The path from the junction to the receiver at it, dB.
    path_db: f64,
}

impl Floor<'_> {
    /// The junction level's bound less the drive terms: Σ α·|kᵢ|·Pᵢ is added by the caller.
    fn constant(&self, ks: &[i64]) -> f64 {
        let m = self.model;
        let abs: Vec<u32> = ks.iter().map(|k| k.unsigned_abs() as u32).collect();
        let n: u32 = abs.iter().sum();
        m.im3_dbm + form_weight_db(&abs)
            - m.order_step_db * (n as f64 - 3.0)
            - if n.is_multiple_of(2) {
                m.even_order_penalty_db
            } else {
                0.0
            }
            - m.drive_exponent * n as f64 * m.reference_tone_dbm
            - self.path_db
            + BOUND_MARGIN_DB
    }
}

/// Hands every product of the channel that involves emitter `x` and otherwise only
/// emitters not `excluded` (and not `x`) to `visit`, each once, until it returns false;
/// with a `floor`, skips what it allows and notes in `skipped` that it did.
#[allow(clippy::too_many_arguments)]
fn search_with(
    carriers: &[Carrier],
    sorted: &[usize],
    x: usize,
    excluded: &[bool],
    params: &SearchParams,
    floor: Option<&Floor>,
    skipped: &mut bool,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let a = floor.map_or(0.0, |f| f.model.drive_exponent);
    let drive_of = |i: usize| floor.and_then(|f| f.drive[i]);
    let px = drive_of(x).unwrap_or(f64::NEG_INFINITY);
    // the strongest drive any partner can have
    let partner_max = floor.map_or(f64::INFINITY, |f| {
        (0..carriers.len())
            .filter(|&i| i != x && !excluded[i])
            .filter_map(|i| f.drive[i])
            .fold(f64::NEG_INFINITY, f64::max)
    });
    let max_order = params.max_order.min(MAX_ORDER) as i64;
    let max_emitters = params.max_emitters.clamp(1, 3);
    let (fx, bx) = (carriers[x].freq.0, carriers[x].bandwidth.0);
    let f0 = params.target.0;
    let base = params.rx_bandwidth.0 + 2 * params.tolerance.0;
    let max_bw = carriers.iter().map(|c| c.bandwidth.0).max().unwrap_or(0);
    let term = |emitter: usize, coefficient: i64| Term {
        emitter,
        coefficient: coefficient as i32,
    };
    for k in 2..=max_order {
        let f = k * fx;
        if params.hits(Hz(f), Hz(k * bx)) && !visit(Product::new(&[term(x, k)], Hz(f))) {
            return false;
        }
    }
    if max_emitters < 2 {
        return true;
    }
    let freq: Vec<i64> = sorted.iter().map(|&i| carriers[i].freq.0).collect();
    // positions whose 2·k·f lies in [t − w, t + w], from position `from` on
    let window = |from: usize, t: i64, w: i64, k: i64| -> std::ops::Range<usize> {
        let (m, t) = if k > 0 { (k, t) } else { (-k, -t) };
        let lo = from + freq[from..].partition_point(|&f| 2 * m * f < t - w);
        let hi = from + freq[from..].partition_point(|&f| 2 * m * f <= t + w);
        lo..hi.max(lo)
    };
    let signed = |total: i64| -> Vec<i64> { (1..=total).flat_map(|k| [k, -k]).collect() };
    for kx in signed(max_order - 1) {
        for ky in signed(max_order - kx.abs()) {
            let t = 2 * (f0 - kx * fx);
            let w = kx.abs() * bx + ky.abs() * max_bw + base;
            let c = floor.map(|f| (f.level, f.constant(&[kx, ky]) + a * kx.abs() as f64 * px));
            for pos in window(0, t, w, ky) {
                let y = sorted[pos];
                if y == x || excluded[y] {
                    continue;
                }
                if let Some((level, c)) = c {
                    match drive_of(y) {
                        Some(py) if c + a * ky.abs() as f64 * py >= level => {}
                        _ => {
                            *skipped = true;
                            continue;
                        }
                    }
                }
                let f = kx * fx + ky * carriers[y].freq.0;
                let bw = kx.abs() * bx + ky.abs() * carriers[y].bandwidth.0;
                if params.hits(Hz(f), Hz(bw))
                    && !visit(Product::new(&[term(x, kx), term(y, ky)], Hz(f)))
                {
                    return false;
                }
            }
        }
    }
    if max_emitters < 3 || max_order < 3 {
        return true;
    }
    for kx in signed(max_order - 2) {
        for ky in signed(max_order - kx.abs() - 1) {
            for kz in signed(max_order - kx.abs() - ky.abs()) {
                let c = floor.map(|f| {
                    (
                        f.level,
                        f.constant(&[kx, ky, kz]) + a * kx.abs() as f64 * px,
                    )
                });
                for (py, &y) in sorted.iter().enumerate() {
                    if y == x || excluded[y] {
                        continue;
                    }
                    // the level with the third partner at the strongest drive left
                    let with_y = match (c, drive_of(y)) {
                        (None, _) => None,
                        (Some((level, c)), Some(dy)) => {
                            let c = c + a * ky.abs() as f64 * dy;
                            if c + a * kz.abs() as f64 * partner_max < level {
                                *skipped = true;
                                continue;
                            }
                            Some((level, c))
                        }
                        (Some(_), None) => {
                            *skipped = true;
                            continue;
                        }
                    };
                    let (fy, by) = (carriers[y].freq.0, carriers[y].bandwidth.0);
                    let t = 2 * (f0 - kx * fx - ky * fy);
                    let w = kx.abs() * bx + ky.abs() * by + kz.abs() * max_bw + base;
                    for pos in window(py + 1, t, w, kz) {
                        let z = sorted[pos];
                        if z == x || excluded[z] {
                            continue;
                        }
                        if let Some((level, c)) = with_y {
                            match drive_of(z) {
                                Some(dz) if c + a * kz.abs() as f64 * dz >= level => {}
                                _ => {
                                    *skipped = true;
                                    continue;
                                }
                            }
                        }
                        let f = kx * fx + ky * fy + kz * carriers[z].freq.0;
                        let bw = kx.abs() * bx + ky.abs() * by + kz.abs() * carriers[z].bandwidth.0;
                        if params.hits(Hz(f), Hz(bw))
                            && !visit(Product::new(
                                &[term(x, kx), term(y, ky), term(z, kz)],
                                Hz(f),
                            ))
                        {
                            return false;
                        }
                    }
                }
            }
        }
    }
    true
}

/// Searches the emitters `ids` (indices into `carriers`) at the orders given and hands
/// each product, in the site's index space, to `visit`, until it returns false.
fn search_among(
    carriers: &[Carrier],
    ids: &[usize],
    query: &Query,
    orders: std::ops::RangeInclusive<u32>,
    visit: &mut dyn FnMut(Product) -> bool,
) {
    let sub: Vec<Carrier> = ids.iter().map(|&i| carriers[i]).collect();
    search_products_while(&sub, &query.params, orders, &mut |p| {
        let mut terms = [Term {
            emitter: 0,
            coefficient: 0,
        }; 3];
        let mut len = 0;
        for (slot, t) in terms.iter_mut().zip(p.terms()) {
            *slot = Term {
                emitter: ids[t.emitter],
                coefficient: t.coefficient,
            };
            len += 1;
        }
        visit(Product::new(&terms[..len], p.freq))
    });
}

/// The first `k` candidates of [`Site::explain`] (module docs).
pub(crate) fn explain_top(site: &Site, query: &Query, k: usize) -> Result<Explanation> {
    let emitters = site.emitters();
    let carriers = site.carriers();
    let n = emitters.len();
    let inputs = RankInputs {
        placement: Placement::at(query.junction),
        model: query.model,
        logbook: query.logbook.as_ref(),
        heard: &[],
    };
    let ranker = Ranker::new(emitters, &query.params, &inputs);
    let narrow = |p: &Product| {
        query
            .coefficients
            .iter()
            .all(|&(e, kk)| p.coefficient_of(e).unsigned_abs() == kk)
    };
    // The candidates the lists may hold within the memory budget.
    let cap = usize::try_from(site.memory_budget() / BYTES_PER_CANDIDATE).unwrap_or(usize::MAX);
    let over = std::cell::Cell::new(false);
    // products the transmitters' own search reached (for the refusal)
    let mut reached = 0usize;
    let mut found = 0usize;
    let mut kept = 0usize;
    let mut complete = true;
    // A transmitter's harmonics and its intermodulation with one other emitter are few
    // (one emitter, or two at third order): every one is levelled exactly, up front;
    // the search below then weighs the junction and receiver candidates only.
    let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
    let rest = |m: Mechanism| !own(m);
    let mut transmitters: Vec<Candidate> = Vec::new();
    let mut trimmed = false;
    let mut best = Best::new(&ranker, k);
    if query.logbook.is_none() {
        let all: Vec<usize> = (0..n).collect();
        let mut pass = |params: SearchParams, orders: std::ops::RangeInclusive<u32>| {
            let q = Query {
                params,
                ..query.clone()
            };
            search_among(carriers, &all, &q, orders, &mut |p| {
                reached += 1;
                if narrow(&p) {
                    ranker.evaluate_only(&p, &mut transmitters, &own);
                    if transmitters.len() >= k.saturating_mul(4).saturating_add(256) {
                        trimmed = true;
                        let mut b = Best::new(&ranker, k);
                        for c in transmitters.drain(..) {
                            b.offer(c);
                        }
                        b.compact();
                        transmitters = b.held;
                    }
                    if transmitters.len() > cap {
                        over.set(true);
                    }
                }
                !over.get()
            });
        };
        pass(
            SearchParams {
                max_emitters: 1,
                ..query.params
            },
            2..=MAX_ORDER,
        );
        if query.params.max_emitters >= 2 && !over.get() {
            pass(
                SearchParams {
                    max_emitters: 2,
                    ..query.params
                },
                3..=3,
            );
        }
        if over.get() {
            return Err(site.over_budget(reached));
        }
    }
    let mut scratch = Vec::with_capacity(4);
    let every = |_: Mechanism| true;
    let keep: &dyn Fn(Mechanism) -> bool = if query.logbook.is_some() {
        &every
    } else {
        &rest
    };
    let mut offer = |best: &mut Best, found: &mut usize, kept: &mut usize, p: Product| -> bool {
        *found += 1;
        if narrow(&p) {
            *kept += 1;
            scratch.clear();
            ranker.evaluate_only(&p, &mut scratch, keep);
            for c in scratch.drain(..) {
                best.offer(c);
            }
            if best.held.len() + transmitters.len() > cap {
                over.set(true);
            }
        }
        !over.get()
    };
    let fresh = |transmitters: &[Candidate], strong: &[Candidate]| {
        let mut b = Best::new(&ranker, k);
        for c in transmitters {
            b.offer(*c);
        }
        for c in strong {
            b.place(*c);
        }
        b
    };
    if query.logbook.is_some() {
        let all: Vec<usize> = (0..n).collect();
        search_among(carriers, &all, query, 2..=MAX_ORDER, &mut |p| {
            offer(&mut best, &mut found, &mut kept, p)
        });
    } else {
        // The strongest emitters at the junction: their products are searched whole.
        let mut strong = vec![false; n];
        let mut by_drive: Vec<(f64, usize)> = ranker
            .shell
            .incidence
            .iter()
            .enumerate()
            .filter_map(|(i, inc)| inc.map(|inc| (inc.incident_dbm, i)))
            .collect();
        if by_drive.len() > 2 * STRONG {
            by_drive.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            for &(_, i) in &by_drive[..STRONG] {
                strong[i] = true;
            }
        }
        let strong_count = strong.iter().filter(|s| **s).count();
        let mut strong_best = Best::new(&ranker, k);
        let (mut strong_found, mut strong_kept) = (0usize, 0usize);
        let mut strong_skipped = false;
        if strong_count > 0 {
            let mut sorted: Vec<usize> = (0..n).collect();
            sorted.sort_by_key(|&i| (carriers[i].freq, i));
            // A first look among the strongest partners only gives a K-th level that the
            // whole search of the strong emitters' products need not look below.
            let drive: Vec<Option<f64>> = ranker
                .shell
                .incidence
                .iter()
                .map(|i| i.map(|i| i.incident_dbm))
                .collect();
            let m = &ranker.shell.model;
            let prunable = !ranker.receiver_modelled()
                && m.drive_exponent >= 0.0
                && m.drive_exponent.is_finite();
            let mut floor = None;
            if prunable {
                let mut outside = vec![true; n];
                for &(_, i) in by_drive.iter().take(FIRST_LOOK) {
                    outside[i] = false;
                }
                let mut look = Best::new(&ranker, k);
                let (mut f, mut kk, mut skipped) = (0usize, 0usize, false);
                let mut excluded = outside.clone();
                for x in (0..n).filter(|&x| strong[x]) {
                    search_with(
                        carriers,
                        &sorted,
                        x,
                        &excluded,
                        &query.params,
                        None,
                        &mut skipped,
                        &mut |p| offer(&mut look, &mut f, &mut kk, p),
                    );
                    if over.get() {
                        return Err(site.over_budget(f));
                    }
                    excluded[x] = true;
                }
                floor = look
                    .kth()
                    .filter(|c| !c.implausible && !c.away_from_fix)
                    .and_then(|c| c.breakdown.map(|b| b.in_channel_dbm))
                    .map(|level| Floor {
                        level,
                        drive: &drive,
                        model: m,
                        path_db: 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi,
                    });
            }
            let mut excluded = vec![false; n];
            for x in (0..n).filter(|&x| strong[x]) {
                search_with(
                    carriers,
                    &sorted,
                    x,
                    &excluded,
                    &query.params,
                    floor.as_ref(),
                    &mut strong_skipped,
                    &mut |p| offer(&mut strong_best, &mut strong_found, &mut strong_kept, p),
                );
                if over.get() {
                    return Err(site.over_budget(strong_found));
                }
                excluded[x] = true;
            }
            strong_best.compact();
        }
        let strong_held = strong_best.held.clone();
        let bounds = emitter_bounds(&ranker, query, emitters, &strong);
        let mut order: Vec<usize> = (0..n)
            .filter(|&i| bounds[i] > f64::NEG_INFINITY && !strong[i])
            .collect();
        order.sort_by(|&a, &b| bounds[b].total_cmp(&bounds[a]).then(a.cmp(&b)));
        let levelled = order.len();
        best = fresh(&transmitters, &strong_held);
        let mut m = levelled.min(FIRST_SET);
        let mut settled = false;
        if levelled > 0 {
            loop {
                best = fresh(&transmitters, &strong_held);
                (found, kept) = (0, 0);
                search_among(carriers, &order[..m], query, 2..=MAX_ORDER, &mut |p| {
                    offer(&mut best, &mut found, &mut kept, p)
                });
                if over.get() {
                    break;
                }
                let kth = best.kth();
                let kth_level = kth
                    .filter(|c| !c.implausible && !c.away_from_fix)
                    .and_then(|c| c.breakdown.map(|b| b.in_channel_dbm));
                if let Some(t) = kth_level {
                    if m == levelled || bounds[order[m]] < t {
                        settled = true;
                        complete = m + strong_count == n;
                        break;
                    }
                }
                if m == levelled {
                    break;
                }
                m = (2 * m).min(levelled);
            }
        }
        if !settled && levelled < n && !over.get() {
            // Products with an emitter that has no level: unlevelled, by order then offset.
            let mut unlevelled = vec![false; n];
            for (i, b) in bounds.iter().enumerate() {
                unlevelled[i] = *b == f64::NEG_INFINITY;
            }
            let all: Vec<usize> = (0..n).collect();
            let max_order = query.params.max_order.min(MAX_ORDER);
            for o in 2..=max_order {
                search_among(carriers, &all, query, o..=o, &mut |p| {
                    if p.terms().any(|t| unlevelled[t.emitter])
                        && !p.terms().any(|t| strong[t.emitter])
                    {
                        offer(&mut best, &mut found, &mut kept, p)
                    } else {
                        true
                    }
                });
                if over.get() {
                    break;
                }
                if best
                    .kth()
                    .is_some_and(|c| c.breakdown.is_some() || c.product.order() <= o)
                {
                    complete = o == max_order;
                    break;
                }
            }
        }
        best.absorb(&strong_best.tally);
        complete &= !strong_skipped;
        found += strong_found;
        kept += strong_kept;
    }
    if over.get() {
        return Err(site.over_budget(found.max(reached)));
    }
    best.compact();
    complete &= !trimmed;
    let Best { held, tally, .. } = best;
    let mut seen = std::collections::HashSet::with_capacity(held.len());
    let products: Vec<Product> = held
        .iter()
        .map(|c| c.product)
        .filter(|p| seen.insert(*p))
        .collect();
    let ranking = ranker.finish(held, tally);
    Ok(Explanation {
        params: query.params,
        model: query.model,
        heard: query.heard.clone(),
        products,
        co_channel: co_channel(carriers, &query.params),
        found,
        kept,
        limit: Some(k),
        complete,
        ranking,
    })
}
