//! Intermodulation products: which combinations Σ kᵢ·fᵢ of one to three distinct emitters
//! land in a receive channel.
//!
//! A product of emitters with frequencies fᵢ and nonzero integer coefficients kᵢ sits at
//! f_p = Σ kᵢ·fᵢ (taken only where positive); its order is Σ |kᵢ| and its occupied
//! bandwidth Σ |kᵢ|·Bᵢ (each term's modulation is multiplied by its coefficient; common
//! practice). One emitter with k = 1 is a co-channel signal, reported on its own; one
//! emitter with k ≥ 2 is a harmonic and counts as a product.
//!
//! **Hit rule.** A product hits the receive channel centred on f₀ with width B_rx when
//! `|f_p − f₀| ≤ (B_p + B_rx)/2 + tol`; the edge counts. All arithmetic is in whole hertz
//! (the rule is evaluated doubled, so no rounding enters).
//!
//! **Search.** [`find_products`] groups the emitters by bandwidth class (widths within a
//! factor of four) and sorts each class by frequency. For two emitters it takes each
//! emitter, coefficient pair and partner class and binary-searches the window in which
//! the partner must lie, as wide as that class's widest emitter allows; for three it
//! takes each pair and coefficient triple and sweeps the third's class. The work grows
//! as N² per coefficient set plus the hits themselves. [`oracle::find_products_brute_force`] is the plain enumeration kept as the
//! reference the search is checked against.

pub mod oracle;

use crate::emitter::Carrier;
use crate::freq::Hz;

/// The highest order the search accepts.
pub const MAX_ORDER: u32 = 15;

/// What to look for: the receive channel and how far to search.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SearchParams {
    /// Centre of the receive channel.
    pub target: Hz,
    /// Width of the receive channel.
    pub rx_bandwidth: Hz,
    /// Extra tolerance on each side.
    pub tolerance: Hz,
    /// Highest order Σ|kᵢ| (1..=15).
    pub max_order: u32,
    /// Most distinct emitters in a product (1..=3).
    pub max_emitters: u32,
}

impl Default for SearchParams {
    /// No channel yet (target 0), a 12.5 kHz receive channel, no extra tolerance, orders
    /// up to 7, products of up to three emitters.
    fn default() -> Self {
        SearchParams {
            target: Hz(0),
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 7,
            max_emitters: 3,
        }
    }
}

impl SearchParams {
    /// The hit rule, evaluated in doubled integers:
    /// `2·|f_p − f₀| ≤ B_p + B_rx + 2·tol`.
    pub fn hits(&self, product_freq: Hz, product_bandwidth: Hz) -> bool {
        product_freq.0 > 0
            && 2 * (product_freq.0 - self.target.0).abs()
                <= product_bandwidth.0 + self.rx_bandwidth.0 + 2 * self.tolerance.0
    }
}

/// One emitter's share in a product.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Term {
    /// Index into the emitter list given to the search.
    pub emitter: usize,
    /// kᵢ, the emitter's signed coefficient.
    pub coefficient: i32,
}

/// A product Σ kᵢ·fᵢ over one to three distinct emitters, terms in emitter-index order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Product {
    emitters: [u32; 3],
    coefficients: [i8; 3],
    len: u8,
    /// The product frequency Σ kᵢ·fᵢ.
    pub freq: Hz,
}

impl Product {
    /// Builds a product from its terms (any order; stored by emitter index). Each
    /// coefficient must be nonzero with |k| ≤ 15 and the emitters distinct.
    pub fn new(terms: &[Term], freq: Hz) -> Product {
        let mut sorted = [(0u32, 0i8); 3];
        for (slot, t) in sorted.iter_mut().zip(terms) {
            *slot = (t.emitter as u32, t.coefficient as i8);
        }
        let len = terms.len().min(3);
        sorted[..len].sort_unstable();
        Product {
            emitters: [sorted[0].0, sorted[1].0, sorted[2].0],
            coefficients: [sorted[0].1, sorted[1].1, sorted[2].1],
            len: len as u8,
            freq,
        }
    }

    /// The terms, in emitter-index order.
    pub fn terms(&self) -> impl Iterator<Item = Term> + '_ {
        (0..self.len as usize).map(move |i| Term {
            emitter: self.emitters[i] as usize,
            coefficient: self.coefficients[i] as i32,
        })
    }

    /// How many distinct emitters take part.
    pub fn emitter_count(&self) -> usize {
        self.len as usize
    }

    /// Σ |kᵢ|.
    pub fn order(&self) -> u32 {
        self.coefficients[..self.len as usize]
            .iter()
            .map(|k| k.unsigned_abs() as u32)
            .sum()
    }

    /// Σ |kᵢ|·Bᵢ.
    pub fn bandwidth(&self, carriers: &[Carrier]) -> Hz {
        Hz(self
            .terms()
            .map(|t| t.coefficient.unsigned_abs() as i64 * carriers[t.emitter].bandwidth.0)
            .sum())
    }

    /// f_p − f₀.
    pub fn offset(&self, target: Hz) -> Hz {
        self.freq - target
    }

    /// Whether this is a harmonic (one emitter, k ≥ 2).
    pub fn is_harmonic(&self) -> bool {
        self.len == 1
    }

    /// The coefficient emitter `emitter` carries, 0 when it takes no part.
    pub fn coefficient_of(&self, emitter: usize) -> i32 {
        self.terms()
            .find(|t| t.emitter == emitter)
            .map_or(0, |t| t.coefficient)
    }
}

/// Keeps the products in which every listed emitter carries the listed |k| (0: takes no
/// part), as a power-step test finds it; the order of the rest is kept.
pub fn retain_coefficients(products: &mut Vec<Product>, required: &[(usize, u32)]) {
    products.retain(|p| {
        required
            .iter()
            .all(|&(e, k)| p.coefficient_of(e).unsigned_abs() == k)
    });
}

/// What the search found.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Hits {
    /// Every product that hits the channel, in no particular order.
    pub products: Vec<Product>,
    /// Emitters whose own carrier (k = 1) falls in the channel, by index.
    pub co_channel: Vec<usize>,
}

/// The emitters of one bandwidth class sorted by frequency (then index), as parallel
/// arrays.
struct Class {
    freq: Vec<i64>,
    bandwidth: Vec<i64>,
    index: Vec<u32>,
    max_bandwidth: i64,
}

/// How much wider than its narrowest emitter a bandwidth class may reach.
const CLASS_SPAN: i64 = 4;

/// The narrowest width a class is counted from, Hz: widths below it (plain carriers) share
/// one class.
const CLASS_FLOOR: i64 = 1_000;

/// The emitters grouped by bandwidth: each class holds widths up to [`CLASS_SPAN`] times
/// its narrowest, or the doubled channel-and-tolerance `base` or [`CLASS_FLOOR`] if more,
/// so that a partner's window is only as wide as the widest emitter of its own class
/// (FM broadcast at 200 kHz no longer widens the window among 12.5 kHz land mobile).
/// Classes come narrowest first; a file of similar widths is one class.
fn classes(carriers: &[Carrier], base: i64) -> Vec<Class> {
    let mut order: Vec<usize> = (0..carriers.len()).collect();
    order.sort_by_key(|&i| (carriers[i].bandwidth, carriers[i].freq, i));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut limit = i64::MIN;
    for i in order {
        let w = carriers[i].bandwidth.0;
        if groups.is_empty() || w > limit {
            limit = CLASS_SPAN.saturating_mul(w.max(base).max(CLASS_FLOOR));
            groups.push(Vec::new());
        }
        if let Some(g) = groups.last_mut() {
            g.push(i);
        }
    }
    groups
        .into_iter()
        .map(|mut g| {
            g.sort_by_key(|&i| (carriers[i].freq, i));
            Class {
                freq: g.iter().map(|&i| carriers[i].freq.0).collect(),
                bandwidth: g.iter().map(|&i| carriers[i].bandwidth.0).collect(),
                index: g.iter().map(|&i| i as u32).collect(),
                max_bandwidth: g
                    .iter()
                    .map(|&i| carriers[i].bandwidth.0)
                    .max()
                    .unwrap_or(0),
            }
        })
        .collect()
}

/// Every (coefficient list) of `n` nonzero integers with Σ|k| ≤ `max_order`.
pub(crate) fn coefficient_sets(n: usize, max_order: u32) -> Vec<Vec<i64>> {
    let mut out = Vec::new();
    let mut current = Vec::with_capacity(n);
    fn recurse(n: usize, budget: i64, current: &mut Vec<i64>, out: &mut Vec<Vec<i64>>) {
        if current.len() == n {
            out.push(current.clone());
            return;
        }
        let remaining_after = (n - current.len() - 1) as i64;
        for m in 1..=(budget - remaining_after) {
            for k in [m, -m] {
                current.push(k);
                recurse(n, budget - m, current, out);
                current.pop();
            }
        }
    }
    recurse(n, max_order as i64, &mut current, &mut out);
    out
}

/// Finds every product of one to three distinct emitters that hits the channel (the hit
/// rule in the module docs), and the co-channel emitters. `carriers[i]` is emitter `i`.
pub fn find_products(carriers: &[Carrier], params: &SearchParams) -> Hits {
    let mut hits = Hits {
        products: Vec::new(),
        co_channel: co_channel(carriers, params),
    };
    search_products(carriers, params, 2..=MAX_ORDER, &mut |p| {
        hits.products.push(p)
    });
    hits
}

/// The emitters whose own carrier (k = 1) falls in the channel, by index.
pub fn co_channel(carriers: &[Carrier], params: &SearchParams) -> Vec<usize> {
    carriers
        .iter()
        .enumerate()
        .filter(|(_, c)| params.hits(c.freq, c.bandwidth))
        .map(|(i, _)| i)
        .collect()
}

/// Hands every product that hits the channel, of an order in `orders` (and at most
/// `params.max_order`), to `visit`, one at a time and each once, without keeping them:
/// the memory of the search does not grow with the number of products.
pub fn search_products(
    carriers: &[Carrier],
    params: &SearchParams,
    orders: std::ops::RangeInclusive<u32>,
    visit: &mut dyn FnMut(Product),
) {
    search_products_while(carriers, params, orders, &mut |p| {
        visit(p);
        true
    });
}

/// [`search_products`], stopping as soon as `visit` returns false; returns whether the
/// search ran to its end.
pub fn search_products_while(
    carriers: &[Carrier],
    params: &SearchParams,
    orders: std::ops::RangeInclusive<u32>,
    visit: &mut dyn FnMut(Product) -> bool,
) -> bool {
    let max_order = params.max_order.min(MAX_ORDER).min(*orders.end());
    let min_order = (*orders.start()).max(2);
    if max_order < min_order {
        return true;
    }
    let in_orders = |v: &Vec<i64>| {
        let n: i64 = v.iter().map(|k| k.abs()).sum();
        n >= min_order as i64 && n <= max_order as i64
    };
    let f0 = params.target.0;
    let base = params.rx_bandwidth.0 + 2 * params.tolerance.0;
    let classes = classes(carriers, base);
    let n = carriers.len();

    // One emitter with k ≥ 2: harmonics.
    for (i, c) in carriers.iter().enumerate() {
        for k in min_order as i64..=max_order as i64 {
            let p = Hz(k * c.freq.0);
            if params.hits(p, Hz(k * c.bandwidth.0))
                && !visit(Product::new(
                    &[Term {
                        emitter: i,
                        coefficient: k as i32,
                    }],
                    p,
                ))
            {
                return false;
            }
        }
    }
    if params.max_emitters < 2 || n < 2 {
        return true;
    }

    // Each set of emitters is taken once, in the order (class, frequency, index): the
    // first from any class, each later one from the same class after it or from a later
    // class. The last emitter, with coefficient k, must satisfy 2·k·f ∈ [r2 − w, r2 + w],
    // where r2 = 2·(f₀ − Σ other terms) and w bounds the doubled window with the widest
    // partner of its class. `scan` finds the partners among class.freq[from..] and checks
    // each exactly.
    let scan = |class: &Class,
                from: usize,
                r2: i64,
                k: i64,
                fixed_bw: i64,
                fixed: &[(usize, i64)],
                out: &mut dyn FnMut(Product) -> bool|
     -> bool {
        let f = &class.freq;
        let n = f.len();
        if from >= n {
            return true;
        }
        let (m, t) = if k > 0 { (k, r2) } else { (-k, -r2) };
        let w = fixed_bw + m * class.max_bandwidth + base;
        // Quick reject against the partner's frequency span, without division.
        if t + w < 2 * m * f[from] || t - w > 2 * m * f[n - 1] {
            return true;
        }
        let lo = t - w;
        let start = from + f[from..].partition_point(|&f| 2 * m * f < lo);
        for (j, &fj) in f.iter().enumerate().skip(start) {
            if 2 * m * fj > t + w {
                break;
            }
            let p = Hz(f0 - r2 / 2 + k * fj);
            let bw = Hz(fixed_bw + m * class.bandwidth[j]);
            if params.hits(p, bw) {
                let mut terms = [Term {
                    emitter: 0,
                    coefficient: 0,
                }; 3];
                for (slot, &(e, c)) in terms.iter_mut().zip(fixed) {
                    *slot = Term {
                        emitter: e,
                        coefficient: c as i32,
                    };
                }
                terms[fixed.len()] = Term {
                    emitter: class.index[j] as usize,
                    coefficient: k as i32,
                };
                if !out(Product::new(&terms[..=fixed.len()], p)) {
                    return false;
                }
            }
        }
        true
    };

    let pairs: Vec<(i64, i64)> = coefficient_sets(2, max_order)
        .into_iter()
        .filter(in_orders)
        .map(|v| (v[0], v[1]))
        .collect();
    for (ca, class_a) in classes.iter().enumerate() {
        for a in 0..class_a.freq.len() {
            let (fa, bwa, ia) = (
                class_a.freq[a],
                class_a.bandwidth[a],
                class_a.index[a] as usize,
            );
            for &(k1, k2) in &pairs {
                let r2 = 2 * (f0 - k1 * fa);
                let fixed_bw = k1.abs() * bwa;
                for (cb, class_b) in classes.iter().enumerate().skip(ca) {
                    let from = if cb == ca { a + 1 } else { 0 };
                    if !scan(class_b, from, r2, k2, fixed_bw, &[(ia, k1)], visit) {
                        return false;
                    }
                }
            }
        }
    }

    if params.max_emitters < 3 || max_order < 3 || n < 3 {
        return true;
    }
    // Three emitters a, b, c in that order (classes A ≤ B ≤ C) with coefficients (k1, k2,
    // k3): the third must satisfy 2·|k3|·f_c ∈ [T − w, T + w] with T = sign(k3)·2·(f₀ −
    // k1·f_a − k2·f_b), linear in f_b, and w bounded by the widest emitters of B and C.
    // For each a, coefficient triple and pair of classes, only the run of b whose window
    // meets class C at all is swept (two binary searches), in the direction in which T
    // grows, so the window's lower edge only moves up and one pointer follows it.
    let triples: Vec<[i64; 3]> = coefficient_sets(3, max_order)
        .into_iter()
        .filter(in_orders)
        .map(|v| [v[0], v[1], v[2]])
        .collect();
    for (ca, class_a) in classes.iter().enumerate() {
        for a in 0..class_a.freq.len() {
            let (fa, bwa, ia) = (
                class_a.freq[a],
                class_a.bandwidth[a],
                class_a.index[a] as usize,
            );
            for &[k1, k2, k3] in &triples {
                for (cb, class_b) in classes.iter().enumerate().skip(ca) {
                    for (cc, class_c) in classes.iter().enumerate().skip(cb) {
                        let sweep = ThreeSweep {
                            params,
                            a: (ia, fa, bwa),
                            b_from: if cb == ca { a + 1 } else { 0 },
                            class_b,
                            class_c,
                            same_bc: cc == cb,
                            k: [k1, k2, k3],
                            base,
                        };
                        if !sweep.run(visit) {
                            return false;
                        }
                    }
                }
            }
        }
    }
    true
}

/// One sweep of the three-emitter search: a fixed first emitter and coefficient triple,
/// the second from class B (from `b_from` on), the third from class C (after the second
/// when B and C are the same class).
struct ThreeSweep<'a> {
    params: &'a SearchParams,
    /// The first emitter: index, frequency, width.
    a: (usize, i64, i64),
    b_from: usize,
    class_b: &'a Class,
    class_c: &'a Class,
    same_bc: bool,
    k: [i64; 3],
    base: i64,
}

impl ThreeSweep<'_> {
    /// Hands the hits to `out`; false when `out` stopped the search.
    fn run(&self, out: &mut dyn FnMut(Product) -> bool) -> bool {
        let (ia, fa, bwa) = self.a;
        let [k1, k2, k3] = self.k;
        let (fb, fc) = (&self.class_b.freq, &self.class_c.freq);
        // The second emitter needs a third after it when both share a class.
        let b_end = if self.same_bc {
            fb.len().saturating_sub(1)
        } else {
            fb.len()
        };
        if self.b_from >= b_end || fc.is_empty() {
            return true;
        }
        let c_first = if self.same_bc { self.b_from + 1 } else { 0 };
        let n = fc.len();
        let m = k3.abs();
        let sign = k3.signum();
        let w = k1.abs() * bwa
            + k2.abs() * self.class_b.max_bandwidth
            + m * self.class_c.max_bandwidth
            + self.base;
        let f0 = self.params.target.0;
        let t0 = sign * 2 * (f0 - k1 * fa);
        let slope = -sign * 2 * k2;
        // Only the second emitters whose window meets the third's span [low, high]: T is
        // monotone in f_b, so they are one run of class B, found by two binary searches.
        let (low, high) = (2 * m * fc[c_first], 2 * m * fc[n - 1]);
        let bs = &fb[self.b_from..b_end];
        let t = |f: i64| t0 + slope * f;
        let (start, end) = if slope > 0 {
            (
                bs.partition_point(|&f| t(f) + w < low),
                bs.partition_point(|&f| t(f) - w <= high),
            )
        } else {
            (
                bs.partition_point(|&f| t(f) - w > high),
                bs.partition_point(|&f| t(f) + w >= low),
            )
        };
        if start >= end {
            return true;
        }
        let (start, end) = (self.b_from + start, self.b_from + end);
        // The window's lower edge at the first second emitter swept; it only rises after.
        let t_first = t(fb[if slope > 0 { start } else { end - 1 }]);
        let mut lo = c_first + fc[c_first..].partition_point(|&f| 2 * m * f < t_first - w);
        // Some(false): no partner for any later b; None: the visitor stopped the search
        let mut sweep = |b: usize, out: &mut dyn FnMut(Product) -> bool| -> Option<bool> {
            let t = t(fb[b]);
            if t - w > high {
                return Some(false); // T only grows from here: no partner for later b
            }
            while lo < n && 2 * m * fc[lo] < t - w {
                lo += 1;
            }
            let fixed = k1 * fa + k2 * fb[b];
            let fixed_bw = k1.abs() * bwa + k2.abs() * self.class_b.bandwidth[b];
            let from = if self.same_bc { lo.max(b + 1) } else { lo };
            for (c, &f) in fc.iter().enumerate().skip(from) {
                if 2 * m * f > t + w {
                    break;
                }
                let p = Hz(fixed + k3 * f);
                if self
                    .params
                    .hits(p, Hz(fixed_bw + m * self.class_c.bandwidth[c]))
                    && !out(Product::new(
                        &[
                            Term {
                                emitter: ia,
                                coefficient: k1 as i32,
                            },
                            Term {
                                emitter: self.class_b.index[b] as usize,
                                coefficient: k2 as i32,
                            },
                            Term {
                                emitter: self.class_c.index[c] as usize,
                                coefficient: k3 as i32,
                            },
                        ],
                        p,
                    ))
                {
                    return None;
                }
            }
            Some(true)
        };
        if slope > 0 {
            for b in start..end {
                match sweep(b, out) {
                    Some(true) => {}
                    Some(false) => break,
                    None => return false,
                }
            }
        } else {
            for b in (start..end).rev() {
                match sweep(b, out) {
                    Some(true) => {}
                    Some(false) => break,
                    None => return false,
                }
            }
        }
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(mhz_hz: i64, bw: i64) -> Carrier {
        Carrier {
            freq: Hz(mhz_hz),
            bandwidth: Hz(bw),
        }
    }

    #[test]
    fn coefficient_sets_count() {
        // Two nonzero coefficients with |k1|+|k2| ≤ 3: (1,1),(1,2),(2,1) × 4 signs.
        assert_eq!(coefficient_sets(2, 3).len(), 12);
        assert_eq!(coefficient_sets(3, 3).len(), 8);
        assert_eq!(coefficient_sets(3, 5).len(), 80);
    }

    #[test]
    fn finds_two_tone_third_order() {
        // 2·150 − 153.6 = 146.4 MHz
        let tx = [c(150_000_000, 0), c(153_600_000, 0)];
        let p = SearchParams {
            target: Hz(146_400_000),
            rx_bandwidth: Hz(0),
            tolerance: Hz(0),
            max_order: 3,
            max_emitters: 3,
        };
        let hits = find_products(&tx, &p);
        assert_eq!(hits.products.len(), 1);
        let t: Vec<Term> = hits.products[0].terms().collect();
        assert_eq!(
            t[0],
            Term {
                emitter: 0,
                coefficient: 2
            }
        );
        assert_eq!(
            t[1],
            Term {
                emitter: 1,
                coefficient: -1
            }
        );
        assert_eq!(hits.products[0].order(), 3);
    }

    #[test]
    fn coefficients_narrow_the_products() {
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let a = Product::new(&[t(0, 2), t(1, -1)], Hz(1));
        let b = Product::new(&[t(0, 1), t(1, 1), t(2, -1)], Hz(2));
        assert_eq!(a.coefficient_of(1), -1);
        assert_eq!(a.coefficient_of(2), 0);
        let mut v = vec![a, b];
        retain_coefficients(&mut v, &[(0, 2)]);
        assert_eq!(v, vec![a]);
        let mut v = vec![a, b];
        retain_coefficients(&mut v, &[(2, 0)]);
        assert_eq!(v, vec![a]);
        let mut v = vec![a, b];
        retain_coefficients(&mut v, &[(1, 1), (2, 1)]);
        assert_eq!(v, vec![b]);
    }

    #[test]
    fn edge_of_window_is_a_hit() {
        // product 2·100 = 200 MHz, width 2·10 kHz; rx 10 kHz: half-sum 15 kHz.
        let tx = [c(100_000_000, 10_000)];
        let mut p = SearchParams {
            target: Hz(200_015_000),
            rx_bandwidth: Hz(10_000),
            tolerance: Hz(0),
            max_order: 2,
            max_emitters: 1,
        };
        assert_eq!(find_products(&tx, &p).products.len(), 1);
        p.target = Hz(200_015_001);
        assert_eq!(find_products(&tx, &p).products.len(), 0);
    }
}
