//! Text grammars every file shares, written once: ISO 8601 times, XML escaping, and CSV
//! rows (through the csv crate, in a given dialect).

use time::format_description::well_known::Iso8601;
use time::{OffsetDateTime, PrimitiveDateTime};

/// The widest UTC offset in use anywhere (UTC+14:00, Line Islands; UTC−12:00 is the
/// other end): a larger one is a typing error, not a time zone.
pub const MAX_UTC_OFFSET_MINUTES: i32 = 14 * 60;

/// Parses an ISO 8601 date and time (`2025-06-14T09:30:00Z`, `2025-06-14T11:30+02:00`;
/// a single space may stand for `T`, as spreadsheets write it). Returns the time and
/// whether the text carried a UTC offset; a time without one is returned as if at UTC.
/// Offsets beyond ±14:00 are refused.
///
/// ```
/// let (t, zoned) = pim_io::text::parse_time("2025-06-14 11:30+02:00").unwrap();
/// assert!(zoned);
/// assert_eq!(t.unix_timestamp(), 1_749_893_400);
/// assert!(pim_io::text::parse_time("2025-06-14T11:30+15:00").is_err());
/// ```
pub fn parse_time(text: &str) -> Result<(OffsetDateTime, bool), String> {
    let t = text.trim();
    let normalised = match t.split_once(' ') {
        Some((date, time)) if !time.contains(' ') && date.len() >= 8 => format!("{date}T{time}"),
        _ => t.to_string(),
    };
    if let Ok(at) = OffsetDateTime::parse(&normalised, &Iso8601::DEFAULT) {
        let minutes = at.offset().whole_minutes() as i32;
        if minutes.abs() > MAX_UTC_OFFSET_MINUTES {
            return Err(format!(
                "`{t}` has a UTC offset beyond ±14:00, which no time zone uses"
            ));
        }
        return Ok((at, true));
    }
    match PrimitiveDateTime::parse(&normalised, &Iso8601::DEFAULT) {
        Ok(at) => Ok((at.assume_utc(), false)),
        Err(time::error::Parse::TryFromParsed(time::error::TryFromParsed::ComponentRange(
            range,
        ))) => Err(format!(
            "`{t}` is not a valid date and time: the {} is out of range",
            range.name()
        )),
        Err(_) => Err(format!(
            "`{t}` is not an ISO 8601 date and time such as 2025-06-14T09:30:00Z"
        )),
    }
}

/// Which axis a coordinate is on: the hemisphere letters it may carry and its range.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Axis {
    /// Latitude: N or S, −90…90°.
    Latitude,
    /// Longitude: E or W, −180…180°.
    Longitude,
}

/// Parses a coordinate in decimal degrees (`45.104575`, `-122.41405`), degrees and
/// decimal minutes (`45 06.275 N`, `N45°06.275'`) or degrees, minutes and seconds
/// (`122 24 50.5 W`, `122°24'50.5"W`). A hemisphere letter (N/S for latitude, E/W for
/// longitude) may stand first or last; S and W are negative. Minutes and seconds must be
/// below 60, and the result within the axis's range.
///
/// ```
/// use pim_io::text::{parse_coordinate, Axis};
/// assert_eq!(parse_coordinate("45°06.275'N", Axis::Latitude).unwrap(), 45.104_583_333_333_33);
/// let lon = parse_coordinate("122 24 50.5 W", Axis::Longitude).unwrap();
/// assert!((lon + 122.414_027_777_8).abs() < 1e-9);
/// assert!(parse_coordinate("45 75 N", Axis::Latitude).is_err());
/// ```
pub fn parse_coordinate(text: &str, axis: Axis) -> Result<f64, String> {
    let (positive, negative, limit, name) = match axis {
        Axis::Latitude => ('N', 'S', 90.0, "latitude"),
        Axis::Longitude => ('E', 'W', 180.0, "longitude"),
    };
    let t = text.trim();
    let out_of_range = || format!("{name} {t} is outside −{limit:.0}…{limit:.0}");
    if let Ok(v) = t.parse::<f64>() {
        return if v.is_finite() && v.abs() <= limit {
            Ok(v)
        } else {
            Err(out_of_range())
        };
    }
    let upper = t.to_uppercase();
    let mut sign = 1.0;
    let mut rest = upper.as_str();
    for (c, s) in [(positive, 1.0), (negative, -1.0)] {
        if let Some(r) = rest.strip_prefix(c).or_else(|| rest.strip_suffix(c)) {
            sign = s;
            rest = r;
            break;
        }
    }
    let parts: Vec<&str> = rest
        .split(|ch: char| ch.is_whitespace() || "°'′º\"″".contains(ch))
        .filter(|p| !p.is_empty())
        .collect();
    let bad = || {
        format!("`{t}` is not a {name} in degrees (45.1046), degrees and minutes (45 06.275 {positive}) or degrees, minutes and seconds (45 06 16.5 {positive})")
    };
    let numbers: Vec<f64> = parts
        .iter()
        .map(|p| p.parse::<f64>().ok().filter(|v| v.is_finite()))
        .collect::<Option<_>>()
        .ok_or_else(bad)?;
    let (deg, min, sec) = match numbers[..] {
        [d] => (d, 0.0, 0.0),
        [d, m] => (d, m, 0.0),
        [d, m, s] => (d, m, s),
        _ => return Err(bad()),
    };
    let whole = |v: f64| v.fract() == 0.0;
    if numbers.len() > 1
        && (!whole(deg) || !(0.0..60.0).contains(&min) || !(0.0..60.0).contains(&sec))
    {
        return Err(format!(
            "`{t}`: minutes and seconds must be below 60, after whole degrees"
        ));
    }
    if numbers.len() > 2 && !whole(min) {
        return Err(format!("`{t}`: with seconds, the minutes must be whole"));
    }
    if parts.first().is_some_and(|p| p.starts_with('-')) {
        sign = -sign;
    }
    let v = sign * (deg.abs() + min / 60.0 + sec / 3600.0);
    if v.abs() > limit {
        return Err(out_of_range());
    }
    Ok(v)
}

/// Text made safe inside XML (SVG, KML, HTML) content and attribute values: the five
/// markup characters become entities, and characters XML 1.0 does not allow at all
/// (C0 controls other than tab, line feed and carriage return; U+FFFE, U+FFFF) are shown
/// as `\xNN` so that the document stays well-formed whatever a file held.
///
/// ```
/// assert_eq!(pim_io::text::xml_escape("A&B <\"x\"> \u{1b}"), "A&amp;B &lt;&quot;x&quot;&gt; \\x1b");
/// ```
pub fn xml_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            '\t' | '\n' | '\r' => out.push(c),
            c if (c as u32) < 0x20 || c == '\u{7f}' || c == '\u{fffe}' || c == '\u{ffff}' => {
                out.push_str(&format!("\\x{:02x}", c as u32));
            }
            c => out.push(c),
        }
    }
    out
}

/// One CSV record in the given dialect (delimiter, CRLF or LF line end), quoted by the
/// csv crate's rules (a cell is quoted when it holds the delimiter, a quote or a line
/// break; every cell when the first starts with `#`, which would read as a comment); the
/// line end is included.
pub fn csv_record<I, S>(cells: I, delimiter: u8, crlf: bool) -> String
where
    I: IntoIterator<Item = S>,
    S: AsRef<[u8]>,
{
    let cells: Vec<S> = cells.into_iter().collect();
    let comment_like = cells.first().is_some_and(|c| c.as_ref().starts_with(b"#"));
    let mut w = csv::WriterBuilder::new()
        .delimiter(delimiter)
        .quote_style(if comment_like {
            csv::QuoteStyle::Always
        } else {
            csv::QuoteStyle::Necessary
        })
        .terminator(if crlf {
            csv::Terminator::CRLF
        } else {
            csv::Terminator::Any(b'\n')
        })
        .from_writer(Vec::new());
    // Writing into memory does not fail; an empty row is the fallback if it ever did.
    if w.write_record(cells).is_err() {
        return String::new();
    }
    match w.into_inner() {
        Ok(bytes) => String::from_utf8_lossy(&bytes).into_owned(),
        Err(_) => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn times_with_and_without_offsets() {
        let (a, zoned) = parse_time("2026-11-30T14:05:00").unwrap();
        assert!(!zoned);
        let (b, zoned) = parse_time("2026-11-30T14:05:00Z").unwrap();
        assert!(zoned);
        assert_eq!(a, b);
        assert_eq!(parse_time("2026-11-30T15:05:00+01:00").unwrap().0, b);
        assert!(parse_time("2026-11-30T15:05:00-14:30").is_err());
        assert!(parse_time("2025-02-30T09:30Z")
            .unwrap_err()
            .contains("out of range"));
    }

    #[test]
    fn coordinates_in_every_notation() {
        let lat = |t| parse_coordinate(t, Axis::Latitude);
        let lon = |t| parse_coordinate(t, Axis::Longitude);
        assert_eq!(lat("51 30.000 N").unwrap(), 51.5);
        assert_eq!(lat("N51°30.6'").unwrap(), 51.51);
        assert_eq!(lon("2 36.000 W").unwrap(), -2.6);
        assert_eq!(lon("-2 36.000").unwrap(), -2.6);
        assert_eq!(lat("51.25").unwrap(), 51.25);
        assert_eq!(
            lat("45 06 15 S").unwrap(),
            -(45.0 + 6.0 / 60.0 + 15.0 / 3600.0)
        );
        assert!(lat("51 75 N").is_err());
        assert!(lat("91").is_err());
        assert!(lat("45.5 30 N").is_err());
        assert!(lat("abc").unwrap_err().contains("degrees and minutes"));
        assert!(lon("45 06.275 N").is_err());
    }

    #[test]
    fn csv_records_follow_the_dialect() {
        assert_eq!(csv_record(["a", "b;c", "d"], b';', false), "a;\"b;c\";d\n");
        assert_eq!(csv_record(["x,y", "z"], b',', true), "\"x,y\",z\r\n");
        assert_eq!(
            csv_record(["say \"hi\""], b'\t', false),
            "\"say \"\"hi\"\"\"\n"
        );
        assert_eq!(csv_record(["#1", "b"], b',', false), "\"#1\",\"b\"\n");
    }
}
