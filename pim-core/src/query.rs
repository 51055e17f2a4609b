//! What a query asks and what it answers, and the memory a listing may hold: below both
//! the site ([`crate::site`], which owns the emitters and dispatches a query) and the
//! pruned search (`top`, which reads the site through [`SiteView`]), so that neither
//! imports the other for them. [`crate::site`] re-exports the public items.

use crate::emitter::{Carrier, Emitter};
use crate::error::Error;
use crate::freq::Hz;
use crate::geo::GeoPoint;
use crate::intermod::{Product, SearchParams};
use crate::level::LevelModel;
use crate::nearby::SiteIndex;
use crate::onair::Logbook;
use crate::rank::{Candidate, HeardLevel, Ranking};

/// The memory a listing may hold unless [`crate::site::Site::with_memory_budget`] says otherwise:
/// 4 GiB (about nine million products of one candidate each in a full listing).
pub const DEFAULT_MEMORY_BUDGET_BYTES: u64 = 4 << 30;

/// What a listing holds per product: the product in the listing with its room to grow,
/// and in the ranking's copy.
pub const BYTES_PER_PRODUCT: u64 = 3 * std::mem::size_of::<Product>() as u64;

/// What a listing holds per candidate: the candidate and its share of the sort's scratch
/// space (half a candidate).
pub const BYTES_PER_CANDIDATE: u64 = 3 * std::mem::size_of::<Candidate>() as u64 / 2;

/// What the pruned search reads of a site: its emitters and carriers (indexed alike), the
/// index every pruned query shares, and the memory a listing may hold.
pub(crate) struct SiteView<'a> {
    pub(crate) emitters: &'a [Emitter],
    pub(crate) carriers: &'a [Carrier],
    pub(crate) index: &'a SiteIndex,
    pub(crate) memory_budget: u64,
}

impl SiteView<'_> {
    /// The emitters.
    pub(crate) fn emitters(&self) -> &[Emitter] {
        self.emitters
    }

    /// Each emitter's carrier, by emitter index.
    pub(crate) fn carriers(&self) -> &[Carrier] {
        self.carriers
    }

    /// The memory a listing may hold, bytes.
    pub(crate) fn memory_budget(&self) -> u64 {
        self.memory_budget
    }

    /// The refusal of a listing that has reached `products` products.
    pub(crate) fn over_budget(&self, products: usize) -> Error {
        over_budget(self.memory_budget, products)
    }
}

/// The refusal of a listing that has reached `products` products and would pass a memory
/// budget of `budget` bytes.
pub(crate) fn over_budget(budget: u64, products: usize) -> Error {
    Error::refused(format!(
        "the search reached {products} products landing in the channel, more than a \
             listing can hold within its memory budget of {} MB; a shorter listing (only the \
             first candidates, kept in bounded memory) or a narrower search (a lower order, \
             fewer emitters per product, a narrower channel) is needed",
        budget / 1_000_000
    ))
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
