//! Frequencies as whole hertz, parsed from decimal text without passing through binary
//! floating point, so that sums of products are exact.

use std::fmt;

use serde::{Deserialize, Serialize};

/// A frequency, a bandwidth or a frequency difference, in whole hertz.
#[derive(
    Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize,
)]
#[serde(transparent)]
pub struct Hz(pub i64);

/// The highest frequency the tool accepts: 300 GHz, the top of the radio spectrum as the
/// ITU Radio Regulations define it.
pub const MAX_FREQUENCY: Hz = Hz(300_000_000_000);

impl Hz {
    /// Zero hertz.
    pub const ZERO: Hz = Hz(0);

    /// Whole kilohertz.
    pub fn from_khz(khz: i64) -> Hz {
        Hz(khz * 1_000)
    }

    /// Whole megahertz.
    pub fn from_mhz(mhz: i64) -> Hz {
        Hz(mhz * 1_000_000)
    }

    /// The value in hertz.
    pub fn hz(self) -> i64 {
        self.0
    }

    /// The value in MHz as a float, for display and for physics (path loss).
    pub fn mhz(self) -> f64 {
        self.0 as f64 / 1e6
    }

    /// The value in kHz as a float, for display.
    pub fn khz(self) -> f64 {
        self.0 as f64 / 1e3
    }

    /// The magnitude (a frequency offset without its sign).
    pub fn abs(self) -> Hz {
        Hz(self.0.abs())
    }

    /// Exact text in MHz with as many decimals as the value needs (at least one):
    /// 146_520_000 Hz is `146.52`, 600_000 Hz is `0.6`.
    pub fn mhz_text(self) -> String {
        scaled_text(self.0, 6)
    }

    /// Exact text in kHz with as many decimals as the value needs.
    pub fn khz_text(self) -> String {
        scaled_text(self.0, 3)
    }

    /// Exact text with the unit that suits its size: `14.634 GHz`, `146.34 MHz`,
    /// `600.0 kHz`, `50 Hz`.
    ///
    /// ```
    /// use pim_core::freq::Hz;
    /// assert_eq!(Hz(14_634_000_000).unit_text(), "14.634 GHz");
    /// assert_eq!(Hz(146_340_000).unit_text(), "146.34 MHz");
    /// ```
    pub fn unit_text(self) -> String {
        match self.0.abs() {
            m if m >= 1_000_000_000 => format!("{} GHz", scaled_text(self.0, 9)),
            m if m >= 1_000_000 => format!("{} MHz", scaled_text(self.0, 6)),
            m if m >= 1_000 => format!("{} kHz", scaled_text(self.0, 3)),
            _ => format!("{} Hz", self.0),
        }
    }
}

/// The likely reading of a frequency typed without its unit (or its decimal point) when
/// it lies far from every listed frequency: more than ten times the highest, or under a
/// tenth of the lowest (where no product of the list plausibly lands). The reading
/// offered is the typed value scaled by a power of ten (10⁻⁶ to 10⁶) that comes nearest
/// a listed frequency, within a factor of 1.5 of it; `None` when the value is near the
/// list or no such scaling lands among it. Our rule, for a hint only.
///
/// ```
/// use pim_core::freq::{likely_reading, Hz};
/// let listed = [Hz(146_520_000), Hz(155_610_000), Hz(462_550_000)];
/// // `pim explain 14634`: read as 14.634 GHz, meant 146.34 MHz
/// assert_eq!(likely_reading(Hz(14_634_000_000), listed.into_iter()), Some(Hz(146_340_000)));
/// assert_eq!(likely_reading(Hz(146_340_000), listed.into_iter()), None);
/// ```
pub fn likely_reading(heard: Hz, listed: impl Iterator<Item = Hz>) -> Option<Hz> {
    let listed: Vec<f64> = listed.filter(|f| f.0 > 0).map(|f| f.0 as f64).collect();
    let lo = listed.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = listed.iter().copied().fold(0.0, f64::max);
    let h = heard.0 as f64;
    if listed.is_empty() || h <= 0.0 || (h <= 10.0 * hi && h >= lo / 10.0) {
        return None;
    }
    let nearest = |x: f64| {
        listed
            .iter()
            .map(|f| (x / f).log10().abs())
            .fold(f64::INFINITY, f64::min)
    };
    (-6i32..=6)
        .filter(|&k| k != 0)
        .map(|k| h * 10f64.powi(k))
        .filter(|&x| nearest(x) <= 1.5f64.log10())
        .min_by(|a, b| nearest(*a).total_cmp(&nearest(*b)))
        .map(|x| Hz(x.round() as i64))
}

fn scaled_text(value: i64, decimals: u32) -> String {
    let scale = 10i64.pow(decimals);
    let sign = if value < 0 { "-" } else { "" };
    let magnitude = value.unsigned_abs();
    let whole = magnitude / scale as u64;
    let frac = magnitude % scale as u64;
    let mut frac_text = format!("{frac:0width$}", width = decimals as usize);
    while frac_text.len() > 1 && frac_text.ends_with('0') {
        frac_text.pop();
    }
    format!("{sign}{whole}.{frac_text}")
}

impl fmt::Display for Hz {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} MHz", self.mhz_text())
    }
}

impl std::ops::Add for Hz {
    type Output = Hz;
    fn add(self, rhs: Hz) -> Hz {
        Hz(self.0 + rhs.0)
    }
}

impl std::ops::Sub for Hz {
    type Output = Hz;
    fn sub(self, rhs: Hz) -> Hz {
        Hz(self.0 - rhs.0)
    }
}

/// Why a decimal text could not become a whole number of units.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum DecimalError {
    /// Nothing to read.
    Empty,
    /// The text is not a decimal number.
    NotANumber(String),
    /// The text names infinity or NaN.
    NotFinite(String),
    /// More decimals than the unit resolves (finer than one hertz).
    TooFine(String),
    /// Beyond the range a frequency can take.
    TooLarge(String),
}

impl std::error::Error for DecimalError {}

impl fmt::Display for DecimalError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DecimalError::Empty => write!(f, "empty value"),
            DecimalError::NotANumber(t) => write!(f, "`{t}` is not a number"),
            DecimalError::NotFinite(t) => write!(f, "`{t}` is not a finite number"),
            DecimalError::TooFine(t) => write!(f, "`{t}` is finer than 1 Hz"),
            DecimalError::TooLarge(t) => write!(f, "`{t}` is too large"),
        }
    }
}

/// Parses decimal text (`146.52`, `-0.5`, `1.4652E+02`) and returns the value times
/// 10^`scale_exp` as an exact integer. Fails when digits remain below the unit.
///
/// ```
/// use pim_core::freq::parse_scaled_decimal;
/// assert_eq!(parse_scaled_decimal("146.52", 6), Ok(146_520_000));
/// assert_eq!(parse_scaled_decimal("12.5", 3), Ok(12_500));
/// assert!(parse_scaled_decimal("146.5200001", 6).is_err());
/// ```
pub fn parse_scaled_decimal(text: &str, scale_exp: i32) -> Result<i64, DecimalError> {
    let t = text.trim();
    if t.is_empty() {
        return Err(DecimalError::Empty);
    }
    let lower = t.to_ascii_lowercase();
    let unsigned = lower.trim_start_matches(['+', '-']);
    if matches!(unsigned, "nan" | "inf" | "infinity") {
        return Err(DecimalError::NotFinite(t.to_string()));
    }
    let bad = || DecimalError::NotANumber(t.to_string());
    let (negative, body) = match t.as_bytes()[0] {
        b'-' => (true, &t[1..]),
        b'+' => (false, &t[1..]),
        _ => (false, t),
    };
    let (mantissa, exponent) = match body.find(['e', 'E']) {
        Some(pos) => {
            let exp: i32 = body[pos + 1..].parse().map_err(|_| bad())?;
            (&body[..pos], exp)
        }
        None => (body, 0),
    };
    let (int_part, frac_part) = match mantissa.split_once('.') {
        Some((i, f)) => (i, f),
        None => (mantissa, ""),
    };
    if int_part.is_empty() && frac_part.is_empty() {
        return Err(bad());
    }
    if !int_part.bytes().all(|b| b.is_ascii_digit())
        || !frac_part.bytes().all(|b| b.is_ascii_digit())
    {
        return Err(bad());
    }
    // digits * 10^(exponent - frac_len + scale_exp)
    let digits = format!("{int_part}{frac_part}");
    let digits = digits.trim_start_matches('0');
    let mut shift = exponent
        .checked_sub(frac_part.len() as i32)
        .and_then(|s| s.checked_add(scale_exp))
        .ok_or_else(|| DecimalError::TooLarge(t.to_string()))?;
    let mut digits = digits.to_string();
    while shift < 0 {
        match digits.pop() {
            Some('0') => shift += 1,
            Some(_) => return Err(DecimalError::TooFine(t.to_string())),
            None => {
                shift = 0;
            }
        }
    }
    if digits.is_empty() {
        return Ok(0);
    }
    if digits.len() + shift as usize > 18 {
        return Err(DecimalError::TooLarge(t.to_string()));
    }
    let mut value: i64 = digits.parse().map_err(|_| bad())?;
    for _ in 0..shift {
        value = value
            .checked_mul(10)
            .ok_or_else(|| DecimalError::TooLarge(t.to_string()))?;
    }
    Ok(if negative { -value } else { value })
}

/// Parses a frequency given in MHz as decimal text into exact hertz.
pub fn parse_mhz(text: &str) -> Result<Hz, DecimalError> {
    parse_scaled_decimal(text, 6).map(Hz)
}

/// Parses a bandwidth given in kHz as decimal text into exact hertz.
pub fn parse_khz(text: &str) -> Result<Hz, DecimalError> {
    parse_scaled_decimal(text, 3).map(Hz)
}

/// Parses a frequency with an optional unit: `146.52`, `146.52MHz`, `600kHz`, `1.2 GHz`,
/// `146520000Hz`. A bare number is MHz. Units are read without regard to case.
///
/// ```
/// use pim_core::freq::{parse_frequency_with_unit, Hz};
/// assert_eq!(parse_frequency_with_unit("146.52"), Ok(Hz(146_520_000)));
/// assert_eq!(parse_frequency_with_unit("600kHz"), Ok(Hz(600_000)));
/// assert_eq!(parse_frequency_with_unit("1.2GHz"), Ok(Hz(1_200_000_000)));
/// ```
pub fn parse_frequency_with_unit(text: &str) -> Result<Hz, DecimalError> {
    let t = text.trim();
    let lower = t.to_ascii_lowercase();
    let (number, scale) = if let Some(n) = lower.strip_suffix("ghz") {
        (n, 9)
    } else if let Some(n) = lower.strip_suffix("mhz") {
        (n, 6)
    } else if let Some(n) = lower.strip_suffix("khz") {
        (n, 3)
    } else if let Some(n) = lower.strip_suffix("hz") {
        (n, 0)
    } else {
        (lower.as_str(), 6)
    };
    parse_scaled_decimal(number.trim_end(), scale)
        .map(Hz)
        .map_err(|e| match e {
            DecimalError::NotANumber(_) => DecimalError::NotANumber(t.to_string()),
            other => other,
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decimal_text_becomes_exact_hertz() {
        assert_eq!(parse_mhz("146.52"), Ok(Hz(146_520_000)));
        assert_eq!(parse_mhz("0.6"), Ok(Hz(600_000)));
        assert_eq!(parse_mhz(".6"), Ok(Hz(600_000)));
        assert_eq!(parse_mhz("146.520000000"), Ok(Hz(146_520_000)));
        assert_eq!(parse_mhz("1.4652E+02"), Ok(Hz(146_520_000)));
        assert_eq!(parse_mhz("146520000e-6"), Ok(Hz(146_520_000)));
        assert_eq!(parse_mhz("-5"), Ok(Hz(-5_000_000)));
        assert_eq!(parse_khz("12.5"), Ok(Hz(12_500)));
        assert_eq!(parse_khz("0"), Ok(Hz(0)));
        assert_eq!(parse_mhz("0.000001"), Ok(Hz(1)));
    }

    #[test]
    fn refuses_text_nan_and_sub_hertz() {
        assert!(matches!(parse_mhz("abc"), Err(DecimalError::NotANumber(_))));
        assert!(matches!(parse_mhz("NaN"), Err(DecimalError::NotFinite(_))));
        assert!(matches!(parse_mhz("-inf"), Err(DecimalError::NotFinite(_))));
        assert!(matches!(
            parse_mhz("0.0000001"),
            Err(DecimalError::TooFine(_))
        ));
        assert!(matches!(parse_mhz(""), Err(DecimalError::Empty)));
        assert!(matches!(parse_mhz("."), Err(DecimalError::NotANumber(_))));
        assert!(matches!(parse_mhz("1e400"), Err(DecimalError::TooLarge(_))));
        assert!(matches!(
            parse_mhz("1.2.3"),
            Err(DecimalError::NotANumber(_))
        ));
        assert!(matches!(parse_mhz("1,5"), Err(DecimalError::NotANumber(_))));
    }

    #[test]
    fn units_are_understood() {
        assert_eq!(parse_frequency_with_unit("146.52MHz"), Ok(Hz(146_520_000)));
        assert_eq!(parse_frequency_with_unit("146.52 mhz"), Ok(Hz(146_520_000)));
        assert_eq!(parse_frequency_with_unit("600kHz"), Ok(Hz(600_000)));
        assert_eq!(parse_frequency_with_unit("1.2GHz"), Ok(Hz(1_200_000_000)));
        assert_eq!(parse_frequency_with_unit("1000Hz"), Ok(Hz(1_000)));
        assert!(parse_frequency_with_unit("12 parsecs").is_err());
    }

    #[test]
    fn text_round_trips() {
        assert_eq!(Hz(146_520_000).mhz_text(), "146.52");
        assert_eq!(Hz(600_000).mhz_text(), "0.6");
        assert_eq!(Hz(-1).mhz_text(), "-0.000001");
        assert_eq!(Hz(12_500).khz_text(), "12.5");
        assert_eq!(Hz(146_000_000).mhz_text(), "146.0");
    }
}
