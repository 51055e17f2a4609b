//! The explain pipeline as one call: a [`Site`] owns the emitters (and so the index
//! space every product, candidate and coefficient refers to); a [`Query`] on it gives an
//! [`Explanation`]: the products that land on the channel (the search of
//! [`crate::intermod`]), narrowed to a power step's coefficients, ranked by
//! [`crate::rank`], and re-rankable with the junction at another point (a fix).
//!
//! ```
//! use pim_core::{Emitter, Hz, Query, Site};
//!
//! // 2·152.84 − 159.34 = 146.34 MHz
//! let site = Site::new(vec![
//!     Emitter::new("SKP-152", Hz(152_840_000), Hz(16_000)),
//!     Emitter::new("FIRE-DSP", Hz(159_340_000), Hz(11_250)),
//! ]);
//! let answer = site.explain(&Query::new(Hz(146_340_000)));
//! // one product, which a corroded joint or either transmitter's output stage may make
//! assert_eq!(answer.products.len(), 1);
//! let first = &answer.ranking.candidates[0];
//! assert_eq!(site.formula(&first.product), "2·SKP-152 − FIRE-DSP");
//! assert_eq!(first.product.order(), 3);
//! ```

use crate::emitter::{carriers, Carrier, Emitter};
use crate::freq::Hz;
use crate::geo::GeoPoint;
use crate::intermod::{find_products, retain_coefficients, Hits, Product, SearchParams};
use crate::level::LevelModel;
use crate::onair::Logbook;
use crate::rank::{formula, rank_candidates, HeardLevel, Placement, RankInputs, Ranking};

/// The emitters of a site and their carriers, indexed alike.
#[derive(Clone, Debug, Default)]
pub struct Site {
    emitters: Vec<Emitter>,
    carriers: Vec<Carrier>,
}

impl Site {
    /// A site of `emitters`; their order is the index space of every result.
    pub fn new(emitters: Vec<Emitter>) -> Site {
        let carriers = carriers(&emitters);
        Site { emitters, carriers }
    }

    /// The emitters, in the order given.
    pub fn emitters(&self) -> &[Emitter] {
        &self.emitters
    }

    /// Each emitter's carrier (frequency and occupied width), by emitter index.
    pub fn carriers(&self) -> &[Carrier] {
        &self.carriers
    }

    /// The index of the emitter with this id.
    pub fn index_of(&self, id: &str) -> Option<usize> {
        self.emitters.iter().position(|e| e.id == id)
    }

    /// A product written with the emitters' ids, such as `2·SKP-152 − FIRE-DSP`.
    pub fn formula(&self, product: &Product) -> String {
        formula(product, &self.emitters)
    }

    /// Searches, narrows and ranks (module docs). With [`Query::limit`] only the first K
    /// candidates are kept, in memory bounded by K and the emitters.
    pub fn explain(&self, query: &Query) -> Explanation {
        // The pruned search ranks with the junction at the receiver and no calibration;
        // with a receiver elsewhere or heard levels the whole listing is ranked.
        if let (Some(k), true, None) = (query.limit, query.heard.is_empty(), query.receiver) {
            return crate::top::explain_top(self, query, k);
        }
        let Hits {
            mut products,
            co_channel,
        } = find_products(&self.carriers, &query.params);
        let found = products.len();
        retain_coefficients(&mut products, &query.coefficients);
        let kept = products.len();
        let ranking = rank_candidates(
            products.clone(),
            &self.emitters,
            &query.params,
            &RankInputs {
                placement: Placement {
                    junction: query.junction,
                    receiver: query.receiver,
                    fix_radius_m: None,
                },
                model: query.model,
                logbook: query.logbook.as_ref(),
                heard: &query.heard,
            },
        );
        Explanation {
            params: query.params,
            model: query.model,
            heard: query.heard.clone(),
            products,
            co_channel,
            found,
            kept,
            limit: None,
            complete: true,
            ranking,
        }
    }
}

/// What to explain: the channel and the search bounds, where the junction is assumed,
/// the level model, and the evidence that narrows or orders the list.
#[derive(Clone, Debug)]
pub struct Query {
    /// The channel heard and the search bounds.
    pub params: SearchParams,
    /// Where the junction is assumed (the receiver site, or a fix); without it, no levels.
    pub junction: Option<GeoPoint>,
    /// Where the receiver is, when not at the junction.
    pub receiver: Option<GeoPoint>,
    /// Levels heard, to calibrate the model against (empty: levels relative to the first).
    pub heard: Vec<HeardLevel>,
    /// The level model.
    pub model: LevelModel,
    /// Keep only products in which emitter `i` carries |k| = K (a power step's answer).
    pub coefficients: Vec<(usize, u32)>,
    /// On-air and listening logs, ranked before the level when given.
    pub logbook: Option<Logbook>,
    /// Keep only the first K candidates (equal to the first K of the full ranking), in
    /// memory bounded by K and the emitters; `None` keeps every candidate.
    pub limit: Option<usize>,
}

impl Query {
    /// A query for a carrier heard at `target` with the default bounds: a 12.5 kHz
    /// channel, orders up to 7, products of up to three emitters, no junction location.
    pub fn new(target: Hz) -> Query {
        Query {
            params: SearchParams {
                target,
                ..SearchParams::default()
            },
            junction: None,
            receiver: None,
            heard: Vec::new(),
            model: LevelModel::default(),
            coefficients: Vec::new(),
            logbook: None,
            limit: None,
        }
    }
}

/// The answer to a [`Query`].
#[derive(Clone, Debug)]
pub struct Explanation {
    /// The search bounds used.
    pub params: SearchParams,
    /// The level model used.
    pub model: LevelModel,
    /// The heard levels the ranking was calibrated against.
    pub heard: Vec<HeardLevel>,
    /// The products kept after narrowing, in search order; with a limit, only those of
    /// the candidates kept, in ranking order.
    pub products: Vec<Product>,
    /// Emitters whose own carrier lies in the channel (co-channel, not a product).
    pub co_channel: Vec<usize>,
    /// Products the search found before the coefficients narrowed them (with a limit,
    /// those it examined: see `complete`).
    pub found: usize,
    /// Of those, the products the coefficients kept.
    pub kept: usize,
    /// The limit the candidates were cut to.
    pub limit: Option<usize>,
    /// Whether every product landing in the channel was counted in `found`, `kept` and
    /// [`Ranking::total`]. With a limit, products of emitters (or of orders) that provably
    /// rank below the K-th candidate are not searched, and are not counted.
    pub complete: bool,
    /// The products ranked.
    pub ranking: Ranking,
}

impl Explanation {
    /// The same products ranked with the junction placed as `placement` says (at a fix,
    /// heard at the receiver), calibrated against `heard`, without on-air evidence.
    pub fn ranked_at(&self, site: &Site, placement: Placement, heard: &[HeardLevel]) -> Ranking {
        rank_candidates(
            self.products.clone(),
            site.emitters(),
            &self.params,
            &RankInputs {
                placement,
                model: self.model,
                logbook: None,
                heard,
            },
        )
    }
}
