//! `pim slope --readings FILE --kind attenuator|power`: the attenuator test (over the air
//! or made in the receiver?) and the power-step test (which coefficient does this emitter
//! carry?), read from the slope of level against step.

use std::io::Write;
use std::path::PathBuf;

use pim_core::slope::{judge, SlopeAnswer, StepKind, Unsettled, Verdict};
use pim_io::read_readings;
use serde::Serialize;

use crate::common::{finish, open, stdout, AnswerFormat, CliResult};
use pim_report::text_table::{Align, TextTable};

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
    /// Readings: CSV with `step_db`, `level_dbm` and an optional `note`.
    #[arg(long, value_name = "FILE")]
    pub readings: PathBuf,
    /// Which test the readings come from.
    #[arg(long, value_enum)]
    pub kind: KindArg,
    /// Power step: the id of the emitter whose power was changed (named in the advice).
    #[arg(long, value_name = "ID")]
    pub emitter: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = AnswerFormat::Table)]
    pub format: AnswerFormat,
}

/// The JSON answer: the slope, its standard error and the number of readings, then the
/// verdict (attenuator) or the coefficient (power step), which are the contract.
#[derive(Serialize)]
struct SlopeJson<'a> {
    slope_db_per_db: f64,
    slope_stderr: Option<f64>,
    n: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    verdict: Option<Verdict>,
    #[serde(skip_serializing_if = "Option::is_none")]
    order: Option<Option<u32>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    coefficient: Option<Option<u32>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    emitter: Option<Option<&'a str>>,
    interval_95: Option<[f64; 2]>,
    kind: StepKind,
    convention: &'static str,
    intercept_dbm: f64,
    residual_sd_db: Option<f64>,
    readings_file: &'a str,
    advice: &'a str,
}

/// Wider ranges of steps are not suggested: the product would sink into the noise floor
/// (attenuator) or the licensee would not agree to the power change (our choice of limit).
const MAX_SUGGESTED_RANGE_DB: f64 = 40.0;

fn r4(x: f64) -> f64 {
    (x * 10_000.0).round() / 10_000.0
}

/// What the slope means, as one sentence for the user (the library returns structure).
fn convention(kind: StepKind) -> &'static str {
    match kind {
        StepKind::Attenuator => "drop of the level per dB of attenuation inserted",
        StepKind::Power => "change of the level per dB of the emitter's power change",
    }
}

fn alternatives(kind: StepKind, boundary: f64) -> String {
    match kind {
        StepKind::Attenuator if boundary < 1.0 => {
            "no response (0) and over the air (1)".to_string()
        }
        StepKind::Attenuator => "over the air (1) and made in the receiver (2 or more)".to_string(),
        StepKind::Power => format!(
            "|k| = {} and |k| = {}",
            (boundary - 0.5).max(0.0),
            boundary + 0.5
        ),
    }
}

/// How many decision boundaries lie inside the interval (lo, hi).
fn boundaries_crossed(kind: StepKind, lo: f64, hi: f64) -> usize {
    let inside = |b: f64| lo <= b && b <= hi;
    match kind {
        StepKind::Attenuator => [0.5, 1.5].into_iter().filter(|&b| inside(b)).count(),
        StepKind::Power => (0..=pim_core::intermod::MAX_ORDER)
            .map(|k| k as f64 - 0.5)
            .filter(|&b| inside(b))
            .count(),
    }
}

/// What the answer means and what to do or measure next; `emitter` is the id of the
/// emitter stepped, when given.
fn advice(a: &SlopeAnswer, emitter: Option<&str>) -> String {
    let id = emitter.unwrap_or("ID");
    let kind = a.kind;
    if let Some(u) = a.unsettled {
        return match u {
            Unsettled::TooFewReadings { .. } => match kind {
                StepKind::Attenuator => "two readings fix a line but not its uncertainty: take three or more, better five, at steps spread over 10 dB or more, each well above the receiver's noise floor.".to_string(),
                StepKind::Power => "two readings fix a line but not its uncertainty: take three or more, better five, at power steps spread over several dB (coordinate every power change with the licensee).".to_string(),
            },
            Unsettled::DoesNotFollow => match kind {
                StepKind::Attenuator => "the level hardly follows the attenuator (under 0.5 dB per dB): check that the attenuator sits in the antenna feed ahead of the receiver, that the readings stay above the receiver's noise floor, and whether the interference enters past the attenuator (the receiver's case, power or audio leads).".to_string(),
                StepKind::Power => "the level rose as the emitter's power was lowered: check the sign of step_db (negative for a reduction) and that every reading is of the same product.".to_string(),
            },
            Unsettled::TooSteep => "the level changes by more than 15.5 dB per dB of this emitter, steeper than any product the search considers: check the readings and that step_db is in dB.".to_string(),
            Unsettled::Straddles { boundary, readings_needed, step_range_needed_db } => {
                let crossed = a.interval.map_or(0, |(lo, hi)| boundaries_crossed(kind, lo, hi));
                let mut s = if crossed > 1 {
                    format!(
                        "the 95 % interval crosses {crossed} decision boundaries; the nearest to the slope is {boundary} dB per dB, between {}",
                        alternatives(kind, boundary)
                    )
                } else {
                    format!(
                        "the 95 % interval crosses {boundary} dB per dB, the boundary between {}",
                        alternatives(kind, boundary)
                    )
                };
                let range = step_range_needed_db.filter(|&r| r <= MAX_SUGGESTED_RANGE_DB);
                match (readings_needed, range) {
                    (None, None) if step_range_needed_db.is_none() => s.push_str(": the slope sits on the boundary. Check that the readings stay above the noise floor (readings near it flatten the slope) and that the meter reads true in dB; measured junctions often rise less steeply than the ideal law (common practice)."),
                    (None, None) => s.push_str(&format!(
                        ": the scatter ({:.2} dB) is too large for more readings of the same kind to settle it. Steady each reading (average several sweeps, read the level on a spectrum analyser rather than an S-meter) and repeat the series.",
                        a.fit.residual_sd_db.unwrap_or(0.0)
                    )),
                    (n, r) => {
                        let mut ways = Vec::new();
                        if let Some(n) = n {
                            ways.push(format!("take about {n} readings over the same range of steps"));
                        }
                        if let Some(r) = r {
                            ways.push(format!(
                                "spread {} readings over about {:.0} dB of steps",
                                a.fit.n, r.ceil()
                            ));
                        }
                        s.push_str(&format!(
                            ": at the present scatter ({:.2} dB), {}",
                            a.fit.residual_sd_db.unwrap_or(0.0),
                            ways.join(", or ")
                        ));
                        s.push_str(match kind {
                            StepKind::Attenuator => ", keeping every reading well above the noise floor.",
                            StepKind::Power => " (coordinate every power change with the licensee).",
                        });
                    }
                }
                s
            }
        };
    }
    match (kind, a.verdict, a.order, a.coefficient) {
        (StepKind::Attenuator, Some(Verdict::External), _, _) => "the product arrives over the air: the junction is outside the receiver. Find it with bearings, and narrow the candidates with power steps.".to_string(),
        (StepKind::Attenuator, Some(Verdict::Internal), order, _) => format!(
            "the product is made in the receiver{}: its front end overloads. Filter the receiver input (a band-pass cavity, or a notch on the strongest emitter); there is no junction to find.",
            order.map(|n| format!(" by a process of order {n}")).unwrap_or_default()
        ),
        (StepKind::Power, _, _, Some(0)) => format!("the level does not follow this emitter: it takes no part in the product (`pim explain --coefficient {id}=0` keeps only the candidates without it)."),
        (StepKind::Power, _, _, Some(k)) => format!(
            "the emitter carries |k| = {k} in the product: `pim explain --coefficient {id}={k}` keeps only the candidates in which it does."
        ),
        _ => String::new(),
    }
}

fn verdict_word(v: Verdict) -> &'static str {
    match v {
        Verdict::External => "external",
        Verdict::Internal => "internal",
        Verdict::Inconclusive => "inconclusive",
    }
}

pub fn run(args: Args) -> CliResult {
    let kind = match args.kind {
        KindArg::Attenuator => StepKind::Attenuator,
        KindArg::Power => StepKind::Power,
    };
    let source = args.readings.display().to_string();
    let file = read_readings(&source, open(&args.readings)?, kind)?;
    if !file.ignored_columns.is_empty() {
        eprintln_safe!(
            "pim: note: {source}: columns not used: {}",
            file.ignored_columns.join(", ")
        );
    }
    let answer = judge(kind, &file.points())?;
    let advice = advice(&answer, args.emitter.as_deref());
    let mut out = stdout();
    match args.format {
        AnswerFormat::Json => {
            let attenuator = kind == StepKind::Attenuator;
            let v = SlopeJson {
                slope_db_per_db: r4(answer.slope_db_per_db),
                slope_stderr: answer.fit.slope_stderr.map(r4),
                n: answer.fit.n,
                verdict: attenuator.then(|| answer.verdict.unwrap_or(Verdict::Inconclusive)),
                order: attenuator.then_some(answer.order),
                coefficient: (!attenuator).then_some(answer.coefficient),
                emitter: (!attenuator).then_some(args.emitter.as_deref()),
                interval_95: answer.interval.map(|(lo, hi)| [r4(lo), r4(hi)]),
                kind,
                convention: convention(kind),
                intercept_dbm: r4(answer.fit.intercept),
                residual_sd_db: answer.fit.residual_sd_db.map(r4),
                readings_file: &source,
                advice: &advice,
            };
            serde_json::to_writer_pretty(&mut out, &v).map_err(std::io::Error::from)?;
            writeln!(out)?;
        }
        AnswerFormat::Table => {
            let title = match kind {
                StepKind::Attenuator => "Attenuator test",
                StepKind::Power => "Power-step test",
            };
            writeln!(
                out,
                "{title}: {} readings from {source}, steps {} to {} dB.\n",
                answer.fit.n,
                file.readings
                    .iter()
                    .map(|r| r.step_db)
                    .fold(f64::INFINITY, f64::min),
                file.readings
                    .iter()
                    .map(|r| r.step_db)
                    .fold(f64::NEG_INFINITY, f64::max),
            )?;
            let mut t = TextTable::new(&[
                ("line", Align::Right),
                ("step dB", Align::Right),
                ("level dBm", Align::Right),
                ("fitted dBm", Align::Right),
                ("residual dB", Align::Right),
                ("note", Align::Left),
            ]);
            for r in &file.readings {
                let fitted = answer.fit.intercept + answer.fit.slope * r.step_db;
                t.push(vec![
                    r.line.to_string(),
                    format!("{}", r.step_db),
                    format!("{:.1}", r.level_dbm),
                    format!("{fitted:.1}"),
                    format!("{:+.2}", r.level_dbm - fitted),
                    r.note.clone().unwrap_or_default(),
                ]);
            }
            write!(out, "{}", t.render())?;
            writeln!(out)?;
            writeln!(
                out,
                "Slope {:.3} dB per dB ({}), standard error {}.",
                answer.slope_db_per_db,
                convention(kind),
                answer
                    .fit
                    .slope_stderr
                    .map(|s| format!("{s:.3}"))
                    .unwrap_or_else(|| "unknown from two readings".to_string())
            )?;
            if let Some((lo, hi)) = answer.interval {
                let df = answer.fit.n - 2;
                writeln!(
                    out,
                    "95 % interval {lo:.3} to {hi:.3} (Student's t, {df} degree{} of freedom).",
                    if df == 1 { "" } else { "s" }
                )?;
            }
            match kind {
                StepKind::Attenuator => writeln!(
                    out,
                    "Verdict: {}.",
                    verdict_word(answer.verdict.unwrap_or(Verdict::Inconclusive))
                )?,
                StepKind::Power => writeln!(
                    out,
                    "Coefficient: {}.",
                    answer
                        .coefficient
                        .map(|k| format!("|k| = {k}"))
                        .unwrap_or_else(|| "inconclusive".to_string())
                )?,
            }
            writeln!(out, "Next: {advice}")?;
        }
    }
    finish(out)
}
