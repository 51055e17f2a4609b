//! The transmitters' own products, searched last by their bound at the receiver
//! (module docs of [`super`], "Transmitters' own products").

use super::*;

/// Bounds on the candidates made in an emitter's own output stage (module docs).
pub(super) struct OwnModel<'a> {
    pub(super) model: &'a LevelModel,
    /// The lowest frequency a product in the channel can have, Hz: the path loss rises
    /// with it.
    pub(super) f_low: f64,
    /// Harmonics are searched (order 2 and above).
    pub(super) harmonics: bool,
    /// 2·f_A ± f_B with B at the strongest ERP of the site and the least isolation, dBm
    /// EIRP (−∞ where such products are not searched).
    pub(super) im_top: f64,
}

impl<'a> OwnModel<'a> {
    pub(super) fn new(site: &SiteView<'_>, query: &'a Query) -> Self {
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
    pub(super) fn path_db(&self, slant: f64) -> f64 {
        let reactive = wavelength_m(self.f_low) / (2.0 * std::f64::consts::PI);
        free_space_loss_db(self.f_low, slant.max(reactive)) - self.model.rx_antenna_gain_dbi
    }

    /// The bound (dBm in the channel; −∞ where none can be levelled) on the candidates
    /// made in the output stage of an emitter of ERP `erp_dbm` at least `slant` metres
    /// from the receiver.
    pub(super) fn bound(&self, erp_dbm: Option<f64>, slant: f64) -> f64 {
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
    pub(super) fn node_bound(&self, r: &Reach) -> f64 {
        let erp = (r.max_erp_dbm > f64::NEG_INFINITY).then_some(r.max_erp_dbm);
        self.bound(erp, r.ground_m)
    }
}

/// Hands every product of the channel made in emitter `a`'s own output stage (its
/// harmonics, and 2·f_a ± f_b with any other emitter b) to `visit` until it returns false;
/// skips a partner `b` for which `partner` (given b and the product's frequency) is false,
/// noting in `skipped` that it did.
pub(super) fn search_own(
    site: &SiteView<'_>,
    a: usize,
    params: &SearchParams,
    partner: &dyn Fn(usize, i64) -> bool,
    skipped: &mut bool,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let (carriers, sorted) = (site.carriers(), &site.index.by_freq[..]);
    let freq = &site.index.freq_sorted[..];
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
            let lo = freq.partition_point(|&f| 2 * mm * f < t - w);
            let hi = freq.partition_point(|&f| 2 * mm * f <= t + w);
            for &b in &sorted[lo..hi.max(lo)] {
                if b == a {
                    continue;
                }
                let f = ka * fa + kb * carriers[b].freq.0;
                let bw = 2 * ba + carriers[b].bandwidth.0;
                if !params.hits(Hz(f), Hz(bw)) {
                    continue;
                }
                if !partner(b, f) {
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

/// How many emitters the transmitters' own products are searched for one at a time, by
/// their bound from the site's tree, before the rest are searched by frequency
/// ([`own_rest`]): near the receiver the bound falls fast with the distance, far from
/// every emitter it hardly falls, and a search by frequency costs a few nanoseconds per
/// partner looked at rather than a walk and a few binary searches per emitter.
pub(super) const OWN_WALK: usize = 256;

/// The rejection of `a_hz`'s output network for B's carrier at `b_hz` and the product at
/// `f_hz` (the ranking's, [`crate::level::LevelModel::tx_band_rejection_db`]), dB.
fn own_rejection_db(m: &LevelModel, a_hz: i64, b_hz: i64, f_hz: i64) -> f64 {
    m.tx_band_rejection_db(a_hz as f64, b_hz as f64)
        + m.tx_band_rejection_db(a_hz as f64, f_hz as f64)
}

/// Offers to `best` the candidates made in the transmitters' own output stages (a
/// harmonic, or 2·f_A ± f_B made in A) that can rank among its first K: emitters are
/// taken by their bound ([`OwnModel`]), strongest first from the site's tree (those
/// without a position last), until the bound falls below the K-th candidate held, or
/// below `floor` (a level K candidates will be held at or above by the search's end); a
/// partner B is skipped when its ERP at the least distance between the antennas, less the
/// output network's rejection, cannot lift the product to it. Past the first
/// [`OWN_WALK`] emitters it stops and puts in `rest` the emitters searched, for
/// [`own_rest`] to search the others by frequency. Returns whether nothing was skipped.
#[allow(clippy::too_many_arguments)]
pub(super) fn own_products(
    site: &SiteView<'_>,
    query: &Query,
    ranker: &Ranker,
    narrow: &dyn Fn(&Product) -> bool,
    at: Option<[f64; 3]>,
    best: &mut Best,
    cap: usize,
    over: &std::cell::Cell<bool>,
    floor: Option<f64>,
    rest: &mut Option<Vec<bool>>,
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
    let level = |best: &mut Best| match (kth_level(best), floor) {
        (Some(t), Some(f)) => Some(t.max(f)),
        (t, f) => t.or(f),
    };
    let mut t = level(best);
    let mut done = Vec::new();
    for (walked, (bound, a)) in placed
        .chain(unplaced.map(|i| (f64::NEG_INFINITY, i)))
        .enumerate()
    {
        if t.is_some_and(|t| bound < t) {
            // every emitter left is bounded below the K-th
            return false;
        }
        if let (Some(_), Some(_)) = (at, t) {
            if walked == OWN_WALK && bound > f64::NEG_INFINITY {
                // the rest by frequency, past those walked
                *rest = Some(done);
                return complete;
            }
        }
        if done.is_empty() {
            done = vec![false; n];
        }
        done[a] = true;
        let path = slant(a).map_or(f64::INFINITY, |s| bounds.path_db(s));
        let partner = |b: usize, f: i64| -> bool {
            let Some(t) = t else { return true };
            // unlevelled candidates follow the K-th
            let (Some(erp), Some(at)) = (emitters[b].erp_dbm, site.index.normals[a]) else {
                return false;
            };
            let Some(g) = site.index.ground_at_least_m(b, at) else {
                return false;
            };
            let d = slant_distance_m(g, height(a), height(b));
            let (fa, fb) = (carriers[a].freq.0, carriers[b].freq.0);
            m.transmitter_im_eirp_dbm(erp, fb as f64, d) - own_rejection_db(m, fa, fb, f) - path
                + BOUND_MARGIN_DB
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
            t = level(best);
        }
    }
    complete
}

/// The transmitters' own products of every placed emitter not in `done`, found by
/// frequency, offered to `best` as [`own_products`] does from the K-th level held then;
/// returns whether nothing was skipped.
#[allow(clippy::too_many_arguments)]
pub(super) fn own_rest(
    site: &SiteView<'_>,
    query: &Query,
    ranker: &Ranker,
    narrow: &dyn Fn(&Product) -> bool,
    at: [f64; 3],
    done: &[bool],
    best: &mut Best,
    cap: usize,
    over: &std::cell::Cell<bool>,
    floor: Option<f64>,
) -> bool {
    let t = match (kth_level(best), floor) {
        (Some(t), Some(f)) => t.max(f),
        (t, f) => t.or(f).unwrap_or(f64::NEG_INFINITY),
    };
    let mut sweep = OwnSweep {
        site,
        query,
        ranker,
        narrow,
        at,
        done,
        cap,
        over,
        floor,
        t,
        path: vec![f64::NAN; site.emitters().len()],
        complete: true,
    };
    sweep.run(best);
    sweep.complete
}

/// The transmitters' own products of every placed emitter not yet searched, found by
/// frequency: for each form (k·f_A for a harmonic, ±2·f_A ± f_B) the emitters are taken
/// in frequency order and the partners whose frequency lets the product land follow
/// them in a sliding window, read side by side ([`crate::nearby::Sorted`]). A partner is
/// passed over, without a geodesic or a logarithm, when its antenna lies farther from A's
/// than the least isolation that lets the strongest ERP of the site lift the product to
/// the K-th allows (the chord between the normals never exceeds the angle, which bounds
/// the ground distance: [`crate::nearby::ground_for_chord`]); the rest are bounded as in
/// the walk.
struct OwnSweep<'s, 'v, 'q, 'r> {
    site: &'s SiteView<'v>,
    query: &'q Query,
    ranker: &'s Ranker<'r>,
    narrow: &'s dyn Fn(&Product) -> bool,
    at: [f64; 3],
    /// The emitters whose products were searched already.
    done: &'s [bool],
    cap: usize,
    over: &'s std::cell::Cell<bool>,
    floor: Option<f64>,
    /// The K-th level (or the floor).
    t: f64,
    /// Each emitter's least path loss to the receiver, dB (NaN until worked out).
    path: Vec<f64>,
    /// Nothing was skipped.
    complete: bool,
}

impl OwnSweep<'_, '_, '_, '_> {
    /// Emitter `a`'s least path loss to the receiver (∞ without a position).
    fn path_of(&mut self, a: usize, bounds: &OwnModel) -> f64 {
        if self.path[a].is_nan() {
            let m = &self.query.model;
            let e = &self.site.emitters()[a];
            self.path[a] =
                self.site
                    .index
                    .ground_at_least_m(a, self.at)
                    .map_or(f64::INFINITY, |g| {
                        bounds.path_db(slant_distance_m(
                            g,
                            e.height_m.unwrap_or(m.junction_height_m),
                            m.junction_height_m,
                        ))
                    });
        }
        self.path[a]
    }

    /// Offers `p`'s own candidates; false once over the budget.
    fn offer(&mut self, best: &mut Best, p: Product, offered: &mut bool) -> bool {
        if (self.narrow)(&p) {
            let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
            let mut scratch = Vec::with_capacity(2);
            self.ranker.evaluate_only(&p, &mut scratch, &own);
            for c in scratch {
                best.offer(c);
                *offered = true;
            }
            if best.held.len() > self.cap {
                self.over.set(true);
            }
        }
        !self.over.get()
    }

    /// Raises the K-th level after an emitter whose products were offered.
    fn raise(&mut self, best: &mut Best) {
        if let Some(l) = kth_level(best) {
            self.t = self.t.max(l);
        }
        if let Some(f) = self.floor {
            self.t = self.t.max(f);
        }
    }

    fn run(&mut self, best: &mut Best) {
        let site = self.site;
        let params = &self.query.params;
        let m = &self.query.model;
        let bounds = OwnModel::new(site, self.query);
        let emitters = site.emitters();
        let by_freq = &site.index.by_freq[..];
        let freq = &site.index.freq_sorted[..];
        let sorted = &site.index.sorted[..];
        let n = by_freq.len();
        let max_order = params.max_order.min(MAX_ORDER) as i64;
        let (f0, max_bw) = (params.target.0, site.index.max_bw);
        let base = params.rx_bandwidth.0 + 2 * params.tolerance.0;
        let searchable = |a: usize| !self.done[a] && site.index.normals[a].is_some();
        // Harmonics: k·f_A lands only for f_A in a narrow range.
        for k in 2..=max_order {
            let reach = k * max_bw + base;
            let lo = freq.partition_point(|&f| 2 * (k * f - f0) < -reach);
            let hi = freq.partition_point(|&f| 2 * (k * f - f0) <= reach);
            for pa in lo..hi.max(lo) {
                let a = by_freq[pa];
                if !searchable(a) {
                    self.complete &= self.done[a];
                    continue;
                }
                let fa = freq[pa];
                if !params.hits(Hz(k * fa), Hz(k * sorted[pa].bandwidth_hz)) {
                    continue;
                }
                let Some(erp) = emitters[a].erp_dbm else {
                    // unlevelled: it follows the K-th
                    self.complete = false;
                    continue;
                };
                let bound = m.spurious_limit_eirp_bound_dbm(erp) - self.path_of(a, &bounds)
                    + BOUND_MARGIN_DB;
                if bound.is_nan() || bound < self.t {
                    self.complete = false;
                    continue;
                }
                let mut offered = false;
                if !self.offer(best, Product::new(&[term(a, k)], Hz(k * fa)), &mut offered) {
                    return;
                }
                if offered {
                    self.raise(best);
                }
            }
        }
        if params.max_emitters < 2 || max_order < 3 {
            return;
        }
        // 2·f_A ± f_B made in A: B's ERP less the least isolation and the conversion
        // loss, A's output network's rejection, the path from A.
        let top_erp = site.index.max_erp_dbm;
        let gain = -m.tx_conversion_loss_db + DIPOLE_GAIN_DBI;
        let r_min = crate::nearby::MIN_CURVATURE_RADIUS_M * (1.0 - 1e-9);
        for ka in [2i64, -2] {
            for kb in [1i64, -1] {
                // partners' positions whose 2·kb·f_B lies in [t − w, t + w], kept as A
                // moves (the window slides one way, widened by A's width)
                let (mut lo, mut hi) = (0usize, 0usize);
                for pa in 0..n {
                    let a = by_freq[pa];
                    let (fa, ba) = (freq[pa], sorted[pa].bandwidth_hz);
                    let t = 2 * (f0 - ka * fa);
                    let w = 2 * ba + max_bw + base;
                    let (mm, t) = if kb > 0 { (kb, t) } else { (-kb, -t) };
                    while lo > 0 && 2 * mm * freq[lo - 1] >= t - w {
                        lo -= 1;
                    }
                    while lo < n && 2 * mm * freq[lo] < t - w {
                        lo += 1;
                    }
                    hi = hi.max(lo);
                    while hi > lo && 2 * mm * freq[hi - 1] > t + w {
                        hi -= 1;
                    }
                    while hi < n && 2 * mm * freq[hi] <= t + w {
                        hi += 1;
                    }
                    if lo >= hi {
                        continue;
                    }
                    if !searchable(a) {
                        self.complete &= self.done[a];
                        continue;
                    }
                    // the least isolation any partner may have: beyond the distance it
                    // allows, none lifts the product to the K-th
                    let path = self.path_of(a, &bounds);
                    let iso_max = top_erp + gain - path + BOUND_MARGIN_DB - self.t;
                    if iso_max < m.min_antenna_isolation_db {
                        // no partner is near enough, whatever its frequency
                        self.complete = false;
                        continue;
                    }
                    let f_low = ((t - w) / (2 * mm)).max(1) as f64;
                    let reach_m = crate::level::SPEED_OF_LIGHT_M_S
                        / (4.0 * std::f64::consts::PI * f_low)
                        * 10f64.powf((iso_max + 2.0 * DIPOLE_GAIN_DBI) / 20.0);
                    let chord_max = (reach_m * (1.0 + 1e-9) + 1e-6) / r_min;
                    let chord2_max = chord_max * chord_max;
                    let na = sorted[pa].normal;
                    let ha = emitters[a].height_m.unwrap_or(m.junction_height_m);
                    let mut offered = false;
                    for pb in lo..hi {
                        if pb == pa {
                            continue;
                        }
                        let sb = &sorted[pb];
                        let fb = freq[pb];
                        let f = ka * fa + kb * fb;
                        if !params.hits(Hz(f), Hz(2 * ba + sb.bandwidth_hz)) {
                            continue;
                        }
                        let nb = &sb.normal;
                        let chord2 = (na[0] - nb[0]).powi(2)
                            + (na[1] - nb[1]).powi(2)
                            + (na[2] - nb[2]).powi(2);
                        if sb.erp_dbm == f64::NEG_INFINITY || chord2 > chord2_max {
                            // unlevelled (it follows the K-th), or too far
                            self.complete = false;
                            continue;
                        }
                        let b = by_freq[pb];
                        let g =
                            crate::nearby::ground_for_angle(crate::nearby::angle_between(&na, nb));
                        let hb = emitters[b].height_m.unwrap_or(m.junction_height_m);
                        let d = slant_distance_m(g, ha, hb);
                        let level = m.transmitter_im_eirp_dbm(sb.erp_dbm, fb as f64, d)
                            - own_rejection_db(m, fa, fb, f)
                            - path
                            + BOUND_MARGIN_DB;
                        if level < self.t {
                            self.complete = false;
                            continue;
                        }
                        let p = Product::new(&[term(a, ka), term(b, kb)], Hz(f));
                        if !self.offer(best, p, &mut offered) {
                            return;
                        }
                    }
                    if offered {
                        self.raise(best);
                    }
                }
            }
        }
    }
}
