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
