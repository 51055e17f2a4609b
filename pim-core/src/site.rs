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
use crate::intermod::{co_channel, retain_coefficients, search_products_while, Product, MAX_ORDER};
use crate::nearby::SiteIndex;
use crate::query::{over_budget, SiteView};
pub use crate::query::{
    Explanation, Query, BYTES_PER_CANDIDATE, BYTES_PER_PRODUCT, DEFAULT_MEMORY_BUDGET_BYTES,
};
use crate::rank::{formula, rank_candidates, HeardLevel, Placement, RankInputs, Ranker, Ranking};

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
        over_budget(self.memory_budget, products)
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
            let view = SiteView {
                emitters: &self.emitters,
                carriers: &self.carriers,
                index: &self.index,
                memory_budget: self.memory_budget,
            };
            return crate::top::explain_top(&view, query, k);
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
