//! Channel plans free of intermodulation: the largest set of channels, from a list of
//! candidates, such that no product of the chosen channels lands on a chosen channel or
//! on a protected receive frequency.
//!
//! **Conflict rule.** A product Σ kᵢ·fᵢ of two or three distinct chosen channels with
//! order Σ|kᵢ| from 2 up to the plan's order conflicts when it lands on a chosen channel
//! (one of its own included) or on a protected frequency t, by the hit rule of
//! [`crate::intermod`] with the guard as tolerance: `2·|f_p − f_t| ≤ B_p + B_t + 2·guard`,
//! B_p = Σ|kᵢ|·Bᵢ. A product landing on a frequency that is neither chosen nor protected
//! does not matter; harmonics of a single channel are not counted. All arithmetic is in
//! whole hertz.
//!
//! **Golomb rulers.** On a uniform grid narrower than an octave, with no guard and no
//! protected frequencies, the third-order products that can land in the band are
//! 2fa − fb and fa + fb − fc (the others fall near 0, 2f or 3f); a set free of them is a set
//! whose pairwise differences are all distinct, a Golomb ruler (W. C. Babcock,
//! "Intermodulation interference in radio systems", Bell System Technical Journal 32
//! (1953) 63–73). The largest plan on a grid of L + 1 channels therefore has as many
//! channels as the longest-marked optimal Golomb ruler of length at most L (OEIS A003022).
//!
//! **Search.** Every conflict is listed once, as the set of two to four candidates that
//! make it, by running [`crate::intermod::find_products`] with each candidate and each
//! protected frequency as the target. A branch and bound then looks for the largest set
//! containing no conflict whole: it takes the candidates in frequency order, tries each
//! with and then without, keeps for every conflict the number of its channels chosen and
//! blocks a candidate that would complete one, and abandons a branch when the channels
//! chosen plus the unblocked candidates left cannot beat the best set found. When the
//! search ends it has examined every set that could be larger, so the set is proved the
//! largest (`optimal`). Greedy passes in several orders (with a checker that evaluates
//! only the products a new channel adds) give the search its first incumbent; when the
//! time limit ends the search first, or the conflicts are too many to list, the best set
//! found is returned with `optimal` false, and greedy passes in seeded random orders use
//! whatever time remains.
//!
//! With one order of the candidates and a fixed seed, a plan proved optimal is the same
//! on every run; a plan cut short by the time limit depends on the machine's speed.

mod conflicts;
mod exact;
mod greedy;

use serde::Serialize;

use crate::emitter::Carrier;
use crate::error::{Error, Result};
use crate::freq::Hz;
use crate::intermod::{find_products, Product, SearchParams, MAX_ORDER};

pub use conflicts::Conflicts;

/// Above this many candidates no exact search is tried: the conflict list would not fit
/// the time or memory a field tool may take.
pub const EXACT_MAX_CANDIDATES: usize = 400;

/// Above this many conflicts the exact search is abandoned for the greedy passes.
pub const MAX_CONFLICTS: usize = 4_000_000;

/// What to plan for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PlanSpec {
    /// Highest order Σ|k| of the products that must not land (2..=15; 3 or 5 in practice).
    pub order: u32,
    /// Extra clearance on each side of a chosen channel or protected frequency.
    pub guard: Hz,
}

/// How the returned set was found.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PlanMethod {
    /// The branch and bound ran to its end: the set is proved the largest.
    BranchAndBound,
    /// The branch and bound was cut short by the time limit.
    BranchAndBoundCutShort,
    /// Too many candidates or conflicts for an exact search: greedy passes only.
    Greedy,
}

/// A channel plan.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    /// Indices of the chosen candidates, in frequency order.
    pub chosen: Vec<usize>,
    /// Whether the set is proved the largest possible.
    pub optimal: bool,
    /// How the set was found.
    pub method: PlanMethod,
    /// Conflicts listed for the exact search (0 when it was not tried).
    pub conflicts: usize,
    /// Branch-and-bound nodes visited.
    pub nodes: u64,
}

/// Finds the largest set of `candidates` free of conflicts (module docs), searching to
/// the end.
pub fn plan(candidates: &[Carrier], protected: &[Carrier], spec: &PlanSpec) -> Result<Plan> {
    plan_until(candidates, protected, spec, &|| false)
}

/// [`plan`], returning the best set found so far once `out_of_time` says so (the caller
/// owns the clock: the engine never reads it).
pub fn plan_until(
    candidates: &[Carrier],
    protected: &[Carrier],
    spec: &PlanSpec,
    out_of_time: &dyn Fn() -> bool,
) -> Result<Plan> {
    if !(2..=MAX_ORDER).contains(&spec.order) {
        return Err(Error::argument(
            "order",
            format!("order {} is outside 2…{MAX_ORDER}", spec.order),
        ));
    }
    if spec.guard.0 < 0 {
        return Err(Error::argument("guard", "the guard is negative"));
    }
    if candidates.is_empty() {
        return Err(Error::refused("no candidate channels to choose from"));
    }

    // Candidates in frequency order; `by_freq[i]` is the caller's index.
    let mut by_freq: Vec<usize> = (0..candidates.len()).collect();
    by_freq.sort_by_key(|&i| (candidates[i].freq, i));
    let sorted: Vec<Carrier> = by_freq.iter().map(|&i| candidates[i]).collect();
    let mut prot: Vec<Carrier> = protected.to_vec();
    prot.sort_by_key(|c| c.freq);

    let checker = greedy::Checker::new(&sorted, &prot, spec.order, spec.guard);
    let mut best = greedy::seed_passes(&checker, &out_of_time);

    let mut method = PlanMethod::Greedy;
    let mut optimal = false;
    let mut conflict_count = 0;
    let mut nodes = 0;
    if sorted.len() <= EXACT_MAX_CANDIDATES && !out_of_time() {
        if let Some(conflicts) = Conflicts::build(
            &sorted,
            &prot,
            spec.order,
            spec.guard,
            MAX_CONFLICTS,
            &out_of_time,
        ) {
            conflict_count = conflicts.len();
            let outcome = exact::search(&conflicts, &best, &out_of_time);
            nodes = outcome.nodes;
            if let Some(better) = outcome.best {
                best = better;
            }
            optimal = outcome.complete;
            method = if outcome.complete {
                PlanMethod::BranchAndBound
            } else {
                PlanMethod::BranchAndBoundCutShort
            };
        }
    }
    if !optimal {
        if let Some(better) = greedy::random_passes(&checker, best.len(), &out_of_time) {
            best = better;
        }
    }
    let mut chosen: Vec<usize> = best.iter().map(|&i| by_freq[i]).collect();
    chosen.sort_by_key(|&i| (candidates[i].freq, i));
    Ok(Plan {
        chosen,
        optimal,
        method,
        conflicts: conflict_count,
        nodes,
    })
}

/// The product of a set of channels nearest to one of them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ClosestProduct {
    /// Terms index the channel list given to [`closest_products`].
    pub product: Product,
    /// |f_p − f| from the channel's centre.
    pub distance: Hz,
}

/// For each of `channels`, the product of two or three of them, of order 2 up to
/// `order`, whose frequency is nearest to its centre (`None` with fewer than two
/// channels). Ties go to the lower order, then to the earlier product in term order.
pub fn closest_products(channels: &[Carrier], order: u32) -> Vec<Option<ClosestProduct>> {
    let bare: Vec<Carrier> = channels
        .iter()
        .map(|c| Carrier {
            freq: c.freq,
            bandwidth: Hz::ZERO,
        })
        .collect();
    channels
        .iter()
        .map(|c| {
            if channels.len() < 2 {
                return None;
            }
            let mut tolerance: i64 = 1_000;
            loop {
                let params = SearchParams {
                    target: c.freq,
                    rx_bandwidth: Hz::ZERO,
                    tolerance: Hz(tolerance),
                    max_order: order,
                    max_emitters: 3,
                };
                let best = find_products(&bare, &params)
                    .products
                    .into_iter()
                    .filter(|p| p.emitter_count() >= 2)
                    .min_by_key(|p| {
                        (
                            p.offset(c.freq).abs(),
                            p.order(),
                            p.terms()
                                .map(|t| (t.emitter, t.coefficient))
                                .collect::<Vec<_>>(),
                        )
                    });
                if let Some(p) = best {
                    return Some(ClosestProduct {
                        product: p,
                        distance: p.offset(c.freq).abs(),
                    });
                }
                if tolerance > crate::freq::MAX_FREQUENCY.0 * MAX_ORDER as i64 {
                    return None;
                }
                tolerance *= 4;
            }
        })
        .collect()
}

/// Whether a set of channels is free of conflicts, checked plainly with the product
/// search, each chosen channel and protected frequency in turn as the target: the
/// reference the planner's own checks are tested against.
pub fn is_conflict_free(chosen: &[Carrier], protected: &[Carrier], order: u32, guard: Hz) -> bool {
    chosen.iter().chain(protected).all(|t| {
        let params = SearchParams {
            target: t.freq,
            rx_bandwidth: t.bandwidth,
            tolerance: guard,
            max_order: order,
            max_emitters: 3,
        };
        find_products(chosen, &params)
            .products
            .iter()
            .all(|p| p.emitter_count() < 2)
    })
}

/// Uniform grid: `count` channels from `start` in steps of `step`, zero width.
pub fn grid(start: Hz, step: Hz, count: usize) -> Vec<Carrier> {
    (0..count as i64)
        .map(|i| Carrier {
            freq: Hz(start.0 + i * step.0),
            bandwidth: Hz::ZERO,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(order: u32) -> PlanSpec {
        PlanSpec {
            order,
            guard: Hz::ZERO,
        }
    }

    #[test]
    fn small_grids_give_golomb_rulers() {
        // Shortest Golomb rulers: 3 marks in length 3, 4 in 6, 5 in 11 (OEIS A003022).
        for (count, marks) in [(4, 3), (7, 4), (6, 3), (12, 5), (11, 4)] {
            let g = grid(Hz(150_000_000), Hz(12_500), count);
            let p = plan(&g, &[], &spec(3)).unwrap();
            assert_eq!(
                (p.chosen.len(), p.optimal),
                (marks, true),
                "{count} channels"
            );
            let set: Vec<Carrier> = p.chosen.iter().map(|&i| g[i]).collect();
            assert!(is_conflict_free(&set, &[], 3, Hz::ZERO));
        }
    }

    #[test]
    fn protected_frequency_and_guard_are_honoured() {
        let g = grid(Hz(150_000_000), Hz(12_500), 12);
        let free = plan(&g, &[], &spec(3)).unwrap().chosen.len();
        let prot = [Carrier {
            freq: Hz(150_075_000),
            bandwidth: Hz::ZERO,
        }];
        let p = plan(&g, &prot, &spec(3)).unwrap();
        let set: Vec<Carrier> = p.chosen.iter().map(|&i| g[i]).collect();
        assert!(is_conflict_free(&set, &prot, 3, Hz::ZERO));
        assert!(p.chosen.len() <= free);
        let guarded = PlanSpec {
            guard: Hz(6_250),
            ..spec(3)
        };
        let p = plan(&g, &[], &guarded).unwrap();
        let set: Vec<Carrier> = p.chosen.iter().map(|&i| g[i]).collect();
        assert!(is_conflict_free(&set, &[], 3, Hz(6_250)));
        assert!(p.optimal);
    }

    #[test]
    fn closest_products_are_found() {
        // 0, 1, 3 on a 12.5 kHz raster: nearest to 150.0 is 2·150.0125 − 150.0375 = 149.9875.
        let g = grid(Hz(150_000_000), Hz(12_500), 4);
        let set = [g[0], g[1], g[3]];
        let c = closest_products(&set, 3);
        let first = c[0].unwrap();
        assert_eq!(first.distance, Hz(12_500));
        assert_eq!(first.product.order(), 3);
        assert!(closest_products(&set[..1], 3)[0].is_none());
    }

    #[test]
    fn bad_specs_are_refused() {
        let g = grid(Hz(150_000_000), Hz(12_500), 4);
        assert!(plan(&g, &[], &spec(1)).is_err());
        assert!(plan(&[], &[], &spec(3)).is_err());
    }
}
