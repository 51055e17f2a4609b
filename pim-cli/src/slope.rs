//! `pim slope --readings FILE --kind attenuator|power`: the attenuator test (over the air
//! or made in the receiver?) and the power-step test (which coefficient does each emitter
//! carry?), read from the slope of level against step. A power-step file with an
//! `emitter` column holds the steps of several emitters; their slopes' ratios give the
//! coefficients and the junction's drive exponent.

use std::io::Write;
use std::path::PathBuf;

use pim_core::freq::Hz;
use pim_core::slope::{judge, judge_power_steps, StepKind};
use pim_core::Error;
use pim_io::read_readings;
use pim_report::slope::{power_steps_json, power_steps_text, single_json, single_text, Carrier};

use crate::common::{finish, open, stdout, AnswerFormat, CliResult};

/// Which test the readings come from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum KindArg {
    /// `step_db` is the attenuation inserted in front of the receiver (0 or more).
    Attenuator,
    /// `step_db` is the change of one emitter's power, negative for a reduction.
    Power,
}

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Readings: CSV with `step_db`, `level_dbm` and an optional `note`; power steps may
    /// add `emitter` to hold the steps of several emitters in one file.
    #[arg(long, value_name = "FILE")]
    pub readings: PathBuf,
    /// Which test the readings come from.
    #[arg(long, value_enum)]
    pub kind: KindArg,
    /// Power step: the id of the emitter whose power was changed (named in the advice);
    /// with an `emitter` column, only that emitter's steps are read.
    #[arg(long, value_name = "ID")]
    pub emitter: Option<String>,
    /// The carrier the steps were taken on (a bare number is MHz): with --emitters, the
    /// advice's `pim explain` command is whole, ready to run.
    #[arg(long, value_name = "FREQ", value_parser = crate::common::frequency_arg, requires = "emitters")]
    pub freq: Option<Hz>,
    /// The emitter file the carrier's candidates come from, named in the advice's `pim
    /// explain` command as given here (not read by `slope`).
    #[arg(long, value_name = "FILE", requires = "freq")]
    pub emitters: Option<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = AnswerFormat::Table)]
    pub format: AnswerFormat,
}

pub fn run(args: Args) -> CliResult {
    let kind = match args.kind {
        KindArg::Attenuator => StepKind::Attenuator,
        KindArg::Power => StepKind::Power,
    };
    let source = args.readings.display().to_string();
    let mut file = read_readings(&source, open(&args.readings)?, kind)?;
    crate::common::note_unused(&source, &file.ignored_columns);
    if let (Some(id), true) = (&args.emitter, file.has_emitters()) {
        file.readings
            .retain(|r| r.emitter.as_deref() == Some(id.as_str()));
        if file.readings.is_empty() {
            return Err(
                Error::argument("--emitter", format!("no steps of `{id}` in {source}")).into(),
            );
        }
    }
    let series = file.series(args.emitter.as_deref().unwrap_or("the emitter"));
    let carrier = args
        .freq
        .zip(args.emitters.as_ref())
        .map(|(freq, e)| Carrier {
            freq,
            emitters: e.display().to_string(),
        });
    let carrier = carrier.as_ref();
    let mut out = stdout();
    if kind == StepKind::Power && series.len() > 1 {
        let answer = judge_power_steps(&series)?;
        let counts: Vec<usize> = series.iter().map(|(_, p)| p.len()).collect();
        match args.format {
            AnswerFormat::Json => writeln!(
                out,
                "{}",
                power_steps_json(&answer, &counts, &source, carrier)
                    .map_err(std::io::Error::from)?
            )?,
            AnswerFormat::Table => write!(
                out,
                "{}",
                power_steps_text(&answer, &counts, &source, carrier)
            )?,
        }
        return finish(out);
    }
    let emitter = match kind {
        StepKind::Power => file
            .readings
            .first()
            .and_then(|r| r.emitter.clone())
            .or(args.emitter.clone()),
        StepKind::Attenuator => None,
    };
    let answer = judge(kind, &file.points())?;
    match args.format {
        AnswerFormat::Json => writeln!(
            out,
            "{}",
            single_json(&answer, emitter.as_deref(), &source, carrier)
                .map_err(std::io::Error::from)?
        )?,
        AnswerFormat::Table => write!(
            out,
            "{}",
            single_text(
                &answer,
                &file.readings,
                emitter.as_deref(),
                &source,
                carrier
            )
        )?,
    }
    finish(out)
}
