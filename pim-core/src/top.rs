//! The first K candidates of an explanation in memory bounded by K and the emitters,
//! never by the number of products, and equal to the first K of the full listing.
//!
//! **Bounded list.** Candidates are offered one at a time to a list that keeps the best
//! K in the ranking order of [`crate::rank`] (at most 2K + 64 held between compactions);
//! everything is counted as it passes.
//!
//! **Exact bound.** Every mechanism's level is non-decreasing in each emitter's drive
//! ([`crate::level`], "Bound for pruning"), and the channel fraction is at most 1. So
//! for each emitter j an upper bound hⱼ on the in-channel level of any junction or
//! receiver candidate whose product involves j follows from j's own drive with every
//! other emitter at the strongest drive found: the junction law at each order with the
//! largest form weight, the receiver's own product from the strongest inputs.
//!
//! **Drives without geodesics.** The drive never rises with the distance, so each
//! emitter's drive is bounded from a lower bound on its distance to the junction: along
//! any path on the ellipsoid the normal turns at most by the length over the smallest
//! radius of curvature (b²/a), so the geodesic is at least b²/a times the angle between
//! the end normals ([`crate::site`] keeps the normals). Every bound below uses these; the
//! exact field is worked out only for the emitters of the candidates weighed.
//!
//! **Strong emitters apart.** A bound that takes every partner at the strongest drive
//! found is loose when one emitter (a broadcaster near the junction) is far stronger than
//! the rest. So the [`STRONG`] emitters with the strongest drive at the junction have
//! every product they take part in searched whole, apart (each partner found by its
//! frequency window, each product once), and the bounds of the others take their partners
//! among the others only. Their products are looked at first among the [`FIRST_LOOK`]
//! emitters of strongest drive; the K-th level found there is a floor (raised as the
//! search finds K better) below which the whole search of their products skips a
//! partner (its drive bounds the level as above), and an emitter without a level. A pair
//! of partners is taken once, the stronger first: once the stronger cannot lift the
//! product to the floor with the other as strong, no weaker one can.
//!
//! **The others.** The other emitters are taken strongest hⱼ first, each with its
//! products among those taken before it (each product once, when its last emitter
//! comes), against the K-th level found as above; once the K-th levelled candidate lies
//! strictly above the bound of the next emitter, no product involving it or any later
//! one can enter the first K, and the search stops. (With the receiver's own products
//! modelled, the set doubles from 16 and is searched whole each time.)
//!
//! **Transmitters' own products.** A harmonic at its spurious limit and 2·f_A ± f_B made
//! in A's output stage are levelled from the path from A to the receiver: for each A,
//! the strongest ERP of the site at the least antenna isolation and the path at A's least
//! distance to the receiver, taken at the lowest frequency a hit can have (free-space
//! loss rises with frequency), bound them. They are searched last, strongest bound first,
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
/// whose product involves each emitter (module docs); −∞ where none can be levelled, +∞
/// where no bound holds. A transmitter's own products are listed apart, whole.
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

/// How many of the other emitters are taken one by one (each searched with those before
/// it) before the search turns to whole sets, doubling: one by one costs the square of
/// their number, worth it only while the K-th candidate settles early.
const ONE_BY_ONE: usize = 2048;

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
    /// Raised as the search finds better: the K-th level of what it has found.
    level: std::cell::Cell<f64>,
    drive: &'a [Option<f64>],
    /// The drive at each place of the site's frequency order (−∞ without one).
    by_pos: &'a [f64],
    /// The strongest drives, strongest first, with their emitters.
    strongest: &'a [(f64, usize)],
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
    site: &Site,
    x: usize,
    excluded: &[bool],
    only: Option<&[usize]>,
    partner_max: Option<f64>,
    params: &SearchParams,
    floor: Option<&Floor>,
    skipped: &mut bool,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let carriers = site.carriers();
    let sorted = &site.index.by_freq[..];
    let freq = &site.index.freq_sorted[..];
    let a = floor.map_or(0.0, |f| f.model.drive_exponent);
    let drive_of = |i: usize| floor.and_then(|f| f.drive[i]);
    let px = drive_of(x).unwrap_or(f64::NEG_INFINITY);
    // the strongest drive any partner can have
    let partner_max = floor.map_or(f64::INFINITY, |f| {
        if let Some(given) = partner_max {
            return given;
        }
        // the strongest drives lead every other
        match f.strongest.iter().find(|(_, i)| *i != x && !excluded[*i]) {
            Some(&(d, _)) => d,
            None => (0..carriers.len())
                .filter(|&i| i != x && !excluded[i])
                .filter_map(|i| f.drive[i])
                .fold(f64::NEG_INFINITY, f64::max),
        }
    });
    let max_order = params.max_order.min(MAX_ORDER) as i64;
    let max_emitters = params.max_emitters.clamp(1, 3);
    let (fx, bx) = (carriers[x].freq.0, carriers[x].bandwidth.0);
    let f0 = params.target.0;
    let base = params.rx_bandwidth.0 + 2 * params.tolerance.0;
    let max_bw = site.index.max_bw;
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
            let c = floor.map(|f| {
                (
                    f.level.get(),
                    f.constant(&[kx, ky]) + a * kx.abs() as f64 * px,
                )
            });
            for pos in window(0, t, w, ky) {
                let y = sorted[pos];
                if y == x || excluded[y] {
                    continue;
                }
                if let Some((level, c)) = c {
                    match drive_of(y) {
                        Some(py) if c + a * ky.abs() as f64 * py >= level => {}
                        // no K-th level yet: nothing is skipped
                        _ if level == f64::NEG_INFINITY => {}
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
    // The second partners worth a look: with a floor, only those whose drive can lift a
    // product of some shape to it with the third at the strongest drive left.
    let mut y_cut = f64::INFINITY;
    if let Some(f) = floor {
        for kx in signed(max_order - 2) {
            for ky in signed(max_order - kx.abs() - 1) {
                for kz in signed(max_order - kx.abs() - ky.abs()) {
                    let c = f.constant(&[kx, ky, kz]) + a * kx.abs() as f64 * px;
                    let cut = (f.level.get() - c - a * kz.abs() as f64 * partner_max)
                        / (a * ky.abs() as f64);
                    y_cut = y_cut.min(cut);
                }
            }
        }
        if y_cut.is_nan() || a <= 0.0 {
            y_cut = f64::NEG_INFINITY;
        }
        if y_cut.is_finite() {
            y_cut -= 1e-9 * (1.0 + y_cut.abs());
        }
    }
    let all: Vec<usize>;
    let places: &[usize] = match only {
        Some(p) => p,
        None => {
            all = (0..sorted.len()).collect();
            &all
        }
    };
    let ys: Vec<usize> = places
        .iter()
        .copied()
        .filter(|&pos| {
            if let Some(f) = floor {
                if f.by_pos[pos] < y_cut {
                    *skipped = true;
                    return false;
                }
            }
            let y = sorted[pos];
            y != x && !excluded[y]
        })
        .collect();
    // The third partner is one of them too, found by its frequency among them.
    let ys_freq: Vec<i64> = ys.iter().map(|&pos| freq[pos]).collect();
    let among = |from: usize, t: i64, w: i64, k: i64| -> std::ops::Range<usize> {
        let (m, t) = if k > 0 { (k, t) } else { (-k, -t) };
        let lo = from + ys_freq[from..].partition_point(|&f| 2 * m * f < t - w);
        let hi = from + ys_freq[from..].partition_point(|&f| 2 * m * f <= t + w);
        lo..hi.max(lo)
    };
    // Each pair of partners is taken once, the second before the third in `by_drive`:
    // with a floor, strongest drive first, so that the third is never stronger than the
    // second, and once a second partner cannot lift the product to the floor with a third
    // as strong, no later one can.
    let mut by_drive: Vec<usize> = (0..ys.len()).collect();
    if let Some(f) = floor {
        let mut keyed: Vec<(f64, usize)> = ys.iter().map(|&p| f.by_pos[p]).zip(0..).collect();
        keyed.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        by_drive = keyed.into_iter().map(|(_, i)| i).collect();
    }
    let mut rank = vec![0usize; ys.len()];
    for (r, &i) in by_drive.iter().enumerate() {
        rank[i] = r;
    }
    for kx in signed(max_order - 2) {
        for ky in signed(max_order - kx.abs() - 1) {
            for kz in signed(max_order - kx.abs() - ky.abs()) {
                let c = floor.map(|f| {
                    (
                        f.level.get(),
                        f.constant(&[kx, ky, kz]) + a * kx.abs() as f64 * px,
                    )
                });
                for &iy in &by_drive {
                    let y = sorted[ys[iy]];
                    // the level with the third partner as strong as the second
                    let with_y = match (c, drive_of(y)) {
                        (None, _) => None,
                        (Some((level, c)), Some(dy)) => {
                            let c = c + a * ky.abs() as f64 * dy;
                            if c + a * kz.abs() as f64 * dy.min(partner_max) < level {
                                *skipped = true;
                                break;
                            }
                            Some((level, c))
                        }
                        (Some((level, _)), None) if level == f64::NEG_INFINITY => {
                            Some((level, f64::NEG_INFINITY))
                        }
                        (Some(_), None) => {
                            *skipped = true;
                            continue;
                        }
                    };
                    let (fy, by) = (carriers[y].freq.0, carriers[y].bandwidth.0);
                    let t = 2 * (f0 - kx * fx - ky * fy);
                    let w = kx.abs() * bx + ky.abs() * by + kz.abs() * max_bw + base;
                    for jz in among(0, t, w, kz) {
                        if rank[jz] <= rank[iy] {
                            continue;
                        }
                        let z = sorted[ys[jz]];
                        if let Some((level, c)) = with_y {
                            match drive_of(z) {
                                Some(dz) if c + a * kz.abs() as f64 * dz >= level => {}
                                _ if level == f64::NEG_INFINITY => {}
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

/// Bounds on the candidates made in each emitter's own output stage (module docs): for
/// each emitter, the loss of the path from it to the receiver can be no lower than
/// `path[i]` (dB), and no such candidate of it lies above `bound[i]` (dBm in the channel;
/// −∞ where none can be levelled).
struct OwnBounds {
    bound: Vec<f64>,
    path: Vec<f64>,
}

/// [`OwnBounds`] for a receiver at least `slant[i]` from each emitter.
fn own_bounds(site: &Site, query: &Query, slant: &[Option<f64>]) -> OwnBounds {
    let emitters = site.emitters();
    let m = &query.model;
    let params = &query.params;
    let max_order = params.max_order.min(MAX_ORDER);
    let max_bw = site.index.max_bw;
    // The lowest frequency a product in the channel can have: the path loss rises with it.
    let f_low = (params.target.0
        - (max_order as i64 * max_bw + params.rx_bandwidth.0 + 2 * params.tolerance.0) / 2)
        .max(1) as f64;
    let tx_im = params.max_emitters >= 2 && max_order >= 3;
    // 2·f_A ± f_B with B at the strongest ERP of the site and the least isolation
    let im_top = site.index.max_erp_dbm - m.min_antenna_isolation_db - m.tx_conversion_loss_db
        + DIPOLE_GAIN_DBI;
    let mut bound = vec![f64::NEG_INFINITY; emitters.len()];
    let mut path = vec![f64::INFINITY; emitters.len()];
    for (i, e) in emitters.iter().enumerate() {
        let Some(s) = slant[i] else { continue };
        let floor = free_space_loss_db(
            f_low,
            s.max(wavelength_m(f_low) / (2.0 * std::f64::consts::PI)),
        ) - m.rx_antenna_gain_dbi;
        path[i] = floor;
        let mut top = f64::NEG_INFINITY;
        if max_order >= 2 {
            if let Some(erp) = e.erp_dbm {
                top = m.spurious_limit_eirp_dbm(erp);
            }
        }
        if tx_im {
            top = top.max(im_top);
        }
        let b = top - floor + BOUND_MARGIN_DB;
        bound[i] = if b.is_nan() { f64::INFINITY } else { b };
    }
    OwnBounds { bound, path }
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
    let term = |emitter: usize, coefficient: i64| Term {
        emitter,
        coefficient: coefficient as i32,
    };
    for k in 2..=max_order {
        let f = k * fa;
        if params.hits(Hz(f), Hz(k * ba)) && !visit(Product::new(&[term(a, k)], Hz(f))) {
            return false;
        }
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
    // Lower bounds on each emitter's distance to the junction (and the receiver at it),
    // so upper bounds on its drive there: the exact field is worked out only for the
    // emitters of the candidates weighed.
    let at = query.junction.map(crate::site::normal);
    let ground: Vec<Option<f64>> = match at {
        Some(at) => (0..n)
            .map(|i| site.index.ground_at_least_m(i, at))
            .collect(),
        None => vec![None; n],
    };
    let drive: Vec<Option<f64>> = (0..n)
        .map(|i| {
            let g = ground[i]?;
            m.incidence_over_ground(&emitters[i], g)
                .map(|inc| inc.incident_dbm)
        })
        .collect();
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
    if query.logbook.is_some() {
        let all: Vec<usize> = (0..n).collect();
        search_among(carriers, &all, query, 2..=MAX_ORDER, &mut |p| {
            offer(&mut best, &mut found, &mut kept, p)
        });
    } else {
        // The strongest emitters at the junction: their products are searched whole.
        let mut strong = vec![false; n];
        let mut by_drive: Vec<(f64, usize)> = drive
            .iter()
            .enumerate()
            .filter_map(|(i, d)| d.map(|d| (d, i)))
            .collect();
        let by_cmp = |a: &(f64, usize), b: &(f64, usize)| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1));
        if by_drive.len() > FIRST_LOOK {
            by_drive.select_nth_unstable_by(FIRST_LOOK - 1, by_cmp);
            by_drive.truncate(FIRST_LOOK);
        }
        by_drive.sort_by(by_cmp);
        if by_drive.len() > 2 * STRONG {
            for &(_, i) in &by_drive[..STRONG] {
                strong[i] = true;
            }
        }
        let strong_count = strong.iter().filter(|s| **s).count();
        let mut strong_best = Best::new(&ranker, k);
        let (mut strong_found, mut strong_kept) = (0usize, 0usize);
        let mut strong_skipped = false;
        let prunable =
            !ranker.receiver_modelled() && m.drive_exponent >= 0.0 && m.drive_exponent.is_finite();
        let mut floor = None;
        let by_pos: Vec<f64> = sorted
            .iter()
            .map(|&i| drive[i].unwrap_or(f64::NEG_INFINITY))
            .collect();
        if strong_count > 0 {
            // A first look among the strongest partners only gives a K-th level that the
            // whole search of the strong emitters' products need not look below.
            if prunable {
                let mut outside = vec![true; n];
                for &(_, i) in by_drive.iter().take(FIRST_LOOK) {
                    outside[i] = false;
                }
                let mut look = Best::new(&ranker, k);
                let (mut f, mut kk, mut skipped) = (0usize, 0usize, false);
                let mut excluded = outside.clone();
                let mut places: Vec<usize> = by_drive
                    .iter()
                    .take(FIRST_LOOK)
                    .map(|&(_, i)| site.index.place[i])
                    .collect();
                places.sort_unstable();
                for x in (0..n).filter(|&x| strong[x]) {
                    search_with(
                        site,
                        x,
                        &excluded,
                        Some(&places),
                        None,
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
                // without K levelled there, the floor starts at −∞ and rises as the
                // search finds K
                let level = kth_level(&mut look).unwrap_or(f64::NEG_INFINITY);
                floor = Some(Floor {
                    level: std::cell::Cell::new(level),
                    drive: &drive,
                    by_pos: &by_pos,
                    strongest: &by_drive,
                    model: m,
                    path_db: 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi,
                });
            }
            let mut excluded = vec![false; n];
            for x in (0..n).filter(|&x| strong[x]) {
                search_with(
                    site,
                    x,
                    &excluded,
                    None,
                    None,
                    &query.params,
                    floor.as_ref(),
                    &mut strong_skipped,
                    &mut |p| {
                        let go = offer(&mut strong_best, &mut strong_found, &mut strong_kept, p);
                        // what is found raises the floor: it holds K candidates above it
                        if let (Some(f), Some(l)) = (&floor, strong_best.kth_level_held()) {
                            if l > f.level.get() {
                                f.level.set(l);
                            }
                        }
                        go
                    },
                );
                if over.get() {
                    return Err(site.over_budget(strong_found));
                }
                excluded[x] = true;
            }
            strong_best.compact();
        }
        let strong_held = strong_best.held.clone();
        let bounds = emitter_bounds(&ranker, query, emitters, &strong, &drive, &ground);
        let mut order: Vec<usize> = (0..n)
            .filter(|&i| bounds[i] > f64::NEG_INFINITY && !strong[i])
            .collect();
        let mut ready = 0usize;
        let levelled = order.len();
        best = fresh(&strong_held);
        let mut size = levelled.min(FIRST_SET);
        let mut settled = false;
        let mut fell_back = false;
        if levelled > 0 && prunable {
            // Emitters strongest bound first, each with its products among those before it
            // (each product once, when its last emitter comes), held against the K-th
            // level found as the strong emitters' are.
            let floor = Floor {
                level: std::cell::Cell::new(f64::NEG_INFINITY),
                drive: &drive,
                by_pos: &by_pos,
                strongest: &by_drive,
                model: m,
                path_db: 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi,
            };
            let mut outside = vec![true; n];
            let mut places: Vec<usize> = Vec::new();
            let mut partner_max = f64::NEG_INFINITY;
            let mut skipped = false;
            (found, kept) = (0, 0);
            for pos in 0..levelled {
                if pos == ONE_BY_ONE {
                    // the K-th is not settled among many: search by whole sets instead
                    fell_back = true;
                    break;
                }
                bring_forward(&mut order, &mut ready, pos + 1, &bounds);
                let x = order[pos];
                if let Some(t) = kth_level(&mut best) {
                    floor.level.set(floor.level.get().max(t));
                    if bounds[x] < t {
                        settled = true;
                        complete = false;
                        break;
                    }
                }
                search_with(
                    site,
                    x,
                    &outside,
                    Some(&places),
                    Some(partner_max),
                    &query.params,
                    Some(&floor),
                    &mut skipped,
                    &mut |p| {
                        let go = offer(&mut best, &mut found, &mut kept, p);
                        if let Some(l) = best.kth_level_held() {
                            if l > floor.level.get() {
                                floor.level.set(l);
                            }
                        }
                        go
                    },
                );
                if over.get() {
                    break;
                }
                outside[x] = false;
                let place = site.index.place[x];
                let at = places.partition_point(|&p| p < place);
                places.insert(at, place);
                partner_max = partner_max.max(drive[x].unwrap_or(f64::NEG_INFINITY));
            }
            // every levelled emitter searched: settled once the K-th has a level
            settled |= !fell_back && !over.get() && kth_level(&mut best).is_some();
            complete &= !skipped && levelled + strong_count == n;
            size = (2 * ONE_BY_ONE).min(levelled);
        }
        if levelled > 0 && !settled && !over.get() && (fell_back || !prunable) {
            complete = true;
            loop {
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
        if !over.get() {
            complete &= own_products(
                site, query, &ranker, &narrow, &ground, &mut best, cap, &over,
            );
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
/// taken by their bound ([`own_bounds`]), strongest first, until the bound falls below
/// the K-th candidate held; a partner B is skipped when its ERP at the least distance
/// between the antennas cannot lift the product to the K-th. Returns whether nothing
/// was skipped.
#[allow(clippy::too_many_arguments)]
fn own_products(
    site: &Site,
    query: &Query,
    ranker: &Ranker,
    narrow: &dyn Fn(&Product) -> bool,
    ground: &[Option<f64>],
    best: &mut Best,
    cap: usize,
    over: &std::cell::Cell<bool>,
) -> bool {
    let (emitters, carriers) = (site.emitters(), site.carriers());
    let n = emitters.len();
    let m = &query.model;
    let height = |i: usize| emitters[i].height_m.unwrap_or(m.junction_height_m);
    let slant: Vec<Option<f64>> = (0..n)
        .map(|i| ground[i].map(|g| slant_distance_m(g, height(i), m.junction_height_m)))
        .collect();
    let OwnBounds { bound, path } = own_bounds(site, query, &slant);
    let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
    let mut order: Vec<usize> = (0..n).collect();
    let mut ready = 0usize;
    let mut complete = true;
    let mut scratch = Vec::with_capacity(2);
    let mut t = kth_level(best);
    for pos in 0..n {
        bring_forward(&mut order, &mut ready, pos + 1, &bound);
        let a = order[pos];
        if t.is_some_and(|t| bound[a] < t) {
            // every emitter left is bounded below the K-th
            return false;
        }
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
            m.transmitter_im_eirp_dbm(erp, carriers[b].freq.0 as f64, d) - path[a] + BOUND_MARGIN_DB
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
