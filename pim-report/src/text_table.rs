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

    /// The table as lines, columns separated by two spaces, the header underlined.
    pub fn render(&self) -> String {
        let width = |s: &str| s.chars().count();
        let mut widths: Vec<usize> = self.headers.iter().map(|(h, _)| width(h)).collect();
        for row in &self.rows {
            for (w, cell) in widths.iter_mut().zip(row) {
                *w = (*w).max(width(cell));
            }
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
        for row in &self.rows {
            out.push_str(&line(row.iter().map(|s| s.as_str()).collect()));
            out.push('\n');
        }
        out
    }
}
