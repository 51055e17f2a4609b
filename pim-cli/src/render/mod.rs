//! Turning results into screens and files.

pub mod candidates;
pub mod text_table;
