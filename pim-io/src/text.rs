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

/// A time as RFC 3339 text (`2026-12-01T10:05:00Z`), as the tool writes times.
pub fn time_text(t: OffsetDateTime) -> String {
    t.format(&time::format_description::well_known::Rfc3339)
        .unwrap_or_default()
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
/// longitude) may stand first or last; S and W are negative. A sign together with a
/// letter is refused (`-45 06.152 S` says south twice or contradicts itself). Minutes and
/// seconds must be below 60, and the result within the axis's range.
///
/// ```
/// use pim_io::text::{parse_coordinate, Axis};
/// assert_eq!(parse_coordinate("45°06.275'N", Axis::Latitude).unwrap(), 45.104_583_333_333_33);
/// let lon = parse_coordinate("122 24 50.5 W", Axis::Longitude).unwrap();
/// assert!((lon + 122.414_027_777_8).abs() < 1e-9);
/// assert!(parse_coordinate("45 75 N", Axis::Latitude).is_err());
/// assert!(parse_coordinate("-45 06.152 S", Axis::Latitude).is_err());
/// assert!(parse_coordinate("-45 06.152", Axis::Latitude).unwrap() < 0.0);
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
    let mut letter = None;
    for (c, s) in [(positive, 1.0), (negative, -1.0)] {
        if let Some(r) = rest.strip_prefix(c).or_else(|| rest.strip_suffix(c)) {
            sign = s;
            rest = r;
            letter = Some(c);
            break;
        }
    }
    // `-45 06.152 S`: which of the two is meant cannot be told.
    if let Some(c) = letter {
        if rest.contains(['-', '+', '−']) {
            return Err(format!(
                "`{t}` has both a sign and a hemisphere letter ({c}), which contradict or repeat each other; give one: the letter without the sign, or a signed number without the letter"
            ));
        }
    }
    let parts: Vec<&str> = rest
        .split(|ch: char| ch.is_whitespace() || "°'′º\"″".contains(ch))
        .filter(|p| !p.is_empty())
        .collect();
    let bad = || {
        let hint = crate::table::decimal_comma_hint(t);
        if !hint.is_empty() {
            return format!("`{t}` is not a number{hint}");
        }
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

/// The units a quantity may be written with, by kind; the first of each is the one named
/// in messages.
const UNITS: &[(&str, &[(&str, f64)])] = &[
    (
        "Hz",
        &[("hz", 1.0), ("khz", 1e3), ("mhz", 1e6), ("ghz", 1e9)],
    ),
    ("dBm", &[("dbm", 1.0)]),
    ("dBc", &[("dbc", 1.0)]),
    ("dB", &[("db", 1.0)]),
    ("m", &[("m", 1.0), ("km", 1e3)]),
    (
        "°",
        &[("°", 1.0), ("deg", 1.0), ("degrees", 1.0), ("º", 1.0)],
    ),
    ("s", &[("s", 1.0)]),
];

/// Splits `12.5kHz`, `-80 dBm` or `10°` into the number's text and the unit's text
/// (empty when there is none): the unit is the trailing run of letters and degree signs.
pub fn split_unit(text: &str) -> (&str, &str) {
    let t = text.trim();
    let cut = t
        .char_indices()
        .rev()
        .take_while(|(_, c)| c.is_alphabetic() || matches!(c, '°' | 'º'))
        .last()
        .map_or(t.len(), |(i, _)| i);
    let (number, unit) = t.split_at(cut);
    if number.trim().trim_matches(['+', '-']).is_empty() {
        // `inf`, `nan`, `abc`: all of it is the number's text, for the number's message
        return (t, "");
    }
    (number.trim_end(), unit)
}

/// The kind of a unit's text (`kHz` → `Hz`) and its factor to that kind's base unit.
fn unit_kind(unit: &str) -> Option<(&'static str, f64)> {
    let lower = unit.to_lowercase();
    UNITS.iter().find_map(|(kind, names)| {
        names
            .iter()
            .find(|(n, _)| *n == lower)
            .map(|(_, factor)| (*kind, *factor))
    })
}

/// The refusal of a unit of the wrong kind or an unknown one, naming the unit expected.
pub fn wrong_unit(text: &str, unit: &str, expected: &str) -> String {
    let wanted = match expected {
        "" => "a plain number, without a unit".to_string(),
        "Hz" => "a frequency (Hz, kHz, MHz or GHz)".to_string(),
        "°" => "degrees (10, 10° or 10deg)".to_string(),
        "m" => "metres (150 or 150m)".to_string(),
        other => format!("{other} (a bare number or the number followed by {other})"),
    };
    match unit_kind(unit) {
        Some((kind, _)) => format!("`{}` is in {kind}; expected {wanted}", text.trim()),
        None => format!(
            "`{}`: unknown unit `{unit}`; expected {wanted}",
            text.trim()
        ),
    }
}

/// A finite decimal number, or why not (with the decimal-comma hint of the table reader).
pub fn parse_number(text: &str) -> Result<f64, String> {
    let t = text.trim();
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!("`{t}` is not a finite number")),
        Err(_) => Err(format!(
            "`{t}` is not a number{}",
            crate::table::decimal_comma_hint(t)
        )),
    }
}

/// Parses a quantity in `unit` (`dB`, `dBm`, `dBc`, `m`, `°`, `s`; `""` for a plain
/// number): a bare number, or the number followed by its unit (`3dB`, `-80 dBm`, `150m`,
/// `0.15km`, `10°`, `10deg`). A unit of another kind is refused with a message naming
/// the unit expected.
///
/// ```
/// use pim_io::text::parse_quantity;
/// assert_eq!(parse_quantity("-80dBm", "dBm"), Ok(-80.0));
/// assert_eq!(parse_quantity("0.15 km", "m"), Ok(150.0));
/// assert_eq!(parse_quantity("10deg", "°"), Ok(10.0));
/// assert!(parse_quantity("3dBm", "dB").unwrap_err().contains("expected dB"));
/// assert!(parse_quantity("12,5", "m").unwrap_err().contains("decimal comma"));
/// ```
pub fn parse_quantity(text: &str, unit: &str) -> Result<f64, String> {
    let (number, given) = split_unit(text);
    let factor = if given.is_empty() {
        1.0
    } else {
        match unit_kind(given) {
            Some((kind, factor)) if kind == unit => factor,
            _ => return Err(wrong_unit(text, given, unit)),
        }
    };
    let v = parse_number(number)? * factor;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(format!("`{}` is not a finite number", text.trim()))
    }
}

/// Parses a frequency with an optional unit (`12.5kHz`, `0.0125MHz`, `12500Hz`) into
/// exact hertz; a bare number is in `default_exp` (10^exp Hz: 3 for kHz, 6 for MHz).
/// A unit of another kind is refused naming the expected one; a decimal comma gets the
/// table reader's hint.
///
/// ```
/// use pim_io::text::parse_frequency_in;
/// use pim_core::freq::Hz;
/// assert_eq!(parse_frequency_in("12.5", 3), Ok(Hz(12_500)));
/// assert_eq!(parse_frequency_in("0.0125MHz", 3), Ok(Hz(12_500)));
/// assert_eq!(parse_frequency_in("12500 Hz", 3), Ok(Hz(12_500)));
/// assert!(parse_frequency_in("3dB", 3).unwrap_err().contains("is in dB"));
/// ```
pub fn parse_frequency_in(text: &str, default_exp: i32) -> Result<pim_core::freq::Hz, String> {
    use pim_core::freq::{parse_scaled_decimal, DecimalError, Hz};
    let (number, given) = split_unit(text);
    let exp = if given.is_empty() {
        default_exp
    } else {
        match unit_kind(given) {
            Some(("Hz", factor)) => factor.log10().round() as i32,
            _ => return Err(wrong_unit(text, given, "Hz")),
        }
    };
    parse_scaled_decimal(number, exp)
        .map(Hz)
        .map_err(|e| match e {
            DecimalError::NotANumber(_) => format!(
                "`{}` is not a number{}",
                text.trim(),
                crate::table::decimal_comma_hint(number)
            ),
            other => other.to_string(),
        })
}

/// A typed position in any notation [`parse_coordinate`] reads, as decimal degrees with
/// 7 decimals (about 1 cm), as a log stores it; a plain number or anything the grammar
/// refuses is returned as typed, for the log's own check to judge and name.
///
/// ```
/// use pim_io::text::{decimal_degrees, Axis};
/// assert_eq!(decimal_degrees("51 30.000 N", Axis::Latitude), "51.5000000");
/// assert_eq!(decimal_degrees("51.25", Axis::Latitude), "51.25");
/// assert_eq!(decimal_degrees("51 75 N", Axis::Latitude), "51 75 N");
/// ```
pub fn decimal_degrees(text: &str, axis: Axis) -> String {
    match parse_coordinate(text, axis) {
        Ok(v) if text.trim().parse::<f64>().is_err() => format!("{v:.7}"),
        _ => text.to_string(),
    }
}

/// Text as one word of a POSIX shell command line (a path in a command printed for the
/// user to run, never its first word): as it is when it holds only letters, digits and
/// `-_./+,:@%=`, else in single quotes.
///
/// ```
/// assert_eq!(pim_io::text::shell_word("pim-demo/walk.csv"), "pim-demo/walk.csv");
/// assert_eq!(pim_io::text::shell_word("Marrow Hill's"), "'Marrow Hill'\\''s'");
/// ```
pub fn shell_word(text: &str) -> String {
    let plain = |c: char| c.is_ascii_alphanumeric() || "-_./+,:@%=".contains(c);
    if !text.is_empty() && text.chars().all(plain) {
        text.to_string()
    } else {
        format!("'{}'", text.replace('\'', "'\\''"))
    }
}

/// A `pim` command line as printed for the user to paste into a POSIX shell: `pim` and
/// each word after it quoted by [`shell_word`]. Every command the tool suggests (advice,
/// the demo's list, a ticket's steps) is written through it, so all are quoted one way.
///
/// ```
/// let line = pim_io::text::pim_command(["explain", "146.34", "--emitters", "my sites.csv"]);
/// assert_eq!(line, "pim explain 146.34 --emitters 'my sites.csv'");
/// ```
pub fn pim_command<I, S>(words: I) -> String
where
    I: IntoIterator<Item = S>,
    S: AsRef<str>,
{
    let mut line = String::from("pim");
    for w in words {
        line.push(' ');
        line.push_str(&shell_word(w.as_ref()));
    }
    line
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

/// True for a character that must not reach a terminal or an id raw: C0 and C1 controls
/// and DEL (escape sequences, bell, OSC 52 clipboard writes), and the invisible format
/// characters that make two different ids look alike or reorder a line (zero-width
/// spaces and joiners, word joiner, byte-order mark, bidi marks, embeddings, overrides
/// and isolates: Unicode UAX #9).
pub fn is_hidden_or_control(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{200b}'..='\u{200f}'
                | '\u{202a}'..='\u{202e}'
                | '\u{2060}'..='\u{2064}'
                | '\u{2066}'..='\u{2069}'
                | '\u{2028}'
                | '\u{2029}'
                | '\u{061c}'
                | '\u{feff}'
        )
}

/// Text from a file made safe to show on a terminal: every character of
/// [`is_hidden_or_control`] is shown escaped (`\x1b`, `\u{202e}`), so that no input can
/// retitle the terminal, write the clipboard or reorder what is shown. Line feeds are
/// kept when `keep_line_feeds` (a message of several lines), escaped otherwise (a
/// table cell).
///
/// ```
/// use pim_io::text::terminal_escape;
/// assert_eq!(terminal_escape("A\u{1b}]52;c;eA==\u{7}", false), "A\\x1b]52;c;eA==\\x07");
/// assert_eq!(terminal_escape("SKP-152\u{200b}", false), "SKP-152\\u{200b}");
/// ```
pub fn terminal_escape(s: &str, keep_line_feeds: bool) -> std::borrow::Cow<'_, str> {
    if !s
        .chars()
        .any(|c| is_hidden_or_control(c) && !(keep_line_feeds && c == '\n'))
    {
        return std::borrow::Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if c == '\n' && keep_line_feeds {
            out.push(c);
        } else if is_hidden_or_control(c) {
            if (c as u32) < 0x100 {
                out.push_str(&format!("\\x{:02x}", c as u32));
            } else {
                out.push_str(&format!("\\u{{{:x}}}", c as u32));
            }
        } else {
            out.push(c);
        }
    }
    std::borrow::Cow::Owned(out)
}

/// The longest note a field log takes, in bytes of UTF-8: far under the reader's line
/// limit ([`crate::table::MAX_LINE_BYTES`]) even with every character a quote doubled
/// by CSV quoting and the other cells of the row beside it.
pub const MAX_NOTE_BYTES: usize = 4096;

/// Why `text` cannot be a free-text cell of a field log (a note), if it cannot: a
/// control character other than tab (NUL, a line end, an escape, C1 controls), or more
/// than `max_bytes` bytes. The one check of `pim log`, the walk page and the log reader,
/// so that what is written is what the reader accepts; the message names the character
/// by its code, never quoting the text.
///
/// ```
/// use pim_io::text::free_text_problem;
/// assert!(free_text_problem("gate post, east\tside", 4096).is_none());
/// assert!(free_text_problem("a\u{0}b", 4096).unwrap().contains("U+0000"));
/// assert!(free_text_problem(&"x".repeat(5000), 4096).unwrap().contains("4096 bytes"));
/// ```
pub fn free_text_problem(text: &str, max_bytes: usize) -> Option<String> {
    if let Some((i, c)) = text
        .char_indices()
        .find(|(_, c)| c.is_control() && *c != '\t')
    {
        let what = match c {
            '\n' | '\r' => "a line end: a note must fit on one line",
            '\0' => "a NUL character",
            _ => "a control character",
        };
        return Some(format!(
            "holds {what} (U+{:04X}, at character {}); type it again with plain characters",
            c as u32,
            text[..i].chars().count() + 1
        ));
    }
    if text.len() > max_bytes {
        return Some(format!(
            "is {} bytes long; a note takes at most {max_bytes} bytes",
            text.len()
        ));
    }
    None
}

/// [`free_text_problem`] for bytes that may not be UTF-8 (a form's field as sent).
pub fn free_text_bytes_problem(bytes: &[u8], max_bytes: usize) -> Option<String> {
    match std::str::from_utf8(bytes) {
        Ok(text) => free_text_problem(text, max_bytes),
        Err(e) => Some(format!(
            "is not UTF-8 text (a bad byte at byte {}); type it again",
            e.valid_up_to() + 1
        )),
    }
}

/// Why `id` cannot be an id, if it cannot: a control character, an invisible character
/// ([`is_hidden_or_control`]) or whitespace at either end would make two ids that look
/// the same different (`SKP-152` and `SKP-152` with a zero-width space after it).
///
/// ```
/// assert!(pim_io::text::id_problem("SKP-152").is_none());
/// assert!(pim_io::text::id_problem("SKP-152\u{200b}").unwrap().contains("U+200B"));
/// assert!(pim_io::text::id_problem("SKP-152\u{a0}").unwrap().contains("space"));
/// ```
pub fn id_problem(id: &str) -> Option<String> {
    if let Some(c) = id.chars().find(|c| is_hidden_or_control(*c)) {
        let kind = if c.is_control() {
            "a control character"
        } else {
            "an invisible character"
        };
        return Some(format!(
            "`{}` holds {kind} (U+{:04X}); type the id again with plain characters",
            terminal_escape(id, false),
            c as u32
        ));
    }
    if id.starts_with(char::is_whitespace) || id.ends_with(char::is_whitespace) {
        return Some(format!(
            "`{id}` starts or ends with a space (U+{:04X}); remove it",
            id.chars()
                .find(|c| c.is_whitespace())
                .map_or(0x20, |c| c as u32)
        ));
    }
    None
}

/// A finished XML document (a drawing library's SVG) with every character XML 1.0 does
/// not allow (C0 controls other than tab, line feed and carriage return; U+FFFE, U+FFFF)
/// shown as `\xNN`, as [`xml_escape`] shows them: text from a file that reached a label
/// unescaped cannot make the document ill-formed.
pub fn xml_chars_only(doc: String) -> String {
    let bad = |c: char| {
        (c as u32) < 0x20 && !matches!(c, '\t' | '\n' | '\r') || c == '\u{fffe}' || c == '\u{ffff}'
    };
    if !doc.contains(bad) {
        return doc;
    }
    let mut out = String::with_capacity(doc.len() + 16);
    for c in doc.chars() {
        if bad(c) {
            out.push_str(&format!("\\x{:02x}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

/// A writer that shows every character of [`is_hidden_or_control`] escaped (line feeds
/// and tabs kept), for output bound for a terminal; text split mid-character between
/// writes is held until it is whole. With `active` false it passes bytes through (a file
/// or a pipe gets the data as it is).
pub struct TerminalSafe<W: std::io::Write> {
    inner: W,
    active: bool,
    pending: Vec<u8>,
}

impl<W: std::io::Write> TerminalSafe<W> {
    pub fn new(inner: W, active: bool) -> Self {
        TerminalSafe {
            inner,
            active,
            pending: Vec::new(),
        }
    }

    fn emit(&mut self, upto: usize) -> std::io::Result<()> {
        let text = String::from_utf8_lossy(&self.pending[..upto]).into_owned();
        self.pending.drain(..upto);
        for (i, part) in text.split('\t').enumerate() {
            if i > 0 {
                self.inner.write_all(b"\t")?;
            }
            self.inner
                .write_all(terminal_escape(part, true).as_bytes())?;
        }
        Ok(())
    }
}

impl<W: std::io::Write> std::io::Write for TerminalSafe<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if !self.active {
            return self.inner.write(buf);
        }
        self.pending.extend_from_slice(buf);
        let upto = match std::str::from_utf8(&self.pending) {
            Ok(_) => self.pending.len(),
            // an incomplete character at the end waits for the next write
            Err(e) if e.error_len().is_none() => e.valid_up_to(),
            Err(_) => self.pending.len(),
        };
        self.emit(upto)?;
        Ok(buf.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        if !self.pending.is_empty() {
            self.emit(self.pending.len())?;
        }
        self.inner.flush()
    }
}

/// Line ends in `text`: `\n`, `\r\n` and a lone `\r` each count once.
pub fn count_line_ends(text: &[u8]) -> u64 {
    let mut n = 0;
    for (i, &b) in text.iter().enumerate() {
        if b == b'\n' || (b == b'\r' && text.get(i + 1) != Some(&b'\n')) {
            n += 1;
        }
    }
    n
}

/// A torn tail: when `text` does not end with a line end and something other than
/// blanks follows its last line end, the length to keep (through that line end) and the
/// number of the torn line. A text of one line is never torn (it is all header).
pub fn torn_tail(text: &[u8]) -> Option<(usize, u64)> {
    if matches!(text.last(), None | Some(b'\n' | b'\r')) {
        return None;
    }
    let last_end = text.iter().rposition(|&b| b == b'\n' || b == b'\r')?;
    if text[last_end + 1..].trim_ascii().is_empty() {
        return None;
    }
    Some((last_end + 1, count_line_ends(&text[..=last_end]) + 1))
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

/// An offset from UTC as a person writes it (`--utc-offset`): `±HH:MM` or `±HH`, at most
/// 14 hours; the error says how to write it.
pub fn utc_offset(text: &str) -> Result<time::UtcOffset, String> {
    let bad = || format!("`{text}` is not an offset from UTC: write it as +01:00 or -07:00");
    let t = text.trim();
    let mut chars = t.chars();
    let sign = match chars.next() {
        Some('+') => 1i8,
        Some('-') | Some('\u{2212}') => -1i8,
        _ => return Err(bad()),
    };
    let rest = chars.as_str();
    let (h, m) = rest.split_once(':').unwrap_or((rest, "0"));
    let h: i8 = h.parse().map_err(|_| bad())?;
    let m: i8 = m.parse().map_err(|_| bad())?;
    if !(0..60).contains(&m) || !(0..=14).contains(&h) || (h == 14 && m > 0) {
        return Err(format!("`{text}` lies outside ±14:00"));
    }
    time::UtcOffset::from_hms(sign * h, sign * m, 0).map_err(|_| bad())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn typed_positions_become_decimal_degrees() {
        assert_eq!(decimal_degrees("51 30.000 N", Axis::Latitude), "51.5000000");
        assert_eq!(decimal_degrees("2 36.000 W", Axis::Longitude), "-2.6000000");
        assert_eq!(decimal_degrees("51.25", Axis::Latitude), "51.25");
        assert_eq!(decimal_degrees("51 75 N", Axis::Latitude), "51 75 N");
    }

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
    fn quantities_carry_their_unit() {
        use pim_core::freq::Hz;
        assert_eq!(parse_quantity("3dB", "dB"), Ok(3.0));
        assert_eq!(parse_quantity("-80 dBm", "dBm"), Ok(-80.0));
        assert_eq!(parse_quantity("150m", "m"), Ok(150.0));
        assert_eq!(parse_quantity("10°", "°"), Ok(10.0));
        assert_eq!(parse_quantity("10deg", "°"), Ok(10.0));
        assert_eq!(parse_quantity("-3", "dB"), Ok(-3.0));
        assert_eq!(parse_quantity("1e3", ""), Ok(1000.0));
        for (text, unit, want) in [
            ("3dBm", "dB", "`3dBm` is in dBm; expected dB"),
            ("150km", "dB", "`150km` is in m; expected dB"),
            ("3dB", "", "`3dB` is in dB; expected a plain number"),
            (
                "5furlongs",
                "m",
                "`5furlongs`: unknown unit `furlongs`; expected metres",
            ),
            (
                "12,5",
                "m",
                "`12,5` is not a number (a decimal comma? write the number with a point)",
            ),
            ("-inf", "dB", "`-inf` is not a finite number"),
            ("NaN", "", "`NaN` is not a finite number"),
        ] {
            let got = parse_quantity(text, unit).unwrap_err();
            assert!(got.starts_with(want), "{text}: {got}");
        }
        assert_eq!(parse_frequency_in("12.5", 3), Ok(Hz(12_500)));
        assert_eq!(parse_frequency_in("12.5kHz", 3), Ok(Hz(12_500)));
        assert_eq!(parse_frequency_in("0.0125MHz", 3), Ok(Hz(12_500)));
        assert_eq!(parse_frequency_in("12500Hz", 3), Ok(Hz(12_500)));
        assert_eq!(parse_frequency_in("146.52", 6), Ok(Hz(146_520_000)));
        assert!(parse_frequency_in("146,52", 6)
            .unwrap_err()
            .contains("decimal comma"));
        assert!(parse_frequency_in("12.5m", 3)
            .unwrap_err()
            .contains("is in m; expected a frequency"));
    }

    #[test]
    fn terminal_output_is_escaped_across_writes() {
        use std::io::Write;
        let mut out = TerminalSafe::new(Vec::new(), true);
        let text = "a\u{1b}]52;c;x\u{7}\tb\u{202e}c\n".as_bytes();
        for chunk in text.chunks(3) {
            out.write_all(chunk).unwrap();
        }
        out.flush().unwrap();
        assert_eq!(
            String::from_utf8(out.inner).unwrap(),
            "a\\x1b]52;c;x\\x07\tb\\u{202e}c\n"
        );
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
