//! Reading and writing the tool's files. Everything that touches text lives here; the
//! engine works on validated values only.
//!
//! Every reader names the source, the line (the header is line 1) and the field of a bad
//! value, and stops at the first one.

pub mod append;
pub mod emitters;
pub mod export;
pub mod fieldlog;
pub mod table;
pub mod track;

pub use emitters::{read_emitters, read_receivers, EmitterFile, ReceiverFile};
