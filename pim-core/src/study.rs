//! Many receivers studied at once: each receiver's explanation is worked out on one of
//! several threads and handed back in receiver order as soon as it and every earlier one
//! are ready, so the first result is out long before the last is done and memory holds
//! only the results waiting for an earlier one (at most a few per thread).
//!
//! A study of listings shares the site's memory budget among the listings that can be in
//! flight at once ([`listings_in_flight`], [`crate::Site::shared_by`]), so the whole study
//! stays within it.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{mpsc, Condvar, Mutex};

/// How far (in items) a thread may work ahead of the first result not yet handed back,
/// per thread.
const AHEAD_PER_THREAD: usize = 4;

/// How many results [`in_order`] can hold at once on `threads` threads: those being
/// worked out and those waiting for an earlier one to be handed back.
pub fn listings_in_flight(threads: usize) -> usize {
    threads.max(1) * AHEAD_PER_THREAD
}

/// Runs `work(i)` for every `i` in `0..count` on `threads` threads and hands each result
/// to `deliver` in order of `i`, from the calling thread. Stops at the first error
/// `deliver` returns, and returns it.
pub fn in_order<T, E, W, D>(count: usize, threads: usize, work: W, mut deliver: D) -> Result<(), E>
where
    T: Send,
    W: Fn(usize) -> T + Sync,
    D: FnMut(usize, T) -> Result<(), E>,
{
    let threads = threads.clamp(1, count.max(1));
    let window = threads * AHEAD_PER_THREAD;
    let next = AtomicUsize::new(0);
    let stop = AtomicBool::new(false);
    // The first index not yet handed back, and a signal when it moves.
    let handed = (Mutex::new(0usize), Condvar::new());
    let (tx, rx) = mpsc::channel::<(usize, T)>();
    std::thread::scope(|scope| {
        for _ in 0..threads {
            let tx = tx.clone();
            let (next, stop, handed, work) = (&next, &stop, &handed, &work);
            scope.spawn(move || loop {
                let i = next.fetch_add(1, Ordering::Relaxed);
                if i >= count {
                    return;
                }
                {
                    let (lock, moved) = handed;
                    let mut first = lock.lock().unwrap_or_else(|e| e.into_inner());
                    while i >= *first + window && !stop.load(Ordering::Relaxed) {
                        first = moved.wait(first).unwrap_or_else(|e| e.into_inner());
                    }
                }
                if stop.load(Ordering::Relaxed) || tx.send((i, work(i))).is_err() {
                    return;
                }
            });
        }
        drop(tx);
        let mut waiting = BTreeMap::new();
        let mut first = 0usize;
        let mut outcome = Ok(());
        for (i, result) in rx.iter() {
            waiting.insert(i, result);
            while let Some(result) = waiting.remove(&first) {
                if let Err(e) = deliver(first, result) {
                    outcome = Err(e);
                    break;
                }
                first += 1;
            }
            let (lock, moved) = &handed;
            *lock.lock().unwrap_or_else(|e| e.into_inner()) = first;
            if outcome.is_err() {
                stop.store(true, Ordering::Relaxed);
            }
            moved.notify_all();
            if outcome.is_err() {
                break;
            }
        }
        outcome
    })
}

/// How bad a receiver's outlook is, from its ranking's first candidate: its level in the
/// channel (higher is worse), then, for a receiver whose first candidate has no level,
/// its order (lower is worse) and offset from the channel's centre (smaller is worse), as
/// the ranking orders candidates. Receivers without a candidate come last.
pub fn worst_first(
    a: (&crate::rank::Ranking, crate::freq::Hz),
    b: (&crate::rank::Ranking, crate::freq::Hz),
) -> std::cmp::Ordering {
    WorstKey::of(a.0, a.1).cmp(&WorstKey::of(b.0, b.1))
}

/// What [`worst_first`] compares of a receiver, kept alone (a few bytes), so that a
/// study can order receivers worst first without holding their listings: sorting keys
/// orders receivers as [`worst_first`] does.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WorstKey {
    /// The first candidate: its level in the channel (dBm) when it has one, its order
    /// and its offset from the channel's centre (Hz, absolute); `None` without one.
    first: Option<(Option<f64>, u32, i64)>,
}

impl WorstKey {
    /// The key of a receiver's ranking, on the channel centred at `target`.
    pub fn of(ranking: &crate::rank::Ranking, target: crate::freq::Hz) -> Self {
        WorstKey {
            first: ranking.candidates.first().map(|c| {
                (
                    c.breakdown.map(|b| b.in_channel_dbm),
                    c.product.order(),
                    c.product.offset(target).0.abs(),
                )
            }),
        }
    }
}

impl Eq for WorstKey {}

impl PartialOrd for WorstKey {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for WorstKey {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        use std::cmp::Ordering as O;
        let ((la, oa, fa), (lb, ob, fb)) = match (self.first, other.first) {
            (Some(x), Some(y)) => (x, y),
            (Some(_), None) => return O::Less,
            (None, Some(_)) => return O::Greater,
            (None, None) => return O::Equal,
        };
        let by_level = match (la, lb) {
            (Some(x), Some(y)) => y.total_cmp(&x),
            (Some(_), None) => O::Less,
            (None, Some(_)) => O::Greater,
            (None, None) => O::Equal,
        };
        by_level.then(oa.cmp(&ob)).then(fa.cmp(&fb))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn results_come_back_in_order_from_several_threads() {
        let mut seen = Vec::new();
        let r: Result<(), ()> = in_order(
            200,
            4,
            |i| {
                // later items finish first now and then
                if i % 7 == 0 {
                    std::thread::sleep(std::time::Duration::from_millis(2));
                }
                i * i
            },
            |i, v| {
                assert_eq!(v, i * i);
                seen.push(i);
                Ok(())
            },
        );
        assert!(r.is_ok());
        assert_eq!(seen, (0..200).collect::<Vec<_>>());
    }

    #[test]
    fn results_in_flight_stay_within_the_count() {
        // each result is alive from its work's start until it is handed back and dropped
        struct Held<'a>(&'a AtomicUsize);
        impl Drop for Held<'_> {
            fn drop(&mut self) {
                self.0.fetch_sub(1, Ordering::SeqCst);
            }
        }
        let (alive, peak) = (AtomicUsize::new(0), AtomicUsize::new(0));
        let threads = 3;
        let r: Result<(), ()> = in_order(
            300,
            threads,
            |i| {
                let now = alive.fetch_add(1, Ordering::SeqCst) + 1;
                peak.fetch_max(now, Ordering::SeqCst);
                if i % 5 == 0 {
                    std::thread::sleep(std::time::Duration::from_millis(1));
                }
                Held(&alive)
            },
            |i, held| {
                // the first ones are slow now and then: later ones wait
                if i % 50 == 0 {
                    std::thread::sleep(std::time::Duration::from_millis(5));
                }
                drop(held);
                Ok(())
            },
        );
        assert!(r.is_ok());
        assert!(peak.load(Ordering::SeqCst) <= listings_in_flight(threads));
        assert_eq!(alive.load(Ordering::SeqCst), 0);
    }

    #[test]
    fn an_error_stops_the_run() {
        let mut seen = 0;
        let r = in_order(
            1_000,
            3,
            |i| i,
            |i, _| {
                seen += 1;
                if i == 10 {
                    Err("closed")
                } else {
                    Ok(())
                }
            },
        );
        assert_eq!(r, Err("closed"));
        assert_eq!(seen, 11);
    }
}
