//! The first K candidates of an explanation in memory bounded by K and the emitters,
//! never by the number of products, and equal to the first K of the full listing.
//!
//! **Bounded list.** Candidates are offered one at a time to a list that keeps the best
//! K in the ranking order of [`crate::rank`] (at most 2K + 64 held between compactions);
//! everything is counted as it passes.
//!
//! **Exact bound.** Every mechanism's level is non-decreasing in each emitter's drive
//! ([`crate::level`], "Bound for pruning"), and the channel fraction is at most 1. So a
//! junction product of order n none of whose emitters drives above d lies at or below
//! L₃ + F_max(n) + α·n·(d − P_ref) − s·(n − 3) − e·[n even] less the path from the
//! junction to the receiver at it (the λ/2π floor), F_max(n) the largest form weight of
//! the order; and a product with a given shape and some of its drives known is bounded
//! the same way with the others at their bound.
//!
//! **Drives without geodesics.** The drive never rises with the distance and is never
//! above the far-field strength at the distance used, so each emitter's drive is bounded
//! by the far field of its ERP at a lower bound on its slant distance to the junction:
//! along any path on the ellipsoid the normal turns at most by the length over the
//! smallest radius of curvature (b²/a), so the geodesic is at least b²/a times the angle
//! between the end normals, and the chord between them is shorter still ([`crate::site`]
//! keeps the normals). Every bound below uses these; the exact field is worked out only
//! for the emitters of the candidates weighed.
//!
//! **Drive order.** The emitters are taken in falling drive bound at the junction from
//! the site's tree of positions ([`crate::nearby`]), which works a drive out only for
//! the emitters of the nodes that can still lead, each emitter with its products among
//! those after it (each product once, when its strongest emitter comes). A first look
//! at the products of the [`STRONG`] strongest among the [`FIRST_LOOK`] strongest gives a
//! K-th level, a floor raised as the search finds K better. A partner is skipped when its
//! drive cannot lift the product of its shape to the floor; a pair of partners is taken
//! once, the stronger first, and once the stronger cannot lift the product to the floor
//! with the other as strong, no weaker one can. The partners are found by their frequency
//! among the emitters taken (the first [`POOL`], in frequency order) while those hold
//! every partner strong enough, else among all the site's emitters. The search stops at
//! the first emitter whose own products with weaker ones cannot reach the floor (all
//! their emitters drive at most as much as it): no later emitter's can.
//!
//! With the receiver's own products modelled the bound takes every carrier at the
//! receiver: the strongest emitters have every product they take part in searched
//! whole, apart, and the others by whole sets, doubling from 16, until the bound of the
//! next emitter falls below the K-th.
//!
//! **Transmitters' own products.** A harmonic at its spurious limit and 2·f_A ± f_B made
//! in A's output stage are levelled from the path from A to the receiver: for each A,
//! the strongest ERP of the site at the least antenna isolation and the path at A's least
//! distance to the receiver, taken at the lowest frequency a hit can have (free-space
//! loss rises with frequency), bound them. They are searched last, strongest bound first
//! from the site's tree (each node bounded by its strongest ERP at its least distance),
//! until the bound falls below the K-th candidate held; a partner B is skipped when its
//! own ERP at the least distance between the antennas cannot lift the product to it.
//!
//! **Without levels.** Emitters without ERP or location make only unlevelled candidates,
//! which follow every levelled one by order, then offset: their products are searched
//! one order at a time, and the search stops at the order at which the K-th candidate
//! is settled.
//!
//! With on-air evidence (which ranks before the level) nothing is skipped; the list is
//! still bounded.
//!
//! **Budget.** The list holds at most 2K + 64 candidates: where K is so large that these
//! would pass the site's memory budget, the search stops at the budget and is refused.

use std::cmp::Ordering;

use crate::emitter::{Carrier, Emitter};
use crate::error::Result;
use crate::freq::Hz;
use crate::intermod::search_products_while;
use crate::intermod::SearchParams;
use crate::intermod::{co_channel, coefficient_sets, Product, Term, MAX_ORDER};
use crate::level::{
    coupled_power_dbm, field_strength_dbuv_m, form_weight_db, free_space_loss_db, slant_distance_m,
    wavelength_m, DIPOLE_GAIN_DBI,
};
use crate::level::{LevelModel, Mechanism};
use crate::nearby::{ground_for_chord, Reach};
use crate::rank::{Candidate, Placement, RankInputs, Ranker, Tally};
use crate::site::{Explanation, Query, Site, BYTES_PER_CANDIDATE};

/// With the receiver's own products modelled, the emitters searched first as a whole set:
/// the set doubles from here until the bound settles.
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

    /// The level of the K-th candidate at the last compaction, where it bounds everything
    /// after it (see [`kth_level`]).
    fn kth_level_held(&self) -> Option<f64> {
        self.kth
            .filter(|c| !c.implausible && !c.away_from_fix)
            .and_then(|c| c.breakdown.map(|b| b.in_channel_dbm))
    }

    /// The K-th candidate, once K are held.
    fn kth(&mut self) -> Option<Candidate> {
        self.compact();
        self.kth
    }
}

/// An upper bound on the in-channel level (dBm) of any junction or receiver candidate
/// whose product involves each emitter and none of the `strong` ones, from its own drive
/// with every partner at the strongest drive of the others (module docs, "Exact bound"),
/// and for the receiver's own products from the strongest carrier at the receiver; −∞
/// where none can be levelled, +∞ where no bound holds. A transmitter's own products are
/// listed apart.
fn emitter_bounds(
    ranker: &Ranker,
    query: &Query,
    emitters: &[Emitter],
    strong: &[bool],
    drive: &[Option<f64>],
    ground: &[Option<f64>],
) -> Vec<f64> {
    let n = emitters.len();
    let r = &ranker.shell;
    let (Some(_), Some(_)) = (r.receiver, r.junction) else {
        return vec![f64::NEG_INFINITY; n];
    };
    let m = &r.model;
    let params = &query.params;
    if m.drive_exponent < 0.0 || !m.drive_exponent.is_finite() {
        return vec![f64::INFINITY; n];
    }
    let max_order = params.max_order.min(MAX_ORDER);
    let path_floor = |slant: f64, f: f64| {
        free_space_loss_db(f, slant.max(wavelength_m(f) / (2.0 * std::f64::consts::PI)))
            - m.rx_antenna_gain_dbi
    };
    let form_max = form_max(params);
    // the receiver is at the junction: a lower bound on the distance to it
    let slant: Vec<Option<f64>> = emitters
        .iter()
        .zip(ground)
        .map(|(e, g)| {
            g.map(|g| {
                slant_distance_m(
                    g,
                    e.height_m.unwrap_or(m.junction_height_m),
                    m.junction_height_m,
                )
            })
        })
        .collect();
    let erp_at = |i: usize| emitters[i].position.and(emitters[i].erp_dbm);
    let fold_max = |it: &mut dyn Iterator<Item = f64>| it.fold(f64::NEG_INFINITY, f64::max);
    // the strong emitters' products are searched whole, apart: the partners of every
    // other product are among the rest
    let p_max = fold_max(
        &mut drive
            .iter()
            .zip(strong)
            .filter(|(_, s)| !**s)
            .filter_map(|(d, _)| *d),
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
            if let Some(d) = drive[i] {
                h = h.max(junction_top - a * (p_max - d));
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

/// How many of the strongest emitters at the junction have their products among the
/// [`FIRST_LOOK`] looked at first, for a K-th level to start the search from (with the
/// receiver's own products modelled: whose products are searched whole, apart).
const STRONG: usize = 8;

/// The emitters of the strongest drive among which the strong emitters' products are
/// looked at first.
const FIRST_LOOK: usize = 64;

/// How many emitters a receiver's search takes in drive order (no more than half the
/// site's, but past the first look) to find partners among by frequency; past that,
/// partners are found among all the site's emitters, which then costs about as much.
/// Measured on the regional study (100,000 emitters): 1,024 beat 512 and 4,096 by a fifth
/// to a half.
const POOL: usize = 1024;

/// What the search may skip: products whose junction level cannot reach `level` (dBm) at
/// the emitters' drives (the receiver's own products not modelled).
struct Floor<'a> {
    /// Raised as the search finds better: the K-th level of what it has found.
    level: std::cell::Cell<f64>,
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

/// Frequency windows: the positions of `freq` (sorted) whose 2·k·f lies in [t − w, t + w].
fn window_of<T>(
    sorted: &[T],
    f: impl Fn(&T) -> i64,
    t: i64,
    w: i64,
    k: i64,
) -> std::ops::Range<usize> {
    let (m, t) = if k > 0 { (k, t) } else { (-k, -t) };
    let lo = sorted.partition_point(|e| 2 * m * f(e) < t - w);
    let hi = sorted.partition_point(|e| 2 * m * f(e) <= t + w);
    lo..hi.max(lo)
}

/// The coefficients ±1 … ±`total`.
fn signed(total: i64) -> Vec<i64> {
    (1..=total).flat_map(|k| [k, -k]).collect()
}

/// The channel and one emitter x, for the searches of x's products: where a partner's
/// frequency must lie, and whether a product lands.
struct Around<'a> {
    carriers: &'a [Carrier],
    params: &'a SearchParams,
    x: usize,
    fx: i64,
    bx: i64,
    /// The channel's centre, Hz.
    f0: i64,
    /// The channel's width and twice the tolerance, Hz.
    base: i64,
    /// The widest carrier of the site, Hz.
    max_bw: i64,
    max_order: i64,
    max_emitters: u32,
}

impl<'a> Around<'a> {
    fn new(site: &'a Site, params: &'a SearchParams, x: usize) -> Self {
        let carriers = site.carriers();
        Around {
            carriers,
            params,
            x,
            fx: carriers[x].freq.0,
            bx: carriers[x].bandwidth.0,
            f0: params.target.0,
            base: params.rx_bandwidth.0 + 2 * params.tolerance.0,
            max_bw: site.index.max_bw,
            max_order: params.max_order.min(MAX_ORDER) as i64,
            max_emitters: params.max_emitters.clamp(1, 3),
        }
    }

    /// Hands x's harmonics that land to `visit`; false once it returns false.
    fn harmonics(&self, visit: &mut dyn FnMut(Product) -> bool) -> bool {
        for k in 2..=self.max_order {
            let f = k * self.fx;
            if self.params.hits(Hz(f), Hz(k * self.bx))
                && !visit(Product::new(&[term(self.x, k)], Hz(f)))
            {
                return false;
            }
        }
        true
    }

    /// The window (`t`, `w` of [`window_of`]) of a partner y in kx·x + ky·y, with the
    /// partners `known` (coefficient and emitter) taken already.
    fn window(&self, kx: i64, known: Option<(i64, usize)>, k: i64) -> (i64, i64) {
        let (mut t, mut w) = (self.f0 - kx * self.fx, kx.abs() * self.bx);
        if let Some((ky, y)) = known {
            t -= ky * self.carriers[y].freq.0;
            w += ky.abs() * self.carriers[y].bandwidth.0;
        }
        (2 * t, w + k.abs() * self.max_bw + self.base)
    }

    /// Hands kx·x + Σ kᵢ·yᵢ to `visit` when it lands; false once it returns false.
    fn offer(
        &self,
        kx: i64,
        partners: &[(i64, usize)],
        visit: &mut dyn FnMut(Product) -> bool,
    ) -> bool {
        let mut terms = [term(self.x, kx); 3];
        let (mut f, mut bw) = (kx * self.fx, kx.abs() * self.bx);
        for (slot, &(k, y)) in terms[1..].iter_mut().zip(partners) {
            *slot = term(y, k);
            f += k * self.carriers[y].freq.0;
            bw += k.abs() * self.carriers[y].bandwidth.0;
        }
        !self.params.hits(Hz(f), Hz(bw)) || visit(Product::new(&terms[..1 + partners.len()], Hz(f)))
    }
}

/// A term of a product.
fn term(emitter: usize, coefficient: i64) -> Term {
    Term {
        emitter,
        coefficient: coefficient as i32,
    }
}

/// Hands every product of the channel that involves emitter `x` and otherwise only
/// emitters that `open` accepts (never `x`) to `visit`, each once, until it returns false.
/// The partners of three-emitter products are among `ys` (`(drive, emitter)`, the open
/// ones that may take part).
fn search_with(
    site: &Site,
    x: usize,
    open: &dyn Fn(usize) -> bool,
    ys: &[(f64, usize)],
    params: &SearchParams,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let around = Around::new(site, params, x);
    let (carriers, max_order) = (site.carriers(), around.max_order);
    let sorted = &site.index.by_freq[..];
    let freq = &site.index.freq_sorted[..];
    if !around.harmonics(visit) {
        return false;
    }
    if around.max_emitters < 2 {
        return true;
    }
    for kx in signed(max_order - 1) {
        for ky in signed(max_order - kx.abs()) {
            let (t, w) = around.window(kx, None, ky);
            for pos in window_of(freq, |&f| f, t, w, ky) {
                let y = sorted[pos];
                if y != x && open(y) && !around.offer(kx, &[(ky, y)], visit) {
                    return false;
                }
            }
        }
    }
    if around.max_emitters < 3 || max_order < 3 {
        return true;
    }
    let ys: Vec<usize> = ys
        .iter()
        .map(|&(_, y)| y)
        .filter(|&y| y != x && open(y))
        .collect();
    // The third partner is one of them too, after the second, found by its frequency.
    let mut by_freq: Vec<usize> = (0..ys.len()).collect();
    by_freq.sort_unstable_by_key(|&i| site.index.place[ys[i]]);
    let ys_freq: Vec<i64> = by_freq.iter().map(|&i| carriers[ys[i]].freq.0).collect();
    for kx in signed(max_order - 2) {
        for ky in signed(max_order - kx.abs() - 1) {
            for kz in signed(max_order - kx.abs() - ky.abs()) {
                for (iy, &y) in ys.iter().enumerate() {
                    let (t, w) = around.window(kx, Some((ky, y)), kz);
                    for jz in window_of(&ys_freq, |&f| f, t, w, kz) {
                        let jz = by_freq[jz];
                        if jz > iy && !around.offer(kx, &[(ky, y), (kz, ys[jz])], visit) {
                            return false;
                        }
                    }
                }
            }
        }
    }
    true
}

/// The least drive (dBm) a partner needs for a product to reach `level`, the product's
/// bound being `c` (dBm) plus α·`k` times the partner's drive.
fn need(level: f64, c: f64, a: f64, k: i64) -> f64 {
    if level == f64::NEG_INFINITY {
        return f64::NEG_INFINITY;
    }
    if a <= 0.0 {
        return if c >= level {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
    }
    let d = (level - c) / (a * k.abs() as f64);
    if d.is_nan() {
        return f64::NEG_INFINITY;
    }
    d - 1e-9 * (1.0 + d.abs())
}

/// Hands every product of the channel that involves the emitter at place `p` of the drive
/// order and otherwise only emitters after it to `visit`, each once, until it returns
/// false, skipping what the `floor` allows (noted in `skipped`): the partners are found
/// by their frequency among the emitters taken (up to `pool` of them) or, past that, among
/// all.
#[allow(clippy::too_many_arguments)]
fn search_after(
    site: &Site,
    taken: &mut Taken,
    p: usize,
    pool: usize,
    drives: &Drives,
    params: &SearchParams,
    floor: &Floor,
    skipped: &mut bool,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let (dx, x) = taken.seq[p];
    let around = Around::new(site, params, x);
    let max_order = around.max_order;
    let a = floor.model.drive_exponent;
    if !around.harmonics(visit) {
        return false;
    }
    if around.max_emitters < 2 {
        return true;
    }
    let mut found: Vec<(f64, usize)> = Vec::new();
    for kx in signed(max_order - 1) {
        for ky in signed(max_order - kx.abs()) {
            let c = floor.constant(&[kx, ky]) + a * kx.abs() as f64 * dx;
            let need_y = need(floor.level.get(), c, a, ky);
            if need_y > dx {
                // no partner after it is strong enough
                *skipped = true;
                continue;
            }
            let (t, w) = around.window(kx, None, ky);
            *skipped |= taken.window(site, drives, pool, need_y, (t, w, ky), p, &mut found);
            for &(_, y) in &found {
                if !around.offer(kx, &[(ky, y)], visit) {
                    return false;
                }
            }
        }
    }
    if around.max_emitters < 3 || max_order < 3 {
        return true;
    }
    // The second partners: taken after it, strongest first, down to the least drive that
    // can lift a product of some shape to the floor with the third as strong.
    let cut = y_cut(floor, dx, max_order);
    while taken.seq.last().is_some_and(|&(d, _)| d >= cut) && taken.more() {}
    let end = p + 1 + taken.seq[p + 1..].partition_point(|&(d, _)| d >= cut);
    *skipped |= end < taken.seq.len() || !taken.done;
    let ys: Vec<(f64, usize)> = taken.seq[p + 1..end].to_vec();
    // Each pair of partners is taken once, the second before the third in the drive
    // order: the third is never stronger than the second, and once a second partner
    // cannot lift the product to the floor with a third as strong, no later one can.
    for kx in signed(max_order - 2) {
        for ky in signed(max_order - kx.abs() - 1) {
            for kz in signed(max_order - kx.abs() - ky.abs()) {
                let c = floor.constant(&[kx, ky, kz]) + a * kx.abs() as f64 * dx;
                for (iy, &(dy, y)) in ys.iter().enumerate() {
                    let level = floor.level.get();
                    let cy = c + a * ky.abs() as f64 * dy;
                    if cy + a * kz.abs() as f64 * dy < level {
                        *skipped = true;
                        break;
                    }
                    let need_z = need(level, cy, a, kz);
                    let (t, w) = around.window(kx, Some((ky, y)), kz);
                    *skipped |= taken.window(
                        site,
                        drives,
                        pool,
                        need_z,
                        (t, w, kz),
                        p + 1 + iy,
                        &mut found,
                    );
                    for &(_, z) in &found {
                        if !around.offer(kx, &[(ky, y), (kz, z)], visit) {
                            return false;
                        }
                    }
                }
            }
        }
    }
    true
}

/// The least drive (dBm) a second partner of a three-emitter product of an emitter of
/// drive `px` needs for the product to reach the floor, the third partner being no
/// stronger than the second: −∞ where none is skipped.
fn y_cut(floor: &Floor, px: f64, max_order: i64) -> f64 {
    let a = floor.model.drive_exponent;
    let mut cut = f64::INFINITY;
    for kx in signed(max_order - 2) {
        for ky in signed(max_order - kx.abs() - 1) {
            for kz in signed(max_order - kx.abs() - ky.abs()) {
                let c = floor.constant(&[kx, ky, kz]) + a * kx.abs() as f64 * px;
                cut = cut.min(need(floor.level.get(), c, a, ky.abs() + kz.abs()));
            }
        }
    }
    if cut.is_nan() || a <= 0.0 || max_order < 3 {
        return f64::NEG_INFINITY;
    }
    cut
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

/// Brings the strongest bounds of `order[*ready..]` to the front of that part, strongest
/// first, until at least `upto` of `order` are in place (more, to spread the work).
fn bring_forward(order: &mut [usize], ready: &mut usize, upto: usize, bounds: &[f64]) {
    let len = order.len();
    if upto.min(len) <= *ready {
        return;
    }
    let target = upto.max(2 * *ready).max(FIRST_SET).min(len);
    let cmp = |a: &usize, b: &usize| bounds[*b].total_cmp(&bounds[*a]).then(a.cmp(b));
    let rest = &mut order[*ready..];
    let take = target - *ready;
    if take < rest.len() {
        rest.select_nth_unstable_by(take - 1, cmp);
    }
    rest[..take].sort_unstable_by(cmp);
    *ready = target;
}

/// Bounds on the candidates made in an emitter's own output stage (module docs).
struct OwnModel<'a> {
    model: &'a LevelModel,
    /// The lowest frequency a product in the channel can have, Hz: the path loss rises
    /// with it.
    f_low: f64,
    /// Harmonics are searched (order 2 and above).
    harmonics: bool,
    /// 2·f_A ± f_B with B at the strongest ERP of the site and the least isolation, dBm
    /// EIRP (−∞ where such products are not searched).
    im_top: f64,
}

impl<'a> OwnModel<'a> {
    fn new(site: &Site, query: &'a Query) -> Self {
        let m = &query.model;
        let params = &query.params;
        let max_order = params.max_order.min(MAX_ORDER);
        let max_bw = site.index.max_bw;
        let f_low = (params.target.0
            - (max_order as i64 * max_bw + params.rx_bandwidth.0 + 2 * params.tolerance.0) / 2)
            .max(1) as f64;
        let im_top = if params.max_emitters >= 2 && max_order >= 3 {
            site.index.max_erp_dbm - m.min_antenna_isolation_db - m.tx_conversion_loss_db
                + DIPOLE_GAIN_DBI
        } else {
            f64::NEG_INFINITY
        };
        OwnModel {
            model: m,
            f_low,
            harmonics: max_order >= 2,
            im_top,
        }
    }

    /// The least loss of the path to the receiver from `slant` metres, dB.
    fn path_db(&self, slant: f64) -> f64 {
        let reactive = wavelength_m(self.f_low) / (2.0 * std::f64::consts::PI);
        free_space_loss_db(self.f_low, slant.max(reactive)) - self.model.rx_antenna_gain_dbi
    }

    /// The bound (dBm in the channel; −∞ where none can be levelled) on the candidates
    /// made in the output stage of an emitter of ERP `erp_dbm` at least `slant` metres
    /// from the receiver.
    fn bound(&self, erp_dbm: Option<f64>, slant: f64) -> f64 {
        let mut top = self.im_top;
        if let (true, Some(erp)) = (self.harmonics, erp_dbm) {
            top = top.max(self.model.spurious_limit_eirp_bound_dbm(erp));
        }
        let b = top - self.path_db(slant) + BOUND_MARGIN_DB;
        if b.is_nan() {
            f64::INFINITY
        } else {
            b
        }
    }

    /// The bound for every emitter of a node of the site's tree (the spurious limit never
    /// falls with the ERP, the path's loss never rises as the distance falls).
    fn node_bound(&self, r: &Reach) -> f64 {
        let erp = (r.max_erp_dbm > f64::NEG_INFINITY).then_some(r.max_erp_dbm);
        self.bound(erp, r.ground_m)
    }
}

/// Hands every product of the channel made in emitter `a`'s own output stage (its
/// harmonics, and 2·f_a ± f_b with any other emitter b) to `visit` until it returns false;
/// skips a partner `b` for which `partner` is false, noting in `skipped` that it did.
fn search_own(
    site: &Site,
    a: usize,
    params: &SearchParams,
    partner: &dyn Fn(usize) -> bool,
    skipped: &mut bool,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let (carriers, sorted) = (site.carriers(), &site.index.by_freq[..]);
    let max_bw = site.index.max_bw;
    let max_order = params.max_order.min(MAX_ORDER) as i64;
    let (fa, ba) = (carriers[a].freq.0, carriers[a].bandwidth.0);
    if !Around::new(site, params, a).harmonics(visit) {
        return false;
    }
    if params.max_emitters < 2 || max_order < 3 {
        return true;
    }
    let f0 = params.target.0;
    let base = params.rx_bandwidth.0 + 2 * params.tolerance.0;
    for ka in [2i64, -2] {
        for kb in [1i64, -1] {
            // positions whose 2·kb·f lies in [t − w, t + w]
            let t = 2 * (f0 - ka * fa);
            let w = 2 * ba + max_bw + base;
            let (mm, t) = if kb > 0 { (kb, t) } else { (-kb, -t) };
            let lo = sorted.partition_point(|&i| 2 * mm * carriers[i].freq.0 < t - w);
            let hi = sorted.partition_point(|&i| 2 * mm * carriers[i].freq.0 <= t + w);
            for &b in &sorted[lo..hi.max(lo)] {
                if b == a {
                    continue;
                }
                let f = ka * fa + kb * carriers[b].freq.0;
                let bw = 2 * ba + carriers[b].bandwidth.0;
                if !params.hits(Hz(f), Hz(bw)) {
                    continue;
                }
                if !partner(b) {
                    *skipped = true;
                    continue;
                }
                if !visit(Product::new(&[term(a, ka), term(b, kb)], Hz(f))) {
                    return false;
                }
            }
        }
    }
    true
}

/// The in-channel level of the K-th candidate, where it bounds everything after it: a
/// levelled candidate neither implausible nor away from the fix.
fn kth_level(best: &mut Best) -> Option<f64> {
    best.kth()
        .filter(|c| !c.implausible && !c.away_from_fix)
        .and_then(|c| c.breakdown.map(|b| b.in_channel_dbm))
}

/// Each emitter's drive bound at the junction (dBm): the far-field strength of its ERP at
/// the least slant distance the normals' chord allows (or λ/2π where that is farther), which the
/// near-field rule only lowers ([`crate::level`]); worked out when first asked for.
struct Drives<'a> {
    site: &'a Site,
    model: &'a LevelModel,
    at: Option<[f64; 3]>,
    /// The drive of 0 dBm ERP at 1 m, dBm.
    unit_dbm: f64,
    /// NaN where not yet worked out, −∞ where the emitter has no level.
    known: Vec<std::cell::Cell<f64>>,
}

impl<'a> Drives<'a> {
    fn new(site: &'a Site, model: &'a LevelModel, at: Option<[f64; 3]>) -> Self {
        let n = if at.is_some() {
            site.emitters().len()
        } else {
            0
        };
        Drives {
            site,
            model,
            at,
            unit_dbm: coupled_power_dbm(
                field_strength_dbuv_m(DIPOLE_GAIN_DBI, 1.0),
                model.coupling_aperture_m2,
            ),
            known: vec![std::cell::Cell::new(f64::NAN); n],
        }
    }

    /// Emitter `i`'s drive bound (`None` without an ERP, a position or a junction).
    fn get(&self, i: usize) -> Option<f64> {
        let at = self.at?;
        let known = self.known[i].get();
        if !known.is_nan() {
            return (known > f64::NEG_INFINITY).then_some(known);
        }
        let drive = self.work_out(i, at);
        self.known[i].set(drive.unwrap_or(f64::NEG_INFINITY));
        drive
    }

    fn work_out(&self, i: usize, at: [f64; 3]) -> Option<f64> {
        let e = &self.site.emitters()[i];
        let erp = e.erp_dbm?;
        let g = ground_for_chord(&self.site.index.normals[i]?, &at);
        let h = self.model.junction_height_m;
        let dh = e.height_m.unwrap_or(h) - h;
        let reactive = wavelength_m(e.freq.0.max(1) as f64) / (2.0 * std::f64::consts::PI);
        let d2 = (g * g + dh * dh).max(reactive * reactive);
        Some(self.unit_dbm + erp - 10.0 * d2.log10())
    }

    /// A bound on the drive of every emitter of a node of the site's tree: the far-field
    /// strength of its strongest ERP at its least distance, or at λ/2π of its highest
    /// carrier where that is farther.
    fn bound(&self, r: &Reach) -> f64 {
        if r.max_erp_dbm == f64::NEG_INFINITY {
            return f64::NEG_INFINITY;
        }
        if r.max_freq_hz <= 0 {
            return f64::INFINITY;
        }
        let reactive = wavelength_m(r.max_freq_hz as f64) / (2.0 * std::f64::consts::PI);
        self.unit_dbm + r.max_erp_dbm - 20.0 * r.ground_m.max(reactive).log10() + BOUND_MARGIN_DB
    }
}

/// An emitter taken, in the frequency order of those taken.
struct Indexed {
    freq: i64,
    drive: f64,
    /// Its place in the drive order.
    place: u32,
    emitter: u32,
}

/// The emitters of a site's tree in falling drive, as far as they have been taken.
struct Taken<'s> {
    stream: Box<dyn Iterator<Item = (f64, usize)> + 's>,
    /// `(drive, emitter)`, strongest first.
    seq: Vec<(f64, usize)>,
    /// Each emitter's place in `seq` (`u32::MAX` before it is taken).
    place: Vec<u32>,
    done: bool,
    /// The first `indexed` taken, by frequency.
    by_freq: Vec<Indexed>,
    indexed: usize,
}

impl Taken<'_> {
    /// Takes the next emitter; false once none is left.
    fn more(&mut self) -> bool {
        if self.done {
            return false;
        }
        match self.stream.next() {
            Some((d, i)) => {
                self.place[i] = self.seq.len() as u32;
                self.seq.push((d, i));
                true
            }
            None => {
                self.done = true;
                false
            }
        }
    }

    /// Whether every emitter of drive `need` or more is among the first `indexed`.
    fn covers(&self, need: f64) -> bool {
        (self.done && self.indexed == self.seq.len())
            || (self.indexed > 0 && self.seq[self.indexed - 1].0 < need)
    }

    /// Takes every emitter of drive `need` or more and puts those taken in frequency
    /// order, unless that would take more than `pool`: false then.
    fn reach(&mut self, site: &Site, need: f64, pool: usize) -> bool {
        if self.covers(need) {
            return true;
        }
        while !self.seq.last().is_some_and(|&(d, _)| d < need) {
            if self.seq.len() >= pool {
                return false;
            }
            if !self.more() {
                break;
            }
        }
        // at least twice as many each time: the order is made anew
        let target = (2 * self.indexed).min(pool);
        while self.seq.len() < target && self.more() {}
        let carriers = site.carriers();
        self.by_freq = self
            .seq
            .iter()
            .enumerate()
            .map(|(pos, &(drive, i))| Indexed {
                freq: carriers[i].freq.0,
                drive,
                place: pos as u32,
                emitter: i as u32,
            })
            .collect();
        self.by_freq.sort_unstable_by_key(|e| (e.freq, e.place));
        self.indexed = self.seq.len();
        true
    }

    /// Puts in `out` the `(drive, emitter)` of every emitter after place `after` of the
    /// drive order whose drive is `need` or more and whose frequency f has 2·k·f in
    /// [t − w, t + w]: from those taken where they hold every such emitter (within
    /// `pool`), else from all. Returns whether any emitter may have been left out.
    #[allow(clippy::too_many_arguments)]
    fn window(
        &mut self,
        site: &Site,
        drives: &Drives,
        pool: usize,
        need: f64,
        (t, w, k): (i64, i64, i64),
        after: usize,
        out: &mut Vec<(f64, usize)>,
    ) -> bool {
        out.clear();
        if need == f64::INFINITY {
            return true;
        }
        if self.reach(site, need, pool) {
            for e in &self.by_freq[window_of(&self.by_freq, |e| e.freq, t, w, k)] {
                if e.place as usize > after && e.drive >= need {
                    out.push((e.drive, e.emitter as usize));
                }
            }
        } else {
            let (sorted, freq) = (&site.index.by_freq, &site.index.freq_sorted);
            for pos in window_of(freq, |&f| f, t, w, k) {
                let i = sorted[pos];
                // one not yet taken comes after every one taken
                let place = self.place[i];
                if !site.index.levelled[i] || (place != u32::MAX && place as usize <= after) {
                    continue;
                }
                if let Some(d) = drives.get(i).filter(|&d| d >= need) {
                    out.push((d, i));
                }
            }
        }
        need > f64::NEG_INFINITY
    }
}

/// The largest junction level of a product of each order less α·n times the drive its
/// emitters share at most: `(constant, n)` for each order (the receiver at the junction).
fn junction_tops(m: &LevelModel, params: &SearchParams, path_db: f64) -> Vec<(f64, f64)> {
    let form_max = form_max(params);
    (2..form_max.len())
        .filter(|&order| form_max[order] > f64::NEG_INFINITY)
        .map(|order| {
            let n = order as f64;
            let c = m.im3_dbm + form_max[order]
                - m.order_step_db * (n - 3.0)
                - if order % 2 == 0 {
                    m.even_order_penalty_db
                } else {
                    0.0
                }
                - m.drive_exponent * n * m.reference_tone_dbm
                - path_db;
            (c, n)
        })
        .collect()
}

/// The largest form weight of each order (indexed by the order), over the shapes the
/// search makes (−∞ where it makes none).
fn form_max(params: &SearchParams) -> Vec<f64> {
    let max_order = params.max_order.min(MAX_ORDER);
    let max_emitters = params.max_emitters.clamp(1, 3) as usize;
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
    form_max
}

/// What the search in drive order found and settled.
struct Pass {
    /// The K-th candidate has a level that bounds everything after it.
    settled: bool,
    /// Nothing was skipped.
    complete: bool,
    found: usize,
    kept: usize,
}

/// The products whose emitters all have a level, searched in falling drive of their
/// strongest emitter (module docs, "Drive order"), offered to `best` through `offer`.
#[allow(clippy::too_many_arguments)]
fn by_drive<'r, 'a>(
    site: &Site,
    query: &Query,
    at: [f64; 3],
    drives: &Drives,
    ranker: &'r Ranker<'a>,
    k: usize,
    best: &mut Best<'r, 'a>,
    over: &std::cell::Cell<bool>,
    offer: &mut dyn FnMut(&mut Best<'r, 'a>, &mut usize, &mut usize, Product) -> bool,
) -> Pass {
    let m = &query.model;
    let params = &query.params;
    let n = site.emitters().len();
    let a = m.drive_exponent;
    let path_db = 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi;
    let tops = junction_tops(m, params, path_db);
    // the strongest level of a product none of whose emitters drives above `d`
    let top_at = |d: f64| {
        tops.iter()
            .map(|&(c, order)| c + a * order * d)
            .fold(f64::NEG_INFINITY, f64::max)
            + BOUND_MARGIN_DB
    };
    let mut taken = Taken {
        stream: Box::new(
            site.index
                .tree
                .best_first(at, |i| drives.get(i), |r| drives.bound(r)),
        ),
        seq: Vec::new(),
        place: vec![u32::MAX; n],
        done: false,
        by_freq: Vec::new(),
        indexed: 0,
    };
    let floor = Floor {
        level: std::cell::Cell::new(f64::NEG_INFINITY),
        model: m,
        path_db,
    };
    let mut pass = Pass {
        settled: false,
        complete: true,
        found: 0,
        kept: 0,
    };
    // A first look at the strongest emitters' products among the strongest partners
    // gives a K-th level that the search need not look below.
    while taken.seq.len() < FIRST_LOOK && taken.more() {}
    let lead = taken.seq.len();
    let mut look = Best::new(ranker, k);
    let (mut f, mut kk) = (0usize, 0usize);
    for p in 0..lead.min(STRONG) {
        let x = taken.seq[p].1;
        let place = &taken.place;
        let open = |y: usize| place[y] != u32::MAX && (place[y] as usize) > p;
        let ys = &taken.seq[p + 1..lead];
        search_with(site, x, &open, ys, params, &mut |q| {
            offer(&mut look, &mut f, &mut kk, q)
        });
        if over.get() {
            pass.found = f;
            return pass;
        }
    }
    floor
        .level
        .set(kth_level(&mut look).unwrap_or(f64::NEG_INFINITY));
    drop(look);
    let mut stopped = false;
    let mut skipped = false;
    let mut p = 0;
    loop {
        if p == taken.seq.len() && !taken.more() {
            break;
        }
        let dx = taken.seq[p].0;
        if top_at(dx) < floor.level.get() {
            // no product of this emitter with weaker ones, nor of any weaker, can reach it
            stopped = true;
            break;
        }
        search_after(
            site,
            &mut taken,
            p,
            (n / 2).clamp(FIRST_LOOK + 16, POOL),
            drives,
            params,
            &floor,
            &mut skipped,
            &mut |q| {
                let go = offer(best, &mut pass.found, &mut pass.kept, q);
                // what is found raises the floor: it holds K candidates above it
                if let Some(l) = best.kth_level_held() {
                    if l > floor.level.get() {
                        floor.level.set(l);
                    }
                }
                go
            },
        );
        if over.get() {
            return pass;
        }
        p += 1;
    }
    pass.settled = kth_level(best).is_some();
    pass.complete = !stopped && !skipped;
    pass
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
    let ranker = Ranker::lazy(emitters, carriers, &query.params, &inputs);
    let narrow = |p: &Product| {
        query
            .coefficients
            .iter()
            .all(|&(e, kk)| p.coefficient_of(e).unsigned_abs() == kk)
            && query
                .centred_within
                .is_none_or(|r| p.offset(query.params.target).0.abs() <= r.0)
    };
    // The candidates the lists may hold within the memory budget.
    let cap = usize::try_from(site.memory_budget() / BYTES_PER_CANDIDATE).unwrap_or(usize::MAX);
    let over = std::cell::Cell::new(false);
    let mut found = 0usize;
    let mut kept = 0usize;
    let mut complete = true;
    let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
    let rest = |m: Mechanism| !own(m);
    let m = &query.model;
    let sorted = &site.index.by_freq[..];
    // Upper bounds on each emitter's drive at the junction, from lower bounds on its
    // distance: the exact field is worked out only for the emitters of the candidates
    // weighed.
    let at = query.junction.map(crate::nearby::normal);
    let drives = Drives::new(site, m, at);
    let mut best = Best::new(&ranker, k);
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
            if best.held.len() > cap {
                over.set(true);
            }
        }
        !over.get()
    };
    let fresh = |strong: &[Candidate]| {
        let mut b = Best::new(&ranker, k);
        for c in strong {
            b.place(*c);
        }
        b
    };
    let prunable =
        !ranker.receiver_modelled() && m.drive_exponent >= 0.0 && m.drive_exponent.is_finite();
    // products of these emitters were searched whole, apart
    let mut strong = vec![false; n];
    if query.logbook.is_some() {
        let all: Vec<usize> = (0..n).collect();
        search_among(carriers, &all, query, 2..=MAX_ORDER, &mut |p| {
            offer(&mut best, &mut found, &mut kept, p)
        });
    } else {
        let mut settled = false;
        if prunable {
            if let Some(at) = at {
                let pass = by_drive(
                    site, query, at, &drives, &ranker, k, &mut best, &over, &mut offer,
                );
                (found, kept, settled) = (pass.found, pass.kept, pass.settled);
                complete = pass.complete && site.index.unlevelled == 0;
            }
        } else {
            // The receiver's own products modelled: their bound takes every carrier at
            // the receiver, so the strongest emitters at the junction have their products
            // searched whole, apart, and the others by whole sets, doubling.
            let ground: Vec<Option<f64>> = (0..n)
                .map(|i| at.and_then(|at| site.index.ground_at_least_m(i, at)))
                .collect();
            let drive: Vec<Option<f64>> = (0..n).map(|i| drives.get(i)).collect();
            let mut by_drive: Vec<(f64, usize)> = drive
                .iter()
                .enumerate()
                .filter_map(|(i, d)| d.map(|d| (d, i)))
                .collect();
            by_drive.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            if by_drive.len() > 2 * STRONG {
                for &(_, i) in &by_drive[..STRONG] {
                    strong[i] = true;
                }
            }
            let strong_count = strong.iter().filter(|s| **s).count();
            let mut strong_best = Best::new(&ranker, k);
            let (mut strong_found, mut strong_kept) = (0usize, 0usize);
            let mut excluded = vec![false; n];
            for x in (0..n).filter(|&x| strong[x]) {
                let open = |y: usize| !excluded[y];
                let ys: Vec<(f64, usize)> = sorted
                    .iter()
                    .filter(|&&y| y != x && !excluded[y])
                    .map(|&y| (drive[y].unwrap_or(f64::NEG_INFINITY), y))
                    .collect();
                search_with(site, x, &open, &ys, &query.params, &mut |p| {
                    offer(&mut strong_best, &mut strong_found, &mut strong_kept, p)
                });
                if over.get() {
                    return Err(site.over_budget(strong_found));
                }
                excluded[x] = true;
            }
            strong_best.compact();
            let strong_held = strong_best.held.clone();
            let bounds = emitter_bounds(&ranker, query, emitters, &strong, &drive, &ground);
            let mut order: Vec<usize> = (0..n)
                .filter(|&i| bounds[i] > f64::NEG_INFINITY && !strong[i])
                .collect();
            let mut ready = 0usize;
            let levelled = order.len();
            best = fresh(&strong_held);
            let mut size = levelled.min(FIRST_SET);
            while levelled > 0 && !over.get() {
                bring_forward(&mut order, &mut ready, size + 1, &bounds);
                best = fresh(&strong_held);
                (found, kept) = (0, 0);
                search_among(carriers, &order[..size], query, 2..=MAX_ORDER, &mut |p| {
                    offer(&mut best, &mut found, &mut kept, p)
                });
                if over.get() {
                    break;
                }
                if let Some(t) = kth_level(&mut best) {
                    if size == levelled || bounds[order[size]] < t {
                        settled = true;
                        complete = size + strong_count == n;
                        break;
                    }
                }
                if size == levelled {
                    break;
                }
                size = (2 * size).min(levelled);
            }
            best.absorb(&strong_best.tally);
            found += strong_found;
            kept += strong_kept;
        }
        let unlevelled = |i: usize| drives.get(i).is_none();
        if !settled && (site.index.unlevelled > 0 || at.is_none()) && n > 0 && !over.get() {
            // Products with an emitter that has no level: unlevelled, by order then offset.
            let all: Vec<usize> = (0..n).collect();
            let max_order = query.params.max_order.min(MAX_ORDER);
            for o in 2..=max_order {
                search_among(carriers, &all, query, o..=o, &mut |p| {
                    if p.terms().any(|t| unlevelled(t.emitter))
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
        if !over.get() {
            complete &= own_products(site, query, &ranker, &narrow, at, &mut best, cap, &over);
        }
    }
    if over.get() {
        return Err(site.over_budget(found));
    }
    best.compact();
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

/// Offers to `best` the candidates made in the transmitters' own output stages (a
/// harmonic, or 2·f_A ± f_B made in A) that can rank among its first K: emitters are
/// taken by their bound ([`OwnModel`]), strongest first from the site's tree (those
/// without a position last), until the bound falls below the K-th candidate held; a
/// partner B is skipped when its ERP at the least distance between the antennas cannot
/// lift the product to the K-th. Returns whether nothing was skipped.
#[allow(clippy::too_many_arguments)]
fn own_products(
    site: &Site,
    query: &Query,
    ranker: &Ranker,
    narrow: &dyn Fn(&Product) -> bool,
    at: Option<[f64; 3]>,
    best: &mut Best,
    cap: usize,
    over: &std::cell::Cell<bool>,
) -> bool {
    let (emitters, carriers) = (site.emitters(), site.carriers());
    let n = emitters.len();
    let m = &query.model;
    let height = |i: usize| emitters[i].height_m.unwrap_or(m.junction_height_m);
    let slant = |i: usize| {
        at.and_then(|at| site.index.ground_at_least_m(i, at))
            .map(|g| slant_distance_m(g, height(i), m.junction_height_m))
    };
    let bounds = OwnModel::new(site, query);
    let placed: Box<dyn Iterator<Item = (f64, usize)>> = match at {
        Some(at) => Box::new(site.index.tree.best_first(
            at,
            |i| slant(i).map(|s| bounds.bound(emitters[i].erp_dbm, s)),
            |r| bounds.node_bound(r),
        )),
        None => Box::new(std::iter::empty()),
    };
    let unplaced: Box<dyn Iterator<Item = usize>> = match at {
        Some(_) => Box::new(site.index.unplaced.iter().copied()),
        None => Box::new(0..n),
    };
    let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
    let mut complete = true;
    let mut scratch = Vec::with_capacity(2);
    let mut t = kth_level(best);
    for (bound, a) in placed.chain(unplaced.map(|i| (f64::NEG_INFINITY, i))) {
        if t.is_some_and(|t| bound < t) {
            // every emitter left is bounded below the K-th
            return false;
        }
        let path = slant(a).map_or(f64::INFINITY, |s| bounds.path_db(s));
        let partner = |b: usize| -> bool {
            let Some(t) = t else { return true };
            // unlevelled candidates follow the K-th
            let (Some(erp), Some(at)) = (emitters[b].erp_dbm, site.index.normals[a]) else {
                return false;
            };
            let Some(g) = site.index.ground_at_least_m(b, at) else {
                return false;
            };
            let d = slant_distance_m(g, height(a), height(b));
            m.transmitter_im_eirp_dbm(erp, carriers[b].freq.0 as f64, d) - path + BOUND_MARGIN_DB
                >= t
        };
        let mut skipped = false;
        let mut offered = false;
        search_own(site, a, &query.params, &partner, &mut skipped, &mut |p| {
            if narrow(&p) {
                scratch.clear();
                ranker.evaluate_only(&p, &mut scratch, &own);
                for c in scratch.drain(..) {
                    best.offer(c);
                    offered = true;
                }
                if best.held.len() > cap {
                    over.set(true);
                }
            }
            !over.get()
        });
        complete &= !skipped;
        if over.get() {
            return false;
        }
        if offered {
            t = kth_level(best);
        }
    }
    complete
}
