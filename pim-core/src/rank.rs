//! Ranking the products that hit a channel: by predicted level where every emitter of a
//! product has an ERP and a location, otherwise after those, by order then offset.
//! Remaining ties break on the emitter ids and coefficients, so the same input always
//! gives the same list.

use std::cmp::Ordering;

use serde::Serialize;

use crate::emitter::Emitter;
use crate::freq::Hz;
use crate::geo::GeoPoint;
use crate::intermod::{Product, Term};
use crate::level::{incidence, Incidence, JunctionModel};

/// A product with its place in the ranking.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Candidate {
    /// 1 for the most plausible.
    pub rank: usize,
    pub product: Product,
    /// Σ|kᵢ|·Pᵢ + C(n) in dBm, when every emitter's ERP and location are known.
    pub level_dbm: Option<f64>,
}

/// The breakdown of a predicted level, for a practitioner to check.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LevelTerms {
    /// Σ|kᵢ|·Pᵢ in dB.
    pub power_sum_db: f64,
    /// C(n) in dB.
    pub conversion_db: f64,
    pub level_dbm: f64,
}

/// Ranked candidates and what the ranking rested on.
#[derive(Clone, Debug)]
pub struct Ranking {
    pub candidates: Vec<Candidate>,
    /// The junction location used for incident powers (the receiver site, or a fix).
    pub junction: Option<GeoPoint>,
    pub model: JunctionModel,
    /// Incident power of each emitter at the junction, by emitter index.
    pub incidence: Vec<Option<Incidence>>,
    /// How many candidates lack a level (ranked after the others by order, then offset).
    pub unlevelled: usize,
}

impl Ranking {
    /// The terms of a candidate's predicted level, when it has one.
    pub fn level_terms(&self, product: &Product) -> Option<LevelTerms> {
        let mut power_sum_db = 0.0;
        for t in product.terms() {
            power_sum_db +=
                t.coefficient.unsigned_abs() as f64 * self.incidence[t.emitter]?.incident_dbm;
        }
        let conversion_db = self.model.conversion_db(product.order());
        Some(LevelTerms {
            power_sum_db,
            conversion_db,
            level_dbm: power_sum_db + conversion_db,
        })
    }

    /// A one-line statement of how the list is ordered.
    pub fn basis(&self) -> String {
        let total = self.candidates.len();
        match (self.junction, self.unlevelled) {
            (None, _) => "ranked by order, then offset: no junction location given, so no levels".to_string(),
            (Some(_), 0) => "ranked by predicted level at the junction".to_string(),
            (Some(_), u) if u == total => "ranked by order, then offset: no candidate has ERP and location for every emitter".to_string(),
            (Some(_), u) => format!(
                "ranked by predicted level; {u} of {total} lack an emitter's ERP or location and follow, by order then offset"
            ),
        }
    }
}

/// Orders two terms for display: positive coefficients first, larger |k| first, then by
/// frequency and id.
fn display_order(emitters: &[Emitter]) -> impl Fn(&Term, &Term) -> Ordering + '_ {
    move |a, b| {
        (b.coefficient > 0)
            .cmp(&(a.coefficient > 0))
            .then(b.coefficient.abs().cmp(&a.coefficient.abs()))
            .then(emitters[a.emitter].freq.cmp(&emitters[b.emitter].freq))
            .then(emitters[a.emitter].id.cmp(&emitters[b.emitter].id))
    }
}

/// The terms of a product in the order a formula shows them.
pub fn display_terms(product: &Product, emitters: &[Emitter]) -> Vec<Term> {
    let mut terms: Vec<Term> = product.terms().collect();
    terms.sort_by(display_order(emitters));
    terms
}

/// The product in trade notation, such as `2·PAGER − LMR2` or `A + B − C`.
pub fn formula(product: &Product, emitters: &[Emitter]) -> String {
    let mut out = String::new();
    for (i, t) in display_terms(product, emitters).iter().enumerate() {
        let m = t.coefficient.abs();
        match (i, t.coefficient > 0) {
            (0, true) => {}
            (0, false) => out.push('−'),
            (_, true) => out.push_str(" + "),
            (_, false) => out.push_str(" − "),
        }
        if m != 1 {
            out.push_str(&format!("{m}·"));
        }
        out.push_str(&emitters[t.emitter].id);
    }
    out
}

fn tie_break(a: &Product, b: &Product, emitters: &[Emitter]) -> Ordering {
    let ta = display_terms(a, emitters);
    let tb = display_terms(b, emitters);
    for (x, y) in ta.iter().zip(&tb) {
        let o = emitters[x.emitter]
            .id
            .cmp(&emitters[y.emitter].id)
            .then(y.coefficient.cmp(&x.coefficient));
        if o != Ordering::Equal {
            return o;
        }
    }
    ta.len().cmp(&tb.len())
}

/// Ranks products hitting the channel at `target`. `junction` is where the mixing is
/// assumed to happen: the receiver site until a fix is known.
pub fn rank(
    products: Vec<Product>,
    emitters: &[Emitter],
    target: Hz,
    junction: Option<GeoPoint>,
    model: &JunctionModel,
) -> Ranking {
    let incidence_by_emitter: Vec<Option<Incidence>> = emitters
        .iter()
        .map(|e| junction.and_then(|j| incidence(e, j)))
        .collect();
    let mut ranking = Ranking {
        candidates: Vec::with_capacity(products.len()),
        junction,
        model: *model,
        incidence: incidence_by_emitter,
        unlevelled: 0,
    };
    for product in products {
        let level_dbm = ranking.level_terms(&product).map(|t| t.level_dbm);
        ranking.candidates.push(Candidate {
            rank: 0,
            product,
            level_dbm,
        });
    }
    ranking.unlevelled = ranking
        .candidates
        .iter()
        .filter(|c| c.level_dbm.is_none())
        .count();
    ranking.candidates.sort_by(|a, b| {
        let by_level = match (a.level_dbm, b.level_dbm) {
            (Some(x), Some(y)) => y.total_cmp(&x),
            (Some(_), None) => Ordering::Less,
            (None, Some(_)) => Ordering::Greater,
            (None, None) => Ordering::Equal,
        };
        by_level
            .then(a.product.order().cmp(&b.product.order()))
            .then(
                a.product
                    .offset(target)
                    .0
                    .abs()
                    .cmp(&b.product.offset(target).0.abs()),
            )
            .then_with(|| tie_break(&a.product, &b.product, emitters))
    });
    for (i, c) in ranking.candidates.iter_mut().enumerate() {
        c.rank = i + 1;
    }
    ranking
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::intermod::Term;

    #[test]
    fn formula_reads_in_trade_notation() {
        let e = vec![
            Emitter::new("LMR2", Hz(159_340_000), Hz(0)),
            Emitter::new("PAGER", Hz(152_840_000), Hz(0)),
            Emitter::new("FM", Hz(98_700_000), Hz(0)),
        ];
        let p = Product::new(
            &[
                Term {
                    emitter: 0,
                    coefficient: -1,
                },
                Term {
                    emitter: 1,
                    coefficient: 2,
                },
            ],
            Hz(146_340_000),
        );
        assert_eq!(formula(&p, &e), "2·PAGER − LMR2");
        let q = Product::new(
            &[
                Term {
                    emitter: 0,
                    coefficient: 1,
                },
                Term {
                    emitter: 1,
                    coefficient: -1,
                },
                Term {
                    emitter: 2,
                    coefficient: 1,
                },
            ],
            Hz(105_200_000),
        );
        assert_eq!(formula(&q, &e), "FM + LMR2 − PAGER");
    }
}
