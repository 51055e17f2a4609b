//! Branch and bound for the largest set of candidates that contains no conflict whole
//! (a maximum independent set of the conflict hypergraph); the method is described in
//! the module docs of [`crate::plan`].

use super::Conflicts;

/// How often (in nodes, a power of two) the clock is read.
const CLOCK_EVERY: u64 = 4_096;

/// What the search found.
pub struct Outcome {
    /// A set larger than the incumbent, when one was found (candidate indices, ascending).
    pub best: Option<Vec<usize>>,
    /// Whether the search ran to its end, proving the best set (or the incumbent) largest.
    pub complete: bool,
    pub nodes: u64,
}

struct Search<'a, 'b> {
    conflicts: &'a Conflicts,
    /// By conflict, how many of its members are chosen.
    chosen_in: Vec<u8>,
    /// By candidate, how many conflicts it would complete.
    blocked: Vec<u32>,
    chosen: Vec<bool>,
    stack: Vec<usize>,
    best_len: usize,
    best: Option<Vec<usize>>,
    nodes: u64,
    out_of_time: &'b dyn Fn() -> bool,
    stopped: bool,
}

impl Search<'_, '_> {
    /// The only member of conflict `e` not chosen, when all others are.
    fn last_unchosen(&self, e: usize) -> Option<usize> {
        self.conflicts
            .members(e)
            .iter()
            .map(|&m| m as usize)
            .find(|&m| !self.chosen[m])
    }

    fn choose(&mut self, c: usize) {
        self.chosen[c] = true;
        self.stack.push(c);
        for &e in self.conflicts.of(c) {
            let e = e as usize;
            self.chosen_in[e] += 1;
            if self.chosen_in[e] as usize + 1 == self.conflicts.members(e).len() {
                if let Some(u) = self.last_unchosen(e) {
                    self.blocked[u] += 1;
                }
            }
        }
    }

    fn unchoose(&mut self, c: usize) {
        for &e in self.conflicts.of(c) {
            let e = e as usize;
            if self.chosen_in[e] as usize + 1 == self.conflicts.members(e).len() {
                if let Some(u) = self.last_unchosen(e) {
                    self.blocked[u] -= 1;
                }
            }
            self.chosen_in[e] -= 1;
        }
        self.chosen[c] = false;
        self.stack.pop();
    }

    /// Explores every extension of the chosen set by candidates from `from` on.
    fn explore(&mut self, from: usize) {
        self.nodes += 1;
        if self.nodes & (CLOCK_EVERY - 1) == 0 && (self.out_of_time)() {
            self.stopped = true;
        }
        if self.stopped {
            return;
        }
        let n = self.conflicts.candidates();
        let open = (from..n).filter(|&c| self.blocked[c] == 0).count();
        if self.stack.len() + open <= self.best_len {
            return;
        }
        let Some(c) = (from..n).find(|&c| self.blocked[c] == 0) else {
            // Larger than the best (the bound above let it through).
            self.best_len = self.stack.len();
            let mut set = self.stack.clone();
            set.sort_unstable();
            self.best = Some(set);
            return;
        };
        self.choose(c);
        self.explore(c + 1);
        self.unchoose(c);
        // Without c: the bound is rechecked at the next node.
        if self.stack.len() + open - 1 > self.best_len {
            self.explore(c + 1);
        }
    }
}

/// Searches for a set larger than `incumbent` (a conflict-free set of candidates).
pub fn search(
    conflicts: &Conflicts,
    incumbent: &[usize],
    out_of_time: &dyn Fn() -> bool,
) -> Outcome {
    let n = conflicts.candidates();
    let mut s = Search {
        conflicts,
        chosen_in: vec![0; conflicts.len()],
        blocked: vec![0; n],
        chosen: vec![false; n],
        stack: Vec::with_capacity(n),
        best_len: incumbent.len(),
        best: None,
        nodes: 0,
        out_of_time,
        stopped: false,
    };
    s.explore(0);
    Outcome {
        best: s.best,
        complete: !s.stopped,
        nodes: s.nodes,
    }
}
