//! # pim-report
//!
//! pim's outputs, made from the engine's results: the candidate listings as text tables,
//! JSON, CSV and Markdown; the maintenance ticket as one document model rendered to
//! Markdown and HTML; and the SVG pictures (the map of the walk and the fix, the
//! spectrum of the channel). Everything here returns text or writes to a writer it is
//! given; choosing files and writing them atomically is the binary's job.

pub mod candidates;
pub mod csv_out;
pub mod document;
pub mod emitters;
pub mod explain;
pub mod fix;
pub mod map;
pub mod picture;
pub mod plan;
pub mod readings;
pub mod recording;
pub mod slope;
pub mod spectrum;
pub mod study;
pub mod sweep;
pub mod text_table;
pub mod ticket;
pub mod trace;
pub mod walk;
pub mod waterfall;
