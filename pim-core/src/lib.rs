//! # pim-core
//!
//! The library behind `pim`, a tool for finding the source of passive intermodulation
//! (PIM): a corroded joint near a radio site mixing nearby transmitters into a product
//! Σ kᵢ·fᵢ that lands on a receive channel.
//!
//! - [`intermod`]: every product of one to three emitters that hits a channel, exactly,
//!   in whole hertz, with a search that grows as N² rather than N³.
//! - [`rank`] and [`level`]: which of those the receiver would hear loudest, from the
//!   field strength at the junction (ITU-R P.525), a power-law junction model with
//!   multinomial form weights, the power inside the channel, and the other mechanisms
//!   (a transmitter's harmonic, transmitter intermodulation, the receiver's own IM).
//! - [`onair`]: whether the interference comes and goes with a candidate's emitters.
//! - [`plan`]: the largest set of channels on which no product of them lands.
//! - [`slope`]: the attenuator and power-step tests, read from the level slope.
//! - [`io`]: the emitter and receiver files, with errors that name file, line and field.
//!
//! ```
//! use pim_core::emitter::Carrier;
//! use pim_core::freq::Hz;
//! use pim_core::intermod::{find_products, SearchParams};
//!
//! // 2·152.84 − 159.34 = 146.34 MHz
//! let tx = [
//!     Carrier { freq: Hz(152_840_000), bandwidth: Hz(16_000) },
//!     Carrier { freq: Hz(159_340_000), bandwidth: Hz(11_250) },
//! ];
//! let params = SearchParams {
//!     target: Hz(146_340_000),
//!     rx_bandwidth: Hz(12_500),
//!     tolerance: Hz(0),
//!     max_order: 3,
//!     max_emitters: 2,
//! };
//! let hits = find_products(&tx, &params);
//! assert_eq!(hits.products.len(), 1);
//! assert_eq!(hits.products[0].order(), 3);
//! ```
//!
//! The library never prints, never exits and holds no file paths in the engine: plain
//! data in, plain data out. Text formats live in [`io`].

#![deny(clippy::unwrap_used, clippy::expect_used)]

pub mod declination;
pub mod emitter;
pub mod error;
pub mod fix;
pub mod freq;
pub mod geo;
pub mod intermod;

pub mod level;
pub mod onair;
pub mod plan;
pub mod rank;
pub mod site;
pub mod slope;
pub mod study;
pub mod ticket;
mod top;
pub mod trace;
pub mod walk;

pub use emitter::{Carrier, Emitter};
pub use error::{Error, ErrorClass, Place, Result};
pub use freq::Hz;
pub use site::{Explanation, Query, Site};
