//! The emitter file (CSV with a header, or a JSON array of objects with the same fields)
//! and the receiver file of a site study.
//!
//! Emitter columns: `id` and `freq_mhz` are required; `bw_khz`, `erp_w` or `erp_dbm`,
//! `lat`, `lon`, `height_m`, `kind`, `keyed` (`continuous` or `intermittent`), `owner`
//! and `note` are optional. Other columns are kept aside and reported once.

use std::collections::HashMap;
use std::io::Read;

use crate::table::{decimal_comma_hint, no_rows, parse_finite, Fields, Table};
use crate::text::{parse_coordinate, Axis};
use pim_core::emitter::{watts_to_dbm, Emitter, Keying, Receiver};
use pim_core::error::{Error, Place, Result};
use pim_core::freq::{parse_khz, parse_mhz, DecimalError, Hz, MAX_FREQUENCY};
use pim_core::geo::GeoPoint;

/// Columns the emitter reader understands.
pub const EMITTER_COLUMNS: &[&str] = &[
    "id", "freq_mhz", "bw_khz", "erp_w", "erp_dbm", "lat", "lon", "height_m", "kind", "keyed",
    "owner", "note",
];

/// Columns the receiver reader understands.
pub const RECEIVER_COLUMNS: &[&str] = &["id", "freq_mhz", "bw_khz", "lat", "lon", "note"];

/// The highest ERP accepted: 100 dBm (10 MW), above any broadcaster.
pub const MAX_ERP_DBM: f64 = 100.0;
/// The lowest ERP read (1 nW): less is no emitter but a typing error.
pub const MIN_ERP_DBM: f64 = -60.0;

/// Emitters read from a file, with what the reader noticed on the way.
#[derive(Clone, Debug, Default)]
pub struct EmitterFile {
    pub emitters: Vec<Emitter>,
    /// Columns present in the file that the tool does not use.
    pub ignored_columns: Vec<String>,
}

/// Receivers read from a file.
#[derive(Clone, Debug, Default)]
pub struct ReceiverFile {
    pub receivers: Vec<Receiver>,
    pub ignored_columns: Vec<String>,
}

/// Reads emitters; JSON when the text starts with `[`, CSV otherwise.
pub fn read_emitters<R: Read>(source: &str, mut reader: R) -> Result<EmitterFile> {
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
            return read_emitters_json(source, &first);
        }
        let is_bom_byte = first.len() <= 3 && [0xEF, 0xBB, 0xBF][first.len() - 1] == b;
        if !(b.is_ascii_whitespace() || is_bom_byte) {
            break;
        }
    }
    read_emitters_csv(source, first.as_slice().chain(reader))
}

fn read_emitters_csv<R: Read>(source: &str, reader: R) -> Result<EmitterFile> {
    let mut table = Table::open(source, reader)?;
    table.require("id")?;
    table.require("freq_mhz")?;
    let ignored_columns = table.unknown_columns(EMITTER_COLUMNS);
    let mut file = EmitterFile {
        ignored_columns,
        ..Default::default()
    };
    let mut seen: HashMap<String, u64> = HashMap::new();
    while let Some(row) = table.next_row()? {
        let emitter = emitter_from_fields(&row)?;
        check_unique(&mut seen, &emitter.id, emitter.line, &row)?;
        file.emitters.push(emitter);
    }
    if file.emitters.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(file)
}

/// Refuses an id that could pass for another ([`crate::text::id_problem`]).
pub fn checked_id(place: Place, id: &str) -> Result<()> {
    match crate::text::id_problem(id) {
        Some(problem) => Err(Error::input(place, problem)),
        None => Ok(()),
    }
}

fn check_unique(
    seen: &mut HashMap<String, u64>,
    id: &str,
    line: u64,
    record: &dyn Fields,
) -> Result<()> {
    if let Some(first) = seen.insert(id.to_string(), line) {
        return Err(Error::input(
            record.place("id"),
            format!("duplicate id `{id}` (first used on line {first})"),
        ));
    }
    Ok(())
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

/// One object of a JSON emitter array, its values turned into text.
struct JsonRecord<'a> {
    source: &'a str,
    line: u64,
    texts: HashMap<&'static str, String>,
}

impl Fields for JsonRecord<'_> {
    fn field(&self, name: &str) -> Option<&str> {
        self.texts
            .get(name)
            .map(|s| s.as_str())
            .filter(|s| !s.is_empty())
    }
    fn place(&self, name: &str) -> Place {
        Place::new(self.source).at_line(self.line).at_field(name)
    }
}

fn read_emitters_json(source: &str, bytes: &[u8]) -> Result<EmitterFile> {
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
    let mut file = EmitterFile::default();
    let mut seen: HashMap<String, u64> = HashMap::new();
    for (i, value) in values.iter().enumerate() {
        let line = lines.get(i).copied().unwrap_or(1);
        let place = |f: &str| Place::new(source).at_line(line).at_field(f);
        let object = value.as_object().ok_or_else(|| {
            Error::input(
                Place::new(source).at_line(line),
                format!("element {} is not an object", i + 1),
            )
        })?;
        let mut texts: HashMap<&'static str, String> = HashMap::new();
        for (key, v) in object {
            let text = match v {
                serde_json::Value::Null => continue,
                serde_json::Value::String(s) if key == "id" => {
                    checked_id(place(key), s)?;
                    s.clone()
                }
                serde_json::Value::String(s) => s.trim().to_string(),
                serde_json::Value::Number(n) => n.to_string(),
                serde_json::Value::Bool(b) => b.to_string(),
                _ => {
                    return Err(Error::input(
                        place(key),
                        "expected a number or a text, found a list or an object",
                    ))
                }
            };
            if let Some(&column) = EMITTER_COLUMNS.iter().find(|c| **c == key) {
                texts.insert(column, text);
            } else if !file.ignored_columns.contains(key) {
                file.ignored_columns.push(key.clone());
            }
        }
        let record = JsonRecord {
            source,
            line,
            texts,
        };
        let emitter = emitter_from_fields(&record)?;
        check_unique(&mut seen, &emitter.id, line, &record)?;
        file.emitters.push(emitter);
    }
    Ok(file)
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

fn emitter_from_fields(record: &dyn Fields) -> Result<Emitter> {
    let get = |name: &str| record.field(name);
    let place = |name: &str| record.place(name);
    let line = place("id").line.unwrap_or(0);
    let id = get("id").ok_or_else(|| Error::input(place("id"), "missing id"))?;
    checked_id(place("id"), id)?;
    let freq_text =
        get("freq_mhz").ok_or_else(|| Error::input(place("freq_mhz"), "missing frequency"))?;
    let freq = frequency_field(|| place("freq_mhz"), freq_text)?;
    let bandwidth = match get("bw_khz") {
        Some(t) => bandwidth_field(|| place("bw_khz"), t)?,
        None => Hz::ZERO,
    };
    let erp_from_w = match get("erp_w") {
        Some(t) => {
            let w = parse_finite(|| place("erp_w"), t)?;
            if w <= 0.0 {
                return Err(Error::input(
                    place("erp_w"),
                    format!("power {t} W must be above zero"),
                ));
            }
            let dbm = watts_to_dbm(w);
            if dbm < MIN_ERP_DBM {
                return Err(Error::input(
                    place("erp_w"),
                    format!("power {t} W is below 1 nW: no emitter to rank"),
                ));
            }
            if dbm > MAX_ERP_DBM {
                return Err(Error::input(
                    place("erp_w"),
                    format!("power {t} W is above 10 MW"),
                ));
            }
            Some(dbm)
        }
        None => None,
    };
    let erp_dbm = match get("erp_dbm") {
        Some(t) => {
            let dbm = parse_finite(|| place("erp_dbm"), t)?;
            if dbm < MIN_ERP_DBM {
                return Err(Error::input(
                    place("erp_dbm"),
                    format!("power {t} dBm is below {MIN_ERP_DBM} dBm (1 nW): no emitter to rank"),
                ));
            }
            if dbm > MAX_ERP_DBM {
                return Err(Error::input(
                    place("erp_dbm"),
                    format!("power {t} dBm is above 100 dBm (10 MW)"),
                ));
            }
            if let Some(w_dbm) = erp_from_w {
                if (w_dbm - dbm).abs() > 0.05 {
                    return Err(Error::input(
                        place("erp_dbm"),
                        format!("{t} dBm disagrees with erp_w ({w_dbm:.2} dBm); give one or make them agree"),
                    ));
                }
            }
            Some(dbm)
        }
        None => erp_from_w,
    };
    let position = position_fields(record)?;
    let height_m = match get("height_m") {
        Some(t) => {
            let h = parse_finite(|| place("height_m"), t)?;
            if h.abs() > 10_000.0 {
                return Err(Error::input(
                    place("height_m"),
                    format!("height {t} m is absurd"),
                ));
            }
            Some(h)
        }
        None => None,
    };
    let keyed = match get("keyed").map(|s| s.to_ascii_lowercase()) {
        None => None,
        Some(k) if k == "continuous" => Some(Keying::Continuous),
        Some(k) if k == "intermittent" => Some(Keying::Intermittent),
        Some(k) => {
            return Err(Error::input(
                place("keyed"),
                format!("`{k}` is neither `continuous` nor `intermittent`"),
            ))
        }
    };
    let emitter = Emitter {
        id: id.to_string(),
        freq,
        bandwidth,
        erp_dbm,
        position,
        height_m,
        kind: get("kind").map(str::to_string),
        keyed,
        owner: get("owner").map(str::to_string),
        note: get("note").map(str::to_string),
        line,
    };
    Ok(emitter)
}

/// Reads the receivers of a site study: `id`, `freq_mhz`, optional `bw_khz`, `lat`,
/// `lon`, `note`.
pub fn read_receivers<R: Read>(source: &str, reader: R) -> Result<ReceiverFile> {
    let mut table = Table::open(source, reader)?;
    table.require("id")?;
    table.require("freq_mhz")?;
    let mut file = ReceiverFile {
        ignored_columns: table.unknown_columns(RECEIVER_COLUMNS),
        ..Default::default()
    };
    let mut seen: HashMap<String, u64> = HashMap::new();
    while let Some(row) = table.next_row()? {
        let place = |f: &str| row.place(f);
        let id = row
            .get("id")
            .ok_or_else(|| Error::input(place("id"), "missing id"))?;
        checked_id(place("id"), id)?;
        let freq_text = row
            .get("freq_mhz")
            .ok_or_else(|| Error::input(place("freq_mhz"), "missing frequency"))?;
        let freq = frequency_field(|| place("freq_mhz"), freq_text)?;
        let bandwidth = match row.get("bw_khz") {
            Some(t) => Some(bandwidth_field(|| place("bw_khz"), t)?),
            None => None,
        };
        let position = position_fields(&row)?;
        check_unique(&mut seen, id, row.line, &row)?;
        file.receivers.push(Receiver {
            id: id.to_string(),
            freq,
            bandwidth,
            position,
            note: row.get("note").map(str::to_string),
            line: row.line,
        });
    }
    if file.receivers.is_empty() {
        return Err(no_rows(source, "data rows"));
    }
    Ok(file)
}

/// Reads the site's structures (towers, fences, sheds, guy anchors): CSV with `id`,
/// `lat`, `lon`, optional `kind` and `note`.
pub fn read_structures<R: Read>(
    source: &str,
    reader: R,
) -> Result<Vec<pim_core::ticket::Structure>> {
    let mut table = Table::open(source, reader)?;
    table.require("id")?;
    table.require("lat")?;
    table.require("lon")?;
    let mut seen: HashMap<String, u64> = HashMap::new();
    let mut out = Vec::new();
    while let Some(row) = table.next_row()? {
        let id = row
            .get("id")
            .ok_or_else(|| Error::input(row.place("id"), "missing id"))?;
        checked_id(row.place("id"), id)?;
        let position = position_fields(&row)?
            .ok_or_else(|| Error::input(row.place("lat"), "missing position"))?;
        check_unique(&mut seen, id, row.line, &row)?;
        out.push(pim_core::ticket::Structure {
            id: id.to_string(),
            position,
            kind: row.get("kind").map(str::to_string),
            note: row.get("note").map(str::to_string),
            line: row.line,
        });
    }
    Ok(out)
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
    }

    #[test]
    fn reads_json_with_line_numbers() {
        let text =
            "[\n {\"id\": \"A\", \"freq_mhz\": 146.94},\n {\"id\": \"B\", \"freq_mhz\": \"-3\"}\n]";
        let e = read_emitters("tx.json", text.as_bytes()).unwrap_err();
        assert_eq!(
            e.to_string(),
            "tx.json, line 3, field `freq_mhz`: frequency -3 MHz must be above zero"
        );
        let ok = read_emitters(
            "tx.json",
            "[{\"id\":\"A\",\"freq_mhz\":146.52,\"erp_dbm\":47}]".as_bytes(),
        )
        .unwrap();
        assert_eq!(ok.emitters[0].freq, Hz(146_520_000));
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
            ("id,freq_mhz\nA,1\nA,2\n", "tx.csv, line 3, field `id`: duplicate id `A` (first used on line 2)"),
            ("id,name\nA,1\n", "tx.csv, line 1, field `freq_mhz`: missing column; the header has: id, name"),
            ("id,freq_mhz\n", "tx.csv: no data rows after the header"),
            ("id,freq_mhz\nA,1,x\n", "tx.csv, line 2: 3 fields, but the header has 2 columns"),
        ];
        for (text, want) in cases {
            assert_eq!(csv(text).unwrap_err().to_string(), want, "{text}");
        }
    }
}
