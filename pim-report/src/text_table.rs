//! Plain aligned text tables for the terminal.

/// Column alignment.
#[derive(Clone, Copy, PartialEq, Eq)]
pub enum Align {
    Left,
    Right,
}

/// A table being filled row by row, written with columns padded to their widest cell.
pub struct TextTable {
    headers: Vec<(String, Align)>,
    rows: Vec<Vec<String>>,
}

impl TextTable {
    pub fn new(headers: &[(&str, Align)]) -> Self {
        TextTable {
            headers: headers.iter().map(|(h, a)| (h.to_string(), *a)).collect(),
            rows: Vec::new(),
        }
    }

    /// Adds a row; characters that could drive the terminal (escape sequences, bidi
    /// overrides) are shown escaped (`pim_io::text::terminal_escape`).
    pub fn push(&mut self, row: Vec<String>) {
        self.rows.push(
            row.into_iter()
                .map(|c| pim_io::text::terminal_escape(&c, false).into_owned())
                .collect(),
        );
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The table as lines, columns separated by two spaces, the header underlined,
    /// as wide as its cells need.
    pub fn render(&self) -> String {
        self.render_within(usize::MAX)
    }

    /// The table as [`TextTable::render`] writes it, its text columns wrapped at spaces
    /// (the widest first, none narrower than [`MIN_WRAPPED`] characters) so that a line
    /// takes at most `max` characters where the words allow.
    pub fn render_within(&self, max: usize) -> String {
        let width = |s: &str| s.chars().count();
        let mut widths: Vec<usize> = self.headers.iter().map(|(h, _)| width(h)).collect();
        for row in &self.rows {
            for (w, cell) in widths.iter_mut().zip(row) {
                *w = (*w).max(width(cell));
            }
        }
        let total = |w: &[usize]| w.iter().sum::<usize>() + 2 * w.len().saturating_sub(1);
        // each column's cells as lines, wrapped to its width
        let mut wrapped: Vec<Vec<Vec<String>>> = self
            .rows
            .iter()
            .map(|r| r.iter().map(|c| vec![c.clone()]).collect())
            .collect();
        for _ in 0..self.headers.len() {
            let over = total(&widths).saturating_sub(max);
            if over == 0 {
                break;
            }
            let Some(col) = (0..widths.len())
                .filter(|&i| self.headers[i].1 == Align::Left && widths[i] > MIN_WRAPPED)
                .max_by_key(|&i| widths[i])
            else {
                break;
            };
            let goal = widths[col].saturating_sub(over).max(MIN_WRAPPED);
            let mut new_width = width(&self.headers[col].0);
            for (row, cells) in self.rows.iter().zip(wrapped.iter_mut()) {
                if let Some(cell) = row.get(col) {
                    let lines = wrap(cell, goal);
                    for l in &lines {
                        new_width = new_width.max(width(l));
                    }
                    cells[col] = lines;
                }
            }
            if new_width >= widths[col] {
                break;
            }
            widths[col] = new_width;
        }
        let line = |cells: Vec<&str>| -> String {
            let mut s = String::new();
            for (i, cell) in cells.iter().enumerate() {
                let pad = widths[i].saturating_sub(width(cell));
                if i > 0 {
                    s.push_str("  ");
                }
                match self.headers[i].1 {
                    Align::Left => {
                        s.push_str(cell);
                        if i + 1 < cells.len() {
                            s.push_str(&" ".repeat(pad));
                        }
                    }
                    Align::Right => {
                        s.push_str(&" ".repeat(pad));
                        s.push_str(cell);
                    }
                }
            }
            s.trim_end().to_string()
        };
        let mut out = String::new();
        out.push_str(&line(
            self.headers.iter().map(|(h, _)| h.as_str()).collect(),
        ));
        out.push('\n');
        let rule: Vec<String> = widths.iter().map(|w| "─".repeat(*w)).collect();
        out.push_str(rule.join("  ").trim_end());
        out.push('\n');
        for cells in &wrapped {
            let height = cells.iter().map(Vec::len).max().unwrap_or(1);
            for k in 0..height {
                out.push_str(&line(
                    cells
                        .iter()
                        .map(|c| c.get(k).map_or("", String::as_str))
                        .collect(),
                ));
                out.push('\n');
            }
        }
        out
    }
}

/// Frequencies for one column, exact to the hertz, every one with as many decimals as
/// the longest needs so that the points line up (`452.000`, `452.150`, `452.375`);
/// `scale` is 6 for MHz, 3 for kHz. A `None` is shown as `—`.
pub fn frequency_column(freqs: &[Option<pim_core::freq::Hz>], scale: u32) -> Vec<String> {
    let text = |f: pim_core::freq::Hz| {
        if scale == 6 {
            f.mhz_text()
        } else {
            f.khz_text()
        }
    };
    let decimals = freqs
        .iter()
        .flatten()
        .map(|f| text(*f).split('.').nth(1).map_or(0, str::len))
        .max()
        .unwrap_or(0)
        .max(1);
    freqs
        .iter()
        .map(|f| match f {
            Some(f) => {
                let t = text(*f);
                let have = t.split('.').nth(1).map_or(0, str::len);
                let mut t = if have == 0 { format!("{t}.") } else { t };
                t.push_str(&"0".repeat(decimals - have));
                t
            }
            None => "—".to_string(),
        })
        .collect()
}

/// The width a terminal table keeps to unless `--wide` is given.
pub const TERMINAL_WIDTH: usize = 100;

/// The narrowest a wrapped column is made, in characters.
pub const MIN_WRAPPED: usize = 12;

/// Prose for the terminal: each line longer than `width` characters broken at spaces,
/// its continuation indented two spaces past the line's own indent.
///
/// ```
/// use pim_report::text_table::wrap_lines;
/// let text = "alpha beta gamma delta epsilon\nzeta";
/// assert_eq!(wrap_lines(text, 20), "alpha beta gamma\n  delta epsilon\nzeta");
/// ```
pub fn wrap_lines(text: &str, width: usize) -> String {
    let mut out = String::with_capacity(text.len());
    for (n, line) in text.split('\n').enumerate() {
        if n > 0 {
            out.push('\n');
        }
        if line.chars().count() <= width {
            out.push_str(line);
            continue;
        }
        let indent = line.len() - line.trim_start().len();
        let pad = " ".repeat(indent + 2);
        let body = wrap(
            line.trim_start(),
            width.saturating_sub(indent + 2).max(MIN_WRAPPED),
        );
        for (k, piece) in body.iter().enumerate() {
            if k > 0 {
                out.push('\n');
                out.push_str(&pad);
            } else {
                out.push_str(&line[..indent]);
            }
            out.push_str(piece);
        }
    }
    out
}

/// Writes what `body` writes with its prose wrapped to [`TERMINAL_WIDTH`]
/// ([`wrap_lines`]); tables made with [`TextTable::render_within`] already keep to it and
/// pass unchanged.
pub fn write_wrapped(
    out: &mut dyn std::io::Write,
    body: impl FnOnce(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let mut buffer = Vec::new();
    body(&mut buffer)?;
    let text = String::from_utf8_lossy(&buffer);
    out.write_all(wrap_lines(&text, TERMINAL_WIDTH).as_bytes())
}

/// `text` in lines of at most `width` characters, broken at spaces (a longer word keeps
/// its own line).
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut current = String::new();
    for word in text.split(' ') {
        let fits = current.chars().count() + 1 + word.chars().count() <= width;
        if current.is_empty() {
            current = word.to_string();
        } else if fits {
            current.push(' ');
            current.push_str(word);
        } else {
            lines.push(std::mem::take(&mut current));
            current = word.to_string();
        }
    }
    lines.push(current);
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_frequency_column_lines_up() {
        use pim_core::freq::Hz;
        let col = frequency_column(
            &[
                Some(Hz(452_000_000)),
                Some(Hz(452_150_000)),
                Some(Hz(452_375_000)),
                None,
            ],
            6,
        );
        assert_eq!(col, ["452.000", "452.150", "452.375", "—"]);
    }

    #[test]
    fn a_wide_table_wraps_its_text_columns_to_fit() {
        let mut t = TextTable::new(&[("#", Align::Right), ("note", Align::Left)]);
        t.push(vec![
            "1".into(),
            "implausible, away from the fix, no location".into(),
        ]);
        let text = t.render_within(24);
        assert!(text.lines().all(|l| l.chars().count() <= 24), "{text}");
        assert_eq!(text.lines().count(), 2 + 3, "{text}");
        assert!(text.contains("from the fix"), "{text}");
        assert_eq!(t.render().lines().count(), 3);
    }
}
