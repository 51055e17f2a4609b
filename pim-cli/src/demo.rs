//! `pim demo [--out DIR]`: the whole job on the built-in invented site, Marrow Hill: the
//! files of `field-logs/` are embedded in the binary, so it runs from any directory.

use std::io::Write;
use std::path::{Path, PathBuf};

use field_logs::{
    ATTENUATOR_CSV, EMITTERS_CSV, HEARD, HEARD_CSV, JUNCTION_HEIGHT_M, ON_AIR_CSV,
    PLAN_CANDIDATES_CSV, PLAN_PROTECT_CSV, POWER_STEPS_CSV, RECEIVERS_CSV, RX_SITE, STRUCTURES_CSV,
    TRACE_CSV, WALK_CSV,
};
use pim_core::freq::Hz;
use pim_core::intermod::SearchParams;
use pim_core::level::LevelModel;
use pim_core::Site;
use pim_io::emitters::read_structures;
use pim_io::fieldlog::read_field_log;
use pim_io::output::Existing;
use pim_io::read_emitters;

use crate::common::{finish, stdout, CliResult};
use crate::fix::{fix_from_log, fix_summary, FixArgs};
use pim_core::trace::{analyse, MaxHold};
use pim_io::trace::read_trace_into;
use pim_report::ticket::{AttenuatorTest, BandTrace, PowerStepTest, TicketInputs};

use crate::ticket::{prepared_at, write_ticket};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Directory to write the demo ticket into.
    #[arg(long, value_name = "DIR", default_value = "pim-demo")]
    pub out: PathBuf,
    /// Replace files in DIR that an earlier demo did not write (a folder the demo wrote
    /// itself, marked by its `.pim-demo` file, is replaced without it).
    #[arg(long)]
    pub force: bool,
}

/// The marker the demo leaves in its folder, so that running it again replaces its own
/// files while a user's ticket in the same place needs `--force`.
pub const MARKER: &str = ".pim-demo";
const MARKER_TEXT: &str =
    "Written by `pim demo`: running it again replaces the demo files in this folder.\n";

/// Whether `dir` holds the demo's marker as a plain file (a link does not count).
fn written_by_the_demo(dir: &Path) -> bool {
    std::fs::symlink_metadata(dir.join(MARKER)).is_ok_and(|m| m.file_type().is_file())
}

pub fn run(args: Args) -> CliResult {
    let emitters = read_emitters("emitters.csv", EMITTERS_CSV.as_bytes())?.emitters;
    let structures = read_structures("structures.csv", STRUCTURES_CSV.as_bytes())?;
    // A reflection off the metal shed spoils one bearing of the walk: the robust
    // estimate, every command's default, sets it aside.
    // levels in the near field of the heard frequency are set aside
    let fix_args = FixArgs {
        freq: Some(HEARD),
        ..FixArgs::default()
    };
    let (fix, prepared) = fix_from_log(Path::new("walk.csv"), Some(WALK_CSV), &fix_args)?;
    let log = read_field_log("walk.csv", WALK_CSV.as_bytes(), false)?;
    let mut out = stdout();
    writeln!(
        out,
        "Marrow Hill (an invented site): a carrier on the repeater input, {} MHz, that no licensed transmitter uses.\n",
        HEARD.mhz_text()
    )?;
    write!(
        out,
        "{}",
        fix_summary(&fix, "walk.csv", &prepared.corrections)
    )?;
    writeln!(out)?;
    let power_steps = PowerStepTest::read("power-steps.csv", POWER_STEPS_CSV.as_bytes())?.0;
    // the ticket levels with the law its own power steps measured
    let model = LevelModel {
        drive_exponent: power_steps.measured_exponent().unwrap_or(1.0),
        junction_height_m: JUNCTION_HEIGHT_M,
        ..LevelModel::default()
    };
    let inputs = TicketInputs {
        prepared: prepared_at(),
        site_name: "Marrow Hill".into(),
        site: Site::new(emitters),
        emitters_source: "emitters.csv".into(),
        log,
        fix,
        corrections: prepared.corrections,
        structures,
        params: SearchParams {
            target: HEARD,
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 7,
            max_emitters: 3,
        },
        model,
        rx_site: Some(RX_SITE),
        heard_dbm: None,
        limit: 10,
        band: None,
        evidence: pim_report::ticket::FieldEvidence {
            attenuator: Some(
                AttenuatorTest::read("attenuator-readings.csv", ATTENUATOR_CSV.as_bytes())?.0,
            ),
            power_steps: Some(power_steps),
            ..Default::default()
        },
        work_order: Default::default(),
    };
    let mut inputs = inputs;
    let mut hold = MaxHold::new();
    read_trace_into("trace.csv", TRACE_CSV.as_bytes(), &mut hold)?;
    if let Some(trace) = hold.finish() {
        let rule = crate::sweep::sweep_rule(
            &inputs.params,
            inputs.placement(),
            inputs.model,
            10.0,
            None,
            Some(5),
        );
        let sweep = analyse(&trace, &inputs.site, &rule).map_err(crate::common::listing_hint)?;
        inputs.band = Some(BandTrace {
            trace,
            sweep,
            threshold_db: rule.threshold_db,
            sources: "trace.csv".into(),
        });
    }
    // The recording: the pair's product coming and going with their keying.
    let recording = field_logs::recording::recording_csv();
    let rec_rule = crate::sweep::sweep_rule(
        &inputs.params,
        inputs.placement(),
        inputs.model,
        10.0,
        None,
        None,
    );
    let read =
        |visit: &mut dyn FnMut(&pim_io::recording::RecordedSweep) -> pim_core::Result<()>| {
            field_logs::recording::read(&recording, visit)
        };
    let explained =
        pim_report::recording::explain_with(&read, "recording.csv", &inputs.site, &rec_rule, &[])?;
    let waterfall =
        pim_report::recording::waterfall(&explained, inputs.site.emitters(), "recording.csv");
    let existing = if args.force || written_by_the_demo(&args.out) {
        Existing::Replace
    } else {
        Existing::Refuse
    };
    // The demo's own inputs go beside the ticket, so that its commands can be run again.
    let extra: Vec<(&str, Vec<u8>)> = [
        (MARKER, MARKER_TEXT),
        ("emitters.csv", EMITTERS_CSV),
        ("structures.csv", STRUCTURES_CSV),
        ("walk.csv", WALK_CSV),
        ("trace.csv", TRACE_CSV),
        ("attenuator-readings.csv", ATTENUATOR_CSV),
        ("power-steps.csv", POWER_STEPS_CSV),
        ("receivers.csv", RECEIVERS_CSV),
        ("on-air.csv", ON_AIR_CSV),
        ("heard.csv", HEARD_CSV),
        ("plan-candidates.csv", PLAN_CANDIDATES_CSV),
        ("plan-protect.csv", PLAN_PROTECT_CSV),
    ]
    .iter()
    .map(|(name, text)| (*name, text.as_bytes().to_vec()))
    .chain([
        ("recording.csv", recording.clone().into_bytes()),
        ("waterfall.svg", waterfall.into_bytes()),
    ])
    .collect();
    let summary = write_ticket(&inputs, &args.out, &[], existing, &extra)?;
    write!(out, "{summary}")?;
    write!(
        out,
        "{}",
        pim_report::recording::table(&explained, inputs.site.emitters(), Some(3))
    )?;
    writeln!(
        out,
        "\nIts inputs are in {} too. The commands that redo its work there, and the rest of\nthe job (the walk, the tests, the study, a channel plan), to run on your own files:",
        args.out.display()
    )?;
    for line in field_logs::commands(&args.out) {
        writeln!(out, "  {line}")?;
    }
    finish(out)
}
