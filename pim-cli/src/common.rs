//! What the commands share: reading files with errors that name them, parsing unit
//! arguments, and writing to standard output.

use std::cell::RefCell;
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::Path;

use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::onair::{Logbook, Schedule};
use pim_core::{Error, Site};
use pim_io::columns::Layout;
use pim_io::emitters::{read_emitters_with, ReadOptions};
use pim_io::text::{parse_coordinate, parse_frequency_in, parse_quantity, Axis, TerminalSafe};
use pim_io::{read_heard, read_on_air, Clock, ColumnMap, ReceiverFile};

use crate::args::ColumnsArgs;

/// An error on its way to the user, or a closed pipe (not an error: the reader left).
#[derive(Debug)]
pub enum CliError {
    Core(Error),
    BrokenPipe,
}

impl From<Error> for CliError {
    fn from(e: Error) -> Self {
        CliError::Core(e)
    }
}

impl From<io::Error> for CliError {
    fn from(e: io::Error) -> Self {
        if e.kind() == io::ErrorKind::BrokenPipe {
            CliError::BrokenPipe
        } else {
            CliError::Core(Error::io("standard output", &e))
        }
    }
}

pub type CliResult<T = ()> = Result<T, CliError>;

/// Opens a file for reading; a failure names the path.
pub fn open(path: &Path) -> Result<File, Error> {
    File::open(path).map_err(|e| Error::io(path.display().to_string(), &e))
}

/// Standard output, buffered; on a terminal, control and invisible characters from
/// files are shown escaped (`pim_io::text::TerminalSafe`), so no input can retitle the
/// terminal or write its clipboard.
pub fn stdout() -> BufWriter<TerminalSafe<io::StdoutLock<'static>>> {
    use std::io::IsTerminal;
    let out = io::stdout();
    let terminal = out.is_terminal();
    BufWriter::new(TerminalSafe::new(out.lock(), terminal))
}

/// Flushes the output; a closed pipe ends quietly.
pub fn finish(mut out: impl Write) -> CliResult {
    out.flush()?;
    Ok(())
}

/// clap parser for a frequency with an optional unit (bare numbers are MHz).
pub fn frequency_arg(text: &str) -> Result<Hz, String> {
    let f = parse_frequency_in(text, 6)?;
    if f.0 <= 0 {
        return Err(format!("frequency {text} must be above zero"));
    }
    if f > pim_core::freq::MAX_FREQUENCY {
        return Err(format!("frequency {text} is above 300 GHz"));
    }
    Ok(f)
}

/// clap parser for a width in kHz, zero or more, exact to the hertz; a unit may be given
/// (`12.5kHz`, `0.0125MHz`, `12500Hz`).
pub fn khz_arg(text: &str) -> Result<Hz, String> {
    let w = parse_frequency_in(text, 3)?;
    if w.0 < 0 {
        return Err(format!("`{text}` is negative"));
    }
    if w > pim_core::freq::MAX_FREQUENCY {
        return Err(format!("`{text}` is absurd for a width"));
    }
    Ok(w)
}

/// clap parser for a latitude: decimal degrees, degrees and minutes, or degrees, minutes
/// and seconds, with N or S (`45.1046`, `45°06.275'N`, `45 06 16.5 N`).
pub fn lat_arg(text: &str) -> Result<f64, String> {
    parse_coordinate(text, Axis::Latitude)
}

/// clap parser for a longitude, in the notations of [`lat_arg`] with E or W.
pub fn lon_arg(text: &str) -> Result<f64, String> {
    parse_coordinate(text, Axis::Longitude)
}

/// clap parser for a finite number without a unit (a decimal comma gets the table
/// reader's hint).
pub fn finite_arg(text: &str) -> Result<f64, String> {
    parse_quantity(text, "")
}

/// clap parser factory for a finite number in `unit` (`dB`, `dBm`, `dBc`, `m`, `°`, `s`,
/// or `""` for none) within `lo..=hi`: the unit may be written after the number (`3dB`,
/// `-80dBm`, `150m`), a unit of another kind is refused, and a value outside the range is
/// physically absurd for the option.
pub fn ranged(
    lo: f64,
    hi: f64,
    unit: &'static str,
) -> impl Fn(&str) -> Result<f64, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let v = parse_quantity(text, unit)?;
        if (lo..=hi).contains(&v) {
            Ok(v)
        } else {
            let u = if unit.is_empty() {
                String::new()
            } else {
                format!(" {unit}")
            };
            let number = pim_io::text::split_unit(text).0;
            Err(format!("{number}{u} is outside {lo}…{hi}{u}"))
        }
    }
}

/// clap parser factory for a whole number within `lo..=hi` (a count, an order); a
/// decimal comma gets the table reader's hint.
pub fn whole<T>(
    lo: u64,
    hi: u64,
) -> impl Fn(&str) -> Result<T, String> + Clone + Send + Sync + 'static
where
    T: TryFrom<u64> + Clone + Send + Sync + 'static,
{
    move |text: &str| {
        let t = text.trim();
        let v: u64 = t.parse().map_err(|_| {
            format!(
                "`{t}` is not a whole number{}",
                pim_io::table::decimal_comma_hint(t)
            )
        })?;
        if !(lo..=hi).contains(&v) {
            return Err(format!("{v} is not in {lo}..={hi}"));
        }
        T::try_from(v).map_err(|_| format!("{v} is too large"))
    }
}

/// clap parser factory for a quantity in `unit` above zero (a distance, a time).
pub fn positive(
    unit: &'static str,
) -> impl Fn(&str) -> Result<f64, String> + Clone + Send + Sync + 'static {
    move |text: &str| {
        let v = parse_quantity(text, unit)?;
        if v > 0.0 {
            Ok(v)
        } else {
            Err(format!("`{text}` must be above zero"))
        }
    }
}

/// Output formats shared by the listing commands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum ListFormat {
    Table,
    Json,
    Csv,
    Markdown,
}

/// Output formats of a command that gives one answer rather than a listing.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum AnswerFormat {
    Table,
    Json,
}

/// Turns `EMITTER=K` pairs into emitter indices; an unknown id or one given twice with
/// different values is a bad argument.
pub fn coefficient_indices(
    pairs: &[(String, u32)],
    site: &Site,
    source: &str,
) -> Result<Vec<(usize, u32)>, Error> {
    let mut out: Vec<(usize, u32)> = Vec::new();
    for (id, k) in pairs {
        let i = site.index_of(id).ok_or_else(|| {
            Error::argument("--coefficient", format!("no emitter `{id}` in {source}"))
        })?;
        match out.iter().find(|(j, _)| *j == i) {
            Some((_, other)) if other != k => {
                return Err(Error::argument(
                    "--coefficient",
                    format!("`{id}` is given both |k| = {other} and |k| = {k}"),
                ))
            }
            Some(_) => {}
            None => out.push((i, *k)),
        }
    }
    Ok(out)
}

/// Reads the on-air and listening logs against `emitters`.
pub fn load_logbook(
    on_air: &std::path::Path,
    heard: &std::path::Path,
    emitters: &[Emitter],
) -> CliResult<Logbook> {
    let mut clock = Clock::default();
    let intervals = read_on_air(
        &on_air.display().to_string(),
        open(on_air)?,
        emitters,
        &mut clock,
    )?;
    let observations = read_heard(&heard.display().to_string(), open(heard)?, &mut clock)?;
    Ok(Logbook::new(
        Schedule::new(emitters, &intervals),
        observations,
    ))
}

/// The `--columns` mapping of a command, and which of its pairs the files read matched:
/// a pair that names a column of none of them is refused ([`Columns::check`]).
#[derive(Debug, Default)]
pub struct Columns {
    map: Option<ColumnMap>,
    matched: RefCell<Vec<bool>>,
    read: RefCell<Vec<(String, Vec<String>)>>,
}

impl Columns {
    /// Reads the `--columns` values: pairs, or the path of a file of pairs.
    pub fn new(args: &ColumnsArgs) -> Result<Columns, Error> {
        let mut map: Option<ColumnMap> = None;
        for value in &args.columns {
            let more = if value.contains('=') {
                ColumnMap::parse_list(value).map_err(|m| Error::argument("--columns", m))?
            } else {
                let path = Path::new(value);
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
        Ok(Columns {
            map,
            matched: RefCell::new(vec![false; pairs]),
            read: RefCell::new(Vec::new()),
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

/// Reads an emitter file through the mapping and says on standard error what it assumed
/// and which columns it did not use.
pub fn load_emitters(path: &std::path::Path, columns: &Columns) -> CliResult<Vec<Emitter>> {
    let source = path.display().to_string();
    let options = ReadOptions {
        columns: columns.map(),
        keep_going: false,
    };
    let file = read_emitters_with(&source, open(path)?, options)?;
    columns.saw(&source, &file.layout);
    note_unused(&source, &file.ignored_columns);
    for note in &file.notes {
        eprintln_safe!("pim: note: {source}: {note}");
    }
    Ok(file.emitters)
}

/// Reads a receiver file through the mapping.
pub fn load_receivers(path: &std::path::Path, columns: &Columns) -> CliResult<ReceiverFile> {
    let source = path.display().to_string();
    let file = pim_io::emitters::read_receivers_with(&source, open(path)?, columns.map())?;
    columns.saw(&source, &file.layout);
    note_unused(&source, &file.ignored_columns);
    for note in &file.notes {
        eprintln_safe!("pim: note: {source}: {note}");
    }
    Ok(file)
}

/// Reads a structures file through the mapping.
/// The optional structure and emitter files of a map (`fix`, `walk`), read through the
/// `--columns` mapping, which must then have named a column of one of them.
pub fn load_site_items(
    structures: Option<&std::path::Path>,
    emitters: Option<&std::path::Path>,
    columns: &crate::args::ColumnsArgs,
) -> CliResult<(Vec<pim_core::ticket::Structure>, Vec<Emitter>)> {
    let columns = Columns::new(columns)?;
    let structures = match structures {
        Some(p) => load_structures(p, &columns)?,
        None => Vec::new(),
    };
    let emitters = match emitters {
        Some(p) => load_emitters(p, &columns)?,
        None => Vec::new(),
    };
    columns.check()?;
    Ok((structures, emitters))
}

pub fn load_structures(
    path: &std::path::Path,
    columns: &Columns,
) -> CliResult<Vec<pim_core::ticket::Structure>> {
    let source = path.display().to_string();
    let file = pim_io::emitters::read_structures_with(&source, open(path)?, columns.map())?;
    columns.saw(&source, &file.layout);
    Ok(file.structures)
}

/// Says on standard error which columns of a file were not read, once per file.
pub fn note_unused(source: &str, columns: &[String]) {
    if columns.is_empty() {
        return;
    }
    let names: Vec<String> = columns.iter().map(|c| format!("`{c}`")).collect();
    let plural = if columns.len() == 1 { "" } else { "s" };
    eprintln_safe!(
        "pim: note: {source}: column{plural} {} not used",
        names.join(", ")
    );
}

/// `site` with the memory budget of its listings from `PIM_MEMORY_BUDGET_MB` (whole
/// megabytes) when that is set, else the engine's default.
pub fn budgeted(site: Site) -> Result<Site, Error> {
    let Some(text) = std::env::var_os("PIM_MEMORY_BUDGET_MB") else {
        return Ok(site);
    };
    match text.to_str().and_then(|t| t.trim().parse::<u64>().ok()) {
        Some(mb) if mb > 0 => Ok(site.with_memory_budget(mb.saturating_mul(1_000_000))),
        _ => Err(Error::argument(
            "PIM_MEMORY_BUDGET_MB",
            "must be a whole number of megabytes above 0",
        )),
    }
}

/// A listing refused for its memory, with the options that shorten or narrow it.
pub fn listing_hint(mut e: Error) -> Error {
    if e.class == pim_core::ErrorClass::Refused {
        e.message.push_str(
            " (--limit N keeps only the first N; --max-order, --max-emitters and --rx-bw-khz narrow the search)",
        );
    }
    e
}
