//! The conflicts of a channel plan as a list of small sets: each the two to four
//! candidates whose joint choice makes a product land on one of them or on a protected
//! frequency (the rule in the module docs of [`crate::plan`]).

use crate::emitter::Carrier;
use crate::freq::Hz;
use crate::intermod::{find_products, SearchParams};

/// Every conflict among a list of candidates, with the conflicts each candidate is in.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Conflicts {
    /// Number of candidates.
    n: usize,
    /// Each conflict's members, sorted, distinct; `len` of them are used.
    members: Vec<([u32; 4], u8)>,
    /// By candidate, the conflicts it is in.
    of: Vec<Vec<u32>>,
}

impl Conflicts {
    /// Lists the conflicts of `candidates` (sorted by frequency) up to `order`, with
    /// `protected` frequencies and `guard`. Gives up (`None`) beyond `max` conflicts or
    /// when `out_of_time` says so.
    pub fn build(
        candidates: &[Carrier],
        protected: &[Carrier],
        order: u32,
        guard: Hz,
        max: usize,
        out_of_time: &dyn Fn() -> bool,
    ) -> Option<Conflicts> {
        let n = candidates.len();
        let mut members: Vec<([u32; 4], u8)> = Vec::new();
        let targets = candidates
            .iter()
            .enumerate()
            .map(|(i, c)| (Some(i), c))
            .chain(protected.iter().map(|c| (None, c)));
        for (target_index, target) in targets {
            if out_of_time() {
                return None;
            }
            let params = SearchParams {
                target: target.freq,
                rx_bandwidth: target.bandwidth,
                tolerance: guard,
                max_order: order,
                max_emitters: 3,
            };
            for p in find_products(candidates, &params).products {
                if p.emitter_count() < 2 {
                    continue; // a harmonic of one channel
                }
                let mut set = [u32::MAX; 4];
                let mut len = 0;
                for t in p.terms().map(|t| t.emitter).chain(target_index) {
                    let t = t as u32;
                    if !set[..len].contains(&t) {
                        set[len] = t;
                        len += 1;
                    }
                }
                set[..len].sort_unstable();
                members.push((set, len as u8));
            }
            if members.len() > 2 * max {
                members.sort_unstable();
                members.dedup();
                if members.len() > max {
                    return None;
                }
            }
        }
        members.sort_unstable();
        members.dedup();
        if members.len() > max {
            return None;
        }
        let mut of: Vec<Vec<u32>> = vec![Vec::new(); n];
        for (e, (set, len)) in members.iter().enumerate() {
            for &m in &set[..*len as usize] {
                of[m as usize].push(e as u32);
            }
        }
        Some(Conflicts { n, members, of })
    }

    /// Number of candidates.
    pub fn candidates(&self) -> usize {
        self.n
    }

    /// Number of conflicts.
    pub fn len(&self) -> usize {
        self.members.len()
    }

    /// Whether no conflict was listed.
    pub fn is_empty(&self) -> bool {
        self.members.is_empty()
    }

    /// The members of conflict `e`.
    pub fn members(&self, e: usize) -> &[u32] {
        let (set, len) = &self.members[e];
        &set[..*len as usize]
    }

    /// The conflicts candidate `c` is in.
    pub fn of(&self, c: usize) -> &[u32] {
        &self.of[c]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::grid;

    #[test]
    fn third_order_conflicts_on_a_grid() {
        // 0..4 on a grid: arithmetic triples {a, b, c} with 2b = a + c (2fb − fa = fc),
        // and quadruples a + d = b + c.
        let g = grid(Hz(150_000_000), Hz(12_500), 5);
        let c = Conflicts::build(&g, &[], 3, Hz::ZERO, 1_000, &|| false).unwrap();
        let sets: Vec<Vec<u32>> = (0..c.len()).map(|e| c.members(e).to_vec()).collect();
        for want in [
            vec![0, 1, 2],
            vec![0, 2, 4],
            vec![1, 2, 3],
            vec![2, 3, 4],
            vec![0, 1, 2, 3],
            vec![0, 1, 3, 4],
        ] {
            assert!(sets.contains(&want), "{want:?} missing from {sets:?}");
        }
        // {0, 1, 3} has differences 1, 2, 3: no conflict lies within it.
        assert!(sets
            .iter()
            .all(|s| !s.iter().all(|m| [0, 1, 3].contains(m))));
        assert!(Conflicts::build(&g, &[], 3, Hz::ZERO, 3, &|| false).is_none());
    }
}
