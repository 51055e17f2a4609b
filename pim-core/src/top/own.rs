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
/// skips a partner `b` for which `partner` is false, noting in `skipped` that it did.
pub(super) fn search_own(
    site: &SiteView<'_>,
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

/// Offers to `best` the candidates made in the transmitters' own output stages (a
/// harmonic, or 2·f_A ± f_B made in A) that can rank among its first K: emitters are
/// taken by their bound ([`OwnModel`]), strongest first from the site's tree (those
/// without a position last), until the bound falls below the K-th candidate held; a
/// partner B is skipped when its ERP at the least distance between the antennas cannot
/// lift the product to the K-th. Returns whether nothing was skipped.
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
