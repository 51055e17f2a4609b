//! CSV for spreadsheets: every CSV the tool writes for people to open goes through
//! [`write_row`], which quotes by the csv crate's rules and neutralises text that a
//! spreadsheet would run as a formula.
//!
//! A cell that starts with `=`, `+`, `-`, `@`, a tab or a carriage return is read as a
//! formula by common spreadsheets (CSV injection); OWASP's guidance is to prefix such a
//! text cell with an apostrophe, which the spreadsheet shows as plain text. Numbers
//! (`-3.5`, `+12`) are left as they are.

use std::borrow::Cow;
use std::io::{self, Write};

/// `text` as a spreadsheet will show it, never as a formula (module docs).
///
/// ```
/// use pim_report::csv_out::spreadsheet_safe;
/// assert_eq!(spreadsheet_safe("=HYPERLINK(\"x\")"), "'=HYPERLINK(\"x\")");
/// assert_eq!(spreadsheet_safe("-3.5"), "-3.5");
/// assert_eq!(spreadsheet_safe("SKP-152"), "SKP-152");
/// ```
pub fn spreadsheet_safe(text: &str) -> Cow<'_, str> {
    let risky = text.starts_with(['=', '+', '-', '@', '\t', '\r']);
    if risky && text.trim().parse::<f64>().is_err() {
        Cow::Owned(format!("'{text}"))
    } else {
        Cow::Borrowed(text)
    }
}

/// Writes one comma-separated row, each cell made [`spreadsheet_safe`] and quoted where
/// needed, ending in a line feed.
pub fn write_row<I, S>(out: &mut dyn Write, cells: I) -> io::Result<()>
where
    I: IntoIterator<Item = S>,
    S: AsRef<str>,
{
    let safe: Vec<String> = cells
        .into_iter()
        .map(|c| spreadsheet_safe(c.as_ref()).into_owned())
        .collect();
    out.write_all(pim_io::text::csv_record(&safe, b',', false).as_bytes())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formulas_are_neutralised_and_quoted() {
        let mut out = Vec::new();
        write_row(&mut out, ["@SUM(A1)", "a,b", "\tx", "+1", "plain"]).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "'@SUM(A1),\"a,b\",'\tx,+1,plain\n"
        );
    }
}
