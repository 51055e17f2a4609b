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
//! - [`site`]: the pipeline as one call: a [`Site`] owns the emitters, a [`Query`] on it
//!   gives an [`Explanation`] (search, narrowing, ranking) that re-ranks at a fix.
//! - [`fix`]: the junction's location from a bearing walk, with an honest region.
//! - [`walk`]: where the next bearing would shrink the region most.
//! - [`trace`]: the peaks of an analyser trace, each classed and explained.
//! - [`ticket`]: what a maintenance ticket rests on (structures near the fix, rank changes).
//!
//! ```
//! use pim_core::{Emitter, Hz, Query, Site};
//!
//! // 2·152.84 − 159.34 = 146.34 MHz
//! let site = Site::new(vec![
//!     Emitter::new("SKP-152", Hz(152_840_000), Hz(16_000)),
//!     Emitter::new("FIRE-DSP", Hz(159_340_000), Hz(11_250)),
//! ]);
//! let mut query = Query::new(Hz(146_340_000));
//! query.params.max_order = 3;
//! let answer = site.explain(&query).unwrap();
//! assert_eq!(answer.products.len(), 1);
//! assert_eq!(answer.products[0].order(), 3);
//! ```
//!
//! The library never prints, never exits, reads no clock and holds no file paths: plain
//! data in, plain data out. Reading and writing the tool's files is the `pim-io` crate's
//! job; output formats and pictures are `pim-report`'s. It does not know the command
//! line: its errors and warnings are values for the caller to word.

#![deny(missing_docs)]
#![deny(clippy::unwrap_used, clippy::expect_used)]

pub mod declination;
pub mod emission;
pub mod emitter;
pub mod error;
pub mod exposure;
pub mod fix;
pub mod freq;
pub mod geo;
pub mod intermod;
pub mod level;
mod nearby;
pub mod onair;
pub mod plan;
mod query;
pub mod rank;
pub mod recording;
pub mod site;
pub mod slope;
pub mod study;
pub mod ticket;
mod top;
pub mod trace;
pub mod walk;

pub use emission::ModulationClass;
pub use emitter::{Carrier, Emitter};
pub use error::{Error, ErrorClass, Place, Result};
pub use fix::{locate, Fix, FixOptions, Method, Reading};
pub use freq::Hz;
pub use geo::GeoPoint;
pub use intermod::{Product, SearchParams};
pub use level::LevelModel;
pub use rank::{Candidate, Placement, Ranking};
pub use site::{Explanation, Query, Site};
/// The date and time types the engine's values carry (the `time` crate), so a caller
/// needs no dependency of its own to build them.
pub use time;
