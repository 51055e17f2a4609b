//! The plain enumeration of every product over every one, two and three emitters: O(N³)
//! per coefficient set. It is the reference that [`super::find_products`] is checked
//! against in the property tests and measured against in the benchmarks; use the search
//! for real work.

use super::{coefficient_sets, Hits, Product, SearchParams, Term, MAX_ORDER};
use crate::emitter::Carrier;
use crate::freq::Hz;

/// Every product and co-channel emitter by exhaustive enumeration; the same contract as
/// [`super::find_products`].
pub fn find_products_brute_force(carriers: &[Carrier], params: &SearchParams) -> Hits {
    let mut hits = Hits::default();
    let max_order = params.max_order.min(MAX_ORDER);
    let n = carriers.len();
    let consider = |terms: &[Term], hits: &mut Hits| {
        let f: i64 = terms
            .iter()
            .map(|t| t.coefficient as i64 * carriers[t.emitter].freq.0)
            .sum();
        let bw: i64 = terms
            .iter()
            .map(|t| t.coefficient.unsigned_abs() as i64 * carriers[t.emitter].bandwidth.0)
            .sum();
        if params.hits(Hz(f), Hz(bw)) {
            if terms.len() == 1 && terms[0].coefficient == 1 {
                hits.co_channel.push(terms[0].emitter);
            } else {
                hits.products.push(Product::new(terms, Hz(f)));
            }
        }
    };
    for i in 0..n {
        for k in 1..=max_order.max(1) as i32 {
            consider(
                &[Term {
                    emitter: i,
                    coefficient: k,
                }],
                &mut hits,
            );
        }
    }
    if params.max_emitters >= 2 && max_order >= 2 {
        let sets = coefficient_sets(2, max_order);
        for i in 0..n {
            for j in i + 1..n {
                for ks in &sets {
                    let terms = [
                        Term {
                            emitter: i,
                            coefficient: ks[0] as i32,
                        },
                        Term {
                            emitter: j,
                            coefficient: ks[1] as i32,
                        },
                    ];
                    consider(&terms, &mut hits);
                }
            }
        }
    }
    if params.max_emitters >= 3 && max_order >= 3 {
        let sets = coefficient_sets(3, max_order);
        for i in 0..n {
            for j in i + 1..n {
                for l in j + 1..n {
                    for ks in &sets {
                        let terms = [
                            Term {
                                emitter: i,
                                coefficient: ks[0] as i32,
                            },
                            Term {
                                emitter: j,
                                coefficient: ks[1] as i32,
                            },
                            Term {
                                emitter: l,
                                coefficient: ks[2] as i32,
                            },
                        ];
                        consider(&terms, &mut hits);
                    }
                }
            }
        }
    }
    hits
}
