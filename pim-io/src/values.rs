//! Values as people write them on a command line or a form: a frequency (bare numbers in
//! MHz), a width, a coordinate in any common notation, a quantity with its unit within a
//! physical range, a whole number. Each answers the text's own error, for the caller to
//! place beside its option or field.

use pim_core::freq::Hz;

use crate::text::{parse_coordinate, parse_frequency_in, parse_quantity, Axis};

/// A frequency with an optional unit (bare numbers are MHz), above zero and at most
/// 300 GHz.
pub fn frequency(text: &str) -> Result<Hz, String> {
    let f = parse_frequency_in(text, 6)?;
    if f.0 <= 0 {
        return Err(format!("frequency {text} must be above zero"));
    }
    if f > pim_core::freq::MAX_FREQUENCY {
        return Err(format!("frequency {text} is above 300 GHz"));
    }
    Ok(f)
}

/// A width in kHz, zero or more, exact to the hertz; a unit may be given
/// (`12.5kHz`, `0.0125MHz`, `12500Hz`).
pub fn width(text: &str) -> Result<Hz, String> {
    let w = parse_frequency_in(text, 3)?;
    if w.0 < 0 {
        return Err(format!("`{text}` is negative"));
    }
    if w > pim_core::freq::MAX_FREQUENCY {
        return Err(format!("`{text}` is absurd for a width"));
    }
    Ok(w)
}

/// A latitude: decimal degrees, degrees and minutes, or degrees, minutes
/// and seconds, with N or S (`45.1046`, `45°06.275'N`, `45 06 16.5 N`).
pub fn latitude(text: &str) -> Result<f64, String> {
    parse_coordinate(text, Axis::Latitude)
}

/// A longitude, in the notations of [`latitude`] with E or W.
pub fn longitude(text: &str) -> Result<f64, String> {
    parse_coordinate(text, Axis::Longitude)
}

/// A finite number without a unit (a decimal comma gets the table
/// reader's hint).
pub fn finite(text: &str) -> Result<f64, String> {
    parse_quantity(text, "")
}

/// A parser for a finite number in `unit` (`dB`, `dBm`, `dBc`, `m`, `°`, `s`,
/// or `""` for none) within `lo..=hi`: the unit may be written after the number (`3dB`,
/// `-80dBm`, `150m`), a unit of another kind is refused, and a value outside the range is
/// physically absurd for the option.
pub fn ranged(
    lo: f64,
    hi: f64,
    unit: &'static str,
) -> impl Fn(&str) -> Result<f64, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let v = parse_quantity(text, unit)?;
        if (lo..=hi).contains(&v) {
            Ok(v)
        } else {
            let u = if unit.is_empty() {
                String::new()
            } else {
                format!(" {unit}")
            };
            let number = crate::text::split_unit(text).0;
            Err(format!("{number}{u} is outside {lo}…{hi}{u}"))
        }
    }
}

/// A parser for a whole number within `lo..=hi` (a count, an order); a
/// decimal comma gets the table reader's hint.
pub fn whole<T>(
    lo: u64,
    hi: u64,
) -> impl Fn(&str) -> Result<T, String> + Clone + Send + Sync + 'static
where
    T: TryFrom<u64> + Clone + Send + Sync + 'static,
{
    move |text: &str| {
        let t = text.trim();
        let v: u64 = t.parse().map_err(|_| {
            format!(
                "`{t}` is not a whole number{}",
                crate::table::decimal_comma_hint(t)
            )
        })?;
        if !(lo..=hi).contains(&v) {
            return Err(format!("{v} is not in {lo}..={hi}"));
        }
        T::try_from(v).map_err(|_| format!("{v} is too large"))
    }
}

/// A parser for a quantity in `unit` above zero (a distance, a time).
pub fn positive(
    unit: &'static str,
) -> impl Fn(&str) -> Result<f64, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let v = parse_quantity(text, unit)?;
        if v > 0.0 {
            Ok(v)
        } else {
            Err(format!("`{text}` must be above zero"))
        }
    }
}
