//! Greedy passes for a channel plan, with a checker that evaluates only the products a
//! new channel adds to a conflict-free set: those it makes with one or two chosen
//! channels (landing on a chosen channel, on itself or on a protected frequency) and
//! those of two or three chosen channels landing on it. The work per check grows as the
//! square of the chosen set, not with the candidates.

use crate::emitter::Carrier;
use crate::freq::Hz;
use crate::intermod::coefficient_sets;

/// Fixed seed of the random orders, so that runs repeat.
const SEED: u64 = 0x5EED_CAB1_E000_0001;

/// Random orders tried before the exact search.
const SEED_SHUFFLES: usize = 6;

/// Checks whether a candidate can join a conflict-free set.
pub struct Checker<'a> {
    cands: &'a [Carrier],
    protected: &'a [Carrier],
    guard2: i64,
    max_bw: i64,
    pairs: Vec<(i64, i64)>,
    triples: Vec<[i64; 3]>,
}

impl<'a> Checker<'a> {
    /// `cands` and `protected` sorted by frequency.
    pub fn new(cands: &'a [Carrier], protected: &'a [Carrier], order: u32, guard: Hz) -> Self {
        let max_bw = cands
            .iter()
            .chain(protected)
            .map(|c| c.bandwidth.0)
            .max()
            .unwrap_or(0);
        Checker {
            cands,
            protected,
            guard2: 2 * guard.0,
            max_bw,
            pairs: coefficient_sets(2, order)
                .into_iter()
                .map(|v| (v[0], v[1]))
                .collect(),
            triples: coefficient_sets(3, order)
                .into_iter()
                .map(|v| [v[0], v[1], v[2]])
                .collect(),
        }
    }

    pub fn len(&self) -> usize {
        self.cands.len()
    }

    fn f(&self, i: usize) -> i64 {
        self.cands[i].freq.0
    }

    fn b(&self, i: usize) -> i64 {
        self.cands[i].bandwidth.0
    }

    /// Whether a product at `fp` of width `bp` lands on `target`.
    fn lands_on(&self, fp: i64, bp: i64, target: &Carrier) -> bool {
        2 * (fp - target.freq.0).abs() <= bp + target.bandwidth.0 + self.guard2
    }

    /// Whether a product lands on a chosen channel, on `c` or on a protected frequency.
    fn lands(&self, fp: i64, bp: i64, chosen: &[usize], c: usize) -> bool {
        if fp <= 0 {
            return false;
        }
        let w = bp + self.max_bw + self.guard2;
        if self.lands_on(fp, bp, &self.cands[c]) {
            return true;
        }
        let lo = chosen.partition_point(|&i| 2 * self.f(i) < 2 * fp - w);
        for &i in &chosen[lo..] {
            if 2 * self.f(i) > 2 * fp + w {
                break;
            }
            if self.lands_on(fp, bp, &self.cands[i]) {
                return true;
            }
        }
        let lo = self
            .protected
            .partition_point(|p| 2 * p.freq.0 < 2 * fp - w);
        self.protected[lo..]
            .iter()
            .take_while(|p| 2 * p.freq.0 <= 2 * fp + w)
            .any(|p| self.lands_on(fp, bp, p))
    }

    /// Whether candidate `c` can join `chosen` (conflict-free, ascending indices, so in
    /// frequency order) and keep it conflict-free.
    pub fn can_add(&self, chosen: &[usize], c: usize) -> bool {
        let (fc, bc) = (self.f(c), self.b(c));
        let target = self.cands[c];
        for (x, &a) in chosen.iter().enumerate() {
            let (fa, ba) = (self.f(a), self.b(a));
            for &(k1, k2) in &self.pairs {
                // c with one chosen channel, landing anywhere that matters.
                let bp = k1.abs() * bc + k2.abs() * ba;
                if self.lands(k1 * fc + k2 * fa, bp, chosen, c) {
                    return false;
                }
            }
            for &b in &chosen[x + 1..] {
                let (fb, bb) = (self.f(b), self.b(b));
                for &(k1, k2) in &self.pairs {
                    // Two chosen channels landing on c.
                    let fp = k1 * fa + k2 * fb;
                    if fp > 0 && self.lands_on(fp, k1.abs() * ba + k2.abs() * bb, &target) {
                        return false;
                    }
                }
                for &[k1, k2, k3] in &self.triples {
                    // c with two chosen channels.
                    let bp = k1.abs() * bc + k2.abs() * ba + k3.abs() * bb;
                    if self.lands(k1 * fc + k2 * fa + k3 * fb, bp, chosen, c) {
                        return false;
                    }
                    // Three chosen channels landing on c: solve for the third, d, with
                    // 2·|k3·f_d − r| within the window.
                    let r = fc - k1 * fa - k2 * fb;
                    let fixed_bw = k1.abs() * ba + k2.abs() * bb + bc + self.guard2;
                    let m = k3.abs();
                    let w = fixed_bw + m * self.max_bw;
                    let t = if k3 > 0 { 2 * r } else { -2 * r };
                    let lo = chosen.partition_point(|&i| 2 * m * self.f(i) < t - w);
                    for &d in &chosen[lo..] {
                        if 2 * m * self.f(d) > t + w {
                            break;
                        }
                        if d == a || d == b {
                            continue;
                        }
                        let fp = k1 * fa + k2 * fb + k3 * self.f(d);
                        if fp > 0
                            && self.lands_on(
                                fp,
                                fixed_bw - bc - self.guard2 + m * self.b(d),
                                &target,
                            )
                        {
                            return false;
                        }
                    }
                }
            }
        }
        true
    }

    /// One greedy pass: each candidate in `order` joins when it can.
    pub fn pass(
        &self,
        order: impl IntoIterator<Item = usize>,
        out_of_time: &dyn Fn() -> bool,
    ) -> Vec<usize> {
        let mut chosen: Vec<usize> = Vec::new();
        for (step, c) in order.into_iter().enumerate() {
            if step % 64 == 63 && out_of_time() {
                break;
            }
            if self.can_add(&chosen, c) {
                let at = chosen.partition_point(|&i| i < c);
                chosen.insert(at, c);
            }
        }
        chosen
    }
}

/// Random passes stop after this many in a row find no larger set, so that a search
/// without a time limit ends.
pub const STALE_PASSES: u32 = 2_000;

/// xorshift64 (Marsaglia 2003).
struct Shuffler(u64);

impl Shuffler {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    /// A random order of 0..n (Fisher–Yates).
    fn order(&mut self, n: usize) -> Vec<usize> {
        let mut v: Vec<usize> = (0..n).collect();
        for i in (1..n).rev() {
            let j = (self.next() % (i as u64 + 1)) as usize;
            v.swap(i, j);
        }
        v
    }
}

/// The largest set from passes in ascending, descending and a few fixed random orders.
pub fn seed_passes(checker: &Checker, out_of_time: &dyn Fn() -> bool) -> Vec<usize> {
    let n = checker.len();
    let mut best = checker.pass(0..n, out_of_time);
    let down = checker.pass((0..n).rev(), out_of_time);
    if down.len() > best.len() {
        best = down;
    }
    let mut rng = Shuffler(SEED);
    for _ in 0..SEED_SHUFFLES {
        if out_of_time() {
            break;
        }
        let set = checker.pass(rng.order(n), out_of_time);
        if set.len() > best.len() {
            best = set;
        }
    }
    best
}

/// Passes in random orders until `out_of_time`; a set larger than `beat`, if one is found.
pub fn random_passes(
    checker: &Checker,
    beat: usize,
    out_of_time: &dyn Fn() -> bool,
) -> Option<Vec<usize>> {
    let mut rng = Shuffler(SEED ^ 0xA5A5_A5A5);
    let mut best: Option<Vec<usize>> = None;
    let mut best_len = beat;
    let mut since_better = 0;
    while !out_of_time() && since_better < STALE_PASSES {
        let set = checker.pass(rng.order(checker.len()), out_of_time);
        since_better += 1;
        if set.len() > best_len {
            best_len = set.len();
            best = Some(set);
            since_better = 0;
        }
        if best_len == checker.len() {
            break;
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::{grid, is_conflict_free};

    #[test]
    fn checker_agrees_with_the_product_search() {
        // Every subset of a small grid with a protected frequency and a guard: adding a
        // channel to a conflict-free set is allowed exactly when the result is free.
        let g = grid(Hz(150_000_000), Hz(10_000), 9);
        let prot = [Carrier {
            freq: Hz(150_130_000),
            bandwidth: Hz(5_000),
        }];
        for order in [3, 5] {
            let checker = Checker::new(&g, &prot, order, Hz(2_000));
            for mask in 0u32..(1 << g.len()) {
                let set: Vec<usize> = (0..g.len()).filter(|i| mask & (1 << i) != 0).collect();
                let carriers: Vec<Carrier> = set.iter().map(|&i| g[i]).collect();
                if !is_conflict_free(&carriers, &prot, order, Hz(2_000)) {
                    continue;
                }
                for c in (0..g.len()).filter(|c| !set.contains(c)) {
                    let mut with = carriers.clone();
                    with.push(g[c]);
                    assert_eq!(
                        checker.can_add(&set, c),
                        is_conflict_free(&with, &prot, order, Hz(2_000)),
                        "order {order}, set {set:?} + {c}"
                    );
                }
            }
        }
    }
}
