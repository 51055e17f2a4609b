//! The emitter file (CSV with a header, or a JSON array of objects with the same fields),
//! the receiver file of a site study and the site's structures.
//!
//! The tool's own emitter columns: `id` and `freq_mhz` are required; `bw_khz`, `erp_w` or
//! `erp_dbm`, `lat`, `lon`, `height_m`, `kind`, `keyed` (`continuous` or `intermittent`),
//! `owner`, `note`, `emission` (an ITU emission designator) and `modulation` are optional.
//! Other names are read as [`crate::columns`] matches them (`Call sign`, `Frequency
//! (MHz)`, `ERP (dBW)`, `LAT_DEG`…), with the mapping of `--columns` first; columns not
//! used are kept aside and reported once.

use std::collections::HashMap;
use std::io::Read;

use crate::columns::{resolve, ColumnMap, Field, Layout, Mapped, TableKind, Unit, UnitSource};
use crate::table::{decimal_comma_hint, no_rows, parse_finite, Fields, Table};
use crate::text::{parse_coordinate, parse_frequency_in, split_unit, Axis};
use pim_core::emission::{default_bandwidth_for_kind, parse_designator, ModulationClass};
use pim_core::emitter::{watts_to_dbm, Emitter, Keying, Receiver};
use pim_core::error::{Error, Place, Result};
use pim_core::freq::{parse_khz, parse_mhz, DecimalError, Hz, MAX_FREQUENCY};
use pim_core::geo::GeoPoint;

/// Columns the emitter reader understands under the tool's own names.
pub const EMITTER_COLUMNS: &[&str] = &[
    "id",
    "freq_mhz",
    "bw_khz",
    "erp_w",
    "erp_dbm",
    "lat",
    "lon",
    "height_m",
    "kind",
    "keyed",
    "owner",
    "note",
    "emission",
    "modulation",
];

/// Columns the receiver reader understands under the tool's own names.
pub const RECEIVER_COLUMNS: &[&str] = &["id", "freq_mhz", "bw_khz", "lat", "lon", "note"];

/// The highest ERP accepted: 100 dBm (10 MW), above any broadcaster.
pub const MAX_ERP_DBM: f64 = 100.0;
/// The lowest ERP read (1 nW): less is no emitter but a typing error.
pub const MIN_ERP_DBM: f64 = -60.0;
/// ERP = EIRP − 2.15 dB: a half-wave dipole's gain over an isotropic antenna.
pub const DIPOLE_GAIN_DB: f64 = 2.15;

/// Emitters read from a file, with what the reader noticed on the way.
#[derive(Clone, Debug, Default)]
pub struct EmitterFile {
    pub emitters: Vec<Emitter>,
    /// Columns present in the file that the tool does not use.
    pub ignored_columns: Vec<String>,
    /// How each column was read.
    pub layout: Layout,
    /// What the reading assumed or converted, to be said (EIRP read as ERP, a bandwidth
    /// taken from the kind, a unit assumed).
    pub notes: Vec<String>,
    /// Rows refused, when reading went on after them ([`ReadOptions::keep_going`]).
    pub refused: Vec<Error>,
    /// Data rows seen.
    pub rows: usize,
    /// The first values read of each field, as converted (at most three each).
    pub samples: Vec<(Field, Vec<String>)>,
}

/// How to read a table: the `--columns` mapping, and whether to go on past bad rows.
#[derive(Clone, Copy, Debug, Default)]
pub struct ReadOptions<'a> {
    pub columns: Option<&'a ColumnMap>,
    /// Refused rows are listed in [`EmitterFile::refused`] and reading goes on.
    pub keep_going: bool,
}

/// Receivers read from a file.
#[derive(Clone, Debug, Default)]
pub struct ReceiverFile {
    pub receivers: Vec<Receiver>,
    pub ignored_columns: Vec<String>,
    pub layout: Layout,
    pub notes: Vec<String>,
}

/// Structures read from a file.
#[derive(Clone, Debug, Default)]
pub struct StructureFile {
    pub structures: Vec<pim_core::ticket::Structure>,
    pub ignored_columns: Vec<String>,
    pub layout: Layout,
}

/// Reads emitters; JSON when the text starts with `[`, CSV otherwise.
pub fn read_emitters<R: Read>(source: &str, reader: R) -> Result<EmitterFile> {
    read_emitters_with(source, reader, ReadOptions::default())
}

/// Reads emitters with a column mapping, optionally going on past bad rows.
pub fn read_emitters_with<R: Read>(
    source: &str,
    mut reader: R,
    options: ReadOptions<'_>,
) -> Result<EmitterFile> {
    let mut head = [0u8; 1];
    let mut first = Vec::new();
    // Peek past blanks and a byte-order mark to decide between JSON and CSV.
    loop {
        let n = reader.read(&mut head).map_err(|e| Error::io(source, &e))?;
        if n == 0 {
            break;
        }
        first.push(head[0]);
        let b = head[0];
        if b == b'[' {
            let mut rest = Vec::new();
            reader
                .read_to_end(&mut rest)
                .map_err(|e| Error::io(source, &e))?;
            first.extend(rest);
            return read_emitters_json(source, &first, options);
        }
        let is_bom_byte = first.len() <= 3 && [0xEF, 0xBB, 0xBF][first.len() - 1] == b;
        if !(b.is_ascii_whitespace() || is_bom_byte) {
            break;
        }
    }
    read_emitters_csv(source, first.as_slice().chain(reader), options)
}

/// The mapping to use: the one given, else none.
fn mapping<'a>(options: &ReadOptions<'a>, empty: &'a ColumnMap) -> &'a ColumnMap {
    options.columns.unwrap_or(empty)
}

/// Headers a layout did not use, as the unused-column note names them.
fn unused_names(layout: &Layout) -> Vec<String> {
    layout.unused.iter().map(|(h, _)| h.clone()).collect()
}

/// Collects what reading an emitter table noticed, and the emitters themselves.
struct Collector<'a> {
    source: &'a str,
    keep_going: bool,
    file: EmitterFile,
    seen: HashMap<String, u64>,
    defaults: Vec<(&'static str, u64)>,
    haat_used: bool,
}

impl<'a> Collector<'a> {
    fn new(source: &'a str, layout: Layout, keep_going: bool) -> Self {
        Collector {
            source,
            keep_going,
            file: EmitterFile {
                ignored_columns: unused_names(&layout),
                layout,
                ..Default::default()
            },
            seen: HashMap::new(),
            defaults: Vec::new(),
            haat_used: false,
        }
    }

    /// Takes one record: its emitter, or its refusal (kept or returned).
    fn take(&mut self, cells: &[&str], line: u64) -> Result<()> {
        self.file.rows += 1;
        let record = Record {
            source: self.source,
            line,
            layout: &self.file.layout,
            cells,
        };
        let made = emitter_from(&record).and_then(|(e, default)| {
            if let Some(first) = self.seen.get(&e.id) {
                return Err(Error::input(
                    record.place(Field::Id),
                    format!("duplicate id `{}` (first used on line {first})", e.id),
                ));
            }
            Ok((e, default?))
        });
        match made {
            Ok((emitter, default)) => {
                if let Some(rule) = default {
                    self.defaults.push((rule, line));
                }
                if record.text(Field::Height).is_some()
                    && record.layout.get(Field::Height).is_some_and(|m| m.haat)
                {
                    self.haat_used = true;
                }
                sample(&mut self.file.samples, &record, &emitter);
                self.seen.insert(emitter.id.clone(), line);
                self.file.emitters.push(emitter);
                Ok(())
            }
            Err(e) if self.keep_going => {
                self.file.refused.push(e);
                Ok(())
            }
            Err(e) => Err(e),
        }
    }

    fn finish(mut self) -> Result<EmitterFile> {
        let layout = &self.file.layout;
        let mut notes = unit_notes(layout);
        if self.haat_used {
            if let Some(m) = layout.get(Field::Height) {
                notes.push(format!(
                    "column `{}` holds the height above average terrain: read as the \
                     antenna's height above ground (the level model takes the ground as flat)",
                    m.label
                ));
            }
        }
        let mut rules: Vec<&'static str> = Vec::new();
        for (rule, _) in &self.defaults {
            if !rules.contains(rule) {
                rules.push(rule);
            }
        }
        for rule in rules {
            let lines: Vec<u64> = self
                .defaults
                .iter()
                .filter(|d| d.0 == rule)
                .map(|d| d.1)
                .collect();
            notes.push(format!(
                "no bandwidth given on {}: {rule} assumed from the kind (give a bandwidth or \
                 an emission designator to set it)",
                line_list(&lines)
            ));
        }
        self.file.notes = notes;
        if self.file.emitters.is_empty() && self.file.refused.is_empty() {
            return Err(no_rows(self.source, "data rows"));
        }
        Ok(self.file)
    }
}

/// `line 4`, `lines 2, 5 and 9`, at most ten named.
fn line_list(lines: &[u64]) -> String {
    let shown: Vec<String> = lines.iter().take(10).map(u64::to_string).collect();
    let more = lines.len().saturating_sub(10);
    match (shown.len(), more) {
        (1, _) => format!("line {}", shown[0]),
        (_, 0) => format!(
            "lines {} and {}",
            shown[..shown.len() - 1].join(", "),
            shown[shown.len() - 1]
        ),
        _ => format!("lines {} and {more} more", shown.join(", ")),
    }
}

/// The notes a layout calls for: EIRP read as ERP, units assumed.
fn unit_notes(layout: &Layout) -> Vec<String> {
    let mut notes = Vec::new();
    for m in &layout.fields {
        if m.eirp {
            notes.push(format!(
                "column `{}` holds EIRP: read as ERP = EIRP − {DIPOLE_GAIN_DB} dB",
                m.label
            ));
        }
        if m.unit_source == UnitSource::Assumed {
            let unit = match m.field {
                Field::Freq => "MHz",
                Field::Bandwidth => "kHz",
                Field::Height => "m",
                _ => continue,
            };
            notes.push(format!(
                "column `{}` names no unit: numbers without one are read as {unit}",
                m.label
            ));
        }
    }
    notes
}

fn read_emitters_csv<R: Read>(
    source: &str,
    reader: R,
    options: ReadOptions<'_>,
) -> Result<EmitterFile> {
    let mut table = Table::open(source, reader)?;
    let empty = ColumnMap::default();
    let layout = resolve(
        source,
        table.header_line(),
        table.raw_headers(),
        TableKind::Emitters,
        mapping(&options, &empty),
    )?;
    let mut collector = Collector::new(source, layout, options.keep_going);
    loop {
        let error = match table.next_row() {
            Ok(Some(row)) => {
                let line = row.line;
                collector.take(row.cells(), line)?;
                continue;
            }
            Ok(None) => break,
            Err(e) => e,
        };
        if !(options.keep_going && table.last_error_was_row()) {
            return Err(error);
        }
        collector.file.rows += 1;
        collector.file.refused.push(error);
    }
    collector.finish()
}

/// Refuses an id that could pass for another ([`crate::text::id_problem`]).
pub fn checked_id(place: Place, id: &str) -> Result<()> {
    match crate::text::id_problem(id) {
        Some(problem) => Err(Error::input(place, problem)),
        None => Ok(()),
    }
}

/// The line on which each element of a top-level JSON array starts.
fn json_element_lines(text: &str) -> Vec<u64> {
    let mut lines = Vec::new();
    let (mut line, mut depth, mut in_string, mut escaped) = (1u64, 0i32, false, false);
    for c in text.chars() {
        if c == '\n' {
            line += 1;
        }
        if in_string {
            match (escaped, c) {
                (true, _) => escaped = false,
                (false, '\\') => escaped = true,
                (false, '"') => in_string = false,
                _ => {}
            }
            continue;
        }
        match c {
            '"' => in_string = true,
            '{' | '[' => {
                if depth == 1 && c == '{' {
                    lines.push(line);
                }
                depth += 1;
            }
            '}' | ']' => depth -= 1,
            _ => {}
        }
    }
    lines
}

fn read_emitters_json(source: &str, bytes: &[u8], options: ReadOptions<'_>) -> Result<EmitterFile> {
    let text = std::str::from_utf8(bytes)
        .map_err(|_| Error::input(Place::new(source), "not UTF-8 text"))?;
    let text = text.trim_start_matches('\u{feff}');
    let values: Vec<serde_json::Value> = serde_json::from_str(text).map_err(|e| {
        Error::input(
            Place::new(source).at_line(e.line() as u64),
            format!("not a JSON array of emitter objects: {e}"),
        )
    })?;
    if values.is_empty() {
        return Err(Error::input(
            Place::new(source),
            "the array holds no emitters",
        ));
    }
    let lines = json_element_lines(text);
    // every object's values as text, under the union of the objects' keys
    let mut headers: Vec<String> = Vec::new();
    let mut records: Vec<(u64, HashMap<String, String>)> = Vec::new();
    for (i, value) in values.iter().enumerate() {
        let line = lines.get(i).copied().unwrap_or(1);
        let place = |f: &str| Place::new(source).at_line(line).at_field(f);
        let object = value.as_object().ok_or_else(|| {
            Error::input(
                Place::new(source).at_line(line),
                format!("element {} is not an object", i + 1),
            )
        })?;
        let mut texts = HashMap::new();
        for (key, v) in object {
            let text = match v {
                serde_json::Value::Null => continue,
                serde_json::Value::String(s) => s.clone(),
                serde_json::Value::Number(n) => n.to_string(),
                serde_json::Value::Bool(b) => b.to_string(),
                _ => {
                    return Err(Error::input(
                        place(key),
                        "expected a number or a text, found a list or an object",
                    ))
                }
            };
            if !headers.contains(key) {
                headers.push(key.clone());
            }
            texts.insert(key.clone(), text);
        }
        records.push((line, texts));
    }
    let empty = ColumnMap::default();
    let layout = resolve(
        source,
        1,
        &headers,
        TableKind::Emitters,
        mapping(&options, &empty),
    )?;
    let mut collector = Collector::new(source, layout, options.keep_going);
    for (line, texts) in &records {
        let cells: Vec<&str> = headers
            .iter()
            .map(|h| texts.get(h).map_or("", String::as_str))
            .collect();
        collector.take(&cells, *line)?;
    }
    collector.finish()
}

/// One record of a table, read through its layout.
struct Record<'a> {
    source: &'a str,
    line: u64,
    layout: &'a Layout,
    cells: &'a [&'a str],
}

impl Record<'_> {
    /// The text of a mapping: its columns' texts joined by a space (a split position's
    /// parts, a hemisphere written out as a word shortened to its letter); `None` when
    /// all are empty. Only the id keeps its spaces at either end, to be refused.
    fn text_of(&self, m: &Mapped) -> Option<String> {
        let parts: Vec<String> = m
            .columns
            .iter()
            .filter_map(|&c| self.cells.get(c).copied())
            .map(|t| {
                if m.field == Field::Id {
                    return t.to_string();
                }
                let t = t.trim();
                match t.to_ascii_lowercase().as_str() {
                    "north" | "south" | "east" | "west" if m.columns.len() > 1 => {
                        t[..1].to_ascii_uppercase()
                    }
                    _ => t.to_string(),
                }
            })
            .filter(|t| !t.is_empty())
            .collect();
        if parts.is_empty() {
            return None;
        }
        let mut text = parts.join(if m.field == Field::Note { "; " } else { " " });
        if matches!(m.field, Field::Lat | Field::Lon) && m.columns.len() == 1 {
            let hemisphere = |c: char| "NSEWnsew".contains(c);
            // `122-24-50.5W`: degrees, minutes and seconds joined by hyphens
            if !text.starts_with('-') && text.contains('-') && text.contains(hemisphere) {
                text = text.replace('-', " ");
            }
            // a column counted west positive (`Longitude (W)`)
            if m.west && !text.starts_with('-') && !text.contains(hemisphere) {
                text.push_str(" W");
            }
        }
        Some(text)
    }

    fn text(&self, field: Field) -> Option<String> {
        self.layout.get(field).and_then(|m| self.text_of(m))
    }

    fn place_of(&self, label: &str) -> Place {
        Place::new(self.source)
            .at_line(self.line)
            .at_field(label.to_string())
    }

    fn place(&self, field: Field) -> Place {
        self.place_of(&self.layout.label(field))
    }
}

/// A frequency or width cell: exact hertz from its decimal text, in the cell's unit, else
/// the column's (`exp`: 6 for MHz, 3 for kHz); returns the value and the text to name
/// it by in messages (`146.94 MHz`).
fn hz_cell(place: &Place, text: &str, exp: i32) -> Result<(Hz, String)> {
    not_a_number(place, text)?;
    let f = parse_frequency_in(text, exp).map_err(|m| Error::input(place.clone(), m))?;
    let (number, unit) = split_unit(text);
    let shown = if unit.is_empty() {
        let unit = match exp {
            0 => "Hz",
            3 => "kHz",
            9 => "GHz",
            _ => "MHz",
        };
        format!("{} {unit}", number.trim())
    } else {
        text.trim().to_string()
    };
    Ok((f, shown))
}

fn column_exp(m: &Mapped, default: i32) -> i32 {
    m.unit.and_then(Unit::hz_exponent).unwrap_or(default)
}

/// Refuses a cell whose text before a unit is no number at all (`one-fifty`), as a
/// number rather than as an unknown unit.
fn not_a_number(place: &Place, text: &str) -> Result<()> {
    let (number, unit) = split_unit(text);
    let t = number.trim();
    if !unit.is_empty() && t.parse::<f64>().is_err() && decimal_comma_hint(t).is_empty() {
        return Err(Error::input(
            place.clone(),
            format!("`{}` is not a number", text.trim()),
        ));
    }
    Ok(())
}

/// A power cell as ERP in dBm: in the cell's unit, else the column's; EIRP less 2.15 dB.
fn power_cell(m: &Mapped, place: &Place, text: &str) -> Result<f64> {
    not_a_number(place, text)?;
    let (number, given) = split_unit(text);
    let unit = if given.is_empty() {
        m.unit
    } else {
        let cased = match given {
            "mW" => Some(1e-3),
            "MW" => Some(1e6),
            _ => None,
        };
        match (cased, Unit::from_word(given)) {
            (Some(factor), _) => {
                let w = parse_finite(|| place.clone(), number)? * factor;
                return watts_in_range(place, &format!("{number} {given}"), w, m.eirp);
            }
            (_, Some(u))
                if u.hz_exponent().is_none() && !matches!(u, Unit::M | Unit::Km | Unit::Ft) =>
            {
                Some(u)
            }
            _ => {
                return Err(Error::input(
                    place.clone(),
                    format!(
                        "`{}`: `{given}` is not a unit of power; expected W, kW, dBW, dBm or dBk",
                        text.trim()
                    ),
                ))
            }
        }
    };
    let Some(unit) = unit else {
        return Err(Error::input(
            place.clone(),
            format!(
                "`{}` has no unit and the column names none; write `{0} W` or `{0} dBW`, name \
                 the unit in the header (`ERP (W)`) or map the column with --columns {}",
                text.trim(),
                crate::text::shell_word(&format!("erp_w={}", m.label))
            ),
        ));
    };
    let v = parse_finite(|| place.clone(), number)?;
    let shown = format!("{} {}", number.trim(), unit.text());
    let dbm = match unit {
        Unit::W => return watts_in_range(place, &shown, v, m.eirp),
        Unit::KW => return watts_in_range(place, &shown, v * 1e3, m.eirp),
        Unit::DBW => v + 30.0,
        Unit::DBk => v + 60.0,
        _ => v,
    };
    if dbm < MIN_ERP_DBM {
        return Err(Error::input(
            place.clone(),
            format!("power {shown} is below {MIN_ERP_DBM} dBm (1 nW): no emitter to rank"),
        ));
    }
    if dbm > MAX_ERP_DBM {
        return Err(Error::input(
            place.clone(),
            format!("power {shown} is above 100 dBm (10 MW)"),
        ));
    }
    Ok(if m.eirp { dbm - DIPOLE_GAIN_DB } else { dbm })
}

fn watts_in_range(place: &Place, shown: &str, w: f64, eirp: bool) -> Result<f64> {
    if w <= 0.0 {
        return Err(Error::input(
            place.clone(),
            format!("power {shown} must be above zero"),
        ));
    }
    let dbm = watts_to_dbm(w);
    if dbm < MIN_ERP_DBM {
        return Err(Error::input(
            place.clone(),
            format!("power {shown} is below 1 nW: no emitter to rank"),
        ));
    }
    if dbm > MAX_ERP_DBM {
        return Err(Error::input(
            place.clone(),
            format!("power {shown} is above 10 MW"),
        ));
    }
    Ok(if eirp { dbm - DIPOLE_GAIN_DB } else { dbm })
}

/// A height cell in metres: in the cell's unit (m, km, ft), else the column's.
fn height_cell(m: &Mapped, place: &Place, text: &str) -> Result<f64> {
    not_a_number(place, text)?;
    let (number, given) = split_unit(text);
    let unit = if given.is_empty() {
        m.unit.unwrap_or(Unit::M)
    } else {
        match Unit::from_word(given) {
            Some(u @ (Unit::M | Unit::Km | Unit::Ft)) => u,
            _ => {
                return Err(Error::input(
                    place.clone(),
                    crate::text::wrong_unit(text, given, "m"),
                ))
            }
        }
    };
    let v = parse_finite(|| place.clone(), number)?;
    let metres = match unit {
        Unit::Km => v * 1e3,
        Unit::Ft => v * 0.3048,
        _ => v,
    };
    if metres.abs() > 10_000.0 {
        return Err(Error::input(
            place.clone(),
            format!("height {} {} is absurd", number.trim(), unit.text()),
        ));
    }
    Ok(metres)
}

/// The position of a record: both coordinates or neither.
fn position_of(r: &Record<'_>) -> Result<Option<GeoPoint>> {
    let (lat_label, lon_label) = (r.layout.label(Field::Lat), r.layout.label(Field::Lon));
    match (r.text(Field::Lat), r.text(Field::Lon)) {
        (None, None) => Ok(None),
        (Some(_), None) => Err(Error::input(
            r.place(Field::Lon),
            format!("`{lat_label}` is given but `{lon_label}` is empty"),
        )),
        (None, Some(_)) => Err(Error::input(
            r.place(Field::Lat),
            format!("`{lon_label}` is given but `{lat_label}` is empty"),
        )),
        (Some(lat), Some(lon)) => {
            let lat_v = coordinate_field(|| r.place(Field::Lat), &lat, Axis::Latitude)?;
            let lon_v = coordinate_field(|| r.place(Field::Lon), &lon, Axis::Longitude)?;
            Ok(Some(GeoPoint::new(lat_v, lon_v)))
        }
    }
}

/// The emission designators of a cell (one, or several separated by spaces, commas,
/// semicolons or slashes): the widest necessary bandwidth and its class.
fn emission_of(r: &Record<'_>) -> Result<Option<(Hz, Option<ModulationClass>)>> {
    let Some(text) = r.text(Field::Emission) else {
        return Ok(None);
    };
    let mut widest: Option<(Hz, Option<ModulationClass>)> = None;
    for code in text
        .split(|c: char| c.is_whitespace() || matches!(c, ',' | ';' | '/'))
        .filter(|c| !c.is_empty())
    {
        let d = parse_designator(code)
            .map_err(|e| Error::input(r.place(Field::Emission), e.to_string()))?;
        if widest.is_none_or(|(w, _)| d.bandwidth > w) {
            widest = Some((d.bandwidth, d.class));
        }
    }
    Ok(widest)
}

fn id_of(r: &Record<'_>) -> Result<String> {
    let id = r
        .text(Field::Id)
        .ok_or_else(|| Error::input(r.place(Field::Id), "missing id"))?;
    checked_id(r.place(Field::Id), &id)?;
    Ok(id)
}

fn freq_of(r: &Record<'_>) -> Result<Hz> {
    let place = r.place(Field::Freq);
    let text = r
        .text(Field::Freq)
        .ok_or_else(|| Error::input(place.clone(), "missing frequency"))?;
    let m = r.layout.get(Field::Freq);
    let exp = m.map_or(6, |m| column_exp(m, 6));
    let (f, shown) = hz_cell(&place, &text, exp)?;
    if f.0 <= 0 {
        return Err(Error::input(
            place,
            format!("frequency {shown} must be above zero"),
        ));
    }
    if f > MAX_FREQUENCY {
        let unit = split_unit(&shown).1.to_string();
        return Err(Error::input(
            place,
            format!("frequency {shown} is above 300 GHz; is the unit {unit}?"),
        ));
    }
    Ok(f)
}

fn bandwidth_of(r: &Record<'_>) -> Result<Option<Hz>> {
    let Some(text) = r.text(Field::Bandwidth) else {
        return Ok(None);
    };
    let place = r.place(Field::Bandwidth);
    let exp = r
        .layout
        .get(Field::Bandwidth)
        .map_or(3, |m| column_exp(m, 3));
    let (bw, shown) = hz_cell(&place, &text, exp)?;
    if bw.0 < 0 {
        return Err(Error::input(
            place,
            format!("bandwidth {shown} is negative"),
        ));
    }
    if bw > MAX_FREQUENCY {
        return Err(Error::input(place, format!("bandwidth {shown} is absurd")));
    }
    Ok(Some(bw))
}

/// What settles an emitter's bandwidth: the file (`Ok(None)`), the kind's default rule,
/// or the refusal of a row that gives neither (named after every other fault).
type BandwidthFrom = std::result::Result<Option<&'static str>, Error>;

/// An emitter from a record, and where its bandwidth came from.
fn emitter_from(r: &Record<'_>) -> Result<(Emitter, BandwidthFrom)> {
    let id = id_of(r)?;
    let freq = freq_of(r)?;
    let emission = emission_of(r)?;
    let kind = r.text(Field::Kind);
    let given = bandwidth_of(r)?.or(emission.map(|e| e.0));
    let modulation = match r.text(Field::Modulation) {
        Some(t) => Some(ModulationClass::from_name(&t).ok_or_else(|| {
            Error::input(
                r.place(Field::Modulation),
                format!(
                    "`{t}` is not a modulation class; expected one of {}",
                    ModulationClass::ALL.map(|c| c.name()).join(", ")
                ),
            )
        })?),
        None => emission.and_then(|e| e.1),
    };
    let mut erp_dbm: Option<(f64, String)> = None;
    for m in r.layout.all(Field::Erp) {
        let Some(text) = r.text_of(m) else { continue };
        let place = r.place_of(&m.label);
        let dbm = power_cell(m, &place, &text)?;
        match &erp_dbm {
            Some((first, label)) if (first - dbm).abs() > 0.05 => {
                return Err(Error::input(
                    place,
                    format!(
                        "{} disagrees with {label} ({first:.2} dBm); give one or make them agree",
                        shown_power(m, &text)
                    ),
                ))
            }
            Some(_) => {}
            None => erp_dbm = Some((dbm, m.label.clone())),
        }
    }
    let position = position_of(r)?;
    let height_m = match (r.text(Field::Height), r.layout.get(Field::Height)) {
        (Some(t), Some(m)) => Some(height_cell(m, &r.place(Field::Height), &t)?),
        _ => None,
    };
    let keyed = match r.text(Field::Keyed).map(|s| s.to_ascii_lowercase()) {
        None => None,
        Some(k) if k == "continuous" => Some(Keying::Continuous),
        Some(k) if k == "intermittent" => Some(Keying::Intermittent),
        Some(k) => {
            return Err(Error::input(
                r.place(Field::Keyed),
                format!("`{k}` is neither `continuous` nor `intermittent`"),
            ))
        }
    };
    // the bandwidth is settled last, so that a row's other faults are named first
    let (bandwidth, default) = match given {
        Some(bw) => (bw, Ok(None)),
        None => match kind.as_deref().and_then(default_bandwidth_for_kind) {
            Some((bw, rule)) => (bw, Ok(Some(rule))),
            None => {
                let label = match (
                    r.layout.get(Field::Bandwidth),
                    r.layout.get(Field::Emission),
                ) {
                    (Some(m), _) | (None, Some(m)) => m.label.clone(),
                    (None, None) => Field::Bandwidth.own_column().to_string(),
                };
                let refusal = Error::input(
                    r.place_of(&label),
                    "no bandwidth: give the bandwidth (0 for a plain carrier), an emission \
                     designator such as 16K0F3E, or a kind with a default (fm, am, repeater, \
                     land mobile, paging, dmr, p25, nxdn, tetra, carrier)",
                );
                (Hz::ZERO, Err(refusal))
            }
        },
    };
    let emitter = Emitter {
        id,
        freq,
        bandwidth,
        erp_dbm: erp_dbm.map(|e| e.0),
        position,
        height_m,
        kind,
        keyed,
        owner: r.text(Field::Owner),
        modulation,
        note: r.text(Field::Note),
        line: r.line,
    };
    Ok((emitter, default))
}

/// A power cell as typed, with the column's unit when the cell has none.
fn shown_power(m: &Mapped, text: &str) -> String {
    let (number, given) = split_unit(text);
    match (given.is_empty(), m.unit) {
        (true, Some(u)) => format!("{} {}", number.trim(), u.text()),
        _ => text.trim().to_string(),
    }
}

/// Adds the record's values to the first three of each field, as converted.
fn sample(samples: &mut Vec<(Field, Vec<String>)>, r: &Record<'_>, e: &Emitter) {
    for m in &r.layout.fields {
        // the first power column speaks for the others, which must agree with it
        let later_power = m.field == Field::Erp
            && r.layout
                .get(Field::Erp)
                .is_some_and(|first| first.columns != m.columns);
        if later_power || r.text_of(m).is_none() {
            continue;
        }
        let value = match m.field {
            Field::Id => e.id.clone(),
            Field::Freq => format!("{} MHz", e.freq.mhz_text()),
            Field::Bandwidth => format!("{} kHz", e.bandwidth.khz_text()),
            Field::Emission => match e.modulation {
                Some(c) if r.text(Field::Modulation).is_none() => {
                    format!("{} kHz {c}", e.bandwidth.khz_text())
                }
                _ => format!("{} kHz", e.bandwidth.khz_text()),
            },
            Field::Modulation => e.modulation.map_or_else(String::new, |c| c.to_string()),
            Field::Erp => match r.text_of(m) {
                Some(t) => {
                    let place = r.place_of(&m.label);
                    match power_cell(m, &place, &t) {
                        Ok(dbm) => format!("{dbm:.2} dBm"),
                        Err(_) => continue,
                    }
                }
                None => continue,
            },
            Field::Lat => e
                .position
                .map_or_else(String::new, |p| format!("{:.6}", p.lat_deg)),
            Field::Lon => e
                .position
                .map_or_else(String::new, |p| format!("{:.6}", p.lon_deg)),
            Field::Height => e.height_m.map_or_else(String::new, |h| format!("{h:.1} m")),
            Field::Kind => e.kind.clone().unwrap_or_default(),
            Field::Keyed => r.text(Field::Keyed).unwrap_or_default(),
            Field::Owner => e.owner.clone().unwrap_or_default(),
            Field::Note => e.note.clone().unwrap_or_default(),
        };
        let key = m.field;
        let label_index = samples.iter().position(|(f, _)| *f == key);
        let list = match label_index {
            Some(i) => &mut samples[i].1,
            None => {
                samples.push((key, Vec::new()));
                let last = samples.len() - 1;
                &mut samples[last].1
            }
        };
        if list.len() < 3 {
            list.push(value);
        }
    }
}

/// Reads the receivers of a site study: `id`, `freq_mhz`, optional `bw_khz`, `lat`,
/// `lon`, `note`, under their names or the synonyms of [`crate::columns`].
pub fn read_receivers<R: Read>(source: &str, reader: R) -> Result<ReceiverFile> {
    read_receivers_with(source, reader, None)
}

/// Reads receivers with a column mapping.
pub fn read_receivers_with<R: Read>(
    source: &str,
    reader: R,
    columns: Option<&ColumnMap>,
) -> Result<ReceiverFile> {
    let mut table = Table::open(source, reader)?;
    let empty = ColumnMap::default();
    let layout = resolve(
        source,
        table.header_line(),
        table.raw_headers(),
        TableKind::Receivers,
        columns.unwrap_or(&empty),
    )?;
    let mut file = ReceiverFile {
        ignored_columns: unused_names(&layout),
        notes: unit_notes(&layout),
        ..Default::default()
    };
    let mut seen: HashMap<String, u64> = HashMap::new();
    while let Some(row) = table.next_row()? {
        let r = Record {
            source,
            line: row.line,
            layout: &layout,
            cells: row.cells(),
        };
        let id = id_of(&r)?;
        let freq = freq_of(&r)?;
        let bandwidth = bandwidth_of(&r)?;
        let position = position_of(&r)?;
        if let Some(first) = seen.insert(id.clone(), row.line) {
            return Err(Error::input(
                r.place(Field::Id),
                format!("duplicate id `{id}` (first used on line {first})"),
            ));
        }
        file.receivers.push(Receiver {
            id,
            freq,
            bandwidth,
            position,
            note: r.text(Field::Note),
            line: row.line,
        });
    }
    if file.receivers.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    file.layout = layout;
    Ok(file)
}

/// Reads the site's structures (towers, fences, sheds, guy anchors): CSV with `id`,
/// `lat`, `lon`, optional `kind` and `note`.
pub fn read_structures<R: Read>(
    source: &str,
    reader: R,
) -> Result<Vec<pim_core::ticket::Structure>> {
    read_structures_with(source, reader, None).map(|f| f.structures)
}

/// Reads structures with a column mapping.
pub fn read_structures_with<R: Read>(
    source: &str,
    reader: R,
    columns: Option<&ColumnMap>,
) -> Result<StructureFile> {
    let mut table = Table::open(source, reader)?;
    let empty = ColumnMap::default();
    let layout = resolve(
        source,
        table.header_line(),
        table.raw_headers(),
        TableKind::Structures,
        columns.unwrap_or(&empty),
    )?;
    let mut seen: HashMap<String, u64> = HashMap::new();
    let mut out = Vec::new();
    while let Some(row) = table.next_row()? {
        let r = Record {
            source,
            line: row.line,
            layout: &layout,
            cells: row.cells(),
        };
        let id = id_of(&r)?;
        let position = position_of(&r)?
            .ok_or_else(|| Error::input(r.place(Field::Lat), "missing position"))?;
        if let Some(first) = seen.insert(id.clone(), row.line) {
            return Err(Error::input(
                r.place(Field::Id),
                format!("duplicate id `{id}` (first used on line {first})"),
            ));
        }
        out.push(pim_core::ticket::Structure {
            id,
            position,
            kind: r.text(Field::Kind),
            note: r.text(Field::Note),
            line: row.line,
        });
    }
    Ok(StructureFile {
        structures: out,
        ignored_columns: unused_names(&layout),
        layout,
    })
}

fn decimal_error(place: Place, err: DecimalError) -> Error {
    let hint = match &err {
        DecimalError::NotANumber(t) => crate::table::decimal_comma_hint(t),
        _ => "",
    };
    Error::input(place, format!("{err}{hint}"))
}

/// A frequency field: exact hertz, above zero and at most 300 GHz.
pub fn frequency_field(place: impl Fn() -> Place, text: &str) -> Result<Hz> {
    let f = parse_mhz(text).map_err(|e| decimal_error(place(), e))?;
    if f.0 <= 0 {
        return Err(Error::input(
            place(),
            format!("frequency {text} MHz must be above zero"),
        ));
    }
    if f > MAX_FREQUENCY {
        return Err(Error::input(
            place(),
            format!("frequency {text} MHz is above 300 GHz; is the unit MHz?"),
        ));
    }
    Ok(f)
}

/// A bandwidth field in kHz: exact hertz, zero or more.
pub fn bandwidth_field(place: impl Fn() -> Place, text: &str) -> Result<Hz> {
    let bw = parse_khz(text).map_err(|e| decimal_error(place(), e))?;
    if bw.0 < 0 {
        return Err(Error::input(
            place(),
            format!("bandwidth {text} kHz is negative"),
        ));
    }
    if bw > MAX_FREQUENCY {
        return Err(Error::input(
            place(),
            format!("bandwidth {text} kHz is absurd"),
        ));
    }
    Ok(bw)
}

/// A coordinate field: decimal degrees, degrees and decimal minutes, or degrees, minutes
/// and seconds with a hemisphere letter (`45.1046`, `45°06.275'N`, `122 24 50.5 W`:
/// [`parse_coordinate`]), within the axis's range.
fn coordinate_field(place: impl Fn() -> Place, text: &str, axis: Axis) -> Result<f64> {
    let t = text.trim();
    if t.parse::<f64>().is_err() && decimal_comma_hint(t).is_empty() {
        return parse_coordinate(t, axis).map_err(|m| Error::input(place(), m));
    }
    // a plain number keeps the number's own messages (`inf`, a decimal comma)
    let v = parse_finite(&place, t)?;
    let (name, limit) = match axis {
        Axis::Latitude => ("latitude", 90.0),
        Axis::Longitude => ("longitude", 180.0),
    };
    if v.abs() > limit {
        return Err(Error::input(
            place(),
            format!("{name} {text} is outside −{limit}…{limit}"),
        ));
    }
    Ok(v)
}

/// Reads `lat` and `lon` together: both or neither; each in any notation of
/// [`parse_coordinate`].
pub fn position_fields(record: &dyn Fields) -> Result<Option<GeoPoint>> {
    let place = |f: &str| record.place(f);
    match (record.field("lat"), record.field("lon")) {
        (None, None) => Ok(None),
        (Some(_), None) => Err(Error::input(
            place("lon"),
            "`lat` is given but `lon` is empty",
        )),
        (None, Some(_)) => Err(Error::input(
            place("lat"),
            "`lon` is given but `lat` is empty",
        )),
        (Some(lat), Some(lon)) => {
            let lat_v = coordinate_field(|| place("lat"), lat, Axis::Latitude)?;
            let lon_v = coordinate_field(|| place("lon"), lon, Axis::Longitude)?;
            Ok(Some(GeoPoint::new(lat_v, lon_v)))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn csv(text: &str) -> Result<EmitterFile> {
        read_emitters("tx.csv", text.as_bytes())
    }

    #[test]
    fn reads_csv_with_extras_and_exact_frequencies() {
        let f = csv(
            "id,freq_mhz,bw_khz,erp_w,lat,lon,colour\nA,146.94,16,100,45,-121,red\nB,0.83,10,,,,\n",
        )
        .unwrap();
        assert_eq!(f.emitters.len(), 2);
        assert_eq!(f.emitters[0].freq, Hz(146_940_000));
        assert_eq!(f.emitters[0].bandwidth, Hz(16_000));
        assert!((f.emitters[0].erp_dbm.unwrap() - 50.0).abs() < 1e-9);
        assert_eq!(f.emitters[1].freq, Hz(830_000));
        assert_eq!(f.emitters[1].line, 3);
        assert_eq!(f.ignored_columns, vec!["colour".to_string()]);
        assert!(f.notes.is_empty(), "{:?}", f.notes);
    }

    #[test]
    fn reads_json_with_line_numbers() {
        let text = "[\n {\"id\": \"A\", \"freq_mhz\": 146.94, \"bw_khz\": 16},\n {\"id\": \"B\", \"freq_mhz\": \"-3\"}\n]";
        let e = read_emitters("tx.json", text.as_bytes()).unwrap_err();
        assert_eq!(
            e.to_string(),
            "tx.json, line 3, field `freq_mhz`: frequency -3 MHz must be above zero"
        );
        let ok = read_emitters(
            "tx.json",
            "[{\"id\":\"A\",\"freq_mhz\":146.52,\"erp_dbm\":47,\"emission\":\"11K2F3E\"}]"
                .as_bytes(),
        )
        .unwrap();
        assert_eq!(ok.emitters[0].freq, Hz(146_520_000));
        assert_eq!(ok.emitters[0].bandwidth, Hz(11_200));
        assert_eq!(ok.emitters[0].modulation, Some(ModulationClass::FmVoice));
    }

    #[test]
    fn names_each_bad_value() {
        let cases = [
            ("id,freq_mhz\nA,abc\n", "tx.csv, line 2, field `freq_mhz`: `abc` is not a number"),
            ("id,freq_mhz\nA,NaN\n", "tx.csv, line 2, field `freq_mhz`: `NaN` is not a finite number"),
            ("id,freq_mhz\nA,0\n", "tx.csv, line 2, field `freq_mhz`: frequency 0 MHz must be above zero"),
            ("id,freq_mhz\nA,400000\n", "tx.csv, line 2, field `freq_mhz`: frequency 400000 MHz is above 300 GHz; is the unit MHz?"),
            ("id,freq_mhz,bw_khz\nA,1,-5\n", "tx.csv, line 2, field `bw_khz`: bandwidth -5 kHz is negative"),
            ("id,freq_mhz,erp_w\nA,1,-5\n", "tx.csv, line 2, field `erp_w`: power -5 W must be above zero"),
            ("id,freq_mhz,lat,lon\nA,1,91,0\n", "tx.csv, line 2, field `lat`: latitude 91 is outside −90…90"),
            ("id,freq_mhz,lat,lon\nA,1,0,inf\n", "tx.csv, line 2, field `lon`: `inf` is not a finite number"),
            ("id,freq_mhz,bw_khz\nA,1,0\nA,2,0\n", "tx.csv, line 3, field `id`: duplicate id `A` (first used on line 2)"),
            ("id,name\nA,1\n", "tx.csv, line 1, field `freq_mhz`: missing column; the header has: id, name (name the column with --columns freq=COLUMN)"),
            ("id,freq_mhz\n", "tx.csv: no data rows after the header"),
            ("id,freq_mhz\nA,1,x\n", "tx.csv, line 2: 3 fields, but the header has 2 columns (a comma inside a text such as a note? put that text in double quotes: \"a, b\")"),
            ("id,freq_mhz\nA,146.94\n", "tx.csv, line 2, field `bw_khz`: no bandwidth: give the bandwidth (0 for a plain carrier), an emission designator such as 16K0F3E, or a kind with a default (fm, am, repeater, land mobile, paging, dmr, p25, nxdn, tetra, carrier)"),
            ("Call sign,Frequency (MHz),Emission\nA,146.94,16KF3E\n", "tx.csv, line 2, field `Emission`: `16KF3E` is not an emission designator (6 characters; a designator has 4 (bandwidth), 7 or 9); expected the necessary bandwidth and the class, such as 16K0F3E or 11K2F3E (ITU Radio Regulations, Appendix 1)"),
            ("id,freq_mhz,bw_khz,ERP\nA,146.94,16,250\n", "tx.csv, line 2, field `ERP`: `250` has no unit and the column names none; write `250 W` or `250 dBW`, name the unit in the header (`ERP (W)`) or map the column with --columns erp_w=ERP"),
            ("id,freq_mhz,bw_khz,ERP\nA,146.94,16,250 MHz\n", "tx.csv, line 2, field `ERP`: `250 MHz`: `MHz` is not a unit of power; expected W, kW, dBW, dBm or dBk"),
            ("id,freq_mhz,bw_khz,erp_w,ERP (dBW)\nA,146.94,16,250,20\n", "tx.csv, line 2, field `ERP (dBW)`: 20 dBW disagrees with erp_w (53.98 dBm); give one or make them agree"),
            ("id,freq_mhz,bw_khz,modulation\nA,146.94,16,fm\n", "tx.csv, line 2, field `modulation`: `fm` is not a modulation class; expected one of fm-voice, fsk-data, narrow-digital, wide-digital, am-broadcast, am-voice, ssb-voice, fm-broadcast, unmodulated, other"),
        ];
        for (text, want) in cases {
            assert_eq!(csv(text).unwrap_err().to_string(), want, "{text}");
        }
    }

    /// The emitters of one invented export, as the tool's own format gives them.
    const OWN: &str = "id,freq_mhz,bw_khz,erp_w,lat,lon,height_m,kind,owner\n\
        QX1ALP,152.8125,16,250,45.104583,-122.414028,40,land mobile,Orrin Fleet Co.\n\
        QX2BRV,98.7,180,20000,45.110199,-122.400546,120,fm,Cedar Valley Broadcasting\n\
        QX3CHD,453.25,11.2,40,-33.5,151.25,30,telemetry,Verrow Water District\n";

    fn assert_same(shape: &str, text: &str, columns: Option<&ColumnMap>) {
        let own = csv(OWN).unwrap().emitters;
        let options = ReadOptions {
            columns,
            keep_going: false,
        };
        let got = read_emitters_with("export.csv", text.as_bytes(), options)
            .unwrap_or_else(|e| panic!("{shape}: {e}"))
            .emitters;
        assert_eq!(got.len(), own.len(), "{shape}");
        for (g, o) in got.iter().zip(&own) {
            assert_eq!(
                (&g.id, g.freq, g.bandwidth),
                (&o.id, o.freq, o.bandwidth),
                "{shape}"
            );
            let (ge, oe) = (g.erp_dbm.unwrap(), o.erp_dbm.unwrap());
            assert!(
                (ge - oe).abs() < 0.01,
                "{shape}: {} ERP {ge} against {oe}",
                g.id
            );
            let (gp, op) = (g.position.unwrap(), o.position.unwrap());
            assert!((gp.lat_deg - op.lat_deg).abs() < 1e-6, "{shape}: {}", g.id);
            assert!((gp.lon_deg - op.lon_deg).abs() < 1e-6, "{shape}: {}", g.id);
            assert!(
                (g.height_m.unwrap() - o.height_m.unwrap()).abs() < 0.01,
                "{shape}"
            );
        }
    }

    /// Invented exports in several shapes read to the same emitters, to the hertz and to
    /// 0.01 dB (ERP = EIRP − 2.15 dB: ITU-R P.525's EIRP = ERP + 2.15 dB).
    #[test]
    fn exports_in_several_shapes_read_alike() {
        assert_same(
            "units in the headers, dBW, joined DMS, a designator",
            "Call sign,Licensee,Frequency (MHz),Emission designator,ERP (dBW),Latitude,Longitude,Antenna height (m AGL),Service\n\
             QX1ALP,Orrin Fleet Co.,152.8125,16K0F3E,23.98,45°06'16.5\"N,122°24'50.5\"W,40,Land Mobile\n\
             QX2BRV,Cedar Valley Broadcasting,98.7,180KF8E,43.01,45 06 36.7164 N,122 24 01.9656 W,120,FM\n\
             QX3CHD,Verrow Water District,453.25,11K2F1D,16.02,33 30 S,151 15 E,30,Telemetry\n",
            None,
        );
        assert_same(
            "kHz and kW, EIRP in dBm, split DMS, semicolons, feet",
            "CALLSIGN;TX_FREQ_KHZ;BW_HZ;EIRP (dBm);ERP_kW;LAT_DEG;LAT_MIN;LAT_SEC;LAT_HEM;LON_DEG;LON_MIN;LON_SEC;LON_HEM;HEIGHT_FT\n\
             QX1ALP;152812.5;16000;56.13;0.25;45;6;16.5;N;122;24;50.5;W;131.2336\n\
             QX2BRV;98700;180000;75.16;20;45;6;36.7164;N;122;24;1.9656;W;393.7008\n\
             QX3CHD;453250;11200;48.17;0.04;33;30;0;S;151;15;0;E;98.4252\n",
            None,
        );
        assert_same(
            "Hz, units in the cells, decimal minutes, a mapping",
            "Station,Tx Hz,Width,Power,Site lat,Site lon,Mast\n\
             QX1ALP,152812500,16 kHz,250 W,45 06.275 N,122 24.841667 W,40 m\n\
             QX2BRV,98700000,0.18 MHz,20 kW,45 06.61194 N,122 24.03276 W,120\n\
             QX3CHD,453250000,11200 Hz,46.02 dBm,-33.5,151.25,30\n",
            Some(
                &ColumnMap::parse_list(
                    "id=Station,freq_hz=Tx Hz,bw=Width,erp=Power,lat=Site lat,lon=Site lon,height=Mast",
                )
                .unwrap(),
            ),
        );
        let json = "[{\"Call sign\": \"QX1ALP\", \"Frequency (kHz)\": 152812.5, \"Emission\": \"16K0F3E\", \"ERP (W)\": 250, \"Lat\": 45.104583, \"Long\": -122.414028, \"Height\": 40},\n\
             {\"Call sign\": \"QX2BRV\", \"Frequency (kHz)\": 98700, \"Emission\": \"180KF8E\", \"ERP (W)\": 20000, \"Lat\": 45.110199, \"Long\": -122.400546, \"Height\": 120},\n\
             {\"Call sign\": \"QX3CHD\", \"Frequency (kHz)\": 453250, \"Emission\": \"11K2F1D\", \"ERP (W)\": 40, \"Lat\": -33.5, \"Long\": 151.25, \"Height\": 30}]";
        assert_same("JSON under other names", json, None);
    }

    #[test]
    fn says_what_it_assumed() {
        let f = csv("Call sign,Frequency,EIRP (dBm),Service\nA,146.94,50,repeater\nB,98.7,70,FM\n")
            .unwrap();
        assert_eq!(f.emitters[0].bandwidth, Hz(16_000));
        assert_eq!(f.emitters[1].bandwidth, Hz(180_000));
        assert!((f.emitters[0].erp_dbm.unwrap() - 47.85).abs() < 1e-9);
        assert_eq!(
            f.notes,
            vec![
                "column `Frequency` names no unit: numbers without one are read as MHz",
                "column `EIRP (dBm)` holds EIRP: read as ERP = EIRP − 2.15 dB",
                "no bandwidth given on line 2: land mobile 16 kHz assumed from the kind (give a bandwidth or an emission designator to set it)",
                "no bandwidth given on line 3: FM broadcast 180 kHz assumed from the kind (give a bandwidth or an emission designator to set it)",
            ]
        );
    }

    #[test]
    fn keeps_going_and_lists_refused_rows() {
        let options = ReadOptions {
            columns: None,
            keep_going: true,
        };
        let text = "id,freq_mhz,bw_khz,note\nA,146.94,16,x\nB,abc,16,y\nC,147.0,16,north, behind the hut\nD,147.1,16,z\n";
        let f = read_emitters_with("tx.csv", text.as_bytes(), options).unwrap();
        assert_eq!(f.rows, 4);
        let ids: Vec<&str> = f.emitters.iter().map(|e| e.id.as_str()).collect();
        assert_eq!(ids, vec!["A", "D"]);
        assert_eq!(f.refused.len(), 2);
        assert!(f.refused[1]
            .to_string()
            .contains("put that text in double quotes"));
        assert_eq!(
            f.samples[0],
            (Field::Id, vec!["A".to_string(), "D".to_string()])
        );
    }

    #[test]
    fn reads_receivers_and_structures_under_other_names() {
        let rx = read_receivers(
            "rx.csv",
            "Receiver,Rx Frequency (MHz),Tx Frequency (MHz),Channel width (kHz)\nR1,146.34,146.94,12.5\n"
                .as_bytes(),
        )
        .unwrap();
        assert_eq!(rx.receivers[0].freq, Hz(146_340_000));
        assert_eq!(rx.receivers[0].bandwidth, Some(Hz(12_500)));
        assert_eq!(rx.ignored_columns, vec!["Tx Frequency (MHz)".to_string()]);
        let st = read_structures(
            "st.csv",
            "Name,Lat Deg,Lat Min,Lat Hem,Lon Deg,Lon Min,Lon Hem\nOLD-TWR,45,6.2688,N,122,24.8539,W\n"
                .as_bytes(),
        )
        .unwrap();
        assert!((st[0].position.lat_deg - 45.10448).abs() < 1e-6);
        let f = csv(
            "Call sign,Frequency (MHz),Bandwidth (kHz),Latitude,Longitude (W),AGL (ft)\n\
                     A,146.94,16,45-06-16.5N,122.414028,100\n",
        )
        .unwrap();
        let p = f.emitters[0].position.unwrap();
        assert!((p.lat_deg - 45.104583).abs() < 1e-6 && (p.lon_deg + 122.414028).abs() < 1e-9);
        assert!((f.emitters[0].height_m.unwrap() - 30.48).abs() < 1e-9);
        assert!((st[0].position.lon_deg + 122.414231).abs() < 1e-6);
    }
}
