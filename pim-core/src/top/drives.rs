//! Each emitter's drive bound at the junction, and the search in falling drive order
//! (module docs of [`super`], "Drives without geodesics" and "Drive order").

use super::*;

/// Each emitter's drive bound at the junction (dBm): the far-field strength of its ERP at
/// the least slant distance the normals' chord allows (or λ/2π where that is farther), which the
/// near-field rule only lowers ([`crate::level`]); worked out when first asked for.
pub(super) struct Drives<'a> {
    pub(super) site: &'a SiteView<'a>,
    pub(super) model: &'a LevelModel,
    pub(super) at: Option<[f64; 3]>,
    /// The drive of 0 dBm ERP at 1 m, dBm.
    pub(super) unit_dbm: f64,
    /// NaN where not yet worked out, −∞ where the emitter has no level.
    pub(super) known: Vec<std::cell::Cell<f64>>,
}

impl<'a> Drives<'a> {
    pub(super) fn new(site: &'a SiteView<'a>, model: &'a LevelModel, at: Option<[f64; 3]>) -> Self {
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
    pub(super) fn get(&self, i: usize) -> Option<f64> {
        let at = self.at?;
        let known = self.known[i].get();
        if !known.is_nan() {
            return (known > f64::NEG_INFINITY).then_some(known);
        }
        let drive = self.work_out(i, at);
        self.known[i].set(drive.unwrap_or(f64::NEG_INFINITY));
        drive
    }

    pub(super) fn work_out(&self, i: usize, at: [f64; 3]) -> Option<f64> {
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
    pub(super) fn bound(&self, r: &Reach) -> f64 {
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
pub(super) struct Indexed {
    pub(super) freq: i64,
    pub(super) drive: f64,
    /// Its place in the drive order.
    pub(super) place: u32,
    pub(super) emitter: u32,
}

/// The emitters of a site's tree in falling drive, as far as they have been taken.
pub(super) struct Taken<'s> {
    pub(super) stream: Box<dyn Iterator<Item = (f64, usize)> + 's>,
    /// `(drive, emitter)`, strongest first.
    pub(super) seq: Vec<(f64, usize)>,
    /// Each emitter's place in `seq` (`u32::MAX` before it is taken).
    pub(super) place: Vec<u32>,
    pub(super) done: bool,
    /// The first `indexed` taken, by frequency.
    pub(super) by_freq: Vec<Indexed>,
    pub(super) indexed: usize,
}

impl Taken<'_> {
    /// Takes the next emitter; false once none is left.
    pub(super) fn more(&mut self) -> bool {
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
    pub(super) fn covers(&self, need: f64) -> bool {
        (self.done && self.indexed == self.seq.len())
            || (self.indexed > 0 && self.seq[self.indexed - 1].0 < need)
    }

    /// Takes every emitter of drive `need` or more and puts those taken in frequency
    /// order, unless that would take more than `pool`: false then.
    pub(super) fn reach(&mut self, site: &SiteView<'_>, need: f64, pool: usize) -> bool {
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
    pub(super) fn window(
        &mut self,
        site: &SiteView<'_>,
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

/// What the search in drive order found and settled.
pub(super) struct Pass {
    /// The K-th candidate has a level that bounds everything after it.
    pub(super) settled: bool,
    /// Nothing was skipped.
    pub(super) complete: bool,
    pub(super) found: usize,
    pub(super) kept: usize,
}

/// The products whose emitters all have a level, searched in falling drive of their
/// strongest emitter (module docs, "Drive order"), offered to `best` through `offer`.
#[allow(clippy::too_many_arguments)]
pub(super) fn by_drive<'r, 'a>(
    site: &SiteView<'_>,
    query: &Query,
    at: [f64; 3],
    drives: &Drives,
    ranker: &'r Ranker<'a>,
    k: usize,
    best: &mut Best<'r, 'a>,
    over: &std::cell::Cell<bool>,
    offer: &mut dyn FnMut(&mut Best<'r, 'a>, &mut usize, &mut usize, Product) -> bool,
    own_first: &mut dyn FnMut(&mut Best<'r, 'a>, f64),
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
    // The transmitters' own products, searched before the rest: where they lead (a
    // receiver away from every tower, a junction far outside the list) their K-th level
    // bounds the junction's products far above the first look's. K candidates will be
    // held at or above the first look's K-th level, which bounds them in turn.
    own_first(best, floor.level.get());
    if over.get() {
        return pass;
    }
    if let Some(l) = kth_level(best) {
        floor.level.set(floor.level.get().max(l));
    }
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
