//! Turning results into screens and files.

pub mod candidates;
pub mod document;
pub mod text_table;
pub mod trace;

// The pictures of the maintenance ticket (map.svg, spectrum.svg) and what they share;
// wired in by the ticket command.
#[allow(dead_code)]
pub mod map;
#[allow(dead_code)]
pub mod picture;
#[allow(dead_code)]
pub mod spectrum;
