//! Reading and writing the tool's files. Everything that touches text lives here; the
//! engine works on validated values only.
//!
//! Every reader names the source, the line (the header is line 1) and the field of a bad
//! value, and stops at the first one.

pub mod append;
pub mod channels;
pub mod columns;
pub mod emitters;
pub mod export;
pub mod fieldlog;
pub mod onair;
pub mod output;
pub mod precision;
pub mod readings;
pub mod recording;
pub mod rx_filter;
pub mod spill;
pub mod table;
pub mod text;
pub mod trace;
pub mod track;
pub mod values;

pub use channels::{read_channels, ChannelFile, ListedChannel};
pub use columns::ColumnMap;
pub use emitters::{read_emitters, read_receivers, EmitterFile, ReceiverFile};
pub use onair::{read_heard, read_on_air, Clock};
pub use readings::{read_readings, ReadingsFile};
