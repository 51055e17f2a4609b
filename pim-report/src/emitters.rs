//! How an emitter list was read, before any analysis (`pim emitters`): the field each
//! column became, its unit and its first values converted, the columns not used, what
//! was assumed, and every row refused with why.

use std::fmt::Write as _;

use pim_io::columns::{Field, UnitSource};
use pim_io::emitters::EmitterFile;

/// The unit a column is read in, in words.
fn unit_text(file: &EmitterFile, field: Field, i: usize) -> String {
    let Some(m) = file.layout.all(field).nth(i) else {
        return String::new();
    };
    let unit = match (m.unit, m.unit_source, field) {
        (Some(u), _, _) => u.text().to_string(),
        (None, UnitSource::Assumed, Field::Freq) => "MHz (assumed)".into(),
        (None, UnitSource::Assumed, Field::Bandwidth) => "kHz (assumed)".into(),
        (None, UnitSource::Assumed, Field::Height) => "m (assumed)".into(),
        (None, UnitSource::InCells, _) => "in each cell".into(),
        (None, _, Field::Lat | Field::Lon) => "degrees".into(),
        (None, _, Field::Emission) => "ITU designator".into(),
        _ => "-".into(),
    };
    if m.eirp {
        format!("{unit} EIRP, read as ERP − 2.15 dB")
    } else {
        unit
    }
}

/// The report of how `file` (named `source`) was read.
pub fn reading_report(source: &str, file: &EmitterFile) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{source}: {} row{}, {} emitter{} read, {} refused",
        file.rows,
        if file.rows == 1 { "" } else { "s" },
        file.emitters.len(),
        if file.emitters.len() == 1 { "" } else { "s" },
        file.refused.len()
    );
    out.push('\n');
    let mut rows: Vec<[String; 4]> = vec![[
        "column".into(),
        "field".into(),
        "unit".into(),
        "first values read".into(),
    ]];
    let mut seen_erp = 0;
    for m in &file.layout.fields {
        let i = if m.field == Field::Erp {
            seen_erp += 1;
            seen_erp - 1
        } else {
            0
        };
        let values = file
            .samples
            .iter()
            .find(|(f, _)| *f == m.field)
            .map(|(_, v)| v.join(", "))
            .unwrap_or_default();
        let values = if m.field == Field::Erp && i > 0 {
            "(must agree with the first power column)".to_string()
        } else if m.field == Field::Erp {
            format!("{values} (ERP)")
        } else {
            values
        };
        let field = if m.by_mapping {
            format!("{} (--columns)", m.field.name())
        } else {
            m.field.name().to_string()
        };
        rows.push([m.label.clone(), field, unit_text(file, m.field, i), values]);
    }
    let widths: Vec<usize> = (0..3)
        .map(|c| rows.iter().map(|r| r[c].chars().count()).max().unwrap_or(0))
        .collect();
    for r in &rows {
        let mut line = String::new();
        for (c, w) in widths.iter().enumerate() {
            line.push_str(&format!("{:<w$}  ", r[c], w = w));
        }
        line.push_str(&r[3]);
        let _ = writeln!(out, "{}", line.trim_end());
    }
    if !file.layout.unused.is_empty() {
        out.push('\n');
        let _ = writeln!(out, "Columns not used:");
        for (name, why) in &file.layout.unused {
            let _ = writeln!(out, "  {name}: {why}");
        }
    }
    if !file.notes.is_empty() {
        out.push('\n');
        let _ = writeln!(out, "Notes:");
        for note in &file.notes {
            let _ = writeln!(out, "  {note}");
        }
    }
    if !file.refused.is_empty() {
        out.push('\n');
        let _ = writeln!(out, "Rows refused:");
        for e in &file.refused {
            let _ = writeln!(out, "  {e}");
        }
    }
    out
}
