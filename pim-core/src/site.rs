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
//! let answer = site.explain(&Query::new(Hz(146_340_000))).unwrap();
//! // one product, which a corroded joint or either transmitter's output stage may make
//! assert_eq!(answer.products.len(), 1);
//! let first = &answer.ranking.candidates[0];
//! assert_eq!(site.formula(&first.product), "2·SKP-152 − FIRE-DSP");
//! assert_eq!(first.product.order(), 3);
//! ```

use crate::emitter::{carriers, Carrier, Emitter};
use crate::error::{Error, Result};
use crate::freq::Hz;
use crate::geo::GeoPoint;
use crate::intermod::{
    co_channel, retain_coefficients, search_products_while, Product, SearchParams, MAX_ORDER,
};
use crate::level::LevelModel;
use crate::nearby::SiteIndex;
use crate::onair::Logbook;
use crate::rank::{
    formula, rank_candidates, Candidate, HeardLevel, Placement, RankInputs, Ranker, Ranking,
};

/// The memory a listing may hold unless [`Site::with_memory_budget`] says otherwise:
/// 4 GiB (about nine million products of one candidate each in a full listing).
pub const DEFAULT_MEMORY_BUDGET_BYTES: u64 = 4 << 30;

/// What a listing holds per product: the product in the listing with its room to grow,
/// and in the ranking's copy.
pub const BYTES_PER_PRODUCT: u64 = 3 * std::mem::size_of::<Product>() as u64;

/// What a listing holds per candidate: the candidate and its share of the sort's scratch
/// space (half a candidate).
pub const BYTES_PER_CANDIDATE: u64 = 3 * std::mem::size_of::<Candidate>() as u64 / 2;

/// The emitters of a site and their carriers, indexed alike, and the memory a listing of
/// its products may hold.
#[derive(Clone, Debug)]
pub struct Site {
    emitters: Vec<Emitter>,
    carriers: Vec<Carrier>,
    memory_budget: u64,
    /// Worked out once for every query: where each emitter is and how strong the site's
    /// strongest emitter is, for the bounds of the pruned search.
    pub(crate) index: SiteIndex,
}

impl Default for Site {
    fn default() -> Self {
        Site::new(Vec::new())
    }
}

impl Site {
    /// A site of `emitters`; their order is the index space of every result. Listings
    /// hold at most [`DEFAULT_MEMORY_BUDGET_BYTES`].
    pub fn new(emitters: Vec<Emitter>) -> Site {
        let carriers = carriers(&emitters);
        Site {
            index: SiteIndex::new(&emitters, &carriers),
            emitters,
            carriers,
            memory_budget: DEFAULT_MEMORY_BUDGET_BYTES,
        }
    }

    /// The same site whose listings hold at most `bytes` (products and candidates as
    /// [`BYTES_PER_PRODUCT`] and [`BYTES_PER_CANDIDATE`] count them): a listing that
    /// would pass it is refused before it is made.
    pub fn with_memory_budget(mut self, bytes: u64) -> Site {
        self.memory_budget = bytes;
        self
    }

    /// The same site with its memory budget shared among `listings` listings held at once
    /// (a study's receivers in flight, [`crate::study::listings_in_flight`]): each may
    /// hold the budget divided by their number, so together they stay within it.
    pub fn shared_by(self, listings: usize) -> Site {
        let each = self.memory_budget / listings.max(1) as u64;
        self.with_memory_budget(each)
    }

    /// The memory a listing may hold, bytes.
    pub fn memory_budget(&self) -> u64 {
        self.memory_budget
    }

    /// The refusal of a listing that has reached `products` products and would pass the
    /// memory budget.
    pub(crate) fn over_budget(&self, products: usize) -> Error {
        Error::refused(format!(
            "the search reached {products} products landing in the channel, more than a \
             listing can hold within its memory budget of {} MB; a shorter listing (only the \
             first candidates, kept in bounded memory) or a narrower search (a lower order, \
             fewer emitters per product, a narrower channel) is needed",
            self.memory_budget / 1_000_000
        ))
    }

    /// Whether `products` products with `candidates` candidates fit the memory budget.
    pub(crate) fn fits(&self, products: usize, candidates: usize) -> bool {
        (products as u64)
            .saturating_mul(BYTES_PER_PRODUCT)
            .saturating_add((candidates as u64).saturating_mul(BYTES_PER_CANDIDATE))
            <= self.memory_budget
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
    ///
    /// Refused (class `Refused`) when the listing would pass the site's memory budget
    /// ([`Site::with_memory_budget`]): the search stops as soon as the products it holds
    /// would, before anything larger is allocated.
    pub fn explain(&self, query: &Query) -> Result<Explanation> {
        // The pruned search ranks with the junction at the receiver and no calibration;
        // with a receiver elsewhere or heard levels the whole listing is ranked.
        if let (Some(k), true, None) = (query.limit, query.heard.is_empty(), query.receiver) {
            return crate::top::explain_top(self, query, k);
        }
        // Every product makes at least one candidate: the search stops once the products
        // and one candidate each would pass the budget.
        let mut products = Vec::new();
        let whole = search_products_while(&self.carriers, &query.params, 2..=MAX_ORDER, &mut |p| {
            if !self.fits(products.len() + 1, products.len() + 1) {
                return false;
            }
            products.push(p);
            true
        });
        if !whole {
            return Err(self.over_budget(products.len()));
        }
        let found = products.len();
        retain_coefficients(&mut products, &query.coefficients);
        if let Some(reach) = query.centred_within {
            products.retain(|p| p.offset(query.params.target).0.abs() <= reach.0);
        }
        let kept = products.len();
        let inputs = RankInputs {
            placement: Placement {
                junction: query.junction,
                receiver: query.receiver,
                fix_radius_m: None,
            },
            model: query.model,
            logbook: query.logbook.as_ref(),
            heard: &query.heard,
        };
        let candidates = Ranker::lazy(&self.emitters, &self.carriers, &query.params, &inputs)
            .candidate_count(&products);
        if !self.fits(found, candidates) {
            return Err(self.over_budget(found));
        }
        let ranking = rank_candidates(products.clone(), &self.emitters, &query.params, &inputs);
        Ok(Explanation {
            params: query.params,
            model: query.model,
            heard: query.heard.clone(),
            products,
            co_channel: co_channel(&self.carriers, &query.params),
            found,
            kept,
            limit: None,
            complete: true,
            ranking,
        })
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
    /// Keep only products whose centre lies within this of the channel centre (a trace
    /// peak's resolution): the ranking is the full one's with the others left out, so
    /// with a limit the first K are the first K so centred. `None` keeps every product
    /// that hits the channel.
    pub centred_within: Option<Hz>,
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
            centred_within: None,
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
    /// Refused when this ranking and the one held would together pass the site's memory
    /// budget.
    pub fn ranked_at(
        &self,
        site: &Site,
        placement: Placement,
        heard: &[HeardLevel],
    ) -> Result<Ranking> {
        self.ranked_with(
            site,
            &RankInputs {
                placement,
                model: self.model,
                logbook: None,
                heard,
            },
        )
    }

    /// The same products ranked with `inputs` (a placement, a model, on-air evidence and
    /// heard levels of their own). Refused when this ranking and the one held would
    /// together pass the site's memory budget.
    pub fn ranked_with(&self, site: &Site, inputs: &RankInputs) -> Result<Ranking> {
        let candidates = Ranker::lazy(site.emitters(), site.carriers(), &self.params, inputs)
            .candidate_count(&self.products);
        let held = self.ranking.candidates.len() + candidates;
        if !site.fits(self.products.len(), held) {
            return Err(site.over_budget(self.products.len()));
        }
        Ok(rank_candidates(
            self.products.clone(),
            site.emitters(),
            &self.params,
            inputs,
        ))
    }
}
