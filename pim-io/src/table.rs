//! A CSV table with a header, read as a stream: tolerant of a UTF-8 byte-order mark, CRLF
//! or LF line ends, quoted fields, surrounding blanks and columns it does not use; strict
//! about everything else. Each row carries its line number (the header is line 1) so that
//! a bad value can be named exactly.

use std::collections::{HashMap, VecDeque};
use std::io::{self, BufRead, BufReader, Read};

use pim_core::error::{Error, Place, Result};

/// The longest line accepted, in bytes. A longer one is not a table row but a damaged or
/// binary file, and reading it whole would hold memory for nothing.
pub const MAX_LINE_BYTES: usize = 64 * 1024;

/// A reader that turns CRLF and lone CR line ends into LF (so that line numbers count
/// true lines whatever the file's origin), and refuses lines longer than
/// [`MAX_LINE_BYTES`] and NUL bytes, so memory stays bounded and binary files are
/// recognised early.
///
/// It also notes where each line starts, because the CSV parser's own positions count
/// neither blank lines nor comments: [`Guarded::line_of`] turns a record's byte offset
/// into its true line number.
struct Guarded<R> {
    inner: R,
    since_newline: usize,
    lines_done: u64,
    after_cr: bool,
    /// Bytes handed out so far.
    out_pos: u64,
    /// (line number, byte offset of its start) of the lines handed out and not yet
    /// claimed by a record, blank and comment lines left out.
    line_starts: VecDeque<(u64, u64)>,
}

impl<R> Guarded<R> {
    fn new(inner: R) -> Self {
        Guarded {
            inner,
            since_newline: 0,
            lines_done: 0,
            after_cr: false,
            out_pos: 0,
            line_starts: VecDeque::new(),
        }
    }

    /// The line on which the record that the parser began at byte `start` really
    /// starts: the first line at or after `start` that is neither blank nor a comment.
    fn line_of(&mut self, start: u64) -> u64 {
        while let Some(&(line, offset)) = self.line_starts.front() {
            if offset < start {
                self.line_starts.pop_front();
                continue;
            }
            self.line_starts.pop_front();
            return line;
        }
        self.lines_done + 1
    }
}

impl<R: Read> Read for Guarded<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        loop {
            let n = self.inner.read(buf)?;
            if n == 0 {
                return Ok(0);
            }
            let mut w = 0;
            for i in 0..n {
                let mut b = buf[i];
                if b == b'\n' && self.after_cr {
                    self.after_cr = false;
                    continue;
                }
                self.after_cr = b == b'\r';
                if b == b'\r' {
                    b = b'\n';
                }
                // Blank and comment lines are counted (`lines_done`), never stored: a file
                // of fifty million blank lines holds no more memory than an empty one.
                if self.since_newline == 0 && b != b'\n' && b != b'#' {
                    self.line_starts
                        .push_back((self.lines_done + 1, self.out_pos + w as u64));
                }
                if b == b'\n' {
                    self.since_newline = 0;
                    self.lines_done += 1;
                } else {
                    self.since_newline += 1;
                    if b == 0 {
                        return Err(GuardError::new(
                            self.lines_done + 1,
                            "binary data (a NUL byte); expected a CSV text table".into(),
                        ));
                    }
                    if self.since_newline > MAX_LINE_BYTES {
                        return Err(GuardError::new(
                            self.lines_done + 1,
                            format!(
                                "longer than {MAX_LINE_BYTES} bytes; expected a CSV text table"
                            ),
                        ));
                    }
                }
                buf[w] = b;
                w += 1;
            }
            self.out_pos += w as u64;
            if w > 0 {
                return Ok(w);
            }
        }
    }
}

/// What [`Guarded`] refused, and on which line.
#[derive(Debug)]
struct GuardError {
    line: u64,
    message: String,
}

impl GuardError {
    #[allow(clippy::new_ret_no_self)]
    fn new(line: u64, message: String) -> io::Error {
        io::Error::new(io::ErrorKind::InvalidData, GuardError { line, message })
    }
}

impl std::fmt::Display for GuardError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {}: {}", self.line, self.message)
    }
}

impl std::error::Error for GuardError {}

/// The start of a table, read ahead to its first line that is neither blank nor a
/// comment, followed by the rest of the stream.
type Head<R> = std::io::Chain<std::io::Cursor<Vec<u8>>, BufReader<R>>;

/// Removes a UTF-8 byte-order mark and refuses UTF-16 text with a clear message. Also
/// returns the delimiter the header line uses (see [`sniff_delimiter`]). The header is
/// read ahead whole (up to [`MAX_LINE_BYTES`] per line), however the stream delivers it.
fn strip_bom<R: Read>(source: &str, reader: R) -> Result<(Head<R>, u8)> {
    let mut buf = BufReader::new(reader);
    let mut head = Vec::new();
    loop {
        let start = head.len();
        let n = (&mut buf)
            .take(MAX_LINE_BYTES as u64 + 1)
            .read_until(b'\n', &mut head)
            .map_err(|e| Error::io(source, &e))?;
        let line = &head[start..];
        let blank_or_comment = line.iter().all(u8::is_ascii_whitespace)
            || line.starts_with(b"#")
            || (start == 0 && line.starts_with(&[0xEF, 0xBB, 0xBF, b'#']));
        if n == 0 || n > MAX_LINE_BYTES || !blank_or_comment {
            break;
        }
    }
    if head.starts_with(&[0xFF, 0xFE]) || head.starts_with(&[0xFE, 0xFF]) {
        return Err(Error::input(
            Place::new(source).at_line(1),
            "UTF-16 text; save the file as UTF-8 (CSV UTF-8 in a spreadsheet)",
        ));
    }
    if head.starts_with(&[0xEF, 0xBB, 0xBF]) {
        head.drain(..3);
    }
    let delimiter = sniff_delimiter(&head);
    Ok((std::io::Cursor::new(head).chain(buf), delimiter))
}

/// The delimiter of a table from its first line that is neither blank nor a comment:
/// the most frequent of comma, semicolon (spreadsheets set to a decimal comma save
/// this) and tab outside quotes; a comma when there is none.
pub fn sniff_delimiter(head: &[u8]) -> u8 {
    let line = head
        .split(|&b| b == b'\n')
        .map(|l| l.strip_suffix(b"\r").unwrap_or(l))
        .find(|l| !l.iter().all(u8::is_ascii_whitespace) && !l.starts_with(b"#"))
        .unwrap_or(&[]);
    let mut counts = [(b',', 0usize), (b';', 0), (b'\t', 0)];
    let mut quoted = false;
    for &b in line {
        if b == b'"' {
            quoted = !quoted;
        } else if !quoted {
            for c in counts.iter_mut() {
                if c.0 == b {
                    c.1 += 1;
                }
            }
        }
    }
    let best = counts.iter().max_by_key(|c| c.1).map_or((b',', 0), |c| *c);
    if best.1 == 0 {
        b','
    } else {
        best.0
    }
}

/// A CSV table being read row by row.
pub struct Table<R: Read> {
    source: String,
    reader: csv::Reader<Guarded<Head<R>>>,
    headers: Vec<String>,
    /// The header's names as the file writes them (trimmed, case kept).
    raw_headers: Vec<String>,
    header_line: u64,
    columns: HashMap<String, usize>,
    record: csv::ByteRecord,
    delimiter: u8,
    /// Whether the last error of [`Table::next_row`] concerned one row only (a ragged
    /// row, a field that is not UTF-8), so that reading may go on after it.
    row_error: bool,
}

impl<R: Read> Table<R> {
    /// Reads the header line. `source` names the file in messages.
    pub fn open(source: &str, reader: R) -> Result<Self> {
        let (buf, delimiter) = strip_bom(source, reader)?;
        let guarded = Guarded::new(buf);
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(false)
            .flexible(true)
            .trim(csv::Trim::All)
            .comment(Some(b'#'))
            .from_reader(guarded);
        let mut header = csv::ByteRecord::new();
        let got = reader
            .read_byte_record(&mut header)
            .map_err(|e| csv_error(source, e))?;
        if !got {
            return Err(Error::input(
                Place::new(source),
                "empty file: expected a header line naming the columns",
            ));
        }
        let header_start = header.position().map_or(0, |p| p.byte());
        let header_line = reader.get_mut().line_of(header_start);
        let mut headers = Vec::with_capacity(header.len());
        let mut raw_headers = Vec::with_capacity(header.len());
        let mut columns = HashMap::new();
        for (i, raw) in header.iter().enumerate() {
            let name = std::str::from_utf8(raw)
                .map_err(|_| {
                    Error::input(
                        Place::new(source).at_line(header_line),
                        format!("column {} of the header is not UTF-8 text", i + 1),
                    )
                })?
                .trim();
            raw_headers.push(name.to_string());
            let name = name.to_ascii_lowercase();
            if !name.is_empty() && columns.insert(name.clone(), i).is_some() {
                return Err(Error::input(
                    Place::new(source).at_line(header_line).at_field(&name),
                    "the column appears twice in the header",
                ));
            }
            headers.push(name);
        }
        Ok(Table {
            source: source.to_string(),
            reader,
            headers,
            raw_headers,
            header_line,
            columns,
            record: csv::ByteRecord::new(),
            delimiter,
            row_error: false,
        })
    }

    pub fn source(&self) -> &str {
        &self.source
    }

    /// The index of a column, if the header has it.
    pub fn column(&self, name: &str) -> Option<usize> {
        self.columns.get(name).copied()
    }

    /// The index of a column the file must have.
    pub fn require(&self, name: &str) -> Result<usize> {
        self.column(name).ok_or_else(|| {
            Error::input(
                Place::new(&self.source).at_line(1).at_field(name),
                format!(
                    "missing column; the header has: {}",
                    self.headers
                        .iter()
                        .filter(|h| !h.is_empty())
                        .cloned()
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })
    }

    /// Header names that are not among `known`, in file order.
    pub fn unknown_columns(&self, known: &[&str]) -> Vec<String> {
        self.headers
            .iter()
            .filter(|h| !h.is_empty() && !known.contains(&h.as_str()))
            .cloned()
            .collect()
    }

    pub fn headers(&self) -> &[String] {
        &self.headers
    }

    /// The header's names as the file writes them (trimmed, case kept).
    pub fn raw_headers(&self) -> &[String] {
        &self.raw_headers
    }

    /// The line the header is on.
    pub fn header_line(&self) -> u64 {
        self.header_line
    }

    /// The delimiter the table uses.
    pub fn delimiter(&self) -> u8 {
        self.delimiter
    }

    /// Whether the last error of [`Table::next_row`] concerned that row only (a ragged
    /// row, a field that is not UTF-8): the next call reads on after it.
    pub fn last_error_was_row(&self) -> bool {
        self.row_error
    }

    /// After the last row: whether the file ended without a line end, which a writer
    /// that appends whole lines never leaves (a torn tail).
    pub fn ended_mid_line(&self) -> bool {
        self.reader.get_ref().since_newline > 0
    }

    /// After the last row: the line the file ended on without a line end, if it did
    /// (a row there may be torn by an interrupted write).
    pub fn torn_line(&self) -> Option<u64> {
        let g = self.reader.get_ref();
        (g.since_newline > 0).then_some(g.lines_done + 1)
    }

    /// The next data row; blank rows (every field empty) are skipped.
    pub fn next_row(&mut self) -> Result<Option<Row<'_>>> {
        self.row_error = false;
        let line = loop {
            let got = self
                .reader
                .read_byte_record(&mut self.record)
                .map_err(|e| csv_error(&self.source, e))?;
            if !got {
                return Ok(None);
            }
            let start = self.record.position().map_or(0, |p| p.byte());
            let line = self.reader.get_mut().line_of(start);
            if self.record.iter().all(|f| f.is_empty()) {
                continue;
            }
            break line;
        };
        if self.record.len() != self.headers.len() {
            // `146,52` in a comma-separated file splits a number in two
            let digits = |f: &[u8]| {
                let f = f.strip_prefix(b"-").unwrap_or(f);
                !f.is_empty() && f.iter().all(u8::is_ascii_digit)
            };
            let split_number = self.delimiter == b','
                && self.record.len() > self.headers.len()
                && (1..self.record.len())
                    .any(|i| digits(&self.record[i - 1]) && digits(&self.record[i]));
            let split_text =
                !split_number && self.delimiter == b',' && self.record.len() > self.headers.len();
            self.row_error = true;
            return Err(Error::input(
                Place::new(&self.source).at_line(line),
                format!(
                    "{} field{}, but the header has {} columns{}",
                    self.record.len(),
                    if self.record.len() == 1 { "" } else { "s" },
                    self.headers.len(),
                    if split_number {
                        " (a decimal comma? write numbers with a point, or separate the \
                         columns with `;`)"
                    } else if split_text {
                        " (a comma inside a text such as a note? put that text in double \
                         quotes: \"a, b\")"
                    } else {
                        ""
                    }
                ),
            ));
        }
        let mut fields = Vec::with_capacity(self.record.len());
        for (i, raw) in self.record.iter().enumerate() {
            let text = std::str::from_utf8(raw).map_err(|_| {
                self.row_error = true;
                Error::input(
                    Place::new(&self.source)
                        .at_line(line)
                        .at_field(self.headers[i].clone()),
                    "not UTF-8 text; save the file as UTF-8",
                )
            })?;
            fields.push(text);
        }
        // A record is handed out only once its line end is read, except the last one of
        // a file that ends without a line end: that one is on the line still open.
        let unterminated = self.torn_line() == Some(line);
        Ok(Some(Row {
            source: &self.source,
            line,
            unterminated,
            headers: &self.headers,
            fields,
        }))
    }
}

fn csv_error(source: &str, err: csv::Error) -> Error {
    let line = err.position().map(|p| p.line());
    let message = match err.into_kind() {
        csv::ErrorKind::Io(e) => {
            if let Some(g) = e.get_ref().and_then(|g| g.downcast_ref::<GuardError>()) {
                return Error::input(Place::new(source).at_line(g.line), g.message.clone());
            }
            return Error::io(source, &e);
        }
        other => format!("{other:?}"),
    };
    let mut place = Place::new(source);
    place.line = line;
    Error::input(place, message)
}

/// One data row of a [`Table`].
pub struct Row<'a> {
    source: &'a str,
    pub line: u64,
    /// The row is the last of a file that ends without a line end (perhaps torn).
    pub unterminated: bool,
    headers: &'a [String],
    fields: Vec<&'a str>,
}

impl<'a> Row<'a> {
    /// Every field of the row, in column order.
    pub fn cells(&self) -> &[&'a str] {
        &self.fields
    }

    /// The text of a column, or `None` when the column is absent or the field is empty.
    pub fn text(&self, column: Option<usize>) -> Option<&'a str> {
        column
            .and_then(|i| self.fields.get(i).copied())
            .filter(|s| !s.is_empty())
    }

    /// The text of the named column.
    pub fn get(&self, name: &str) -> Option<&'a str> {
        self.text(self.headers.iter().position(|h| h == name))
    }

    /// Where a field of this row is, for messages.
    pub fn place(&self, field: &str) -> Place {
        Place::new(self.source).at_line(self.line).at_field(field)
    }
}

/// A record whose fields are looked up by column name: a CSV row, or an object of a JSON
/// array, so that both formats share one validation.
pub trait Fields {
    /// The text of a field, or `None` when absent or empty.
    fn field(&self, name: &str) -> Option<&str>;
    /// Where a field is, for messages.
    fn place(&self, name: &str) -> Place;
}

impl Fields for Row<'_> {
    fn field(&self, name: &str) -> Option<&str> {
        self.get(name)
    }
    fn place(&self, name: &str) -> Place {
        Row::place(self, name)
    }
}

/// The error for a table with a header and nothing under it; `what` names the rows
/// ("data rows", "readings").
pub fn no_rows(source: &str, what: &str) -> Error {
    Error::input(Place::new(source), format!("no {what} after the header"))
}

/// A hint for a number written with a decimal comma (`146,94`).
pub fn decimal_comma_hint(text: &str) -> &'static str {
    let t = text.trim().trim_start_matches(['-', '+']);
    match t.split_once(',') {
        Some((a, b))
            if !a.is_empty()
                && !b.is_empty()
                && a.bytes().all(|c| c.is_ascii_digit())
                && b.bytes().all(|c| c.is_ascii_digit()) =>
        {
            " (a decimal comma? write the number with a point)"
        }
        _ => "",
    }
}

/// Parses a finite decimal number; names the place on failure.
pub fn parse_finite(place: impl FnOnce() -> Place, text: &str) -> Result<f64> {
    match text.trim().parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(Error::input(
            place(),
            format!("`{text}` is not a finite number"),
        )),
        Err(_) => Err(Error::input(
            place(),
            format!("`{text}` is not a number{}", decimal_comma_hint(text)),
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows(text: &[u8]) -> Result<Vec<(u64, Vec<String>)>> {
        let mut t = Table::open("t.csv", text)?;
        let mut out = Vec::new();
        while let Some(r) = t.next_row()? {
            out.push((r.line, r.fields.iter().map(|s| s.to_string()).collect()));
        }
        Ok(out)
    }

    #[test]
    fn reads_bom_crlf_quotes_and_line_numbers() {
        let text = b"\xEF\xBB\xBFid,freq_mhz\r\n\"A, one\",146.52\r\n\r\nB,147\r\n";
        let r = rows(text).unwrap();
        assert_eq!(r[0], (2, vec!["A, one".to_string(), "146.52".to_string()]));
        assert_eq!(r[1].0, 4);
        let r = rows(b"id,f\rA,1\rB,2").unwrap();
        assert_eq!((r[1].0, r[1].1[0].as_str()), (3, "B"));
        let r = rows(b"# site survey\n\nid,f\nA,\"1\n2\"\n\n\n# moved\nB,2\n , \nC,3").unwrap();
        let lines: Vec<u64> = r.iter().map(|x| x.0).collect();
        assert_eq!(lines, vec![4, 9, 11]);
    }

    #[test]
    fn names_ragged_rows_binary_and_utf16() {
        let e = rows(b"a,b\nx\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 2: 1 field, but the header has 2 columns"
        );
        // a comma in a text gets the hint to quote it
        let e = rows(b"id,note\nA,dispatch, north side\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 2: 3 fields, but the header has 2 columns (a comma inside a text \
             such as a note? put that text in double quotes: \"a, b\")"
        );
        // a number split by a decimal comma gets the hint; other delimiters need none
        let e = rows(b"id,freq_mhz,erp_w\nA,146,52,40\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 2: 4 fields, but the header has 3 columns (a decimal comma? write \
             numbers with a point, or separate the columns with `;`)"
        );
        let e = rows(b"a;b\n1;2;3\n").unwrap_err();
        assert!(!e.to_string().contains("decimal comma"), "{e}");
        let e = rows(b"a,b\n1,\x002\n").unwrap_err();
        assert!(e.to_string().contains("binary data"), "{e}");
        let e = rows(b"\xFF\xFEa\x00").unwrap_err();
        assert!(e.to_string().contains("UTF-16"), "{e}");
        let e = rows(b"").unwrap_err();
        assert!(e.to_string().contains("empty file"), "{e}");
        let e = rows(b"a,b\n1,\xC3\x28\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 2, field `b`: not UTF-8 text; save the file as UTF-8"
        );
    }

    #[test]
    fn reads_semicolon_and_tab_tables() {
        let r = rows(b"id;freq_mhz;note\nA;146.94;\"a, b\"\n").unwrap();
        assert_eq!(r[0].1, vec!["A", "146.94", "a, b"]);
        let r = rows(b"# comment, with commas\nid\tfreq_mhz\nA\t146.94\n").unwrap();
        assert_eq!(r[0].1, vec!["A", "146.94"]);
        assert_eq!(sniff_delimiter(b"id"), b',');
    }

    #[test]
    fn refuses_huge_lines() {
        let mut text = b"a,b\n1,".to_vec();
        text.extend(std::iter::repeat_n(b'9', MAX_LINE_BYTES + 10));
        let e = rows(&text).unwrap_err();
        assert!(
            e.to_string().starts_with("t.csv, line 2: longer than"),
            "{e}"
        );
    }
}
