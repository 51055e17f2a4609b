//! `pim ticket FREQ --emitters FILE --log FILE --out DIR`: the maintenance ticket a tower
//! crew and a licensee act on. It puts the two halves together (the candidates are
//! re-ranked with the junction at the fix) and writes, in DIR: ticket.md, ticket.html,
//! map.svg, spectrum.svg, fix.geojson, fix.kml and candidates.csv.

use std::io::Write;
use std::path::{Path, PathBuf};

use pim_core::trace::analyse;
use pim_core::{Error, Site};
use pim_io::output::{write_files_atomically, Existing};
use pim_report::ticket::{
    ticket_files, AttenuatorTest, BandTrace, FieldEvidence, PowerStepTest, TicketInputs, WorkOrder,
};

use crate::args::{CalibrationArgs, EvidenceArgs, HeardArgs, SearchArgs};
use crate::common::load_emitters;
use crate::common::{finish, open, stdout, CliResult};
use crate::fix::{fix_from_log, FixArgs};

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    #[command(flatten)]
    pub input: HeardArgs,
    /// Field log of the bearing walk.
    #[arg(long, value_name = "FILE")]
    pub log: PathBuf,
    /// Site structures (towers, fences, sheds, guy anchors): CSV with id, lat, lon, kind, note.
    #[arg(long, value_name = "FILE")]
    pub structures: Option<PathBuf>,
    /// Directory to write the ticket into (created when missing).
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Replace a ticket already in DIR (without it, an existing ticket is never touched).
    #[arg(long)]
    pub force: bool,
    /// The site's name, for the title.
    #[arg(long, value_name = "NAME", default_value = "the site")]
    pub site: String,
    /// An analyser trace of the receive band (repeat for sweeps held together): the
    /// ticket shows it (trace.svg) with the emitter sets that explain several peaks.
    #[arg(long = "trace", value_name = "FILE")]
    pub traces: Vec<PathBuf>,
    /// A recording of the receive band (a folder of trace files named by their times, or
    /// one CSV with a `time` column): the waterfall (waterfall.svg) and each product
    /// peak's candidates ordered by how their presence agrees with their emitters'
    /// (recording.txt) are written beside the ticket.
    #[arg(long, value_name = "DIR|FILE")]
    pub recording: Option<PathBuf>,
    /// Least height of a trace peak above the noise floor, in dB.
    #[arg(long = "threshold-db", value_name = "DB", default_value = "10", value_parser = crate::sweep::threshold_arg)]
    pub threshold_db: f64,
    /// Candidates listed in the ticket (candidates.csv has them all).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub limit: usize,
    /// The evidence gathered, the receiver and the work order (boxed: they make the
    /// command's options the largest of all).
    #[command(flatten)]
    pub gathered: Box<Gathered>,
    #[command(flatten)]
    pub search: SearchArgs,
    /// Without --heard-dbm, the model is calibrated against the log's `level_dbm`.
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    #[command(flatten)]
    pub fix: FixArgs,
}

/// What the ticket takes in beyond the walk: the evidence, the receiver, the work order.
#[derive(clap::Args, Debug)]
pub struct Gathered {
    #[command(flatten)]
    pub evidence: EvidenceArgs,
    /// An attenuator test at the receiver: CSV `step_db,level_dbm` (as `pim slope --kind
    /// attenuator` reads it); its verdict is shown as done.
    #[arg(long, value_name = "FILE")]
    pub attenuator_readings: Option<PathBuf>,
    /// Power steps: CSV `step_db,level_dbm`, or `emitter,step_db,level_dbm` for several
    /// emitters (as `pim slope --kind power` reads it); its coefficients are shown as done.
    #[arg(long, value_name = "FILE")]
    pub power_steps: Option<PathBuf>,
    /// The receiver the carrier is heard on, by its id in --receivers: its channel width
    /// and position are used, and the ticket names it.
    #[arg(long, value_name = "ID", requires = "receivers")]
    pub receiver: Option<String>,
    /// Receiver file: CSV with `id`, `freq_mhz`, optional `bw_khz`, `lat`, `lon`.
    #[arg(long, value_name = "FILE", requires = "receiver")]
    pub receivers: Option<PathBuf>,
    /// The ticket's number, shown at its top.
    #[arg(long, value_name = "TEXT")]
    pub ticket_id: Option<String>,
    /// Who the ticket is assigned to.
    #[arg(long, value_name = "NAME")]
    pub assignee: Option<String>,
    /// The site's own offset from UTC (`+01:00`, `-07:00`; ±14:00 at most): the ticket's
    /// times are given in it with UTC beside. Default: UTC, said so in the ticket.
    #[arg(long, value_name = "±HH:MM", value_parser = pim_io::text::utc_offset, allow_hyphen_values = true)]
    pub utc_offset: Option<time::UtcOffset>,
}

/// The date and time the ticket is dated: SOURCE_DATE_EPOCH when set (for reproducible
/// output), else now; UTC.
pub fn prepared_at() -> String {
    prepared_in(None)
}

/// [`prepared_at`] in the site's own offset with UTC beside, when it is given.
fn prepared_in(site: Option<time::UtcOffset>) -> String {
    let t = std::env::var("SOURCE_DATE_EPOCH")
        .ok()
        .and_then(|s| s.trim().parse::<i64>().ok())
        .and_then(|s| time::OffsetDateTime::from_unix_timestamp(s).ok())
        .unwrap_or_else(time::OffsetDateTime::now_utc);
    let when = |t: time::OffsetDateTime, zone: &str| {
        format!(
            "{:04}-{:02}-{:02} {:02}:{:02} {zone}",
            t.year(),
            t.month() as u8,
            t.day(),
            t.hour(),
            t.minute()
        )
    };
    let utc = when(t.to_offset(time::UtcOffset::UTC), "UTC");
    match site {
        Some(o) if !o.is_utc() => format!(
            "{} ({utc})",
            when(t.to_offset(o), &pim_report::ticket::offset_text(o))
        ),
        _ => utc,
    }
}

/// Makes the ticket's files and writes them into `dir`, all or nothing (pim_io::output):
/// never over one of `inputs`, and over an existing ticket only as `existing` allows.
/// `extra` files (a marker) are written with the ticket. Returns what to say after.
pub fn write_ticket(
    t: &TicketInputs,
    dir: &Path,
    inputs: &[&Path],
    existing: Existing,
    extra: &[(&str, Vec<u8>)],
) -> Result<String, Error> {
    let mut made = ticket_files(t)?;
    let mut files: Vec<(&str, Vec<u8>)> = std::mem::take(&mut made.files);
    let ticket_count = files.len();
    files.extend(extra.iter().cloned());
    let mut paths = write_files_atomically(dir, &files, inputs, existing)?;
    // the summary lists the ticket's own files, not a marker beside them
    paths.truncate(ticket_count);
    Ok(made.summary(t, &paths))
}

/// The attenuator test of a file, read as `pim slope --kind attenuator` reads it.
fn attenuator_test(path: &Path) -> CliResult<AttenuatorTest> {
    let source = path.display().to_string();
    let (test, unused) = AttenuatorTest::read(&source, open(path)?)?;
    crate::common::note_unused(&source, &unused);
    Ok(test)
}

/// The power steps of a file, read as `pim slope --kind power` reads it.
pub(crate) fn power_step_test(path: &Path) -> CliResult<PowerStepTest> {
    let source = path.display().to_string();
    let (test, unused) = PowerStepTest::read(&source, open(path)?)?;
    crate::common::note_unused(&source, &unused);
    Ok(test)
}

/// The affected receiver from its file; the heard frequency must lie in its channel.
fn affected_receiver(
    path: &Path,
    id: &str,
    heard: &HeardArgs,
    s: &SearchArgs,
    columns: &crate::common::Columns,
) -> CliResult<(pim_core::emitter::Receiver, String)> {
    let source = path.display().to_string();
    let file = crate::common::load_receivers(path, columns)?;
    let rx = file
        .receivers
        .into_iter()
        .find(|r| r.id == id)
        .ok_or_else(|| Error::argument("--receiver", format!("no receiver `{id}` in {source}")))?;
    let width = rx.bandwidth.unwrap_or(s.rx_bw);
    if (heard.freq() - rx.freq).0.abs() > width.0 / 2 + s.tol.0 {
        return Err(Error::argument(
            "--receiver",
            format!(
                "{} MHz lies outside the channel of `{id}` ({} MHz, {} kHz wide)",
                heard.freq().mhz_text(),
                rx.freq.mhz_text(),
                width.khz_text()
            ),
        )
        .into());
    }
    Ok((rx, source))
}

pub fn run(args: Args) -> CliResult {
    let columns = crate::common::Columns::new(&args.input.columns.columns)?;
    let emitters = load_emitters(&args.input.emitters, &columns)?;
    args.input.note_far_reading(emitters.iter().map(|e| e.freq));
    let structures = match &args.structures {
        Some(p) => crate::common::load_structures(p, &columns)?,
        None => Vec::new(),
    };
    // the fix's near field from the frequency the ticket is for, unless given apart
    let mut fix_args = args.fix.clone();
    fix_args.freq.get_or_insert(args.input.freq());
    let (fix, prepared) = fix_from_log(&args.log, None, &fix_args)?;
    // inputs are read under the names given (errors name them so) and named in the
    // ticket relative to its folder
    let named = |p: &Path| pim_io::output::name_for_ticket(p, &args.out);
    let mut log = pim_io::fieldlog::read_field_log(
        &args.log.display().to_string(),
        open(&args.log)?,
        args.fix.track.is_some(),
    )?;
    log.source = named(&args.log);
    let s = &args.search;
    let g = &args.gathered;
    let site = crate::common::budgeted(Site::new(emitters))?;
    let source = args.input.emitters.display().to_string();
    let receiver = match (&g.receivers, &g.receiver) {
        (Some(path), Some(id)) => {
            let (rx, _) = affected_receiver(path, id, &args.input, s, &columns)?;
            Some((rx, named(path)))
        }
        _ => None,
    };
    columns.check()?;
    let rx_bw = receiver
        .as_ref()
        .and_then(|(rx, _)| rx.bandwidth)
        .unwrap_or(s.rx_bw);
    // the named receiver's own width and position; the options only fill its gaps
    let rx_site = receiver
        .as_ref()
        .and_then(|(rx, _)| rx.position)
        .or(s.rx_site());
    let shown = |p: &Option<PathBuf>| p.as_deref().map(named);
    let evidence = FieldEvidence {
        coefficients: g.evidence.coefficient_indices(&site, &source)?,
        logbook: g.evidence.logbook(site.emitters())?,
        logbook_sources: shown(&g.evidence.on_air).zip(shown(&g.evidence.heard)),
        attenuator: g
            .attenuator_readings
            .as_deref()
            .map(|p| {
                attenuator_test(p).map(|t| AttenuatorTest {
                    source: named(p),
                    ..t
                })
            })
            .transpose()?,
        power_steps: g
            .power_steps
            .as_deref()
            .map(|p| {
                power_step_test(p).map(|t| PowerStepTest {
                    source: named(p),
                    ..t
                })
            })
            .transpose()?,
        receiver,
    };
    let inputs = TicketInputs {
        site_name: args.site.clone(),
        prepared: prepared_in(g.utc_offset),
        site,
        emitters_source: named(&args.input.emitters),
        log,
        fix,
        corrections: prepared.corrections,
        structures,
        params: s.params(args.input.freq(), rx_bw),
        model: pim_core::level::LevelModel {
            // levelled with the law the power steps measured, unless told otherwise
            drive_exponent: s.drive_exponent.unwrap_or_else(|| {
                evidence
                    .power_steps
                    .as_ref()
                    .and_then(|t| t.measured_exponent())
                    .unwrap_or(1.0)
            }),
            ..args.calibration.weigh(s.model()?)
        },
        rx_site,
        heard_dbm: args.calibration.heard_dbm,
        limit: args.limit,
        band: None,
        evidence,
        work_order: WorkOrder {
            ticket_id: g.ticket_id.clone(),
            assignee: g.assignee.clone(),
            utc_offset: g.utc_offset,
        },
    };
    let mut inputs = inputs;
    if !args.traces.is_empty() {
        let trace = crate::sweep::load_traces(&args.traces)?;
        let rule = crate::sweep::sweep_rule(
            &inputs.params,
            inputs.placement(),
            inputs.model,
            args.threshold_db,
            None,
            Some(5),
        );
        let sweep = analyse(&trace, &inputs.site, &rule).map_err(crate::common::listing_hint)?;
        let sources: Vec<String> = args.traces.iter().map(|p| named(p)).collect();
        inputs.band = Some(BandTrace {
            trace,
            sweep,
            threshold_db: args.threshold_db,
            sources: sources.join(", "),
        });
    }
    let mut input_paths: Vec<&Path> = vec![args.input.emitters.as_path(), args.log.as_path()];
    input_paths.extend(args.structures.as_deref());
    input_paths.extend(args.fix.track.as_deref());
    input_paths.extend(args.traces.iter().map(PathBuf::as_path));
    input_paths.extend(args.recording.as_deref());
    input_paths.extend(g.evidence.paths());
    input_paths.extend(g.attenuator_readings.as_deref());
    input_paths.extend(g.power_steps.as_deref());
    input_paths.extend(g.receivers.as_deref());
    input_paths.extend(args.search.rx_filter.as_deref());
    // a --columns file is an input too
    input_paths.extend(
        args.input
            .columns
            .columns
            .iter()
            .filter(|v| !v.contains('='))
            .map(Path::new),
    );
    let existing = if args.force {
        Existing::Replace
    } else {
        Existing::Refuse
    };
    let mut extra: Vec<(&str, Vec<u8>)> = Vec::new();
    if let Some(path) = &args.recording {
        let rule = crate::sweep::sweep_rule(
            &inputs.params,
            inputs.placement(),
            inputs.model,
            args.threshold_db,
            None,
            None,
        );
        let emitters = inputs.site.emitters();
        // emitters outside the recording's span follow the on-air log, as in `explain`
        let on_air = match &g.evidence.on_air {
            Some(log) => pim_io::onair::read_on_air(
                &log.display().to_string(),
                crate::common::open(log)?,
                emitters,
                &mut pim_io::onair::Clock::default(),
            )?,
            None => Vec::new(),
        };
        let r = crate::common::explain_recording(path, emitters, &rule, &on_air)?;
        let source = named(path);
        extra.push((
            "waterfall.svg",
            pim_report::recording::waterfall(&r, emitters, &source).into_bytes(),
        ));
        extra.push((
            "recording.txt",
            pim_report::recording::table(&r, emitters, Some(args.limit)).into_bytes(),
        ));
    }
    let summary = write_ticket(&inputs, &args.out, &input_paths, existing, &extra)?;
    let mut out = stdout();
    write!(out, "{summary}")?;
    for (name, _) in &extra {
        writeln!(
            out,
            "  {} (the recording)",
            pim_io::text::shell_word(&args.out.join(name).display().to_string())
        )?;
    }
    finish(out)
}
