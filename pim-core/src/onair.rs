//! On-air evidence: does the interference come and go with a candidate's emitters?
//!
//! A product exists only while every emitter that makes it is on the air. Given when each
//! emitter was on the air (a [`Schedule`]) and the times at which someone listened and
//! noted whether the interference was there ([`Observation`]s), each candidate product
//! gets an [`Evidence`] tally:
//!
//! - `support`: times it was heard with all the candidate's emitters on the air;
//! - `heard_off_air`: times it was heard while one of them was off the air — times the
//!   candidate cannot explain;
//! - `contradictions`: times it was not heard although all of them were on the air;
//! - `unknown`: times at which the on-air state of one of them is not known (and none is
//!   known to be off).
//!
//! **What is on the air when.** An emitter listed in the on-air log is on the air during
//! its intervals, ends included, and off the air at every other time: the log must cover
//! the listening times. An emitter not listed is on the air throughout when the emitter
//! file marks it `continuous`, otherwise its state is unknown.
//!
//! **Ranking rule.** Where evidence is given it comes before the predicted level (see
//! [`crate::rank`]), compared in this order:
//! 1. fewer `heard_off_air` first: each is a time the candidate cannot have made the
//!    interference (unless the log is wrong);
//! 2. more `support` first: times the candidate explains;
//! 3. fewer `contradictions` first. This is the weakest: a corroded joint is often
//!    intermittent, with wind, temperature and load (common practice), so silence while
//!    every emitter transmits counts against a candidate only between otherwise equal
//!    ones.
//!
//! Candidates whose emitters' state is unknown gather no support and so follow the
//! candidates the log confirms, but precede any that the log contradicts at a heard time.

use std::cmp::{Ordering, Reverse};

use serde::Serialize;
use time::OffsetDateTime;

use crate::emitter::{Emitter, Keying};
use crate::intermod::Product;

/// A span of time during which an emitter was on the air, ends included.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Interval {
    /// When it went on the air.
    pub start: OffsetDateTime,
    /// When it went off the air.
    pub end: OffsetDateTime,
}

/// An emitter's state at one time.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OnAir {
    /// On the air at that time.
    Yes,
    /// Off the air at that time.
    No,
    /// Not known at that time (not in the on-air log, not continuous).
    Unknown,
}

/// When each emitter was on the air.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Schedule {
    /// By emitter index: the merged intervals, sorted, or `None` when not logged.
    logged: Vec<Option<Vec<Interval>>>,
    /// By emitter index: on the air throughout when not logged.
    continuous: Vec<bool>,
}

impl Schedule {
    /// Builds the schedule of `emitters` from `(emitter index, interval)` pairs; emitters
    /// without intervals are on the air throughout when keyed `continuous`, otherwise
    /// unknown. Indices outside `emitters` are ignored.
    pub fn new(emitters: &[Emitter], intervals: &[(usize, Interval)]) -> Schedule {
        let mut logged: Vec<Option<Vec<Interval>>> = vec![None; emitters.len()];
        for &(e, iv) in intervals {
            if let Some(slot) = logged.get_mut(e) {
                slot.get_or_insert_with(Vec::new).push(iv);
            }
        }
        for list in logged.iter_mut().flatten() {
            list.sort_by_key(|iv| (iv.start, iv.end));
            let mut merged: Vec<Interval> = Vec::with_capacity(list.len());
            for &iv in list.iter() {
                match merged.last_mut() {
                    Some(last) if iv.start <= last.end => last.end = last.end.max(iv.end),
                    _ => merged.push(iv),
                }
            }
            *list = merged;
        }
        Schedule {
            logged,
            continuous: emitters
                .iter()
                .map(|e| e.keyed == Some(Keying::Continuous))
                .collect(),
        }
    }

    /// Whether emitter `emitter` was on the air at `at`.
    pub fn state(&self, emitter: usize, at: OffsetDateTime) -> OnAir {
        match self.logged.get(emitter) {
            Some(Some(list)) => {
                // The last interval starting at or before `at`.
                let i = list.partition_point(|iv| iv.start <= at);
                if i > 0 && at <= list[i - 1].end {
                    OnAir::Yes
                } else {
                    OnAir::No
                }
            }
            _ if self.continuous.get(emitter).copied().unwrap_or(false) => OnAir::Yes,
            _ => OnAir::Unknown,
        }
    }

    /// Marks emitter `emitter` as logged: off the air at every time outside the
    /// intervals it has (none, if it was never on). A recording that watched an emitter's
    /// channel and never saw it knows it was off throughout.
    pub fn mark_logged(&mut self, emitter: usize) {
        if let Some(slot) = self.logged.get_mut(emitter) {
            slot.get_or_insert_with(Vec::new);
        }
    }

    /// Whether the emitter has intervals in the log.
    pub fn is_logged(&self, emitter: usize) -> bool {
        matches!(self.logged.get(emitter), Some(Some(_)))
    }
}

/// A time at which someone listened, and whether the interference was there.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Observation {
    /// When the channel was listened to.
    pub at: OffsetDateTime,
    /// Whether the carrier was heard then.
    pub heard: bool,
}

/// What the log says about one candidate (see the module docs).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Evidence {
    /// Times heard with all the product's emitters on the air.
    pub support: u32,
    /// Times silent although all of them were on the air.
    pub contradictions: u32,
    /// Times heard while one of them was off the air (the product cannot have made those).
    pub heard_off_air: u32,
    /// Times with an emitter of unknown state.
    pub unknown: u32,
}

impl Evidence {
    /// The ranking rule of the module docs: `Less` when `self` ranks first.
    pub fn ranking_cmp(&self, other: &Evidence) -> Ordering {
        let key = |e: &Evidence| (e.heard_off_air, Reverse(e.support), e.contradictions);
        key(self).cmp(&key(other))
    }
}

/// The on-air schedule with the listening times, ready to judge candidates.
#[derive(Clone, Debug, PartialEq)]
pub struct Logbook {
    /// When each emitter was on the air.
    pub schedule: Schedule,
    /// When the channel was listened to, and what was heard.
    pub observations: Vec<Observation>,
    /// By emitter index, its state at each observation.
    states: Vec<Vec<OnAir>>,
}

impl Logbook {
    /// A logbook of `schedule` and `observations` (sorted by time here).
    pub fn new(schedule: Schedule, observations: Vec<Observation>) -> Logbook {
        let states = (0..schedule.continuous.len())
            .map(|e| {
                observations
                    .iter()
                    .map(|o| schedule.state(e, o.at))
                    .collect()
            })
            .collect();
        Logbook {
            schedule,
            observations,
            states,
        }
    }

    /// How many times the interference was heard.
    pub fn heard_count(&self) -> usize {
        self.observations.iter().filter(|o| o.heard).count()
    }

    /// The tally for one candidate.
    pub fn evidence(&self, product: &Product) -> Evidence {
        let mut ev = Evidence::default();
        for (i, o) in self.observations.iter().enumerate() {
            let mut all = OnAir::Yes;
            for t in product.terms() {
                match self.states.get(t.emitter).map_or(OnAir::Unknown, |s| s[i]) {
                    OnAir::No => {
                        all = OnAir::No;
                        break;
                    }
                    OnAir::Unknown => all = OnAir::Unknown,
                    OnAir::Yes => {}
                }
            }
            match (all, o.heard) {
                (OnAir::Yes, true) => ev.support += 1,
                (OnAir::Yes, false) => ev.contradictions += 1,
                (OnAir::No, true) => ev.heard_off_air += 1,
                (OnAir::No, false) => {}
                (OnAir::Unknown, _) => ev.unknown += 1,
            }
        }
        ev
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::freq::Hz;
    use crate::intermod::Term;
    use time::macros::datetime;

    fn iv(start: OffsetDateTime, end: OffsetDateTime) -> Interval {
        Interval { start, end }
    }

    fn emitters() -> Vec<Emitter> {
        let mut e: Vec<Emitter> = ["A", "B", "FM", "C"]
            .iter()
            .map(|id| Emitter::new(*id, Hz(1), Hz(0)))
            .collect();
        e[2].keyed = Some(Keying::Continuous);
        e
    }

    #[test]
    fn states_follow_the_log_and_the_keying() {
        let s = Schedule::new(
            &emitters(),
            &[
                (
                    0,
                    iv(
                        datetime!(2025-06-14 09:00 UTC),
                        datetime!(2025-06-14 09:10 UTC),
                    ),
                ),
                (
                    0,
                    iv(
                        datetime!(2025-06-14 09:05 UTC),
                        datetime!(2025-06-14 09:20 UTC),
                    ),
                ),
                (
                    1,
                    iv(
                        datetime!(2025-06-14 10:00 UTC),
                        datetime!(2025-06-14 10:30 UTC),
                    ),
                ),
            ],
        );
        assert_eq!(s.state(0, datetime!(2025-06-14 09:15 UTC)), OnAir::Yes);
        assert_eq!(s.state(0, datetime!(2025-06-14 09:20 UTC)), OnAir::Yes);
        assert_eq!(s.state(0, datetime!(2025-06-14 09:20:01 UTC)), OnAir::No);
        assert_eq!(s.state(0, datetime!(2025-06-14 08:59 UTC)), OnAir::No);
        assert_eq!(s.state(1, datetime!(2025-06-14 11:00 +01:00)), OnAir::Yes);
        assert_eq!(s.state(2, datetime!(2025-06-14 03:00 UTC)), OnAir::Yes);
        assert_eq!(s.state(3, datetime!(2025-06-14 09:15 UTC)), OnAir::Unknown);
    }

    #[test]
    fn evidence_counts_each_kind_of_time() {
        let s = Schedule::new(
            &emitters(),
            &[
                (
                    0,
                    iv(
                        datetime!(2025-06-14 09:00 UTC),
                        datetime!(2025-06-14 10:00 UTC),
                    ),
                ),
                (
                    1,
                    iv(
                        datetime!(2025-06-14 09:30 UTC),
                        datetime!(2025-06-14 11:00 UTC),
                    ),
                ),
            ],
        );
        let obs = |h: u8, m: u8, heard| Observation {
            at: datetime!(2025-06-14 00:00 UTC)
                .replace_hour(h)
                .and_then(|t| t.replace_minute(m))
                .unwrap(),
            heard,
        };
        let book = Logbook::new(
            s,
            vec![
                obs(9, 45, true),   // A and B on
                obs(9, 50, false),  // A and B on, silent
                obs(9, 15, true),   // B off
                obs(10, 30, false), // A off, silent
            ],
        );
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let ab = Product::new(&[t(0, 2), t(1, -1)], Hz(1));
        assert_eq!(
            book.evidence(&ab),
            Evidence {
                support: 1,
                contradictions: 1,
                heard_off_air: 1,
                unknown: 0
            }
        );
        let a_fm = Product::new(&[t(0, 1), t(2, 1)], Hz(1));
        assert_eq!(
            book.evidence(&a_fm),
            Evidence {
                support: 2,
                contradictions: 1,
                heard_off_air: 0,
                unknown: 0
            }
        );
        let a_c = Product::new(&[t(0, 1), t(3, 1)], Hz(1));
        // Where A is off the state is known (off); elsewhere C makes it unknown.
        assert_eq!(
            book.evidence(&a_c),
            Evidence {
                support: 0,
                contradictions: 0,
                heard_off_air: 0,
                unknown: 3
            }
        );
        assert_eq!(
            book.evidence(&a_fm).ranking_cmp(&book.evidence(&ab)),
            Ordering::Less
        );
        assert_eq!(
            book.evidence(&a_c).ranking_cmp(&book.evidence(&ab)),
            Ordering::Less
        );
        assert_eq!(
            book.evidence(&a_fm).ranking_cmp(&book.evidence(&a_c)),
            Ordering::Less
        );
    }
}
