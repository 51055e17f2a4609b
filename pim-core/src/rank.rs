//! Ranking the products that hit a channel: by predicted level where every emitter of a
//! product has an ERP and a location, otherwise after those, by order then offset.
//! Remaining ties break on the emitter ids and coefficients, so the same input always
//! gives the same list.
//!
//! With on-air evidence ([`rank_with_evidence`]) the evidence comes first, by the rule in
//! [`crate::onair`]: fewest times heard while one of the candidate's emitters was off the
//! air, then most times heard with all of them on, then fewest times silent with all of
//! them on; the keys above follow among equals.

use std::cmp::Ordering;

use serde::Serialize;

use crate::emitter::Emitter;
use crate::freq::Hz;
use crate::geo::GeoPoint;
use crate::intermod::{Product, Term};
use crate::level::{incidence, Incidence, JunctionModel};
use crate::onair::{Evidence, Logbook};

/// A product with its place in the ranking.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Candidate {
    /// 1 for the most plausible.
    pub rank: usize,
    pub product: Product,
    /// Σ|kᵢ|·Pᵢ + C(n) in dBm, when every emitter's ERP and location are known.
    pub level_dbm: Option<f64>,
    /// What the on-air log says about it, when a log was given.
    pub evidence: Option<Evidence>,
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
    /// Whether on-air evidence took part (it then comes first).
    pub by_evidence: bool,
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
        let rest = self.basis_after_evidence();
        if self.by_evidence {
            format!("ranked first by on-air evidence (fewest times heard with an emitter off air, most heard with all on air, fewest silent with all on air), then {}", rest.trim_start_matches("ranked "))
        } else {
            rest
        }
    }

    fn basis_after_evidence(&self) -> String {
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
    rank_with_evidence(products, emitters, target, junction, model, None)
}

/// [`rank`], with the on-air evidence of `logbook` (when given) as the first key.
pub fn rank_with_evidence(
    products: Vec<Product>,
    emitters: &[Emitter],
    target: Hz,
    junction: Option<GeoPoint>,
    model: &JunctionModel,
    logbook: Option<&Logbook>,
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
        by_evidence: logbook.is_some(),
    };
    for product in products {
        let level_dbm = ranking.level_terms(&product).map(|t| t.level_dbm);
        ranking.candidates.push(Candidate {
            rank: 0,
            product,
            level_dbm,
            evidence: logbook.map(|book| book.evidence(&product)),
        });
    }
    ranking.unlevelled = ranking
        .candidates
        .iter()
        .filter(|c| c.level_dbm.is_none())
        .count();
    ranking.candidates.sort_by(|a, b| {
        let by_evidence = match (&a.evidence, &b.evidence) {
            (Some(x), Some(y)) => x.ranking_cmp(y),
            _ => Ordering::Equal,
        };
        let by_level = match (a.level_dbm, b.level_dbm) {
            (Some(x), Some(y)) => y.total_cmp(&x),
            (Some(_), None) => Ordering::Less,
            (None, Some(_)) => Ordering::Greater,
            (None, None) => Ordering::Equal,
        };
        by_evidence
            .then(by_level)
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
    use crate::onair::{Interval, Observation, Schedule};
    use time::macros::datetime;

    #[test]
    fn evidence_comes_before_order_and_level() {
        let e = vec![
            Emitter::new("A", Hz(150_000_000), Hz(0)),
            Emitter::new("B", Hz(153_600_000), Hz(0)),
            Emitter::new("C", Hz(151_800_000), Hz(0)),
        ];
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let third = Product::new(&[t(0, 2), t(1, -1)], Hz(146_400_000));
        let fifth = Product::new(&[t(0, 3), t(2, -2)], Hz(146_400_000));
        let model = JunctionModel::default();
        let plain = rank(vec![fifth, third], &e, Hz(146_400_000), None, &model);
        assert_eq!(plain.candidates[0].product, third);
        assert!(!plain.by_evidence && plain.candidates[0].evidence.is_none());
        // Heard at 09:30 while B was off the air and A and C were on.
        let on = |i, h0, h1| {
            (
                i,
                Interval {
                    start: datetime!(2025-06-14 00:00 UTC).replace_hour(h0).unwrap(),
                    end: datetime!(2025-06-14 00:00 UTC).replace_hour(h1).unwrap(),
                },
            )
        };
        let schedule = Schedule::new(&e, &[on(0, 9, 11), on(1, 10, 11), on(2, 9, 11)]);
        let book = Logbook::new(
            schedule,
            vec![Observation {
                at: datetime!(2025-06-14 09:30 UTC),
                heard: true,
            }],
        );
        let r = rank_with_evidence(
            vec![third, fifth],
            &e,
            Hz(146_400_000),
            None,
            &model,
            Some(&book),
        );
        assert_eq!(r.candidates[0].product, fifth);
        assert_eq!(r.candidates[0].evidence.map(|v| v.support), Some(1));
        assert_eq!(r.candidates[1].evidence.map(|v| v.heard_off_air), Some(1));
        assert!(
            r.basis().starts_with("ranked first by on-air evidence"),
            "{}",
            r.basis()
        );
    }

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
