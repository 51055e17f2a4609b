//! The partners of an emitter found by their frequency, each skipped when its drive
//! cannot lift the product to the K-th level (module docs of [`super`], "Drive order").

use super::*;

/// What the search may skip: products whose junction level cannot reach `level` (dBm) at
/// the emitters' drives (the receiver's own products not modelled).
pub(super) struct Floor<'a> {
    /// Raised as the search finds better: the K-th level of what it has found.
    pub(super) level: std::cell::Cell<f64>,
    pub(super) model: &'a LevelModel,
    /// The path from the junction to the receiver at it, dB.
    pub(super) path_db: f64,
}

impl Floor<'_> {
    /// The junction level's bound less the drive terms: Σ α·|kᵢ|·Pᵢ is added by the caller.
    pub(super) fn constant(&self, ks: &[i64]) -> f64 {
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
pub(super) fn window_of<T>(
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
pub(super) fn signed(total: i64) -> Vec<i64> {
    (1..=total).flat_map(|k| [k, -k]).collect()
}

/// The channel and one emitter x, for the searches of x's products: where a partner's
/// frequency must lie, and whether a product lands.
pub(super) struct Around<'a> {
    pub(super) carriers: &'a [Carrier],
    pub(super) params: &'a SearchParams,
    pub(super) x: usize,
    pub(super) fx: i64,
    pub(super) bx: i64,
    /// The channel's centre, Hz.
    pub(super) f0: i64,
    /// The channel's width and twice the tolerance, Hz.
    pub(super) base: i64,
    /// The widest carrier of the site, Hz.
    pub(super) max_bw: i64,
    pub(super) max_order: i64,
    pub(super) max_emitters: u32,
}

impl<'a> Around<'a> {
    pub(super) fn new(site: &'a SiteView<'a>, params: &'a SearchParams, x: usize) -> Self {
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
    pub(super) fn harmonics(&self, visit: &mut dyn FnMut(Product) -> bool) -> bool {
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
    pub(super) fn window(&self, kx: i64, known: Option<(i64, usize)>, k: i64) -> (i64, i64) {
        let (mut t, mut w) = (self.f0 - kx * self.fx, kx.abs() * self.bx);
        if let Some((ky, y)) = known {
            t -= ky * self.carriers[y].freq.0;
            w += ky.abs() * self.carriers[y].bandwidth.0;
        }
        (2 * t, w + k.abs() * self.max_bw + self.base)
    }

    /// Hands kx·x + Σ kᵢ·yᵢ to `visit` when it lands; false once it returns false.
    pub(super) fn offer(
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
pub(super) fn term(emitter: usize, coefficient: i64) -> Term {
    Term {
        emitter,
        coefficient: coefficient as i32,
    }
}

/// Hands every product of the channel that involves emitter `x` and otherwise only
/// emitters that `open` accepts (never `x`) to `visit`, each once, until it returns false.
/// The partners of three-emitter products are among `ys` (`(drive, emitter)`, the open
/// ones that may take part).
pub(super) fn search_with(
    site: &SiteView<'_>,
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

/// Hands every product of the channel that involves the emitter at place `p` of the drive
/// order and otherwise only emitters after it to `visit`, each once, until it returns
/// false, skipping what the `floor` allows (noted in `skipped`): the partners are found
/// by their frequency among the emitters taken (up to `pool` of them) or, past that, among
/// all.
#[allow(clippy::too_many_arguments)]
pub(super) fn search_after(
    site: &SiteView<'_>,
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
pub(super) fn y_cut(floor: &Floor, px: f64, max_order: i64) -> f64 {
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
pub(super) fn search_among(
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
