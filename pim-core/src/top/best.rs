//! The bounded list of the best K candidates offered so far, with the counts of all
//! (module docs of [`super`], "Bounded list").

use super::*;

/// The best K candidates offered so far, with the counts of all.
pub(super) struct Best<'r, 'a> {
    pub(super) ranker: &'r Ranker<'a>,
    pub(super) k: usize,
    pub(super) held: Vec<Candidate>,
    pub(super) kth: Option<Candidate>,
    pub(super) tally: Tally,
}

impl<'r, 'a> Best<'r, 'a> {
    pub(super) fn new(ranker: &'r Ranker<'a>, k: usize) -> Self {
        Best {
            ranker,
            k,
            held: Vec::new(),
            kth: None,
            tally: Tally::default(),
        }
    }

    pub(super) fn offer(&mut self, c: Candidate) {
        self.tally.count(&c);
        if c.breakdown.is_some()
            && self
                .tally
                .first_levelled
                .is_none_or(|f| self.ranker.cmp(&c, &f) == Ordering::Less)
        {
            self.tally.first_levelled = Some(c);
        }
        if self.k == 0 {
            return;
        }
        if let Some(kth) = &self.kth {
            if self.ranker.cmp(&c, kth) != Ordering::Less {
                return;
            }
        }
        self.held.push(c);
        if self.held.len() >= self.k.saturating_mul(2).saturating_add(64) {
            self.compact();
        }
    }

    pub(super) fn compact(&mut self) {
        let ranker = self.ranker;
        self.held.sort_by(|a, b| ranker.cmp(a, b));
        self.held.truncate(self.k);
        if self.k > 0 && self.held.len() == self.k {
            self.kth = self.held.last().copied();
        }
    }

    /// Holds `c` without counting it (it was counted where it was found).
    pub(super) fn place(&mut self, c: Candidate) {
        if self.k == 0 {
            return;
        }
        self.held.push(c);
        if self.held.len() >= self.k.saturating_mul(2).saturating_add(64) {
            self.compact();
        }
    }

    /// Adds the counts of `other`, whose candidates were offered apart.
    pub(super) fn absorb(&mut self, other: &Tally) {
        let t = &mut self.tally;
        t.total += other.total;
        t.unlevelled += other.unlevelled;
        t.calibrated |= other.calibrated;
        t.credible |= other.credible;
        t.levelled |= other.levelled;
        if let Some(c) = other.first_levelled {
            if t.first_levelled
                .is_none_or(|f| self.ranker.cmp(&c, &f) == Ordering::Less)
            {
                t.first_levelled = Some(c);
            }
        }
    }

    /// The level of the K-th candidate at the last compaction, where it bounds everything
    /// after it (see [`kth_level`]).
    pub(super) fn kth_level_held(&self) -> Option<f64> {
        self.kth
            .filter(|c| !c.implausible && !c.away_from_fix)
            .and_then(|c| c.ranking_level_dbm())
    }

    /// The K-th candidate, once K are held.
    pub(super) fn kth(&mut self) -> Option<Candidate> {
        self.compact();
        self.kth
    }
}
