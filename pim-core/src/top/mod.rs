//! The first K candidates of an explanation in memory bounded by K and the emitters,
//! never by the number of products, and equal to the first K of the full listing.
//!
//! **Bounded list.** Candidates are offered one at a time to a list that keeps the best
//! K in the ranking order of [`crate::rank`] (at most 2K + 64 held between compactions);
//! everything is counted as it passes.
//!
//! **Exact bound.** Every mechanism's level is non-decreasing in each emitter's drive
//! ([`crate::level`], "Bound for pruning"), and the channel fraction is at most 1. So a
//! junction product of order n none of whose emitters drives above d lies at or below
//! L₃ + F_max(n) + α·n·(d − P_ref) − s·(n − 3) − e·[n even] less the path from the
//! junction to the receiver at it (the λ/2π floor), F_max(n) the largest form weight of
//! the order; and a product with a given shape and some of its drives known is bounded
//! the same way with the others at their bound.
//!
//! **Drives without geodesics.** The drive never rises with the distance and is never
//! above the far-field strength at the distance used, so each emitter's drive is bounded
//! by the far field of its ERP at a lower bound on its slant distance to the junction:
//! along any path on the ellipsoid the normal turns at most by the length over the
//! smallest radius of curvature (b²/a), so the geodesic is at least b²/a times the angle
//! between the end normals, and the chord between them is shorter still ([`crate::site`]
//! keeps the normals). Every bound below uses these; the exact field is worked out only
//! for the emitters of the candidates weighed.
//!
//! **Drive order.** The emitters are taken in falling drive bound at the junction from
//! the site's tree of positions ([`crate::nearby`]), which works a drive out only for
//! the emitters of the nodes that can still lead, each emitter with its products among
//! those after it (each product once, when its strongest emitter comes). A first look
//! at the products of the [`STRONG`] strongest among the [`FIRST_LOOK`] strongest gives a
//! K-th level, a floor raised as the search finds K better. A partner is skipped when its
//! drive cannot lift the product of its shape to the floor; a pair of partners is taken
//! once, the stronger first, and once the stronger cannot lift the product to the floor
//! with the other as strong, no weaker one can. The partners are found by their frequency
//! among the emitters taken (the first [`POOL`], in frequency order) while those hold
//! every partner strong enough, else among all the site's emitters. The search stops at
//! the first emitter whose own products with weaker ones cannot reach the floor (all
//! their emitters drive at most as much as it): no later emitter's can.
//!
//! With the receiver's own products modelled the bound takes every carrier at the
//! receiver: the strongest emitters have every product they take part in searched
//! whole, apart, and the others by whole sets, doubling from 16, until the bound of the
//! next emitter falls below the K-th.
//!
//! **Transmitters' own products.** A harmonic at its spurious limit and 2·f_A ± f_B made
//! in A's output stage are levelled from the path from A to the receiver: for each A,
//! the strongest ERP of the site at the least antenna isolation and the path at A's least
//! distance to the receiver, taken at the lowest frequency a hit can have (free-space
//! loss rises with frequency), bound them. With a junction location they are searched
//! right after the first look, before the junction's products: away from every tower (a
//! receive-only site, a junction far outside the list) they lead by tens of dB, and
//! their K-th level then bounds the junction's search from its start. The first
//! [`OWN_WALK`] emitters are taken strongest bound first from the site's tree (each node
//! bounded by its strongest ERP at its least distance) until the bound falls below the
//! K-th candidate held (or the first look's K-th level, which K candidates will reach);
//! a partner B is skipped when its own ERP at the least distance between the antennas,
//! less A's output network's rejection of B's carrier and of the product, cannot lift the
//! product to it. Where the bound has not fallen by then (it falls only as 20·log10 of
//! the distance), the rest are searched after the junction's products by frequency: for
//! each form the emitters in frequency order, their partners in a sliding window, a
//! partner passed over without a geodesic when the chord between the normals is longer
//! than the isolation that would let the site's strongest ERP reach the K-th allows.
//!
//! **Without levels.** Emitters without ERP or location make only unlevelled candidates,
//! which follow every levelled one by order, then offset: their products are searched
//! one order at a time, and the search stops at the order at which the K-th candidate
//! is settled.
//!
//! With on-air evidence (which ranks before the level) nothing is skipped; the list is
//! still bounded.
//!
//! **Files.** Each step has a file of its own: `best.rs` the bounded list, `bounds.rs`
//! the level bounds, `drives.rs` the drive bounds and the search in drive order,
//! `partners.rs` the partners found by frequency, `own.rs` the transmitters' own
//! products; this file joins them ([`explain_top`]).
//!
//! **Budget.** The list holds at most 2K + 64 candidates: where K is so large that these
//! would pass the site's memory budget, the search stops at the budget and is refused.

use std::cmp::Ordering;

use crate::emitter::{Carrier, Emitter};
use crate::error::Result;
use crate::freq::Hz;
use crate::intermod::search_products_while;
use crate::intermod::SearchParams;
use crate::intermod::{co_channel, coefficient_sets, Product, Term, MAX_ORDER};
use crate::level::{
    coupled_power_dbm, field_strength_dbuv_m, form_weight_db, free_space_loss_db, slant_distance_m,
    wavelength_m, DIPOLE_GAIN_DBI,
};
use crate::level::{LevelModel, Mechanism};
use crate::nearby::{ground_for_chord, Reach};
use crate::query::{Explanation, Query, SiteView, BYTES_PER_CANDIDATE};
use crate::rank::{Candidate, Placement, RankInputs, Ranker, Tally};

mod best;
mod bounds;
mod drives;
mod own;
mod partners;

use best::*;
use bounds::*;
use drives::*;
use own::*;
use partners::*;

/// With the receiver's own products modelled, the emitters searched first as a whole set:
/// the set doubles from here until the bound settles.
const FIRST_SET: usize = 16;

/// Margin on every bound, dB: rounding in the level arithmetic never prunes a tie.
const BOUND_MARGIN_DB: f64 = 1e-6;

/// How many of the strongest emitters at the junction have their products among the
/// [`FIRST_LOOK`] looked at first, for a K-th level to start the search from (with the
/// receiver's own products modelled: whose products are searched whole, apart).
const STRONG: usize = 8;

/// The emitters of the strongest drive among which the strong emitters' products are
/// looked at first.
const FIRST_LOOK: usize = 64;

/// How many emitters a receiver's search takes in drive order (no more than half the
/// site's, but past the first look) to find partners among by frequency; past that,
/// partners are found among all the site's emitters, which then costs about as much.
/// Measured on the regional study (100,000 emitters): 1,024 beat 512 and 4,096 by a fifth
/// to a half.
const POOL: usize = 1024;

/// Brings the strongest bounds of `order[*ready..]` to the front of that part, strongest
/// first, until at least `upto` of `order` are in place (more, to spread the work).
fn bring_forward(order: &mut [usize], ready: &mut usize, upto: usize, bounds: &[f64]) {
    let len = order.len();
    if upto.min(len) <= *ready {
        return;
    }
    let target = upto.max(2 * *ready).max(FIRST_SET).min(len);
    let cmp = |a: &usize, b: &usize| bounds[*b].total_cmp(&bounds[*a]).then(a.cmp(b));
    let rest = &mut order[*ready..];
    let take = target - *ready;
    if take < rest.len() {
        rest.select_nth_unstable_by(take - 1, cmp);
    }
    rest[..take].sort_unstable_by(cmp);
    *ready = target;
}

/// The in-channel level of the K-th candidate, where it bounds everything after it: a
/// levelled candidate neither implausible nor away from the fix.
fn kth_level(best: &mut Best) -> Option<f64> {
    best.kth()
        .filter(|c| !c.implausible && !c.away_from_fix)
        .and_then(|c| c.ranking_level_dbm())
}

/// The first `k` candidates of [`crate::site::Site::explain`] (module docs).
pub(crate) fn explain_top(site: &SiteView<'_>, query: &Query, k: usize) -> Result<Explanation> {
    let emitters = site.emitters();
    let carriers = site.carriers();
    let n = emitters.len();
    let inputs = RankInputs {
        placement: Placement::at(query.junction),
        model: query.model,
        logbook: query.logbook.as_ref(),
        heard: &[],
    };
    let ranker = Ranker::lazy(emitters, carriers, &query.params, &inputs);
    let narrow = |p: &Product| {
        query
            .coefficients
            .iter()
            .all(|&(e, kk)| p.coefficient_of(e).unsigned_abs() == kk)
            && query
                .centred_within
                .is_none_or(|r| p.offset(query.params.target).0.abs() <= r.0)
    };
    // The candidates the lists may hold within the memory budget.
    let cap = usize::try_from(site.memory_budget() / BYTES_PER_CANDIDATE).unwrap_or(usize::MAX);
    let over = std::cell::Cell::new(false);
    let mut found = 0usize;
    let mut kept = 0usize;
    let mut complete = true;
    let own = |m: Mechanism| matches!(m, Mechanism::Transmitter | Mechanism::TransmitterIm);
    let rest = |m: Mechanism| !own(m);
    let m = &query.model;
    let sorted = &site.index.by_freq[..];
    // Upper bounds on each emitter's drive at the junction, from lower bounds on its
    // distance: the exact field is worked out only for the emitters of the candidates
    // weighed.
    let at = query.junction.map(crate::nearby::normal);
    let drives = Drives::new(site, m, at);
    let mut best = Best::new(&ranker, k);
    let mut scratch = Vec::with_capacity(4);
    let every = |_: Mechanism| true;
    let keep: &dyn Fn(Mechanism) -> bool = if query.logbook.is_some() {
        &every
    } else {
        &rest
    };
    let mut offer = |best: &mut Best, found: &mut usize, kept: &mut usize, p: Product| -> bool {
        *found += 1;
        if narrow(&p) {
            *kept += 1;
            scratch.clear();
            ranker.evaluate_only(&p, &mut scratch, keep);
            for c in scratch.drain(..) {
                best.offer(c);
            }
            if best.held.len() > cap {
                over.set(true);
            }
        }
        !over.get()
    };
    let fresh = |strong: &[Candidate]| {
        let mut b = Best::new(&ranker, k);
        for c in strong {
            b.place(*c);
        }
        b
    };
    let prunable =
        !ranker.receiver_modelled() && m.drive_exponent >= 0.0 && m.drive_exponent.is_finite();
    // products of these emitters were searched whole, apart
    let mut strong = vec![false; n];
    if query.logbook.is_some() {
        let all: Vec<usize> = (0..n).collect();
        search_among(carriers, &all, query, 2..=MAX_ORDER, &mut |p| {
            offer(&mut best, &mut found, &mut kept, p)
        });
    } else {
        let mut settled = false;
        // the transmitters' own products were searched (before the junction's)
        let mut own_done = false;
        if prunable {
            if let Some(at) = at {
                let mut own_complete = true;
                let mut rest = None;
                let pass = by_drive(
                    site,
                    query,
                    at,
                    &drives,
                    &ranker,
                    k,
                    &mut best,
                    &over,
                    &mut offer,
                    &mut |best, floor| {
                        let floor = (floor > f64::NEG_INFINITY).then_some(floor);
                        own_complete = own_products(
                            site,
                            query,
                            &ranker,
                            &narrow,
                            Some(at),
                            best,
                            cap,
                            &over,
                            floor,
                            &mut rest,
                        );
                    },
                );
                if let (Some(done), false) = (rest, over.get()) {
                    // the transmitters' own products past the walk, from the K-th now held
                    own_complete &= own_rest(
                        site, query, &ranker, &narrow, at, &done, &mut best, cap, &over, None,
                    );
                }
                own_done = true;
                complete &= own_complete;
                (found, kept, settled) = (pass.found, pass.kept, pass.settled);
                complete &= pass.complete && site.index.unlevelled == 0;
            }
        } else {
            // The receiver's own products modelled: their bound takes every carrier at
            // the receiver, so the strongest emitters at the junction have their products
            // searched whole, apart, and the others by whole sets, doubling.
            let ground: Vec<Option<f64>> = (0..n)
                .map(|i| at.and_then(|at| site.index.ground_at_least_m(i, at)))
                .collect();
            let drive: Vec<Option<f64>> = (0..n).map(|i| drives.get(i)).collect();
            let mut by_drive: Vec<(f64, usize)> = drive
                .iter()
                .enumerate()
                .filter_map(|(i, d)| d.map(|d| (d, i)))
                .collect();
            by_drive.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            if by_drive.len() > 2 * STRONG {
                for &(_, i) in &by_drive[..STRONG] {
                    strong[i] = true;
                }
            }
            let strong_count = strong.iter().filter(|s| **s).count();
            let mut strong_best = Best::new(&ranker, k);
            let (mut strong_found, mut strong_kept) = (0usize, 0usize);
            let mut excluded = vec![false; n];
            for x in (0..n).filter(|&x| strong[x]) {
                let open = |y: usize| !excluded[y];
                let ys: Vec<(f64, usize)> = sorted
                    .iter()
                    .filter(|&&y| y != x && !excluded[y])
                    .map(|&y| (drive[y].unwrap_or(f64::NEG_INFINITY), y))
                    .collect();
                search_with(site, x, &open, &ys, &query.params, &mut |p| {
                    offer(&mut strong_best, &mut strong_found, &mut strong_kept, p)
                });
                if over.get() {
                    return Err(site.over_budget(strong_found));
                }
                excluded[x] = true;
            }
            strong_best.compact();
            let strong_held = strong_best.held.clone();
            let bounds = emitter_bounds(&ranker, query, emitters, &strong, &drive, &ground);
            let mut order: Vec<usize> = (0..n)
                .filter(|&i| bounds[i] > f64::NEG_INFINITY && !strong[i])
                .collect();
            let mut ready = 0usize;
            let levelled = order.len();
            best = fresh(&strong_held);
            let mut size = levelled.min(FIRST_SET);
            while levelled > 0 && !over.get() {
                bring_forward(&mut order, &mut ready, size + 1, &bounds);
                best = fresh(&strong_held);
                (found, kept) = (0, 0);
                search_among(carriers, &order[..size], query, 2..=MAX_ORDER, &mut |p| {
                    offer(&mut best, &mut found, &mut kept, p)
                });
                if over.get() {
                    break;
                }
                if let Some(t) = kth_level(&mut best) {
                    if size == levelled || bounds[order[size]] < t {
                        settled = true;
                        complete = size + strong_count == n;
                        break;
                    }
                }
                if size == levelled {
                    break;
                }
                size = (2 * size).min(levelled);
            }
            best.absorb(&strong_best.tally);
            found += strong_found;
            kept += strong_kept;
        }
        let unlevelled = |i: usize| drives.get(i).is_none();
        if !settled && (site.index.unlevelled > 0 || at.is_none()) && n > 0 && !over.get() {
            // Products with an emitter that has no level: unlevelled, by order then offset.
            let all: Vec<usize> = (0..n).collect();
            let max_order = query.params.max_order.min(MAX_ORDER);
            for o in 2..=max_order {
                search_among(carriers, &all, query, o..=o, &mut |p| {
                    if p.terms().any(|t| unlevelled(t.emitter))
                        && !p.terms().any(|t| strong[t.emitter])
                    {
                        offer(&mut best, &mut found, &mut kept, p)
                    } else {
                        true
                    }
                });
                if over.get() {
                    break;
                }
                if best
                    .kth()
                    .is_some_and(|c| c.breakdown.is_some() || c.product.order() <= o)
                {
                    complete = o == max_order;
                    break;
                }
            }
        }
        if !over.get() && !own_done {
            let mut rest = None;
            complete &= own_products(
                site, query, &ranker, &narrow, at, &mut best, cap, &over, None, &mut rest,
            );
            if let (Some(done), Some(at), false) = (rest, at, over.get()) {
                complete &= own_rest(
                    site, query, &ranker, &narrow, at, &done, &mut best, cap, &over, None,
                );
            }
        }
    }
    if over.get() {
        return Err(site.over_budget(found));
    }
    best.compact();
    let Best { held, tally, .. } = best;
    let mut seen = std::collections::HashSet::with_capacity(held.len());
    let products: Vec<Product> = held
        .iter()
        .map(|c| c.product)
        .filter(|p| seen.insert(*p))
        .collect();
    let ranking = ranker.finish(held, tally);
    Ok(Explanation {
        params: query.params,
        model: query.model,
        heard: query.heard.clone(),
        products,
        co_channel: co_channel(carriers, &query.params),
        found,
        kept,
        limit: Some(k),
        complete,
        ranking,
    })
}
