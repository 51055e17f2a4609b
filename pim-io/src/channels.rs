//! Frequency lists for a channel plan: the candidate channels and the protected receive
//! frequencies. CSV with `freq_mhz` and optional `bw_khz`, `id` and `note`; a frequency
//! listed twice is refused.

use std::collections::HashMap;
use std::io::Read;

use crate::emitters::{bandwidth_field, frequency_field};
use crate::table::{no_rows, Table};
use pim_core::emitter::Carrier;
use pim_core::error::{Error, Result};
use pim_core::freq::Hz;

/// Columns the frequency-list reader understands.
pub const CHANNEL_COLUMNS: &[&str] = &["freq_mhz", "bw_khz", "id", "note"];

/// One listed frequency.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ListedChannel {
    pub id: Option<String>,
    pub freq: Hz,
    /// Zero when the file gives none.
    pub bandwidth: Hz,
    pub note: Option<String>,
    /// The line it came from (header = line 1).
    pub line: u64,
}

impl ListedChannel {
    pub fn carrier(&self) -> Carrier {
        Carrier {
            freq: self.freq,
            bandwidth: self.bandwidth,
        }
    }
}

/// A frequency list read from a file.
#[derive(Clone, Debug, Default)]
pub struct ChannelFile {
    pub channels: Vec<ListedChannel>,
    /// Columns present in the file that the tool does not use.
    pub ignored_columns: Vec<String>,
}

/// Reads a frequency list; `source` names the file in messages.
pub fn read_channels<R: Read>(source: &str, reader: R) -> Result<ChannelFile> {
    let mut table = Table::open(source, reader)?;
    table.require("freq_mhz")?;
    let mut file = ChannelFile {
        ignored_columns: table.unknown_columns(CHANNEL_COLUMNS),
        ..Default::default()
    };
    let mut seen: HashMap<Hz, u64> = HashMap::new();
    while let Some(row) = table.next_row()? {
        let place = |f: &str| row.place(f);
        let text = row
            .get("freq_mhz")
            .ok_or_else(|| Error::input(place("freq_mhz"), "missing frequency"))?;
        let freq = frequency_field(|| place("freq_mhz"), text)?;
        if let Some(first) = seen.insert(freq, row.line) {
            return Err(Error::input(
                place("freq_mhz"),
                format!("{} MHz is already listed on line {first}", freq.mhz_text()),
            ));
        }
        let bandwidth = match row.get("bw_khz") {
            Some(t) => bandwidth_field(|| place("bw_khz"), t)?,
            None => Hz::ZERO,
        };
        file.channels.push(ListedChannel {
            id: match row.get("id") {
                Some(id) => {
                    crate::emitters::checked_id(row.place("id"), id)?;
                    Some(id.to_string())
                }
                None => None,
            },
            freq,
            bandwidth,
            note: row.get("note").map(str::to_string),
            line: row.line,
        });
    }
    if file.channels.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(file)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_channels_and_names_bad_ones() {
        let f = read_channels(
            "ch.csv",
            "id,freq_mhz,bw_khz\nA,151.0125,11.25\n,151.025,\n".as_bytes(),
        )
        .unwrap();
        assert_eq!(f.channels[0].freq, Hz(151_012_500));
        assert_eq!(f.channels[0].bandwidth, Hz(11_250));
        assert_eq!(f.channels[1].id, None);
        assert_eq!(f.channels[1].bandwidth, Hz::ZERO);
        let cases = [
            (
                "freq_mhz\n151.0125\n151.01250\n",
                "ch.csv, line 3, field `freq_mhz`: 151.0125 MHz is already listed on line 2",
            ),
            (
                "freq_mhz,bw_khz\n151.0125,-1\n",
                "ch.csv, line 2, field `bw_khz`: bandwidth -1 kHz is negative",
            ),
            (
                "freq_mhz\n151.01255555555\n",
                "ch.csv, line 2, field `freq_mhz`: `151.01255555555` is finer than 1 Hz",
            ),
            (
                "mhz\n151\n",
                "ch.csv, line 1, field `freq_mhz`: missing column; the header has: mhz",
            ),
        ];
        for (text, want) in cases {
            assert_eq!(
                read_channels("ch.csv", text.as_bytes())
                    .unwrap_err()
                    .to_string(),
                want
            );
        }
    }
}
