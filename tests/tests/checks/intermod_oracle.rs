//! The product search against the brute-force oracle on random emitter sets: every hit
//! found, none missed, none invented; and every reported product obeys the hit rule.

use std::collections::HashSet;

use pim_core::emitter::Carrier;
use pim_core::freq::Hz;
use pim_core::intermod::oracle::find_products_brute_force;
use pim_core::intermod::{find_products, Product, SearchParams};
use proptest::prelude::*;

fn carriers() -> impl Strategy<Value = Vec<Carrier>> {
    // Clustered frequencies (a VHF/UHF site with a broadcast pair far below) and
    // bandwidths from a plain carrier to a broadcast channel, so windows overlap.
    let one = (
        prop_oneof![
            1 => 500_000i64..2_000_000,
            1 => 80_000_000i64..110_000_000,
            4 => 140_000_000i64..175_000_000,
            2 => 440_000_000i64..470_000_000,
        ],
        prop_oneof![Just(0i64), 0i64..30_000, Just(200_000i64)],
    )
        .prop_map(|(f, bw)| Carrier {
            freq: Hz(f),
            bandwidth: Hz(bw),
        });
    prop::collection::vec(one, 0..20)
}

fn key(p: &Product) -> (Vec<(usize, i32)>, i64) {
    (
        p.terms().map(|t| (t.emitter, t.coefficient)).collect(),
        p.freq.0,
    )
}

proptest! {
    // A fixed seed and no regression files: the same cases on every run and machine.
    #![proptest_config(ProptestConfig { cases: 96, rng_seed: proptest::test_runner::RngSeed::Fixed(20_261_201), failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn search_equals_brute_force(
        tx in carriers(),
        target in 140_000_000i64..175_000_000,
        rx_bw in prop_oneof![Just(0i64), 5_000i64..30_000],
        tol in prop_oneof![Just(0i64), 0i64..2_000_000],
        max_order in 1u32..8,
        max_emitters in 1u32..4,
    ) {
        let params = SearchParams {
            target: Hz(target),
            rx_bandwidth: Hz(rx_bw),
            tolerance: Hz(tol),
            max_order,
            max_emitters,
        };
        let fast = find_products(&tx, &params);
        let slow = find_products_brute_force(&tx, &params);
        let a: HashSet<_> = fast.products.iter().map(key).collect();
        let b: HashSet<_> = slow.products.iter().map(key).collect();
        prop_assert_eq!(a.len(), fast.products.len(), "the search reported a product twice");
        prop_assert_eq!(&a, &b);
        let mut co_fast = fast.co_channel.clone();
        co_fast.sort_unstable();
        let mut co_slow = slow.co_channel.clone();
        co_slow.sort_unstable();
        prop_assert_eq!(co_fast, co_slow);
        for p in &fast.products {
            prop_assert!(params.hits(p.freq, p.bandwidth(&tx)));
            prop_assert!(p.order() <= max_order);
            prop_assert!(p.emitter_count() as u32 <= max_emitters);
            let f: i64 = p.terms().map(|t| t.coefficient as i64 * tx[t.emitter].freq.0).sum();
            prop_assert_eq!(f, p.freq.0);
        }
    }
}

/// A dense site of 40 emitters, wide tolerance: the search and the oracle agree on a set
/// large enough (hundreds of products) that a systematic miss would show.
#[test]
fn dense_site_agrees_with_brute_force() {
    let mut state = 0x2545_f491_4f6c_dd1du64;
    let mut next = move |m: i64| {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state % m as u64) as i64
    };
    let tx: Vec<Carrier> = (0..40)
        .map(|_| Carrier {
            freq: Hz(140_000_000 + next(40_000) * 1_000),
            bandwidth: Hz(next(25_000)),
        })
        .collect();
    let params = SearchParams {
        target: Hz(155_000_000),
        rx_bandwidth: Hz(12_500),
        tolerance: Hz(100_000),
        max_order: 5,
        max_emitters: 3,
    };
    let fast = find_products(&tx, &params);
    let slow = find_products_brute_force(&tx, &params);
    let a: HashSet<_> = fast.products.iter().map(key).collect();
    let b: HashSet<_> = slow.products.iter().map(key).collect();
    assert!(b.len() > 200, "only {} products", b.len());
    assert_eq!(a, b);
    assert_eq!(a.len(), fast.products.len());
}

/// FM broadcast stations (200 kHz) beside 12.5 kHz land mobile and plain carriers: the
/// search takes each bandwidth class with its own window, and must still find exactly the
/// oracle's set, products mixing the classes included.
#[test]
fn mixed_bandwidth_classes_agree_with_brute_force() {
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    let mut next = move |m: i64| {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state % m as u64) as i64
    };
    let mut tx: Vec<Carrier> = Vec::new();
    for i in 0..60 {
        let (freq, bandwidth) = match i % 6 {
            // FM broadcast on its 200 kHz raster, 88–108 MHz
            0 => (88_100_000 + next(100) * 200_000, 200_000),
            // a plain carrier (no modulation given)
            1 => (140_000_000 + next(40_000) * 1_000, 0),
            // UHF land mobile
            2 => (450_000_000 + next(1_600) * 12_500, 12_500),
            // VHF land mobile
            _ => (150_000_000 + next(2_000) * 12_500, 12_500),
        };
        tx.push(Carrier {
            freq: Hz(freq),
            bandwidth: Hz(bandwidth),
        });
    }
    for (target, tol) in [(155_012_500, 0), (160_000_000, 2_500), (98_700_000, 0)] {
        let params = SearchParams {
            target: Hz(target),
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(tol),
            max_order: 5,
            max_emitters: 3,
        };
        let fast = find_products(&tx, &params);
        let slow = find_products_brute_force(&tx, &params);
        let a: HashSet<_> = fast.products.iter().map(key).collect();
        let b: HashSet<_> = slow.products.iter().map(key).collect();
        let mixed = slow
            .products
            .iter()
            .filter(|p| {
                let w: HashSet<i64> = p.terms().map(|t| tx[t.emitter].bandwidth.0).collect();
                w.len() > 1
            })
            .count();
        assert!(
            mixed > 20,
            "only {mixed} products mix widths at {target} Hz"
        );
        assert_eq!(a, b, "at {target} Hz");
        assert_eq!(a.len(), fast.products.len());
    }
}
