//! Column names as people write them: a licence export's or a spreadsheet's header
//! (`Call sign`, `Frequency (MHz)`, `ERP (dBW)`, `LAT_DEG`) matched to the fields the
//! tool reads, with the unit taken from the header, and a mapping (`--columns
//! freq=Tx Freq,lat=LAT_DEG+LAT_MIN+LAT_SEC+LAT_HEM`) for what the names do not settle.
//!
//! A header is cut into words at every character that is not a letter or a digit and read
//! without regard to case: `TX_FREQ_MHZ`, `Tx Freq (MHz)` and `tx-freq [mhz]` are the
//! same. Unit words (`MHz`, `kHz`, `Hz`, `GHz`; `W`, `kW`, `dBW`, `dBm`, `dBk`; `m`, `ft`,
//! `km`) give the unit; qualifiers (`AGL`, `AAT`/`HAAT`, `AMSL`, `DD`, `WGS84`) are read
//! and set aside; for latitude and longitude `deg`, `min`, `sec` and `hem`/`dir`/`ns`/`ew`
//! name the parts of a position split over columns. The remaining words, joined, are
//! looked up in each field's synonyms ([`SYNONYMS`]). Two columns that could be the same
//! field at the same rank are refused, naming both and the mapping that settles it.

use std::collections::HashMap;

use pim_core::error::{Error, Place, Result};

/// A field the tool reads from an emitter, receiver or structure table.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Field {
    Id,
    Freq,
    Bandwidth,
    Emission,
    Modulation,
    Erp,
    Lat,
    Lon,
    Height,
    Kind,
    Keyed,
    Owner,
    Note,
}

impl Field {
    /// Every field, in the order reports list them.
    pub const ALL: [Field; 13] = [
        Field::Id,
        Field::Freq,
        Field::Bandwidth,
        Field::Emission,
        Field::Modulation,
        Field::Erp,
        Field::Lat,
        Field::Lon,
        Field::Height,
        Field::Kind,
        Field::Keyed,
        Field::Owner,
        Field::Note,
    ];

    /// The field's short name, as `--columns` takes it.
    pub fn name(self) -> &'static str {
        match self {
            Field::Id => "id",
            Field::Freq => "freq",
            Field::Bandwidth => "bw",
            Field::Emission => "emission",
            Field::Modulation => "modulation",
            Field::Erp => "erp",
            Field::Lat => "lat",
            Field::Lon => "lon",
            Field::Height => "height",
            Field::Kind => "kind",
            Field::Keyed => "keyed",
            Field::Owner => "owner",
            Field::Note => "note",
        }
    }

    /// The column the tool's own format gives the field (named in messages when the file
    /// has no column for it).
    pub fn own_column(self) -> &'static str {
        match self {
            Field::Freq => "freq_mhz",
            Field::Bandwidth => "bw_khz",
            Field::Erp => "erp_dbm",
            Field::Height => "height_m",
            other => other.name(),
        }
    }

    /// What the field is, in words, for messages.
    pub fn words(self) -> &'static str {
        match self {
            Field::Id => "the id",
            Field::Freq => "the frequency",
            Field::Bandwidth => "the bandwidth",
            Field::Emission => "the emission designator",
            Field::Modulation => "the modulation class",
            Field::Erp => "the ERP",
            Field::Lat => "the latitude",
            Field::Lon => "the longitude",
            Field::Height => "the antenna height",
            Field::Kind => "the kind",
            Field::Keyed => "the keying",
            Field::Owner => "the owner",
            Field::Note => "the note",
        }
    }

    fn quantity(self) -> Option<Quantity> {
        match self {
            Field::Freq | Field::Bandwidth => Some(Quantity::Frequency),
            Field::Erp => Some(Quantity::Power),
            Field::Height => Some(Quantity::Length),
            _ => None,
        }
    }
}

/// The kinds of table whose columns are matched here.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TableKind {
    Emitters,
    Receivers,
    Structures,
}

impl TableKind {
    /// The fields a table of this kind has.
    pub fn fields(self) -> &'static [Field] {
        match self {
            TableKind::Emitters => &Field::ALL,
            TableKind::Receivers => &[
                Field::Id,
                Field::Freq,
                Field::Bandwidth,
                Field::Lat,
                Field::Lon,
                Field::Note,
            ],
            TableKind::Structures => &[Field::Id, Field::Lat, Field::Lon, Field::Kind, Field::Note],
        }
    }

    /// The fields a table of this kind must have.
    pub fn required(self) -> &'static [Field] {
        match self {
            TableKind::Emitters | TableKind::Receivers => &[Field::Id, Field::Freq],
            TableKind::Structures => &[Field::Id, Field::Lat, Field::Lon],
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Quantity {
    Frequency,
    Power,
    Length,
}

/// A unit a header, a mapping or a cell may give.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Unit {
    Hz,
    KHz,
    MHz,
    GHz,
    W,
    KW,
    DBW,
    DBm,
    DBk,
    M,
    Km,
    Ft,
}

impl Unit {
    /// The unit as written in outputs.
    pub fn text(self) -> &'static str {
        match self {
            Unit::Hz => "Hz",
            Unit::KHz => "kHz",
            Unit::MHz => "MHz",
            Unit::GHz => "GHz",
            Unit::W => "W",
            Unit::KW => "kW",
            Unit::DBW => "dBW",
            Unit::DBm => "dBm",
            Unit::DBk => "dBk",
            Unit::M => "m",
            Unit::Km => "km",
            Unit::Ft => "ft",
        }
    }

    /// A unit word (any case): `mhz`, `kw`, `dbw`, `feet` …
    pub fn from_word(word: &str) -> Option<Unit> {
        Some(match word.to_ascii_lowercase().as_str() {
            "hz" => Unit::Hz,
            "khz" => Unit::KHz,
            "mhz" => Unit::MHz,
            "ghz" => Unit::GHz,
            "w" | "watt" | "watts" => Unit::W,
            "kw" | "kilowatt" | "kilowatts" => Unit::KW,
            "dbw" => Unit::DBW,
            "dbm" => Unit::DBm,
            "dbk" => Unit::DBk,
            "m" | "metre" | "metres" | "meter" | "meters" => Unit::M,
            "km" => Unit::Km,
            "ft" | "feet" | "foot" => Unit::Ft,
            _ => return None,
        })
    }

    fn quantity(self) -> Quantity {
        match self {
            Unit::Hz | Unit::KHz | Unit::MHz | Unit::GHz => Quantity::Frequency,
            Unit::W | Unit::KW | Unit::DBW | Unit::DBm | Unit::DBk => Quantity::Power,
            Unit::M | Unit::Km | Unit::Ft => Quantity::Length,
        }
    }

    /// For a frequency unit, the power of ten of its hertz (3 for kHz).
    pub fn hz_exponent(self) -> Option<i32> {
        match self {
            Unit::Hz => Some(0),
            Unit::KHz => Some(3),
            Unit::MHz => Some(6),
            Unit::GHz => Some(9),
            _ => None,
        }
    }
}

/// Each field's synonyms, as header words joined without separators, by rank: a name of
/// rank 0 is taken before one of rank 1. Names starting with `eirp` read the power as EIRP.
pub const SYNONYMS: &[(Field, &[&str], &[&str])] = &[
    (
        Field::Id,
        &[
            "id",
            "callsign",
            "call",
            "callsigns",
            "callsignid",
            "callid",
            "transmitter",
            "transmitterid",
            "emitter",
            "emitterid",
            "txid",
            "structure",
            "structureid",
            "receiver",
            "receiverid",
            "rxid",
        ],
        &[
            "station",
            "stationid",
            "stationcallsign",
            "licence",
            "license",
            "licenceno",
            "licenseno",
            "licencenumber",
            "licensenumber",
            "licenceid",
            "licenseid",
            "name",
            "stationname",
        ],
    ),
    (
        Field::Freq,
        &[
            "freq",
            "frequency",
            "txfreq",
            "txfrequency",
            "transmitfrequency",
            "transmitterfrequency",
            "frequencytx",
            "carrierfrequency",
            "centrefrequency",
            "centerfrequency",
            "assignedfrequency",
            "rxfreq",
            "rxfrequency",
            "receivefrequency",
            "receiverfrequency",
            "frequencyrx",
        ],
        &["carrier"],
    ),
    (
        Field::Bandwidth,
        &[
            "bw",
            "bandwidth",
            "occupiedbandwidth",
            "necessarybandwidth",
            "channelwidth",
            "channelbandwidth",
            "obw",
        ],
        &[],
    ),
    (
        Field::Emission,
        &[
            "emission",
            "emissions",
            "emissiondesignator",
            "emissiondesignators",
            "emissiondesig",
            "designator",
            "emissioncode",
            "emissionclass",
            "emdesig",
            "emdesignator",
        ],
        &["emissiontype"],
    ),
    (
        Field::Modulation,
        &["modulation", "modulationclass"],
        &["mode"],
    ),
    (
        Field::Erp,
        &[
            "erp",
            "effectiveradiatedpower",
            "erppower",
            "powererp",
            "radiatedpower",
            "eirp",
            "eirppower",
            "powereirp",
            "equivalentisotropicallyradiatedpower",
            "effectiveisotropicradiatedpower",
        ],
        &[],
    ),
    (Field::Lat, &["lat", "latitude"], &[]),
    (Field::Lon, &["lon", "long", "longitude", "lng"], &[]),
    (
        Field::Height,
        &[
            "height",
            "antennaheight",
            "antheight",
            "antht",
            "antennaht",
            "heightaboveground",
            "radiationcentreheight",
            "radiationcenterheight",
            "haat",
            "hagl",
        ],
        &["agl"],
    ),
    (
        Field::Kind,
        &["kind", "service", "servicetype", "radioservice"],
        &[
            "type",
            "class",
            "stationclass",
            "stationtype",
            "category",
            "use",
        ],
    ),
    (Field::Keyed, &["keyed", "keying"], &[]),
    (
        Field::Owner,
        &[
            "owner",
            "ownername",
            "licensee",
            "licenseename",
            "licenceholder",
            "licenseholder",
            "licensedto",
        ],
        &[
            "holder",
            "operator",
            "company",
            "organisation",
            "organization",
            "entity",
            "entityname",
            "client",
        ],
    ),
    (
        Field::Note,
        &[
            "note",
            "notes",
            "remark",
            "remarks",
            "comment",
            "comments",
            "description",
        ],
        &["details"],
    ),
];

/// Header words read as qualifiers and set aside.
const QUALIFIERS: &[&str] = &[
    "n", "e", "west", "east", "north", "agl", "aat", "amsl", "asl", "msl", "dd", "dec", "decimal",
    "wgs84", "nad83", "etrs89", "dms",
];

/// The part of a position split over columns.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Part {
    Degrees,
    Minutes,
    Seconds,
    Hemisphere,
}

fn part_of(word: &str) -> Option<Part> {
    Some(match word {
        "d" | "deg" | "degs" | "degree" | "degrees" => Part::Degrees,
        "min" | "mins" | "minute" | "minutes" => Part::Minutes,
        "s" | "sec" | "secs" | "second" | "seconds" => Part::Seconds,
        "h" | "hem" | "hemi" | "hemisphere" | "dir" | "direction" | "ns" | "ew" | "nsew" => {
            Part::Hemisphere
        }
        _ => return None,
    })
}

/// A header cut into words: the name (the other words joined) and what the unit,
/// qualifier and part words said.
#[derive(Clone, Debug, Default, PartialEq)]
struct Words {
    name: String,
    unit: Option<Unit>,
    qualifiers: Vec<String>,
    part: Option<Part>,
}

fn words_of(header: &str) -> Words {
    let mut w = Words::default();
    for word in header
        .split(|c: char| !c.is_alphanumeric())
        .filter(|s| !s.is_empty())
    {
        let lower = word.to_lowercase();
        if let Some(u) = Unit::from_word(&lower) {
            w.unit = w.unit.or(Some(u));
            // `m` also stands for minutes after a latitude or longitude
            if u == Unit::M {
                w.part = w.part.or(Some(Part::Minutes));
            }
        } else if let Some(p) = part_of(&lower) {
            w.part = w.part.or(Some(p));
        } else if QUALIFIERS.contains(&lower.as_str()) {
            w.qualifiers.push(lower);
        } else {
            w.name.push_str(&lower);
        }
    }
    // `AGL (m)`: the qualifier is the name
    if w.name.is_empty() && w.qualifiers.iter().any(|q| q == "agl") {
        w.name = "agl".into();
    }
    w
}

/// What a header's words say it is: a field, at a rank, with what the header gives.
#[derive(Clone, Debug, PartialEq)]
struct Reading {
    field: Field,
    rank: u8,
    unit: Option<Unit>,
    eirp: bool,
    haat: bool,
    west: bool,
    part: Option<Part>,
}

/// Looks `name` up in the synonyms, with a unit glued to its end as a fallback
/// (`frequencymhz`, `erpkw`).
fn synonym(name: &str) -> Option<(Field, u8, Option<Unit>)> {
    let find = |n: &str| {
        SYNONYMS.iter().find_map(|(field, first, second)| {
            if first.contains(&n) {
                Some((*field, 0))
            } else if second.contains(&n) {
                Some((*field, 1))
            } else {
                None
            }
        })
    };
    if let Some((f, r)) = find(name) {
        return Some((f, r, None));
    }
    for unit in [
        "khz", "mhz", "ghz", "hz", "dbw", "dbm", "dbk", "kw", "w", "ft", "m",
    ] {
        if let Some(stem) = name.strip_suffix(unit) {
            if let (Some((f, r)), Some(u)) = (find(stem), Unit::from_word(unit)) {
                if f.quantity() == Some(u.quantity()) {
                    return Some((f, r, Some(u)));
                }
            }
        }
    }
    None
}

/// What a header is, when it is one of `fields`; otherwise why not (for the report).
fn read_header(header: &str, kind: Option<TableKind>) -> std::result::Result<Reading, String> {
    let w = words_of(header);
    let Some((field, rank, glued)) = synonym(&w.name) else {
        return Err("not a field the tool reads".into());
    };
    let fields = kind.map_or(&Field::ALL[..], TableKind::fields);
    if !fields.contains(&field) {
        return Err(format!("{} is not read from this table", field.words()));
    }
    if field == Field::Freq {
        let n = w.name.as_str();
        let rx = n.starts_with("rx") || n.starts_with("receive") || n.ends_with("rx");
        let tx = n.starts_with("tx") || n.starts_with("transmit") || n.ends_with("tx");
        match kind {
            Some(TableKind::Emitters) if rx => {
                return Err("a receive frequency, not the transmitter's".into())
            }
            Some(TableKind::Receivers) if tx => {
                return Err("a transmit frequency, not the receiver's".into())
            }
            _ => {}
        }
    }
    let unit = glued.or(w.unit);
    let mut r = Reading {
        field,
        rank,
        unit: None,
        eirp: w.name.contains("eirp") || w.name.starts_with("equivalent"),
        haat: w.name == "haat" || w.qualifiers.iter().any(|q| q == "aat"),
        west: field == Field::Lon
            && (w.unit == Some(Unit::W) || w.qualifiers.iter().any(|q| q == "west")),
        part: None,
    };
    match field {
        Field::Lat | Field::Lon => r.part = w.part,
        Field::Height
            if w.qualifiers
                .iter()
                .any(|q| matches!(q.as_str(), "amsl" | "asl" | "msl")) =>
        {
            return Err("a height above sea level, not the antenna's height above ground".into())
        }
        _ => {}
    }
    if let (Some(q), Some(u)) = (field.quantity(), unit) {
        if u.quantity() != q {
            return Err(format!(
                "{} in {}? the unit does not fit",
                field.words(),
                u.text()
            ));
        }
        r.unit = Some(u);
    }
    Ok(r)
}

/// One pair of a mapping: a field (with an optional unit: `freq_khz`, `erp_dbw`,
/// `eirp_dbm`) and the column it is in, or the columns whose texts joined make it
/// (`LAT_DEG+LAT_MIN+LAT_SEC+LAT_HEM`).
#[derive(Clone, Debug, PartialEq)]
pub struct Pair {
    /// The pair as written.
    pub text: String,
    pub field: Field,
    pub unit: Option<Unit>,
    pub eirp: bool,
    pub columns: Vec<String>,
}

/// The `--columns` mapping: pairs `field=Header`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ColumnMap {
    pub pairs: Vec<Pair>,
}

/// The names `--columns` takes on the left of `=`.
pub fn field_names() -> String {
    let mut names: Vec<&str> = Field::ALL.iter().map(|f| f.name()).collect();
    names.insert(6, "eirp");
    names.join(", ")
}

impl ColumnMap {
    /// Reads one pair, `field=Header` or `field=A+B+C`.
    pub fn pair(text: &str) -> std::result::Result<Pair, String> {
        let t = text.trim();
        let (left, right) = t
            .split_once('=')
            .ok_or_else(|| format!("`{t}` is not FIELD=COLUMN (such as freq=Tx Freq)"))?;
        let w = words_of(left);
        let (field, _, glued) = synonym(&w.name).ok_or_else(|| {
            format!(
                "`{}` is not a field; fields: {}",
                left.trim(),
                field_names()
            )
        })?;
        let unit = glued.or(w.unit);
        if let (Some(u), q) = (unit, field.quantity()) {
            if q != Some(u.quantity()) {
                return Err(format!(
                    "`{}`: {} cannot be in {}",
                    left.trim(),
                    field.words(),
                    u.text()
                ));
            }
        }
        let columns: Vec<String> = right.split('+').map(|c| c.trim().to_string()).collect();
        if columns.iter().any(String::is_empty) {
            return Err(format!("`{t}` names an empty column"));
        }
        Ok(Pair {
            text: t.to_string(),
            field,
            unit,
            eirp: w.name.contains("eirp"),
            columns,
        })
    }

    /// Reads `field=Header,field=Header,…` (an option's value).
    pub fn parse_list(text: &str) -> std::result::Result<ColumnMap, String> {
        let mut map = ColumnMap::default();
        for part in text.split(',').filter(|p| !p.trim().is_empty()) {
            map.pairs.push(ColumnMap::pair(part)?);
        }
        if map.pairs.is_empty() {
            return Err(format!("`{text}` holds no FIELD=COLUMN pair"));
        }
        Ok(map)
    }

    /// Reads a mapping file: one pair a line; blank lines and `#` comments skipped.
    pub fn parse_file(source: &str, text: &str) -> Result<ColumnMap> {
        let mut map = ColumnMap::default();
        for (i, line) in text.lines().enumerate() {
            let l = line.trim().trim_start_matches('\u{feff}');
            if l.is_empty() || l.starts_with('#') {
                continue;
            }
            map.pairs.push(
                ColumnMap::pair(l)
                    .map_err(|m| Error::input(Place::new(source).at_line(i as u64 + 1), m))?,
            );
        }
        if map.pairs.is_empty() {
            return Err(Error::input(
                Place::new(source),
                "holds no FIELD=COLUMN pair",
            ));
        }
        Ok(map)
    }

    /// Adds the pairs of another mapping.
    pub fn extend(&mut self, other: ColumnMap) {
        self.pairs.extend(other.pairs);
    }
}

/// Where a field's unit came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum UnitSource {
    /// The header or the mapping named it.
    Named,
    /// Nothing named one: the tool's own (MHz for frequencies, kHz for widths, m for
    /// heights); a unit in a cell still counts.
    Assumed,
    /// Nothing named one and there is no default: each cell must carry its unit (ERP).
    InCells,
}

/// A field and the column (or the columns joined) it is read from.
#[derive(Clone, Debug, PartialEq)]
pub struct Mapped {
    pub field: Field,
    /// The columns, in the order their texts are joined (for a split position: degrees,
    /// minutes, seconds, hemisphere).
    pub columns: Vec<usize>,
    /// The column names as the file writes them, joined by `+`: named in messages.
    pub label: String,
    pub unit: Option<Unit>,
    pub unit_source: UnitSource,
    /// The power column holds EIRP: read as ERP = EIRP − 2.15 dB.
    pub eirp: bool,
    /// The height column holds the height above average terrain.
    pub haat: bool,
    /// The longitude column counts west positive (`Longitude (W)`): a bare number is west.
    pub west: bool,
    /// Taken from `--columns`.
    pub by_mapping: bool,
}

impl Mapped {
    /// A field read from several columns joined in order, named by their labels, with
    /// no unit of its own.
    fn joined(field: Field, columns: Vec<usize>, label: &dyn Fn(usize) -> String) -> Mapped {
        Mapped {
            field,
            label: columns
                .iter()
                .map(|&c| label(c))
                .collect::<Vec<_>>()
                .join("+"),
            columns,
            unit: None,
            unit_source: UnitSource::Named,
            eirp: false,
            haat: false,
            west: false,
            by_mapping: false,
        }
    }
}

/// How a table's columns are read: the fields found, the columns not used and why, and
/// the mapping pairs that named no column of this file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Layout {
    pub headers: Vec<String>,
    pub fields: Vec<Mapped>,
    pub unused: Vec<(String, String)>,
    /// Indices (in the mapping) of the pairs this file's columns matched.
    pub matched_pairs: Vec<usize>,
}

impl Layout {
    /// The columns a field is read from (several for the power: each must agree).
    pub fn all(&self, field: Field) -> impl Iterator<Item = &Mapped> {
        self.fields.iter().filter(move |m| m.field == field)
    }

    /// The (first) column a field is read from.
    pub fn get(&self, field: Field) -> Option<&Mapped> {
        self.all(field).next()
    }

    /// The label naming a field in messages: its column, else the tool's own name.
    pub fn label(&self, field: Field) -> String {
        self.get(field)
            .map_or_else(|| field.own_column().to_string(), |m| m.label.clone())
    }
}

fn find_column(headers: &[String], name: &str) -> Option<usize> {
    let exact = headers
        .iter()
        .position(|h| h.trim().eq_ignore_ascii_case(name.trim()));
    exact.or_else(|| {
        let key = |s: &str| -> String {
            s.chars()
                .filter(|c| c.is_alphanumeric())
                .flat_map(char::to_lowercase)
                .collect()
        };
        let k = key(name);
        let found: Vec<usize> = (0..headers.len())
            .filter(|&i| !k.is_empty() && key(&headers[i]) == k)
            .collect();
        match found[..] {
            [one] => Some(one),
            _ => None,
        }
    })
}

/// A text as one `--columns` value for a shell: single-quoted unless plain.
fn shell_pair(field: Field, label: &str) -> String {
    crate::text::shell_word(&format!("{}={label}", field.name()))
}

/// The column mapping of a command (`--columns`: pairs, or files of pairs), and which of its pairs the files read matched:
/// a pair that names a column of none of them is refused ([`MappingInUse::check`]).
#[derive(Debug, Default)]
pub struct MappingInUse {
    map: Option<ColumnMap>,
    matched: std::cell::RefCell<Vec<bool>>,
    read: std::cell::RefCell<Vec<(String, Vec<String>)>>,
}

impl MappingInUse {
    /// Reads the `--columns` values: pairs, or the path of a file of pairs.
    pub fn new(values: &[String]) -> Result<MappingInUse, Error> {
        let mut map: Option<ColumnMap> = None;
        for value in values {
            let more = if value.contains('=') {
                ColumnMap::parse_list(value).map_err(|m| Error::argument("--columns", m))?
            } else {
                let path = std::path::Path::new(value);
                let text = std::fs::read_to_string(path)
                    .map_err(|e| Error::io(path.display().to_string(), &e))?;
                ColumnMap::parse_file(&path.display().to_string(), &text)?
            };
            match &mut map {
                Some(m) => m.extend(more),
                None => map = Some(more),
            }
        }
        let pairs = map.as_ref().map_or(0, |m| m.pairs.len());
        Ok(MappingInUse {
            map,
            matched: std::cell::RefCell::new(vec![false; pairs]),
            read: std::cell::RefCell::new(Vec::new()),
        })
    }

    /// The mapping, when one was given.
    pub fn map(&self) -> Option<&ColumnMap> {
        self.map.as_ref()
    }

    /// Notes which pairs a file's columns matched.
    pub fn saw(&self, source: &str, layout: &Layout) {
        let mut matched = self.matched.borrow_mut();
        for &i in &layout.matched_pairs {
            if let Some(m) = matched.get_mut(i) {
                *m = true;
            }
        }
        self.read
            .borrow_mut()
            .push((source.to_string(), layout.headers.clone()));
    }

    /// Refuses a pair that named a column of none of the files read.
    pub fn check(&self) -> Result<(), Error> {
        let Some(map) = &self.map else { return Ok(()) };
        let matched = self.matched.borrow();
        let read = self.read.borrow();
        if let Some((pair, _)) = map.pairs.iter().zip(matched.iter()).find(|(_, m)| !**m) {
            let files: Vec<String> = read
                .iter()
                .map(|(source, headers)| {
                    let names: Vec<&str> = headers
                        .iter()
                        .map(|h| h.trim())
                        .filter(|h| !h.is_empty())
                        .collect();
                    format!("{source} has {}", names.join(", "))
                })
                .collect();
            return Err(Error::argument(
                "--columns",
                format!(
                    "`{}` names a column no file read has ({})",
                    pair.text,
                    if files.is_empty() {
                        "no table was read".to_string()
                    } else {
                        files.join("; ")
                    }
                ),
            ));
        }
        Ok(())
    }
}

/// Matches a header (as the file writes it) to the fields of `kind`, with `map` first.
/// `source` names the file in messages; the header is line `line`.
pub fn resolve(
    source: &str,
    line: u64,
    headers: &[String],
    kind: TableKind,
    map: &ColumnMap,
) -> Result<Layout> {
    let fields = kind.fields();
    let place = || Place::new(source).at_line(line);
    let mut layout = Layout {
        headers: headers.to_vec(),
        ..Default::default()
    };
    let mut taken = vec![false; headers.len()];
    // 1. the mapping
    for (pi, pair) in map.pairs.iter().enumerate() {
        if !fields.contains(&pair.field) {
            continue;
        }
        let found: Option<Vec<usize>> = match find_column(headers, &pair.columns.join("+")) {
            Some(i) if pair.columns.len() > 1 => Some(vec![i]),
            _ => pair
                .columns
                .iter()
                .map(|c| find_column(headers, c))
                .collect(),
        };
        let Some(columns) = found else { continue };
        layout.matched_pairs.push(pi);
        if layout.get(pair.field).is_some_and(|m| m.columns == columns) {
            continue; // the same pair given again (a file and the command line)
        }
        if layout.get(pair.field).is_some() && pair.field != Field::Erp {
            return Err(Error::input(
                place(),
                format!("--columns names {} twice", pair.field.words()),
            ));
        }
        for &c in &columns {
            if taken[c] {
                return Err(Error::input(
                    place().at_field(headers[c].clone()),
                    "--columns gives this column to two fields",
                ));
            }
            taken[c] = true;
        }
        let header_reading = match columns[..] {
            [one] => read_header(&headers[one], None).ok(),
            _ => None,
        };
        let unit = pair
            .unit
            .or(header_reading.as_ref().and_then(|r| r.unit))
            .filter(|u| pair.field.quantity() == Some(u.quantity()));
        layout.fields.push(Mapped {
            field: pair.field,
            label: columns
                .iter()
                .map(|&c| headers[c].trim().to_string())
                .collect::<Vec<_>>()
                .join("+"),
            columns,
            unit,
            unit_source: unit_source(pair.field, unit),
            eirp: pair.eirp || header_reading.as_ref().is_some_and(|r| r.eirp),
            haat: header_reading.as_ref().is_some_and(|r| r.haat),
            west: header_reading.as_ref().is_some_and(|r| r.west),
            by_mapping: true,
        });
    }
    // 2. the names
    let mut candidates: HashMap<Field, Vec<(usize, Reading)>> = HashMap::new();
    for (i, h) in headers.iter().enumerate() {
        if taken[i] || h.trim().is_empty() {
            continue;
        }
        match read_header(h, Some(kind)) {
            Ok(r) if layout.get(r.field).is_none() => {
                candidates.entry(r.field).or_default().push((i, r))
            }
            Ok(r) => layout.unused.push((
                h.trim().to_string(),
                format!("{} is taken from --columns", r.field.words()),
            )),
            Err(why) => layout.unused.push((h.trim().to_string(), why)),
        }
    }
    for &field in fields {
        let Some(mut found) = candidates.remove(&field) else {
            continue;
        };
        let best = found.iter().map(|(_, r)| r.rank).min().unwrap_or(0);
        let (chosen, rest): (Vec<_>, Vec<_>) = found.drain(..).partition(|(_, r)| r.rank == best);
        for (i, _) in &rest {
            layout.unused.push((
                headers[*i].trim().to_string(),
                format!(
                    "also names {}; `{}` is read",
                    field.words(),
                    headers[chosen[0].0].trim()
                ),
            ));
        }
        let label = |i: usize| headers[i].trim().to_string();
        let ambiguous = |a: usize, b: usize| {
            Error::input(
                place(),
                format!(
                    "columns `{}` and `{}` could both be {}; say which with --columns {}",
                    label(a),
                    label(b),
                    field.words(),
                    shell_pair(field, &label(a))
                ),
            )
        };
        let split = matches!(field, Field::Lat | Field::Lon)
            && chosen.iter().any(|(_, r)| {
                matches!(
                    r.part,
                    Some(Part::Minutes | Part::Seconds | Part::Hemisphere)
                )
            });
        if split {
            let mut parts: Vec<(Part, usize)> = Vec::new();
            for (i, r) in &chosen {
                let Some(p) = r.part else {
                    return Err(ambiguous(
                        *i,
                        chosen
                            .iter()
                            .find(|c| c.1.part.is_some())
                            .map_or(*i, |c| c.0),
                    ));
                };
                if let Some(&(_, other)) = parts.iter().find(|(q, _)| *q == p) {
                    return Err(ambiguous(other, *i));
                }
                parts.push((p, *i));
            }
            parts.sort();
            if parts[0].0 != Part::Degrees {
                return Err(Error::input(
                    place().at_field(label(parts[0].1)),
                    format!(
                        "{} is split over columns, but none holds the degrees; map them with --columns {}",
                        field.words(),
                        crate::text::shell_word(&format!("{}=DEG+MIN+SEC+HEM", field.name()))
                    ),
                ));
            }
            let columns: Vec<usize> = parts.iter().map(|p| p.1).collect();
            layout.fields.push(Mapped::joined(field, columns, &label));
            continue;
        }
        if chosen.len() > 1 && field == Field::Note {
            // several note columns (`Notes`, `Remarks`) are read together
            let columns: Vec<usize> = chosen.iter().map(|c| c.0).collect();
            layout.fields.push(Mapped::joined(field, columns, &label));
            continue;
        }
        if chosen.len() > 1 && field != Field::Erp {
            return Err(ambiguous(chosen[0].0, chosen[1].0));
        }
        for (i, r) in chosen {
            layout.fields.push(Mapped {
                field,
                columns: vec![i],
                label: label(i),
                unit: r.unit,
                unit_source: unit_source(field, r.unit),
                eirp: r.eirp,
                haat: r.haat,
                west: r.west,
                by_mapping: false,
            });
        }
    }
    // 3. every missing required column at once
    let missing: Vec<Field> = kind
        .required()
        .iter()
        .copied()
        .filter(|f| layout.get(*f).is_none())
        .collect();
    if !missing.is_empty() {
        let has: Vec<&str> = headers
            .iter()
            .map(|h| h.trim())
            .filter(|h| !h.is_empty())
            .collect();
        let has = has.join(", ");
        return Err(match missing[..] {
            [one] => Error::input(
                place().at_field(one.own_column()),
                format!(
                    "missing column; the header has: {has} (name the column with --columns {}=COLUMN)",
                    one.name()
                ),
            ),
            _ => Error::input(
                place(),
                format!(
                    "missing columns {}; the header has: {has} (name them with --columns {})",
                    missing
                        .iter()
                        .map(|f| format!("`{}`", f.own_column()))
                        .collect::<Vec<_>>()
                        .join(", "),
                    missing
                        .iter()
                        .map(|f| format!("{}=COLUMN", f.name()))
                        .collect::<Vec<_>>()
                        .join(",")
                ),
            ),
        });
    }
    layout
        .fields
        .sort_by_key(|m| (m.field, m.columns.first().copied()));
    Ok(layout)
}

fn unit_source(field: Field, unit: Option<Unit>) -> UnitSource {
    match (unit, field) {
        (Some(_), _) => UnitSource::Named,
        (None, Field::Erp) => UnitSource::InCells,
        (None, _) => UnitSource::Assumed,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn layout(header: &str, kind: TableKind) -> Result<Layout> {
        let headers: Vec<String> = header.split(',').map(str::to_string).collect();
        resolve("t.csv", 1, &headers, kind, &ColumnMap::default())
    }

    fn read_as(header: &str) -> Vec<(Field, String, Option<Unit>, bool)> {
        layout(header, TableKind::Emitters)
            .unwrap()
            .fields
            .into_iter()
            .map(|m| (m.field, m.label, m.unit, m.eirp))
            .collect()
    }

    #[test]
    fn reads_headers_as_people_write_them() {
        let got = read_as("Call sign,Licensee,Frequency (MHz),Emission designator,ERP (dBW),Latitude,Longitude,Antenna height (m AGL),Service");
        let fields: Vec<Field> = got.iter().map(|g| g.0).collect();
        assert_eq!(
            fields,
            vec![
                Field::Id,
                Field::Freq,
                Field::Emission,
                Field::Erp,
                Field::Lat,
                Field::Lon,
                Field::Height,
                Field::Kind,
                Field::Owner
            ]
        );
        assert_eq!(got[1].2, Some(Unit::MHz));
        assert_eq!(got[3].2, Some(Unit::DBW));
        assert_eq!(got[6].2, Some(Unit::M));
        let got = read_as("CALLSIGN,TX_FREQ_KHZ,ERP_kW,EIRP [dBm],bw_hz,height_ft");
        assert_eq!(got[1].2, Some(Unit::KHz));
        assert_eq!(got[2].0, Field::Bandwidth);
        assert_eq!((got[3].2, got[3].3), (Some(Unit::KW), false));
        assert_eq!((got[4].2, got[4].3), (Some(Unit::DBm), true));
        assert_eq!(got[5].2, Some(Unit::Ft));
        // the tool's own names
        let got =
            read_as("id,freq_mhz,bw_khz,erp_w,erp_dbm,lat,lon,height_m,kind,keyed,owner,note");
        assert_eq!(got.len(), 12);
        let got = read_as("id,FrequencyMHz,erpdbw");
        assert_eq!((got[1].0, got[1].2), (Field::Freq, Some(Unit::MHz)));
        assert_eq!((got[2].0, got[2].2), (Field::Erp, Some(Unit::DBW)));
    }

    #[test]
    fn reads_split_positions() {
        let l = layout(
            "id,freq,LAT_DEG,LAT_MIN,LAT_SEC,LAT_HEM,Lon Deg,Lon Min,Lon Sec,Lon Dir",
            TableKind::Emitters,
        )
        .unwrap();
        let short = layout("id,freq,LAT_D,LAT_M,LAT_S,LAT_H", TableKind::Emitters).unwrap();
        assert_eq!(short.get(Field::Lat).unwrap().columns, vec![2, 3, 4, 5]);
        let lat = l.get(Field::Lat).unwrap();
        assert_eq!(lat.columns, vec![2, 3, 4, 5]);
        assert_eq!(lat.label, "LAT_DEG+LAT_MIN+LAT_SEC+LAT_HEM");
        assert_eq!(l.get(Field::Lon).unwrap().columns, vec![6, 7, 8, 9]);
        // degrees alone are the whole coordinate
        let l = layout(
            "id,freq,Latitude (deg),Longitude (deg)",
            TableKind::Emitters,
        )
        .unwrap();
        assert_eq!(l.get(Field::Lat).unwrap().columns, vec![2]);
    }

    #[test]
    fn refuses_ambiguity_and_names_every_missing_column() {
        let e = layout("Call sign,Frequency (MHz),Tx Freq", TableKind::Emitters).unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 1: columns `Frequency (MHz)` and `Tx Freq` could both be the \
             frequency; say which with --columns 'freq=Frequency (MHz)'"
        );
        let e = layout("Site,Power", TableKind::Emitters).unwrap_err();
        assert_eq!(
            e.to_string(),
            "t.csv, line 1: missing columns `id`, `freq_mhz`; the header has: Site, Power \
             (name them with --columns id=COLUMN,freq=COLUMN)"
        );
        // a lower rank gives way: a call sign before a licence number
        let l = layout("Licence number,Call sign,Frequency", TableKind::Emitters).unwrap();
        assert_eq!(l.get(Field::Id).unwrap().label, "Call sign");
        assert_eq!(l.unused[0].0, "Licence number");
        let l = layout("id,freq,Notes,Remarks", TableKind::Emitters).unwrap();
        assert_eq!(l.get(Field::Note).unwrap().label, "Notes+Remarks");
        let l = layout("id,freq,Height AMSL (m)", TableKind::Emitters).unwrap();
        assert!(l.get(Field::Height).is_none());
        assert!(l.unused[0].1.contains("above sea level"));
    }

    #[test]
    fn mapping_settles_what_names_cannot() {
        let map = ColumnMap::parse_list("freq=Tx Freq,lat=A+B+C+D,erp_dbw=Power,id=Licence number")
            .unwrap();
        let headers: Vec<String> = "Licence number,Call sign,Frequency (MHz),Tx Freq,A,B,C,D,Power"
            .split(',')
            .map(str::to_string)
            .collect();
        let l = resolve("t.csv", 1, &headers, TableKind::Emitters, &map).unwrap();
        assert_eq!(l.get(Field::Freq).unwrap().label, "Tx Freq");
        assert_eq!(l.get(Field::Freq).unwrap().unit_source, UnitSource::Assumed);
        assert_eq!(l.get(Field::Lat).unwrap().columns, vec![4, 5, 6, 7]);
        assert_eq!(l.get(Field::Erp).unwrap().unit, Some(Unit::DBW));
        assert_eq!(l.get(Field::Id).unwrap().label, "Licence number");
        assert_eq!(l.matched_pairs, vec![0, 1, 2, 3]);
        assert!(ColumnMap::parse_list("frequ=X")
            .unwrap_err()
            .starts_with("`frequ` is not a field; fields: id, freq, bw"));
        assert!(ColumnMap::parse_list("freq_dbm=X").is_err());
        let file = ColumnMap::parse_file("map.txt", "# ours\nfreq=Frequency, MHz\n\n").unwrap();
        assert_eq!(file.pairs[0].columns, vec!["Frequency, MHz".to_string()]);
    }
}
