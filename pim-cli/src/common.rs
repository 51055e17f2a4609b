//! What the commands share: reading files with errors that name them, parsing unit
//! arguments, and writing to standard output.

use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::Path;

use pim_core::emitter::Emitter;
use pim_core::onair::{Logbook, Schedule};
use pim_core::{Error, Site};
pub use pim_io::columns::MappingInUse as Columns;
use pim_io::emitters::{read_emitters_with, ReadOptions};
use pim_io::text::TerminalSafe;
use pim_io::{read_heard, read_on_air, Clock, ReceiverFile};

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

// The value parsers of every option: how a person writes a frequency, a width, a
// coordinate or a quantity (pim_io::values).
pub use pim_io::values::{
    finite as finite_arg, frequency as frequency_arg, latitude as lat_arg, longitude as lon_arg,
    positive, ranged, whole, width as khz_arg,
};

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
    let columns = Columns::new(&columns.columns)?;
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

/// Reads and explains the recording at `path` (a folder of sweeps or one file) against
/// `emitters`, within the memory budget.
pub fn explain_recording(
    path: &Path,
    emitters: &[Emitter],
    rule: &pim_core::trace::SweepRule,
    on_air: &[(usize, pim_core::onair::Interval)],
) -> CliResult<pim_report::recording::Explained> {
    let site = budgeted(Site::new(emitters.to_vec()))?;
    let read =
        |visit: &mut dyn FnMut(&pim_io::recording::RecordedSweep) -> pim_core::Result<()>| {
            pim_io::recording::read_recording(path, visit)
        };
    pim_report::recording::explain_with(&read, &path.display().to_string(), &site, rule, on_air)
        .map_err(|e| listing_hint(e).into())
}
