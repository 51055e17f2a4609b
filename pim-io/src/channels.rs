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

/// The most channels a grid may have.
pub const MAX_GRID_COUNT: usize = 100_000;

/// A uniform grid of candidate channels: `START,STEP,COUNT`, the start in MHz and the
/// step in kHz unless a unit is written (`150.0,12.5,35`, `150MHz,12.5kHz,35`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Grid {
    pub start: Hz,
    pub step: Hz,
    pub count: usize,
}

impl Grid {
    /// Reads `START,STEP,COUNT`; a grid reaching above 300 GHz or longer than
    /// [`MAX_GRID_COUNT`] is refused.
    ///
    /// ```
    /// use pim_io::channels::Grid;
    /// let g = Grid::parse("150MHz, 12.5, 35").unwrap();
    /// assert_eq!((g.start.0, g.step.0, g.count), (150_000_000, 12_500, 35));
    /// assert!(Grid::parse("150,0,3").is_err());
    /// ```
    pub fn parse(text: &str) -> std::result::Result<Grid, String> {
        use crate::text::parse_frequency_in;
        let parts: Vec<&str> = text.split(',').map(str::trim).collect();
        let [start, step, count] = parts[..] else {
            return Err(format!(
                "`{text}` is not START_MHZ,STEP_KHZ,COUNT (such as 150.0,12.5,35)"
            ));
        };
        let start_hz = parse_frequency_in(start, 6).map_err(|e| format!("start: {e}"))?;
        if start_hz.0 <= 0 {
            return Err(format!("start {start} must be above zero"));
        }
        let step_hz = parse_frequency_in(step, 3).map_err(|e| format!("step: {e}"))?;
        if step_hz.0 <= 0 {
            return Err(format!("step {step} must be above zero"));
        }
        let count: usize = count
            .parse()
            .map_err(|_| format!("count `{count}` is not a whole number"))?;
        if !(1..=MAX_GRID_COUNT).contains(&count) {
            return Err(format!("count {count} is outside 1…{MAX_GRID_COUNT}"));
        }
        let top = (count as i64 - 1)
            .checked_mul(step_hz.0)
            .and_then(|span| span.checked_add(start_hz.0));
        if top.is_none_or(|top| top > pim_core::freq::MAX_FREQUENCY.0) {
            return Err("the grid reaches above 300 GHz".to_string());
        }
        Ok(Grid {
            start: start_hz,
            step: step_hz,
            count,
        })
    }

    /// The grid's channels, as a list from a file would give them (no width).
    pub fn channels(&self) -> Vec<ListedChannel> {
        pim_core::plan::grid(self.start, self.step, self.count)
            .into_iter()
            .map(|c| ListedChannel {
                id: None,
                freq: c.freq,
                bandwidth: c.bandwidth,
                note: None,
                line: 0,
            })
            .collect()
    }

    /// The grid in words.
    pub fn describe(&self) -> String {
        format!(
            "{} candidate channels on a grid from {} MHz in {} kHz steps",
            self.count,
            self.start.mhz_text(),
            self.step.khz_text()
        )
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
