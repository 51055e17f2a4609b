//! A receiver's front-end filter: CSV `offset_mhz,rejection_db` (a duplexer's or cavity's
//! rejection of a carrier by its offset from the receive channel, read off its data sheet
//! or a sweep of it), one point a row, offsets increasing. See
//! [`pim_core::level::RxFilter`] for how it is applied.

use std::io::Read;

use crate::table::{no_rows, parse_finite, Table};
use pim_core::error::{Error, Place, Result};
use pim_core::level::{RxFilter, RX_FILTER_POINTS};

/// The columns of a filter file.
pub const RX_FILTER_COLUMNS: &[&str] = &["offset_mhz", "rejection_db", "note"];

/// Reads a filter file; `source` names it in messages. Also returns the columns not read.
pub fn read_rx_filter<R: Read>(source: &str, reader: R) -> Result<(RxFilter, Vec<String>)> {
    let mut table = Table::open(source, reader)?;
    let off_col = table.require("offset_mhz")?;
    let rej_col = table.require("rejection_db")?;
    let unused = table.unknown_columns(RX_FILTER_COLUMNS);
    let mut points: Vec<(f64, f64)> = Vec::new();
    while let Some(row) = table.next_row()? {
        let place = |f: &str| row.place(f);
        let off_text = row
            .text(Some(off_col))
            .ok_or_else(|| Error::input(place("offset_mhz"), "missing offset"))?;
        let offset = parse_finite(|| place("offset_mhz"), off_text)?;
        if offset < 0.0 {
            return Err(Error::input(
                place("offset_mhz"),
                format!("offset {off_text} MHz is negative: give the distance from the channel"),
            ));
        }
        if let Some(&(last, _)) = points.last() {
            if offset <= last {
                return Err(Error::input(
                    place("offset_mhz"),
                    format!("offset {off_text} MHz does not follow {last} MHz: list the offsets increasing"),
                ));
            }
        }
        let rej_text = row
            .text(Some(rej_col))
            .ok_or_else(|| Error::input(place("rejection_db"), "missing rejection"))?;
        let rejection = parse_finite(|| place("rejection_db"), rej_text)?;
        if !(0.0..=200.0).contains(&rejection) {
            return Err(Error::input(
                place("rejection_db"),
                format!("rejection {rej_text} dB is outside 0…200 dB"),
            ));
        }
        if points.len() == RX_FILTER_POINTS {
            return Err(Error::input(
                place("offset_mhz"),
                format!("more than {RX_FILTER_POINTS} points: a filter curve needs no more"),
            ));
        }
        points.push((offset, rejection));
    }
    if points.is_empty() {
        return Err(no_rows(source, "filter points"));
    }
    let filter = RxFilter::new(&points).map_err(|m| Error::input(Place::new(source), m))?;
    Ok((filter, unused))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_a_cavity_curve_and_interpolates() {
        let text = "offset_mhz,rejection_db,note\n0,0,pass band\n0.5,20,\n4.6,60,duplex split\n";
        let (f, unused) = read_rx_filter("cavity.csv", text.as_bytes()).unwrap();
        assert!(unused.is_empty());
        assert!((f.rejection_db(0.25) - 10.0).abs() < 1e-9);
        assert!((f.rejection_db(-0.25) - 10.0).abs() < 1e-9);
        assert!((f.rejection_db(10.0) - 60.0).abs() < 1e-9);
    }

    #[test]
    fn refuses_what_is_not_a_curve() {
        let e = read_rx_filter(
            "f.csv",
            "offset_mhz,rejection_db\n1,20\n0.5,10\n".as_bytes(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("f.csv, line 3"), "{e}");
        assert!(e.to_string().contains("offset_mhz"), "{e}");
        let e = read_rx_filter("f.csv", "offset_mhz,rejection_db\n1,-3\n".as_bytes()).unwrap_err();
        assert!(e.to_string().contains("rejection_db"), "{e}");
        assert!(read_rx_filter("f.csv", "offset_mhz,rejection_db\n".as_bytes()).is_err());
    }
}
